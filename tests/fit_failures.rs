//! The failure policy through the real binary (`on_fit_failure`), on a small
//! saturated score file: every score is exactly 0 or 1, so a calibration draw
//! has one class (no positive drawn), or is separable with two distinct scores
//! (positives at 1, negatives at 0).
//!
//! Expected values are computed here independently: the base rate
//! (k + 1)/(n + 2) and its log loss by hand; the separable Platt fit by
//! fitting Platt's smoothed targets on the unit's own calibration sample
//! (drawn through the library as the engine draws it).

use std::collections::BTreeMap;
use std::fs;
use std::path::Path;

use assert_cmd::Command;
use plumbline::calibrate::platt::Platt;
use plumbline::calibrate::{MethodSpec, ScoreKind};
use tempfile::TempDir;

const REPEATS: usize = 30;

/// 20 reservoir rows (3 positives at score 1, 17 negatives at score 0) and a
/// 12-row test set with both classes at scores 0, 1 and in between.
fn score_file() -> String {
    let mut s = String::from("id,score,label,side\n");
    for i in 0..20 {
        let (score, label) = if i < 3 { ("1", 1) } else { ("0", 0) };
        s.push_str(&format!("c{i},{score},{label},calibration\n"));
    }
    let test = [
        ("1", 1),
        ("1", 0),
        ("0", 0),
        ("0", 1),
        ("0.5", 1),
        ("0.5", 0),
        ("1", 1),
        ("0", 0),
        ("0.9", 1),
        ("0.1", 0),
        ("0", 0),
        ("1", 0),
    ];
    for (i, (score, label)) in test.iter().enumerate() {
        s.push_str(&format!("t{i},{score},{label},test\n"));
    }
    s
}

fn suite(policy: &str) -> String {
    format!(
        r#"name = "saturated"
seed = 11
repeats = {REPEATS}
sizes = [4]
reference = "platt"
metrics = ["log_loss", "brier"]
primary_metric = "log_loss"
{policy}

[[method]]
id = "platt"
kind = "platt"

[[method]]
id = "beta"
kind = "beta"

[[method]]
id = "identity"
kind = "identity"

[[method]]
id = "isotonic"
kind = "isotonic"

[[task]]
id = "sat"
scores = "sat.csv"
score_column = "score"
label_column = "label"
score_kind = "probability"
split_column = "side"
"#
    )
}

fn setup(policy: &str) -> (TempDir, std::path::PathBuf) {
    let dir = TempDir::new().unwrap();
    fs::write(dir.path().join("sat.csv"), score_file()).unwrap();
    let p = dir.path().join("suite.toml");
    fs::write(&p, suite(policy)).unwrap();
    (dir, p)
}

fn run(dir: &Path, suite: &Path) -> assert_cmd::assert::Assert {
    Command::cargo_bin("plumbline")
        .unwrap()
        .args(["run", "--quiet", "--out"])
        .arg(dir.join("out"))
        .arg(suite)
        .assert()
}

/// Rows of a CSV (gzipped when the name ends in `.gz`) as maps from column
/// name to cell.
fn csv_rows(path: &Path) -> Vec<BTreeMap<String, String>> {
    let bytes = fs::read(path).unwrap();
    let text = if path.extension().is_some_and(|e| e == "gz") {
        let mut s = String::new();
        std::io::Read::read_to_string(&mut flate2::read::GzDecoder::new(&bytes[..]), &mut s)
            .unwrap();
        s
    } else {
        String::from_utf8(bytes).unwrap()
    };
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    lines
        .enumerate()
        .map(|(i, l)| {
            let cells: Vec<&str> = l.split(',').collect();
            assert_eq!(
                cells.len(),
                header.len(),
                "{}: line {} has {} cells, the header {}",
                path.display(),
                i + 2,
                cells.len(),
                header.len()
            );
            header
                .iter()
                .zip(cells)
                .map(|(h, v)| (h.to_string(), v.to_string()))
                .collect()
        })
        .collect()
}

const TEST_LABELS: [bool; 12] = [
    true, false, false, true, true, false, true, false, true, false, false, false,
];

/// Log loss of one constant prediction on the test set (no clipping at 1e-6
/// is involved for these rates).
fn constant_log_loss(p: f64) -> f64 {
    let pos = TEST_LABELS.iter().filter(|&&y| y).count() as f64;
    let n = TEST_LABELS.len() as f64;
    -(pos * p.ln() + (n - pos) * (1.0 - p).ln()) / n
}

fn value(r: &BTreeMap<String, String>, k: &str) -> f64 {
    r[k].parse()
        .unwrap_or_else(|_| panic!("{k} = {} in {r:?}", r[k]))
}

