//! The across-task and threshold steps of the analysis, run once per decision
//! metric.

use std::collections::BTreeMap;

use super::{
    compared_value, pair_up, paired_interval, AcrossRow, AnalysisSettings, CellKey, MethodSummary,
    Paired, ThresholdRow,
};
use crate::metrics::MetricId;
use crate::run::table::UnitTable;
use crate::stats::across::{across_tasks, ranks};
use crate::stats::paired::Interval;
use crate::stats::thresholds::{summarize, thresholds_within, ThresholdSummary};
use crate::stats::verdict::VerdictCounts;

/// (task, size, method) → repeat → row index of the unit table.
pub type Cells = BTreeMap<CellKey, BTreeMap<usize, usize>>;

/// What the steps read.
pub struct StepInput<'a> {
    pub table: &'a UnitTable,
    pub settings: &'a AnalysisSettings,
    pub tasks: &'a [String],
    pub methods: &'a [String],
    pub sizes: &'a BTreeMap<String, Vec<usize>>,
    pub cells: &'a Cells,
    pub summaries: &'a [MethodSummary],
    pub paired: &'a [Paired],
    pub margins: &'a super::Margins,
}

/// The metrics the decision, the ranks and the thresholds are reported on:
/// the primary metric, then the log loss and the Brier score when the suite
/// scores them (the two proper scoring rules the tool offers; ECE is not a
/// proper score and AUC does not see calibration).
pub fn decision_metrics(primary: Option<MetricId>, available: &[MetricId]) -> Vec<MetricId> {
    let mut out: Vec<MetricId> = primary.into_iter().collect();
    for m in [MetricId::LogLoss, MetricId::Brier] {
        if Some(m) != primary {
            out.push(m);
        }
    }
    out.retain(|m| available.contains(m));
    out
}

/// Mean over the rows (tasks) of each column's rank within its row, ranks
/// as in the Friedman test (1 = lowest, ties share the mean rank).
fn average_ranks(rows: &[Vec<f64>]) -> Vec<f64> {
    let k = rows.first().map_or(0, Vec::len);
    let mut avg = vec![0.0; k];
    for row in rows {
        for (a, r) in avg.iter_mut().zip(ranks(row)) {
            *a += r / rows.len() as f64;
        }
    }
    avg
}

/// Average ranks, Friedman / Iman–Davenport, Nemenyi and Holm–Wilcoxon per
/// calibration size over the tasks with a value for every method.
pub fn across_step(c: &StepInput, metric: MetricId) -> Vec<AcrossRow> {
    let hib = metric.higher_is_better();
    let all_sizes: std::collections::BTreeSet<usize> =
        c.sizes.values().flatten().copied().collect();
    let mut across = Vec::new();
    for &size in &all_sizes {
        let mut rows = Vec::new();
        let mut used = Vec::new();
        for task in c.tasks {
            let vals: Option<Vec<f64>> = c
                .methods
                .iter()
                .map(|m| {
                    c.summaries
                        .iter()
                        .find(|x| {
                            x.task == *task
                                && x.size == size
                                && x.method == *m
                                && x.metric == metric
                        })
                        .and_then(|x| compared_value(metric, x.mean))
                        .filter(|v| v.is_finite())
                        .map(|v| if hib { -v } else { v })
                })
                .collect();
            if let Some(v) = vals {
                rows.push(v);
                used.push(task.clone());
            }
        }
        if used.is_empty() {
            continue;
        }
        let result = across_tasks(&rows, 0.05).map_err(|e| e.to_string());
        let avg_ranks = average_ranks(&rows);
        let best = (0..avg_ranks.len())
            .min_by(|&a, &b| avg_ranks[a].total_cmp(&avg_ranks[b]))
            .unwrap_or(0);
        let vs_reference = c
            .methods
            .iter()
            .filter(|m| **m != c.settings.reference)
            .map(|m| {
                let counts: VerdictCounts = c
                    .paired
                    .iter()
                    .filter(|p| {
                        p.size == size
                            && p.method == *m
                            && p.metric == metric
                            && used.contains(&p.task)
                    })
                    .filter(|p| p.ci_low.is_finite())
                    .map(|p| p.verdict)
                    .collect();
                (m.clone(), counts)
            })
            .collect();
        across.push(AcrossRow {
            size,
            metric,
            tasks: used,
            methods: c.methods.to_vec(),
            avg_ranks,
            best,
            result,
            vs_reference,
        });
    }
    across
}

