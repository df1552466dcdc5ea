//! Analysis: turns the unit table into plain result structs — per-method
//! summaries and paired comparisons against the reference method — by calling
//! the statistics. Reports only format what this module returns.

use std::collections::BTreeMap;

pub mod decision;
pub mod evidence;
pub mod gaps;
pub mod steps;

pub use decision::{
    decide, task_parts, DecidedBy, Decision, DecisionInput, Evidence, FallbackShare, RawAtSize,
    RawGroup, Recommendation, SizeVerdict,
};
pub use evidence::{DatasetEvidence, DECISIVE};
pub use steps::{
    across_step, decision_metrics, pair_thresholds, raw_pairs, threshold_step, StepInput,
};

use crate::metrics::{Goal, MetricId};
use crate::run::table::{UnitRow, UnitTable};
use crate::run::UnitStatus;
use crate::stats::across::AcrossTasks;
use crate::stats::paired::{
    interval, Interval, IntervalKind, PairedInput, EXTREME_ROWS, ROW_SUMMARY_NAMES,
};
use crate::stats::thresholds::{ThresholdSummary, Thresholds};
use crate::stats::verdict::{Verdict, VerdictCounts};

/// Settings the analysis needs (recorded in `manifest.json`, or given to
/// `plumbline report` as flags).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct AnalysisSettings {
    pub reference: String,
    pub primary_metric: String,
    pub confidence: f64,
    pub interval: String,
    /// (flexible, parametric) method pairs whose data-size thresholds are
    /// reported, e.g. (isotonic, platt).
    #[serde(default)]
    pub pairs: Vec<(String, String)>,
    /// Equivalence margin as a share of the reference method's mean value of
    /// the compared metric at each task and size (the suite's
    /// `[decision] margin`; results written before it existed read as the
    /// default).
    #[serde(default = "default_margin")]
    pub margin: f64,
    /// Absolute equivalence margins by metric id, in the metric's units;
    /// they replace the relative margin for their metric.
    #[serde(default)]
    pub absolute_margins: BTreeMap<String, f64>,
    /// The method that passes the scores through unchanged (kind
    /// `identity`), when the suite has one: the decision asks whether
    /// calibrating pays against it.
    #[serde(default)]
    pub raw_method: Option<String>,
    /// Largest share of a method's draws at a calibration size (over the
    /// tasks) that may have fallen back to the base rate for the method to
    /// be recommended at that size (the suite's `[decision] max_fallback`).
    #[serde(default = "default_max_fallback")]
    pub max_fallback: f64,
    /// The suite's `[metric_settings] decision_threshold` when its metrics
    /// include one that uses it (`threshold_cost`, `net_benefit`), so the
    /// report can say at which threshold they were scored; absent (and not
    /// written) otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub decision_threshold: Option<f64>,
    /// Methods whose map can predict a probability of exactly 0 or 1
    /// ([`crate::calibrate::MethodSpec::can_predict_zero_one`]): their
    /// log-loss intervals are marked approximate. Empty (and not written)
    /// when there are none, and in results written before the field existed.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub zero_one_methods: Vec<String>,
}

/// The default relative equivalence margin: 1% of the reference's mean loss.
pub const DEFAULT_MARGIN: f64 = 0.01;

/// Below this many rows of the rarer class in the average calibration sample
/// a paired interval is flagged as approximate. In the coverage study
/// (`docs/statistics.md`, "Rare classes") the cells with 1.5–6 expected rows
/// of the rarer class fell below 93% coverage in about a quarter of cases,
/// against a few percent from 15 rows up; 10 is the events-per-variable rule
/// of thumb of logistic modelling (Peduzzi, Concato, Kemper, Holford &
/// Feinstein 1996, J. Clin. Epidemiol. 49), which sits between the two.
pub const RARE_CLASS_ROWS: f64 = 10.0;

/// The default `[decision] max_fallback`: the share above which the Fallback
/// fits section flags a cell as large (`report::fallback::LARGE_SHARE`).
pub const DEFAULT_MAX_FALLBACK: f64 = 0.10;

fn default_margin() -> f64 {
    DEFAULT_MARGIN
}

fn default_max_fallback() -> f64 {
    DEFAULT_MAX_FALLBACK
}

