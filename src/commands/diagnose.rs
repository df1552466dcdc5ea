//! `plumbline diagnose`: every calibration metric of the suite on one score
//! file, with seeded bootstrap intervals, and optionally a paired comparison
//! with a second score column of the same rows.
//!
//! Intervals (`docs/statistics.md`, "Intervals of `plumbline diagnose`"): B
//! resamples of the n rows drawn with replacement and the metric computed on
//! each; resamples where a metric is undefined (one class for AUC or the
//! slope) are left out and counted. Two kinds:
//!
//! - Measures whose plug-in estimate is biased upward by noise (see
//!   [`debiased`]: miscalibration, resolution and discrimination terms) get
//!   the bootstrap-debiased estimate 2θ̂ − mean(θ*) and the basic interval
//!   [2θ̂ − q_{(1+c)/2}, 2θ̂ − q_{(1−c)/2}] (Davison & Hinkley 1997,
//!   "Bootstrap Methods and their Application", §2.4, §5.2), both truncated
//!   below at 0, the measures' natural bound. The percentile interval of
//!   these measures sits above the estimate and can exclude it.
//! - Every other metric gets the bias-corrected and accelerated (BCa)
//!   interval (Efron 1987, JASA 82), the acceleration from a jackknife:
//!   delete-one up to [`JACKKNIFE_GROUPS`] rows, beyond that delete-group over
//!   that many fixed, seeded groups, so its cost stays linear in n. Where the
//!   estimate lies below or above every resample BCa is undefined and the
//!   percentile interval is used (kind `percentile`).
//!
//! Quantiles interpolate linearly between order statistics (Hyndman & Fan
//! 1996 type 7). An interval that does not contain its reported estimate
//! carries a note saying why. With `--compare`, both columns are scored on
//! the same resampled rows and the interval is that of the paired difference
//! (main − compare), same kinds without the truncation.
//!
//! Reading: one line per column from the calibration slope and intercept and
//! their intervals ([`reading`]), in the table's notes and `reading.txt`.
//!
//! Reliability diagram: the CORP curve with its consistency band
//! ([`crate::metrics::reliability::curve`], a run's default label draws,
//! the band at the intervals' `--confidence` level) of each column, drawn by the run report's own figure code
//! ([`crate::report::figures::reliability_grid`]) into `reliability.svg`.
//!
//! Murphy diagram: the mean elementary score of each column on a fixed θ
//! grid ([`crate::metrics::elementary`]) in `murphy.csv` ([`murphy_csv`]).
//!
//! Resample b draws its rows from ChaCha8 seeded with `split::mix(seed,
//! [tag, b])`, so the output is identical whatever the thread count.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{bail, Result};
use rayon::prelude::*;

use crate::calibrate::ScoreKind;
use crate::data::scorefile::{self, Origin, ScoreFileSpec};
use crate::metrics::reliability::{self, BandSettings, CurveRecord};
use crate::metrics::{MetricId, MetricSettings};
use crate::report::document::Term;
use crate::report::{figures, Table};
use crate::run::{output, table::num};
use crate::split;

#[derive(Debug, Clone, clap::Args)]
pub struct DiagnoseArgs {
    /// Score file with probabilities and labels (CSV, gzip CSV, Parquet, `-`).
    pub file: PathBuf,
    /// Output folder (metrics.csv, reading.txt, reliability.svg, murphy.csv, and compare.csv with --compare); written whole or not at all.
    #[arg(long, value_name = "DIR")]
    pub out: PathBuf,
    /// Probability column.
    #[arg(long, default_value = "score", value_name = "NAME")]
    pub score_column: String,
    /// Label column (0/1 or true/false).
    #[arg(long, default_value = "label", value_name = "NAME")]
    pub label_column: String,
    /// A second probability column of the same rows to compare with (paired bootstrap).
    #[arg(long, value_name = "COLUMN")]
    pub compare: Option<String>,
    /// Bootstrap resamples.
    #[arg(long, default_value_t = 1000, value_name = "B")]
    pub bootstrap: usize,
    /// Seed of the resamples.
    #[arg(long, default_value_t = 1, value_name = "S")]
    pub seed: u64,
    /// Confidence level of the intervals.
    #[arg(long, default_value_t = 0.95, value_name = "C")]
    pub confidence: f64,
    /// Operating threshold of `threshold_cost` and `net_benefit`: a row is acted on when p ≥ T; strictly between 0 and 1.
    #[arg(long, default_value_t = 0.5, value_name = "T")]
    pub decision_threshold: f64,
    /// Replace an existing output folder.
    #[arg(long)]
    pub force: bool,
}

/// Jackknife groups for the BCa acceleration: files of at most this many
/// rows use the delete-one jackknife, larger files this many seeded groups.
pub const JACKKNIFE_GROUPS: usize = 100;

/// How a metric's interval is formed (see the module doc).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IntervalKind {
    /// Bias-corrected and accelerated bootstrap percentile interval.
    Bca,
    /// Bootstrap percentile interval: where BCa's bias correction is
    /// infinite (the estimate lies below or above every resample).
    Percentile,
    /// Bootstrap-debiased estimate 2θ̂ − mean(θ*) with the basic interval.
    DebiasedBasic,
    /// The same, truncated below at 0 (the measure's natural bound).
    DebiasedBasicFloor0,
}