#[test]
fn every_draw_counts_with_the_base_rate_fallback() {
    let (dir, suite_path) = setup("");
    run(dir.path(), &suite_path).success();
    let units = csv_rows(&dir.path().join("out/units.csv.gz"));
    assert_eq!(units.len(), REPEATS * 4);
    let plan = plumbline::suite::load(&suite_path).unwrap();
    let smoothed = MethodSpec::Platt(Platt {
        target_smoothing: true,
    })
    .build(ScoreKind::Probability)
    .unwrap();
    let test_scores: Vec<f64> = plan.tasks[0]
        .test
        .iter()
        .map(|&i| plan.tasks[0].pool.scores[i])
        .collect();
    assert_eq!(test_scores.len(), TEST_LABELS.len(), "test rows");
    let (mut one_class, mut separable) = (0, 0);
    for r in &units {
        let k: usize = r["positives"].parse().unwrap();
        let rate = (k as f64 + 1.0) / 6.0;
        let ll = value(r, "log_loss");
        let method = r["method"].as_str();
        if k == 0 {
            // One class: every method predicts the base rate 1/6.
            one_class += 1;
            assert_eq!(r["status"], "fallback:base-rate", "{r:?}");
            assert!((ll - constant_log_loss(rate)).abs() < 1e-12, "{r:?}");
        } else if method == "beta" {
            // Two distinct scores: beta (full) cannot fit; base rate (k+1)/6.
            assert_eq!(r["status"], "fallback:base-rate", "{r:?}");
            assert!((ll - constant_log_loss(rate)).abs() < 1e-12, "{r:?}");
        } else if method == "platt" {
            // Separable: Platt's smoothed targets, as documented.
            separable += 1;
            assert_eq!(r["status"], "separable", "{r:?}");
            let rep: usize = r["repeat"].parse().unwrap();
            let (s, y) = plumbline::run::calibration_sample(&plan, 0, 4, rep);
            let f = smoothed.fit(&s, &y).unwrap();
            let mut p = vec![0.0; test_scores.len()];
            f.map.predict(&test_scores, &mut p);
            let want = -TEST_LABELS
                .iter()
                .zip(&p)
                .map(|(&y, &p)| {
                    let p = p.clamp(1e-6, 1.0 - 1e-6);
                    if y {
                        p.ln()
                    } else {
                        (1.0 - p).ln()
                    }
                })
                .sum::<f64>()
                / 12.0;
            assert!((ll - want).abs() < 1e-12, "{r:?}: want {want}");
        }
    }
    assert!(one_class > 0 && separable > 0, "{one_class} {separable}");
    for p in csv_rows(&dir.path().join("out/paired.csv")) {
        assert_eq!(p["repeats"], REPEATS.to_string(), "{p:?}");
    }
    let summary = fs::read_to_string(dir.path().join("out/summary.md")).unwrap();
    assert!(summary.contains("## Fallback fits"), "{summary}");
    assert!(summary.contains("| sat | 4 | beta | 30 | 30 | 100% | **large** |"));
}

#[test]
fn drop_leaves_repeats_out_and_warns() {
    let (dir, suite_path) = setup("on_fit_failure = \"drop\"");
    let out = run(dir.path(), &suite_path).success();
    // Warnings are wrapped to the terminal width: compare without line breaks.
    let err = String::from_utf8_lossy(&out.get_output().stderr)
        .split_whitespace()
        .collect::<Vec<_>>()
        .join(" ");
    assert!(err.contains("left out of the comparisons"), "{err}");
    assert!(err.contains("one class: 0 positives of 4"), "{err}");
    let units = csv_rows(&dir.path().join("out/units.csv.gz"));
    assert!(units.iter().any(|r| r["status"] == "one_class"));
    assert!(units
        .iter()
        .any(|r| r["method"] == "beta" && r["status"] == "failed"));
    let paired = csv_rows(&dir.path().join("out/paired.csv"));
    assert!(paired
        .iter()
        .all(|p| p["repeats"].parse::<usize>().unwrap() < REPEATS));
}

#[test]
fn stop_names_the_unit_and_writes_nothing() {
    let (dir, suite_path) = setup("on_fit_failure = \"stop\"");
    let out = run(dir.path(), &suite_path).failure();
    let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
    assert!(err.contains("task `sat`, size 4, repeat "), "{err}");
    assert!(err.contains("method `"), "{err}");
    assert!(
        err.contains("one class: 0 positives of 4") || err.contains("distinct scores"),
        "{err}"
    );
    assert!(!dir.path().join("out").exists());
}

#[test]
fn unknown_policy_is_a_located_suite_error() {
    let (dir, suite_path) = setup("on_fit_failure = \"skip\"");
    let out = Command::cargo_bin("plumbline")
        .unwrap()
        .args(["check"])
        .arg(&suite_path)
        .assert()
        .failure();
    let err = String::from_utf8_lossy(&out.get_output().stderr).to_string();
    assert!(err.contains("suite.toml:8:"), "{err}");
    assert!(
        err.contains("on_fit_failure") && err.contains("`skip`"),
        "{err}"
    );
    drop(dir);
}
