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
//! except the machine-dependent fields ([`crate::results::MACHINE_FIELDS`] and
//! [`crate::results::POOL_MACHINE_FIELDS`] of `manifest.json`, the fit times of
//! `timings.csv`). In a merged manifest `started` is the earliest shard's
//! start, `finished` the merge's time, `wall_seconds` the sum of the shards'
//! wall times, `threads` the most threads a shard used, `resumed_units` the
//! sum over the shards, and each score pool's entry comes from the
//! lowest-numbered shard that built it. `suite.file` is shard 1's (run every
//! shard with the same suite path for identical `summary.md` and manifest).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use anyhow::{bail, Result};

use super::shard::read_units;
use crate::results::{now_rfc3339, write_results, Manifest};
use crate::run::shard::layout;
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
    manifest: Manifest,
    index: usize,
    count: usize,
}

fn short(s: &str) -> String {
    s.chars().take(12).collect()
}

fn open_shard(dir: &Path) -> Result<Shard> {
    let manifest = Manifest::read(dir)?;
    let Some(sh) = &manifest.shard else {
        bail!(
            "{}: not a shard folder (its manifest.json has no `shard` entry; shards are written by `plumbline run SUITE --shard K/N`)",
            dir.display()
        )
    };
    Ok(Shard {
        dir: dir.to_path_buf(),
        index: sh.index,
        count: sh.count,
        manifest,
    })
}

/// Check that every shard belongs to the same run as `base`.
fn check_same_run(base: &Shard, s: &Shard) -> Result<()> {
    let (a, b) = (&base.manifest, &s.manifest);
    let (bd, sd) = (base.dir.display(), s.dir.display());
    if a.version != b.version {
        bail!(
            "{sd} was written by plumbline {} but {bd} by plumbline {}: rerun the shards with one version",
            b.version,
            a.version
        );
    }
    let (ha, hb) = (&a.suite.sha256, &b.suite.sha256);
    if ha != hb {
        bail!(
            "{sd} comes from another suite than {bd}: suite `{}` SHA-256 {}… vs `{}` SHA-256 {}…",
            b.suite.name,
            short(hb),
            a.suite.name,
            short(ha)
        );
    }
    let (ta, tb) = (a.task_digests(), b.task_digests());
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
    let task_ids: Vec<String> = base.tasks.iter().map(|t| t.id.clone()).collect();
    let (methods, metrics) = match &base.shard {
        Some(sh) => (sh.methods.clone(), sh.metrics.clone()),
        None => (Vec::new(), Vec::new()),
    };
    let sizes_rows: Vec<(Vec<usize>, usize)> = base
        .tasks
        .iter()
        .map(|t| (t.sizes.clone(), t.test_rows))
        .collect();
    let repeats = base.suite.repeats;
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
                    base.suite.name
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

    let threads = shards
        .iter()
        .map(|s| s.manifest.machine.threads)
        .max()
        .unwrap_or(0);
    let resumed: usize = shards
        .iter()
        .map(|s| s.manifest.machine.resumed_units)
        .sum();
    let tasks: Vec<&str> = task_ids.iter().map(|s| s.as_str()).collect();
    let mrefs: Vec<&str> = methods.iter().map(|s| s.as_str()).collect();
    let n_units = units.len();
    let result = run::assemble_ordered(&tasks, &mrefs, metrics, units, threads, resumed);

    let staging = target.staging();
    let (a, ctx) = write_results(staging, &result, base.report_context())?;
    let mut manifest = base.clone();
    manifest.shard = None;
    let mut pools = BTreeMap::new();
    for s in &shards {
        for p in &s.manifest.score_pools {
            if let Some(i) = task_ids.iter().position(|t| *t == p.task) {
                pools.entry(i).or_insert_with(|| p.clone());
            }
        }
    }
    manifest.score_pools = pools.into_values().collect();
    manifest.warnings = result.warnings.clone();
    manifest.machine.threads = threads;
    manifest.machine.resumed_units = resumed;
    manifest.machine.started = shards
        .iter()
        .map(|s| s.manifest.machine.started.clone())
        .min()
        .unwrap_or_default();
    manifest.machine.finished = now_rfc3339();
    manifest.machine.wall_seconds = shards.iter().map(|s| s.manifest.machine.wall_seconds).sum();
    manifest.write(staging)?;
    target.commit()?;
    Ok(MergeSummary {
        units: n_units,
        shards: shards.len(),
        terminal: crate::report::summary::terminal(&a, &ctx),
        warnings: result.warnings,
    })
}