impl AnalysisSettings {
    /// The equivalence margin δ of `metric` where the reference method's mean
    /// compared value is `reference_mean`: the absolute margin set for the
    /// metric, else `margin` × |reference_mean| (NaN without a reference mean:
    /// then nothing is called equivalent).
    pub fn margin_for(&self, metric: MetricId, reference_mean: f64) -> f64 {
        match self.absolute_margins.get(metric.as_str()) {
            Some(&d) => d,
            None => self.margin * reference_mean.abs(),
        }
    }

    /// The primary metric as an id (`None` when the setting names none).
    pub fn primary(&self) -> Option<MetricId> {
        MetricId::parse(&self.primary_metric)
    }
}

/// Across-task statistics of the primary metric at one calibration size.
#[derive(Debug, Clone, PartialEq)]
pub struct AcrossRow {
    pub size: usize,
    pub metric: MetricId,
    /// Tasks with a value for every method at this size.
    pub tasks: Vec<String>,
    pub methods: Vec<String>,
    /// Average rank of each method over `tasks` (1 = lowest loss), defined
    /// from one task on; the same values as `result`'s Friedman ranks when
    /// that test can be computed. The decision's standing reads these, so a
    /// suite with a single task still gets a decision.
    pub avg_ranks: Vec<f64>,
    /// Index of the method with the lowest average rank (first on ties).
    pub best: usize,
    pub result: Result<AcrossTasks, String>,
    /// Per method (not the reference): tasks with each verdict against the
    /// reference.
    pub vs_reference: Vec<(String, VerdictCounts)>,
}

/// Data-size thresholds of one (flexible, parametric) pair on one task.
#[derive(Debug, Clone, PartialEq)]
pub struct ThresholdRow {
    pub task: String,
    pub flexible: String,
    pub parametric: String,
    pub metric: MetricId,
    /// (size, mean of flexible − parametric, low, high).
    pub points: Vec<(usize, f64, f64, f64)>,
    pub result: Result<Thresholds, String>,
}

/// Mean of one metric for one method at one (task, size).
#[derive(Debug, Clone, PartialEq)]
pub struct MethodSummary {
    pub task: String,
    pub size: usize,
    pub method: String,
    pub metric: MetricId,
    /// Units with a value.
    pub n: usize,
    pub mean: f64,
    pub sd: f64,
    /// Units whose status carried a fit note (e.g. `separable`).
    pub noted: usize,
    /// Units with no value (one-class samples, failed fits).
    pub missing: usize,
    /// Mean count of clipped test predictions.
    pub mean_clipped: f64,
}

/// A method against the reference at one (task, size, metric).
#[derive(Debug, Clone, PartialEq)]
pub struct Paired {
    pub task: String,
    pub size: usize,
    pub method: String,
    pub reference: String,
    pub metric: MetricId,
    /// Repeats where both had a value.
    pub repeats: usize,
    pub mean_method: f64,
    pub mean_reference: f64,
    /// Mean of (method − reference).
    pub mean_diff: f64,
    pub ci_low: f64,
    pub ci_high: f64,
    pub se: f64,
    /// Repeats where the method was better / equal / worse than the reference.
    pub wins: usize,
    pub ties: usize,
    pub losses: usize,
    pub interval: String,
    pub confidence: f64,
    /// The Hoeffding degree of the interval's reservoir term: 1 for
    /// `decomposed-linear` and for `decomposed` with extreme predictions, 2 for
    /// `decomposed` otherwise, `None` for the t intervals.
    pub reservoir_order: Option<u32>,
    /// The equivalence margin δ at this (task, size, metric).
    pub margin: f64,
    /// The verdict of [`crate::stats::verdict`] on the interval and δ,
    /// oriented for the metric.
    pub verdict: Verdict,
    /// Rows of the rarer class in the calibration sample, averaged over the
    /// repeats (min(positives, n − positives)).
    pub minority_rows: f64,
    /// The share of the interval's reservoir term taken at degree 1 (see
    /// [`crate::stats::paired::composition_share`]); `None` for the t
    /// intervals.
    pub first_order_share: Option<f64>,
    /// A log-loss comparison in which either method can predict exactly 0
    /// or 1 ([`AnalysisSettings::zero_one_methods`]): its expected log loss
    /// hinges on rare test rows that the repeats may not show, and the
    /// interval is approximate.
    pub zero_one: bool,
}

