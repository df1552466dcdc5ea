//! `plumbline merge SHARD_DIR... --out DIR`: join the shard folders of one
//! sharded run into the results folder a single machine would have written.
//!
//! Checks, each failing with a message naming the folder, shard or unit:
//! every folder is a shard folder; all were written by the same plumbline
//! version for the same suite (SHA-256) and the same data (each task's
//! SHA-256) with the same shard count; every index 1..N is given exactly once;
//! every unit of the suite is present exactly once, in the shard the
//! assignment gives it.
//!
//! The merged folder is byte-identical to `plumbline run SUITE` on one machine
//! except the machine-dependent fields ([`crate::app::MACHINE_FIELDS`] and
//! [`crate::app::POOL_MACHINE_FIELDS`] of `manifest.json`, the fit times of
//! `timings.csv`). In a merged manifest `started` is the earliest shard's
//! start, `finished` the merge's time, `wall_seconds` the sum of the shards'
//! wall times, `threads` the most threads a shard used, `resumed_units` the
//! sum over the shards, and each score pool's entry comes from the
//! lowest-numbered shard that built it. `suite.file` is shard 1's (run every
//! shard with the same suite path for identical `summary.md` and manifest).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use anyhow::{bail, Context, Result};
use serde_json::Value;

use super::shard::{layout, read_units};
use crate::analysis::AnalysisSettings;
use crate::app::{now_rfc3339, write_results};
use crate::report::summary::ReportContext;
use crate::run::{self, output};

/// What a merge produced.
pub struct MergeSummary {
    pub units: usize,
    pub shards: usize,
    pub terminal: String,
    pub warnings: Vec<String>,
}

struct Shard {
    dir: PathBuf,
    manifest: Value,
    index: usize,
    count: usize,
}

/// Read a folder's `manifest.json`.
pub fn read_manifest(dir: &Path) -> Result<Value> {
    let p = dir.join("manifest.json");
    let bytes = std::fs::read(&p).with_context(|| format!("cannot read {}", p.display()))?;
    serde_json::from_slice(&bytes).with_context(|| format!("{}: not valid JSON", p.display()))
}

fn str_at<'a>(v: &'a Value, path: &[&str]) -> &'a str {
    let mut x = v;
    for k in path {
        x = &x[*k];
    }
    x.as_str().unwrap_or("")
}

/// (task id, data SHA-256) of a manifest.
pub fn task_digests(m: &Value) -> Vec<(String, String)> {
    m["tasks"]
        .as_array()
        .map(|ts| {
            ts.iter()
                .map(|t| {
                    (
                        str_at(t, &["id"]).to_string(),
                        str_at(t, &["data_sha256"]).to_string(),
                    )
                })
                .collect()
        })
        .unwrap_or_default()
}

fn short(s: &str) -> String {
    s.chars().take(12).collect()
}

/// The report settings recorded in a manifest.
pub fn context_of(m: &Value, path: &Path) -> Result<ReportContext> {
    let settings: AnalysisSettings = serde_json::from_value(m["analysis"].clone())
        .with_context(|| format!("{}: no readable `analysis` entry", path.display()))?;
    Ok(ReportContext {
        suite_name: str_at(m, &["suite", "name"]).to_string(),
        suite_file: str_at(m, &["suite", "file"]).to_string(),
        suite_sha256: str_at(m, &["suite", "sha256"]).to_string(),
        seed: m["suite"]["seed"].as_u64(),
        settings,
        curves: Vec::new(),
    })
}

fn open_shard(dir: &Path) -> Result<Shard> {
    let manifest = read_manifest(dir)?;
    let sh = &manifest["shard"];
    let (Some(index), Some(count)) = (sh["index"].as_u64(), sh["count"].as_u64()) else {
        bail!(
            "{}: not a shard folder (its manifest.json has no `shard` entry; shards are written by `plumbline run SUITE --shard K/N`)",
            dir.display()
        )
    };
    Ok(Shard {
        dir: dir.to_path_buf(),
        index: index as usize,
        count: count as usize,
        manifest,
    })
}

