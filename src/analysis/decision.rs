//! The recommendation: one team default under a stated rule, the runner-up,
//! what to use at each calibration size, whether to calibrate at all, and
//! how strong the evidence is.
//!
//! Every mark across tasks comes from one test: the Bayesian signed-rank test
//! with a region of practical equivalence, the dataset as unit
//! ([`super::evidence`]); "reliably" means a posterior probability of at
//! least 0.95. With one dataset (a team's own score file, say) that test
//! cannot decide, and the dataset's own paired intervals over the repeats do:
//! "reliably better" there means the verdict *better* on every task of it.
//! The ranks, Friedman/Iman–Davenport and Nemenyi's critical difference stay
//! as pictures of the whole field; they treat tasks as independent and
//! decide nothing.
//!
//! Rule (ours, stated in every report):
//!
//! 1. *Standing.* At each calibration size, methods are ranked on each task
//!    by their mean loss and the ranks averaged over the tasks (Demšar 2006).
//!    A method's standing is the mean of these average ranks over the sizes,
//!    each size weighted by the number of datasets behind it, so a size that
//!    rests on 4 datasets counts a third as much as one that rests on 12. The
//!    team default is first, the runner-up second; ties go to the method
//!    listed first in the suite.
//! 2. *Fallbacks.* A method whose draws at a size fell back to the smoothed
//!    base rate (status `fallback:base-rate`) in more than `max_fallback` of
//!    its draws over the tasks there is not recommended at that size; when
//!    that is the default, the next method of the standing that stays within
//!    the limit is.
//! 3. *Per size, the default unless beaten.* At a size where some method
//!    within the fallback limit is reliably better than the default, the
//!    best-standing such method is recommended there instead.
//! 4. *Calibrate at all?* When the suite has a method that passes the scores
//!    through (kind `identity`, the raw scores), the method chosen by 2–3 is
//!    tested against them separately for each base model (task ids
//!    `<dataset>.<model>`; ids without a model form one group), datasets as
//!    units: the raw scores are kept for a base model at a size unless the
//!    chosen method is reliably better than them there. The burden of
//!    evidence is on calibrating, which adds a fitted map to maintain; a
//!    method equivalent within the margin keeps the raw scores too.
//!
//! The per-task counts (better / equivalent / undetermined / worse from each
//! task's paired interval) are shown beside the test as a description: how
//! many base models and datasets gain, not a test across tasks.

use std::collections::{BTreeMap, BTreeSet};

use super::evidence::{compare, DatasetEvidence, EvidenceSource};
use super::steps::{pair_interval, Cells, PairSource};
use super::{
    margin_of, AcrossRow, AnalysisSettings, CellKey, FallbackCounts, Margins, ThresholdRow,
};
use crate::metrics::MetricId;
use crate::run::table::UnitTable;
use crate::stats::thresholds::{summarize, ThresholdSummary, Thresholds};
use crate::stats::verdict::{Verdict, VerdictCounts};

/// What the decision reads.
pub struct DecisionInput<'a> {
    pub across: &'a [AcrossRow],
    pub table: &'a UnitTable,
    pub cells: &'a Cells,
    pub margins: &'a Margins,
    pub settings: &'a AnalysisSettings,
    /// (task, size, method) → (fallback units, units).
    pub fallback_counts: &'a FallbackCounts,
    /// Every method against the raw scores, per task and decision metric.
    pub raw_thresholds: &'a [ThresholdRow],
}

/// Why a method is recommended at a size.
#[derive(Debug, Clone, PartialEq)]
pub enum Recommendation {
    /// The team default.
    Default,
    /// These methods are reliably better than the default at this size (best
    /// standing first); the first is recommended.
    Beaten(Vec<String>),
    /// The raw scores, for every base model, under the rule of this module.
    KeepRaw,
    /// The method chosen by the rule fell back too often; these methods
    /// (with their fallback shares) were passed over, in the standing's
    /// order.
    PassedOver(Vec<(String, f64)>),
}

/// Draws that fell back to the base rate.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct FallbackShare {
    pub fallback: usize,
    pub draws: usize,
}

