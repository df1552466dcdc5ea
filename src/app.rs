//! The commands, as library functions the binary calls (and tests can too):
//! `check`, `run`, `report`, `simulate`.

use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use anyhow::{bail, Context, Result};

use crate::analysis::{self, AnalysisSettings};
use crate::metrics::reliability;
use crate::report::{self, summary};
use crate::run::{self, journal, journal::Journal, output, RunOptions};
use crate::stats::paired::IntervalKind;
use crate::suite::{self, Plan, TaskSource};

/// The suite `plumbline run` uses when none is given.
pub const DEFAULT_SUITE: &str = "suites/open-uci.toml";

/// A resolved plan as text (what `plumbline check` prints).
pub fn describe_plan(plan: &Plan) -> String {
    let mut s = String::new();
    s.push_str(&format!(
        "suite `{}` ({})\n",
        plan.name,
        plan.suite_file.display()
    ));
    s.push_str(&format!(
        "  seed {} · {} repeats · confidence {} · interval {} · reference `{}` · primary metric `{}`\n",
        plan.seed, plan.repeats, plan.confidence, plan.interval.as_str(), plan.reference, plan.primary.as_str()
    ));
    s.push_str(&format!(
        "  metrics: {} · log-loss clip {}\n",
        plan.metrics
            .iter()
            .map(|m| m.as_str())
            .collect::<Vec<_>>()
            .join(", "),
        plan.metric_settings.log_loss_clip
    ));
    s.push_str(&format!(
        "  methods: {}\n",
        plan.methods
            .iter()
            .map(|m| format!("{} ({})", m.id, m.spec.kind()))
            .collect::<Vec<_>>()
            .join(", ")
    ));
    s.push_str("  tasks:\n");
    for t in &plan.tasks {
        let (src, pinned) = match &t.source {
            TaskSource::ScoreFile(f) => (
                format!("score file {}", f.path.display()),
                if f.split_column.is_some() {
                    " (pinned by the file)"
                } else {
                    ""
                },
            ),
            TaskSource::Open {
                data,
                model_id,
                model,
                protocol,
                ..
            } => (
                format!(
                    "open data `{data}` · model `{model_id}` ({}) · protocol {}",
                    model.kind(),
                    if plan.study.is_some() {
                        "study (all variants)"
                    } else {
                        protocol.kind()
                    }
                ),
                if matches!(
                    protocol,
                    crate::models::protocol::Protocol::CrossFitted { .. }
                ) {
                    " (out-of-fold reservoir)"
                } else {
                    ""
                },
            ),
        };
        s.push_str(&format!(
            "    {:<24} {} rows ({:.1}% positive), {} scores · reservoir {} · test {}{} · {}\n",
            t.id,
            t.rows,
            100.0 * t.positives as f64 / t.rows.max(1) as f64,
            t.score_kind.as_str(),
            t.reservoir_rows,
            t.test_rows,
            pinned,
            src
        ));
        s.push_str(&format!(
            "      sizes {}{}\n",
            t.sizes
                .iter()
                .map(|x| x.to_string())
                .collect::<Vec<_>>()
                .join(", "),
            if t.skipped_sizes.is_empty() {
                String::new()
            } else {
                format!(
                    " (skipped, larger than the reservoir: {})",
                    t.skipped_sizes
                        .iter()
                        .map(|x| x.to_string())
                        .collect::<Vec<_>>()
                        .join(", ")
                )
            }
        ));
    }
    s.push_str(&format!(
        "  {} units × {} methods = {} fits\n",
        plan.unit_count(),
        plan.methods.len(),
        plan.fit_count()
    ));
    s
}

/// A warning as lines for standard error: `warning: ` and the text wrapped
/// to the terminal width (`COLUMNS`, else the terminal's, else 100), later
/// lines indented.
pub fn warning_lines(text: &str) -> String {
    let width = report::document::Term::detect().width;
    report::document::wrap(text, width, "warning: ", "  ")
}

/// Load and validate a suite.
pub fn load_plan(path: &Path) -> Result<Plan> {
    Ok(suite::load(path)?)
}

/// Options of `plumbline run`.
#[derive(Debug, Clone, Default)]
pub struct RunArgs {
    pub suite: PathBuf,
    pub out: Option<PathBuf>,
    pub threads: Option<usize>,
    pub quiet: bool,
    /// Replace an existing results folder, and discard a journal that cannot
    /// be resumed.
    pub force: bool,
    /// Run only this share of the units into a shard folder.
    pub shard: Option<crate::scale::shard::ShardSpec>,
}

