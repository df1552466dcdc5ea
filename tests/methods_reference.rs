//! Calibration methods checked against reference libraries and published facts.
//!
//! Fixtures under tests/fixtures/methods/ are written by
//! scripts/fixtures_methods.py (library versions in each file's "generator"
//! header); the script documents how each reference value is computed. The
//! Venn–Abers fixture is written by scripts/fixtures_venn_abers.py.

use plumbline::calibrate::venn_abers::{merge_pair, VennAbersTable};
use plumbline::calibrate::{beta, logistic, Fitted, MethodSpec, ScoreKind};
use plumbline::split::splitmix64;
use serde_json::Value;

/// Uniform in (0, 1) from a 64-bit hash (53 mantissa bits, never 0).
fn unit(h: u64) -> f64 {
    ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64
}

/// n calibrated pairs: s ~ U(0, 1), y ~ Bernoulli(s).
fn calibrated_sample(n: usize, seed: u64) -> (Vec<f64>, Vec<bool>) {
    let mut s = Vec::with_capacity(n);
    let mut y = Vec::with_capacity(n);
    for i in 0..n as u64 {
        let p = unit(splitmix64(seed ^ (2 * i)));
        s.push(p);
        y.push(unit(splitmix64(seed ^ (2 * i + 1))) < p);
    }
    (s, y)
}

fn load(text: &str) -> Vec<Value> {
    let v: Value = serde_json::from_str(text).expect("fixture is valid JSON");
    assert!(
        v["generator"]["statsmodels"].is_string(),
        "fixture names its library versions"
    );
    v["cases"].as_array().unwrap().clone()
}

fn f64s(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

fn labels(v: &Value) -> Vec<bool> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_i64().unwrap() == 1)
        .collect()
}

/// A case's calibration sample: its scores and labels, checked to be equally
/// long (a fit would otherwise see a silently shortened sample).
fn sample(c: &Value) -> (Vec<f64>, Vec<bool>) {
    let (s, y) = (f64s(&c["scores"]), labels(&c["labels"]));
    assert_eq!(
        s.len(),
        y.len(),
        "{}: {} scores against {} labels",
        c["name"],
        s.len(),
        y.len()
    );
    (s, y)
}

fn spec(toml_src: &str) -> MethodSpec {
    #[derive(serde::Deserialize)]
    struct W {
        m: MethodSpec,
    }
    toml::from_str::<W>(&format!("m = {toml_src}")).unwrap().m
}

fn fit(toml_src: &str, kind: ScoreKind, s: &[f64], y: &[bool]) -> Fitted {
    spec(toml_src).build(kind).unwrap().fit(s, y).unwrap()
}

fn predict(f: &Fitted, s: &[f64]) -> Vec<f64> {
    let mut out = vec![0.0; s.len()];
    f.map.predict(s, &mut out);
    out
}

fn num(d: &Value, key: &str) -> f64 {
    d[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} missing in {d}"))
}

fn assert_close(got: &[f64], want: &[f64], tol: f64, what: &str) {
    assert_eq!(got.len(), want.len(), "{what}: lengths");
    for (i, (g, w)) in got.iter().zip(want).enumerate() {
        assert!((g - w).abs() <= tol, "{what}[{i}]: got {g}, want {w}");
    }
}

/// Platt scaling vs statsmodels Logit (unpenalised maximum likelihood).
#[test]
fn platt_matches_statsmodels_logit() {
    for c in load(include_str!("fixtures/methods/platt.json")) {
        let (s, y) = sample(&c);
        let kind = if c["name"].as_str().unwrap().starts_with("margin") {
            ScoreKind::Margin
        } else {
            ScoreKind::Probability
        };
        let f = fit("{ kind = \"platt\" }", kind, &s, &y);
        assert!(f.notes.is_empty(), "{}: {:?}", c["name"], f.notes);
        let d = f.map.describe();
        // statsmodels 0.15 Logit, Newton, tol 1e-14 (fixture header).
        assert!(
            (num(&d, "a") - num(&c, "a")).abs() < 1e-6,
            "{}: a {d}",
            c["name"]
        );
        assert!(
            (num(&d, "b") - num(&c, "b")).abs() < 1e-6,
            "{}: b {d}",
            c["name"]
        );
    }
}