impl FallbackShare {
    pub fn share(&self) -> f64 {
        if self.draws == 0 {
            0.0
        } else {
            self.fallback as f64 / self.draws as f64
        }
    }
}

/// The test that decided a comparison.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DecidedBy {
    /// The Bayesian signed-rank test over two or more datasets.
    Datasets,
    /// One dataset: its tasks' paired intervals.
    Intervals,
}

/// One comparison of the decision: the dataset-level evidence and what it
/// decided.
#[derive(Debug, Clone, PartialEq)]
pub struct Evidence {
    pub test: DatasetEvidence,
    pub decided_by: DecidedBy,
    /// The first method is reliably better than the second.
    pub first_better: bool,
    /// The second method is reliably better than the first.
    pub second_better: bool,
}

/// The chosen method against the raw scores on one base model's tasks.
#[derive(Debug, Clone, PartialEq)]
pub struct RawGroup {
    /// The base model (empty: task ids without a model part).
    pub model: String,
    /// The chosen method (first) against the raw scores; `None` when the
    /// chosen method is the raw scores.
    pub evidence: Option<Evidence>,
}

impl RawGroup {
    /// Keep the raw scores for this base model at this size: the chosen
    /// method is the raw scores, or not reliably better than them.
    pub fn keep_raw(&self) -> bool {
        self.evidence.as_ref().is_none_or(|e| !e.first_better)
    }
}

/// The raw scores against the calibrating methods at one size.
#[derive(Debug, Clone, PartialEq)]
pub struct RawAtSize {
    /// Verdicts of the default against the raw scores over the tasks
    /// (`None` when the raw scores are the default).
    pub default_vs_raw: Option<VerdictCounts>,
    /// Tasks on which at least one method is reliably better than the raw
    /// scores (paired interval per task).
    pub any_better: usize,
    /// The method reliably better than the raw scores on the most tasks, and
    /// on how many (first in the standing on ties).
    pub most_better: Option<(String, usize)>,
    /// The decision per base model.
    pub groups: Vec<RawGroup>,
}

impl RawAtSize {
    /// Every base model keeps the raw scores at this size.
    pub fn keep_raw(&self) -> bool {
        !self.groups.is_empty() && self.groups.iter().all(RawGroup::keep_raw)
    }

    /// Base models that keep the raw scores while others calibrate.
    pub fn raw_for(&self) -> Vec<&str> {
        if self.keep_raw() {
            return Vec::new();
        }
        self.groups
            .iter()
            .filter(|g| g.keep_raw())
            .map(|g| g.model.as_str())
            .collect()
    }
}

/// The verdict at one calibration size.
#[derive(Debug, Clone, PartialEq)]
pub struct SizeVerdict {
    pub size: usize,
    pub tasks: usize,
    /// Distinct datasets behind the tasks ([`task_parts`]).
    pub datasets: usize,
    /// Lowest average rank at this size (a picture, not a test).
    pub best: String,
    pub default_rank: f64,
    pub runner_up_rank: Option<f64>,
    /// The default against every other method, in the standing's order.
    pub versus: Vec<(String, Evidence)>,
    /// Tasks on which the default gets each verdict against the runner-up
    /// (paired interval of the suite's estimator on each task, the task's
    /// equivalence margin): a description beside the test.
    pub versus_runner_up: Option<VerdictCounts>,
    /// The raw scores against the methods (`None` without a raw method).
    pub raw: Option<RawAtSize>,
    /// The default's draws at this size over the tasks, and those that fell
    /// back to the base rate.
    pub default_fallback: FallbackShare,
    /// The task where the largest share of the default's draws fell back.
    pub worst_fallback: Option<(String, FallbackShare)>,
    /// The method recommended at this size, and why (for the base models
    /// in [`RawAtSize::raw_for`], the raw scores instead).
    pub recommended: String,
    pub why: Recommendation,
}

impl SizeVerdict {
    /// No method is reliably better than the default at this size.
    pub fn default_holds(&self) -> bool {
        self.versus.iter().all(|(_, e)| !e.second_better)
    }

    /// The default against `method` at this size.
    pub fn against(&self, method: &str) -> Option<&Evidence> {
        self.versus.iter().find(|v| v.0 == method).map(|v| &v.1)
    }
}