impl Paired {
    /// Fewer than [`RARE_CLASS_ROWS`] rows of the rarer class: the interval
    /// is approximate.
    pub fn rare_class(&self) -> bool {
        self.minority_rows < RARE_CLASS_ROWS
    }

    /// Whether the report marks the interval as approximate, and why:
    /// `rare-class`, `zero-one`, both joined by `+`, or `None`.
    pub fn approximate(&self) -> Option<&'static str> {
        match (self.rare_class(), self.zero_one) {
            (true, true) => Some("rare-class+zero-one"),
            (true, false) => Some("rare-class"),
            (false, true) => Some("zero-one"),
            (false, false) => None,
        }
    }
}

/// Whether a paired comparison on `metric` between methods `a` and `b` is
/// approximate because either can predict exactly 0 or 1 under a loss that
/// is unbounded there (the log loss).
pub fn zero_one_pair(settings: &AnalysisSettings, metric: MetricId, a: &str, b: &str) -> bool {
    metric == MetricId::LogLoss && settings.zero_one_methods.iter().any(|m| m == a || m == b)
}

/// Everything the reports show.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Analysis {
    pub tasks: Vec<String>,
    pub methods: Vec<String>,
    pub metrics: Vec<MetricId>,
    pub sizes: BTreeMap<String, Vec<usize>>,
    pub summaries: Vec<MethodSummary>,
    pub paired: Vec<Paired>,
    /// Units per (task, size, method) with each non-`ok` status (statuses
    /// in the order of their text).
    pub status_counts: BTreeMap<CellKey, BTreeMap<UnitStatus, usize>>,
    /// Per (task, size, method): (units whose method could not fit and
    /// predicted the fallback, status `fallback:base-rate`; all units).
    pub fallback_counts: FallbackCounts,
    pub across: Vec<AcrossRow>,
    pub thresholds: Vec<ThresholdRow>,
    /// Per metric and pair: the summary over tasks.
    pub threshold_summaries: Vec<(MetricId, (String, String), ThresholdSummary)>,
    /// Thresholds of every method against the raw scores
    /// ([`AnalysisSettings::raw_method`]) on each decision metric: from which
    /// size calibrating pays off on each task (empty without a raw method).
    pub raw_thresholds: Vec<ThresholdRow>,
    /// The recommendation on each decision metric (the primary metric first).
    pub decisions: Vec<Decision>,
    /// The equivalence margin δ of each (task, size, metric) with a reference.
    pub margins: Margins,
}

/// One cell of the analysis: a method at one task and calibration size.
/// Maps keyed by it list cells by task, then size, then method (the field
/// order, which the derived ordering follows).
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct CellKey {
    pub task: String,
    pub size: usize,
    pub method: String,
}

impl CellKey {
    pub fn new(task: &str, size: usize, method: &str) -> CellKey {
        CellKey {
            task: task.to_string(),
            size,
            method: method.to_string(),
        }
    }

    /// The cell of a unit-table row.
    pub fn of(row: &UnitRow) -> CellKey {
        CellKey::new(&row.task, row.size, &row.method)
    }
}

/// Per cell: (units whose method predicted the fallback, all units).
pub type FallbackCounts = BTreeMap<CellKey, (usize, usize)>;

/// (task, size, metric) → equivalence margin δ.
pub type Margins = BTreeMap<(String, usize, MetricId), f64>;

/// The margin of one (task, size, metric); NaN where the reference method
/// has no values (no verdict other than *undetermined* can come of it).
pub fn margin_of(margins: &Margins, task: &str, size: usize, metric: MetricId) -> f64 {
    margins
        .get(&(task.to_string(), size, metric))
        .copied()
        .unwrap_or(f64::NAN)
}

/// Differences within this tolerance count as ties.
pub const TIE_TOLERANCE: f64 = 1e-12;

