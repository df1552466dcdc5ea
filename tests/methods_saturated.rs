//! Platt scaling and beta calibration on saturated calibration samples of the
//! default suite (naive-Bayes scores nearly all within 1e-10 of 0 or 1, where
//! the undamped fitter used to stop at a singular Hessian), checked against
//! statsmodels' unpenalised logistic regression on the same transformed
//! features. The samples and the references are made by
//! scripts/fixtures_saturated.py (library versions in the "generator" header;
//! the script says how each CSV was exported).
//!
//! Tolerances: on these samples the likelihood is nearly flat along one
//! direction (the slope is of order 1e5–1e10 on the raw score), so the
//! coefficients are compared to a relative 1e-5, the fitted probabilities on
//! the sample to 1e-7, and the negative log-likelihood to a relative 1e-9.

use plumbline::calibrate::{beta, sigmoid, Fitted, MethodSpec, ScoreKind};
use serde_json::Value;

fn sample(name: &str) -> (Vec<f64>, Vec<bool>) {
    let path = format!(
        "{}/tests/fixtures/methods/saturated/{name}",
        env!("CARGO_MANIFEST_DIR")
    );
    let text = std::fs::read_to_string(&path).unwrap();
    let mut s = Vec::new();
    let mut y = Vec::new();
    for line in text.lines().skip(1) {
        let (a, b) = line.split_once(',').unwrap();
        s.push(a.parse::<f64>().unwrap());
        y.push(b == "1");
    }
    (s, y)
}

fn fit(toml_src: &str, s: &[f64], y: &[bool]) -> Fitted {
    #[derive(serde::Deserialize)]
    struct W {
        m: MethodSpec,
    }
    let m = toml::from_str::<W>(&format!("m = {toml_src}")).unwrap().m;
    m.build(ScoreKind::Probability)
        .unwrap()
        .fit(s, y)
        .unwrap_or_else(|e| panic!("{toml_src}: {e}"))
}

fn num(d: &Value, key: &str) -> f64 {
    d[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} missing in {d}"))
}

fn rel_close(got: f64, want: f64, tol: f64, what: &str) {
    assert!(
        (got - want).abs() <= tol * want.abs().max(1.0),
        "{what}: got {got}, want {want}"
    );
}

fn nll(z: &[f64], y: &[bool]) -> f64 {
    z.iter()
        .zip(y)
        .map(|(&z, &y)| z.max(0.0) + (-z.abs()).exp().ln_1p() - if y { z } else { 0.0 })
        .sum()
}

#[test]
fn saturated_samples_fit_and_match_statsmodels() {
    let text = include_str!("fixtures/methods/saturated/reference.json");
    let v: Value = serde_json::from_str(text).unwrap();
    assert!(v["generator"]["statsmodels"].is_string());
    let cases = v["cases"].as_array().unwrap();
    assert!(cases.iter().any(|c| c["method"] == "platt"));
    assert!(cases.iter().any(|c| c["method"] == "beta"));
    for c in cases {
        let name = c["sample"].as_str().unwrap();
        let (s, y) = sample(name);
        let what = format!("{name} {}", c["method"]);
        let (z, zr): (Vec<f64>, Vec<f64>) = match c["method"].as_str().unwrap() {
            "platt" => {
                let f = fit("{ kind = \"platt\" }", &s, &y);
                assert!(f.notes.is_empty(), "{what}: {:?}", f.notes);
                let d = f.map.describe();
                let (a, b) = (num(&d, "a"), num(&d, "b"));
                rel_close(a, num(c, "a"), 1e-5, &format!("{what} a"));
                rel_close(b, num(c, "b"), 1e-5, &format!("{what} b"));
                s.iter()
                    .map(|&x| (a * x + b, num(c, "a") * x + num(c, "b")))
                    .unzip()
            }
            _ => {
                let f = fit("{ kind = \"beta\" }", &s, &y);
                assert!(f.notes.is_empty(), "{what}: {:?}", f.notes);
                let d = f.map.describe();
                let (a, b, cc) = (num(&d, "a"), num(&d, "b"), num(&d, "c"));
                rel_close(a, num(c, "a"), 1e-5, &format!("{what} a"));
                rel_close(b, num(c, "b"), 1e-5, &format!("{what} b"));
                rel_close(cc, num(c, "c"), 1e-5, &format!("{what} c"));
                s.iter()
                    .map(|&x| {
                        let (x1, x2) = beta::beta_features(x, ScoreKind::Probability);
                        (
                            a * x1 + b * x2 + cc,
                            num(c, "a") * x1 + num(c, "b") * x2 + num(c, "c"),
                        )
                    })
                    .unzip()
            }
        };
        for (i, (g, w)) in z.iter().zip(&zr).enumerate() {
            let (pg, pw) = (sigmoid(*g), sigmoid(*w));
            assert!((pg - pw).abs() <= 1e-7, "{what} row {i}: {pg} vs {pw}");
        }
        rel_close(nll(&z, &y), num(c, "nll"), 1e-9, &format!("{what} nll"));
        rel_close(
            nll(&zr, &y),
            num(c, "nll"),
            1e-9,
            &format!("{what} reference nll"),
        );
    }
}
