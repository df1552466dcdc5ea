//! `plumbline report DIR`: rebuild every table and figure of a results
//! folder from its unit table, or print one task's table.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{bail, Context, Result};

use super::warning_lines;
use crate::analysis::{self, AnalysisSettings};
use crate::metrics::reliability;
use crate::report::{self, summary};
use crate::results::Recorded;
use crate::run::{self, output};
use crate::stats::paired::IntervalKind;
use crate::suite;

/// The long help of `plumbline report`.
pub const LONG_ABOUT: &str = "\
Rebuild paired.csv, thresholds.csv, summary.md, index.html, tables.tex and the figures \
from a results folder's units.csv.gz and reliability*.csv (settings from manifest.json unless \
overridden), then print the decision. It holds the folder's lock while it writes, so it is \
refused while a run or another report writes there. With --task, print that task's table \
and write nothing.";

// The arguments of `plumbline report`: the folder and the overrides of the
// settings recorded in its manifest.
#[derive(Debug, Clone, Default, clap::Args)]
pub struct ReportArgs {
    /// Results folder (holding units.csv.gz, or units.csv).
    pub dir: PathBuf,
    /// Print the table of this task (an id from the folder) instead of the summary.
    #[arg(long, value_name = "ID")]
    pub task: Option<String>,
    /// Reference method: a method id of the folder (an unknown id is
    /// refused with the folder's ids) [default: the one recorded in
    /// manifest.json].
    #[arg(long, value_name = "METHOD_ID")]
    pub reference: Option<String>,
    /// Metric shown in the tables: one of the folder's metric columns (the
    /// suite's `metrics`) [default: the one recorded in manifest.json].
    #[arg(long, value_name = "METRIC", long_help = primary_metric_help())]
    pub primary_metric: Option<String>,
    /// Confidence level of the intervals [default: as recorded, else 0.95].
    #[arg(long)]
    pub confidence: Option<f64>,
    /// Interval estimator: paired-t, corrected-t, decomposed,
    /// decomposed-linear or decomposed-skew (docs/statistics.md)
    /// [default: as recorded, else decomposed-skew].
    #[arg(long)]
    pub interval: Option<String>,
    /// Equivalence margin as a share of the reference method's mean value
    /// at each task and size, e.g. 0.01 (docs/statistics.md)
    /// [default: as recorded, else 0.01].
    #[arg(long)]
    pub margin: Option<f64>,
    /// Share of a method's draws at a size that may fall back to the base
    /// rate before it is not recommended there, e.g. 0.1 (docs/report.md)
    /// [default: as recorded, else 0.1].
    #[arg(long, value_name = "SHARE")]
    pub max_fallback: Option<f64>,
}

/// `plumbline report`: the summary (or the task's table) on standard output.
pub fn run(args: &ReportArgs) -> Result<ExitCode> {
    let t = report_dir(args)?;
    super::say(t)?;
    Ok(ExitCode::SUCCESS)
}

/// The reliability curves of a results folder; none when the folder has no
/// `reliability_terms.csv` (results written before curves existed).
pub fn read_curves(dir: &Path) -> Result<Vec<reliability::CurveRecord>> {
    let read = |name: &str| -> Result<Option<String>> {
        let p = dir.join(name);
        match std::fs::read_to_string(&p) {
            Ok(t) => Ok(Some(t)),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(None),
            Err(e) => Err(anyhow::Error::new(e).context(format!("cannot read {}", p.display()))),
        }
    };
    let (Some(points), Some(hist), Some(terms)) = (
        read("reliability.csv")?,
        read("reliability_hist.csv")?,
        read("reliability_terms.csv")?,
    ) else {
        return Ok(Vec::new());
    };
    reliability::from_csv(&points, &hist, &terms)
        .map_err(|e| anyhow::anyhow!("{}: {e}", dir.display()))
}

/// The long help of `report --primary-metric`: every metric id a suite can
/// list (a folder has the columns of its suite's `metrics`).
pub fn primary_metric_help() -> String {
    let ids: Vec<&str> = crate::metrics::MetricId::ALL
        .iter()
        .map(|m| m.as_str())
        .collect();
    format!(
        "Metric shown in the tables [default: the one recorded in manifest.json]: one of the \
         folder's metric columns, i.e. of its suite's `metrics`, which are among: {} \
         (docs/metrics.md). An unknown name is refused with the folder's columns.",
        ids.join(", ")
    )
}