impl IntervalKind {
    /// The id written to the CSV files.
    pub fn as_str(self) -> &'static str {
        match self {
            IntervalKind::Bca => "bca",
            IntervalKind::Percentile => "percentile",
            IntervalKind::DebiasedBasic => "debiased_basic",
            IntervalKind::DebiasedBasicFloor0 => "debiased_basic_floor0",
        }
    }

    /// The terminal table's name.
    pub fn label(self) -> &'static str {
        match self {
            IntervalKind::Bca => "BCa",
            IntervalKind::Percentile => "percentile",
            IntervalKind::DebiasedBasic => "debiased basic",
            IntervalKind::DebiasedBasicFloor0 => "debiased basic, ≥ 0",
        }
    }
}

/// True for the measures whose plug-in estimate is biased upward by noise
/// alone, so that their resamples sit above the estimate: the miscalibration
/// measures (Murphy REL, CORP MCB, both ECEs, smooth ECE, ICI) and the
/// resolution and discrimination terms (Murphy RES, CORP DSC, whose binning
/// or isotonic fit follows the noise too). All are non-negative. They get
/// the debiased estimate and the basic interval; every other metric gets BCa.
pub fn debiased(m: MetricId) -> bool {
    use MetricId::*;
    matches!(
        m,
        MurphyRel
            | MurphyRes
            | CorpBrierMcb
            | CorpBrierDsc
            | CorpLogMcb
            | CorpLogDsc
            | EceWidth
            | EceMass
            | SmoothEce
            | Ici
    )
}

/// One metric's estimate and interval.
#[derive(Debug, Clone, PartialEq)]
pub struct Estimate {
    pub metric: MetricId,
    /// The plain estimate: the metric on the file's rows.
    pub value: f64,
    /// The reported estimate: `value`, or for the debiased kinds
    /// 2·value − mean(θ*) (truncated at 0 for the `Floor0` kind).
    pub estimate: f64,
    pub lo: f64,
    pub hi: f64,
    pub kind: IntervalKind,
    /// Resamples where the metric was defined.
    pub defined: usize,
    /// Empty, or why the interval does not contain the reported estimate
    /// (or is undefined).
    pub note: String,
}

/// What `diagnose` computed.
#[derive(Debug, Clone)]
pub struct Diagnosis {
    pub rows: usize,
    pub single: Vec<Estimate>,
    /// With --compare: the compared column's values and the paired differences.
    pub compare: Option<(Vec<Estimate>, Vec<Estimate>)>,
    /// One reading per column (column name, text): see [`reading`].
    pub readings: Vec<(String, String)>,
    pub table: Table,
    /// The reliability diagram (SVG) of the column(s).
    pub svg: String,
    /// The Murphy diagram as CSV: θ on the fixed grid and the mean
    /// elementary score of each column ([`murphy_csv`]).
    pub murphy: String,
}

impl Diagnosis {
    /// The table as terminal text for standard output: as wide as `COLUMNS`,
    /// else the terminal, else 100 columns, with the report's table layout
    /// (intervals and words kept whole, a table too wide split into parts).
    pub fn terminal(&self) -> String {
        self.table.to_terminal(&Term::detect())
    }
}

/// Type-7 quantile of sorted values.
pub fn quantile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let h = (sorted.len() - 1) as f64 * q;
    let i = h.floor() as usize;
    let j = (i + 1).min(sorted.len() - 1);
    sorted[i] + (h - i as f64) * (sorted[j] - sorted[i])
}

fn std_normal() -> statrs::distribution::Normal {
    statrs::distribution::Normal::new(0.0, 1.0).expect("standard normal")
}

/// BCa acceleration from jackknife estimates θ_(g) (delete-one or
/// delete-group): a = Σ U³ / (6 (Σ U²)^{3/2}) with U_g = mean(θ_(·)) − θ_(g)
/// (Efron 1987, JASA 82, eq. 6.6). Non-finite values are left out; 0 when
/// fewer than 3 remain or they are all equal.
pub fn acceleration(jack: &[f64]) -> f64 {
    let v: Vec<f64> = jack.iter().copied().filter(|x| x.is_finite()).collect();
    if v.len() < 3 {
        return 0.0;
    }
    let mean = v.iter().sum::<f64>() / v.len() as f64;
    let (s2, s3) = v.iter().fold((0.0, 0.0), |(s2, s3), x| {
        let u = mean - x;
        (s2 + u * u, s3 + u * u * u)
    });
    if s2 > 0.0 {
        s3 / (6.0 * s2.powf(1.5))
    } else {
        0.0
    }
}