/// Isotonic regression vs scipy.optimize.isotonic_regression (tie-free) and
/// sklearn IsotonicRegression(out_of_bounds="clip") (with ties).
#[test]
fn isotonic_matches_scipy_and_sklearn() {
    for c in load(include_str!("fixtures/methods/isotonic.json")) {
        let (s, y) = sample(&c);
        let f = fit("{ kind = \"isotonic\" }", ScoreKind::Probability, &s, &y);
        let name = c["name"].as_str().unwrap();
        if c.get("fitted").is_some() {
            // scipy's PAV values at the sorted scores.
            let got = predict(&f, &f64s(&c["sorted_scores"]));
            assert_close(&got, &f64s(&c["fitted"]), 1e-12, name);
        } else {
            // sklearn's fitted values at the calibration scores.
            let got = predict(&f, &s);
            assert_close(&got, &f64s(&c["fitted_at_scores"]), 1e-12, name);
        }
        // New points: numpy.interp over scipy's fit / sklearn predict (clip).
        let got = predict(&f, &f64s(&c["new"]));
        assert_close(&got, &f64s(&c["predicted"]), 1e-12, name);
    }
}

/// Beta calibration vs statsmodels Logit on [ln s, −ln(1 − s)] (full) and on
/// logit s (tied), and the monotone refit when b < 0.
#[test]
fn beta_matches_statsmodels_logit() {
    for c in load(include_str!("fixtures/methods/beta.json")) {
        let name = c["name"].as_str().unwrap();
        let (s, y) = sample(&c);
        let kind = match c["score_kind"].as_str() {
            Some("margin") => ScoreKind::Margin,
            _ => ScoreKind::Probability,
        };
        let f = fit("{ kind = \"beta\" }", kind, &s, &y);
        let d = f.map.describe();
        for k in ["a", "b", "c"] {
            assert!(
                (num(&d, k) - num(&c["full"], k)).abs() < 1e-6,
                "{name}: {k}: {d} vs {}",
                c["full"]
            );
        }
        if let Some(u) = c.get("full_unconstrained") {
            // The unconstrained optimum (statsmodels) has b < 0, and so does ours,
            // which is why the map was refitted with b = 0.
            assert!(num(u, "b") < 0.0);
            let (x1, x2): (Vec<f64>, Vec<f64>) = s
                .iter()
                .map(|&v| beta::beta_features(v, ScoreKind::Probability))
                .unzip();
            let t: Vec<f64> = y.iter().map(|&l| l as u8 as f64).collect();
            let m = logistic::fit_logistic(&[&x1, &x2], &t).unwrap();
            assert!((m.coef[0] - num(u, "a")).abs() < 1e-6);
            assert!((m.coef[1] - num(u, "b")).abs() < 1e-6);
            assert!((m.intercept - num(u, "c")).abs() < 1e-6);
            assert_eq!(f.notes, vec!["refit"], "{name}");
        } else {
            assert!(f.notes.is_empty(), "{name}: {:?}", f.notes);
            let t = fit("{ kind = \"beta\", shape = \"tied\" }", kind, &s, &y);
            let d = t.map.describe();
            assert!(
                (num(&d, "a") - num(&c["tied"], "a")).abs() < 1e-6,
                "{name}: {d}"
            );
            assert!(
                (num(&d, "c") - num(&c["tied"], "c")).abs() < 1e-6,
                "{name}: {d}"
            );
        }
    }
}

