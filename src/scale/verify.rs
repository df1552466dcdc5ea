//! `plumbline verify DIR [--sample K]`: rerun the suite recorded in a results
//! folder's manifest and compare bit for bit.
//!
//! Without `--sample`, every unit is rerun into a scratch folder beside DIR
//! (sharing DIR's score-pool cache) and every file present in DIR that a run
//! writes is compared byte for byte; a published folder that keeps only some
//! files (say paired.csv, summary.md, thresholds.csv, figures/ and
//! manifest.json) is checked on those. `timings.csv` holds fit times and is
//! not compared; `manifest.json` is compared without its machine-dependent
//! fields ([`crate::results::without_machine_fields`]).
//! Files a run does not write are listed and skipped.
//!
//! With `--sample K`, K units drawn with a seeded generator (`--seed`, by
//! default derived from the suite seed) are rerun and compared value by value
//! with their rows of DIR's unit table, which must then be present.
//!
//! Exit codes (set by the binary): 0 everything compared matches, 1 a
//! mismatch (the first differing units or files are listed), 2 an error (no
//! manifest, the suite or its data changed since the run, another plumbline
//! version, nothing to compare).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use anyhow::{bail, Context, Result};
use serde_json::Value;

use crate::results::{self, without_machine_fields, Manifest};
use crate::run::table::{read_units_file, units_path, UnitRow, UnitTable};
use crate::run::{self, RunOptions};

/// Options of `plumbline verify`.
#[derive(Debug, Clone, Default)]
pub struct VerifyOptions {
    pub dir: PathBuf,
    /// Suite file [default: the path recorded in the manifest].
    pub suite: Option<PathBuf>,
    pub sample: Option<usize>,
    pub seed: Option<u64>,
    pub threads: Option<usize>,
}

/// The outcome: `lines` to print, `matched` for the exit code.
#[derive(Debug, Clone, Default)]
pub struct VerifyReport {
    pub matched: bool,
    pub lines: Vec<String>,
}

/// At most this many differing units or lines are listed.
const LIST: usize = 10;

type Key = (String, usize, usize, String);

fn key(r: &UnitRow) -> Key {
    (r.task.clone(), r.size, r.repeat, r.method.clone())
}

fn same(a: Option<f64>, b: Option<f64>) -> bool {
    a.map(f64::to_bits) == b.map(f64::to_bits)
}

/// Columns whose values differ between a row of table `a` and one of `b`,
/// matched by column name.
fn row_diffs(ta: &UnitTable, a: &UnitRow, tb: &UnitTable, b: &UnitRow) -> Vec<String> {
    let mut d = Vec::new();
    if a.status != b.status {
        d.push("status".to_string());
    }
    for (name, cols) in [
        ("clipped", a.clipped == b.clipped),
        ("positives", a.positives == b.positives),
        ("reservoir", a.reservoir == b.reservoir),
        ("test_rows", a.test_rows == b.test_rows),
    ] {
        if !cols {
            d.push(name.to_string());
        }
    }
    let pairs = |names_a: &[String], va: &[Option<f64>], names_b: &[String], vb: &[Option<f64>]| {
        let mut out = Vec::new();
        let get = |names: &[String], v: &[Option<f64>], n: &str| {
            names.iter().position(|x| x == n).and_then(|i| v[i])
        };
        let mut all: Vec<&String> = names_a.iter().chain(names_b).collect();
        all.sort();
        all.dedup();
        for n in all {
            if !same(get(names_a, va, n), get(names_b, vb, n)) {
                out.push(n.clone());
            }
        }
        out
    };
    d.extend(pairs(
        &ta.metric_names,
        &a.metrics,
        &tb.metric_names,
        &b.metrics,
    ));
    d.extend(pairs(
        &ta.extra_names,
        &a.extras,
        &tb.extra_names,
        &b.extras,
    ));
    d
}

