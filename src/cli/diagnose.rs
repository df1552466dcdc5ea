//! `plumbline diagnose`: every calibration metric of the suite on one score
//! file, with seeded bootstrap intervals, and optionally a paired comparison
//! with a second score column of the same rows.
//!
//! Intervals: the nonparametric bootstrap percentile interval (Efron &
//! Tibshirani 1993, "An Introduction to the Bootstrap", ch. 13): B resamples of
//! the n rows drawn with replacement, the metric computed on each, and the
//! (1 − c)/2 and (1 + c)/2 quantiles of the B values (linear interpolation
//! between order statistics, Hyndman & Fan 1996 type 7). Resamples where a
//! metric is undefined (one class for AUC or the slope) are left out and
//! counted. With `--compare`, both columns are scored on the same resampled
//! rows and the interval is that of the paired difference (main − compare).
//!
//! Reliability diagram: the CORP curve with its consistency band
//! ([`crate::metrics::reliability::curve`], band settings as a run's default)
//! of each column, drawn by the run report's own figure code
//! ([`crate::report::figures::reliability_grid`]) into `reliability.svg`.
//!
//! Resample b draws its rows from ChaCha8 seeded with `split::mix(seed,
//! [tag, b])`, so the output is identical whatever the thread count.

use std::path::{Path, PathBuf};

use anyhow::{bail, Result};
use rayon::prelude::*;

use crate::calibrate::ScoreKind;
use crate::data::scorefile::{self, Origin, ScoreFileSpec};
use crate::metrics::reliability::{self, BandSettings, CurveRecord};
use crate::metrics::{MetricId, MetricSettings};
use crate::report::{figures, Table};
use crate::run::{output, table::num};
use crate::split;

#[derive(Debug, Clone, clap::Args)]
pub struct DiagnoseArgs {
    /// Score file with probabilities and labels (CSV, gzip CSV, Parquet, `-`).
    pub file: PathBuf,
    /// Output folder (metrics.csv, reliability.svg, and compare.csv with --compare); written whole or not at all.
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
    /// Replace an existing output folder.
    #[arg(long)]
    pub force: bool,
}

/// One metric's value and interval.
#[derive(Debug, Clone, PartialEq)]
pub struct Estimate {
    pub metric: MetricId,
    pub value: f64,
    pub lo: f64,
    pub hi: f64,
    /// Resamples where the metric was defined.
    pub defined: usize,
}