/// Beta calibration recovers the identity map on calibrated scores: if
/// y ~ Bernoulli(s), the true map is logit p = ln s − ln(1 − s), i.e. a = b = 1,
/// c = 0 (Kull et al. 2017, identity is in the family).
#[test]
fn beta_recovers_identity_on_calibrated_scores() {
    let (s, y) = calibrated_sample(200_000, 7);
    let f = fit("{ kind = \"beta\" }", ScoreKind::Probability, &s, &y);
    let d = f.map.describe();
    assert!((num(&d, "a") - 1.0).abs() < 0.05, "{d}");
    assert!((num(&d, "b") - 1.0).abs() < 0.05, "{d}");
    assert!(num(&d, "c").abs() < 0.05, "{d}");
    let t = fit(
        "{ kind = \"beta\", shape = \"tied\" }",
        ScoreKind::Probability,
        &s,
        &y,
    );
    let d = t.map.describe();
    assert!((num(&d, "a") - 1.0).abs() < 0.05, "{d}");
    assert!(num(&d, "c").abs() < 0.05, "{d}");
}

/// Temperature scaling leaves calibrated log-odds alone: if y ~ Bernoulli(s)
/// the population optimum is T = 1 (the model σ(z/T) contains the truth at T = 1;
/// Guo et al. 2017).
#[test]
fn temperature_recovers_one_on_calibrated_scores() {
    let (s, y) = calibrated_sample(100_000, 11);
    let f = fit("{ kind = \"temperature\" }", ScoreKind::Probability, &s, &y);
    let t = num(&f.map.describe(), "temperature");
    assert!((t - 1.0).abs() < 0.03, "T = {t}");
}

/// Histogram binning vs a numpy computation of the same binning rule (bin
/// thresholds at order statistics, searchsorted for membership).
#[test]
fn binning_matches_numpy() {
    for c in load(include_str!("fixtures/methods/binning.json")) {
        let name = c["name"].as_str().unwrap();
        let (s, y) = sample(&c);
        let spec_src = format!(
            "{{ kind = \"binning\", bins = {}, pseudo_count = {:?} }}",
            c["bins"].as_u64().unwrap(),
            num(&c, "pseudo_count")
        );
        let f = fit(&spec_src, ScoreKind::Probability, &s, &y);
        let d = f.map.describe();
        let bins = d["bins"].as_array().unwrap();
        let rows: Vec<f64> = bins.iter().map(|b| num(b, "rows")).collect();
        let values: Vec<f64> = bins.iter().map(|b| num(b, "value")).collect();
        assert_close(&rows, &f64s(&c["bin_rows"]), 0.0, name);
        assert_close(&values, &f64s(&c["bin_values"]), 1e-15, name);
        let got = predict(&f, &f64s(&c["new"]));
        assert_close(&got, &f64s(&c["predicted"]), 1e-15, name);
    }
}

/// Temperature scaling vs scipy.optimize.minimize_scalar (bounded) of the
/// negative log-likelihood in T.
#[test]
fn temperature_matches_scipy_minimize_scalar() {
    for c in load(include_str!("fixtures/methods/temperature.json")) {
        let name = c["name"].as_str().unwrap();
        let (s, y) = sample(&c);
        let kind = match c["score_kind"].as_str().unwrap() {
            "margin" => ScoreKind::Margin,
            _ => ScoreKind::Probability,
        };
        let f = fit("{ kind = \"temperature\" }", kind, &s, &y);
        assert!(f.notes.is_empty(), "{name}: {:?}", f.notes);
        let d = f.map.describe();
        let t = num(&d, "temperature");
        let want = num(&c, "temperature");
        // Brent's bounded search locates T to about sqrt(machine eps) relative.
        assert!((t - want).abs() < 1e-6 * want, "{name}: T {t} vs {want}");
        // Our optimum is at least as good as scipy's (NLL from the fixture).
        let p = predict(&f, &s);
        let nll: f64 = p
            .iter()
            .zip(&y)
            .map(|(&p, &l)| if l { -p.ln() } else { -(1.0 - p).ln() })
            .sum();
        assert!(nll <= num(&c, "nll") + 1e-9, "{name}: nll {nll}");
    }
}