/// Differences between the rows of `got` (recomputed) and those of `want`
/// (the folder's) with the same keys; with `all`, also rows in only one.
fn table_diffs(want: &UnitTable, got: &UnitTable, all: bool) -> Vec<String> {
    let w: BTreeMap<Key, &UnitRow> = want.rows.iter().map(|r| (key(r), r)).collect();
    let mut out = Vec::new();
    let name = |k: &Key| {
        format!(
            "task `{}`, size {}, repeat {}, method `{}`",
            k.0, k.1, k.2, k.3
        )
    };
    for r in &got.rows {
        let k = key(r);
        match w.get(&k) {
            None => out.push(format!(
                "{}: missing from the folder's unit table",
                name(&k)
            )),
            Some(wr) => {
                let d = row_diffs(want, wr, got, r);
                if !d.is_empty() {
                    out.push(format!("{}: differs in {}", name(&k), d.join(", ")));
                }
            }
        }
    }
    if all {
        let g: std::collections::BTreeSet<Key> = got.rows.iter().map(key).collect();
        for k in w.keys().filter(|k| !g.contains(*k)) {
            out.push(format!("{}: not produced by the rerun", name(k)));
        }
    }
    out
}

fn first_line_diff(a: &[u8], b: &[u8]) -> String {
    let (sa, sb) = (String::from_utf8_lossy(a), String::from_utf8_lossy(b));
    let line = sa
        .lines()
        .zip(sb.lines())
        .position(|(x, y)| x != y)
        .map(|i| i + 1)
        .unwrap_or_else(|| sa.lines().count().min(sb.lines().count()) + 1);
    format!("first difference on line {line}")
}

fn files_under(dir: &Path) -> Result<Vec<String>> {
    let mut out = Vec::new();
    let mut stack = vec![PathBuf::new()];
    while let Some(rel) = stack.pop() {
        let abs = dir.join(&rel);
        for e in
            std::fs::read_dir(&abs).with_context(|| format!("cannot list {}", abs.display()))?
        {
            let e = e?;
            let r = rel.join(e.file_name());
            if e.file_type()?.is_dir() {
                stack.push(r);
            } else {
                out.push(r.to_string_lossy().replace('\\', "/"));
            }
        }
    }
    out.sort();
    Ok(out)
}

/// The scratch folder a full verify of `dir` reruns into: a hidden sibling
/// named after the folder and this process.
fn scratch_dir(dir: &Path, pid: u32) -> PathBuf {
    dir.with_file_name(format!(".{}.verify-{pid}", folder_label(dir)))
}

fn folder_label(dir: &Path) -> String {
    dir.file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_else(|| "results".into())
}

/// Remove what an earlier verify of `dir` left behind when it was killed
/// (its scratch folder, and the staging folder and lock of the rerun into
/// it): siblings named `.<name>.verify-<pid>` (and `..<name>.verify-<pid>.*`)
/// whose process is no longer running. Returns one note per removed entry.
pub fn remove_stale_scratch(dir: &Path) -> Vec<String> {
    let parent = match dir.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let prefix = format!(".{}.verify-", folder_label(dir));
    let Ok(entries) = std::fs::read_dir(&parent) else {
        return Vec::new();
    };
    let mut notes = Vec::new();
    for e in entries.flatten() {
        let name = e.file_name().to_string_lossy().to_string();
        // The scratch folder itself, or `.<scratch name>.partial` / `.lock`.
        let rest = name
            .strip_prefix(&prefix)
            .or_else(|| name.strip_prefix('.').and_then(|n| n.strip_prefix(&prefix)));
        let Some(rest) = rest else { continue };
        let digits: String = rest.chars().take_while(char::is_ascii_digit).collect();
        let tail = &rest[digits.len()..];
        if !(tail.is_empty() || tail == ".partial" || tail == ".lock") {
            continue;
        }
        let Ok(pid) = digits.parse::<u32>() else {
            continue;
        };
        if pid == std::process::id() || crate::run::output::pid_alive(pid) {
            continue;
        }
        let path = e.path();
        let removed = match e.file_type() {
            Ok(t) if t.is_dir() => std::fs::remove_dir_all(&path),
            Ok(_) => std::fs::remove_file(&path),
            Err(err) => Err(err),
        };
        if removed.is_ok() {
            notes.push(format!(
                "removed {}, left by an interrupted verify (process {pid}, no longer running)",
                path.display()
            ));
        }
    }
    notes.sort();
    notes
}

/// Reruns a suite into a folder (`plumbline run SUITE --out DIR --force
/// --quiet`): what a full verify compares the folder with. The command passes
/// its run, so this module needs nothing above it.
pub type Rerun<'a> = &'a dyn Fn(&Path, &Path) -> Result<()>;

