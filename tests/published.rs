//! The published runs in `results/open-uci/` and `results/protocol-study/`
//! are what the documented commands produce: each suite is run again into a
//! temporary folder and every committed file is compared byte for byte (manifest.json without its
//! machine-dependent fields: times, thread count, cache use).
//!
//! Ignored by a plain `cargo test` (listed as ignored), because it reruns the
//! whole default suite (about a minute or two on 2 cores): run it with
//! `cargo test --locked --test published -- --ignored`, or everything with the
//! documented `cargo test --locked -- --include-ignored` (what `.ci/run` runs).

use std::fs;
use std::path::PathBuf;

use assert_cmd::Command;
use tempfile::TempDir;

mod common;
use common::files;

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// manifest.json without what depends on the machine or the moment.
fn stable_manifest(text: &str) -> serde_json::Value {
    let mut m: serde_json::Value = serde_json::from_str(text).unwrap();
    let o = m.as_object_mut().unwrap();
    for k in [
        "started",
        "finished",
        "wall_seconds",
        "threads",
        "resumed_units",
        "git_commit",
    ] {
        o.remove(k);
    }
    if let Some(pools) = o.get_mut("score_pools").and_then(|p| p.as_array_mut()) {
        for p in pools {
            if let Some(p) = p.as_object_mut() {
                for k in ["cache_hit", "fit_seconds", "score_seconds"] {
                    p.remove(k);
                }
            }
        }
    }
    m
}

/// Rerun `args` (from the repository root, into a temporary folder) and
/// compare every file of the committed folder `results/<name>` byte for byte.
fn matches_a_fresh_run(name: &str, args: &[&str], regenerate: &str) {
    let published = root().join("results").join(name);
    // Fit times depend on the machine (and are not committed).
    let committed: Vec<String> = files(&published)
        .into_iter()
        .filter(|f| f != "timings.csv")
        .collect();
    for needed in [
        "summary.md",
        "paired.csv",
        "thresholds.csv",
        "manifest.json",
        "reliability_terms.csv",
    ] {
        assert!(
            committed.iter().any(|f| f == needed),
            "results/{name}/{needed} is not committed"
        );
    }
    let tmp = TempDir::new().unwrap();
    let out = tmp.path().join(name);
    Command::cargo_bin("plumbline")
        .unwrap()
        .current_dir(root())
        .args(args)
        .args(["--out", out.to_str().unwrap(), "--quiet"])
        .assert()
        .success();
    let mut differ = Vec::new();
    for f in &committed {
        let fresh = fs::read(out.join(f)).unwrap_or_else(|_| panic!("the run did not write {f}"));
        let old = fs::read(published.join(f)).unwrap();
        let same = if f == "manifest.json" {
            stable_manifest(&String::from_utf8_lossy(&old))
                == stable_manifest(&String::from_utf8_lossy(&fresh))
        } else {
            old == fresh
        };
        if !same {
            differ.push(f.clone());
        }
    }
    assert!(
        differ.is_empty(),
        "results/{name} differs from a fresh run in: {differ:?}\nregenerate with `{regenerate}` and commit"
    );
}

#[test]
#[ignore = "reruns the whole default suite (minutes); run with `cargo test --locked --test published -- --ignored`, or all tests with `cargo test --locked -- --include-ignored` as .ci/run does"]
fn committed_published_run_matches_the_documented_command() {
    // The documented command is `plumbline run` from the repository root
    // (default suite suites/open-uci.toml); only the folder differs here.
    matches_a_fresh_run("open-uci", &["run"], "cargo run --release -- run --force");
}

#[test]
#[ignore = "reruns the protocol study (a few minutes); run with `cargo test --locked --test published -- --ignored`, or all tests with `cargo test --locked -- --include-ignored` as .ci/run does"]
fn committed_protocol_study_matches_the_documented_command() {
    matches_a_fresh_run(
        "protocol-study",
        &["run", "suites/protocol-study.toml"],
        "cargo run --release -- run suites/protocol-study.toml --force",
    );
}