/// The value paired differences are taken on: the metric itself, or for a
/// metric with a target value (calibration slope 1, intercept 0, Z 0) the
/// distance |v − target|. `None` for descriptive terms (the same for every
/// method in a unit).
pub fn compared_value(metric: MetricId, v: f64) -> Option<f64> {
    match metric.goal() {
        Goal::Descriptive => None,
        Goal::Toward(x) => Some((v - x).abs()),
        Goal::Lower | Goal::Higher => Some(v),
    }
}

/// True when paired differences of this metric are reported.
pub fn is_compared(metric: MetricId) -> bool {
    compared_value(metric, 0.0).is_some()
}

fn mean_sd(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let sd = if v.len() > 1 {
        (v.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (n - 1.0)).sqrt()
    } else {
        f64::NAN
    };
    (m, sd)
}

/// Paired values of two methods over the repeats where both have a value.
pub struct PairRows {
    pub a: Vec<f64>,
    pub b: Vec<f64>,
    pub diffs: Vec<f64>,
    /// Row indices in the unit table of (a, b) per kept repeat.
    pub rows: Vec<(usize, usize)>,
}

pub(crate) fn pair_up(
    table: &UnitTable,
    a: &BTreeMap<usize, usize>,
    b: &BTreeMap<usize, usize>,
    mi: usize,
    metric: MetricId,
) -> PairRows {
    let mut out = PairRows {
        a: Vec::new(),
        b: Vec::new(),
        diffs: Vec::new(),
        rows: Vec::new(),
    };
    for (rep, &i) in a {
        let Some(&j) = b.get(rep) else { continue };
        let (Some(x), Some(y)) = (table.rows[i].metrics[mi], table.rows[j].metrics[mi]) else {
            continue;
        };
        let (Some(x), Some(y)) = (compared_value(metric, x), compared_value(metric, y)) else {
            continue;
        };
        out.a.push(x);
        out.b.push(y);
        out.diffs.push(x - y);
        out.rows.push((i, j));
    }
    out
}

/// The interval of the suite's estimator for paired rows. Row summaries
/// (`<metric>_dbatchNN` columns, each against the reference) are used when both
/// rows have them; for a pair of non-reference methods the per-batch
/// difference is their difference (both are taken against the same reference
/// on the same test rows).
pub fn paired_interval(
    table: &UnitTable,
    pr: &PairRows,
    metric: MetricId,
    settings: &AnalysisSettings,
) -> Interval {
    let kind = IntervalKind::ALL
        .iter()
        .copied()
        .find(|k| k.as_str() == settings.interval)
        .unwrap_or_default();
    let cols: Vec<Option<usize>> = ROW_SUMMARY_NAMES
        .iter()
        .map(|n| table.extra_index(&format!("{metric}_{n}")))
        .collect();
    let row_stats: Option<Vec<Vec<f64>>> =
        if cols.iter().all(|c| c.is_some()) && !pr.rows.is_empty() {
            let get = |row: usize, reference_row: bool| -> Vec<f64> {
                if reference_row && table.rows[row].method == settings.reference {
                    return vec![0.0; cols.len()];
                }
                cols.iter()
                    .map(|c| table.rows[row].extras[c.unwrap_or(0)].unwrap_or(f64::NAN))
                    .collect()
            };
            let v: Vec<Vec<f64>> = pr
                .rows
                .iter()
                .map(|&(i, j)| {
                    get(i, true)
                        .iter()
                        .zip(get(j, true))
                        .map(|(x, y)| x - y)
                        .collect()
                })
                .collect();
            if v.iter().all(|r| r.iter().any(|x| x.is_finite())) {
                Some(v)
            } else {
                None
            }
        } else {
            None
        };
    // Extreme predictions by either method in any repeat (column absent in
    // results written before it existed: treated as none).
    let extreme = table
        .extra_index(&format!("{metric}_{}", EXTREME_ROWS))
        .is_some_and(|c| {
            pr.rows.iter().any(|&(i, j)| {
                [i, j]
                    .iter()
                    .any(|&k| table.rows[k].extras[c].is_some_and(|v| v > 0.0))
            })
        });
    let first = pr.rows.first().map(|&(i, _)| &table.rows[i]);
    // The calibration sample is the same for both methods of a repeat: its
    // class counts, averaged over repeats, decide the rare-class rule.
    let rare_class = minority_rows(table, pr.rows.iter().map(|&(i, _)| i)) < RARE_CLASS_ROWS;
    // Per repeat, the positives of the calibration sample, in the order of
    // the differences.
    let positives: Vec<f64> = pr
        .rows
        .iter()
        .map(|&(i, _)| table.rows[i].positives as f64)
        .collect();
    let input = PairedInput {
        diffs: &pr.diffs,
        row_stats: row_stats.as_deref(),
        size: first.map(|r| r.size).unwrap_or(0),
        reservoir: first.map(|r| r.reservoir).unwrap_or(0),
        test_rows: first.map(|r| r.test_rows).unwrap_or(0),
        extreme,
        rare_class,
        positives: Some(&positives),
    };
    interval(kind, &input, settings.confidence).unwrap_or(Interval {
        kind,
        mean: f64::NAN,
        low: f64::NAN,
        high: f64::NAN,
        se: f64::NAN,
        df: f64::NAN,
        confidence: settings.confidence,
        test_term: None,
        reservoir_order: None,
        first_order_share: None,
    })
}