/// Check that every shard belongs to the same run as `base`.
fn check_same_run(base: &Shard, s: &Shard) -> Result<()> {
    let (a, b) = (&base.manifest, &s.manifest);
    let (bd, sd) = (base.dir.display(), s.dir.display());
    if str_at(a, &["version"]) != str_at(b, &["version"]) {
        bail!(
            "{sd} was written by plumbline {} but {bd} by plumbline {}: rerun the shards with one version",
            str_at(b, &["version"]),
            str_at(a, &["version"])
        );
    }
    let (ha, hb) = (
        str_at(a, &["suite", "sha256"]),
        str_at(b, &["suite", "sha256"]),
    );
    if ha != hb {
        bail!(
            "{sd} comes from another suite than {bd}: suite `{}` SHA-256 {}… vs `{}` SHA-256 {}…",
            str_at(b, &["suite", "name"]),
            short(hb),
            str_at(a, &["suite", "name"]),
            short(ha)
        );
    }
    let (ta, tb) = (task_digests(a), task_digests(b));
    for ((id, da), (_, db)) in ta.iter().zip(&tb) {
        if da != db {
            bail!(
                "{sd} ran on other data than {bd}: task `{id}` has data SHA-256 {}… there and {}… here",
                short(db),
                short(da)
            );
        }
    }
    if ta.len() != tb.len() {
        bail!("{sd} and {bd} have different task lists");
    }
    if s.count != base.count {
        bail!(
            "{sd} is shard {}/{} but {bd} is shard {}/{}: all shards must come from one --shard K/N split",
            s.index,
            s.count,
            base.index,
            base.count
        );
    }
    Ok(())
}

