//! The run engine: units = task × calibration size × repeat, run in parallel.
//!
//! Every unit draws its calibration sample from the task's reservoir with its
//! own derived seed (`split::unit_seed`), fits every method on that same sample
//! and scores them all on the task's fixed test set, so comparisons between
//! methods are paired. A unit depends on nothing but the plan and its seed, so
//! the results are identical for any thread count; rows are sorted before they
//! are written.
//!
//! Finished units are appended to a journal as they complete (see
//! [`journal`]); an interrupted run resumes from it, so a finished unit is
//! never lost.

pub mod journal;
pub mod output;
pub mod pools;
pub mod progress;
pub mod shard;
pub mod status;
pub mod study;
pub mod table;

use std::collections::{BTreeMap, BTreeSet};
use std::sync::Mutex;
use std::time::Instant;

use rayon::prelude::*;

use crate::calibrate::ScoreKind;
use crate::calibrate::{Calibrator, FitError};
use crate::metrics::reliability::{self, Curve, CurveRecord};
use crate::metrics::scoring::clipped_count;
use crate::split;
use crate::stats::paired;
use crate::suite::{FitFailurePolicy, Plan};
pub use status::{UnitStatus, FALLBACK_BASE_RATE};
use table::{UnitRow, UnitTable};

/// How to run.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// Worker threads; `None` = rayon's default (honours `RAYON_NUM_THREADS`).
    pub threads: Option<usize>,
    /// No progress bar.
    pub quiet: bool,
}

/// One method's result in one unit, as kept in the journal.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct MethodOutcome {
    pub method: String,
    pub status: UnitStatus,
    pub metrics: Vec<Option<f64>>,
    pub clipped: Option<usize>,
    pub extras: BTreeMap<String, f64>,
    pub fit_ms: f64,
    #[serde(default)]
    pub error: Option<String>,
}

/// A finished unit.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct UnitOutcome {
    pub task: String,
    pub size: usize,
    pub repeat: usize,
    pub positives: usize,
    pub reservoir: usize,
    pub test_rows: usize,
    pub methods: Vec<MethodOutcome>,
    /// Reliability curves of this unit's test predictions (repeat 0 at the
    /// plan's reliability sizes only).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub curves: Vec<Curve>,
}

/// Fit time of one method in one unit (kept apart from `units.csv`, whose bytes
/// must not depend on the machine's speed).
#[derive(Debug, Clone, PartialEq)]
pub struct Timing {
    pub task: String,
    pub size: usize,
    pub repeat: usize,
    pub method: String,
    pub fit_ms: f64,
}

/// Everything a run produced.
#[derive(Debug, Clone)]
pub struct RunOutput {
    pub table: UnitTable,
    /// Reliability curves in unit order.
    pub curves: Vec<CurveRecord>,
    pub timings: Vec<Timing>,
    pub warnings: Vec<String>,
    pub threads: usize,
    pub resumed_units: usize,
}

#[derive(Debug, thiserror::Error)]
pub enum RunError {
    #[error("method `{method}` for task `{task}`: {message}")]
    Build {
        task: String,
        method: String,
        message: String,
    },
    #[error("cannot start worker threads: {0}")]
    Threads(String),
    #[error("{0}")]
    Journal(String),
    #[error("{0}")]
    FitStopped(String),
}

struct TaskData {
    test_scores: Vec<f64>,
    test_labels: Vec<bool>,
    calibrators: Vec<Box<dyn Calibrator>>,
}

/// The unit list in output order.
pub fn unit_keys(plan: &Plan) -> Vec<(usize, usize, usize)> {
    let mut keys = Vec::with_capacity(plan.unit_count());
    for (ti, t) in plan.tasks.iter().enumerate() {
        for &size in &t.sizes {
            for r in 0..plan.repeats {
                keys.push((ti, size, r));
            }
        }
    }
    keys
}

/// The calibration sample (scores, labels) of unit (task `ti`, `size`,
/// `repeat`): the rows its derived seed draws from the task's reservoir. The
/// task's pool must be resolved.
pub fn calibration_sample(
    plan: &Plan,
    ti: usize,
    size: usize,
    repeat: usize,
) -> (Vec<f64>, Vec<bool>) {
    let task = &plan.tasks[ti];
    let seed = split::unit_seed(plan.seed, &task.id, size, repeat);
    let picks = split::draw_calibration(task.reservoir.len(), size, seed);
    picks
        .iter()
        .map(|&k| {
            let row = task.reservoir[k];
            (task.pool.scores[row], task.pool.labels[row])
        })
        .unzip()
}

