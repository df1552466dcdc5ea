//! Integration tests through the real binary: a small suite end to end,
//! determinism across thread counts, and every bad-input case exiting non-zero
//! with a located message and no results folder.

use std::fs;
use std::path::{Path, PathBuf};

use assert_cmd::Command;
use tempfile::TempDir;

/// The text of a gzip file.
fn gunzip(p: &Path) -> String {
    use std::io::Read;
    let mut s = String::new();
    flate2::read::GzDecoder::new(fs::File::open(p).unwrap())
        .read_to_string(&mut s)
        .unwrap();
    s
}

fn bin() -> Command {
    Command::cargo_bin("plumbline").unwrap()
}

/// A deterministic score file: probability scores with a mild distortion.
fn score_csv(rows: usize, seed: u64) -> String {
    let mut s = String::from("id,score,label\n");
    let mut x = seed;
    for i in 0..rows {
        // SplitMix-style integer hash for reproducible pseudo-random values.
        x = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = x;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        let u = (z >> 11) as f64 / (1u64 << 53) as f64;
        let v = ((z.rotate_left(17)) >> 11) as f64 / (1u64 << 53) as f64;
        let q = 0.05 + 0.9 * u;
        let score = q * q; // over-confident towards 0
        let label = (v < q) as u8;
        s.push_str(&format!("r{i},{score:.6},{label}\n"));
    }
    s
}

struct Fixture {
    dir: TempDir,
}

impl Fixture {
    fn new() -> Self {
        let dir = TempDir::new().unwrap();
        fs::write(dir.path().join("a.csv"), score_csv(600, 1)).unwrap();
        fs::write(dir.path().join("b.csv"), score_csv(500, 2)).unwrap();
        Fixture { dir }
    }
    fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }
    fn suite(&self, name: &str, text: &str) -> PathBuf {
        let p = self.path(name);
        fs::write(&p, text).unwrap();
        p
    }
}

const GOOD: &str = r#"name = "small"
seed = 7
repeats = 5
sizes = [20, 60]
reference = "platt"
metrics = ["log_loss", "brier"]
primary_metric = "log_loss"

[test_set]
rows = 200

[[method]]
id = "identity"
kind = "identity"

[[method]]
id = "platt"
kind = "platt"

[[method]]
id = "isotonic"
kind = "isotonic"

[[task]]
id = "a"
scores = "a.csv"
score_column = "score"
label_column = "label"
score_kind = "probability"

[[task]]
id = "b"
scores = "b.csv"
score_column = "score"
label_column = "label"
score_kind = "probability"
"#;

fn run_ok(_fx: &Fixture, suite: &Path, out: &Path, threads: &str) {
    bin()
        .args([
            "run",
            suite.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--threads",
            threads,
            "--quiet",
        ])
        .assert()
        .success();
}