/// BCa interval at confidence `c` from the sorted finite resamples, the
/// estimate and the acceleration: z₀ = Φ⁻¹(share of resamples below the
/// estimate, ties counting half), and the quantiles
/// Φ(z₀ + (z₀ + z_α)/(1 − a(z₀ + z_α))) for z_α = Φ⁻¹((1 ∓ c)/2).
/// `None` when z₀ is infinite or a denominator is not positive.
pub fn bca(value: f64, sorted: &[f64], accel: f64, c: f64) -> Option<(f64, f64)> {
    use statrs::distribution::ContinuousCDF;
    if sorted.is_empty() || !value.is_finite() {
        return None;
    }
    let below = sorted.iter().filter(|&&x| x < value).count() as f64;
    let ties = sorted.iter().filter(|&&x| x == value).count() as f64;
    let p0 = (below + 0.5 * ties) / sorted.len() as f64;
    if !(p0 > 0.0 && p0 < 1.0) {
        return None;
    }
    let nd = std_normal();
    let z0 = nd.inverse_cdf(p0);
    let adj = |alpha: f64| -> Option<f64> {
        let z = z0 + nd.inverse_cdf(alpha);
        let d = 1.0 - accel * z;
        (d > 0.0).then(|| nd.cdf(z0 + z / d))
    };
    let a1 = adj((1.0 - c) / 2.0)?;
    let a2 = adj((1.0 + c) / 2.0)?;
    Some((quantile(sorted, a1), quantile(sorted, a2)))
}

/// Bootstrap-debiased estimate 2θ̂ − mean(θ*) and the basic interval
/// [2θ̂ − q_{(1+c)/2}, 2θ̂ − q_{(1−c)/2}] (Davison & Hinkley 1997, §2.4 and
/// §5.2), each truncated below at `floor` when given.
pub fn debiased_basic(value: f64, sorted: &[f64], c: f64, floor: Option<f64>) -> (f64, f64, f64) {
    let mean = sorted.iter().sum::<f64>() / sorted.len() as f64;
    let cut = |x: f64| match floor {
        Some(f) if x < f => f,
        _ => x,
    };
    (
        cut(2.0 * value - mean),
        cut(2.0 * value - quantile(sorted, (1.0 + c) / 2.0)),
        cut(2.0 * value - quantile(sorted, (1.0 - c) / 2.0)),
    )
}

/// The estimate and interval of `metric` from its value on the rows, its
/// resamples and (for BCa) its jackknife values. `floor` applies to the
/// debiased kinds (0 for a metric's own values, none for differences).
pub fn interval(
    metric: MetricId,
    value: f64,
    mut reps: Vec<f64>,
    jack: &[f64],
    c: f64,
    floor: Option<f64>,
) -> Estimate {
    reps.retain(|v| v.is_finite());
    reps.sort_unstable_by(f64::total_cmp);
    let mut e = Estimate {
        metric,
        value,
        estimate: value,
        lo: f64::NAN,
        hi: f64::NAN,
        kind: match (debiased(metric), floor) {
            (true, Some(_)) => IntervalKind::DebiasedBasicFloor0,
            (true, None) => IntervalKind::DebiasedBasic,
            (false, _) => IntervalKind::Bca,
        },
        defined: reps.len(),
        note: String::new(),
    };
    if !value.is_finite() {
        e.note = "undefined on the file's rows".into();
        return e;
    }
    if reps.len() < 2 {
        e.note = format!("defined in {} resample(s): no interval", reps.len());
        return e;
    }
    if debiased(metric) {
        (e.estimate, e.lo, e.hi) = debiased_basic(value, &reps, c, floor);
        if !(e.lo <= e.estimate && e.estimate <= e.hi) {
            e.note = "the mean of the resamples lies outside their central range \
                      (a heavy tail), so the debiased estimate lies outside the interval"
                .into();
        }
        return e;
    }
    match bca(value, &reps, acceleration(jack), c) {
        Some((lo, hi)) => (e.lo, e.hi) = (lo, hi),
        None => {
            e.kind = IntervalKind::Percentile;
            e.lo = quantile(&reps, (1.0 - c) / 2.0);
            e.hi = quantile(&reps, (1.0 + c) / 2.0);
        }
    }
    if !(e.lo <= value && value <= e.hi) {
        let below = reps.iter().filter(|&&x| x < value).count();
        e.note = format!(
            "{below} of {} resamples lie below the estimate: the bootstrap distribution \
             is too lopsided for the interval to contain it",
            reps.len()
        );
    }
    e
}

/// Per resample: the metrics of each score column (`cols[k][m]`).
fn resample(
    cols: &[&[f64]],
    y: &[bool],
    settings: &MetricSettings,
    seed: u64,
    b: usize,
) -> Vec<Vec<f64>> {
    let n = y.len();
    let mut rng = split::rng(split::mix(seed, &[split::fnv1a(b"diagnose"), b as u64]));
    let idx: Vec<usize> = (0..n)
        .map(|_| split::below(&mut rng, n as u64) as usize)
        .collect();
    let yb: Vec<bool> = idx.iter().map(|&i| y[i]).collect();
    cols.iter()
        .map(|p| {
            let pb: Vec<f64> = idx.iter().map(|&i| p[i]).collect();
            MetricId::ALL
                .iter()
                .map(|m| m.compute(&pb, &yb, settings))
                .collect()
        })
        .collect()
}