fn run_unit(
    plan: &Plan,
    data: &[TaskData],
    ti: usize,
    size: usize,
    repeat: usize,
) -> Result<UnitOutcome, String> {
    let task = &plan.tasks[ti];
    let td = &data[ti];
    let seed = split::unit_seed(plan.seed, &task.id, size, repeat);
    let (cal_s, cal_y) = calibration_sample(plan, ti, size, repeat);
    let positives = cal_y.iter().filter(|&&y| y).count();
    let mut methods = Vec::with_capacity(plan.methods.len());
    let mut preds: Vec<Option<Vec<f64>>> = Vec::with_capacity(plan.methods.len());
    for (mi, m) in plan.methods.iter().enumerate() {
        let (o, p) = fit_score(
            plan,
            td.calibrators[mi].as_ref(),
            &m.id,
            &cal_s,
            &cal_y,
            &td.test_scores,
            &td.test_labels,
        )
        .map_err(|e| stop_message(&task.id, size, repeat, &m.id, &e))?;
        methods.push(o);
        preds.push(p);
    }
    let ri = plan.methods.iter().position(|m| m.id == plan.reference);
    add_row_summaries(plan, &td.test_labels, &preds, &mut methods, ri);
    let curves = if repeat == 0 && plan.reliability.sizes_for(&task.sizes).contains(&size) {
        unit_curves(plan, ti, td, &preds, seed)
    } else {
        Vec::new()
    };
    Ok(UnitOutcome {
        task: task.id.clone(),
        size,
        repeat,
        positives,
        reservoir: task.reservoir.len(),
        test_rows: task.test.len(),
        methods,
        curves,
    })
}

/// Reliability curves of a unit: the uncalibrated scores (probability scores
/// only, unless an identity method is drawn anyway) and each method the plan's
/// `[reliability]` table names. Band draws are seeded from the unit seed and
/// the series' position, so they do not depend on scheduling.
fn unit_curves(
    plan: &Plan,
    ti: usize,
    td: &TaskData,
    preds: &[Option<Vec<f64>>],
    unit_seed: u64,
) -> Vec<Curve> {
    let task = &plan.tasks[ti];
    let band = plan.reliability.band;
    let tag = split::fnv1a(b"reliability-band");
    let chosen = |id: &str| plan.reliability.methods.iter().any(|m| m == id);
    let mut out = Vec::new();
    let has_identity = plan
        .methods
        .iter()
        .any(|m| chosen(&m.id) && m.spec.kind() == "identity");
    if task.score_kind == ScoreKind::Probability && !has_identity {
        let seed = split::mix(unit_seed, &[tag, u64::MAX]);
        out.extend(reliability::curve(
            UNCALIBRATED,
            &td.test_scores,
            &td.test_labels,
            band,
            seed,
        ));
    }
    for (mi, m) in plan.methods.iter().enumerate() {
        let (true, Some(p)) = (chosen(&m.id), &preds[mi]) else {
            continue;
        };
        let seed = split::mix(unit_seed, &[tag, mi as u64]);
        out.extend(reliability::curve(&m.id, p, &td.test_labels, band, seed));
    }
    out
}

/// The series name of the raw scores in reliability data.
pub const UNCALIBRATED: &str = "uncalibrated";

/// The message of a run stopped by `on_fit_failure = "stop"`.
pub(crate) fn stop_message(
    task: &str,
    size: usize,
    repeat: usize,
    method: &str,
    e: &FitError,
) -> String {
    format!(
        "task `{task}`, size {size}, repeat {repeat}, method `{method}`: the fit failed: {e} (the suite sets on_fit_failure = \"stop\"; \"fallback\" predicts the base rate instead, \"drop\" leaves the unit out)"
    )
}

/// The prediction of a method that could not fit its calibration sample:
/// the smoothed base rate (k + 1)/(n + 2) of the sample's labels (k
/// positives of n), which stays inside (0, 1) even for one-class samples.
pub fn fallback_rate(labels: &[bool]) -> f64 {
    let k = labels.iter().filter(|&&y| y).count() as f64;
    (k + 1.0) / (labels.len() as f64 + 2.0)
}