#[test]
fn small_suite_writes_the_documented_files() {
    let fx = Fixture::new();
    let suite = fx.suite("good.toml", GOOD);
    let out = fx.path("out");
    run_ok(&fx, &suite, &out, "2");
    for f in [
        "manifest.json",
        "units.csv.gz",
        "paired.csv",
        "summary.md",
        "timings.csv",
        "thresholds.csv",
        "index.html",
        "tables.tex",
    ] {
        assert!(out.join(f).exists(), "{f} missing");
    }
    let units = gunzip(&out.join("units.csv.gz"));
    let head = units.lines().next().unwrap();
    assert!(
        head.starts_with(
            "task,size,repeat,method,status,log_loss,brier,clipped,positives,reservoir,test_rows,"
        ),
        "{head}"
    );
    // Per-unit test-batch summaries for the interval estimator.
    assert!(
        head.contains(",brier_dbatch00,")
            && head.ends_with("log_loss_dbatch19,log_loss_extreme_rows"),
        "{head}"
    );
    // Extreme-prediction counts: plain isotonic regression fitted on 20 rows
    // predicts exactly 0 or 1 on its end blocks, so some test row pays the
    // clipped loss; the count is recorded for every method, reference included.
    let col = head
        .split(',')
        .position(|c| c == "log_loss_extreme_rows")
        .unwrap();
    let counts = |method: &str| -> Vec<f64> {
        units
            .lines()
            .skip(1)
            .filter(|l| l.split(',').nth(3) == Some(method))
            .map(|l| l.split(',').nth(col).unwrap().parse::<f64>().unwrap())
            .collect()
    };
    assert!(counts("isotonic").iter().any(|&n| n > 0.0));
    assert_eq!(counts("platt").len(), 20);
    // 2 tasks × 2 sizes × 5 repeats × 3 methods.
    assert_eq!(units.lines().count() - 1, 60);
    let paired = fs::read_to_string(out.join("paired.csv")).unwrap();
    assert!(paired.starts_with("task,size,method,reference,metric,repeats,mean_method,mean_reference,mean_diff,ci_low,ci_high,se,wins,ties,losses"));
    // 2 tasks × 2 sizes × 2 non-reference methods × 2 metrics.
    assert_eq!(paired.lines().count() - 1, 16);
    let manifest: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(manifest["suite"]["seed"], 7);
    assert_eq!(manifest["tasks"][0]["test_rows"], 200);
    assert_eq!(manifest["tasks"][1]["reservoir"], 300);
    assert!(manifest["suite"]["sha256"].as_str().unwrap().len() == 64);
    let summary = fs::read_to_string(out.join("summary.md")).unwrap();
    assert!(summary.contains("Task `a`") && summary.contains("Caution"));
    // Plain isotonic regression makes extreme predictions in every log-loss
    // comparison here (see the test below): 4 of the 8 log-loss comparisons.
    // The paragraph counts those outside rare-class cells (n = 20 holds about
    // 7 rows of the rarer class: †), which have a paragraph of their own.
    let rows: Vec<Vec<&str>> = paired
        .lines()
        .skip(1)
        .map(|l| l.split(',').collect())
        .collect();
    let wide = rows
        .iter()
        .filter(|r| r[4] == "log_loss" && r[17] == "1" && r[21] == "false")
        .count();
    let rare = rows.iter().filter(|r| r[21] == "true").count();
    assert!(wide >= 1 && rare >= 1, "{wide} {rare}");
    assert!(summary.contains(&format!(
        "Wider log-loss intervals: in {wide} of 8 log-loss comparisons"
    )));
    assert!(summary.contains(&format!(
        "**Approximate intervals (†):** {rare} of 16 comparisons"
    )));
    // 5 repeats is below the 30 at which the intervals' coverage was checked.
    assert!(summary.contains(
        "Note on intervals:** 16 of 16 comparisons rest on fewer than 30 repeats (as few as 5;"
    ));
    // No staging folder is left behind.
    assert!(!fx.path(".out.partial").exists());
}

#[test]
fn one_and_two_threads_give_identical_bytes() {
    let fx = Fixture::new();
    let suite = fx.suite("good.toml", GOOD);
    let (o1, o2) = (fx.path("one"), fx.path("two"));
    run_ok(&fx, &suite, &o1, "1");
    run_ok(&fx, &suite, &o2, "2");
    for f in [
        "units.csv.gz",
        "paired.csv",
        "summary.md",
        "thresholds.csv",
        "index.html",
    ] {
        assert_eq!(
            fs::read(o1.join(f)).unwrap(),
            fs::read(o2.join(f)).unwrap(),
            "{f} differs"
        );
    }
}