/// Rows of the rarer class in the calibration samples of the given units,
/// min(positives, n − positives), averaged over them; NaN without units
/// (which no threshold flags).
fn minority_rows(table: &UnitTable, rows: impl Iterator<Item = usize>) -> f64 {
    let (mut sum, mut count) = (0.0, 0usize);
    for i in rows {
        let r = &table.rows[i];
        sum += r.positives.min(r.size.saturating_sub(r.positives)) as f64;
        count += 1;
    }
    if count == 0 {
        f64::NAN
    } else {
        sum / count as f64
    }
}

/// Build summaries and paired comparisons from the unit table.
pub fn analyse(table: &UnitTable, settings: &AnalysisSettings) -> Analysis {
    let ix = index_units(table);
    let metric_ids = table.metric_ids();
    let margins = margins_of(table, &metric_ids, &ix.cells, &ix.sizes, settings);
    let (summaries, paired) = summaries_and_pairs(table, settings, &ix, &metric_ids, &margins);
    let metrics = decision_metrics(settings.primary(), &metric_ids);
    let ctx = StepInput {
        table,
        settings,
        tasks: &ix.tasks,
        methods: &ix.methods,
        sizes: &ix.sizes,
        cells: &ix.cells,
        summaries: &summaries,
        paired: &paired,
        margins: &margins,
    };
    let steps = steps_by_metric(&ctx, &metrics);
    let input = decision::DecisionInput {
        across: &steps.across,
        table,
        cells: &ix.cells,
        margins: &margins,
        settings,
        fallback_counts: &ix.fallback_counts,
        raw_thresholds: &steps.raw_thresholds,
    };
    let decisions: Vec<Decision> = metrics.iter().filter_map(|m| decide(&input, *m)).collect();
    let UnitIndex {
        tasks,
        methods,
        sizes,
        status_counts,
        fallback_counts,
        ..
    } = ix;
    Analysis {
        tasks,
        methods,
        metrics: metric_ids,
        sizes,
        summaries,
        paired,
        status_counts,
        fallback_counts,
        across: steps.across,
        thresholds: steps.thresholds,
        threshold_summaries: steps.threshold_summaries,
        raw_thresholds: steps.raw_thresholds,
        decisions,
        margins,
    }
}

/// The unit table indexed: tasks and methods in order of first appearance,
/// each task's sizes ascending, the units of each cell by repeat, and the
/// status and fallback counts of each cell.
struct UnitIndex {
    tasks: Vec<String>,
    methods: Vec<String>,
    sizes: BTreeMap<String, Vec<usize>>,
    /// (task, size, method) -> repeat -> row index
    cells: steps::Cells,
    status_counts: BTreeMap<CellKey, BTreeMap<UnitStatus, usize>>,
    fallback_counts: FallbackCounts,
}

