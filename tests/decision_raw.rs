//! "Calibrate at all?" and the default's fallbacks in the decision, through
//! the run engine on small seeded score files.
//!
//! * Scores that are already calibrated (p ~ U(0, 1), y ~ Bernoulli(p), the
//!   tests' own SplitMix64 draws from seed 7_001 + task index): no method can
//!   be reliably better than the raw scores, so the decision keeps them at
//!   small sizes. The same suite on miscalibrated scores (the label drawn
//!   from p³ instead of p, seed 7_101 + task index) is the control: there
//!   calibrating pays, and the raw scores are not kept at the largest size.
//!   Four datasets of one base model: the Bayesian signed-rank test over
//!   datasets decides both.
//! * Scores that are exactly 0 or 1 on 95% of rows (saturated, as a naive
//!   Bayes model gives): a sample of 10 rows often holds fewer than the three
//!   distinct scores the full beta map needs, so beta falls back to the base
//!   rate in a large share of its draws at n = 10 and in none at n = 400.
//!   Platt fits saturated samples (smoothed targets) and never falls back
//!   here; one-class samples, where every method falls back alike, are made
//!   rare by a 40% positive rate (0.6¹⁰ < 1%).

mod common;

use std::fs;
use std::path::{Path, PathBuf};

use common::uniform;
use plumbline::analysis::{self, Analysis, DecidedBy, Recommendation};
use plumbline::commands::run::{run_suite, RunArgs};
use plumbline::run::table::{read_units_file, units_path};
use tempfile::TempDir;

/// `rows` scores p ~ U(0.02, 0.98) with labels y ~ Bernoulli(p^power).
fn calibrated_csv(rows: usize, seed: u64, power: f64) -> String {
    let mut s = String::from("score,label\n");
    let mut x = seed;
    for _ in 0..rows {
        let p = 0.02 + 0.96 * uniform(&mut x);
        let y = uniform(&mut x) < p.powf(power);
        s.push_str(&format!("{p:.6},{}\n", y as u8));
    }
    s
}

/// Scores p ~ U(0.02, 0.98) whose true probability is a hockey stick: 0.05
/// below p = 0.7, then rising linearly to 0.95 at p = 0.98 — a map no
/// logistic curve in the log-odds follows.
fn hockey_csv(rows: usize, seed: u64) -> String {
    let mut s = String::from("score,label\n");
    let mut x = seed;
    for _ in 0..rows {
        let p = 0.02 + 0.96 * uniform(&mut x);
        let q = if p < 0.7 {
            0.05
        } else {
            0.05 + 0.9 * (p - 0.7) / 0.28
        };
        let y = uniform(&mut x) < q;
        s.push_str(&format!("{p:.6},{}\n", y as u8));
    }
    s
}

/// Beta-shaped scores with many exact 0s and 1s: 88% of rows are saturated
/// (score 1 for a positive, 0 for a negative), the rest s ~ U(0.05, 0.95)
/// with y ~ Bernoulli(σ(2 ln s − 0.5 ln(1 − s) + 1)), a map the full beta
/// family holds and a logistic curve in the log-odds does not.
fn saturated_csv(rows: usize, seed: u64) -> String {
    let mut s = String::from("score,label\n");
    let mut x = seed;
    for _ in 0..rows {
        if uniform(&mut x) < 0.88 {
            let y = uniform(&mut x) < 0.4;
            s.push_str(&format!("{},{}\n", y as u8, y as u8));
        } else {
            let p = 0.05 + 0.9 * uniform(&mut x);
            let eta = 2.0 * p.ln() - 0.5 * (1.0 - p).ln() + 1.0;
            let y = uniform(&mut x) < 1.0 / (1.0 + (-eta).exp());
            s.push_str(&format!("{p:.6},{}\n", y as u8));
        }
    }
    s
}

fn suite(methods: &[(&str, &str)], sizes: &str, tasks: usize) -> String {
    let ids: Vec<String> = (0..tasks).map(|t| format!("set{t}.model")).collect();
    suite_of(methods, sizes, &ids)
}