#[test]
fn existing_results_need_force_and_report_rebuilds() {
    let fx = Fixture::new();
    let suite = fx.suite("good.toml", GOOD);
    let out = fx.path("out");
    run_ok(&fx, &suite, &out, "2");
    let paired = fs::read(out.join("paired.csv")).unwrap();
    let summary = fs::read(out.join("summary.md")).unwrap();
    bin()
        .args([
            "run",
            suite.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ])
        .assert()
        .failure()
        .stderr(predicates::str::contains("--force"));
    // report rebuilds every published file byte for byte from units.csv.gz.
    let mut published = Vec::new();
    for e in fs::read_dir(&out).unwrap() {
        let p = e.unwrap().path();
        let name = p.file_name().unwrap().to_string_lossy().to_string();
        // The inputs of report: the unit table, the reliability files, the
        // manifest (timings.csv is not read).
        if !name.starts_with("reliability")
            && !["units.csv.gz", "timings.csv", "manifest.json"].contains(&name.as_str())
        {
            published.push(name);
        }
    }
    assert!(published.len() >= 6, "{published:?}");
    let before: Vec<(String, Vec<u8>)> = published
        .iter()
        .flat_map(|n| {
            let p = out.join(n);
            if p.is_dir() {
                fs::read_dir(&p)
                    .unwrap()
                    .map(|e| {
                        let q = e.unwrap().path();
                        (
                            format!("{n}/{}", q.file_name().unwrap().to_string_lossy()),
                            fs::read(q).unwrap(),
                        )
                    })
                    .collect::<Vec<_>>()
            } else {
                vec![(n.clone(), fs::read(p).unwrap())]
            }
        })
        .collect();
    for n in &published {
        let p = out.join(n);
        if p.is_dir() {
            fs::remove_dir_all(p).unwrap();
        } else {
            fs::remove_file(p).unwrap();
        }
    }
    bin()
        .args(["report", out.to_str().unwrap()])
        .assert()
        .success();
    for (n, bytes) in &before {
        assert!(
            fs::read(out.join(n)).unwrap() == *bytes,
            "{n} rebuilt differently"
        );
    }
    assert_eq!(fs::read(out.join("paired.csv")).unwrap(), paired);
    assert_eq!(fs::read(out.join("summary.md")).unwrap(), summary);
    // A bad --reference or --primary-metric is refused with the valid values
    // of the folder, and changes nothing.
    for (flag, value, needle) in [
        (
            "--reference",
            "beta",
            "--reference `beta`: no such method in",
        ),
        (
            "--reference",
            "beta",
            "its methods are identity, isotonic, platt",
        ),
        ("--primary-metric", "auc", "--primary-metric `auc`:"),
        ("--primary-metric", "auc", "has columns log_loss, brier"),
    ] {
        bin()
            .args(["report", out.to_str().unwrap(), flag, value])
            .assert()
            .failure()
            .stderr(predicates::str::contains(needle));
    }
    assert_eq!(fs::read(out.join("summary.md")).unwrap(), summary);
    // The help lists every metric id a suite can name.
    let help = bin().args(["report", "--help"]).assert().success();
    let help = String::from_utf8_lossy(&help.get_output().stdout).into_owned();
    for m in plumbline::metrics::MetricId::ALL {
        assert!(
            help.contains(m.as_str()),
            "{} missing from {help}",
            m.as_str()
        );
    }
    bin()
        .args([
            "run",
            suite.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
            "--force",
        ])
        .assert()
        .success();
}

#[test]
fn extreme_predictions_widen_the_default_interval_to_the_linear_one() {
    // The default `decomposed-skew` interval takes the first-order reservoir
    // term exactly when a unit recorded extreme log-loss rows for either
    // method (docs/statistics.md): its log-loss standard errors against plain
    // isotonic regression then equal those of `decomposed-linear` (the ends
    // differ by the skewness correction), while its Brier intervals (never
    // extreme) have a smaller standard error.
    let fx = Fixture::new();
    let suite = fx.suite("good.toml", GOOD);
    let out = fx.path("out");
    run_ok(&fx, &suite, &out, "2");
    let read = |name: &str| -> Vec<Vec<String>> {
        fs::read_to_string(out.join(name))
            .unwrap()
            .lines()
            .skip(1)
            .map(|l| l.split(',').map(str::to_string).collect())
            .collect()
    };
    let default = read("paired.csv");
    bin()
        .args([
            "report",
            out.to_str().unwrap(),
            "--interval",
            "decomposed-linear",
        ])
        .assert()
        .success();
    let linear = read("paired.csv");
    assert_eq!(default.len(), linear.len());
    // The last column names the reservoir term's degree.
    assert!(linear.iter().all(|r| r[17] == "1"));
    let (mut same, mut narrower, mut rare) = (0, 0, 0);
    for (d, l) in default.iter().zip(&linear) {
        assert_eq!(d[..5], l[..5]);
        if d[2] == "isotonic" && d[4] == "log_loss" {
            assert_eq!(d[11], l[11], "{d:?}");
            assert_eq!(d[17], "1");
            same += 1;
        }
        if d[4] == "brier" {
            if d[21] == "true" {
                // Rare-class cells take the first-order term on every metric.
                assert_eq!(d[11], l[11], "{d:?}");
                assert_eq!(d[17], "1");
                rare += 1;
                continue;
            }
            // A smaller standard error (the skewness correction may still
            // lengthen one end, so compare se rather than width).
            let se = |r: &Vec<String>| r[11].parse::<f64>().unwrap();
            assert!(se(d) < se(l), "{d:?} vs {l:?}");
            assert_eq!(d[17], "2");
            narrower += 1;
        }
    }
    assert_eq!((same, narrower + rare), (4, 8));
    // Both cases occur: n = 20 holds about 7 rows of the rarer class, the
    // larger size more than 10.
    assert!(narrower > 0 && rare > 0, "{narrower} {rare}");
}

