//! The `[[method]]` tables and the `threshold_pairs` key.
//!
//! A method table is converted by hand rather than by a typed field of the
//! suite: its `id` is taken first, so every later message names the method
//! (`method `iso`: unknown field …`) and a bad id points at its own line.

use std::collections::BTreeSet;
use std::ops::Range;
use std::path::Path;

use serde::Deserialize;
use toml::Spanned;

use super::{read_text, take_id, toml_err, Ctx, MethodEntry, SuiteError, MAX_DEFAULT_PAIRS};
use crate::calibrate::MethodSpec;

/// The `[[method]]` tables of a suite, each with its id taken and checked and
/// its parameters read into a [`MethodSpec`], with the span of its table.
pub(super) fn read_methods(
    ctx: &Ctx,
    raw: &[Spanned<toml::Table>],
) -> Result<Vec<(MethodEntry, Range<usize>)>, SuiteError> {
    if raw.is_empty() {
        return Err(ctx.err(0..0, "method", "the suite lists no [[method]] tables"));
    }
    let mut methods: Vec<(MethodEntry, Range<usize>)> = Vec::new();
    // Ids seen so far, for the duplicate check (a set: suites of many
    // methods are checked in n log n, not by a scan per method).
    let mut method_ids: BTreeSet<String> = BTreeSet::new();
    for (i, m) in raw.iter().enumerate() {
        let mut table = m.get_ref().clone();
        let label = format!("method #{}", i + 1);
        let id = take_id(ctx, &mut table, m.span(), &label)?;
        if !table.contains_key("kind") {
            return Err(ctx.err(
                m.span(),
                &format!("method `{id}`"),
                "missing key `kind` (which method)",
            ));
        }
        let spec: MethodSpec =
            toml::Value::Table(table)
                .try_into()
                .map_err(|e: toml::de::Error| {
                    ctx.err(
                        m.span(),
                        &format!("method `{id}`"),
                        e.message().trim().to_string(),
                    )
                })?;
        if !method_ids.insert(id.clone()) {
            return Err(ctx.err(
                m.span(),
                &format!("method `{id}`"),
                "this id is used by another method",
            ));
        }
        methods.push((MethodEntry { id, spec }, m.span()));
    }
    Ok(methods)
}

/// Only the `[[method]]` tables of a suite file, checked as [`super::load`]
/// checks them; the rest of the file must be TOML but is not validated (its
/// data are not read). `plumbline fit --suite` names a method by its id here.
pub fn load_methods(path: &Path) -> Result<Vec<MethodEntry>, SuiteError> {
    let (text, _) = read_text(path)?;
    parse_methods(&text, &path.display().to_string())
}

/// [`load_methods`] on suite text; `file` names it in messages.
pub fn parse_methods(text: &str, file: &str) -> Result<Vec<MethodEntry>, SuiteError> {
    #[derive(Deserialize)]
    struct RawMethods {
        #[serde(default)]
        method: Vec<Spanned<toml::Table>>,
    }
    let ctx = Ctx {
        file: file.to_string(),
        text,
    };
    let raw: RawMethods = toml::from_str(text).map_err(|e| toml_err(&ctx, &e, "(suite)"))?;
    Ok(read_methods(&ctx, &raw.method)?
        .into_iter()
        .map(|(m, _)| m)
        .collect())
}

/// Default threshold pairs: every flexible method against every parametric
/// (Platt or beta) one ([`MethodSpec::is_flexible`],
/// [`MethodSpec::is_parametric`]).
pub fn default_pairs(methods: &[MethodEntry]) -> Vec<(String, String)> {
    let mut out = Vec::new();
    for f in methods.iter().filter(|m| m.spec.is_flexible()) {
        for p in methods.iter().filter(|m| m.spec.is_parametric()) {
            out.push((f.id.clone(), p.id.clone()));
        }
    }
    out
}

/// The `threshold_pairs` key: each pair names two different methods of the
/// suite. Without it, [`default_pairs`] (at most [`MAX_DEFAULT_PAIRS`]); a
/// protocol study (`study`) reports no thresholds.
pub(super) fn read_pairs(
    ctx: &Ctx,
    raw: Option<&Spanned<Vec<(String, String)>>>,
    study: bool,
    methods: &[MethodEntry],
    method_ids: &BTreeSet<String>,
) -> Result<Vec<(String, String)>, SuiteError> {
    match raw {
        None if study => Ok(Vec::new()),
        None => {
            let flexible = methods.iter().filter(|m| m.spec.is_flexible()).count();
            let parametric = methods.iter().filter(|m| m.spec.is_parametric()).count();
            if flexible * parametric > MAX_DEFAULT_PAIRS {
                return Err(ctx.err(
                    0..0,
                    "threshold_pairs",
                    format!(
                        "{flexible} flexible and {parametric} Platt or beta methods make {} default threshold pairs (more than {MAX_DEFAULT_PAIRS}); list the pairs to report in `threshold_pairs`",
                        flexible * parametric
                    ),
                ));
            }
            Ok(default_pairs(methods))
        }
        Some(p) => {
            for (a, b) in p.get_ref() {
                for id in [a, b] {
                    if !method_ids.contains(id) {
                        return Err(ctx.err(
                            p.span(),
                            "threshold_pairs",
                            format!("`{id}` is not one of the suite's methods"),
                        ));
                    }
                }
                if a == b {
                    return Err(ctx.err(
                        p.span(),
                        "threshold_pairs",
                        format!("[\"{a}\", \"{b}\"] compares a method with itself"),
                    ));
                }
            }
            Ok(p.get_ref().clone())
        }
    }
}