/// The outcome of a method in a unit whose calibration sample has one class,
/// when the unit is dropped (`on_fit_failure = "drop"`).
pub(crate) fn one_class_outcome(plan: &Plan, name: &str) -> MethodOutcome {
    MethodOutcome {
        method: name.to_string(),
        status: UnitStatus::OneClass,
        metrics: vec![None; plan.metrics.len()],
        clipped: None,
        extras: BTreeMap::new(),
        fit_ms: 0.0,
        error: None,
    }
}

/// Score predictions on the test set into a method outcome.
#[allow(clippy::too_many_arguments)]
fn scored(
    plan: &Plan,
    name: &str,
    pred: &[f64],
    test_y: &[bool],
    status: UnitStatus,
    extras: BTreeMap<String, f64>,
    fit_ms: f64,
    error: Option<String>,
) -> MethodOutcome {
    let metrics = plan
        .metrics
        .iter()
        .map(|mid| Some(mid.compute(pred, test_y, &plan.metric_settings)).filter(|v| v.is_finite()))
        .collect();
    MethodOutcome {
        method: name.to_string(),
        status,
        metrics,
        clipped: Some(clipped_count(pred, plan.metric_settings.log_loss_clip)),
        extras,
        fit_ms,
        error,
    }
}

/// Fit one calibrator on a calibration sample and score it on the test set.
/// A fit that cannot be made follows the plan's `on_fit_failure`: the
/// smoothed base rate (k + 1)/(n + 2) of the sample as the prediction
/// (`fallback`), an outcome without values (`drop`), or the error (`stop`,
/// returned for the caller to name the unit).
pub(crate) fn fit_score(
    plan: &Plan,
    cal: &dyn Calibrator,
    name: &str,
    cal_s: &[f64],
    cal_y: &[bool],
    test_s: &[f64],
    test_y: &[bool],
) -> Result<(MethodOutcome, Option<Vec<f64>>), FitError> {
    let t0 = Instant::now();
    let fitted = cal.fit(cal_s, cal_y);
    let fit_ms = t0.elapsed().as_secs_f64() * 1e3;
    match fitted {
        Ok(f) => {
            let mut pred = vec![0.0; test_s.len()];
            f.map.predict(test_s, &mut pred);
            let extras = f
                .map
                .extras(test_s)
                .into_iter()
                .map(|(k, v)| (k.to_string(), v))
                .collect();
            let status = UnitStatus::from_notes(&f.notes);
            let o = scored(plan, name, &pred, test_y, status, extras, fit_ms, None);
            Ok((o, Some(pred)))
        }
        Err(e) => match plan.on_fit_failure {
            FitFailurePolicy::Stop => Err(e),
            FitFailurePolicy::Fallback => {
                let pred = vec![fallback_rate(cal_y); test_s.len()];
                let o = scored(
                    plan,
                    name,
                    &pred,
                    test_y,
                    UnitStatus::Fallback,
                    BTreeMap::new(),
                    fit_ms,
                    Some(e.to_string()),
                );
                Ok((o, Some(pred)))
            }
            FitFailurePolicy::Drop => {
                let status = if matches!(e, FitError::OneClass { .. }) {
                    UnitStatus::OneClass
                } else {
                    UnitStatus::Failed
                };
                Ok((
                    MethodOutcome {
                        method: name.to_string(),
                        status,
                        metrics: vec![None; plan.metrics.len()],
                        clipped: None,
                        extras: BTreeMap::new(),
                        fit_ms,
                        error: Some(e.to_string()),
                    },
                    None,
                ))
            }
        },
    }
}