/// One pass over the unit table: its [`UnitIndex`].
fn index_units(table: &UnitTable) -> UnitIndex {
    let mut ix = UnitIndex {
        tasks: Vec::new(),
        methods: Vec::new(),
        sizes: BTreeMap::new(),
        cells: steps::Cells::new(),
        status_counts: BTreeMap::new(),
        fallback_counts: FallbackCounts::new(),
    };
    for (i, r) in table.rows.iter().enumerate() {
        let fc = ix.fallback_counts.entry(CellKey::of(r)).or_default();
        fc.1 += 1;
        if r.status.is_fallback() {
            fc.0 += 1;
        }
        if !ix.tasks.contains(&r.task) {
            ix.tasks.push(r.task.clone());
        }
        if !ix.methods.contains(&r.method) {
            ix.methods.push(r.method.clone());
        }
        let s = ix.sizes.entry(r.task.clone()).or_default();
        if !s.contains(&r.size) {
            s.push(r.size);
        }
        ix.cells
            .entry(CellKey::of(r))
            .or_default()
            .insert(r.repeat, i);
        if !r.status.is_ok() {
            *ix.status_counts
                .entry(CellKey::of(r))
                .or_default()
                .entry(r.status.clone())
                .or_default() += 1;
        }
    }
    for s in ix.sizes.values_mut() {
        s.sort_unstable();
    }
    ix
}

/// One method's units at one (task, size), read on one metric.
struct MetricCell<'a> {
    task: &'a str,
    size: usize,
    method: &'a str,
    metric: MetricId,
    /// The metric's column in the unit table.
    mi: usize,
    /// Repeat -> row index.
    units: &'a BTreeMap<usize, usize>,
}

/// Every method's summary at every (task, size, metric), and every method's
/// paired comparison with the reference on the compared metrics.
fn summaries_and_pairs(
    table: &UnitTable,
    settings: &AnalysisSettings,
    ix: &UnitIndex,
    metric_ids: &[MetricId],
    margins: &Margins,
) -> (Vec<MethodSummary>, Vec<Paired>) {
    let mut summaries = Vec::new();
    let mut paired = Vec::new();
    for task in &ix.tasks {
        for &size in &ix.sizes[task] {
            for (mi, &metric) in metric_ids.iter().enumerate() {
                let reference = ix.cells.get(&CellKey::new(task, size, &settings.reference));
                for method in &ix.methods {
                    let Some(units) = ix.cells.get(&CellKey::new(task, size, method)) else {
                        continue;
                    };
                    let cell = MetricCell {
                        task,
                        size,
                        method,
                        metric,
                        mi,
                        units,
                    };
                    summaries.push(method_summary(table, &cell));
                    if *method == settings.reference || !is_compared(metric) {
                        continue;
                    }
                    let Some(rc) = reference else { continue };
                    paired.push(paired_with_reference(table, settings, margins, &cell, rc));
                }
            }
        }
    }
    (summaries, paired)
}

/// Mean, SD, counts and mean clipping of one method's values in a cell.
fn method_summary(table: &UnitTable, cell: &MetricCell) -> MethodSummary {
    let c = cell.units;
    let vals: Vec<f64> = c
        .values()
        .filter_map(|&i| table.rows[i].metrics[cell.mi])
        .collect();
    let noted = c
        .values()
        .filter(|&&i| !table.rows[i].status.is_ok() && table.rows[i].has_values())
        .count();
    let clipped: Vec<f64> = c
        .values()
        .filter_map(|&i| table.rows[i].clipped.map(|x| x as f64))
        .collect();
    let (mean, sd) = if vals.is_empty() {
        (f64::NAN, f64::NAN)
    } else {
        mean_sd(&vals)
    };
    MethodSummary {
        task: cell.task.to_string(),
        size: cell.size,
        method: cell.method.to_string(),
        metric: cell.metric,
        n: vals.len(),
        mean,
        sd,
        noted,
        missing: c.len() - vals.len(),
        mean_clipped: if clipped.is_empty() {
            f64::NAN
        } else {
            clipped.iter().sum::<f64>() / clipped.len() as f64
        },
    }
}