/// Run a suite that must fail; the message must contain every `needle`, and no
/// results folder may appear.
fn must_fail(fx: &Fixture, suite_text: &str, needles: &[&str]) {
    let suite = fx.suite("bad.toml", suite_text);
    let out = fx.path("bad-out");
    let assert = bin()
        .args([
            "run",
            suite.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ])
        .assert()
        .failure();
    let err = String::from_utf8_lossy(&assert.get_output().stderr).to_string();
    for n in needles {
        assert!(err.contains(n), "message {err:?} lacks {n:?}");
    }
    assert!(
        !out.exists(),
        "a results folder was written for a bad suite"
    );
    assert!(!fx.path(".bad-out.partial").join("units.csv.gz").exists());
    // `check` fails the same way.
    bin()
        .args(["check", suite.to_str().unwrap()])
        .assert()
        .failure();
}

#[test]
fn bad_suites_are_rejected_with_file_line_and_key() {
    let fx = Fixture::new();
    must_fail(
        &fx,
        &GOOD.replace("repeats = 5", "repeats = 5\nrepeets = 3"),
        &["bad.toml:4", "repeets"],
    );
    must_fail(
        &fx,
        &GOOD.replace("repeats = 5", "repeats = \"five\""),
        &["bad.toml:3", "repeats"],
    );
    must_fail(
        &fx,
        &GOOD.replace("sizes = [20, 60]", "sizes = [20, 5000]"),
        &["bad.toml:4", "sizes", "5000", "reservoir"],
    );
    must_fail(
        &fx,
        &GOOD.replace("reference = \"platt\"", "reference = \"beta\""),
        &["bad.toml:5", "reference", "beta"],
    );
    must_fail(
        &fx,
        &GOOD.replace("id = \"b\"", "id = \"a\""),
        &["task `a`", "another task"],
    );
    must_fail(
        &fx,
        &GOOD.replace("kind = \"platt\"", "kind = \"platt\"\nsmoothing = true"),
        &["method `platt`", "smoothing"],
    );
    must_fail(
        &fx,
        &GOOD.replace(
            "primary_metric = \"log_loss\"",
            "primary_metric = \"auc_roc\"",
        ),
        &["bad.toml:7", "primary_metric"],
    );
    must_fail(
        &fx,
        &GOOD.replace("sizes = [20, 60]", "sizes = [20, 20]"),
        &["bad.toml:4", "twice"],
    );
    must_fail(
        &fx,
        &GOOD.replace(
            "score_kind = \"probability\"\n\n[[task]]",
            "score_kind = \"margin\"\n\n[[task]]",
        ),
        &["identity", "margin"],
    );
}