/// For each row-decomposable metric, summarise the per-test-row difference of
/// each method to the reference (`stats::paired::row_summary`) into extra
/// columns `<metric>_<summary>`; the interval estimators use them to measure
/// the shared test set's part of the uncertainty.
///
/// For a metric with extreme rows (`MetricId::extreme_row_loss`), every method
/// also gets `<metric>_extreme_rows`: the number of test rows whose row loss
/// reaches that limit (for log loss, a predicted probability ≤ clip for the
/// row's observed class). The default interval widens its reservoir term when
/// either method of a comparison has such rows.
pub(crate) fn add_row_summaries(
    plan: &Plan,
    labels: &[bool],
    preds: &[Option<Vec<f64>>],
    methods: &mut [MethodOutcome],
    reference: Option<usize>,
) {
    let s = &plan.metric_settings;
    for mid in &plan.metrics {
        let Some(limit) = mid.extreme_row_loss(s) else {
            continue;
        };
        for (mi, pm) in preds.iter().enumerate() {
            if let Some(pm) = pm {
                let n = pm
                    .iter()
                    .zip(labels)
                    .filter(|&(&p, &y)| mid.row_term(p, y, s) >= limit)
                    .count();
                methods[mi].extras.insert(
                    format!("{}_{}", mid.as_str(), paired::EXTREME_ROWS),
                    n as f64,
                );
            }
        }
    }
    let Some(ri) = reference else {
        return;
    };
    let Some(rp) = &preds[ri] else { return };
    let batch = paired::test_batches(labels.len());
    for mid in plan.metrics.iter().filter(|m| m.row_terms()) {
        let rterms: Vec<f64> = rp
            .iter()
            .zip(labels)
            .map(|(&p, &y)| mid.row_term(p, y, s))
            .collect();
        for (mi, pm) in preds.iter().enumerate() {
            let (true, Some(pm)) = (mi != ri, pm) else {
                continue;
            };
            let e: Vec<f64> = pm
                .iter()
                .zip(labels)
                .zip(&rterms)
                .map(|((&p, &y), &r)| mid.row_term(p, y, s) - r)
                .collect();
            for (name, v) in paired::row_summary_in(&batch, &e) {
                if v.is_finite() {
                    // Seven significant digits are plenty for a variance
                    // estimate and keep units.csv a third smaller; the value is
                    // rounded here, so statistics from memory and from the
                    // file agree exactly.
                    let v: f64 = format!("{v:.6e}").parse().unwrap_or(v);
                    methods[mi]
                        .extras
                        .insert(format!("{}_{name}", mid.as_str()), v);
                }
            }
        }
    }
}

/// Run every unit of the plan not already in `done`; `on_done` sees each newly
/// finished unit (the journal writer).
pub fn run(
    plan: &Plan,
    opts: &RunOptions,
    done: Vec<UnitOutcome>,
    on_done: &(dyn Fn(&UnitOutcome) -> Result<(), String> + Sync),
) -> Result<RunOutput, RunError> {
    run_keys(plan, opts, &unit_keys(plan), done, on_done)
}

/// Run the units `keys` (a subset of [`unit_keys`], e.g. one shard or a
/// verification sample) not already in `done`. The table holds these units
/// only; each is computed exactly as in a whole run.
pub fn run_keys(
    plan: &Plan,
    opts: &RunOptions,
    keys: &[(usize, usize, usize)],
    done: Vec<UnitOutcome>,
    on_done: &(dyn Fn(&UnitOutcome) -> Result<(), String> + Sync),
) -> Result<RunOutput, RunError> {
    let (units, threads, resumed) = run_outcomes(plan, opts, keys, done, on_done)?;
    Ok(assemble(plan, units, threads, resumed))
}

/// [`run_keys`] without building the table: the finished units (in no
/// particular order), the worker threads and the number of units taken from
/// `done`.
pub fn run_outcomes(
    plan: &Plan,
    opts: &RunOptions,
    keys: &[(usize, usize, usize)],
    done: Vec<UnitOutcome>,
    on_done: &(dyn Fn(&UnitOutcome) -> Result<(), String> + Sync),
) -> Result<(Vec<UnitOutcome>, usize, usize), RunError> {
    let mut data = Vec::with_capacity(plan.tasks.len());
    for t in &plan.tasks {
        let calibrators = plan
            .methods
            .iter()
            .map(|m| {
                m.spec.build(t.score_kind).map_err(|e| RunError::Build {
                    task: t.id.clone(),
                    method: m.id.clone(),
                    message: e.to_string(),
                })
            })
            .collect::<Result<Vec<_>, _>>()?;
        data.push(TaskData {
            test_scores: t.test.iter().map(|&i| t.pool.scores[i]).collect(),
            test_labels: t.test.iter().map(|&i| t.pool.labels[i]).collect(),
            calibrators,
        });
    }
    let wanted: BTreeSet<(&str, usize, usize)> = keys
        .iter()
        .map(|&(ti, s, r)| (plan.tasks[ti].id.as_str(), s, r))
        .collect();
    let mut done = done;
    done.retain(|u| wanted.contains(&(u.task.as_str(), u.size, u.repeat)));
    let done_keys: BTreeSet<(String, usize, usize)> = done
        .iter()
        .map(|u| (u.task.clone(), u.size, u.repeat))
        .collect();
    let todo: Vec<_> = keys
        .iter()
        .copied()
        .filter(|&(ti, s, r)| !done_keys.contains(&(plan.tasks[ti].id.clone(), s, r)))
        .collect();
    let resumed_units = keys.len() - todo.len();
    let (finished, threads) = execute(
        &todo,
        keys.len(),
        (
            "{spinner} {wide_bar} {pos}/{len} units · {rate} · ETA {eta}",
            "run",
        ),
        opts,
        done,
        &|(ti, size, r)| run_unit(plan, &data, ti, size, r).map(|u| vec![u]),
        on_done,
    )?;
    Ok((finished, threads, resumed_units))
}

