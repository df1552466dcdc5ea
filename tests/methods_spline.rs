//! Reference checks of the penalized-spline calibration.

use plumbline::calibrate::platt::fit_logistic_1d;
use plumbline::calibrate::spline::{fit_spline, Criterion, Spline, SplineParams};
use plumbline::calibrate::{sigmoid, Calibrator, ScoreKind};
use plumbline::split::rng;
use rand_chacha::rand_core::Rng;

mod common;
use common::{floats, pairs};

fn fixture() -> serde_json::Value {
    let text = include_str!("fixtures/methods/spline_reference.json");
    serde_json::from_str(text).expect("fixture parses")
}

fn labels(v: &serde_json::Value) -> Vec<bool> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_i64().unwrap() == 1)
        .collect()
}

/// Coefficients, fitted probabilities, edf, NLL and predictions (inside and
/// beyond the data range) agree with statsmodels' GLMGam (family Binomial, its
/// own penalized IRLS) given the same B-spline basis (scipy's
/// BSpline.design_matrix on our knots) and our penalty matrix D₂ᵀD₂ with
/// alpha = λ/2 (scripts/fixtures_spline.py; versions in the fixture's
/// "generator" field). statsmodels has no rule beyond the data range, so the
/// grid predictions there apply our linear continuation to statsmodels'
/// coefficients.
///
/// Tolerances: both sides solve the same penalized score equations to near
/// rounding (statsmodels stops when the deviance changes by less than 1e-13;
/// observed differences are below 1e-11). 1e-6 on the coefficients and edf
/// allows for the conditioning of the system at small λ; probabilities and
/// the NLL are less sensitive and get 1e-7.
#[test]
fn fixed_lambda_matches_statsmodels_glmgam() {
    let doc = fixture();
    assert!(
        doc["generator"]["statsmodels"].is_string(),
        "fixture names its statsmodels version"
    );
    let x = floats(&doc["x"]);
    let y = labels(&doc["y"]);
    assert_eq!(x.len(), y.len(), "fixture x and y lengths");
    let fits = doc["fits"].as_array().unwrap();
    assert_eq!(fits.len(), 3);
    for f in fits {
        let intervals = f["intervals"].as_u64().unwrap() as usize;
        let lambda = f["lambda"].as_f64().unwrap();
        let ours = fit_spline(&x, &y, intervals, Some(lambda), Criterion::Aic).unwrap();
        assert!(!ours.separable);
        let want = floats(&f["coefficients"]);
        for (a, b) in pairs(&ours.chosen.beta, &want, "coefficients") {
            assert!(
                (a - b).abs() < 1e-6,
                "lambda {lambda}: coefficient {a} vs {b}"
            );
        }
        // statsmodels GLMGamResults.fittedvalues at the sample.
        let fitted = floats(&f["fitted"]);
        for (xi, p) in pairs(&x, &fitted, "x and fitted values") {
            let q = sigmoid(ours.basis.eval(&ours.chosen.beta, *xi));
            assert!(
                (q - p).abs() < 1e-7,
                "lambda {lambda}, x = {xi}: {q} vs {p}"
            );
        }
        // Sum of statsmodels GLMGamResults.edf, the trace of the hat matrix.
        let edf = f["edf"].as_f64().unwrap();
        assert!(
            (ours.chosen.edf - edf).abs() < 1e-6,
            "edf {} vs {edf}",
            ours.chosen.edf
        );
        // −llf of statsmodels.
        let nll = f["nll"].as_f64().unwrap();
        assert!(
            (ours.chosen.nll - nll).abs() < 1e-7,
            "nll {} vs {nll}",
            ours.chosen.nll
        );
        let grid = floats(&f["grid"]);
        let pred = floats(&f["predictions"]);
        for (g, p) in pairs(&grid, &pred, "grid and predictions") {
            let q = sigmoid(ours.basis.eval(&ours.chosen.beta, *g));
            assert!((q - p).abs() < 1e-7, "lambda {lambda}, x = {g}: {q} vs {p}");
        }
    }
}