/// The metrics at a threshold: a run scores them at the suite's
/// `decision_threshold`, records it in the manifest and states it in the
/// report (also when `report` rebuilds the folder); a suite without them
/// records nothing; a threshold outside (0, 1) is refused with file, key and
/// value.
#[test]
fn decision_metrics_run_at_the_recorded_threshold() {
    let fx = Fixture::new();
    let text = GOOD
        .replace(
            "metrics = [\"log_loss\", \"brier\"]",
            "metrics = [\"log_loss\", \"threshold_cost\", \"net_benefit\"]",
        )
        .replace(
            "primary_metric = \"log_loss\"",
            "primary_metric = \"net_benefit\"",
        )
        .replace(
            "[test_set]",
            "[metric_settings]\ndecision_threshold = 0.3\n\n[test_set]",
        );
    let suite = fx.suite("decide.toml", &text);
    let out = fx.path("decide-out");
    run_ok(&fx, &suite, &out, "2");
    let manifest: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(manifest["analysis"]["decision_threshold"], 0.3);
    let units = gunzip(&out.join("units.csv.gz"));
    let header = units.lines().next().unwrap();
    for col in [
        "threshold_cost",
        "net_benefit",
        "net_benefit_dbatch00",
        "threshold_cost_dbatch19",
    ] {
        assert!(
            header.split(',').any(|c| c == col),
            "{col} missing from {header}"
        );
    }
    let line = "Metrics at a threshold (`threshold_cost`, `net_benefit`) score acting on a prediction when p ≥ 0.3";
    let summary = fs::read_to_string(out.join("summary.md")).unwrap();
    assert!(summary.contains(line), "{summary}");
    assert!(
        summary.contains("On `net_benefit` (the primary metric)"),
        "{summary}"
    );
    bin()
        .args(["report", out.to_str().unwrap()])
        .assert()
        .success();
    assert_eq!(fs::read_to_string(out.join("summary.md")).unwrap(), summary);

    let plain = fx.suite("plain.toml", GOOD);
    let plain_out = fx.path("plain-out");
    run_ok(&fx, &plain, &plain_out, "1");
    let m = fs::read_to_string(plain_out.join("manifest.json")).unwrap();
    assert!(!m.contains("decision_threshold"), "{m}");
    let s = fs::read_to_string(plain_out.join("summary.md")).unwrap();
    assert!(!s.contains("Metrics at a threshold"), "{s}");

    must_fail(
        &fx,
        &text.replace("decision_threshold = 0.3", "decision_threshold = 1.0"),
        &[
            "bad.toml:",
            "metric_settings.decision_threshold = 1: must be in (0, 1)",
        ],
    );
}

/// Several operating thresholds: `decision_thresholds` and `cost_ratios`
/// give one column per threshold in `units.csv`, paired intervals and
/// verdicts for each in `paired.csv`, a note in the report, and `report`
/// rebuilds the same summary; `plumbline check` lists the thresholds.
#[test]
fn decision_metrics_run_at_several_thresholds() {
    let fx = Fixture::new();
    let text = GOOD
        .replace(
            "metrics = [\"log_loss\", \"brier\"]",
            "metrics = [\"log_loss\", \"threshold_cost\", \"net_benefit\"]",
        )
        .replace(
            "primary_metric = \"log_loss\"",
            "primary_metric = \"threshold_cost@0.2\"",
        )
        .replace(
            "[test_set]",
            "[metric_settings]\ndecision_thresholds = [0.6]\ncost_ratios = [0.25, 1.0]\n\n[test_set]",
        );
    let suite = fx.suite("several.toml", &text);
    bin()
        .args(["check", suite.to_str().unwrap()])
        .assert()
        .success()
        .stdout(predicates::str::contains(
            "decision thresholds 0.2, 0.5, 0.6 (act when p ≥ t)",
        ));
    let out = fx.path("several-out");
    run_ok(&fx, &suite, &out, "2");
    let units = gunzip(&out.join("units.csv.gz"));
    let header: Vec<&str> = units.lines().next().unwrap().split(',').collect();
    for col in [
        "threshold_cost@0.2",
        "threshold_cost@0.5",
        "threshold_cost@0.6",
        "net_benefit@0.2",
        "net_benefit@0.6",
        "net_benefit@0.5_dbatch00",
    ] {
        assert!(header.contains(&col), "{col} missing from {header:?}");
    }
    assert!(!header.contains(&"threshold_cost"), "{header:?}");
    // The columns differ: each is scored at its own threshold.
    let col = |name: &str| header.iter().position(|c| *c == name).unwrap();
    let rows: Vec<Vec<&str>> = units
        .lines()
        .skip(1)
        .map(|l| l.split(',').collect())
        .collect();
    assert!(rows
        .iter()
        .any(|r| r[col("threshold_cost@0.2")] != r[col("threshold_cost@0.6")]));
    let paired = fs::read_to_string(out.join("paired.csv")).unwrap();
    for m in ["threshold_cost@0.2", "net_benefit@0.6"] {
        assert!(
            paired.lines().any(|l| l.split(',').any(|c| c == m)),
            "{m} missing from paired.csv"
        );
    }
    let summary = fs::read_to_string(out.join("summary.md")).unwrap();
    assert!(summary.contains("Metrics named `<metric>@t`"), "{summary}");
    assert!(
        summary.contains("On `threshold_cost@0.2` (the primary metric)"),
        "{summary}"
    );
    bin()
        .args(["report", out.to_str().unwrap()])
        .assert()
        .success();
    assert_eq!(fs::read_to_string(out.join("summary.md")).unwrap(), summary);

    must_fail(
        &fx,
        &text.replace("cost_ratios = [0.25, 1.0]", "cost_ratios = [1.0, -2.0]"),
        &[
            "bad.toml:",
            "metric_settings.cost_ratios = -2: every cost ratio",
        ],
    );
    must_fail(
        &fx,
        &text.replace("\"threshold_cost@0.2\"", "\"threshold_cost\""),
        &["bad.toml:", "primary_metric", "threshold_cost@0.2"],
    );
}