/// A suite over score files `t0.csv` … with the given task ids.
fn suite_of(methods: &[(&str, &str)], sizes: &str, ids: &[String]) -> String {
    let mut s = format!(
        r#"name = "raw"
seed = 5
repeats = 20
sizes = [{sizes}]
reference = "platt"
metrics = ["log_loss", "brier"]
primary_metric = "log_loss"

[test_set]
rows = 2000
"#
    );
    for (id, kind) in methods {
        s.push_str(&format!("\n[[method]]\nid = \"{id}\"\nkind = \"{kind}\"\n"));
    }
    for (t, id) in ids.iter().enumerate() {
        s.push_str(&format!(
            "\n[[task]]\nid = \"{id}\"\nscores = \"t{t}.csv\"\nscore_column = \"score\"\nlabel_column = \"label\"\nscore_kind = \"probability\"\n"
        ));
    }
    s
}

/// Run the suite over the given score files; the analysis of the results
/// and the folder.
fn run(files: &[String], suite_text: &str) -> (Analysis, PathBuf, TempDir) {
    let dir = TempDir::new().unwrap();
    for (i, f) in files.iter().enumerate() {
        fs::write(dir.path().join(format!("t{i}.csv")), f).unwrap();
    }
    let suite = dir.path().join("suite.toml");
    fs::write(&suite, suite_text).unwrap();
    let out = dir.path().join("out");
    run_suite(&RunArgs {
        suite: Some(suite.clone()),
        out: Some(out.clone()),
        threads: Some(1),
        quiet: true,
        force: false,
        shard: None,
    })
    .unwrap();
    let table = read_units_file(&units_path(&out).unwrap()).unwrap();
    let plan = plumbline::suite::load(&suite).unwrap();
    let a = analysis::analyse(&table, &plumbline::results::settings_of(&plan));
    (a, out, dir)
}

fn summary(out: &Path) -> String {
    fs::read_to_string(out.join("summary.md")).unwrap()
}

const RAW_METHODS: [(&str, &str); 4] = [
    ("platt", "platt"),
    ("identity", "identity"),
    ("beta", "beta"),
    ("isotonic", "isotonic"),
];

#[test]
fn calibrated_scores_are_kept_at_small_sizes() {
    let files: Vec<String> = (0..4)
        .map(|t| calibrated_csv(3000, 7_001 + t, 1.0))
        .collect();
    let (a, out, _dir) = run(&files, &suite(&RAW_METHODS, "30, 100", 4));
    let d = &a.decisions[0];
    assert_eq!(d.raw.as_deref(), Some("identity"));
    let small = &d.per_size[0];
    assert_eq!(small.size, 30);
    let raw = small.raw.as_ref().unwrap();
    assert!(raw.keep_raw(), "{small:?}");
    // One base model (`model`) over four datasets: the Bayesian signed-rank
    // test decides, and it does not find the default reliably better.
    // The raw scores rank first overall here, so they are the default and
    // no calibrator is tested against them.
    assert_eq!(d.default, "identity");
    assert_eq!(raw.groups.len(), 1);
    assert!(raw.groups[0].evidence.is_none());
    assert_eq!(small.recommended, "identity");
    assert!(
        matches!(small.why, Recommendation::KeepRaw | Recommendation::Default),
        "{small:?}"
    );
    let text = summary(&out);
    assert!(
        text.contains("keep the raw scores") || text.contains("do not calibrate"),
        "{}",
        &text[..3000.min(text.len())]
    );
    // Every method against the raw scores is a row of thresholds.csv.
    let th = fs::read_to_string(out.join("thresholds.csv")).unwrap();
    for m in ["platt", "beta", "isotonic"] {
        assert!(
            th.contains(&format!("set0.model,{m},identity,log_loss,")),
            "{th}"
        );
    }
}

#[test]
fn miscalibrated_scores_are_calibrated_at_large_sizes() {
    let files: Vec<String> = (0..4)
        .map(|t| calibrated_csv(3000, 7_101 + t, 3.0))
        .collect();
    let (a, _out, _dir) = run(&files, &suite(&RAW_METHODS, "30, 800", 4));
    let d = &a.decisions[0];
    let large = d.per_size.last().unwrap();
    assert_eq!(large.size, 800);
    let raw = large.raw.as_ref().unwrap();
    assert!(!raw.keep_raw(), "{large:?}");
    let e = raw.groups[0].evidence.as_ref().unwrap();
    assert_eq!(e.decided_by, DecidedBy::Datasets);
    assert!(e.first_better, "{e:?}");
    assert_ne!(large.recommended, "identity");
    assert!(
        raw.most_better.as_ref().is_some_and(|(_, k)| *k == 4),
        "{large:?}"
    );
    // Calibration pays on every task within the sizes tried.
    let any = &d.pays_from[0];
    assert!(any.0.is_none());
    assert_eq!(any.1.better_from.as_ref().map(|b| b.tasks), Some(4));
}