/// Jackknife group of each row: row i alone for files of at most
/// [`JACKKNIFE_GROUPS`] rows (delete-one), otherwise a seeded shuffle of the
/// rows dealt round-robin into [`JACKKNIFE_GROUPS`] groups (sizes differ by at
/// most 1), so the jackknife costs a fixed number of metric evaluations.
pub fn jackknife_groups(n: usize, seed: u64) -> (usize, Vec<u32>) {
    if n <= JACKKNIFE_GROUPS {
        return (n, (0..n as u32).collect());
    }
    let mut rng = split::rng(split::mix(seed, &[split::fnv1a(b"diagnose-jackknife")]));
    let order = split::sample_indices(n, n, &mut rng);
    let mut g = vec![0u32; n];
    for (k, &i) in order.iter().enumerate() {
        g[i] = (k % JACKKNIFE_GROUPS) as u32;
    }
    (JACKKNIFE_GROUPS, g)
}

/// The metrics of each column without the rows of jackknife group `g`
/// (`[k][m]`); NaN for the debiased metrics, which use no jackknife.
fn jackknife(
    cols: &[&[f64]],
    y: &[bool],
    settings: &MetricSettings,
    groups: &[u32],
    g: u32,
) -> Vec<Vec<f64>> {
    let keep: Vec<usize> = (0..y.len()).filter(|&i| groups[i] != g).collect();
    let yj: Vec<bool> = keep.iter().map(|&i| y[i]).collect();
    cols.iter()
        .map(|p| {
            let pj: Vec<f64> = keep.iter().map(|&i| p[i]).collect();
            MetricId::ALL
                .iter()
                .map(|m| {
                    if debiased(*m) {
                        f64::NAN
                    } else {
                        m.compute(&pj, &yj, settings)
                    }
                })
                .collect()
        })
        .collect()
}

fn load(
    args: &DiagnoseArgs,
    column: &str,
) -> Result<(Vec<f64>, Vec<bool>), scorefile::ScoreFileError> {
    let l = scorefile::load(&ScoreFileSpec {
        path: args.file.clone(),
        score_column: column.to_string(),
        label_column: args.label_column.clone(),
        score_kind: ScoreKind::Probability,
        split_column: None,
        truth_column: None,
        fold_column: None,
        origin: Origin::CommandLine,
    })
    .map_err(|e| e.with_range_hint("diagnose reads probabilities"))?;
    Ok((l.pool.scores, l.pool.labels))
}

/// Number format of the readings.
fn short(v: f64) -> String {
    format!("{v:.3}")
}

/// The one-line reading of a column from its calibration slope and
/// intercept and their intervals: over-confident when the slope's interval
/// lies below 1, under-confident when above; calibration-in-the-large off
/// when the intercept's interval excludes 0; otherwise no evidence of
/// miscalibration (of the kind a logistic recalibration can see).
pub fn reading(est: &[Estimate]) -> String {
    let find = |id: MetricId| est.iter().find(|e| e.metric == id);
    let (Some(s), Some(a)) = (
        find(MetricId::CalibrationSlope),
        find(MetricId::CalibrationIntercept),
    ) else {
        return "no reading: calibration slope or intercept not computed".into();
    };
    for e in [s, a] {
        if !(e.estimate.is_finite() && e.lo.is_finite() && e.hi.is_finite()) {
            return format!(
                "no reading: {} undefined ({})",
                e.metric.as_str().replace('_', " "),
                if e.note.is_empty() {
                    "no finite interval"
                } else {
                    &e.note
                }
            );
        }
    }
    let iv = |e: &Estimate| format!("{} [{}, {}]", short(e.estimate), short(e.lo), short(e.hi));
    let mut parts = Vec::new();
    if s.hi < 1.0 {
        parts.push(format!("over-confident: calibration slope {} < 1", iv(s)));
    } else if s.lo > 1.0 {
        parts.push(format!("under-confident: calibration slope {} > 1", iv(s)));
    }
    if a.lo > 0.0 {
        parts.push(format!(
            "calibration-in-the-large off: intercept {} excludes 0 (predictions too low on average)",
            iv(a)
        ));
    } else if a.hi < 0.0 {
        parts.push(format!(
            "calibration-in-the-large off: intercept {} excludes 0 (predictions too high on average)",
            iv(a)
        ));
    }
    if parts.is_empty() {
        format!(
            "no evidence of miscalibration: calibration slope {} covers 1 and intercept {} covers 0",
            iv(s),
            iv(a)
        )
    } else {
        parts.join("; ")
    }
}

