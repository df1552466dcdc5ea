//! Evidence across datasets for the decision: the team default against every
//! other method at each calibration size by the Bayesian signed-rank test
//! with a region of practical equivalence ([`crate::stats::bayes`]), with the
//! dataset — not the task — as the unit.
//!
//! Tasks `<dataset>.<model>` that share a dataset are not independent cases,
//! so the tests across tasks (Friedman, Nemenyi, Wilcoxon) are optimistic.
//! Here each dataset contributes one difference:
//!
//! * per task, the mean over the repeats where both methods have a value of
//!   (default − competitor) of the compared metric, turned so that below
//!   zero means the default is better (as the paired intervals);
//! * per dataset, D = the mean of these over the dataset's tasks that enter
//!   the comparison across tasks at this size (every method has a value);
//! * the rope: each dataset's own margin δ = the mean over the same tasks of
//!   the task's equivalence margin (the suite's `[decision]` margin: a share
//!   of the reference method's mean loss, or the metric's absolute margin).
//!   The test takes one rope for all cases, so each D is divided by its δ
//!   and the rope is 1: a dataset's difference counts in units of its own
//!   margin. With an absolute margin this is the same as D with rope δ. With
//!   a margin of 0 the raw D enter with no rope (better / worse only).
//!
//! For "calibrate at all?" the same test runs on the tasks of one base model
//! at a time (`<dataset>.<model>` with one model): there every dataset
//! gives one task, the cases are independent without averaging, and a base
//! model whose raw scores are far off (naive Bayes under log loss) cannot
//! decide the answer for the others.
//!
//! A posterior probability of at least [`DECISIVE`] (0.95) decides; with
//! one dataset the test cannot reach it (the prior's pseudo-observation
//! keeps P(better) near 0.84 at most), and the decision then reads the
//! dataset's own paired intervals instead ([`super::decision`]).
//!
//! Prior strength 0.5 at zero and 50 000 posterior samples (the paper's and
//! `baycomp`'s defaults); the seed is fixed and derived from the metric, the
//! size, the two method names and the base model, so a report is
//! reproducible byte for byte.

use std::collections::BTreeMap;

use super::steps::Cells;
use super::{margin_of, pair_up, task_parts, CellKey, Margins};
use crate::metrics::MetricId;
use crate::run::table::UnitTable;
use crate::split::{fnv1a, mix};
use crate::stats::bayes::{signed_rank, SignedRank, DEFAULT_PRIOR, DEFAULT_SAMPLES};

/// A posterior probability at or above this decides (the threshold Benavoli
/// et al. 2017 use for a decision); the report marks it in bold.
pub const DECISIVE: f64 = 0.95;

/// Domain tag of the posterior sampling seeds ("bsrt").
const TAG_BAYES: u64 = 0x6273_7274;

/// The default against one competitor at one size, datasets as units.
#[derive(Debug, Clone, PartialEq)]
pub struct DatasetEvidence {
    pub metric: MetricId,
    pub size: usize,
    pub default: String,
    pub competitor: String,
    /// Datasets that entered (one difference each).
    pub datasets: usize,
    /// Tasks behind them.
    pub tasks: usize,
    /// The base model whose tasks alone entered (`None`: every task).
    pub group: Option<String>,
    /// True when each dataset's difference was divided by its margin (rope 1).
    pub scaled: bool,
    pub result: Result<SignedRank, String>,
}

impl DatasetEvidence {
    /// The posterior says the first method is better with at least
    /// [`DECISIVE`] probability.
    pub fn first_better(&self) -> bool {
        self.result.as_ref().is_ok_and(|r| r.better >= DECISIVE)
    }

    /// The posterior says the second method is better (the first worse).
    pub fn second_better(&self) -> bool {
        self.result.as_ref().is_ok_and(|r| r.worse >= DECISIVE)
    }
}

/// The seed of one comparison.
pub fn evidence_seed(metric: MetricId, size: usize, default: &str, competitor: &str) -> u64 {
    mix(
        TAG_BAYES,
        &[
            fnv1a(metric.as_str().as_bytes()),
            size as u64,
            fnv1a(default.as_bytes()),
            fnv1a(competitor.as_bytes()),
        ],
    )
}

/// Differences (and margins) per dataset → (scaled differences, rope, scaled).
/// Errors name the dataset whose margin is missing.
pub fn dataset_cases(per_dataset: &[(String, f64, f64)]) -> Result<(Vec<f64>, f64, bool), String> {
    if per_dataset.iter().all(|(_, _, m)| *m == 0.0) {
        return Ok((per_dataset.iter().map(|(_, d, _)| *d).collect(), 0.0, false));
    }
    let mut z = Vec::with_capacity(per_dataset.len());
    for (name, d, m) in per_dataset {
        if !(m.is_finite() && *m > 0.0) {
            return Err(format!(
                "dataset `{name}` has no positive equivalence margin (got {m}): the reference method has no values there"
            ));
        }
        z.push(d / m);
    }
    Ok((z, 1.0, true))
}