/// The parallel loop shared by suites and protocol studies: `work` turns one
/// key into finished units, each handed to `on_done` (the journal) as soon as
/// it exists. The first journal failure stops the loop. The progress (bar
/// template, and the label of progress lines off a terminal) counts keys and
/// starts at those already done. Returns every finished unit
/// (`done` first, the rest in completion order; `assemble` sorts) and the
/// number of worker threads.
pub(crate) fn execute<K: Copy + Sync>(
    todo: &[K],
    total: usize,
    (bar_template, label): (&str, &str),
    opts: &RunOptions,
    done: Vec<UnitOutcome>,
    work: &(dyn Fn(K) -> Result<Vec<UnitOutcome>, String> + Sync),
    on_done: &(dyn Fn(&UnitOutcome) -> Result<(), String> + Sync),
) -> Result<(Vec<UnitOutcome>, usize), RunError> {
    let pool = thread_pool(opts.threads)?;
    let threads = pool.current_num_threads();
    let bar = progress::Progress::new(total as u64, bar_template, label, "units", opts.quiet);
    bar.set_position(total.saturating_sub(todo.len()) as u64);
    let finished: Mutex<Vec<UnitOutcome>> = Mutex::new(done);
    let journal_error: Mutex<Option<String>> = Mutex::new(None);
    // A fit failure under on_fit_failure = "stop" also sets the journal flag,
    // which makes the other workers skip their remaining keys.
    let stop_error: Mutex<Option<String>> = Mutex::new(None);
    pool.install(|| {
        todo.par_iter().for_each(|&key| {
            if journal_error.lock().map(|e| e.is_some()).unwrap_or(true) {
                return;
            }
            let units = match work(key) {
                Ok(u) => u,
                Err(e) => {
                    if let Ok(mut s) = stop_error.lock() {
                        s.get_or_insert(e);
                    }
                    if let Ok(mut j) = journal_error.lock() {
                        j.get_or_insert(String::new());
                    }
                    return;
                }
            };
            for u in &units {
                if let Err(e) = on_done(u) {
                    if let Ok(mut j) = journal_error.lock() {
                        j.get_or_insert(e);
                    }
                }
            }
            if let Ok(mut f) = finished.lock() {
                f.extend(units);
            }
            bar.inc();
        });
    });
    bar.finish();
    if let Some(e) = stop_error.into_inner().unwrap_or(None) {
        return Err(RunError::FitStopped(e));
    }
    if let Some(e) = journal_error.into_inner().unwrap_or(None) {
        return Err(RunError::Journal(e));
    }
    Ok((finished.into_inner().unwrap_or_default(), threads))
}

/// A worker pool of `threads` threads (`None` = rayon's default, which honours
/// `RAYON_NUM_THREADS`).
pub(crate) fn thread_pool(threads: Option<usize>) -> Result<rayon::ThreadPool, RunError> {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads.unwrap_or(0))
        .build()
        .map_err(|e| RunError::Threads(e.to_string()))
}

/// Sort units into output order: task order, then (for a protocol study's
/// `<task>@<method>` rows) method order, then size and repeat.
pub fn sort_units(tasks: &[&str], methods: &[&str], units: &mut [UnitOutcome]) {
    let task_pos: BTreeMap<&str, usize> = tasks.iter().enumerate().map(|(i, t)| (*t, i)).collect();
    let method_pos = |m: &str| methods.iter().position(|x| *x == m).unwrap_or(usize::MAX);
    units.sort_by_cached_key(|u| {
        let (base, method) = u.task.split_once('@').unwrap_or((u.task.as_str(), ""));
        (
            task_pos.get(base).copied().unwrap_or(usize::MAX),
            method_pos(method),
            u.size,
            u.repeat,
        )
    });
}

