//! What a run, a shard and a merge write into a results folder: the
//! manifest, the unit table, the timings and the published files, and the run
//! key a journal is written under.

use std::path::Path;
use std::time::{SystemTime, UNIX_EPOCH};

use anyhow::Result;

use crate::analysis::{self, AnalysisSettings};
use crate::metrics::reliability;
use crate::report::{self, summary};
use crate::run::{self, journal, output};
use crate::suite::Plan;

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