/// What `diagnose` computed.
#[derive(Debug, Clone)]
pub struct Diagnosis {
    pub rows: usize,
    pub single: Vec<Estimate>,
    /// With --compare: the compared column's values and the paired differences.
    pub compare: Option<(Vec<Estimate>, Vec<Estimate>)>,
    pub table: Table,
    /// The reliability diagram (SVG) of the column(s).
    pub svg: String,
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

fn interval(metric: MetricId, value: f64, mut reps: Vec<f64>, c: f64) -> Estimate {
    reps.retain(|v| v.is_finite());
    reps.sort_unstable_by(f64::total_cmp);
    Estimate {
        metric,
        value,
        lo: quantile(&reps, (1.0 - c) / 2.0),
        hi: quantile(&reps, (1.0 + c) / 2.0),
        defined: reps.len(),
    }
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

fn load(args: &DiagnoseArgs, column: &str) -> Result<(Vec<f64>, Vec<bool>)> {
    let l = scorefile::load(&ScoreFileSpec {
        path: args.file.clone(),
        score_column: column.to_string(),
        label_column: args.label_column.clone(),
        score_kind: ScoreKind::Probability,
        split_column: None,
        truth_column: None,
        fold_column: None,
        origin: Origin::CommandLine,
    })?;
    Ok((l.pool.scores, l.pool.labels))
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
    if args.compare.is_some() && args.file.as_os_str() == "-" {
        bail!("--compare reads the file twice; give a file name instead of `-`");
    }
    let settings = MetricSettings::default();
    let (p, y) = load(args, &args.score_column)?;
    let other = match &args.compare {
        Some(c) => Some(load(args, c)?.0),
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
    let c = args.confidence;
    let est = |k: usize| -> Vec<Estimate> {
        MetricId::ALL
            .iter()
            .enumerate()
            .map(|(m, &id)| interval(id, point[k][m], reps.iter().map(|r| r[k][m]).collect(), c))
            .collect()
    };
    let single = est(0);
    let compare = other.as_ref().map(|_| {
        let diff: Vec<Estimate> = MetricId::ALL
            .iter()
            .enumerate()
            .map(|(m, &id)| {
                interval(
                    id,
                    point[0][m] - point[1][m],
                    reps.iter().map(|r| r[0][m] - r[1][m]).collect(),
                    c,
                )
            })
            .collect();
        (est(1), diff)
    });

    let pct = format!("{}%", num(100.0 * c));
    let mut header = vec![
        "metric".to_string(),
        args.score_column.clone(),
        format!("{pct} interval"),
    ];
    if let Some(cn) = &args.compare {
        header.push(cn.clone());
        header.push(format!("difference ({pct} paired interval)"));
    }
    let f = |v: f64| {
        if v.is_finite() {
            format!("{v:.5}")
        } else {
            "—".into()
        }
    };
    let rows = single
        .iter()
        .enumerate()
        .map(|(i, e)| {
            let mut r = vec![
                e.metric.as_str().to_string(),
                f(e.value),
                format!("[{}, {}]", f(e.lo), f(e.hi)),
            ];
            if let Some((o, d)) = &compare {
                r.push(f(o[i].value));
                r.push(format!(
                    "{} [{}, {}]",
                    f(d[i].value),
                    f(d[i].lo),
                    f(d[i].hi)
                ));
            }
            r
        })
        .collect();
    let table = Table {
        title: format!("{} · {} rows", args.file.display(), y.len()),
        header,
        rows,
        notes: vec![format!(
            "bootstrap percentile intervals, {} resamples, seed {}",
            args.bootstrap, args.seed
        )],
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
            reliability::curve(name, p, &y, BandSettings::default(), seed).map(|curve| {
                CurveRecord {
                    task: String::new(),
                    size: y.len(),
                    repeat: 0,
                    curve,
                }
            })
        })
        .collect();
    let refs: Vec<&CurveRecord> = records.iter().collect();
    let label = args.file.display().to_string();
    let heading = format!(
        "{}: reliability of {} ({} rows)",
        figures::esc(&label),
        figures::esc(&names.join(" and ")),
        y.len()
    );
    let svg = figures::reliability_grid(
        &label,
        &heading,
        &refs,
        |m| figures::style(names.iter().position(|n| *n == m).unwrap_or(0)),
        |n| format!("all {n} rows"),
    );
    Ok(Diagnosis {
        rows: y.len(),
        single,
        compare,
        table,
        svg,
    })
}

fn csv_rows(head: &str, est: &[&[Estimate]]) -> Vec<u8> {
    let mut s = String::from(head);
    s.push('\n');
    for i in 0..est[0].len() {
        s.push_str(est[0][i].metric.as_str());
        for e in est {
            let e = &e[i];
            s.push_str(&format!(
                ",{},{},{},{}",
                num(e.value),
                num(e.lo),
                num(e.hi),
                e.defined
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
        "file": crate::app::shown(&args.file),
        "score_column": args.score_column,
        "label_column": args.label_column,
        "compare": args.compare,
        "rows": d.rows,
        "bootstrap": args.bootstrap,
        "seed": args.seed,
        "confidence": args.confidence,
    })
}

/// Run `plumbline diagnose`: lock and check the output folder, compute, then
/// write the folder atomically.
pub fn run(args: &DiagnoseArgs) -> Result<Diagnosis> {
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
    let single = csv_rows("metric,value,lo,hi,resamples", &[&d.single]);
    output::write_file(staging, "metrics.csv", &single)?;
    output::write_file(staging, "reliability.svg", d.svg.as_bytes())?;
    if let Some((o, diff)) = &d.compare {
        let bytes = csv_rows(
            "metric,compared_value,compared_lo,compared_hi,compared_resamples,difference,difference_lo,difference_hi,difference_resamples",
            &[o, diff],
        );
        output::write_file(staging, "compare.csv", &bytes)?;
    }
    target.commit()?;
    Ok(d)
}