/// Automatic smoothing: on the λ grid, our AIC and BIC curves equal
/// statsmodels' own `aic` and `bic_llf` of GLMGam fits (−2·llf + 2·edf and
/// −2·llf + ln(n)·edf, edf the sum of GLMGamResults.edf), and the λ each
/// criterion picks is the one statsmodels' values pick
/// (scripts/fixtures_spline.py). The samples have no more distinct log-odds
/// than bins, so our search runs on the exact points, as statsmodels does.
///
/// Tolerance 1e-6 on criterion values of a few hundred: the same fits, with
/// differences observed up to about 1e-8 at λ = 10^7, where the trace of the
/// hat matrix is computed from a nearly singular system on both sides. The fixture records the gap between the
/// winner and the runner-up; the check requires it to be far above that
/// tolerance, so the choice cannot hinge on rounding.
#[test]
fn automatic_smoothing_matches_statsmodels_criteria() {
    use plumbline::calibrate::spline::lambda_grid;
    let doc = fixture();
    let cases = doc["selection"].as_array().unwrap();
    assert_eq!(cases.len(), 2);
    let grid = lambda_grid();
    for c in cases {
        let name = c["name"].as_str().unwrap();
        let x = floats(&c["x"]);
        let y = labels(&c["y"]);
        assert_eq!(x.len(), y.len(), "{name}: x and y lengths");
        let intervals = c["intervals"].as_u64().unwrap() as usize;
        for (a, b) in pairs(&grid, &floats(&c["grid"]), "lambda grid") {
            assert!((a / b - 1.0).abs() < 1e-12, "{name}: grid {a} vs {b}");
        }
        for (crit, key) in [(Criterion::Aic, "aic"), (Criterion::Bic, "bic")] {
            let want = floats(&c[key]);
            let gap = c[format!("{key}_gap")].as_f64().unwrap();
            assert!(
                gap > 1e-3,
                "{name} {key}: fixture's winner is a near tie ({gap})"
            );
            let fit = fit_spline(&x, &y, intervals, None, crit).unwrap();
            // Our path runs from the largest λ down.
            assert_eq!(
                fit.path.len(),
                grid.len(),
                "{name} {key}: every λ converged"
            );
            for (l, v) in &fit.path {
                let i = grid.iter().position(|g| g == l).unwrap();
                assert!(
                    (v - want[i]).abs() < 1e-6,
                    "{name} {key}, lambda {l}: {v} vs statsmodels {}",
                    want[i]
                );
            }
            let chosen = c[format!("{key}_lambda")].as_f64().unwrap();
            assert!(
                (fit.chosen.lambda / chosen - 1.0).abs() < 1e-12,
                "{name} {key}: chose lambda {}, statsmodels' values pick {chosen}",
                fit.chosen.lambda
            );
            let i = grid.iter().position(|&g| g == fit.chosen.lambda).unwrap();
            let edf = floats(&c["edf"])[i];
            assert!(
                (fit.chosen.edf - edf).abs() < 1e-6,
                "{name} {key}: edf {} vs statsmodels {edf}",
                fit.chosen.edf
            );
        }
    }
}

