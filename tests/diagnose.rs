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

/// The header of a CSV file.
fn header(path: &Path) -> Vec<String> {
    let mut r = csv::Reader::from_path(path).unwrap();
    r.headers().unwrap().iter().map(|s| s.to_string()).collect()
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
    assert_eq!(
        header(&d.join("a/metrics.csv")),
        [
            "metric",
            "value",
            "estimate",
            "lo",
            "hi",
            "interval",
            "resamples",
            "note"
        ]
    );
    let table = read(&d.join("a/metrics.csv"));
    assert_eq!(table.len(), MetricId::ALL.len());
    for (r, m) in table.iter().zip(MetricId::ALL) {
        assert_eq!(r[0], m.as_str());
        let want = m.compute(&p, &y, &MetricSettings::default());
        let got: f64 = r[1].parse().unwrap();
        assert_eq!(got.to_bits(), want.to_bits(), "{}", m.as_str());
        let est: f64 = r[2].parse().unwrap();
        let (lo, hi): (f64, f64) = (r[3].parse().unwrap(), r[4].parse().unwrap());
        assert!(lo <= est && est <= hi, "{}: {lo} {est} {hi}", m.as_str());
        let kind = if plumbline::commands::diagnose::debiased(*m) {
            "debiased_basic_floor0"
        } else {
            // The plain estimate is reported as it is.
            assert_eq!(est.to_bits(), want.to_bits(), "{}", m.as_str());
            "bca"
        };
        assert_eq!(r[5], kind, "{}", m.as_str());
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

/// `--decision-threshold` moves the metrics at a threshold and is
/// recorded in the manifest; a threshold outside (0, 1) is refused naming
/// the option and the value, and leaves no folder.
#[test]
fn decision_threshold_sets_the_decision_metrics() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let rows = data(400);
    let f = write(d, &rows);
    run(&f, &d.join("t"), &["--decision-threshold", "0.3"], "1");
    let p: Vec<f64> = rows.iter().map(|r| r.0).collect();
    let y: Vec<bool> = rows.iter().map(|r| r.2).collect();
    let at = MetricSettings {
        decision_threshold: 0.3,
        ..MetricSettings::default()
    };
    let table = read(&d.join("t/metrics.csv"));
    for m in [MetricId::ThresholdCost, MetricId::NetBenefit] {
        let r = table.iter().find(|r| r[0] == m.as_str()).unwrap();
        let got: f64 = r[1].parse().unwrap();
        let want = m.compute(&p, &y, &at);
        assert_eq!(got.to_bits(), want.to_bits(), "{m}");
        // The data are over-confident (p = q²), so the decision at 0.3
        // differs from the one at 0.5.
        assert_ne!(want, m.compute(&p, &y, &MetricSettings::default()), "{m}");
    }
    let manifest: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(d.join("t/manifest.json")).unwrap()).unwrap();
    assert_eq!(manifest["decision_threshold"], 0.3);

    for bad in ["0", "1", "2.5"] {
        let a = bin()
            .arg("diagnose")
            .arg(&f)
            .arg("--out")
            .arg(d.join("x"))
            .args(["--decision-threshold", bad])
            .assert()
            .failure();
        let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
        let v: f64 = bad.parse().unwrap();
        assert!(
            err.contains(&format!("--decision-threshold {v}: must be in (0, 1)")),
            "{err}"
        );
        assert!(!d.join("x").exists());
    }
}

#[test]
fn compare_is_paired() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let rows = data(500);
    let f = write(d, &rows);
    run(&f, &d.join("self"), &["--compare", "score"], "2");
    let h = header(&d.join("self/compare.csv"));
    let col = |name: &str| h.iter().position(|c| c == name).unwrap();
    let (dv, dh) = (col("difference_value"), col("difference_hi"));
    assert_eq!(
        &h[dv..=dh],
        [
            "difference_value",
            "difference_estimate",
            "difference_lo",
            "difference_hi"
        ]
    );
    for r in read(&d.join("self/compare.csv")) {
        if r[1] == "NaN" {
            continue;
        }
        // value, estimate, lo, hi of the difference are exactly 0 when a
        // column meets itself.
        assert_eq!(&r[dv..=dh], &["0", "0", "0", "0"], "{r:?}");
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
    assert_eq!(ll[dv].parse::<f64>().unwrap().to_bits(), want.to_bits());
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
    // The message names the option that gave the column, and the header.
    assert!(err.contains("no column named `nope` (--compare)"), "{err}");
    assert!(!err.contains("--score-column"), "{err}");
    assert!(
        err.contains("the header has 3 columns: `score`, `other`, `label`"),
        "{err}"
    );
    assert!(!d.join("x").exists());
}

