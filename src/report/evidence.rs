//! The decision's evidence with the dataset as unit, as tables: the team
//! default against each other method by calibration size, and the method
//! recommended at each size against the raw scores per base model
//! ([`crate::analysis::evidence`] computes the tests,
//! [`crate::analysis::decision`] what they decide).

use super::document::Block;
use super::summary::posterior_cell;
use super::Table;
use crate::analysis::{Decision, DECISIVE};
use crate::stats::bayes::{DEFAULT_PRIOR, DEFAULT_SAMPLES};

/// The test's description, shared by both tables' notes.
fn test_note(d: &Decision, first: &str, rope_scaled: bool) -> String {
    format!(
        "Benavoli, Corani, Demšar & Zaffalon (2017, JMLR 18, §5). Unit: the dataset — each dataset gives one difference, the mean over its tasks of the per-task mean {} difference {first} − method over repeats. Region of practical equivalence (rope): {}. Each cell, P(better) / P(equiv.) / P(worse): the posterior probability that {first} is better, practically equivalent, or worse (the share of {} Dirichlet-process posterior samples, prior strength {} at zero, in which that region is the most probable; fixed seed); bold: one of them reaches {DECISIVE}, which decides. With one dataset the test cannot reach {DECISIVE}; the cell then gives the dataset's paired-interval reading (✓ better / ✗ worse on every task of it, – otherwise).",
        d.metric,
        if rope_scaled {
            "each dataset's own margin δ (the mean over its tasks of the task's margin, see the legend): differences are divided by δ and the rope is ±1"
        } else {
            "none (the margin is 0): better or worse only"
        },
        DEFAULT_SAMPLES,
        DEFAULT_PRIOR,
    )
}

/// The default against every other method at every size.
pub fn versus_blocks(d: &Decision) -> Vec<Block> {
    if d.per_size.iter().all(|v| v.versus.is_empty()) {
        return Vec::new();
    }
    let mut t = Table {
        title: format!(
            "Bayesian signed-rank test with rope, unit = dataset ({})",
            d.metric
        ),
        header: std::iter::once(format!("`{}` against", d.default))
            .chain(d.per_size.iter().map(|v| format!("n = {}", v.size)))
            .collect(),
        rows: Vec::new(),
        notes: Vec::new(),
    };
    for (m, _) in d.standing.iter().filter(|(m, _)| *m != d.default) {
        let mut row = vec![format!("`{m}`")];
        for v in &d.per_size {
            row.push(
                v.against(m)
                    .map(posterior_cell)
                    .unwrap_or_else(|| "–".into()),
            );
        }
        t.rows.push(row);
    }
    let mut ds_row = vec!["datasets (tasks)".to_string()];
    for v in &d.per_size {
        ds_row.push(format!("{} ({})", v.datasets, v.tasks));
    }
    t.rows.push(ds_row);
    let scaled = d
        .per_size
        .iter()
        .flat_map(|v| &v.versus)
        .any(|(_, e)| e.test.scaled);
    t.notes
        .push(test_note(d, &format!("`{}`", d.default), scaled));
    t.notes.push(format!(
        "Tasks that share a dataset count once, unlike the ranks, the Friedman test and the critical differences, which treat tasks as independent cases. A dataset's difference is a mean over its base models, so one base model with far larger losses (raw scores of exactly 0 or 1 under log loss, say) can decide its dataset's value; that is why the question \"calibrate at all?\" is asked per base model (next table).{}",
        if d.raw.is_some() {
            " The row of the raw scores is shown for reference; it does not decide."
        } else {
            ""
        }
    ));
    vec![Block::Table(t)]
}

/// The method recommended at each size against the raw scores, per base
/// model; `brief`: the answers alone (the terminal).
pub fn raw_blocks(d: &Decision, brief: bool) -> Vec<Block> {
    let Some(raw) = d.raw.as_ref() else {
        return Vec::new();
    };
    let mut models: Vec<&str> = Vec::new();
    for v in &d.per_size {
        for g in v.raw.iter().flat_map(|r| &r.groups) {
            if !models.contains(&g.model.as_str()) {
                models.push(&g.model);
            }
        }
    }
    if models.is_empty() {
        return Vec::new();
    }
    let mut t = Table {
        title: format!(
            "Calibrate at all? Recommended method against the raw scores `{raw}`, per base model ({})",
            d.metric
        ),
        header: std::iter::once("base model".to_string())
            .chain(d.per_size.iter().map(|v| format!("n = {}", v.size)))
            .collect(),
        rows: Vec::new(),
        notes: Vec::new(),
    };
    let mut tested = vec!["method tested".to_string()];
    for v in &d.per_size {
        tested.push(if v.recommended.is_empty() || v.recommended == *raw {
            "–".into()
        } else {
            format!("`{}`", v.recommended)
        });
    }
    t.rows.push(tested);
    let mut scaled = false;
    for m in &models {
        let mut row = vec![if m.is_empty() {
            "(no base model)".to_string()
        } else {
            format!("`{m}`")
        }];
        for v in &d.per_size {
            let g = v
                .raw
                .as_ref()
                .and_then(|r| r.groups.iter().find(|g| g.model == *m));
            row.push(match g {
                None => "–".into(),
                Some(g) => {
                    let word = if g.keep_raw() { "raw" } else { "calibrate" };
                    match &g.evidence {
                        None => word.into(),
                        Some(_) if brief => word.into(),
                        Some(e) => {
                            scaled |= e.test.scaled;
                            format!("{word}: {}", posterior_cell(e))
                        }
                    }
                }
            });
        }
        t.rows.push(row);
    }
    if brief {
        t.notes.push(format!("Each cell: \"calibrate\" when the method tested is reliably better than the raw scores across that base model's datasets (Bayesian signed-rank test, P ≥ {DECISIVE}), else \"raw\"; the posterior probabilities are in summary.md."));
        return vec![Block::Table(t)];
    }
    t.notes.push(format!(
        "Each cell: the answer for that base model at that size — \"calibrate\" when the method recommended there (row \"method tested\") is reliably better than the raw scores across the model's datasets, else \"raw\" — and the test behind it. {}",
        test_note(d, "the method tested", scaled)
    ));
    t.notes.push("Within one base model every dataset gives one task, so no averaging over base models enters: a base model whose raw scores are far off cannot decide the answer for the others.".into());
    vec![Block::Table(t)]
}