#[test]
fn bad_score_files_are_rejected_with_file_line_column_value() {
    let fx = Fixture::new();
    let good_a = fs::read_to_string(fx.path("a.csv")).unwrap();
    let cases: Vec<(String, Vec<&str>)> = vec![
        (
            good_a.replacen("r3,", "r3,NaN,1\nx,", 1),
            vec!["a.csv:5", "`score`", "NaN"],
        ),
        (
            good_a.replacen("r3,", "r3,inf,1\nx,", 1),
            vec!["a.csv:5", "finite", "inf"],
        ),
        (
            good_a.replacen("r3,", "r3,1.5,1\nx,", 1),
            vec!["a.csv:5", "[0, 1]", "1.5"],
        ),
        (
            good_a.replacen("r3,", "r3,0.5,2\nx,", 1),
            vec!["a.csv:5", "`label`", "`2`"],
        ),
        (
            good_a.replacen("r3,", "r3,0.5,yes\nx,", 1),
            vec!["a.csv:5", "`label`", "`yes`"],
        ),
        (
            good_a.replacen("r3,", "r3,0.5\nx,", 1),
            vec!["a.csv:5", "fields"],
        ),
        (
            good_a.replacen("id,score,label", "id,prob,label", 1),
            vec!["a.csv", "`score`", "prob"],
        ),
        (
            good_a.replacen("id,score,label", "id,score,label,score", 1),
            vec!["a.csv:1", "`score` twice", "fields 2 and 4"],
        ),
        (String::new(), vec!["a.csv", "empty"]),
        ("id,score,label\n".into(), vec!["a.csv", "no data rows"]),
        (
            good_a.replace(",1\n", ",0\n"),
            vec!["a.csv", "label 0", "both classes"],
        ),
    ];
    for (text, needles) in cases {
        fs::write(fx.path("a.csv"), &text).unwrap();
        must_fail(&fx, GOOD, &needles);
    }
}

#[test]
fn labels_true_false_and_gzip_are_accepted() {
    let fx = Fixture::new();
    let a = fs::read_to_string(fx.path("a.csv"))
        .unwrap()
        .replace(",1\n", ",true\n")
        .replace(",0\n", ",False\n");
    {
        use std::io::Write;
        let f = fs::File::create(fx.path("a.csv.gz")).unwrap();
        let mut gz = flate2::write::GzEncoder::new(f, flate2::Compression::fast());
        gz.write_all(a.as_bytes()).unwrap();
        gz.finish().unwrap();
    }
    let suite = fx.suite(
        "gz.toml",
        &GOOD.replace("scores = \"a.csv\"", "scores = \"a.csv.gz\""),
    );
    bin()
        .args(["check", suite.to_str().unwrap()])
        .assert()
        .success()
        .stdout(predicates::str::contains("units"));
}