/// Two base models over the same four datasets: `good` gives calibrated
/// scores, `bad` miscalibrated ones (p³). Calibrating is decided per base
/// model: the calibrator is recommended, but the raw scores are kept for
/// `good`, where it is not reliably better than them across the datasets.
#[test]
fn the_raw_scores_are_kept_per_base_model() {
    let mut files = Vec::new();
    let mut ids = Vec::new();
    for t in 0..4u64 {
        files.push(calibrated_csv(3000, 7_001 + t, 1.0));
        ids.push(format!("set{t}.good"));
        files.push(calibrated_csv(3000, 7_101 + t, 3.0));
        ids.push(format!("set{t}.bad"));
    }
    let (a, out, _dir) = run(&files, &suite_of(&RAW_METHODS, "400", &ids));
    let d = &a.decisions[0];
    assert_ne!(d.default, "identity", "{d:?}");
    let v = &d.per_size[0];
    assert_eq!((v.tasks, v.datasets), (8, 4));
    let raw = v.raw.as_ref().unwrap();
    assert!(!raw.keep_raw(), "{v:?}");
    assert_eq!(raw.raw_for(), vec!["good"], "{v:?}");
    for g in &raw.groups {
        let e = g.evidence.as_ref().unwrap();
        assert_eq!(e.decided_by, DecidedBy::Datasets);
        assert_eq!((e.test.datasets, e.test.tasks), (4, 4), "{e:?}");
        assert_eq!(e.first_better, g.model == "bad", "{e:?}");
    }
    assert_ne!(v.recommended, "identity");
    let text = summary(&out);
    assert!(
        text.contains(&format!(
            "`{}`, but keep the raw scores for `good`",
            v.recommended
        )),
        "{}",
        &text[..4000.min(text.len())]
    );
}

#[test]
fn a_default_that_falls_back_often_is_not_recommended_there() {
    let files: Vec<String> = (0..3).map(|t| saturated_csv(3000, 7_201 + t)).collect();
    let methods = [("beta", "beta"), ("platt", "platt")];
    let (a, out, _dir) = run(&files, &suite(&methods, "10, 400", 3));
    let d = &a.decisions[0];
    let (small, large) = (&d.per_size[0], &d.per_size[1]);
    assert_eq!(d.default, "beta", "{d:?}");
    {
        assert!(small.default_fallback.share() > 0.1, "{small:?}");
        assert_eq!(small.recommended, "platt");
        assert!(matches!(&small.why, Recommendation::PassedOver(p) if p[0].0 == "beta"));
        assert_eq!(large.default_fallback.fallback, 0, "{large:?}");
        assert_eq!(large.recommended, "beta");
        let text = summary(&out);
        assert!(text.contains("**Not recommended at n = 10 for fallbacks:** `beta`"));
        assert!(text.contains("`platt` (fallbacks)"));
    }
    // `report --max-fallback` overrides the suite's limit: at 100% nothing is
    // passed over; a share outside [0, 1] is refused and writes nothing.
    let report = |share: &str| {
        std::process::Command::new(env!("CARGO_BIN_EXE_plumbline"))
            .args(["report", out.to_str().unwrap(), "--max-fallback", share])
            .output()
            .unwrap()
    };
    let before = summary(&out);
    let bad = report("1.5");
    assert!(!bad.status.success());
    assert!(String::from_utf8_lossy(&bad.stderr).contains("--max-fallback 1.5"));
    assert_eq!(summary(&out), before);
    assert!(report("1").status.success());
    let text = summary(&out);
    assert!(!text.contains("for fallbacks:**"), "{text}");
    assert!(text.contains("A method above 100% (`[decision] max_fallback`)"));
}