pub(crate) fn now_rfc3339() -> String {
    let secs = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0) as i64;
    let days = secs.div_euclid(86_400);
    let rem = secs.rem_euclid(86_400);
    // Civil date from days since 1970-01-01 (Hinnant's algorithm).
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = if m <= 2 { y + 1 } else { y };
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        (rem % 3600) / 60,
        rem % 60
    )
}

/// A fingerprint of everything that determines the units (the SHA-256 of
/// [`run_key`] of a whole run): a journal written under another fingerprint
/// is not resumed.
pub fn fingerprint(plan: &Plan) -> String {
    run_key(plan, None).fingerprint()
}

pub fn settings_of(plan: &Plan) -> AnalysisSettings {
    AnalysisSettings {
        reference: plan.reference.clone(),
        primary_metric: plan.primary.as_str().to_string(),
        confidence: plan.confidence,
        interval: plan.interval.as_str().to_string(),
        pairs: plan.pairs.clone(),
        margin: plan.decision.margin,
        absolute_margins: plan.decision.absolute_margins.clone(),
        raw_method: plan
            .methods
            .iter()
            .find(|m| m.spec.kind() == "identity")
            .map(|m| m.id.clone()),
        max_fallback: plan.decision.max_fallback,
    }
}

/// Portable form of a path for reports: forward slashes, as given.
pub(crate) fn shown(p: &Path) -> String {
    p.display().to_string().replace('\\', "/")
}

/// What a finished run leaves behind, for the caller to print.
pub struct RunSummary {
    pub out: PathBuf,
    pub terminal: String,
    pub units: usize,
    pub resumed: usize,
    pub threads: usize,
    pub warnings: Vec<String>,
    pub seconds: f64,
}

/// What a journal of this plan depends on (see [`journal::RunKey`]).
pub fn run_key(plan: &Plan, shard: Option<crate::scale::shard::ShardSpec>) -> journal::RunKey {
    journal::RunKey {
        version: env!("CARGO_PKG_VERSION").to_string(),
        suite_sha256: plan.suite_sha256.clone(),
        tasks: plan
            .tasks
            .iter()
            .map(|t| (t.id.clone(), t.data_sha256.clone()))
            .collect(),
        shard: shard.map(|s| s.to_string()),
    }
}