/// The recommendation on one metric.
#[derive(Debug, Clone, PartialEq)]
pub struct Decision {
    pub metric: MetricId,
    /// Every method with its standing (the mean of its average ranks over
    /// the sizes, weighted by datasets), best first.
    pub standing: Vec<(String, f64)>,
    pub default: String,
    pub runner_up: Option<String>,
    pub per_size: Vec<SizeVerdict>,
    /// Runs of consecutive sizes with the same best-ranked method: (first,
    /// last, best).
    pub segments: Vec<(usize, usize, String)>,
    /// Distinct tasks, datasets and base models that enter any size (a task id
    /// `<dataset>.<model>` names both; other ids count as their own dataset).
    pub tasks: usize,
    pub datasets: usize,
    pub models: usize,
    /// The raw-score method of the suite, when it has one.
    pub raw: Option<String>,
    /// The fallback limit in force (`[decision] max_fallback`).
    pub max_fallback: f64,
    /// From which size calibrating pays off: per task, the smallest size from
    /// which a method is reliably better than the raw scores at every larger
    /// tested size, summarised over tasks — for any method (`None`), the
    /// default and the runner-up.
    pub pays_from: Vec<(Option<String>, ThresholdSummary)>,
}

/// Dataset and base-model parts of a task id `<dataset>.<model>`.
pub fn task_parts(task: &str) -> (&str, Option<&str>) {
    match task.rsplit_once('.') {
        Some((d, m)) if !d.is_empty() && !m.is_empty() => (d, Some(m)),
        _ => (task, None),
    }
}

/// The paired-interval verdict of `a` against `b` on each of `tasks` that has
/// an interval at this size (the suite's estimator, the task's margin).
fn task_verdicts(
    input: &DecisionInput,
    metric: MetricId,
    size: usize,
    (a, b): (&str, &str),
    tasks: &[String],
) -> Vec<Verdict> {
    let Some(mi) = input.table.metric_index(metric) else {
        return Vec::new();
    };
    let ps = PairSource {
        table: input.table,
        cells: input.cells,
        settings: input.settings,
    };
    tasks
        .iter()
        .filter_map(|task| {
            let iv = pair_interval(&ps, task, size, a, b, metric, mi)?;
            Some(Verdict::of_interval(
                &iv,
                margin_of(input.margins, task, size, metric),
            ))
        })
        .collect()
}

/// `a` against `b` at one size over `tasks`: the Bayesian signed-rank test
/// over datasets, or with a single dataset its tasks' paired intervals
/// (reliably better: the verdict *better* on every one of its tasks).
fn evidence(
    input: &DecisionInput,
    metric: MetricId,
    size: usize,
    (a, b): (&str, &str),
    tasks: &[String],
    group: Option<&str>,
) -> Evidence {
    let src = EvidenceSource {
        table: input.table,
        cells: input.cells,
        margins: input.margins,
    };
    let test = compare(&src, metric, size, (a, b), tasks, group);
    if test.datasets >= 2 {
        return Evidence {
            first_better: test.first_better(),
            second_better: test.second_better(),
            test,
            decided_by: DecidedBy::Datasets,
        };
    }
    let verdicts = task_verdicts(input, metric, size, (a, b), tasks);
    let all = |v: Verdict| !verdicts.is_empty() && verdicts.iter().all(|x| *x == v);
    Evidence {
        first_better: all(Verdict::Better),
        second_better: all(Verdict::Worse),
        test,
        decided_by: DecidedBy::Intervals,
    }
}