/// Two base models' scores of one dataset (a team's own data): the test
/// across datasets cannot decide with one case, so the dataset's paired
/// intervals do.
#[test]
fn one_dataset_is_decided_by_its_paired_intervals() {
    let files = vec![
        calibrated_csv(3000, 7_101, 3.0),
        calibrated_csv(3000, 7_102, 3.0),
    ];
    let ids = vec!["mine.first".to_string(), "mine.second".to_string()];
    let (a, _out, _dir) = run(&files, &suite_of(&RAW_METHODS, "800", &ids));
    let d = &a.decisions[0];
    let v = &d.per_size[0];
    assert_eq!((v.tasks, v.datasets), (2, 1));
    for (m, e) in &v.versus {
        assert_eq!(e.decided_by, DecidedBy::Intervals, "{m}");
        assert_eq!(e.test.datasets, 1, "{m}");
    }
    let raw = v.raw.as_ref().unwrap();
    assert_eq!(raw.groups.len(), 2);
    for g in &raw.groups {
        let e = g.evidence.as_ref().unwrap();
        assert_eq!(e.decided_by, DecidedBy::Intervals);
        // p³ labels: the calibrators beat the raw scores at n = 800 (the
        // control of the tests above), and the interval says so.
        assert!(e.first_better, "{e:?}");
    }
    assert!(!raw.keep_raw());
}

/// A team with one score file gets a decision too: with one task the ranks
/// are that task's, and the paired intervals decide. On p³ labels (the
/// control above) the calibrators beat the raw scores at n = 800, so the raw
/// scores are not kept, and the report names its one-dataset test.
#[test]
fn a_single_score_file_gets_a_decision() {
    let files = vec![calibrated_csv(3000, 7_111, 3.0)];
    let ids = vec!["mine".to_string()];
    let (a, out, _dir) = run(&files, &suite_of(&RAW_METHODS, "100, 800", &ids));
    assert_eq!(a.decisions.len(), 2, "one decision per decision metric");
    let d = &a.decisions[0];
    assert_eq!(d.per_size.len(), 2);
    for v in &d.per_size {
        assert_eq!((v.tasks, v.datasets), (1, 1));
        // The default's rank is its rank on the one task: a whole number.
        assert_eq!(v.default_rank.fract(), 0.0, "{v:?}");
        for (m, e) in &v.versus {
            assert_eq!(e.decided_by, DecidedBy::Intervals, "{m}");
        }
    }
    // The standing is the task's ranks averaged over the two sizes.
    assert!(d.standing.iter().all(|(_, r)| (1.0..=4.0).contains(r)));
    assert_ne!(d.default, "identity", "{:?}", d.standing);
    let large = &d.per_size[1];
    let raw = large.raw.as_ref().unwrap();
    assert!(!raw.keep_raw(), "{raw:?}");
    let text = summary(&out);
    assert!(!text.contains("Too few tasks"), "{text}");
    assert!(
        text.contains("on the paired intervals of its one dataset"),
        "{text}"
    );
}

/// A default that a method beats reliably at one size is replaced there:
/// On the Brier score, Platt ranks first at the three small sizes and is the
/// default, but on a hockey-stick map its logistic curve cannot follow, and
/// at n = 2000 the penalized spline is reliably better across the four
/// datasets.
#[test]
fn a_method_reliably_better_than_the_default_is_recommended_at_its_size() {
    let files: Vec<String> = (0..4).map(|t| hockey_csv(6000, 7_301 + t)).collect();
    let methods = [("platt", "platt"), ("spline", "spline")];
    let text = suite(&methods, "20, 30, 40, 2000", 4).replace(
        "primary_metric = \"log_loss\"",
        "primary_metric = \"brier\"",
    );
    let (a, out, _dir) = run(&files, &text);
    let d = &a.decisions[0];
    assert_eq!(d.default, "platt", "{:?}", d.standing);
    let (small, large) = (&d.per_size[0], &d.per_size[3]);
    assert_eq!(small.why, Recommendation::Default, "{small:?}");
    assert_eq!(large.size, 2000);
    assert_eq!(d.metric, "brier");
    let e = large.against("spline").unwrap();
    assert_eq!(e.decided_by, DecidedBy::Datasets);
    assert!(e.second_better, "{e:?}");
    assert_eq!(large.recommended, "spline");
    assert_eq!(large.why, Recommendation::Beaten(vec!["spline".into()]));
    assert!(!large.default_holds());
    let text = summary(&out);
    assert!(text.contains("`spline` (beats `platt`)"), "{text}");
}