#[test]
fn split_column_pins_rows() {
    let fx = Fixture::new();
    let mut text = String::from("id,score,label,part\n");
    for (i, line) in fs::read_to_string(fx.path("a.csv"))
        .unwrap()
        .lines()
        .skip(1)
        .enumerate()
    {
        text.push_str(&format!(
            "{line},{}\n",
            if i < 450 { "calibration" } else { "test" }
        ));
    }
    fs::write(fx.path("a.csv"), text).unwrap();
    let suite = fx.suite(
        "pin.toml",
        &GOOD.replacen(
            "score_kind = \"probability\"",
            "score_kind = \"probability\"\nsplit_column = \"part\"",
            1,
        ),
    );
    let out = fx.path("pin-out");
    run_ok(&fx, &suite, &out, "2");
    let manifest: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(manifest["tasks"][0]["reservoir"], 450);
    assert_eq!(manifest["tasks"][0]["test_rows"], 150);
}

/// Three verdicts built into the data. `weather-bayes` scores come from the
/// bent map logit q = 0.6 ln s − 1.6 ln(1 − s) + 0.4 (`src/simulate.rs`), which
/// is exactly a full beta calibration map and not a Platt map. Against Platt
/// (reference) at n = 2000: beta is correctly specified and clearly better;
/// the raw scores (identity) are clearly worse; Platt with smoothed targets
/// changes the fitted map by O(1/n), so it is equivalent within a 1% margin.
/// Seed 11 of the suite below gave, when written (log loss; δ = 0.0052):
/// smoothed Platt [−0.00004, +0.00006] equivalent, identity [+0.115, +0.153]
/// worse, beta [−0.0160, −0.0055] better; the Brier score agrees.
const VERDICTS: &str = r#"name = "verdicts"
seed = 11
repeats = 10
sizes = [2000]
reference = "platt"
metrics = ["log_loss", "brier"]
primary_metric = "log_loss"

[test_set]
rows = 4000

[decision]
margin = 0.01

[[method]]
id = "platt"
kind = "platt"

[[method]]
id = "platt-smoothed"
kind = "platt"
target_smoothing = true

[[method]]
id = "identity"
kind = "identity"

[[method]]
id = "beta"
kind = "beta"

[[task]]
id = "weather"
scores = "SCORES"
score_column = "p_late"
label_column = "late"
score_kind = "probability"
"#;

/// (method, metric) → (margin, verdict) from a paired.csv.
fn verdicts(paired: &str) -> std::collections::BTreeMap<(String, String), (f64, String)> {
    let mut lines = paired.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| head.iter().position(|h| *h == name).unwrap();
    let (m, k, d, v, lo, hi) = (
        col("method"),
        col("metric"),
        col("margin"),
        col("verdict"),
        col("ci_low"),
        col("ci_high"),
    );
    lines
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            eprintln!(
                "{} {}: [{}, {}] margin {} {}",
                f[m], f[k], f[lo], f[hi], f[d], f[v]
            );
            (
                (f[m].to_string(), f[k].to_string()),
                (f[d].parse().unwrap(), f[v].to_string()),
            )
        })
        .collect()
}