pub fn decide(input: &DecisionInput, metric: MetricId) -> Option<Decision> {
    // Every size with at least one task that has a value for every method:
    // the ranks are defined from one task on, and the comparisons below fall
    // back to the paired intervals when there is a single dataset.
    let rows: Vec<&AcrossRow> = input
        .across
        .iter()
        .filter(|r| r.metric == metric && !r.tasks.is_empty())
        .collect();
    let methods = &rows.first()?.methods;
    let standing = standing(&rows, methods);
    let default = standing[0].0.clone();
    let runner_up = standing.get(1).map(|s| s.0.clone());
    let di = methods.iter().position(|m| *m == default)?;
    let ri = runner_up
        .as_ref()
        .and_then(|r| methods.iter().position(|m| m == r));
    // Results without the metric's column have nothing to decide on.
    input.table.metric_index(metric)?;
    let raw_method = input
        .settings
        .raw_method
        .clone()
        .filter(|r| methods.contains(r));
    let choice = Choice {
        input,
        metric,
        standing: &standing,
        default: &default,
        runner_up: runner_up.as_ref(),
        raw_method: raw_method.as_ref(),
        default_index: di,
        runner_up_index: ri,
    };
    let per_size: Vec<SizeVerdict> = rows.iter().map(|r| size_verdict(&choice, r)).collect();
    let segments = best_segments(&per_size);
    let mut tasks = BTreeSet::new();
    for r in &rows {
        tasks.extend(r.tasks.iter().map(|t| t.as_str()));
    }
    let datasets: BTreeSet<&str> = tasks.iter().map(|t| task_parts(t).0).collect();
    let models: BTreeSet<&str> = tasks.iter().filter_map(|t| task_parts(t).1).collect();
    let pays_from = match &raw_method {
        Some(raw) => pays_from(&choice, raw, &tasks),
        None => Vec::new(),
    };
    Some(Decision {
        metric,
        standing,
        default,
        runner_up,
        per_size,
        segments,
        tasks: tasks.len(),
        datasets: datasets.len(),
        models: models.len(),
        raw: raw_method,
        max_fallback: input.settings.max_fallback,
        pays_from,
    })
}

/// What every size of one decision shares: the input, the standing and the
/// methods it names.
struct Choice<'a> {
    input: &'a DecisionInput<'a>,
    metric: MetricId,
    standing: &'a [(String, f64)],
    default: &'a String,
    runner_up: Option<&'a String>,
    /// The raw-score method, when the suite has one among the compared.
    raw_method: Option<&'a String>,
    /// Positions of the default and the runner-up in the rows' methods.
    default_index: usize,
    runner_up_index: Option<usize>,
}

/// Distinct datasets behind `tasks` ([`task_parts`]).
fn datasets_of(tasks: &[String]) -> usize {
    tasks
        .iter()
        .map(|t| task_parts(t).0)
        .collect::<BTreeSet<_>>()
        .len()
}

/// Step 1 of the rule: every method with the mean of its average ranks over
/// the sizes, each size weighted by its datasets, best first (ties keep the
/// suite's order).
fn standing(rows: &[&AcrossRow], methods: &[String]) -> Vec<(String, f64)> {
    let mut total = vec![0.0; methods.len()];
    let mut weight = 0.0;
    for r in rows {
        let w = datasets_of(&r.tasks) as f64;
        weight += w;
        for (t, rank) in total.iter_mut().zip(&r.avg_ranks) {
            *t += w * rank;
        }
    }
    let mut standing: Vec<(String, f64)> = methods
        .iter()
        .cloned()
        .zip(total.iter().map(|t| t / weight))
        .collect();
    // Stable sort: ties keep the suite's order.
    standing.sort_by(|a, b| a.1.total_cmp(&b.1));
    standing
}

/// The verdict at the size of one row.
fn size_verdict(c: &Choice, r: &AcrossRow) -> SizeVerdict {
    let default = c.default;
    let versus: Vec<(String, Evidence)> = c
        .standing
        .iter()
        .map(|s| &s.0)
        .filter(|m| *m != default)
        .map(|m| {
            (
                m.clone(),
                evidence(c.input, c.metric, r.size, (default, m), &r.tasks, None),
            )
        })
        .collect();
    let versus_runner_up = c.runner_up.map(|ru| {
        task_verdicts(c.input, c.metric, r.size, (default, ru), &r.tasks)
            .into_iter()
            .collect::<VerdictCounts>()
    });
    let default_fallback = fallback_share(c, r, default);
    let worst_fallback = worst_fallback(c, r);
    let (mut recommended, mut why) = recommend(c, r, &versus);
    let raw = c.raw_method.map(|raw| raw_at_size(c, r, raw, &recommended));
    if raw.as_ref().is_some_and(RawAtSize::keep_raw) {
        recommended = c.raw_method.cloned().unwrap_or_default();
        if !matches!(why, Recommendation::PassedOver(_)) {
            why = Recommendation::KeepRaw;
        }
    }
    SizeVerdict {
        size: r.size,
        tasks: r.tasks.len(),
        datasets: datasets_of(&r.tasks),
        best: r.methods[r.best].clone(),
        default_rank: r.avg_ranks[c.default_index],
        runner_up_rank: c.runner_up_index.map(|i| r.avg_ranks[i]),
        versus,
        versus_runner_up,
        raw,
        default_fallback,
        worst_fallback,
        recommended,
        why,
    }
}