/// Centered isotonic regression vs points built from scikit-learn's isotonic
/// fit (runs of equal fitted values, weighted-mean scores) and numpy.interp.
#[test]
fn centered_isotonic_matches_sklearn_construction() {
    for c in load(include_str!("fixtures/methods/centered.json")) {
        let name = c["name"].as_str().unwrap();
        let (s, y) = sample(&c);
        let f = fit(
            "{ kind = \"centered-isotonic\" }",
            ScoreKind::Probability,
            &s,
            &y,
        );
        let d = f.map.describe();
        assert_close(&f64s(&d["x"]), &f64s(&c["x"]), 1e-12, name);
        assert_close(&f64s(&d["value"]), &f64s(&c["value"]), 1e-12, name);
        let got = predict(&f, &f64s(&c["new"]));
        assert_close(&got, &f64s(&c["predicted"]), 1e-12, name);
    }
}

/// Where PAV pools nothing and the per-score rates increase strictly, centered
/// isotonic and isotonic are the same map (Oron & Flournoy 2017: CIR only moves
/// pooled blocks).
#[test]
fn centered_isotonic_equals_isotonic_without_violations() {
    // Score j (j = 0..8) has j + 1 positives among 10 rows: rates 0.1 … 0.9.
    let mut s = Vec::new();
    let mut y = Vec::new();
    for j in 0..9 {
        for r in 0..10 {
            s.push(j as f64 / 8.0);
            y.push(r <= j);
        }
    }
    let a = fit("{ kind = \"isotonic\" }", ScoreKind::Probability, &s, &y);
    let b = fit(
        "{ kind = \"centered-isotonic\" }",
        ScoreKind::Probability,
        &s,
        &y,
    );
    let grid: Vec<f64> = (-10..=110).map(|i| i as f64 / 100.0).collect();
    assert_close(
        &predict(&a, &grid),
        &predict(&b, &grid),
        1e-15,
        "cir vs isotonic",
    );
    // And where there are violations they differ (the map is strictly increasing
    // inside instead of flat on the pooled block).
    let s2 = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6];
    let y2 = [false, true, false, false, true, true];
    let a = fit("{ kind = \"isotonic\" }", ScoreKind::Probability, &s2, &y2);
    let b = fit(
        "{ kind = \"centered-isotonic\" }",
        ScoreKind::Probability,
        &s2,
        &y2,
    );
    let pa = predict(&a, &[0.25, 0.35]);
    let pb = predict(&b, &[0.25, 0.35]);
    assert_eq!(pa[0], pa[1]);
    assert!(pb[0] < pb[1]);
}

/// The separation rule of beta calibration (threshold or interval patterns
/// along the convex feature curve) agrees with the linear-programming test of
/// Albert & Anderson (1984, Biometrika 71) for existence of the logistic MLE,
/// solved by scipy.optimize.linprog, on both the full design [ln s, −ln(1 − s), 1]
/// and the one-feature design [logit s, 1].
#[test]
fn beta_separation_rule_matches_linear_programme() {
    let cases = load(include_str!("fixtures/methods/separation.json"));
    let (mut full_sep, mut one_sep) = (0, 0);
    for (i, c) in cases.iter().enumerate() {
        let (s, y) = sample(c);
        let classes: Vec<i8> = plumbline::calibrate::isotonic::merge_ties(&s, &y)
            .iter()
            .map(|&(_, w, k)| {
                if k == 0.0 {
                    -1
                } else if k == w {
                    1
                } else {
                    0
                }
            })
            .collect();
        let full = c["full"].as_bool().unwrap();
        let one = c["one_feature"].as_bool().unwrap();
        assert_eq!(
            beta::separable_with_cuts(&classes, 2),
            full,
            "case {i}: {c}"
        );
        assert_eq!(beta::separable_with_cuts(&classes, 1), one, "case {i}: {c}");
        // The tied form reports exactly the one-feature outcome.
        let f = fit(
            "{ kind = \"beta\", shape = \"tied\" }",
            ScoreKind::Probability,
            &s,
            &y,
        );
        assert_eq!(
            f.notes.contains(&"separable"),
            one,
            "case {i}: {:?}",
            f.notes
        );
        full_sep += full as usize;
        one_sep += one as usize;
    }
    // The fixture exercises both outcomes of both rules.
    assert!(full_sep > 20 && full_sep < cases.len() - 20);
    assert!(one_sep > 10 && one_sep < cases.len() - 10);
}

