//! Data-size thresholds end to end on a synthetic task whose crossover is
//! known.
//!
//! The task is a score file drawn from the population of
//! the coverage study (`benches/coverage/study.rs`) (Kumaraswamy(2, 3) scores, a two-step true
//! calibration map that no logistic curve matches): Platt scaling is biased
//! there and isotonic regression is not, so isotonic regression loses at small
//! calibration sizes and wins at large ones. The truth θ(n) of isotonic − Platt
//! at each tested size is computed independently of the harness's split, draw
//! and interval code (`study::truth_samples`: the exact expected Brier
//! difference of each fitted pair over the population, averaged over many
//! calibration samples). The run must place the crossover between the same two
//! tested sizes as the truth, and call isotonic regression reliably better only
//! after it and reliably worse only before it.

use std::fs;
use std::io::Write;

use assert_cmd::Command;
use plumbline::calibrate::isotonic::Isotonic;
use plumbline::calibrate::platt::Platt;
use plumbline::calibrate::{MethodSpec, ScoreKind};
use plumbline::metrics::{MetricId, MetricSettings};
use plumbline::split;
#[path = "../benches/coverage/study.rs"]
mod study;
use study::{truth_samples, Population, TruthConfig};

const SIZES: [usize; 8] = [50, 100, 200, 300, 500, 1000, 2000, 4000];

/// First sign change of the truth, interpolated linearly on ln n (the same
/// reading rule as `thresholds.csv`, written out here so the check does not
/// lean on the code it checks).
fn true_crossover(truth: &[f64]) -> f64 {
    let mut found = None;
    for j in 0..truth.len() - 1 {
        if truth[j] > 0.0 && truth[j + 1] < 0.0 {
            let (a, b) = ((SIZES[j] as f64).ln(), (SIZES[j + 1] as f64).ln());
            found = Some((a + (b - a) * truth[j] / (truth[j] - truth[j + 1])).exp());
            break;
        }
    }
    let x = found.expect("the synthetic population has a sign change of θ(n)");
    // One sign change only: positive before, negative after.
    let below = SIZES.iter().zip(truth).filter(|(n, _)| (**n as f64) < x);
    let above = SIZES.iter().zip(truth).filter(|(n, _)| (**n as f64) > x);
    assert!(below.clone().all(|(_, t)| *t > 0.0), "{truth:?}");
    assert!(above.clone().all(|(_, t)| *t < 0.0), "{truth:?}");
    x
}

#[test]
fn run_finds_the_known_isotonic_platt_crossover() {
    let pop = Population::default();

    // θ(n) of isotonic − Platt for the Brier score at every tested size.
    let methods = [
        MethodSpec::Isotonic(Isotonic { pseudo_count: 0.0 }),
        MethodSpec::Platt(Platt {
            target_smoothing: false,
        }),
    ]
    .map(|m| m.build(ScoreKind::Probability).unwrap());
    let tc = TruthConfig {
        seed: 77,
        samples: 800,
        quadrature: 2048,
    };
    let mut truth = Vec::new();
    for &n in &SIZES {
        let t = truth_samples(
            &pop,
            &methods,
            &[MetricId::Brier],
            &MetricSettings::default(),
            n,
            &tc,
        );
        assert_eq!(t.fallbacks, 0);
        let (mean, se) = t.difference(0, 0, 1);
        // The Monte Carlo error must be small against the difference itself,
        // or the "known" crossover would not be known.
        assert!(se < 0.25 * mean.abs(), "n = {n}: θ = {mean}, se = {se}");
        truth.push(mean);
    }
    let n_star = true_crossover(&truth);
    // From the coverage study's table (K = 20,000): θ(200) = +0.00174,
    // θ(500) = −0.00034, so the crossover lies between 200 and 500.
    assert!(n_star > 200.0 && n_star < 500.0, "{n_star} {truth:?}");

    // A pool of 40,000 rows from the same population, as a team's score file.
    let dir = tempfile::TempDir::new().unwrap();
    let mut rng = split::rng(20_261_202);
    let (s, y) = pop.draw(&mut rng, 40_000);
    let mut f = fs::File::create(dir.path().join("scores.csv")).unwrap();
    writeln!(f, "score,label").unwrap();
    for (si, yi) in s.iter().zip(&y) {
        writeln!(f, "{si},{}", *yi as u8).unwrap();
    }
    drop(f);
    let sizes = SIZES.map(|n| n.to_string()).join(", ");
    let suite = format!(
        "name = \"crossover\"\nseed = 11\nrepeats = 30\nsizes = [{sizes}]\n\
         reference = \"platt\"\nmetrics = [\"brier\"]\nprimary_metric = \"brier\"\n\
         threshold_pairs = [[\"isotonic\", \"platt\"]]\n\n\
         [test_set]\nrows = 20000\n\n\
         [[method]]\nid = \"platt\"\nkind = \"platt\"\n\n\
         [[method]]\nid = \"isotonic\"\nkind = \"isotonic\"\n\n\
         [[task]]\nid = \"two-step\"\nscores = \"scores.csv\"\nscore_column = \"score\"\n\
         label_column = \"label\"\nscore_kind = \"probability\"\n"
    );
    fs::write(dir.path().join("s.toml"), suite).unwrap();
    let out = dir.path().join("out");
    Command::cargo_bin("plumbline")
        .unwrap()
        .args(["run", "s.toml", "--out", out.to_str().unwrap(), "--quiet"])
        .current_dir(dir.path())
        .assert()
        .success();

    let csv = fs::read_to_string(out.join("thresholds.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let row: Vec<&str> = lines
        .next()
        .expect("one threshold row")
        .split(',')
        .collect();
    assert!(lines.next().is_none());
    let col = |name: &str| row[header.iter().position(|h| *h == name).unwrap()];
    assert_eq!(
        (
            col("task"),
            col("flexible"),
            col("parametric"),
            col("metric")
        ),
        ("two-step", "isotonic", "platt", "brier")
    );

    // The estimated crossover falls between the same two tested sizes as the
    // true one. (Finer agreement is not to be expected: near the crossover the
    // truth moves by less than the test set's sampling error, about 3·10⁻⁴ on
    // 20,000 rows, so the interpolated point moves with it.)
    let crossover: f64 = col("crossover").parse().unwrap();
    let bracket = |x: f64| SIZES.iter().filter(|&&n| (n as f64) < x).count();
    assert_eq!(
        bracket(crossover),
        bracket(n_star),
        "crossover {crossover} vs truth {n_star} ({truth:?})"
    );
    // Reliably better only after the true crossover, and already at the
    // sizes where the truth is clearly negative (θ(2000) ≈ −0.0017 against a
    // standard error near 0.0003 on 20,000 test rows).
    let better: usize = col("better_from")
        .parse()
        .expect("isotonic wins at large n");
    assert!(
        better as f64 > n_star && better <= 2000,
        "better_from {better}"
    );
    // Reliably worse only before it, and at the smallest size at least
    // (θ(50) ≈ +0.0076).
    let worse: usize = col("worse_until")
        .parse()
        .expect("isotonic loses at n = 50");
    assert!(
        (worse as f64) < n_star && worse >= 50,
        "worse_until {worse}"
    );
}
