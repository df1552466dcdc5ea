//! `plumbline diagnose` through the real binary: the point values are the
//! suite's metrics on the file, the bootstrap is seeded and thread-count
//! independent, and `--compare` resamples both columns on the same rows
//! (a column compared with itself differs by exactly 0 in every resample).

use std::fs;
use std::path::Path;

use assert_cmd::Command;
use plumbline::metrics::{MetricId, MetricSettings};
use tempfile::TempDir;

fn bin() -> Command {
    Command::cargo_bin("plumbline").unwrap()
}

/// Rows (p, p2, y): p over-confident, p2 = p squeezed toward 0.5 (invented
/// data for the test; SplitMix64 draws).
fn data(n: usize) -> Vec<(f64, f64, bool)> {
    let mut st = 77u64;
    let mut u = || {
        st = plumbline::split::splitmix64(st);
        (st >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..n)
        .map(|_| {
            let q = 0.05 + 0.9 * u();
            let y = u() < q;
            let p = q * q;
            (p, 0.5 + 0.8 * (p - 0.5), y)
        })
        .collect()
}

fn write(d: &Path, rows: &[(f64, f64, bool)]) -> std::path::PathBuf {
    let mut s = String::from("score,other,label\n");
    for (p, q, y) in rows {
        s.push_str(&format!("{p},{q},{}\n", *y as u8));
    }
    let f = d.join("s.csv");
    fs::write(&f, s).unwrap();
    f
}

fn read(path: &Path) -> Vec<Vec<String>> {
    let mut r = csv::Reader::from_path(path).unwrap();
    r.records()
        .map(|x| x.unwrap().iter().map(|s| s.to_string()).collect())
        .collect()
}

fn run(file: &Path, out: &Path, extra: &[&str], threads: &str) {
    bin()
        .env("RAYON_NUM_THREADS", threads)
        .arg("diagnose")
        .arg(file)
        .arg("--out")
        .arg(out)
        .args(["--bootstrap", "200", "--seed", "5"])
        .args(extra)
        .assert()
        .success();
}

#[test]
fn metrics_match_the_suite_metrics_and_bootstrap_is_seeded() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let rows = data(600);
    let f = write(d, &rows);
    run(&f, &d.join("a"), &[], "1");
    run(&f, &d.join("b"), &[], "2");
    let a = fs::read(d.join("a/metrics.csv")).unwrap();
    assert_eq!(
        a,
        fs::read(d.join("b/metrics.csv")).unwrap(),
        "thread count changed the output"
    );
    let p: Vec<f64> = rows.iter().map(|r| r.0).collect();
    let y: Vec<bool> = rows.iter().map(|r| r.2).collect();
    let table = read(&d.join("a/metrics.csv"));
    assert_eq!(table.len(), MetricId::ALL.len());
    for (r, m) in table.iter().zip(MetricId::ALL) {
        assert_eq!(r[0], m.as_str());
        let want = m.compute(&p, &y, &MetricSettings::default());
        let got: f64 = r[1].parse().unwrap();
        assert_eq!(got.to_bits(), want.to_bits(), "{}", m.as_str());
        let (lo, hi): (f64, f64) = (r[2].parse().unwrap(), r[3].parse().unwrap());
        assert!(lo <= hi, "{}", m.as_str());
        if m.as_str() == "log_loss" || m.as_str() == "brier" {
            assert!(lo < want && want < hi, "{}: {lo} {want} {hi}", m.as_str());
        }
    }
    // Another seed, other intervals.
    bin()
        .arg("diagnose")
        .arg(&f)
        .arg("--out")
        .arg(d.join("c"))
        .args(["--bootstrap", "200", "--seed", "6"])
        .assert()
        .success();
    assert_ne!(a, fs::read(d.join("c/metrics.csv")).unwrap());
}

#[test]
fn compare_is_paired() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let rows = data(500);
    let f = write(d, &rows);
    run(&f, &d.join("self"), &["--compare", "score"], "2");
    for r in read(&d.join("self/compare.csv")) {
        if r[1] == "NaN" {
            continue;
        }
        // difference, lo, hi are exactly 0 when a column meets itself.
        assert_eq!(&r[5..8], &["0", "0", "0"], "{r:?}");
    }
    run(&f, &d.join("other"), &["--compare", "other"], "2");
    // The reliability diagram (the report's figure code) has one row per column.
    let svg = fs::read_to_string(d.join("other/reliability.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).expect("reliability.svg parses as XML");
    let labels: Vec<&str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text())
        .collect();
    assert!(
        labels.contains(&"score") && labels.contains(&"other"),
        "{labels:?}"
    );
    assert!(labels.contains(&"all 500 rows"), "{labels:?}");
    let p: Vec<f64> = rows.iter().map(|r| r.0).collect();
    let q: Vec<f64> = rows.iter().map(|r| r.1).collect();
    let y: Vec<bool> = rows.iter().map(|r| r.2).collect();
    let s = MetricSettings::default();
    let ll = read(&d.join("other/compare.csv"))
        .into_iter()
        .find(|r| r[0] == "log_loss")
        .unwrap();
    let want = MetricId::LogLoss.compute(&p, &y, &s) - MetricId::LogLoss.compute(&q, &y, &s);
    assert_eq!(ll[5].parse::<f64>().unwrap().to_bits(), want.to_bits());
}

#[test]
fn bad_input_leaves_no_folder() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let f = write(d, &data(50));
    let a = bin()
        .arg("diagnose")
        .arg(&f)
        .arg("--out")
        .arg(d.join("x"))
        .args(["--compare", "nope"])
        .assert()
        .failure();
    let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
    assert!(err.contains("no column named `nope`"), "{err}");
    assert!(!d.join("x").exists());
}