/// `plumbline verify`.
pub fn verify(args: &VerifyOptions, rerun: Rerun) -> Result<VerifyReport> {
    let dir = &args.dir;
    if args.sample == Some(0) {
        bail!("--sample 0 would compare nothing: give the number of units to rerun (at least 1), or leave --sample out to rerun every unit");
    }
    let raw = results::read_json(dir)?;
    let stale = remove_stale_scratch(dir);
    let manifest: Manifest = serde_json::from_value(raw.clone()).with_context(|| {
        format!(
            "{}/manifest.json: not the manifest of a results folder of this plumbline version",
            dir.display()
        )
    })?;
    if manifest.shard.is_some() {
        bail!(
            "{} is a shard folder: merge the shards (`plumbline merge`) and verify the merged folder",
            dir.display()
        );
    }
    let suite = match &args.suite {
        Some(s) => s.clone(),
        None => PathBuf::from(&manifest.suite.file),
    };
    let recorded_version = manifest.version.as_str();
    if recorded_version != env!("CARGO_PKG_VERSION") {
        bail!(
            "{} was written by plumbline {recorded_version}; this is {}: verify with that version",
            dir.display(),
            env!("CARGO_PKG_VERSION")
        );
    }
    let plan = crate::suite::load(&suite).with_context(|| {
        format!(
            "loading the suite recorded in {}/manifest.json (pass --suite to give its path)",
            dir.display()
        )
    })?;
    let want_sha = manifest.suite.sha256.as_str();
    if plan.suite_sha256 != want_sha {
        bail!(
            "{}: SHA-256 {} but {} was produced by a suite with SHA-256 {want_sha}: the suite was edited",
            suite.display(),
            plan.suite_sha256,
            dir.display()
        );
    }
    for ((id, want), t) in manifest.task_digests().iter().zip(&plan.tasks) {
        if *id != t.id || *want != t.data_sha256 {
            bail!(
                "task `{}`: data SHA-256 {} but {} was produced with {want}: the data changed",
                t.id,
                t.data_sha256,
                dir.display()
            );
        }
    }
    let mut report = match args.sample {
        Some(k) => verify_sample(args, plan, k)?,
        None => verify_all(args, &suite, &raw, rerun)?,
    };
    report
        .lines
        .splice(0..0, stale.into_iter().map(|n| format!("note: {n}")));
    Ok(report)
}

fn verify_sample(
    args: &VerifyOptions,
    mut plan: crate::suite::Plan,
    k: usize,
) -> Result<VerifyReport> {
    let dir = &args.dir;
    let Some(path) = units_path(dir) else {
        bail!(
            "--sample needs the unit table (units.csv.gz or units.csv) in {}; without --sample, verify reruns every unit and compares the files present",
            dir.display()
        )
    };
    let want = read_units_file(&path).with_context(|| format!("reading {}", path.display()))?;
    let all = run::unit_keys(&plan);
    let seed = args
        .seed
        .unwrap_or_else(|| crate::split::mix(plan.seed, &[crate::split::fnv1a(b"verify")]));
    let mut rng = crate::split::rng(seed);
    let mut picks = crate::split::sample_indices(all.len(), k.min(all.len()), &mut rng);
    picks.sort_unstable();
    let keys: Vec<_> = picks.iter().map(|&i| all[i]).collect();
    let need = keys.iter().map(|k| k.0).collect();
    let cache = dir.parent().map(|p| p.join(".cache").join("pools"));
    if plan.study.is_none() {
        run::pools::resolve_tasks(&mut plan, Some(&need), cache.as_deref(), args.threads, true)
            .map_err(anyhow::Error::msg)?;
    } else {
        bail!("--sample is not available for a protocol study; verify without --sample");
    }
    let opts = RunOptions {
        threads: args.threads,
        quiet: true,
    };
    let got = run::run_keys(&plan, &opts, &keys, Vec::new(), &|_| Ok(()))?;
    let diffs = table_diffs(&want, &got.table, false);
    let mut lines = vec![format!(
        "reran {} of {} units (sample seed {seed}) and compared them with {}",
        keys.len(),
        all.len(),
        path.display()
    )];
    let matched = diffs.is_empty();
    lines.extend(diffs.iter().take(LIST).cloned());
    if diffs.len() > LIST {
        lines.push(format!("… and {} more differing rows", diffs.len() - LIST));
    }
    lines.push(if matched {
        "match: every sampled unit is identical bit for bit".into()
    } else {
        format!("MISMATCH: {} row(s) differ", diffs.len())
    });
    Ok(VerifyReport { matched, lines })
}