fn sigmoid(x: f64) -> f64 {
    1.0 / (1.0 + (-x).exp())
}

fn logit(p: f64) -> f64 {
    (p / (1.0 - p)).ln()
}

/// Seeded rows: true probability t ~ Uniform(0.02, 0.98), y ~ Bernoulli(t);
/// the column `score` is t (calibrated) and `sharp` is σ(2·logit t), so that
/// y ~ Bernoulli(σ(logit(sharp)/2)) (over-confident, true slope 1/2).
fn write_calibrated_and_sharp(dir: &Path, n: usize, seed: u64) -> std::path::PathBuf {
    let mut st = seed;
    let mut u = || {
        st = plumbline::split::splitmix64(st);
        (st >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut s = String::from("score,sharp,label\n");
    for _ in 0..n {
        let t = 0.02 + 0.96 * u();
        let y = u() < t;
        s.push_str(&format!("{t},{},{}\n", sigmoid(2.0 * logit(t)), y as u8));
    }
    let f = dir.join("cal.csv");
    fs::write(&f, s).unwrap();
    f
}

/// Calibrated data (2,000 rows, data seed 12, 200 resamples, seed 5): every
/// metric's interval contains its reported estimate with no note, and the
/// reading finds no evidence of miscalibration. The reading rests on 95%
/// intervals, so about one data seed in 20 reads otherwise: data seed 11
/// gives slope 1.109 [1.016, 1.216] and reads "under-confident".
#[test]
fn calibrated_data_every_interval_holds_its_estimate() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let f = write_calibrated_and_sharp(d, 2000, 12);
    run(&f, &d.join("o"), &[], "2");
    let rows = read(&d.join("o/metrics.csv"));
    assert_eq!(rows.len(), MetricId::ALL.len());
    for r in &rows {
        let v: Vec<f64> = r[2..5].iter().map(|x| x.parse().unwrap()).collect();
        assert!(v[1] <= v[0] && v[0] <= v[2], "{r:?}");
        assert_eq!(r[7], "", "{r:?}");
        if r[5] == "debiased_basic_floor0" {
            assert!(v.iter().all(|&x| x >= 0.0), "{r:?}");
        }
    }
    let reading = fs::read_to_string(d.join("o/reading.txt")).unwrap();
    assert_eq!(reading.lines().count(), 1, "{reading}");
    assert!(
        reading.starts_with("score: no evidence of miscalibration: calibration slope "),
        "{reading}"
    );
}

/// The over-confident column of the same rows, with the calibrated one as
/// `--compare`: one reading per column, printed and written.
#[test]
fn over_confident_data_reads_over_confident() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let f = write_calibrated_and_sharp(d, 2000, 12);
    // Wide enough that every cell, the interval kinds included, fits one line.
    let a = bin()
        .env("RAYON_NUM_THREADS", "2")
        .env("COLUMNS", "400")
        .arg("diagnose")
        .arg(&f)
        .arg("--out")
        .arg(d.join("o"))
        .args(["--bootstrap", "200", "--seed", "5"])
        .args(["--score-column", "sharp", "--compare", "score"])
        .assert()
        .success();
    let out = String::from_utf8_lossy(&a.get_output().stdout).into_owned();
    let reading = fs::read_to_string(d.join("o/reading.txt")).unwrap();
    let lines: Vec<&str> = reading.lines().collect();
    assert_eq!(lines.len(), 2, "{reading}");
    assert!(
        lines[0].starts_with("sharp: over-confident: calibration slope "),
        "{reading}"
    );
    assert!(lines[0].contains(" < 1"), "{reading}");
    assert!(
        lines[1].starts_with("score: no evidence of miscalibration"),
        "{reading}"
    );
    // The terminal shows the readings and which interval each row uses.
    assert!(out.contains("reading of sharp: over-confident"), "{out}");
    assert!(out.contains("reading of score: no evidence"), "{out}");
    assert!(
        out.contains("BCa") && out.contains("debiased basic, ≥ 0"),
        "{out}"
    );
    // The slope's interval holds the true slope 1/2.
    let slope = read(&d.join("o/metrics.csv"))
        .into_iter()
        .find(|r| r[0] == "calibration_slope")
        .unwrap();
    let (lo, hi): (f64, f64) = (slope[3].parse().unwrap(), slope[4].parse().unwrap());
    assert!(lo < 0.5 && 0.5 < hi && hi < 1.0, "{slope:?}");
}