#[test]
fn verdicts_come_out_as_built() {
    let fx = Fixture::new();
    let scores =
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("suites/courier-data/weather-bayes.csv.gz");
    let suite = fx.suite(
        "verdicts.toml",
        &VERDICTS.replace("SCORES", &scores.to_string_lossy().replace('\\', "/")),
    );
    let out = fx.path("out");
    run_ok(&fx, &suite, &out, "2");
    let paired = fs::read_to_string(out.join("paired.csv")).unwrap();
    let v = verdicts(&paired);
    let get = |m: &str, k: &str| v[&(m.to_string(), k.to_string())].clone();
    for metric in ["log_loss", "brier"] {
        assert_eq!(get("beta", metric).1, "better", "{metric}");
        assert_eq!(get("identity", metric).1, "worse", "{metric}");
        assert_eq!(get("platt-smoothed", metric).1, "equivalent", "{metric}");
    }
    // δ is 1% of Platt's mean loss, the same for every method at this size.
    let (d, _) = get("beta", "log_loss");
    assert!(d > 0.001 && d < 0.01, "{d}");
    assert_eq!(get("identity", "log_loss").0, d);
    let manifest: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(manifest["analysis"]["margin"], 0.01);
    // Every format carries the verdict of the smoothed Platt fit.
    let summary = fs::read_to_string(out.join("summary.md")).unwrap();
    assert!(summary.contains("equivalent within the margin"));
    assert!(
        summary.contains("] =**"),
        "no equivalent mark in a task table"
    );
    let tex = fs::read_to_string(out.join("tables.tex")).unwrap();
    assert!(tex.contains("] =") && tex.contains("$\\surd$") && tex.contains("$\\times$"));

    // `report --margin 0`: no margin, so the O(1/n) difference is no longer
    // negligible by definition; the clear verdicts stay.
    bin()
        .args(["report", out.to_str().unwrap(), "--margin", "0"])
        .assert()
        .success();
    let v0 = verdicts(&fs::read_to_string(out.join("paired.csv")).unwrap());
    let smoothed = &v0[&("platt-smoothed".to_string(), "log_loss".to_string())];
    assert_eq!(smoothed.0, 0.0);
    assert_ne!(smoothed.1, "equivalent");
    assert_eq!(
        v0[&("beta".to_string(), "log_loss".to_string())].1,
        "better"
    );
    // Without the flag, the recorded margin comes back byte for byte.
    bin()
        .args(["report", out.to_str().unwrap()])
        .assert()
        .success();
    assert_eq!(fs::read_to_string(out.join("paired.csv")).unwrap(), paired);
    // A margin outside [0, 0.5] is refused.
    bin()
        .args(["report", out.to_str().unwrap(), "--margin", "2"])
        .assert()
        .failure()
        .stderr(predicates::str::contains("--margin 2"));
}

#[test]
fn decision_table_is_checked_with_file_line_and_key() {
    let fx = Fixture::new();
    // GOOD ends with a newline; the appended table starts two lines later.
    let at = GOOD.lines().count() + 3;
    let with = |body: &str| format!("{GOOD}\n[decision]\n{body}\n");
    // Good values: a relative margin and absolute margins per metric.
    let suite = fx.suite(
        "ok.toml",
        &with("margin = 0.02\nabsolute_margins = { brier = 0.0005 }\nmax_fallback = 0.25"),
    );
    let out = fx.path("ok-out");
    run_ok(&fx, &suite, &out, "1");
    let manifest: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(manifest["analysis"]["margin"], 0.02);
    assert_eq!(manifest["analysis"]["absolute_margins"]["brier"], 0.0005);
    assert_eq!(manifest["analysis"]["max_fallback"], 0.25);
    let v = verdicts(&fs::read_to_string(out.join("paired.csv")).unwrap());
    for ((_, metric), (d, _)) in &v {
        if metric == "brier" {
            assert_eq!(*d, 0.0005);
        } else {
            assert!(*d > 0.0 && *d != 0.0005);
        }
    }
    // Bad values, each located.
    must_fail(
        &fx,
        &with("margin = 2"),
        &[&format!("bad.toml:{at}"), "decision.margin", "2"],
    );
    must_fail(
        &fx,
        &with("margin = -0.01"),
        &[&format!("bad.toml:{at}"), "decision.margin", "-0.01"],
    );
    must_fail(
        &fx,
        &with("margin = \"1%\""),
        &[&format!("bad.toml:{at}"), "margin"],
    );
    must_fail(
        &fx,
        &with("margins = 0.01"),
        &[&format!("bad.toml:{at}"), "margins"],
    );
    must_fail(
        &fx,
        &with("absolute_margins = { auc_roc = 0.01 }"),
        &[
            &format!("bad.toml:{at}"),
            "decision.absolute_margins.auc_roc",
            "not one of the suite's metrics",
        ],
    );
    must_fail(
        &fx,
        &with("max_fallback = 1.5"),
        &[&format!("bad.toml:{at}"), "decision.max_fallback", "1.5"],
    );
    must_fail(
        &fx,
        &with("max_fallback = -0.1"),
        &[&format!("bad.toml:{at}"), "decision.max_fallback", "-0.1"],
    );
    must_fail(
        &fx,
        &with("margin = 0.01\nabsolute_margins = { brier = -1.0 }"),
        &[
            &format!("bad.toml:{}", at + 1),
            "decision.absolute_margins.brier",
            "-1",
        ],
    );
}