/// Compute the diagnosis (no files written).
pub fn diagnose(args: &DiagnoseArgs) -> Result<Diagnosis> {
    if !(args.confidence > 0.0 && args.confidence < 1.0) {
        bail!(
            "--confidence {}: must lie strictly between 0 and 1",
            args.confidence
        );
    }
    if args.bootstrap < 2 {
        bail!("--bootstrap {}: need at least 2 resamples", args.bootstrap);
    }
    if let Some(c) = &args.compare {
        super::require_name(
            "--compare",
            c,
            "name the second probability column of the file",
        )?;
    }
    if args.compare.is_some() && args.file.as_os_str() == "-" {
        bail!("--compare reads the file twice; give a file name instead of `-`");
    }
    let settings = MetricSettings {
        decision_threshold: args.decision_threshold,
        ..MetricSettings::default()
    };
    if let Err(e) = settings.validate() {
        bail!("--decision-threshold {}: {}", e.value, e.reason);
    }
    let (p, y) = load(args, &args.score_column)?;
    let other = match &args.compare {
        Some(c) => Some(
            load(args, c)
                .map_err(|e| match e {
                    // The compared column is looked up as the score column:
                    // name the option the user gave.
                    scorefile::ScoreFileError::MissingColumn {
                        path,
                        column,
                        detail,
                        ..
                    } => scorefile::ScoreFileError::MissingColumn {
                        path,
                        column,
                        role: "--compare".into(),
                        detail,
                    },
                    e => e,
                })?
                .0,
        ),
        None => None,
    };
    let mut cols: Vec<&[f64]> = vec![&p];
    if let Some(o) = &other {
        cols.push(o);
    }
    let point: Vec<Vec<f64>> = cols
        .iter()
        .map(|c| {
            MetricId::ALL
                .iter()
                .map(|m| m.compute(c, &y, &settings))
                .collect()
        })
        .collect();
    let reps: Vec<Vec<Vec<f64>>> = (0..args.bootstrap)
        .into_par_iter()
        .map(|b| resample(&cols, &y, &settings, args.seed, b))
        .collect();
    let (ngroups, groups) = jackknife_groups(y.len(), args.seed);
    let jack: Vec<Vec<Vec<f64>>> = (0..ngroups as u32)
        .into_par_iter()
        .map(|g| jackknife(&cols, &y, &settings, &groups, g))
        .collect();
    let c = args.confidence;
    let est = |k: usize| -> Vec<Estimate> {
        MetricId::ALL
            .iter()
            .enumerate()
            .map(|(m, &id)| {
                let j: Vec<f64> = jack.iter().map(|r| r[k][m]).collect();
                interval(
                    id,
                    point[k][m],
                    reps.iter().map(|r| r[k][m]).collect(),
                    &j,
                    c,
                    Some(0.0),
                )
            })
            .collect()
    };
    let single = est(0);
    let compare = other.as_ref().map(|_| {
        let diff: Vec<Estimate> = MetricId::ALL
            .iter()
            .enumerate()
            .map(|(m, &id)| {
                let j: Vec<f64> = jack.iter().map(|r| r[0][m] - r[1][m]).collect();
                interval(
                    id,
                    point[0][m] - point[1][m],
                    reps.iter().map(|r| r[0][m] - r[1][m]).collect(),
                    &j,
                    c,
                    None,
                )
            })
            .collect();
        (est(1), diff)
    });
    let mut readings = vec![(args.score_column.clone(), reading(&single))];
    if let (Some(cn), Some((o, _))) = (&args.compare, &compare) {
        readings.push((cn.clone(), reading(o)));
    }

    let pct = format!("{}%", num(100.0 * c));
    // Headed `value`, not after the score column: the column is named in
    // the title, and a header "score" would read as the score column itself.
    let mut header = vec![
        "metric".to_string(),
        "value".to_string(),
        "estimate".to_string(),
        format!("{pct} interval"),
        "interval kind".to_string(),
    ];
    if let Some(cn) = &args.compare {
        header.push(format!("{cn} estimate"));
        header.push(format!("difference ({pct} paired interval)"));
        header.push("difference kind".to_string());
    }
    let f = |v: f64| {
        if v.is_finite() {
            format!("{v:.5}")
        } else {
            "—".into()
        }
    };
    let mark = |e: &Estimate| if e.note.is_empty() { "" } else { " *" };
    let rows = single
        .iter()
        .enumerate()
        .map(|(i, e)| {
            let mut r = vec![
                e.metric.as_str().to_string(),
                f(e.value),
                f(e.estimate),
                format!("[{}, {}]{}", f(e.lo), f(e.hi), mark(e)),
                e.kind.label().to_string(),
            ];
            if let Some((o, d)) = &compare {
                r.push(format!("{}{}", f(o[i].estimate), mark(&o[i])));
                r.push(format!(
                    "{} [{}, {}]{}",
                    f(d[i].estimate),
                    f(d[i].lo),
                    f(d[i].hi),
                    mark(&d[i])
                ));
                r.push(d[i].kind.label().to_string());
            }
            r
        })
        .collect();
    let mut notes = vec![
        format!(
            "{} bootstrap resamples, seed {}; BCa acceleration from a {} jackknife",
            args.bootstrap,
            args.seed,
            if ngroups == y.len() {
                "delete-one".to_string()
            } else {
                format!("{ngroups}-group")
            }
        ),
        "debiased basic: estimate 2·value − mean of the resamples, basic interval; \
         ≥ 0: estimate and interval truncated at 0"
            .to_string(),
    ];
    let mut flagged = |name: &str, ests: &[Estimate]| {
        for e in ests.iter().filter(|e| !e.note.is_empty()) {
            notes.push(format!("* {name} {}: {}", e.metric.as_str(), e.note));
        }
    };
    flagged(&args.score_column, &single);
    if let (Some(cn), Some((o, d))) = (&args.compare, &compare) {
        flagged(cn, o);
        flagged("difference", d);
    }
    for (name, r) in &readings {
        notes.push(format!("reading of {name}: {r}"));
    }
    let table = Table {
        title: format!(
            "{} · column `{}`{} · {} rows",
            args.file.display(),
            args.score_column,
            args.compare
                .as_ref()
                .map(|c| format!(" compared with `{c}`"))
                .unwrap_or_default(),
            y.len()
        ),
        header,
        rows,
        notes,
    };
    let names: Vec<&str> = std::iter::once(args.score_column.as_str())
        .chain(args.compare.as_deref())
        .collect();
    let records: Vec<CurveRecord> = cols
        .iter()
        .zip(&names)
        .enumerate()
        .filter_map(|(k, (p, name))| {
            let seed = split::mix(args.seed, &[split::fnv1a(b"diagnose-band"), k as u64]);
            reliability::curve(
                name,
                p,
                &y,
                BandSettings {
                    level: args.confidence,
                    ..BandSettings::default()
                },
                seed,
            )
            .map(|curve| CurveRecord {
                task: String::new(),
                size: y.len(),
                repeat: 0,
                curve,
            })
        })
        .collect();
    let refs: Vec<&CurveRecord> = records.iter().collect();
    let label = args.file.display().to_string();
    let heading = format!(
        "{}: reliability of {} ({} rows)",
        label,
        names.join(" and "),
        y.len()
    );
    let svg = figures::reliability_grid(
        &label,
        &heading,
        &refs,
        |m| figures::style(names.iter().position(|n| *n == m).unwrap_or(0)),
        |n| format!("all {n} rows"),
        args.confidence,
    );
    let murphy = murphy_csv(&names, &cols, &y);
    Ok(Diagnosis {
        rows: y.len(),
        single,
        compare,
        readings,
        table,
        svg,
        murphy,
    })
}

