//! The results folder: what a run, a shard and a merge write into it, and
//! what `report`, `merge` and `verify` read back.
//!
//! - [`Manifest`]: `manifest.json`, a typed record of the suite, the analysis
//!   settings, the tasks, the score pools and how the folder came about
//!   ([`MachineRecord`], the fields that depend on the machine); a shard's
//!   manifest adds a [`ShardRecord`]. [`Manifest::of_run`] builds it,
//!   [`Manifest::write`] and [`Manifest::read`] write and read it, and
//!   [`Recorded`] is the lenient view `report` takes of any folder's
//!   manifest, older ones included.
//! - [`write_results`]: the unit table, the timings and every published file.
//! - [`run_key`]: what a journal of a plan is written under, and
//!   [`fingerprint`].
//!
//! The manifest's keys are written sorted at every level (the published
//! form): it goes through `serde_json::Value`, whose maps are ordered by key,
//! so the order of the struct fields below is free.

use std::path::Path;
use std::time::{SystemTime, UNIX_EPOCH};

use anyhow::{Context, Result};
use serde::{Deserialize, Deserializer, Serialize};
use serde_json::Value;

use crate::analysis::{self, AnalysisSettings};
use crate::metrics::reliability;
use crate::report::{self, summary};
use crate::run::pools::PoolReport;
use crate::run::shard::ShardSpec;
use crate::run::{self, journal, output};
use crate::suite::Plan;

/// How the seeds are derived, as the manifest states it.
pub const SEED_RULE: &str =
    "unit seed = mix(suite seed, task id, size, repeat), SplitMix64 folding into ChaCha8";

/// How shards are cut, as a shard's manifest states it.
pub const COST_RULE: &str =
    "methods × (calibration size + test rows), greedy longest-processing-time";

/// `manifest.json` of a results folder (run or merge) or of a shard folder.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// Always `plumbline`: with `version`, what lets `--force` replace the
    /// folder ([`output::is_results_folder`]).
    pub tool: String,
    pub version: String,
    /// The commit the binary was built from (`build.rs`), when the build
    /// recorded one; ` (with uncommitted changes)` follows it when the
    /// source differed from that commit.
    pub git_commit: Option<String>,
    pub suite: SuiteRecord,
    pub analysis: AnalysisSettings,
    pub tasks: Vec<TaskRecord>,
    pub seed_rule: String,
    pub score_pools: Vec<PoolReport>,
    pub warnings: Vec<String>,
    /// Units of the whole suite.
    pub units: usize,
    #[serde(flatten)]
    pub machine: MachineRecord,
    /// Only in a shard folder's manifest.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shard: Option<ShardRecord>,
}

/// The suite a folder was run from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SuiteRecord {
    /// The suite's path as given, with forward slashes ([`shown`]).
    pub file: String,
    pub name: String,
    pub sha256: String,
    pub seed: u64,
    pub repeats: usize,
}

/// One task of the suite: its data and the shape of its units.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TaskRecord {
    pub id: String,
    pub data_sha256: String,
    pub task_seed: u64,
    pub rows: usize,
    pub reservoir: usize,
    pub test_rows: usize,
    pub sizes: Vec<usize>,
    pub skipped_sizes: Vec<usize>,
}

/// The fields of a manifest that depend on the machine or on how the folder
/// came about (interruptions, shards), not on the suite ([`MACHINE_FIELDS`]).
/// In a merged manifest `started` is the earliest shard's start, `finished`
/// the merge's time, `wall_seconds` the sum of the shards' wall times,
/// `threads` the most threads a shard used and `resumed_units` the sum.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct MachineRecord {
    pub resumed_units: usize,
    pub threads: usize,
    /// UTC, RFC 3339 to the second ([`rfc3339`]).
    pub started: String,
    pub finished: String,
    pub wall_seconds: f64,
}

/// The `shard` entry of a shard folder's manifest: which share of the units
/// it holds, and the method and metric order `merge` rebuilds the table in.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ShardRecord {
    pub index: usize,
    pub count: usize,
    /// Units in this shard.
    pub units: usize,
    pub cost: u64,
    pub cost_rule: String,
    pub methods: Vec<String>,
    pub metrics: Vec<String>,
}

/// The fields of `manifest.json` that depend on the machine or on how the
/// folder came about (the keys of [`MachineRecord`], and the commit the
/// binary was built from): `verify` and the tests compare manifests without
/// them, so a rerun at a later commit that gives the same results passes.
/// Inside `score_pools`, the entries' [`POOL_MACHINE_FIELDS`].
pub const MACHINE_FIELDS: [&str; 6] = [
    "git_commit",
    "started",
    "finished",
    "wall_seconds",
    "threads",
    "resumed_units",
];
/// The machine-dependent fields of each `score_pools` entry.
pub const POOL_MACHINE_FIELDS: [&str; 3] = ["cache_hit", "fit_seconds", "score_seconds"];