/// What a comparison reads.
pub struct EvidenceSource<'a> {
    pub table: &'a UnitTable,
    pub cells: &'a Cells,
    pub margins: &'a Margins,
}

/// `a` against `b` on `metric` at calibration size `size` over `tasks`
/// (the tasks of one size's comparison across tasks, or the part of them
/// that one base model gave, named by `group`), datasets as units.
pub fn compare(
    src: &EvidenceSource,
    metric: MetricId,
    size: usize,
    (a, b): (&str, &str),
    tasks: &[String],
    group: Option<&str>,
) -> DatasetEvidence {
    let EvidenceSource {
        table,
        cells,
        margins,
    } = *src;
    let sign = if metric.higher_is_better() { -1.0 } else { 1.0 };
    let Some(mi) = table.metric_index(metric) else {
        return DatasetEvidence {
            metric,
            size,
            default: a.to_string(),
            competitor: b.to_string(),
            group: group.map(str::to_string),
            datasets: 0,
            tasks: 0,
            scaled: false,
            result: Err(format!("no metric `{metric}` in the results")),
        };
    };
    // dataset → (Σ task differences, Σ task margins, tasks), first-seen order.
    let mut order: Vec<String> = Vec::new();
    let mut sums: BTreeMap<String, (f64, f64, usize)> = BTreeMap::new();
    for task in tasks {
        let key = |m: &str| CellKey::new(task, size, m);
        let (Some(ca), Some(cb)) = (cells.get(&key(a)), cells.get(&key(b))) else {
            continue;
        };
        let pr = pair_up(table, ca, cb, mi, metric);
        if pr.diffs.is_empty() {
            continue;
        }
        let d = sign * pr.diffs.iter().sum::<f64>() / pr.diffs.len() as f64;
        let margin = margin_of(margins, task, size, metric);
        let ds = task_parts(task).0.to_string();
        if !sums.contains_key(&ds) {
            order.push(ds.clone());
        }
        let e = sums.entry(ds).or_insert((0.0, 0.0, 0));
        e.0 += d;
        e.1 += margin;
        e.2 += 1;
    }
    let per_dataset: Vec<(String, f64, f64)> = order
        .iter()
        .map(|ds| {
            let (d, m, k) = sums[ds];
            (ds.clone(), d / k as f64, m / k as f64)
        })
        .collect();
    let n_tasks = sums.values().map(|s| s.2).sum();
    let mut seed = evidence_seed(metric, size, a, b);
    if let Some(g) = group {
        seed = mix(seed, &[fnv1a(g.as_bytes())]);
    }
    let (result, scaled) = match dataset_cases(&per_dataset) {
        Ok((z, rope, scaled)) => (
            signed_rank(&z, rope, DEFAULT_PRIOR, DEFAULT_SAMPLES, seed).map_err(|e| e.to_string()),
            scaled,
        ),
        Err(e) => (Err(e), false),
    };
    DatasetEvidence {
        metric,
        size,
        default: a.to_string(),
        competitor: b.to_string(),
        group: group.map(str::to_string),
        datasets: per_dataset.len(),
        tasks: n_tasks,
        scaled,
        result,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn relative_margins_scale_each_dataset_and_zero_margins_drop_the_rope() {
        let (z, rope, scaled) =
            dataset_cases(&[("a".into(), -0.02, 0.01), ("b".into(), 0.003, 0.002)]).unwrap();
        assert_eq!(rope, 1.0);
        assert!(scaled);
        assert!((z[0] + 2.0).abs() < 1e-12 && (z[1] - 1.5).abs() < 1e-12);
        let (z, rope, scaled) =
            dataset_cases(&[("a".into(), -0.02, 0.0), ("b".into(), 0.003, 0.0)]).unwrap();
        assert_eq!((rope, scaled), (0.0, false));
        assert_eq!(z, vec![-0.02, 0.003]);
        let e =
            dataset_cases(&[("a".into(), -0.02, 0.01), ("b".into(), 0.003, f64::NAN)]).unwrap_err();
        assert!(e.contains("`b`"), "{e}");
    }

    #[test]
    fn seeds_differ_by_comparison() {
        let a = evidence_seed(MetricId::LogLoss, 100, "beta", "platt");
        assert_eq!(a, evidence_seed(MetricId::LogLoss, 100, "beta", "platt"));
        assert_ne!(a, evidence_seed(MetricId::LogLoss, 200, "beta", "platt"));
        assert_ne!(a, evidence_seed(MetricId::LogLoss, 100, "beta", "identity"));
        assert_ne!(a, evidence_seed(MetricId::Brier, 100, "beta", "platt"));
    }
}