/// The Murphy diagram of the columns as CSV (`murphy.csv`): a `theta`
/// column with the fixed grid θ = 0.01 … 0.99
/// ([`crate::metrics::elementary::murphy_grid`]) and, per column, the mean
/// elementary score S̄(θ) of Ehm et al. (2016) over the rows
/// ([`crate::metrics::elementary::murphy_curve`]); its integral over θ is a
/// quarter of the Brier score.
pub fn murphy_csv(names: &[&str], cols: &[&[f64]], y: &[bool]) -> String {
    use crate::metrics::elementary::{murphy_curve, murphy_grid};
    let grid = murphy_grid();
    let curves: Vec<Vec<f64>> = cols.iter().map(|p| murphy_curve(p, y, &grid)).collect();
    let mut w = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new());
    let head: Vec<&str> = std::iter::once("theta")
        .chain(names.iter().copied())
        .collect();
    // Writing to a Vec cannot fail.
    let _ = w.write_record(&head);
    for (i, &t) in grid.iter().enumerate() {
        let rec: Vec<String> = std::iter::once(num(t))
            .chain(curves.iter().map(|c| num(c[i])))
            .collect();
        let _ = w.write_record(&rec);
    }
    let bytes = w.into_inner().unwrap_or_default();
    String::from_utf8(bytes).unwrap_or_default()
}

/// CSV of estimates: per block (prefix `""` or `"name_"`) the plain value,
/// the reported estimate, the interval, its kind, the resamples where the
/// metric was defined and the note.
fn csv_rows(prefixes: &[&str], est: &[&[Estimate]]) -> Vec<u8> {
    let mut s = String::from("metric");
    for p in prefixes {
        for c in [
            "value",
            "estimate",
            "lo",
            "hi",
            "interval",
            "resamples",
            "note",
        ] {
            s.push_str(&format!(",{p}{c}"));
        }
    }
    s.push('\n');
    let quote = |t: &str| {
        if t.contains([',', '"', '\n']) {
            format!("\"{}\"", t.replace('"', "\"\""))
        } else {
            t.to_string()
        }
    };
    for i in 0..est[0].len() {
        s.push_str(est[0][i].metric.as_str());
        for e in est {
            let e = &e[i];
            s.push_str(&format!(
                ",{},{},{},{},{},{},{}",
                num(e.value),
                num(e.estimate),
                num(e.lo),
                num(e.hi),
                e.kind.as_str(),
                e.defined,
                quote(&e.note)
            ));
        }
        s.push('\n');
    }
    s.into_bytes()
}

/// `manifest.json` of a diagnose folder: what was computed, and the mark
/// that lets `--force` replace the folder later.
fn manifest(args: &DiagnoseArgs, d: &Diagnosis) -> serde_json::Value {
    serde_json::json!({
        "tool": "plumbline",
        "version": env!("CARGO_PKG_VERSION"),
        "command": "diagnose",
        "file": crate::results::shown(&args.file),
        "score_column": args.score_column,
        "label_column": args.label_column,
        "compare": args.compare,
        "rows": d.rows,
        "bootstrap": args.bootstrap,
        "seed": args.seed,
        "confidence": args.confidence,
        "decision_threshold": args.decision_threshold,
    })
}

