//! The `[[model]]` tables: the base models of open-data tasks.
//!
//! Like a method table, a model table is converted by hand so that its `id`
//! is taken first and every later message names the model.

use std::collections::BTreeMap;

use toml::Spanned;

use super::{take_id, Ctx, SuiteError};
use crate::models::ModelSpec;

/// The suite's base models, in suite order, looked up by id.
#[derive(Debug, Default)]
pub(super) struct Models {
    list: Vec<(String, ModelSpec)>,
    index: BTreeMap<String, usize>,
}

impl Models {
    /// The model with this id.
    pub fn get(&self, id: &str) -> Option<&ModelSpec> {
        self.index.get(id).map(|&i| &self.list[i].1)
    }

    /// Every id, in suite order, comma-separated (for messages).
    pub fn ids(&self) -> String {
        self.list
            .iter()
            .map(|(m, _)| m.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    }
}

/// Read and check the `[[model]]` tables: an id each ([`take_id`]), a
/// [`ModelSpec`] that passes [`ModelSpec::validate`], no id twice.
pub(super) fn read_models(ctx: &Ctx, raw: &[Spanned<toml::Table>]) -> Result<Models, SuiteError> {
    let mut models = Models::default();
    for (i, m) in raw.iter().enumerate() {
        let mut table = m.get_ref().clone();
        let label = format!("model #{}", i + 1);
        let id = take_id(ctx, &mut table, m.span(), &label)?;
        let spec: ModelSpec =
            toml::Value::Table(table)
                .try_into()
                .map_err(|e: toml::de::Error| {
                    ctx.err(
                        m.span(),
                        &format!("model `{id}`"),
                        e.message().trim().to_string(),
                    )
                })?;
        spec.validate()
            .map_err(|e| ctx.err(m.span(), &format!("model `{id}`"), e.to_string()))?;
        if models.index.contains_key(&id) {
            return Err(ctx.err(
                m.span(),
                &format!("model `{id}`"),
                "this id is used by another model",
            ));
        }
        models.index.insert(id.clone(), models.list.len());
        models.list.push((id, spec));
    }
    Ok(models)
}