/// `plumbline run` (with `--shard K/N`: one share of the units into a shard
/// folder, see [`crate::scale::shard`]).
pub fn run_suite(args: &RunArgs) -> Result<RunSummary> {
    let t0 = std::time::Instant::now();
    let started = now_rfc3339();
    let mut plan = load_plan(&args.suite)?;
    if args.shard.is_some() && plan.study.is_some() {
        bail!(
            "{}: --shard is not available for a protocol study suite; run it on one machine",
            args.suite.display()
        );
    }
    let out = args.out.clone().unwrap_or_else(|| {
        let name = match args.shard {
            Some(s) => format!("{}.shard-{}-of-{}", plan.name, s.index, s.count),
            None => plan.name.clone(),
        };
        PathBuf::from("results").join(name)
    });
    // Lock and check the folder before the score pools are built (which can
    // take minutes): a second writer or a folder that must not be replaced is
    // refused at once.
    let inputs = run_inputs(&plan, &args.suite);
    let input_refs: Vec<&Path> = inputs.iter().map(PathBuf::as_path).collect();
    let target = output::prepare(&out, args.force, &input_refs, true)?;
    let staging = target.staging().to_path_buf();
    let cache = out
        .parent()
        .map(|p| p.join(".cache").join("pools"))
        .unwrap_or_else(|| PathBuf::from(".cache/pools"));
    let keys = match args.shard {
        Some(s) => crate::scale::shard::shard_keys(&plan, s),
        None => run::unit_keys(&plan),
    };
    let pool_reports = if plan.study.is_some() {
        Vec::new()
    } else {
        let only = args
            .shard
            .map(|s| crate::scale::shard::pools_needed(&plan, s, &keys));
        run::pools::resolve_tasks(
            &mut plan,
            only.as_ref(),
            Some(&cache),
            args.threads,
            args.quiet,
        )
        .map_err(anyhow::Error::msg)?
    };
    let key = run_key(&plan, args.shard);
    let (journal, done) = Journal::open(&staging, &key, args.force).map_err(anyhow::Error::msg)?;
    if journal.dropped > 0 && !args.quiet {
        eprintln!(
            "journal: dropped {} torn line(s) at its end (a unit cut short is run again)",
            journal.dropped
        );
    }
    if !done.is_empty() && !args.quiet {
        eprintln!(
            "resuming: {} of {} units already finished in {}",
            done.len(),
            keys.len(),
            staging.display()
        );
    }
    let opts = RunOptions {
        threads: args.threads,
        quiet: args.quiet,
    };
    if let Some(shard) = args.shard {
        let (units, threads, resumed) =
            run::run_outcomes(&plan, &opts, &keys, done, &|u| journal.append(u))?;
        drop(journal);
        let info = RunInfo {
            suite: &args.suite,
            started,
            t0,
            threads,
            resumed,
            pool_reports,
        };
        let n = units.len();
        crate::scale::shard::write_shard(&staging, &plan, shard, units, &info)?;
        target.commit()?;
        return Ok(RunSummary {
            terminal: String::new(),
            out,
            units: n,
            resumed,
            threads,
            warnings: Vec::new(),
            seconds: t0.elapsed().as_secs_f64(),
        });
    }
    let result = match &plan.study {
        Some(st) => run::study::run_study(&plan, st, &opts, done, &|u| journal.append(u))?,
        None => run::run_keys(&plan, &opts, &keys, done, &|u| journal.append(u))?,
    };
    drop(journal);

    let settings = settings_of(&plan);
    let ctx = summary::ReportContext {
        suite_name: plan.name.clone(),
        suite_file: shown(&args.suite),
        suite_sha256: plan.suite_sha256.clone(),
        seed: Some(plan.seed),
        settings: settings.clone(),
        curves: Vec::new(),
    };
    let (a, ctx) = write_results(&staging, &result, ctx)?;
    let info = RunInfo {
        suite: &args.suite,
        started,
        t0,
        threads: result.threads,
        resumed: result.resumed_units,
        pool_reports,
    };
    let manifest = run_manifest(&plan, &info, &result.warnings);
    output::write_file(
        &staging,
        "manifest.json",
        serde_json::to_string_pretty(&manifest)?.as_bytes(),
    )?;
    target.commit()?;
    Ok(RunSummary {
        terminal: summary::terminal(&a, &ctx),
        out,
        units: plan.unit_count(),
        resumed: result.resumed_units,
        threads: result.threads,
        warnings: result.warnings,
        seconds: t0.elapsed().as_secs_f64(),
    })
}

/// What a run reads: the suite file, its score files and its open-data
/// folder. A results folder holding one of them is never replaced.
fn run_inputs(plan: &Plan, suite_file: &Path) -> Vec<PathBuf> {
    let mut v = vec![suite_file.to_path_buf()];
    for t in &plan.tasks {
        match &t.source {
            TaskSource::ScoreFile(f) => v.push(f.path.clone()),
            TaskSource::Open { data_dir, .. } => v.push(data_dir.clone()),
        }
    }
    v
}

/// How a run went, for its manifest (the machine-dependent part).
pub(crate) struct RunInfo<'a> {
    pub suite: &'a Path,
    pub started: String,
    pub t0: std::time::Instant,
    pub threads: usize,
    pub resumed: usize,
    pub pool_reports: Vec<run::pools::PoolReport>,
}

/// The fields of `manifest.json` that depend on the machine or on how the
/// folder came about (interruptions, shards), not on the suite: `verify` and
/// the tests compare manifests without them. Inside `score_pools`, the
/// entries' `cache_hit`, `fit_seconds` and `score_seconds`.
pub const MACHINE_FIELDS: [&str; 5] = [
    "started",
    "finished",
    "wall_seconds",
    "threads",
    "resumed_units",
];
/// The machine-dependent fields of each `score_pools` entry.
pub const POOL_MACHINE_FIELDS: [&str; 3] = ["cache_hit", "fit_seconds", "score_seconds"];