/// The draws of method `m` at the row's size over its tasks, and those that
/// fell back to the base rate.
fn fallback_share(c: &Choice, r: &AcrossRow, m: &str) -> FallbackShare {
    let mut f = FallbackShare::default();
    for t in &r.tasks {
        if let Some(&(k, n)) = c.input.fallback_counts.get(&CellKey::new(t, r.size, m)) {
            f.fallback += k;
            f.draws += n;
        }
    }
    f
}

/// The task where the largest share of the default's draws fell back (first
/// such task on ties; none when no draw fell back).
fn worst_fallback(c: &Choice, r: &AcrossRow) -> Option<(String, FallbackShare)> {
    let mut worst: Option<(String, FallbackShare)> = None;
    for t in &r.tasks {
        if let Some(&(k, n)) = c
            .input
            .fallback_counts
            .get(&CellKey::new(t, r.size, c.default))
        {
            let f = FallbackShare {
                fallback: k,
                draws: n,
            };
            if k > 0 && worst.as_ref().is_none_or(|w| f.share() > w.1.share()) {
                worst = Some((t.clone(), f));
            }
        }
    }
    worst
}

/// Steps 2 and 3 of the rule: a default beyond the fallback limit is passed
/// over for the next method of the standing within it; otherwise the
/// default, unless a method within the limit is reliably better than it.
fn recommend(c: &Choice, r: &AcrossRow, versus: &[(String, Evidence)]) -> (String, Recommendation) {
    let too_many = |m: &str| fallback_share(c, r, m).share() > c.input.settings.max_fallback;
    let beaten_by: Vec<String> = versus
        .iter()
        .filter(|v| v.1.second_better)
        .map(|v| v.0.clone())
        .filter(|m| !too_many(m))
        .collect();
    if too_many(c.default) {
        let mut passed = Vec::new();
        let mut pick = None;
        for (m, _) in c.standing {
            if too_many(m) {
                passed.push((m.clone(), fallback_share(c, r, m).share()));
            } else {
                pick = Some(m.clone());
                break;
            }
        }
        match pick {
            Some(m) => (m, Recommendation::PassedOver(passed)),
            // Every method fell back too often: none is recommended.
            None => (String::new(), Recommendation::PassedOver(passed)),
        }
    } else if let Some(first) = beaten_by.first() {
        (first.clone(), Recommendation::Beaten(beaten_by.clone()))
    } else {
        (c.default.clone(), Recommendation::Default)
    }
}

/// Verdict of method `m` against the raw scores on `task` at `size`, read
/// off the raw-score threshold rows.
fn raw_verdict(c: &Choice, raw: &str, size: usize, m: &str, task: &str) -> Option<Verdict> {
    let row = c.input.raw_thresholds.iter().find(|t| {
        t.metric == c.metric && t.flexible == m && t.parametric == raw && t.task == task
    })?;
    let &(_, _, low, high) = row.points.iter().find(|p| p.0 == size)?;
    Some(Verdict::of(
        low,
        high,
        margin_of(c.input.margins, task, size, c.metric),
    ))
}

