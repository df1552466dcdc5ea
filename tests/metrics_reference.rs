//! Metrics against reference libraries on committed fixture data.
//!
//! The fixture `tests/fixtures/metrics/reference.json` is written by
//! `scripts/fixtures_metrics.py`, which records the numpy, scipy, scikit-learn
//! and statsmodels versions it ran with. Each case holds a simulated test set,
//! its metric settings and the reference values. The binned-ECE fixture
//! `tests/fixtures/metrics/ece_binned.json` is written by
//! `scripts/fixtures_ece.py` (numpy version in its `generator` header). The
//! metrics at a threshold (`threshold_cost`, `net_benefit`) depend on a threshold
//! rather than on the settings of these cases; their fixture
//! `tests/fixtures/metrics/decision.json` is written by
//! `scripts/fixtures_decision.py` from scikit-learn's `confusion_matrix` at
//! three thresholds.

use plumbline::metrics::{smooth_ece, Cut, MetricId, MetricSettings};
use serde::Deserialize;

#[derive(Deserialize)]
struct Fixture {
    versions: serde_json::Value,
    cases: Vec<Case>,
}

#[derive(Deserialize)]
struct Case {
    name: String,
    settings: MetricSettings,
    p: Vec<f64>,
    y: Vec<u8>,
    expected: std::collections::BTreeMap<String, f64>,
}

fn load() -> Fixture {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/metrics/reference.json"
    );
    let text = std::fs::read_to_string(path).expect("fixture present");
    let f: Fixture = serde_json::from_str(&text).expect("fixture parses");
    assert!(f.versions.get("statsmodels").is_some());
    // A metric pairs p with y row by row; unequal lengths would score a
    // silently shortened test set.
    for c in &f.cases {
        assert_eq!(
            c.p.len(),
            c.y.len(),
            "{}: {} predictions against {} labels",
            c.name,
            c.p.len(),
            c.y.len()
        );
    }
    f
}

/// Reference and tolerance per metric id; the source is named per entry.
fn tolerance(id: &str) -> f64 {
    match id {
        // scikit-learn log_loss / brier_score_loss / roc_auc_score: same
        // closed forms, only summation order differs.
        "log_loss" | "brier" | "auc" => 1e-12,
        // numpy implementations of Murphy (1973), the ECE formulas and
        // Spiegelhalter (1986): closed forms.
        "murphy_rel" | "murphy_res" | "murphy_unc" | "ece_width" | "ece_mass" => 1e-12,
        "spiegelhalter_z" => 1e-10,
        // scikit-learn IsotonicRegression for the PAV step of CORP.
        id if id.starts_with("corp_") => 1e-12,
        // statsmodels GLM Binomial with offset (tol 1e-14) and statsmodels
        // Logit (Newton, tol 1e-12): our Newton solves the score equations
        // to 1e-13·n.
        "calibration_slope" | "calibration_intercept" => 1e-11,
        // statsmodels lowess (it = 0): the same algorithm, so only rounding.
        "ici" => 1e-10,
        // A second implementation by a different algorithm, not an outside
        // library (none implements smECE): scipy.stats.norm.pdf image sums,
        // Gauss–Legendre between brentq zeros, and the fixed point by
        // scipy.optimize.brentq to 1e-13. Ours reports the midpoint of a
        // bisection bracket narrower than 1e-6, so it lies within 5e-7 of the
        // fixed point; 1e-6 leaves room for the integral's own error (< 1e-9).
        "smooth_ece" => 1e-6,
        _ => panic!("no tolerance for {id}"),
    }
}

#[test]
fn every_metric_matches_its_reference() {
    let f = load();
    let mut checked = 0;
    for c in &f.cases {
        c.settings.validate().unwrap();
        let y: Vec<bool> = c.y.iter().map(|&v| v == 1).collect();
        for &m in MetricId::ALL.iter().filter(|m| !AT_THRESHOLD.contains(m)) {
            let want = *c
                .expected
                .get(m.as_str())
                .unwrap_or_else(|| panic!("{}: no reference for {}", c.name, m.as_str()));
            let got = m.compute(&c.p, &y, &c.settings);
            let tol = tolerance(m.as_str());
            assert!(
                (got - want).abs() <= tol * want.abs().max(1.0),
                "{} {}: got {got}, reference {want}",
                c.name,
                m.as_str()
            );
            checked += 1;
        }
    }
    assert_eq!(
        checked,
        f.cases.len() * (MetricId::ALL.len() - AT_THRESHOLD.len())
    );
}