/// Where paired intervals between any two methods come from.
pub struct PairSource<'a> {
    pub table: &'a UnitTable,
    pub cells: &'a Cells,
    pub settings: &'a AnalysisSettings,
}

/// Per-task threshold rows and the summary over tasks of each pair.
pub type ThresholdOutput = (Vec<ThresholdRow>, Vec<((String, String), ThresholdSummary)>);

/// The paired interval of method `a` − method `b` at one (task, size), turned
/// so that below zero means `a` is better; `None` with fewer than 2 repeats.
pub fn pair_interval(
    c: &PairSource,
    task: &str,
    size: usize,
    a: &str,
    b: &str,
    metric: MetricId,
    mi: usize,
) -> Option<Interval> {
    let (Some(ca), Some(cb)) = (
        c.cells.get(&CellKey::new(task, size, a)),
        c.cells.get(&CellKey::new(task, size, b)),
    ) else {
        return None;
    };
    let pr = pair_up(c.table, ca, cb, mi, metric);
    if pr.diffs.len() < 2 {
        return None;
    }
    let iv = paired_interval(c.table, &pr, metric, c.settings);
    Some(if metric.higher_is_better() {
        Interval {
            mean: -iv.mean,
            low: -iv.high,
            high: -iv.low,
            ..iv
        }
    } else {
        iv
    })
}

/// Data-size thresholds of every (flexible, parametric) pair on every task.
pub fn threshold_step(c: &StepInput, metric: MetricId, mi: usize) -> ThresholdOutput {
    pair_thresholds(c, metric, mi, &c.settings.pairs)
}

/// Every method of the suite against the raw scores (`raw`): the pairs
/// whose thresholds say from which size calibrating pays off on a task.
pub fn raw_pairs(methods: &[String], raw: &str) -> Vec<(String, String)> {
    methods
        .iter()
        .filter(|m| *m != raw)
        .map(|m| (m.clone(), raw.to_string()))
        .collect()
}

/// Data-size thresholds of the given (first, second) method pairs on every
/// task: from which size the first is reliably better than the second.
pub fn pair_thresholds(
    c: &StepInput,
    metric: MetricId,
    mi: usize,
    pairs: &[(String, String)],
) -> ThresholdOutput {
    let mut thresholds = Vec::new();
    let mut summaries = Vec::new();
    let src = PairSource {
        table: c.table,
        cells: c.cells,
        settings: c.settings,
    };
    for (flex, para) in pairs {
        let mut per_task = Vec::new();
        for task in c.tasks {
            let mut pts = Vec::new();
            let mut ivs = Vec::new();
            for &size in &c.sizes[task] {
                let Some(iv) = pair_interval(&src, task, size, flex, para, metric, mi) else {
                    continue;
                };
                pts.push((size, iv.mean, iv.low, iv.high));
                if iv.low.is_finite() {
                    let margin = super::margin_of(c.margins, task, size, metric);
                    ivs.push((size, iv, margin));
                }
            }
            if pts.is_empty() {
                continue;
            }
            let result = thresholds_within(&ivs).map_err(|e| e.to_string());
            if let Ok(t) = &result {
                per_task.push(t.clone());
            }
            thresholds.push(ThresholdRow {
                task: task.clone(),
                flexible: flex.clone(),
                parametric: para.clone(),
                metric,
                points: pts,
                result,
            });
        }
        summaries.push(((flex.clone(), para.clone()), summarize(&per_task)));
    }
    (thresholds, summaries)
}