/// One method against the reference's units `rc` in a cell: wins, ties and
/// losses over the repeats, the paired interval and its verdict.
fn paired_with_reference(
    table: &UnitTable,
    settings: &AnalysisSettings,
    margins: &Margins,
    cell: &MetricCell,
    rc: &BTreeMap<usize, usize>,
) -> Paired {
    let (task, size, method, metric) = (cell.task, cell.size, cell.method, cell.metric);
    let hib = metric.higher_is_better();
    let pr = pair_up(table, cell.units, rc, cell.mi, metric);
    let (dm, dr, diffs) = (&pr.a, &pr.b, &pr.diffs);
    let (mut wins, mut ties, mut losses) = (0, 0, 0);
    for &d in diffs {
        if d.abs() <= TIE_TOLERANCE {
            ties += 1;
        } else if (d < 0.0) != hib {
            wins += 1;
        } else {
            losses += 1;
        }
    }
    let iv = paired_interval(table, &pr, metric, settings);
    let (lo, hi, se) = (iv.low, iv.high, iv.se);
    let margin = margin_of(margins, task, size, metric);
    let mean_of = |v: &[f64]| {
        if v.is_empty() {
            f64::NAN
        } else {
            v.iter().sum::<f64>() / v.len() as f64
        }
    };
    // The calibration sample is the same for every method of
    // a repeat: read its class counts off the reference's units.
    let minority_rows = minority_rows(table, rc.values().copied());
    Paired {
        task: task.to_string(),
        size,
        method: method.to_string(),
        reference: settings.reference.clone(),
        metric,
        repeats: diffs.len(),
        mean_method: mean_of(dm),
        mean_reference: mean_of(dr),
        mean_diff: mean_of(diffs),
        ci_low: lo,
        ci_high: hi,
        se,
        wins,
        ties,
        losses,
        interval: settings.interval.clone(),
        confidence: settings.confidence,
        reservoir_order: iv.reservoir_order,
        margin,
        verdict: Verdict::of_metric(lo, hi, margin, hib),
        minority_rows,
        first_order_share: iv.first_order_share,
        zero_one: zero_one_pair(settings, metric, method, &settings.reference),
    }
}

/// What the steps across tasks give on the decision metrics.
struct StepOutputs {
    across: Vec<AcrossRow>,
    thresholds: Vec<ThresholdRow>,
    threshold_summaries: Vec<(MetricId, (String, String), ThresholdSummary)>,
    raw_thresholds: Vec<ThresholdRow>,
}

/// The comparison across tasks, the data-size thresholds of the suite's
/// pairs and of every method against the raw scores, on each of `metrics`
/// that the table has.
fn steps_by_metric(ctx: &StepInput, metrics: &[MetricId]) -> StepOutputs {
    let mut out = StepOutputs {
        across: Vec::new(),
        thresholds: Vec::new(),
        threshold_summaries: Vec::new(),
        raw_thresholds: Vec::new(),
    };
    let raw = ctx
        .settings
        .raw_method
        .as_ref()
        .filter(|r| ctx.methods.contains(r))
        .map(|r| raw_pairs(ctx.methods, r))
        .unwrap_or_default();
    for &metric in metrics {
        let Some(mi) = ctx.table.metric_index(metric) else {
            continue;
        };
        out.across.extend(across_step(ctx, metric));
        let (rows, sums) = threshold_step(ctx, metric, mi);
        out.thresholds.extend(rows);
        out.threshold_summaries
            .extend(sums.into_iter().map(|(pair, s)| (metric, pair, s)));
        out.raw_thresholds
            .extend(pair_thresholds(ctx, metric, mi, &raw).0);
    }
    out
}