/// The metrics at a decision threshold, checked against their own fixture in
/// [`decision_metrics_match_confusion_matrix`].
const AT_THRESHOLD: [MetricId; 2] = [MetricId::ThresholdCost, MetricId::NetBenefit];

#[derive(Deserialize)]
struct DecisionFixture {
    versions: serde_json::Value,
    p: Vec<f64>,
    y: Vec<u8>,
    thresholds: Vec<DecisionCase>,
}

#[derive(Deserialize)]
struct DecisionCase {
    t: f64,
    tn: usize,
    fp: usize,
    #[serde(rename = "fn")]
    fneg: usize,
    tp: usize,
    threshold_cost: f64,
    net_benefit: f64,
}

/// `threshold_cost` and `net_benefit` against scikit-learn's
/// `confusion_matrix` of y and [p ≥ t] at three thresholds, on a seeded test
/// set with predictions exactly on each threshold (acted on) and at 0 and 1.
/// The reference formulas are written on the four counts, the crate's on
/// per-row terms; tolerance 1e-12 allows for the different summation.
#[test]
fn decision_metrics_match_confusion_matrix() {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/metrics/decision.json"
    );
    let text = std::fs::read_to_string(path).expect("fixture present");
    let f: DecisionFixture = serde_json::from_str(&text).expect("fixture parses");
    assert!(f.versions.get("scikit-learn").is_some());
    assert_eq!(
        f.p.len(),
        f.y.len(),
        "{} predictions against {} labels",
        f.p.len(),
        f.y.len()
    );
    assert_eq!(f.thresholds.len(), 3, "fixture has its thresholds");
    let y: Vec<bool> = f.y.iter().map(|&v| v == 1).collect();
    for c in &f.thresholds {
        assert_eq!(c.tn + c.fp + c.fneg + c.tp, f.p.len(), "t = {}", c.t);
        // Rows exactly on the threshold are in the fixture, so the rule
        // "acted on when p ≥ t" is exercised at its boundary.
        assert!(f.p.contains(&c.t), "no row on t = {}", c.t);
        let s = MetricSettings {
            decision_threshold: c.t,
            ..MetricSettings::default()
        };
        s.validate().unwrap();
        for (m, want) in [
            (MetricId::ThresholdCost, c.threshold_cost),
            (MetricId::NetBenefit, c.net_benefit),
        ] {
            let got = m.compute(&f.p, &y, &s);
            assert!(
                (got - want).abs() <= 1e-12,
                "t = {} {m}: got {got}, reference {want}",
                c.t
            );
            // The same metric as one of several thresholds
            // (`threshold_cost@t`) scores at its own t, whatever
            // `decision_threshold` says.
            let at = m.at(Cut::new(c.t).unwrap()).unwrap();
            let got = at.compute(&f.p, &y, &MetricSettings::default());
            assert!(
                (got - want).abs() <= 1e-12,
                "{at}: got {got}, reference {want}"
            );
        }
    }
    // All three thresholds as one suite's list: one id per threshold.
    let s = MetricSettings {
        decision_thresholds: f.thresholds.iter().map(|c| c.t).collect(),
        ..MetricSettings::default()
    };
    s.validate().unwrap();
    let cuts = s.thresholds();
    assert_eq!(cuts.len(), 3);
    for c in &f.thresholds {
        let id = MetricId::parse(&format!("net_benefit@{}", c.t)).unwrap();
        assert!(cuts.iter().any(|&k| MetricId::NetBenefit.at(k) == Some(id)));
        let got = id.compute(&f.p, &y, &s);
        assert!((got - c.net_benefit).abs() <= 1e-12, "{id}");
    }
}