/// How a run went, for its manifest (the machine-dependent part).
pub struct RunInfo<'a> {
    pub suite: &'a Path,
    pub started: String,
    pub t0: std::time::Instant,
    pub threads: usize,
    pub resumed: usize,
    pub pool_reports: Vec<PoolReport>,
}

impl Manifest {
    /// The manifest of a run of `plan` (a shard sets [`Manifest::shard`]);
    /// `finished` and `wall_seconds` are taken now.
    pub fn of_run(plan: &Plan, info: &RunInfo, warnings: &[String]) -> Manifest {
        Manifest {
            tool: "plumbline".to_string(),
            version: env!("CARGO_PKG_VERSION").to_string(),
            git_commit: option_env!("PLUMBLINE_GIT_COMMIT").map(String::from),
            suite: SuiteRecord {
                file: shown(info.suite),
                name: plan.name.clone(),
                sha256: plan.suite_sha256.clone(),
                seed: plan.seed,
                repeats: plan.repeats,
            },
            analysis: settings_of(plan),
            tasks: plan
                .tasks
                .iter()
                .map(|t| TaskRecord {
                    id: t.id.clone(),
                    data_sha256: t.data_sha256.clone(),
                    task_seed: crate::split::task_seed(plan.seed, &t.id),
                    rows: t.rows,
                    reservoir: t.reservoir_rows,
                    test_rows: t.test_rows,
                    sizes: t.sizes.clone(),
                    skipped_sizes: t.skipped_sizes.clone(),
                })
                .collect(),
            seed_rule: SEED_RULE.to_string(),
            score_pools: info.pool_reports.clone(),
            warnings: warnings.to_vec(),
            units: plan.unit_count(),
            machine: MachineRecord {
                resumed_units: info.resumed,
                threads: info.threads,
                started: info.started.clone(),
                finished: now_rfc3339(),
                wall_seconds: info.t0.elapsed().as_secs_f64(),
            },
            shard: None,
        }
    }

    /// The file's bytes: pretty JSON, keys sorted at every level.
    pub fn to_bytes(&self) -> Result<Vec<u8>> {
        let value = serde_json::to_value(self)?;
        Ok(serde_json::to_string_pretty(&value)?.into_bytes())
    }

    /// Write `manifest.json` into `dir` (through a temporary file).
    pub fn write(&self, dir: &Path) -> Result<()> {
        output::write_file(dir, output::MANIFEST, &self.to_bytes()?)?;
        Ok(())
    }

    /// Read the `manifest.json` of a results or shard folder.
    pub fn read(dir: &Path) -> Result<Manifest> {
        let value = read_json(dir)?;
        let p = dir.join(output::MANIFEST);
        serde_json::from_value(value).with_context(|| {
            format!(
                "{}: not the manifest of a results or shard folder of this plumbline version",
                p.display()
            )
        })
    }

    /// (task id, data SHA-256) of every task.
    pub fn task_digests(&self) -> Vec<(String, String)> {
        self.tasks
            .iter()
            .map(|t| (t.id.clone(), t.data_sha256.clone()))
            .collect()
    }

    /// The report settings and suite facts recorded here.
    pub fn report_context(&self) -> summary::ReportContext {
        summary::ReportContext {
            suite_name: self.suite.name.clone(),
            suite_file: self.suite.file.clone(),
            suite_sha256: self.suite.sha256.clone(),
            seed: Some(self.suite.seed),
            settings: self.analysis.clone(),
            curves: Vec::new(),
        }
    }
}

/// A folder's `manifest.json` as JSON, untyped (what `verify` compares).
pub fn read_json(dir: &Path) -> Result<Value> {
    let p = dir.join(output::MANIFEST);
    let bytes = std::fs::read(&p).with_context(|| format!("cannot read {}", p.display()))?;
    serde_json::from_slice(&bytes).with_context(|| format!("{}: not valid JSON", p.display()))
}

/// A manifest without its machine-dependent fields ([`MACHINE_FIELDS`], and
/// [`POOL_MACHINE_FIELDS`] in every `score_pools` entry).
pub fn without_machine_fields(m: &Value) -> Value {
    let mut m = m.clone();
    if let Some(o) = m.as_object_mut() {
        for k in MACHINE_FIELDS {
            o.remove(k);
        }
    }
    if let Some(pools) = m.get_mut("score_pools").and_then(|p| p.as_array_mut()) {
        for p in pools {
            if let Some(o) = p.as_object_mut() {
                for k in POOL_MACHINE_FIELDS {
                    o.remove(k);
                }
            }
        }
    }
    m
}