fn verify_all(
    args: &VerifyOptions,
    suite: &Path,
    manifest: &Value,
    rerun: Rerun,
) -> Result<VerifyReport> {
    let dir = &args.dir;
    let scratch = scratch_dir(dir, std::process::id());
    // The scratch folder, the staging folder and the lock of the rerun go
    // when verify ends, however it ends: done, failed or interrupted
    // (SIGINT, SIGTERM, SIGHUP). Only a SIGKILL leaves them, for the next
    // verify of the folder to remove ([`remove_stale_scratch`]).
    let leftovers = [
        scratch.clone(),
        crate::run::output::staging_dir(&scratch),
        crate::run::output::lock_path(&scratch),
    ];
    for p in &leftovers {
        crate::atomic::remove_on_interrupt(p);
    }
    let out = rerun(suite, &scratch).and_then(|_| compare_folders(dir, &scratch, manifest));
    let _ = std::fs::remove_dir_all(&scratch);
    // A rerun that failed keeps its staging folder for a resume; verify's
    // does not.
    let _ = std::fs::remove_dir_all(&leftovers[1]);
    for p in &leftovers {
        crate::atomic::forget_on_interrupt(p);
    }
    out
}

fn compare_folders(dir: &Path, rerun: &Path, manifest: &Value) -> Result<VerifyReport> {
    let mut lines = Vec::new();
    let mut bad = Vec::new();
    let mut compared = 0;
    for f in files_under(dir)? {
        let mine = dir.join(&f);
        let theirs = rerun.join(&f);
        if f == "timings.csv" {
            lines.push("timings.csv: fit times, not compared".to_string());
            continue;
        }
        if !theirs.exists() {
            lines.push(format!("{f}: not written by plumbline run, skipped"));
            continue;
        }
        compared += 1;
        let a = std::fs::read(&mine).with_context(|| format!("cannot read {}", mine.display()))?;
        let b = std::fs::read(&theirs)?;
        if f == "manifest.json" {
            let rb: Value = serde_json::from_slice(&b)?;
            let (x, y) = (
                without_machine_fields(manifest),
                without_machine_fields(&rb),
            );
            if x != y {
                let keys: Vec<String> = x
                    .as_object()
                    .into_iter()
                    .flatten()
                    .filter(|(k, v)| y.get(k.as_str()) != Some(v))
                    .map(|(k, _)| k.clone())
                    .collect();
                bad.push(format!("manifest.json: differs in {}", keys.join(", ")));
            }
            continue;
        }
        if a == b {
            continue;
        }
        if crate::run::table::UNITS_FILES.contains(&f.as_str()) {
            let (ta, tb) = (read_units_file(&mine), read_units_file(&theirs));
            match (ta, tb) {
                (Ok(ta), Ok(tb)) => {
                    let d = table_diffs(&ta, &tb, true);
                    bad.push(format!("{f}: {} row(s) differ", d.len()));
                    bad.extend(d.into_iter().take(LIST).map(|x| format!("  {x}")));
                }
                (Err(e), _) => bad.push(format!("{f}: unreadable: {e}")),
                (_, Err(e)) => bad.push(format!("{f}: rerun unreadable: {e}")),
            }
        } else {
            bad.push(format!("{f}: {}", first_line_diff(&a, &b)));
        }
    }
    if compared == 0 {
        bail!("{}: no file a run writes to compare", dir.display());
    }
    let matched = bad.is_empty();
    lines.insert(
        0,
        format!(
            "reran every unit; compared {compared} file(s) of {}",
            dir.display()
        ),
    );
    let n = bad.len();
    lines.extend(bad.into_iter().take(4 * LIST));
    lines.push(if matched {
        "match: every compared file is identical bit for bit".into()
    } else {
        format!("MISMATCH: {n} difference(s) listed above")
    });
    Ok(VerifyReport { matched, lines })
}