/// Coverage of the calibration slope's BCa interval (the code `diagnose`
/// uses: resamples, grouped jackknife, [`interval`]). For each true slope
/// β ∈ {1, 0.5}: R = 200 seeded data sets of 1,000 rows (p ~ Uniform(0.02,
/// 0.98), y ~ Bernoulli(σ(β·logit p))), B = 200 resamples each, 95%
/// intervals. The share that holds β must lie within 3 binomial standard
/// errors of 0.95: se = √(0.95·0.05/200) = 0.0154, so between 0.904 and
/// 0.996 (at most 199 of 200). Sizes are reduced from 2,000 rows to 1,000
/// to keep the test short on two cores.
///
/// [`interval`]: plumbline::commands::diagnose::interval
#[test]
fn calibration_slope_interval_covers_at_the_nominal_rate() {
    use plumbline::commands::diagnose::{interval, jackknife_groups};
    use rayon::prelude::*;
    const R: usize = 200;
    const N: usize = 1000;
    const B: usize = 200;
    let s = MetricSettings::default();
    let slope = |p: &[f64], y: &[bool]| MetricId::CalibrationSlope.compute(p, y, &s);
    for (bi, beta) in [1.0, 0.5].into_iter().enumerate() {
        let covered: usize = (0..R)
            .into_par_iter()
            .map(|r| {
                let mut rng =
                    plumbline::split::rng(plumbline::split::mix(2024, &[bi as u64, r as u64]));
                let mut u =
                    || plumbline::split::below(&mut rng, 1 << 53) as f64 / (1u64 << 53) as f64;
                let mut p = Vec::with_capacity(N);
                let mut y = Vec::with_capacity(N);
                for _ in 0..N {
                    let q = 0.02 + 0.96 * u();
                    y.push(u() < sigmoid(beta * logit(q)));
                    p.push(q);
                }
                let reps: Vec<f64> = (0..B)
                    .map(|_| {
                        let idx: Vec<usize> = (0..N)
                            .map(|_| plumbline::split::below(&mut rng, N as u64) as usize)
                            .collect();
                        let pb: Vec<f64> = idx.iter().map(|&i| p[i]).collect();
                        let yb: Vec<bool> = idx.iter().map(|&i| y[i]).collect();
                        slope(&pb, &yb)
                    })
                    .collect();
                let (g, groups) = jackknife_groups(N, r as u64);
                let jack: Vec<f64> = (0..g as u32)
                    .map(|k| {
                        let keep: Vec<usize> = (0..N).filter(|&i| groups[i] != k).collect();
                        let pj: Vec<f64> = keep.iter().map(|&i| p[i]).collect();
                        let yj: Vec<bool> = keep.iter().map(|&i| y[i]).collect();
                        slope(&pj, &yj)
                    })
                    .collect();
                let e = interval(
                    MetricId::CalibrationSlope,
                    slope(&p, &y),
                    reps,
                    &jack,
                    0.95,
                    Some(0.0),
                );
                usize::from(e.lo <= beta && beta <= e.hi)
            })
            .sum();
        let share = covered as f64 / R as f64;
        let se = (0.95f64 * 0.05 / R as f64).sqrt();
        assert!(
            (share - 0.95).abs() <= 3.0 * se,
            "true slope {beta}: {covered} of {R} intervals hold it ({share}), \
             outside 0.95 ± {:.4}",
            3.0 * se
        );
        eprintln!("true slope {beta}: coverage {covered}/{R}");
    }
}

/// The printed table heads its point-value column `value` (never the score
/// column's name, which would read as the scores themselves) and names the
/// column in its title (code marks dropped on the terminal, as in the report).
#[test]
fn table_heads_the_value_column_value() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let f = write(d, &data(300));
    // Wide enough for the whole table in one part, each header on one line.
    let a = bin()
        .env("COLUMNS", "400")
        .arg("diagnose")
        .arg(&f)
        .arg("--out")
        .arg(d.join("t"))
        .args(["--bootstrap", "50", "--compare", "other"])
        .assert()
        .success();
    let out = String::from_utf8_lossy(&a.get_output().stdout).into_owned();
    let title = out.lines().next().unwrap();
    assert!(
        title.ends_with("s.csv · column score compared with other · 300 rows"),
        "{title}"
    );
    let head: Vec<&str> = out
        .lines()
        .find(|l| l.contains("metric"))
        .unwrap()
        .trim_matches(|c| c == '│' || c == ' ')
        .split('┆')
        .map(str::trim)
        .collect();
    assert_eq!(
        head,
        [
            "metric",
            "value",
            "estimate",
            "95% interval",
            "interval kind",
            "other estimate",
            "difference (95% paired interval)",
            "difference kind"
        ],
        "{out}"
    );
}