/// The equivalence margin of every (task, size, metric) where the reference
/// method has values: [`AnalysisSettings::margin_for`] on the mean of the
/// reference's compared values (for a metric with a target, the mean
/// distance to it) over its units.
fn margins_of(
    table: &UnitTable,
    metric_ids: &[MetricId],
    cells: &steps::Cells,
    sizes: &BTreeMap<String, Vec<usize>>,
    settings: &AnalysisSettings,
) -> Margins {
    let mut out = Margins::new();
    for (task, ss) in sizes {
        for &size in ss {
            let Some(rc) = cells.get(&CellKey::new(task, size, &settings.reference)) else {
                continue;
            };
            for (mi, &metric) in metric_ids.iter().enumerate() {
                if !is_compared(metric) {
                    continue;
                }
                let v: Vec<f64> = rc
                    .values()
                    .filter_map(|&i| table.rows[i].metrics[mi])
                    .filter_map(|x| compared_value(metric, x))
                    .filter(|x| x.is_finite())
                    .collect();
                let mean = if v.is_empty() {
                    f64::NAN
                } else {
                    v.iter().sum::<f64>() / v.len() as f64
                };
                out.insert(
                    (task.clone(), size, metric),
                    settings.margin_for(metric, mean),
                );
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cell_keys_sort_as_task_size_method() {
        // Sizes compare as numbers (20 before 100), tasks and methods as text.
        let cells = [
            ("b", 20, "platt"),
            ("a@logistic", 20, "beta"),
            ("a", 100, "beta"),
            ("a", 20, "platt"),
            ("a", 20, "beta"),
            ("b", 5, "isotonic"),
        ];
        let mut keys: Vec<CellKey> = cells
            .iter()
            .map(|&(t, n, m)| CellKey::new(t, n, m))
            .collect();
        keys.sort();
        let got: Vec<(&str, usize, &str)> = keys
            .iter()
            .map(|k| (k.task.as_str(), k.size, k.method.as_str()))
            .collect();
        assert_eq!(
            got,
            [
                ("a", 20, "beta"),
                ("a", 20, "platt"),
                ("a", 100, "beta"),
                ("a@logistic", 20, "beta"),
                ("b", 5, "isotonic"),
                ("b", 20, "platt"),
            ]
        );
    }

    fn row(task: &str, repeat: usize, method: &str, status: &str, v: Option<f64>) -> UnitRow {
        UnitRow {
            task: task.into(),
            size: 20,
            repeat,
            method: method.into(),
            status: UnitStatus::parse(status),
            metrics: vec![v],
            clipped: v.map(|_| 0),
            positives: 8,
            reservoir: 100,
            test_rows: 50,
            extras: Vec::new(),
        }
    }

    #[test]
    fn statuses_are_counted_per_cell_in_text_order() {
        let table = UnitTable {
            metric_names: vec!["brier".into()],
            extra_names: Vec::new(),
            rows: vec![
                row("t", 0, "platt", "ok", Some(0.2)),
                row("t", 0, "beta", "fallback:base-rate", Some(0.25)),
                row("t", 1, "platt", "separable", Some(0.21)),
                row("t", 1, "beta", "failed", None),
                row("t", 2, "platt", "ok", Some(0.19)),
                row("t", 2, "beta", "retired-note", Some(0.22)),
                row("t", 3, "platt", "separable", Some(0.2)),
                row("t", 3, "beta", "fallback:base-rate", Some(0.24)),
            ],
        };
        let settings = AnalysisSettings {
            reference: "platt".into(),
            primary_metric: "brier".into(),
            confidence: 0.95,
            interval: "paired-t".into(),
            pairs: Vec::new(),
            margin: DEFAULT_MARGIN,
            absolute_margins: BTreeMap::new(),
            raw_method: None,
            max_fallback: DEFAULT_MAX_FALLBACK,
            decision_threshold: None,
            zero_one_methods: Vec::new(),
        };
        let a = analyse(&table, &settings);
        let beta: Vec<(String, usize)> = a.status_counts[&CellKey::new("t", 20, "beta")]
            .iter()
            .map(|(s, &n)| (s.to_string(), n))
            .collect();
        assert_eq!(
            beta,
            [
                ("failed".to_string(), 1),
                ("fallback:base-rate".to_string(), 2),
                ("retired-note".to_string(), 1),
            ]
        );
        let platt = &a.status_counts[&CellKey::new("t", 20, "platt")];
        assert_eq!(platt.len(), 1);
        assert_eq!(platt[&UnitStatus::parse("separable")], 2);
        assert_eq!(a.fallback_counts[&CellKey::new("t", 20, "beta")], (2, 4));
        assert_eq!(a.fallback_counts[&CellKey::new("t", 20, "platt")], (0, 4));
        // Noted units with values: the two fallbacks and the unknown status
        // of beta (the failed unit has none), the two separable fits of platt.
        let noted = |m: &str| {
            a.summaries
                .iter()
                .find(|s| s.method == m)
                .map(|s| (s.noted, s.missing))
        };
        assert_eq!(noted("beta"), Some((3, 1)));
        assert_eq!(noted("platt"), Some((2, 0)));
    }
}