/// Inductive Venn–Abers vs the definition. Independent reference: scikit-learn
/// 1.9 IsotonicRegression, refitted on the calibration sample plus (s, 0) and
/// plus (s, 1) for every test score s (Vovk & Petej 2014), cross-checked in the
/// script with scipy 1.17 isotonic_regression; versions in the fixture header.
/// The crate's cumulative-sum-diagram algorithm shares nothing with it.
///
/// Tie convention: the reference (scikit-learn) merges rows with equal scores,
/// the test row included, into one point of weight = count and value = mean
/// label before PAV, so tied scores share one fitted value ("secondary"
/// approach, de Leeuw 1977). The crate merges ties the same way, so the
/// fixture's test scores that equal a calibration score check that convention.
///
/// Tolerance 1e-12: the crate divides two exact integers once per value; the
/// reference pools by floating-point weighted means, so it is off by a few ulps.
#[test]
fn venn_abers_matches_sklearn_isotonic_refits() {
    let v: Value = serde_json::from_str(include_str!("fixtures/methods/venn_abers.json"))
        .expect("fixture is valid JSON");
    assert!(
        v["generator"]["scikit-learn"].is_string(),
        "fixture names its library versions"
    );
    let cases = v["cases"].as_array().unwrap();
    assert!(cases.len() >= 5, "fixture has its cases");
    const TOL: f64 = 1e-12;
    let mut on_calibration_score = 0;
    for c in cases {
        let name = c["name"].as_str().unwrap();
        let (s, y) = sample(c);
        let test = f64s(&c["test"]);
        let (p0, p1, merged) = (f64s(&c["p0"]), f64s(&c["p1"]), f64s(&c["merged"]));
        assert_eq!(p0.len(), test.len(), "{name}: p0 per test score");
        assert_eq!(p1.len(), test.len(), "{name}: p1 per test score");

        let table = VennAbersTable::new(&s, &y).unwrap();
        let (mut g0, mut g1, mut gm) = (vec![], vec![], vec![]);
        for &x in &test {
            let (a, b) = table.pair(x);
            g0.push(a);
            g1.push(b);
            gm.push(merge_pair(a, b));
            on_calibration_score += s.contains(&x) as usize;
        }
        assert_close(&g0, &p0, TOL, &format!("{name}: p0"));
        assert_close(&g1, &p1, TOL, &format!("{name}: p1"));
        assert_close(&gm, &merged, TOL, &format!("{name}: merged"));

        // The same through the method as a suite builds it: predictions and the
        // `va_width` extra (mean p1 − p0 over the test scores).
        let kind = if name.starts_with("margin") || name.starts_with("one-negative") {
            ScoreKind::Margin
        } else {
            ScoreKind::Probability
        };
        let f = fit("{ kind = \"venn-abers\" }", kind, &s, &y);
        assert_close(
            &predict(&f, &test),
            &merged,
            TOL,
            &format!("{name}: predict"),
        );
        let extras = f.map.extras(&test);
        assert_eq!(extras.len(), 1, "{name}: one extra");
        assert_eq!(extras[0].0, "va_width");
        assert!(
            (extras[0].1 - num(c, "width")).abs() <= TOL,
            "{name}: va_width {} vs {}",
            extras[0].1,
            num(c, "width")
        );
    }
    assert!(
        on_calibration_score > 100,
        "the fixture probes test scores tied with calibration scores"
    );
}