/// What `plumbline report` takes from a folder's manifest. Every part is
/// optional and read on its own, so a folder without a manifest, or with
/// one from an older version or with a damaged entry, still reports (the
/// flags give what is missing).
#[derive(Debug, Clone, Default, Deserialize)]
pub struct Recorded {
    #[serde(default, deserialize_with = "lenient")]
    pub analysis: Option<AnalysisSettings>,
    #[serde(default, deserialize_with = "lenient")]
    pub suite: Option<RecordedSuite>,
}

/// The suite entry as [`Recorded`] reads it.
#[derive(Debug, Clone, Default, Deserialize)]
pub struct RecordedSuite {
    #[serde(default, deserialize_with = "lenient")]
    pub name: Option<String>,
    #[serde(default, deserialize_with = "lenient")]
    pub file: Option<String>,
    #[serde(default, deserialize_with = "lenient")]
    pub sha256: Option<String>,
    #[serde(default, deserialize_with = "lenient")]
    pub seed: Option<u64>,
    #[serde(default, deserialize_with = "lenient")]
    pub repeats: Option<u64>,
}

/// A value that does not read as `T` reads as absent.
fn lenient<'de, D, T>(d: D) -> Result<Option<T>, D::Error>
where
    D: Deserializer<'de>,
    T: serde::de::DeserializeOwned,
{
    let v = Value::deserialize(d)?;
    Ok(serde_json::from_value(v).ok())
}

impl Recorded {
    /// The manifest of `dir`; all absent when there is none or it is not
    /// JSON.
    pub fn read(dir: &Path) -> Recorded {
        std::fs::read(dir.join(output::MANIFEST))
            .ok()
            .and_then(|b| serde_json::from_slice(&b).ok())
            .unwrap_or_default()
    }
}

/// The time now as UTC RFC 3339 to the second (`2026-12-05T14:12:40Z`).
pub fn now_rfc3339() -> String {
    let secs = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0) as i64;
    rfc3339(secs)
}

/// Seconds since 1970-01-01T00:00:00Z as UTC RFC 3339 to the second.
pub fn rfc3339(secs: i64) -> String {
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

/// What a journal of this plan (or of one shard of it) depends on (see
/// [`journal::RunKey`]).
pub fn run_key(plan: &Plan, shard: Option<ShardSpec>) -> journal::RunKey {
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

/// The analysis settings of a plan, as the manifest records them.
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
        decision_threshold: plan
            .metrics
            .iter()
            .any(|m| {
                matches!(
                    m,
                    crate::metrics::MetricId::ThresholdCost | crate::metrics::MetricId::NetBenefit
                )
            })
            .then_some(plan.metric_settings.decision_threshold),
        zero_one_methods: plan
            .methods
            .iter()
            .filter(|m| m.spec.can_predict_zero_one())
            .map(|m| m.id.clone())
            .collect(),
    }
}

/// Portable form of a path for reports: forward slashes, as given.
pub fn shown(p: &Path) -> String {
    p.display().to_string().replace('\\', "/")
}