/// Scores with a 4% base rate: at n = 50 a calibration sample holds about 2
/// positives, at n = 1000 about 40. The report flags the intervals of the
/// small size as approximate (fewer than 10 rows of the rarer class) in
/// `paired.csv`, beside each interval (†) and in its evidence paragraph.
#[test]
fn rare_class_intervals_are_flagged_approximate() {
    let rare = |seed: u64| {
        let mut s = String::from("score,label\n");
        let mut x = seed;
        for _ in 0..4000 {
            let p = 0.08 * uniform(&mut x);
            let y = uniform(&mut x) < p;
            s.push_str(&format!("{p:.6},{}\n", y as u8));
        }
        s
    };
    let files: Vec<String> = (0..2).map(|t| rare(7_401 + t)).collect();
    let methods = [("platt", "platt"), ("beta", "beta")];
    let (a, out, _dir) = run(&files, &suite(&methods, "50, 1000", 2));
    let (mut small, mut large) = (0, 0);
    for p in &a.paired {
        // Positives per sample average n·4%: about 2 at n = 50, 40 at 1000.
        if p.size == 50 {
            assert!(p.minority_rows < 5.0, "{p:?}");
            assert!(p.rare_class());
            small += 1;
        } else {
            assert!(p.minority_rows > 25.0, "{p:?}");
            assert!(!p.rare_class());
            large += 1;
        }
    }
    assert!(small > 0 && large > 0);
    let csv = fs::read_to_string(out.join("paired.csv")).unwrap();
    let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
    assert_eq!(
        &header[header.len() - 4..],
        [
            "minority_rows",
            "rare_class",
            "first_order_share",
            "approximate"
        ]
    );
    assert!(csv
        .lines()
        .any(|l| l.contains(",50,") && l.ends_with(",true,1,rare-class")));
    let text = summary(&out);
    assert!(
        text.contains("**Approximate intervals (†):** 4 of 8 comparisons"),
        "{text}"
    );
    assert!(
        text.contains("] ? †")
            || text.contains("] ✓ †")
            || text.contains("] ✗ †")
            || text.contains("] = †")
    );
}

/// A log-loss comparison with a method that can predict exactly 0 or 1
/// (isotonic regression without pseudo-rows) is marked approximate (‡) in
/// `paired.csv`, beside its interval and in the evidence paragraph; its
/// Brier-score comparison, and the bounded variant's, are not.
#[test]
fn zero_one_log_loss_intervals_are_flagged_approximate() {
    let files: Vec<String> = (0..2)
        .map(|t| calibrated_csv(4000, 7_901 + t, 1.0))
        .collect();
    let text_suite = suite(
        &[("platt", "platt"), ("isotonic", "isotonic")],
        "200, 1000",
        2,
    )
        + "\n[[method]]\nid = \"isotonic-bounded\"\nkind = \"isotonic\"\npseudo_count = 1.0\n";
    let (a, out, _dir) = run(&files, &text_suite);
    let mut seen = 0;
    for p in &a.paired {
        let want = p.method == "isotonic" && p.metric == plumbline::metrics::MetricId::LogLoss;
        assert_eq!(p.zero_one, want, "{p:?}");
        assert_eq!(p.approximate(), want.then_some("zero-one"), "{p:?}");
        seen += want as usize;
    }
    assert_eq!(seen, 4, "2 tasks × 2 sizes");
    let csv = fs::read_to_string(out.join("paired.csv")).unwrap();
    assert_eq!(csv.lines().filter(|l| l.ends_with(",zero-one")).count(), 4);
    let text = summary(&out);
    assert!(
        text.contains("**Approximate log-loss intervals (‡):** 4 of 16 comparisons involve a method that can predict a probability of exactly 0 or 1 (`isotonic`)."),
        "{text}"
    );
    assert!(text.contains(" ‡"), "{text}");
}