/// smECE at a fixed bandwidth against a second implementation by a different
/// algorithm (scripts/fixtures_metrics.py; no outside library implements
/// smECE): the reflected kernel as a sum of Gaussian images with
/// scipy.stats.norm.pdf instead of our cosine series, and ∫|h| by 24-point
/// Gauss–Legendre rules on pieces of at most σ/2 between zeros located by
/// scipy.optimize.brentq instead of our antiderivative between Newton-refined
/// zeros. This checks the kernel and the integral apart from the fixed point.
/// Tolerance 1e-10: both sides are accurate to rounding (our series is cut
/// where its terms fall below e^(−44); the quadrature is exact to ~1e-14 for a
/// function this smooth on pieces that short), so 1e-10 only allows for
/// summation order over a few thousand terms.
#[test]
fn smooth_ece_at_fixed_bandwidth() {
    for c in &load().cases {
        let y: Vec<bool> = c.y.iter().map(|&v| v == 1).collect();
        for (key, sigma) in [("smooth_ece_at_0.05", 0.05), ("smooth_ece_at_0.2", 0.2)] {
            let want = c.expected[key];
            let got = smooth_ece::smooth_ece_sigma(&c.p, &y, sigma);
            assert!(
                (got - want).abs() < 1e-10,
                "{} {key}: {got} vs {want}",
                c.name
            );
        }
    }
}

/// ICI with no skipping (statsmodels lowess with delta = 0): every row fitted.
#[test]
fn ici_without_skipping() {
    for c in &load().cases {
        let y: Vec<bool> = c.y.iter().map(|&v| v == 1).collect();
        let s = MetricSettings {
            ici_delta: 0.0,
            ..c.settings.clone()
        };
        let want = c.expected["ici_delta_0"];
        let got = MetricId::Ici.compute(&c.p, &y, &s);
        assert!((got - want).abs() < 1e-10, "{}: {got} vs {want}", c.name);
    }
}

/// Binned ECE against an independent numpy computation of the published
/// formula Σ_k (n_k/n)|p̄_k − ȳ_k| (Naeini, Cooper & Hauskrecht 2015; Guo et
/// al. 2017). Independent reference: numpy 2.4 `histogram(p, bins=K,
/// range=(0, 1))` (its own edges and bin rule) for `ece_width`; order-statistic
/// thresholds x[⌊jn/K⌋ − 1] with `searchsorted` for `ece_mass` (ties share a
/// bin). Neither copies the crate's bin loop.
///
/// Edge convention: numpy compares with its linspace edges, so the double
/// "0.3" (just below 3/10) falls in the bin below 0.3 for K = 10, while the
/// crate's ⌊p·K⌋ puts it in the bin above. The fixture puts predictions on
/// edges only where every edge k/K is an exact double (K = 8 and 16, grid
/// 1/64), where the two agree; elsewhere no prediction is near an edge.
///
/// Tolerance 1e-12: the same sums in another order.
#[test]
fn binned_ece_matches_numpy_histogram_and_order_statistics() {
    let v: serde_json::Value =
        serde_json::from_str(include_str!("fixtures/metrics/ece_binned.json"))
            .expect("fixture is valid JSON");
    assert!(
        v["generator"]["numpy"].is_string(),
        "fixture names its library versions"
    );
    let cases = v["cases"].as_array().unwrap();
    assert!(cases.len() >= 5, "fixture has its cases");
    for c in cases {
        let name = c["name"].as_str().unwrap();
        let p: Vec<f64> = serde_json::from_value(c["p"].clone()).unwrap();
        let y: Vec<bool> = c["y"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_i64().unwrap() == 1)
            .collect();
        assert_eq!(p.len(), y.len(), "{name}: predictions against labels");
        let settings = MetricSettings {
            ece_bins: c["bins"].as_u64().unwrap() as usize,
            ..MetricSettings::default()
        };
        settings.validate().unwrap();
        for (m, key) in [
            (MetricId::EceWidth, "ece_width"),
            (MetricId::EceMass, "ece_mass"),
        ] {
            let want = c[key].as_f64().unwrap();
            let got = m.compute(&p, &y, &settings);
            assert!(
                (got - want).abs() <= 1e-12,
                "{name} {key}: got {got}, reference {want}"
            );
        }
    }
}