/// Write a run's unit table, timings and every published file into `dir`
/// (all but `manifest.json`); returns the analysis and the report context
/// (with the run's reliability curves) for the terminal table.
pub fn write_results(
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rfc3339_matches_hand_checked_dates() {
        assert_eq!(rfc3339(0), "1970-01-01T00:00:00Z");
        // A leap day, and the last second of a century year that is a leap
        // year (2000) and of one that is not (2100).
        assert_eq!(rfc3339(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(rfc3339(978_307_199), "2000-12-31T23:59:59Z");
        assert_eq!(rfc3339(4_133_980_799), "2100-12-31T23:59:59Z");
        assert_eq!(rfc3339(4_107_542_400), "2100-03-01T00:00:00Z");
        // Before the epoch.
        assert_eq!(rfc3339(-1), "1969-12-31T23:59:59Z");
    }

    fn sample() -> Manifest {
        Manifest {
            tool: "plumbline".into(),
            version: "0.1.0".into(),
            git_commit: None,
            suite: SuiteRecord {
                file: "suites/x.toml".into(),
                name: "x".into(),
                sha256: "ab".into(),
                seed: u64::MAX,
                repeats: 3,
            },
            analysis: AnalysisSettings {
                reference: "platt".into(),
                primary_metric: "log_loss".into(),
                confidence: 0.95,
                interval: "decomposed-skew".into(),
                pairs: vec![("isotonic".into(), "platt".into())],
                margin: 0.01,
                absolute_margins: Default::default(),
                raw_method: Some("identity".into()),
                max_fallback: 0.1,
                decision_threshold: None,
                zero_one_methods: Vec::new(),
            },
            tasks: vec![TaskRecord {
                id: "a".into(),
                data_sha256: "cd".into(),
                task_seed: 1 << 60,
                rows: 1000,
                reservoir: 600,
                test_rows: 400,
                sizes: vec![50, 100],
                skipped_sizes: vec![800],
            }],
            seed_rule: SEED_RULE.into(),
            score_pools: vec![PoolReport {
                task: "a".into(),
                cache_hit: false,
                train_rows: 10,
                fit_seconds: 0.1,
                score_seconds: 0.2,
            }],
            warnings: vec!["w".into()],
            units: 6,
            machine: MachineRecord {
                resumed_units: 1,
                threads: 2,
                started: "2026-01-01T00:00:00Z".into(),
                finished: "2026-01-01T00:00:01Z".into(),
                wall_seconds: 1.25,
            },
            shard: None,
        }
    }

    /// The keys of a JSON object, in the order written.
    fn keys(text: &str, indent: &str) -> Vec<String> {
        text.lines()
            .filter_map(|l| l.strip_prefix(indent))
            .filter(|l| l.starts_with('"'))
            .map(|l| l.split('"').nth(1).unwrap().to_string())
            .collect()
    }

    #[test]
    fn manifest_keys_are_written_sorted_and_read_back() {
        let m = sample();
        let text = String::from_utf8(m.to_bytes().unwrap()).unwrap();
        let top = keys(&text, "  ");
        let mut sorted = top.clone();
        sorted.sort();
        assert_eq!(top, sorted);
        assert_eq!(
            top,
            [
                "analysis",
                "finished",
                "git_commit",
                "resumed_units",
                "score_pools",
                "seed_rule",
                "started",
                "suite",
                "tasks",
                "threads",
                "tool",
                "units",
                "version",
                "wall_seconds",
                "warnings"
            ]
        );
        // Sorted at every level: the same text as a JSON value (maps ordered
        // by key) written again.
        let value: Value = serde_json::from_str(&text).unwrap();
        assert_eq!(serde_json::to_string_pretty(&value).unwrap(), text);
        assert!(text.find("\"absolute_margins\"") < text.find("\"reference\""));
        assert!(text.contains("\"git_commit\": null"), "{text}");
        assert!(!text.contains("\"shard\""), "{text}");
        let back: Manifest = serde_json::from_slice(text.as_bytes()).unwrap();
        assert_eq!(back, m);
    }

    #[test]
    fn published_manifests_read_and_write_back_byte_for_byte() {
        let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("results");
        for name in ["open-uci", "protocol-study"] {
            let dir = root.join(name);
            let bytes = std::fs::read(dir.join(output::MANIFEST)).unwrap();
            let m = Manifest::read(&dir).unwrap();
            assert_eq!(
                String::from_utf8(m.to_bytes().unwrap()).unwrap(),
                String::from_utf8(bytes).unwrap(),
                "{name}"
            );
        }
    }

    #[test]
    fn machine_fields_are_the_machine_record() {
        let v = serde_json::to_value(MachineRecord::default()).unwrap();
        let mut got: Vec<&str> = v.as_object().unwrap().keys().map(|k| k.as_str()).collect();
        // The machine record's keys, and the commit the binary was built from.
        got.push("git_commit");
        let mut want = MACHINE_FIELDS.to_vec();
        got.sort_unstable();
        want.sort_unstable();
        assert_eq!(got, want);
        let pool = serde_json::to_value(&sample().score_pools[0]).unwrap();
        for k in POOL_MACHINE_FIELDS {
            assert!(pool.get(k).is_some(), "{k}");
        }
        let stripped = without_machine_fields(&serde_json::to_value(sample()).unwrap());
        for k in MACHINE_FIELDS {
            assert!(stripped.get(k).is_none(), "{k}");
        }
        assert_eq!(stripped["score_pools"][0]["task"], "a");
        assert!(stripped["score_pools"][0].get("cache_hit").is_none());
    }

    #[test]
    fn report_reads_what_it_can_of_a_damaged_manifest() {
        let r: Recorded = serde_json::from_str(
            r#"{"analysis": 3, "suite": {"name": "n", "seed": -1, "repeats": 4, "file": null}}"#,
        )
        .unwrap();
        assert!(r.analysis.is_none());
        let s = r.suite.unwrap();
        assert_eq!(s.name.as_deref(), Some("n"));
        assert_eq!((s.seed, s.repeats, s.file), (None, Some(4), None));
        assert!(s.sha256.is_none());
    }
}