fn normal(r: &mut impl Rng) -> f64 {
    // Box–Muller from two uniforms in (0, 1].
    let u1 = ((r.next_u64() >> 11) as f64 + 1.0) / (1u64 << 53) as f64;
    let u2 = (r.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

fn uniform(r: &mut impl Rng) -> f64 {
    (r.next_u64() >> 11) as f64 / (1u64 << 53) as f64
}

/// With a huge penalty only the null space of the second-difference penalty is
/// left, the linear functions of the log-odds, so the fit must be the
/// two-parameter logistic regression on the log-odds (Eilers & Marx 1996,
/// section 8; compared with the Newton fit of Platt scaling).
#[test]
fn huge_penalty_reduces_to_logistic_on_log_odds() {
    let mut r = rng(7);
    let n = 2000;
    let x: Vec<f64> = (0..n).map(|_| 1.3 * normal(&mut r)).collect();
    let y: Vec<bool> = x
        .iter()
        .map(|&v| uniform(&mut r) < sigmoid(0.8 * v + 0.4 * (3.0 * v).sin() - 0.2))
        .collect();
    let t: Vec<f64> = y.iter().map(|&l| if l { 1.0 } else { 0.0 }).collect();
    let lin = fit_logistic_1d(&x, &t).unwrap();
    for intervals in [5, 20, 40] {
        let big = fit_spline(&x, &y, intervals, Some(1e10), Criterion::Aic).unwrap();
        // edf → 2 (intercept and slope).
        assert!(
            (big.chosen.edf - 2.0).abs() < 1e-4,
            "edf {}",
            big.chosen.edf
        );
        for i in 0..=60 {
            let v = -8.0 + 16.0 * i as f64 / 60.0; // also beyond the data range
            let want = sigmoid(lin.a * v + lin.b);
            let got = sigmoid(big.basis.eval(&big.chosen.beta, v));
            assert!(
                (got - want).abs() < 1e-5,
                "K = {intervals}, x = {v}: {got} vs {want}"
            );
        }
    }
}

/// On a large sample from a known monotone, non-logistic map the automatic
/// smoothing recovers it: the largest error over the central 98% of the scores
/// stays below 0.03 (tolerance of our choosing: about three binomial standard
/// errors of a local average over ~1,000 rows at p = 0.5).
#[test]
fn recovers_monotone_true_maps_on_large_samples() {
    type Truth = (&'static str, fn(f64) -> f64);
    let truths: [Truth; 3] = [
        ("logistic", |v| 1.0 * v - 0.5),
        ("bent", |v| 0.9 * v + 0.6 * (2.0 * v).tanh() - 0.3),
        ("overconfident", |v| 0.4 * v + 0.3),
    ];
    for (name, f) in truths {
        let mut r = rng(11);
        let n = 30_000;
        let x: Vec<f64> = (0..n).map(|_| 2.0 * normal(&mut r)).collect();
        let y: Vec<bool> = x.iter().map(|&v| uniform(&mut r) < sigmoid(f(v))).collect();
        for crit in [Criterion::Aic, Criterion::Bic] {
            let fit = fit_spline(&x, &y, 20, None, crit).unwrap();
            let mut worst: f64 = 0.0;
            for i in 0..=100 {
                let v = -4.6 + 9.2 * i as f64 / 100.0; // ±2.3 sd of x
                let e = (sigmoid(fit.basis.eval(&fit.chosen.beta, v)) - sigmoid(f(v))).abs();
                worst = worst.max(e);
            }
            assert!(worst < 0.03, "{name}, {crit:?}: worst error {worst}");
        }
        if name == "bent" {
            // The tolerance is tight enough to tell the bend apart: the best
            // straight line on the log-odds misses it by more.
            let t: Vec<f64> = y.iter().map(|&l| if l { 1.0 } else { 0.0 }).collect();
            let lin = fit_logistic_1d(&x, &t).unwrap();
            let worst = (0..=100)
                .map(|i| {
                    let v = -4.6 + 9.2 * i as f64 / 100.0;
                    (sigmoid(lin.a * v + lin.b) - sigmoid(f(v))).abs()
                })
                .fold(0.0, f64::max);
            assert!(worst > 0.03, "a straight line fits the bent map: {worst}");
        }
    }
}

/// The calibrator applies the map on the log-odds of probability scores: a
/// probability task and the same task given as margins give the same output.
#[test]
fn probability_and_margin_scores_agree() {
    let mut r = rng(3);
    let n = 500;
    let m: Vec<f64> = (0..n).map(|_| normal(&mut r)).collect();
    let y: Vec<bool> = m
        .iter()
        .map(|&v| uniform(&mut r) < sigmoid(1.7 * v))
        .collect();
    let p: Vec<f64> = m.iter().map(|&v| sigmoid(v)).collect();
    let mk = |kind| Spline {
        score_kind: kind,
        intervals: 10,
        lambda: None,
        criterion: Criterion::Aic,
    };
    let a = mk(ScoreKind::Margin).fit(&m, &y).unwrap();
    let b = mk(ScoreKind::Probability).fit(&p, &y).unwrap();
    let test_m = [-3.0, -0.5, 0.0, 0.7, 4.0];
    let test_p: Vec<f64> = test_m.iter().map(|&v| sigmoid(v)).collect();
    let (mut oa, mut ob) = ([0.0; 5], [0.0; 5]);
    a.map.predict(&test_m, &mut oa);
    b.map.predict(&test_p, &mut ob);
    for (u, v) in oa.iter().zip(&ob) {
        assert!((u - v).abs() < 1e-6, "{u} vs {v}");
    }
    let lam = a.map.describe()["lambda"].as_f64().unwrap();
    assert!(lam > 0.0);
}

#[derive(serde::Deserialize)]
struct W {
    m: plumbline::calibrate::MethodSpec,
}

fn spec(text: &str) -> Result<plumbline::calibrate::MethodSpec, String> {
    toml::from_str::<W>(text)
        .map(|w| w.m)
        .map_err(|e| e.to_string())
}

/// Suite syntax of the two methods: defaults, checks, unknown keys.
#[test]
fn suite_specs_parse_and_validate() {
    use plumbline::calibrate::MethodSpec;
    let d = spec("m = { kind = \"spline\" }").unwrap();
    assert_eq!(
        d,
        MethodSpec::Spline(SplineParams {
            intervals: 20,
            lambda: None,
            criterion: None
        })
    );
    assert_eq!(d.kind(), "spline");
    assert!(d.validate(ScoreKind::Probability).is_ok());
    assert!(d.build(ScoreKind::Margin).is_ok());
    let b = spec("m = { kind = \"spline\", intervals = 8, criterion = \"bic\" }").unwrap();
    assert!(b.validate(ScoreKind::Margin).is_ok());
    for bad in [
        "m = { kind = \"spline\", intervals = 0 }",
        "m = { kind = \"spline\", intervals = 201 }",
        "m = { kind = \"spline\", lambda = 0.0 }",
        "m = { kind = \"spline\", lambda = -1.0 }",
        "m = { kind = \"spline\", lambda = 2.0, criterion = \"aic\" }",
    ] {
        let e = spec(bad)
            .unwrap()
            .validate(ScoreKind::Probability)
            .unwrap_err();
        assert!(!e.reason.is_empty(), "{bad}");
    }
    assert!(spec("m = { kind = \"spline\", criterion = \"gcv\" }").is_err());
    assert!(spec("m = { kind = \"spline\", knots = 5 }").is_err());
    let va = spec("m = { kind = \"venn-abers\" }").unwrap();
    assert_eq!(va.kind(), "venn-abers");
    assert!(va.build(ScoreKind::Margin).is_ok());
    assert!(spec("m = { kind = \"venn-abers\", width = 1 }").is_err());
}