/// Sort finished units into the plan's order and build the unit table.
pub fn assemble(
    plan: &Plan,
    units: Vec<UnitOutcome>,
    threads: usize,
    resumed_units: usize,
) -> RunOutput {
    let tasks: Vec<&str> = plan.tasks.iter().map(|t| t.id.as_str()).collect();
    let methods: Vec<&str> = plan.methods.iter().map(|m| m.id.as_str()).collect();
    let metrics = plan
        .metrics
        .iter()
        .map(|m| m.as_str().to_string())
        .collect();
    assemble_ordered(&tasks, &methods, metrics, units, threads, resumed_units)
}

/// [`assemble`] from the plan's task order, method order and metric columns
/// alone (what `plumbline merge` knows from the shards' manifests).
pub fn assemble_ordered(
    tasks: &[&str],
    methods: &[&str],
    metric_names: Vec<String>,
    mut units: Vec<UnitOutcome>,
    threads: usize,
    resumed_units: usize,
) -> RunOutput {
    sort_units(tasks, methods, &mut units);
    let extra_names: Vec<String> = units
        .iter()
        .flat_map(|u| u.methods.iter().flat_map(|m| m.extras.keys().cloned()))
        .collect::<BTreeSet<_>>()
        .into_iter()
        .collect();
    let mut rows = Vec::new();
    let mut timings = Vec::new();
    let mut warnings = Vec::new();
    let mut failures: BTreeMap<(String, String, bool), (usize, String)> = BTreeMap::new();
    // Units whose calibration sample held one class: every method failed for
    // the same reason, so they make one warning per task, not one per method.
    let mut one_class: BTreeMap<(String, bool), (usize, String)> = BTreeMap::new();
    let mut curves = Vec::new();
    for u in &units {
        let sample_one_class = !u.methods.is_empty()
            && u.methods.iter().all(|m| {
                m.error
                    .as_deref()
                    .is_some_and(|e| e.starts_with("one class"))
            });
        if sample_one_class {
            let fallback = u.methods.iter().all(|m| m.status.is_fallback());
            let entry = one_class
                .entry((u.task.clone(), fallback))
                .or_insert((0, u.methods[0].error.clone().unwrap_or_default()));
            entry.0 += 1;
        }
        for c in &u.curves {
            curves.push(CurveRecord {
                task: u.task.clone(),
                size: u.size,
                repeat: u.repeat,
                curve: c.clone(),
            });
        }
        for m in &u.methods {
            rows.push(UnitRow {
                task: u.task.clone(),
                size: u.size,
                repeat: u.repeat,
                method: m.method.clone(),
                status: m.status.clone(),
                metrics: m.metrics.clone(),
                clipped: m.clipped,
                positives: u.positives,
                reservoir: u.reservoir,
                test_rows: u.test_rows,
                extras: extra_names
                    .iter()
                    .map(|n| m.extras.get(n).copied())
                    .collect(),
            });
            timings.push(Timing {
                task: u.task.clone(),
                size: u.size,
                repeat: u.repeat,
                method: m.method.clone(),
                fit_ms: m.fit_ms,
            });
            if let (Some(e), false) = (&m.error, sample_one_class) {
                let entry = failures
                    .entry((u.task.clone(), m.method.clone(), m.status.is_fallback()))
                    .or_insert((0, e.clone()));
                entry.0 += 1;
            }
        }
    }
    for ((task, fallback), (count, first)) in one_class {
        warnings.push(if fallback {
            format!(
                "task `{task}`: {count} unit(s) drew a calibration sample of one class (first: {first}); every method predicted the smoothed base rate (status {FALLBACK_BASE_RATE})"
            )
        } else {
            format!(
                "task `{task}`: {count} unit(s) drew a calibration sample of one class (first: {first}) and were left out of the comparisons (on_fit_failure = \"drop\")"
            )
        });
    }
    for ((task, method, fallback), (count, first)) in failures {
        warnings.push(if fallback {
            format!(
                "task `{task}`, method `{method}`: {count} fit(s) could not be made and predicted the smoothed base rate (status {FALLBACK_BASE_RATE}); first reason: {first}"
            )
        } else {
            format!(
                "task `{task}`, method `{method}`: {count} fit(s) failed and were left out of the comparisons (on_fit_failure = \"drop\"); first error: {first}"
            )
        });
    }
    let table = UnitTable {
        metric_names,
        extra_names,
        rows,
    };
    RunOutput {
        table,
        curves,
        timings,
        warnings,
        threads,
        resumed_units,
    }
}