/// `plumbline report`: rebuild every table from `units.csv.gz` (or an older
/// folder's `units.csv`; settings from
/// `manifest.json` when present, else from the flags).
pub fn report_dir(args: &ReportArgs) -> Result<String> {
    // Rewriting the folder's tables makes `report` a writer: it holds the
    // folder's lock, so it neither reads a folder another run is writing nor
    // writes over one. `--task` only reads.
    let _lock = match &args.task {
        None => Some(output::Lock::acquire(&args.dir)?),
        Some(_) => None,
    };
    let units_path = run::table::units_path(&args.dir).with_context(|| {
        format!(
            "{}: no unit table ({} or units.csv)",
            args.dir.display(),
            run::table::UNITS_FILE
        )
    })?;
    let table = run::table::read_units_file(&units_path)
        .with_context(|| format!("reading {}", units_path.display()))?;
    let recorded = Recorded::read(&args.dir);
    let from_manifest = recorded.analysis;
    let reference = args
        .reference
        .clone()
        .or(from_manifest.as_ref().map(|s| s.reference.clone()));
    let Some(reference) = reference else {
        bail!(
            "{} has no manifest.json with the reference method: pass --reference",
            args.dir.display()
        )
    };
    if !table.rows.iter().any(|r| r.method == reference) {
        let mut ids: Vec<&str> = table.rows.iter().map(|r| r.method.as_str()).collect();
        ids.sort_unstable();
        ids.dedup();
        bail!(
            "--reference `{reference}`: no such method in {}; its methods are {}",
            units_path.display(),
            ids.join(", ")
        );
    }
    let primary = args
        .primary_metric
        .clone()
        .or(from_manifest.as_ref().map(|s| s.primary_metric.clone()))
        .or(table.metric_names.first().cloned())
        .unwrap_or_default();
    if table.metric_index(&primary).is_none() {
        bail!(
            "--primary-metric `{primary}`: {} has columns {}",
            units_path.display(),
            table.metric_names.join(", ")
        );
    }
    let confidence = args
        .confidence
        .or(from_manifest.as_ref().map(|s| s.confidence))
        .unwrap_or(suite::DEFAULT_CONFIDENCE);
    if let Err(e) = suite::check_confidence(confidence) {
        bail!("--confidence {e}");
    }
    let margin = args
        .margin
        .or(from_manifest.as_ref().map(|s| s.margin))
        .unwrap_or(analysis::DEFAULT_MARGIN);
    if !(margin.is_finite() && (0.0..=suite::MAX_MARGIN).contains(&margin)) {
        bail!(
            "--margin {margin}: expected a share of the reference's mean between 0 and {}, e.g. 0.01",
            suite::MAX_MARGIN
        );
    }
    let max_fallback = args
        .max_fallback
        .or(from_manifest.as_ref().map(|s| s.max_fallback))
        .unwrap_or(analysis::DEFAULT_MAX_FALLBACK);
    if !(max_fallback.is_finite() && (0.0..=1.0).contains(&max_fallback)) {
        bail!("--max-fallback {max_fallback}: expected a share of draws between 0 and 1, e.g. 0.1 for 10%");
    }
    let settings = AnalysisSettings {
        reference,
        primary_metric: primary,
        confidence,
        interval: match &args.interval {
            Some(k) => match suite::check_interval(k) {
                Ok(kind) => kind.as_str().to_string(),
                Err(e) => bail!("--interval {e}"),
            },
            None => from_manifest
                .as_ref()
                .map(|s| s.interval.clone())
                .unwrap_or_else(|| IntervalKind::default().as_str().to_string()),
        },
        pairs: from_manifest
            .as_ref()
            .map(|s| s.pairs.clone())
            .unwrap_or_default(),
        margin,
        absolute_margins: from_manifest
            .as_ref()
            .map(|s| s.absolute_margins.clone())
            .unwrap_or_default(),
        // Results written before the field existed: a method named `identity`.
        raw_method: match &from_manifest {
            Some(s) if s.raw_method.is_some() => s.raw_method.clone(),
            _ => table
                .rows
                .iter()
                .any(|r| r.method == "identity")
                .then(|| "identity".to_string()),
        },
        max_fallback,
        decision_threshold: from_manifest.as_ref().and_then(|s| s.decision_threshold),
        zero_one_methods: from_manifest
            .as_ref()
            .map(|s| s.zero_one_methods.clone())
            .unwrap_or_default(),
    };
    let a = analysis::analyse(&table, &settings);
    let suite_info = recorded.suite.unwrap_or_default();
    // Missing unit rows and NaN values change the tables silently: say so.
    let repeats = suite_info.repeats.map(|n| n as usize);
    let gaps = analysis::gaps::table_gaps(&table, repeats);
    for w in gaps.iter().take(20) {
        eprint!(
            "{}",
            warning_lines(&format!("{}: {w}", units_path.display()))
        );
    }
    if gaps.len() > 20 {
        eprint!(
            "{}",
            warning_lines(&format!(
                "{}: … and {} more such warnings",
                units_path.display(),
                gaps.len() - 20
            ))
        );
    }
    let ctx = summary::ReportContext {
        suite_name: suite_info
            .name
            .unwrap_or_else(|| "(unknown suite)".to_string()),
        suite_file: suite_info.file.unwrap_or_else(|| "(unknown)".to_string()),
        suite_sha256: suite_info.sha256.unwrap_or_else(|| "(unknown)".to_string()),
        seed: suite_info.seed,
        settings: settings.clone(),
        curves: read_curves(&args.dir)?,
    };
    if let Some(task) = &args.task {
        return summary::task_terminal(&a, &ctx, task).ok_or_else(|| {
            anyhow::anyhow!(
                "--task `{task}`: no such task in {} (tasks: {})",
                units_path.display(),
                a.tasks.join(", ")
            )
        });
    }
    for (name, bytes) in report::publish(&a, &ctx) {
        output::write_file(&args.dir, &name, &bytes)?;
    }
    Ok(summary::terminal(&a, &ctx))
}