/// `plumbline diagnose`: write the folder, print the table on standard
/// output and the row count on standard error.
pub fn run(args: &DiagnoseArgs) -> Result<ExitCode> {
    let d = write_folder(args)?;
    super::say(d.terminal())?;
    eprintln!("{} rows → {}", d.rows, args.out.display());
    Ok(ExitCode::SUCCESS)
}

/// Lock and check the output folder, compute, then write the folder
/// atomically.
pub fn write_folder(args: &DiagnoseArgs) -> Result<Diagnosis> {
    let inputs: Vec<&Path> = if args.file.as_os_str() == "-" {
        Vec::new()
    } else {
        vec![args.file.as_path()]
    };
    let target = output::prepare(&args.out, args.force, &inputs, false)?;
    let d = diagnose(args)?;
    let staging = target.staging();
    output::write_file(
        staging,
        output::MANIFEST,
        serde_json::to_string_pretty(&manifest(args, &d))?.as_bytes(),
    )?;
    let single = csv_rows(&[""], &[&d.single]);
    output::write_file(staging, "metrics.csv", &single)?;
    let mut text = String::new();
    for (name, r) in &d.readings {
        text.push_str(&format!("{name}: {r}\n"));
    }
    output::write_file(staging, "reading.txt", text.as_bytes())?;
    output::write_file(staging, "reliability.svg", d.svg.as_bytes())?;
    output::write_file(staging, "murphy.csv", d.murphy.as_bytes())?;
    if let Some((o, diff)) = &d.compare {
        let bytes = csv_rows(&["compared_", "difference_"], &[o, diff]);
        output::write_file(staging, "compare.csv", &bytes)?;
    }
    target.commit()?;
    Ok(d)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() < 1e-9
    }

    /// Delete-one jackknife of the mean of x = (0, 0, 0, 1): θ_(i) = 1/3 for
    /// the zeros and 0 for the one, mean 1/4, so U = (−1/12, −1/12, −1/12,
    /// 1/4), Σ U³ = 1/72, Σ U² = 1/12 and a = (1/72) / (6 · (1/12)^{3/2})
    /// = 0.0962250448649376 (= √3 / 18).
    #[test]
    fn acceleration_of_a_skewed_mean() {
        let a = acceleration(&[1.0 / 3.0, 1.0 / 3.0, 1.0 / 3.0, 0.0]);
        assert!(close(a, 3f64.sqrt() / 18.0), "{a}");
        assert!(close(a, 0.0962250448649376));
        // Equal values, too few values and non-finite values give 0 or are skipped.
        assert_eq!(acceleration(&[2.0, 2.0, 2.0]), 0.0);
        assert_eq!(acceleration(&[1.0, 2.0]), 0.0);
        let with_nan = acceleration(&[1.0 / 3.0, f64::NAN, 1.0 / 3.0, 1.0 / 3.0, 0.0]);
        assert!(close(with_nan, a));
    }

    /// Resamples 1, 2, …, 20 and estimate 8: 7 below and one tie, so
    /// p₀ = 7.5/20 and z₀ = Φ⁻¹(0.375) = −0.318639. At c = 0.9 and a = 0 the
    /// quantile levels are Φ(2z₀ ∓ 1.644854) = 0.0112408 and 0.8431707, i.e.
    /// 1 + 19·level = 1.2135745 and 17.0202435 (type-7 quantiles). With
    /// a = 0.1 the levels become Φ(z₀ + (z₀ + z_α)/(1 − 0.1(z₀ + z_α))) =
    /// 0.0250051 and 0.8869281: 1.4750971 and 17.8516330.
    #[test]
    fn bca_by_hand() {
        let reps: Vec<f64> = (1..=20).map(f64::from).collect();
        let (lo, hi) = bca(8.0, &reps, 0.0, 0.9).unwrap();
        assert!((lo - 1.2135745).abs() < 1e-6, "{lo}");
        assert!((hi - 17.0202435).abs() < 1e-6, "{hi}");
        let (lo, hi) = bca(8.0, &reps, 0.1, 0.9).unwrap();
        assert!((lo - 1.4750971).abs() < 1e-6, "{lo}");
        assert!((hi - 17.8516330).abs() < 1e-6, "{hi}");
        // At the median of the resamples with a = 0, BCa is the percentile interval.
        let (lo, hi) = bca(10.5, &reps, 0.0, 0.9).unwrap();
        assert!(close(lo, quantile(&reps, 0.05)) && close(hi, quantile(&reps, 0.95)));
        // Below every resample: z₀ = −∞, no BCa interval.
        assert_eq!(bca(0.5, &reps, 0.0, 0.9), None);
        assert_eq!(bca(f64::NAN, &reps, 0.0, 0.9), None);
    }

    /// Resamples 1, …, 5 (mean 3), c = 0.5: quantiles 2 and 4. Estimate 2:
    /// debiased 2·2 − 3 = 1, basic interval [4 − 4, 4 − 2] = [0, 2]. Estimate
    /// 1 with the floor at 0: 2 − 3 = −1 → 0, [2 − 4, 2 − 2] → [0, 0].
    #[test]
    fn debiased_basic_by_hand() {
        let reps = [1.0, 2.0, 3.0, 4.0, 5.0];
        assert_eq!(debiased_basic(2.0, &reps, 0.5, Some(0.0)), (1.0, 0.0, 2.0));
        assert_eq!(debiased_basic(1.0, &reps, 0.5, None), (-1.0, -2.0, 0.0));
        assert_eq!(debiased_basic(1.0, &reps, 0.5, Some(0.0)), (0.0, 0.0, 0.0));
    }

    #[test]
    fn interval_kinds_and_notes() {
        // A biased measure: every resample above the estimate. The debiased
        // estimate and basic interval hold it; the percentile would not.
        let reps: Vec<f64> = (0..100).map(|i| 0.3 + 0.001 * f64::from(i)).collect();
        let e = interval(MetricId::EceWidth, 0.25, reps.clone(), &[], 0.95, Some(0.0));
        assert_eq!(e.kind, IntervalKind::DebiasedBasicFloor0);
        assert!(close(e.estimate, 2.0 * 0.25 - 0.3495), "{}", e.estimate);
        assert!(
            e.lo <= e.estimate && e.estimate <= e.hi && e.note.is_empty(),
            "{e:?}"
        );
        assert!(e.lo >= 0.0);
        // A BCa metric with the same resamples: z₀ is infinite, so the
        // percentile interval is used and the note says why it excludes the estimate.
        let e = interval(MetricId::Brier, 0.25, reps, &[], 0.95, Some(0.0));
        assert_eq!(e.kind, IntervalKind::Percentile);
        assert!(e.lo > 0.25);
        assert!(
            e.note.contains("0 of 100 resamples lie below"),
            "{}",
            e.note
        );
        // Undefined resamples are left out and counted; too few give no interval.
        let e = interval(
            MetricId::Auc,
            0.7,
            vec![f64::NAN, 0.6, 0.8],
            &[],
            0.95,
            Some(0.0),
        );
        assert_eq!(e.defined, 2);
        assert_eq!(e.kind, IntervalKind::Bca);
        let e = interval(MetricId::Auc, 0.7, vec![f64::NAN, 0.6], &[], 0.95, None);
        assert!(e.lo.is_nan() && e.note.contains("1 resample"), "{e:?}");
    }

    fn est(metric: MetricId, estimate: f64, lo: f64, hi: f64) -> Estimate {
        Estimate {
            metric,
            value: estimate,
            estimate,
            lo,
            hi,
            kind: IntervalKind::Bca,
            defined: 100,
            note: String::new(),
        }
    }

    #[test]
    fn readings() {
        let r = |s: (f64, f64, f64), a: (f64, f64, f64)| {
            reading(&[
                est(MetricId::CalibrationSlope, s.0, s.1, s.2),
                est(MetricId::CalibrationIntercept, a.0, a.1, a.2),
            ])
        };
        assert_eq!(
            r((0.51, 0.48, 0.55), (0.01, -0.05, 0.07)),
            "over-confident: calibration slope 0.510 [0.480, 0.550] < 1"
        );
        assert_eq!(
            r((1.6, 1.2, 2.0), (0.01, -0.05, 0.07)),
            "under-confident: calibration slope 1.600 [1.200, 2.000] > 1"
        );
        assert_eq!(
            r((1.0, 0.9, 1.1), (-0.3, -0.4, -0.2)),
            "calibration-in-the-large off: intercept -0.300 [-0.400, -0.200] excludes 0 \
             (predictions too high on average)"
        );
        assert!(r((0.5, 0.4, 0.6), (0.3, 0.2, 0.4))
            .starts_with("over-confident: calibration slope 0.500 [0.400, 0.600] < 1; calibration-in-the-large off: intercept 0.300"));
        assert_eq!(
            r((0.98, 0.9, 1.06), (0.01, -0.05, 0.07)),
            "no evidence of miscalibration: calibration slope 0.980 [0.900, 1.060] covers 1 \
             and intercept 0.010 [-0.050, 0.070] covers 0"
        );
        // An interval ending exactly at 1 covers 1.
        assert!(r((0.9, 0.8, 1.0), (0.0, -0.1, 0.1)).starts_with("no evidence"));
        assert!(r((f64::NAN, f64::NAN, f64::NAN), (0.0, -0.1, 0.1))
            .starts_with("no reading: calibration slope undefined"));
    }

    #[test]
    fn jackknife_groups_are_balanced_and_seeded() {
        let (g, small) = jackknife_groups(40, 3);
        assert_eq!(g, 40);
        assert_eq!(small, (0..40).collect::<Vec<u32>>());
        let (g, big) = jackknife_groups(1050, 3);
        assert_eq!(g, JACKKNIFE_GROUPS);
        let mut count = vec![0usize; g];
        for &k in &big {
            count[k as usize] += 1;
        }
        assert!(count.iter().all(|&c| c == 10 || c == 11), "{count:?}");
        assert_eq!(big, jackknife_groups(1050, 3).1);
        assert_ne!(big, jackknife_groups(1050, 4).1);
    }
}
