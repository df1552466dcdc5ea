//! The decision section's evidence with the dataset as unit: the table of
//! the Bayesian signed-rank test (default against each other method, by
//! calibration size) that [`crate::analysis::evidence`] computed.

use super::document::Block;
use super::Table;
use crate::analysis::Analysis;
use crate::stats::bayes::{DEFAULT_PRIOR, DEFAULT_SAMPLES};

/// A posterior probability at or above this is marked in bold (the
/// threshold Benavoli et al. 2017 use for a decision).
const DECISIVE: f64 = 0.95;

/// The table (empty when the analysis has no such evidence).
pub fn dataset_evidence_blocks(a: &Analysis) -> Vec<Block> {
    let ev = &a.dataset_evidence;
    let Some(d) = a.decisions.first() else {
        return Vec::new();
    };
    if ev.is_empty() {
        return Vec::new();
    }
    let mut sizes: Vec<usize> = ev.iter().map(|e| e.size).collect();
    sizes.dedup();
    let competitors: Vec<&String> = d
        .standing
        .iter()
        .map(|(m, _)| m)
        .filter(|m| ev.iter().any(|e| &e.competitor == *m))
        .collect();
    let mut t = Table {
        title: format!(
            "Bayesian signed-rank test with rope, unit = dataset ({})",
            d.metric
        ),
        header: std::iter::once(format!("`{}` against", d.default))
            .chain(sizes.iter().map(|n| format!("n = {n}")))
            .collect(),
        rows: Vec::new(),
        notes: Vec::new(),
    };
    for c in &competitors {
        let mut row = vec![format!("`{c}`")];
        for &n in &sizes {
            let cell = match ev.iter().find(|e| e.size == n && &e.competitor == *c) {
                Some(e) => match &e.result {
                    Ok(r) => {
                        let s = format!("{:.2} / {:.2} / {:.2}", r.better, r.equivalent, r.worse);
                        if [r.better, r.equivalent, r.worse]
                            .iter()
                            .any(|&p| p >= DECISIVE)
                        {
                            format!("**{s}**")
                        } else {
                            s
                        }
                    }
                    Err(_) => "–".into(),
                },
                None => "–".into(),
            };
            row.push(cell);
        }
        t.rows.push(row);
    }
    let mut ds_row = vec!["datasets (tasks)".to_string()];
    for &n in &sizes {
        ds_row.push(
            ev.iter()
                .find(|e| e.size == n)
                .map(|e| format!("{} ({})", e.datasets, e.tasks))
                .unwrap_or_else(|| "–".into()),
        );
    }
    t.rows.push(ds_row);
    let scaled = ev.iter().any(|e| e.scaled);
    let identity = competitors.iter().any(|c| c.as_str() == "identity");
    t.notes.push(format!(
        "Benavoli, Corani, Demšar & Zaffalon (2017, JMLR 18, §5). Unit: the dataset — each dataset gives one difference, the mean over its tasks (base models) of the per-task mean {} difference `{}` − method over repeats, so tasks that share a dataset count once. Region of practical equivalence (rope): {}. Each cell, P(better) / P(equiv.) / P(worse): the posterior probability that `{}` is better, practically equivalent, or worse (the share of {} Dirichlet-process posterior samples, prior strength {} at zero, in which that region is the most probable; fixed seed); bold: one of them reaches {DECISIVE}.{}",
        d.metric,
        d.default,
        if scaled {
            "each dataset's own margin δ (the mean over its tasks of the task's margin, see the legend): differences are divided by δ and the rope is ±1"
        } else {
            "none (the margin is 0): better or worse only"
        },
        d.default,
        DEFAULT_SAMPLES,
        DEFAULT_PRIOR,
        if identity {
            " `identity` is the uncalibrated score."
        } else {
            ""
        }
    ));
    t.notes.push("Unlike the ranks, the Wilcoxon ties and the critical differences above, which treat the tasks as independent cases, this test does not count a dataset once per base model; with few datasets the prior's pseudo-observation at zero weighs more.".into());
    t.notes.push("A dataset's difference is a mean of its base models' loss differences, so one base model with far larger losses (for example raw scores of exactly 0 or 1 under log loss) can decide its dataset's value on its own; where this table and the per-task marks disagree — the default against the raw scores is the usual case — read both: this table says which way the dataset-level average goes, the per-task marks how many base models gain.".into());
    vec![Block::Table(t)]
}