/// The printed table at `COLUMNS` 80 and 100, with a compared column (the
/// widest table): no line is wider, and every cell of the table that
/// `diagnose` computed is printed with its words and intervals whole — each
/// word of a cell is a word of the output, each interval `[lo, hi]` lies on
/// one line — and every metric row appears.
#[test]
fn printed_table_fits_80_and_100_columns_with_cells_whole() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let f = write(d, &data(300));
    let args = plumbline::commands::diagnose::DiagnoseArgs {
        file: f.clone(),
        out: d.join("unused"),
        score_column: "score".into(),
        label_column: "label".into(),
        compare: Some("other".into()),
        bootstrap: 50,
        seed: 5,
        confidence: 0.95,
        decision_threshold: 0.5,
        force: false,
    };
    let table = plumbline::commands::diagnose::diagnose(&args)
        .unwrap()
        .table;
    for width in [80usize, 100] {
        let o = bin()
            .env("COLUMNS", width.to_string())
            .env_remove("NO_COLOR")
            .arg("diagnose")
            .arg(&f)
            .arg("--out")
            .arg(d.join(format!("w{width}")))
            .args(["--bootstrap", "50", "--seed", "5", "--compare", "other"])
            .assert()
            .success()
            .get_output()
            .stdout
            .clone();
        let out = String::from_utf8(o).unwrap();
        assert!(!out.contains('\x1b'), "escape code in:\n{out}");
        let wide: Vec<&str> = out.lines().filter(|l| l.chars().count() > width).collect();
        assert!(wide.is_empty(), "wider than {width}: {wide:#?}\n{out}");
        // Split into parts at these widths, each repeating the metric column.
        assert!(out.contains("(1 of "), "{out}");
        let words: std::collections::BTreeSet<&str> = out
            .split(|c: char| c.is_whitespace() || c == '│' || c == '┆')
            .filter(|w| !w.is_empty())
            .collect();
        for row in &table.rows {
            for cell in row.iter().chain(&table.header) {
                for w in cell.split_whitespace() {
                    assert!(
                        words.contains(w),
                        "{width} columns: {w:?} of {cell:?} broken:\n{out}"
                    );
                }
                // Every interval of the cell on one line.
                let mut rest = cell.as_str();
                while let Some(i) = rest.find('[') {
                    let j = rest[i..].find(']').unwrap() + i;
                    let interval = &rest[i..=j];
                    assert!(
                        out.lines().any(|l| l.contains(interval)),
                        "{width} columns: interval {interval} split:\n{out}"
                    );
                    rest = &rest[j + 1..];
                }
            }
            let metric = format!("│ {} ", row[0]);
            let parts = out.lines().filter(|l| l.starts_with('(')).count();
            let n = out.lines().filter(|l| l.starts_with(&metric)).count();
            assert!(
                n >= parts,
                "{width} columns: row {} in {n} lines\n{out}",
                row[0]
            );
        }
    }
}

/// `murphy.csv` holds the Murphy diagram of each column on the fixed grid:
/// the mean elementary score, 4× of which is `threshold_cost` at t = θ
/// (no prediction lies on a grid point here), and a column that is better
/// calibrated scores no worse on average over the grid.
#[test]
fn murphy_csv_holds_each_columns_elementary_scores() {
    use plumbline::metrics::elementary::{murphy_curve, murphy_grid};
    use plumbline::metrics::threshold::threshold_cost;
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let rows = data(500);
    let f = write(d, &rows);
    run(&f, &d.join("m"), &["--compare", "other"], "1");
    let path = d.join("m/murphy.csv");
    assert_eq!(header(&path), ["theta", "score", "other"]);
    let table = read(&path);
    let grid = murphy_grid();
    assert_eq!(table.len(), grid.len());
    let p: Vec<f64> = rows.iter().map(|r| r.0).collect();
    let q: Vec<f64> = rows.iter().map(|r| r.1).collect();
    let y: Vec<bool> = rows.iter().map(|r| r.2).collect();
    let (cp, cq) = (murphy_curve(&p, &y, &grid), murphy_curve(&q, &y, &grid));
    for (i, r) in table.iter().enumerate() {
        let t: f64 = r[0].parse().unwrap();
        assert_eq!(t, grid[i]);
        let (a, b): (f64, f64) = (r[1].parse().unwrap(), r[2].parse().unwrap());
        assert_eq!(a.to_bits(), cp[i].to_bits());
        assert_eq!(b.to_bits(), cq[i].to_bits());
        assert!(
            (4.0 * a - threshold_cost(&p, &y, t)).abs() < 1e-12,
            "θ = {t}"
        );
    }
    // Without --compare: one curve.
    run(&f, &d.join("one"), &[], "1");
    assert_eq!(header(&d.join("one/murphy.csv")), ["theta", "score"]);
}