/// `plumbline merge`: join `shard_dirs` into the results folder `out`
/// (replacing an existing one only with `force`).
pub fn merge(shard_dirs: &[PathBuf], out: &Path, force: bool) -> Result<MergeSummary> {
    if shard_dirs.is_empty() {
        bail!("no shard folders given");
    }
    let inputs: Vec<&Path> = shard_dirs.iter().map(PathBuf::as_path).collect();
    let target = output::prepare(out, force, &inputs, false)?;
    let mut shards = shard_dirs
        .iter()
        .map(|d| open_shard(d))
        .collect::<Result<Vec<_>>>()?;
    shards.sort_by_key(|s| s.index);
    let count = shards[0].count;
    for s in &shards {
        check_same_run(&shards[0], s)?;
    }
    for w in shards.windows(2) {
        if w[0].index == w[1].index {
            bail!(
                "shard {}/{count} is given twice: {} and {}",
                w[0].index,
                w[0].dir.display(),
                w[1].dir.display()
            );
        }
    }
    let missing: Vec<String> = (1..=count)
        .filter(|i| !shards.iter().any(|s| s.index == *i))
        .map(|i| format!("{i}/{count}"))
        .collect();
    if !missing.is_empty() {
        bail!(
            "shard {} missing: give all {count} shard folders",
            missing.join(", ")
        );
    }
    let base = &shards[0].manifest;
    let base_path = shards[0].dir.join("manifest.json");
    let task_list = base["tasks"].as_array().cloned().unwrap_or_default();
    let task_ids: Vec<String> = task_list
        .iter()
        .map(|t| str_at(t, &["id"]).to_string())
        .collect();
    let strings = |v: &Value| -> Vec<String> {
        v.as_array()
            .map(|a| {
                a.iter()
                    .filter_map(|x| x.as_str().map(String::from))
                    .collect()
            })
            .unwrap_or_default()
    };
    let methods = strings(&base["shard"]["methods"]);
    let metrics = strings(&base["shard"]["metrics"]);
    let sizes_rows: Vec<(Vec<usize>, usize)> = task_list
        .iter()
        .map(|t| {
            let sizes = t["sizes"]
                .as_array()
                .map(|a| {
                    a.iter()
                        .filter_map(|x| x.as_u64())
                        .map(|x| x as usize)
                        .collect()
                })
                .unwrap_or_default();
            (sizes, t["test_rows"].as_u64().unwrap_or(0) as usize)
        })
        .collect();
    let repeats = base["suite"]["repeats"].as_u64().unwrap_or(0) as usize;
    let expected: BTreeMap<(String, usize, usize), usize> =
        layout(&sizes_rows, repeats, methods.len(), count)
            .into_iter()
            .map(|((ti, size, r), s, _)| ((task_ids[ti].clone(), size, r), s + 1))
            .collect();
    let unit_name =
        |k: &(String, usize, usize)| format!("task `{}`, size {}, repeat {}", k.0, k.1, k.2);
    let mut seen: BTreeMap<(String, usize, usize), usize> = BTreeMap::new();
    let mut units = Vec::new();
    for s in &shards {
        for u in read_units(&s.dir)? {
            let k = (u.task.clone(), u.size, u.repeat);
            match expected.get(&k) {
                None => bail!(
                    "{}: unit {} is not a unit of suite `{}`",
                    s.dir.display(),
                    unit_name(&k),
                    str_at(base, &["suite", "name"])
                ),
                Some(&want) if want != s.index => bail!(
                    "{}: unit {} belongs to shard {want}/{count}, not to shard {}/{count}",
                    s.dir.display(),
                    unit_name(&k),
                    s.index
                ),
                _ => {}
            }
            if seen.insert(k.clone(), s.index).is_some() {
                bail!("{}: unit {} appears twice", s.dir.display(), unit_name(&k));
            }
            units.push(u);
        }
    }
    let absent: Vec<_> = expected.keys().filter(|k| !seen.contains_key(*k)).collect();
    if let Some(first) = absent.first() {
        let sh = expected[*first];
        let dir = shards
            .iter()
            .find(|s| s.index == sh)
            .map(|s| s.dir.display().to_string());
        bail!(
            "{} unit(s) missing, first {} of shard {sh}/{count} ({}): was that shard cut short?",
            absent.len(),
            unit_name(first),
            dir.unwrap_or_default()
        );
    }

    let num = |s: &Shard, k: &str| s.manifest[k].as_u64().unwrap_or(0) as usize;
    let threads = shards.iter().map(|s| num(s, "threads")).max().unwrap_or(0);
    let resumed: usize = shards.iter().map(|s| num(s, "resumed_units")).sum();
    let tasks: Vec<&str> = task_ids.iter().map(|s| s.as_str()).collect();
    let mrefs: Vec<&str> = methods.iter().map(|s| s.as_str()).collect();
    let n_units = units.len();
    let result = run::assemble_ordered(&tasks, &mrefs, metrics, units, threads, resumed);

    let ctx = context_of(base, &base_path)?;
    let staging = target.staging();
    let (a, ctx) = write_results(staging, &result, ctx)?;
    let mut manifest = base.clone();
    if let Some(o) = manifest.as_object_mut() {
        o.remove("shard");
    }
    let mut pools: BTreeMap<usize, Value> = BTreeMap::new();
    for s in &shards {
        for p in s.manifest["score_pools"].as_array().into_iter().flatten() {
            if let Some(i) = task_ids.iter().position(|t| t == str_at(p, &["task"])) {
                pools.entry(i).or_insert_with(|| p.clone());
            }
        }
    }
    manifest["score_pools"] = Value::Array(pools.into_values().collect());
    manifest["warnings"] = serde_json::json!(result.warnings);
    manifest["threads"] = serde_json::json!(threads);
    manifest["resumed_units"] = serde_json::json!(resumed);
    let started = shards
        .iter()
        .map(|s| str_at(&s.manifest, &["started"]).to_string())
        .min()
        .unwrap_or_default();
    manifest["started"] = serde_json::json!(started);
    manifest["finished"] = serde_json::json!(now_rfc3339());
    let wall: f64 = shards
        .iter()
        .map(|s| s.manifest["wall_seconds"].as_f64().unwrap_or(0.0))
        .sum();
    manifest["wall_seconds"] = serde_json::json!(wall);
    output::write_file(
        staging,
        "manifest.json",
        serde_json::to_string_pretty(&manifest)?.as_bytes(),
    )?;
    target.commit()?;
    Ok(MergeSummary {
        units: n_units,
        shards: shards.len(),
        terminal: crate::report::summary::terminal(&a, &ctx),
        warnings: result.warnings,
    })
}