/// `manifest.json` of a run (and, with a `shard` entry added, of a shard).
pub(crate) fn run_manifest(plan: &Plan, info: &RunInfo, warnings: &[String]) -> serde_json::Value {
    serde_json::json!({
        "tool": "plumbline",
        "version": env!("CARGO_PKG_VERSION"),
        "git_commit": option_env!("PLUMBLINE_GIT_COMMIT"),
        "suite": {
            "file": shown(info.suite),
            "name": plan.name,
            "sha256": plan.suite_sha256,
            "seed": plan.seed,
            "repeats": plan.repeats,
        },
        "analysis": settings_of(plan),
        "tasks": plan.tasks.iter().map(|t| serde_json::json!({
            "id": t.id,
            "data_sha256": t.data_sha256,
            "task_seed": crate::split::task_seed(plan.seed, &t.id),
            "rows": t.rows,
            "reservoir": t.reservoir_rows,
            "test_rows": t.test_rows,
            "sizes": t.sizes,
            "skipped_sizes": t.skipped_sizes,
        })).collect::<Vec<_>>(),
        "seed_rule": "unit seed = mix(suite seed, task id, size, repeat), SplitMix64 folding into ChaCha8",
        "score_pools": info.pool_reports,
        "warnings": warnings,
        "units": plan.unit_count(),
        "resumed_units": info.resumed,
        "threads": info.threads,
        "started": info.started,
        "finished": now_rfc3339(),
        "wall_seconds": info.t0.elapsed().as_secs_f64(),
    })
}

/// Write a run's unit table, timings and every published file into `dir`
/// (all but `manifest.json`); returns the analysis and the report context
/// (with the run's reliability curves) for the terminal table.
pub(crate) fn write_results(
    dir: &Path,
    result: &run::RunOutput,
    mut ctx: summary::ReportContext,
) -> Result<(analysis::Analysis, summary::ReportContext)> {
    let a = analysis::analyse(&result.table, &ctx.settings);
    // The figures are drawn from the reliability files as written, so that
    // `plumbline report` redraws them byte for byte from the folder.
    let (points, hist, terms) = reliability::to_csv(&result.curves);
    ctx.curves = reliability::from_csv(&points, &hist, &terms).map_err(anyhow::Error::msg)?;
    // Compressed while it is written: the plain text is never held whole.
    let mut enc = flate2::GzBuilder::new().write(Vec::new(), flate2::Compression::default());
    result.table.write_csv(&mut enc)?;
    output::write_file(dir, run::table::UNITS_FILE, &enc.finish()?)?;
    output::write_file(dir, "timings.csv", timings_csv(&result.timings).as_bytes())?;
    for (name, bytes) in report::publish(&a, &ctx) {
        output::write_file(dir, &name, &bytes)?;
    }
    Ok((a, ctx))
}

fn timings_csv(t: &[run::Timing]) -> String {
    let mut s = String::from("task,size,repeat,method,fit_ms\n");
    for x in t {
        s.push_str(&format!(
            "{},{},{},{},{:.4}\n",
            x.task, x.size, x.repeat, x.method, x.fit_ms
        ));
    }
    s
}

/// Overrides for `plumbline report`.
#[derive(Debug, Clone, Default)]
pub struct ReportArgs {
    pub dir: PathBuf,
    pub reference: Option<String>,
    pub primary_metric: Option<String>,
    pub confidence: Option<f64>,
    pub interval: Option<String>,
    /// Relative equivalence margin (share of the reference's mean).
    pub margin: Option<f64>,
    /// Fallback share above which a method is not recommended at a size.
    pub max_fallback: Option<f64>,
    /// Print this task's table instead of the summary.
    pub task: Option<String>,
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
    let manifest_path = args.dir.join("manifest.json");
    let manifest: Option<serde_json::Value> = std::fs::read(&manifest_path)
        .ok()
        .and_then(|b| serde_json::from_slice(&b).ok());
    let from_manifest: Option<AnalysisSettings> = manifest
        .as_ref()
        .and_then(|m| m.get("analysis"))
        .and_then(|a| serde_json::from_value(a.clone()).ok());
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
    };
    let a = analysis::analyse(&table, &settings);
    let suite_info = manifest.as_ref().and_then(|m| m.get("suite"));
    // Missing unit rows and NaN values change the tables silently: say so.
    let repeats = suite_info
        .and_then(|s| s.get("repeats"))
        .and_then(|v| v.as_u64())
        .map(|n| n as usize);
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
            .and_then(|s| s.get("name"))
            .and_then(|v| v.as_str())
            .unwrap_or("(unknown suite)")
            .to_string(),
        suite_file: suite_info
            .and_then(|s| s.get("file"))
            .and_then(|v| v.as_str())
            .unwrap_or("(unknown)")
            .to_string(),
        suite_sha256: suite_info
            .and_then(|s| s.get("sha256"))
            .and_then(|v| v.as_str())
            .unwrap_or("(unknown)")
            .to_string(),
        seed: suite_info
            .and_then(|s| s.get("seed"))
            .and_then(|v| v.as_u64()),
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