/// Step 4 of the rule: calibrate at all, per base model, with the
/// per-task counts against the raw scores beside it.
fn raw_at_size(c: &Choice, r: &AcrossRow, raw: &str, recommended: &str) -> RawAtSize {
    let verdict = |m: &str, task: &str| raw_verdict(c, raw, r.size, m, task);
    let default_vs_raw = (c.default != raw).then(|| {
        r.tasks
            .iter()
            .filter_map(|t| verdict(c.default, t))
            .collect::<VerdictCounts>()
    });
    let others: Vec<&String> = c
        .standing
        .iter()
        .map(|s| &s.0)
        .filter(|m| *m != raw)
        .collect();
    let better = |m: &str| {
        r.tasks
            .iter()
            .filter(|t| verdict(m, t) == Some(Verdict::Better))
            .count()
    };
    let any_better = r
        .tasks
        .iter()
        .filter(|t| {
            others
                .iter()
                .any(|m| verdict(m, t) == Some(Verdict::Better))
        })
        .count();
    let mut most_better: Option<(String, usize)> = None;
    for m in &others {
        let k = better(m);
        if most_better.as_ref().is_none_or(|b| k > b.1) {
            most_better = Some(((*m).clone(), k));
        }
    }
    RawAtSize {
        default_vs_raw,
        any_better,
        most_better,
        groups: raw_groups(c, r, raw, recommended),
    }
}

/// The recommended method against the raw scores on each base model's
/// tasks at the row's size.
fn raw_groups(c: &Choice, r: &AcrossRow, raw: &str, recommended: &str) -> Vec<RawGroup> {
    let mut by_model: BTreeMap<&str, Vec<String>> = BTreeMap::new();
    for t in &r.tasks {
        by_model
            .entry(task_parts(t).1.unwrap_or(""))
            .or_default()
            .push(t.clone());
    }
    by_model
        .into_iter()
        .map(|(model, tasks)| {
            if recommended.is_empty() || recommended == raw {
                return RawGroup {
                    model: model.to_string(),
                    evidence: None,
                };
            }
            let group = (!model.is_empty()).then_some(model);
            let e = evidence(c.input, c.metric, r.size, (recommended, raw), &tasks, group);
            RawGroup {
                model: model.to_string(),
                evidence: Some(e),
            }
        })
        .collect()
}

/// Runs of consecutive sizes with the same best-ranked method: (first,
/// last, best).
fn best_segments(per_size: &[SizeVerdict]) -> Vec<(usize, usize, String)> {
    let mut segments: Vec<(usize, usize, String)> = Vec::new();
    for v in per_size {
        match segments.last_mut() {
            Some(s) if s.2 == v.best => s.1 = v.size,
            _ => segments.push((v.size, v.size, v.best.clone())),
        }
    }
    segments
}

/// From which size calibrating pays off, summarised over `tasks`: for any
/// method (`None`), the default and the runner-up.
fn pays_from(
    c: &Choice,
    raw: &str,
    tasks: &BTreeSet<&str>,
) -> Vec<(Option<String>, ThresholdSummary)> {
    let mut out = vec![(None, summarize(&pays_from_per_task(c, raw, tasks, None)))];
    for m in std::iter::once(c.default).chain(c.runner_up) {
        if m != raw {
            out.push((
                Some(m.clone()),
                summarize(&pays_from_per_task(c, raw, tasks, Some(m))),
            ));
        }
    }
    out
}

/// Per task, the smallest size from which method `m` (any method when
/// `None`) is reliably better than the raw scores at every larger tested
/// size.
fn pays_from_per_task(
    c: &Choice,
    raw: &str,
    tasks: &BTreeSet<&str>,
    m: Option<&String>,
) -> Vec<Thresholds> {
    let mut by_task: BTreeMap<&str, Option<usize>> = BTreeMap::new();
    for t in c.input.raw_thresholds.iter().filter(|t| {
        t.metric == c.metric
            && t.parametric == *raw
            && m.is_none_or(|m| t.flexible == *m)
            && tasks.contains(t.task.as_str())
    }) {
        let Ok(th) = &t.result else { continue };
        let e = by_task.entry(t.task.as_str()).or_insert(None);
        if let Some(b) = th.better_from {
            *e = Some(e.map_or(b, |x| x.min(b)));
        }
    }
    by_task
        .into_values()
        .map(|b| Thresholds {
            better_from: b,
            worse_until: None,
            crossover: None,
        })
        .collect()
}
