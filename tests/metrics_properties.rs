//! Identities and invariances of the metrics, on generated test sets.

use plumbline::metrics::{decompose, smooth_ece, MetricId, MetricSettings};
use proptest::prelude::*;

mod common;

fn sample() -> impl Strategy<Value = (Vec<f64>, Vec<bool>)> {
    (2usize..150).prop_flat_map(|n| {
        (
            proptest::collection::vec(0.001f64..0.999, n),
            proptest::collection::vec(any::<bool>(), n),
        )
    })
}

/// Predictions on a coarse grid, so that ties are frequent.
fn tied_sample() -> impl Strategy<Value = (Vec<f64>, Vec<bool>)> {
    (2usize..150).prop_flat_map(|n| {
        (
            proptest::collection::vec((1u32..20).prop_map(|k| k as f64 / 20.0), n),
            proptest::collection::vec(any::<bool>(), n),
        )
    })
}

fn m(id: MetricId, p: &[f64], y: &[bool]) -> f64 {
    id.compute(p, y, &MetricSettings::default())
}

fn logit(p: f64) -> f64 {
    (p / (1.0 - p)).ln()
}

fn sigmoid(z: f64) -> f64 {
    1.0 / (1.0 + (-z).exp())
}

proptest! {
    // Floor: 256 cases (proptest's default count); `PROPTEST_CASES` may raise
    // it, a lower value is refused.
    #![proptest_config(ProptestConfig::with_cases(common::proptest_cases(256)))]

    /// Murphy (1973): grouping by distinct forecast, REL − RES + UNC = Brier.
    #[test]
    fn murphy_terms_sum_to_brier((p, y) in tied_sample()) {
        let d = decompose::murphy(&p, &y, 0);
        prop_assert!((d.rel - d.res + d.unc - m(MetricId::Brier, &p, &y)).abs() < 1e-12);
        // With 20 equal-width bins each grid value k/20 (k < 20) is alone in
        // bin k, so forecasts are constant within bins and the identity holds.
        let d = decompose::murphy(&p, &y, 20);
        prop_assert!((d.rel - d.res + d.unc - m(MetricId::Brier, &p, &y)).abs() < 1e-12);
    }

    /// Dimitriadis, Gneiting & Jordan (2021, eq. 3): S = MCB − DSC + UNC, with
    /// MCB ≥ 0 and DSC ≥ 0 because PAV is optimal over monotone maps.
    #[test]
    fn corp_terms_sum_to_the_score((p, y) in sample()) {
        let s = MetricSettings::default();
        for (ids, score) in [
            ([MetricId::CorpBrierMcb, MetricId::CorpBrierDsc, MetricId::CorpBrierUnc], MetricId::Brier),
            ([MetricId::CorpLogMcb, MetricId::CorpLogDsc, MetricId::CorpLogUnc], MetricId::LogLoss),
        ] {
            let [mcb, dsc, unc] = ids.map(|i| i.compute(&p, &y, &s));
            prop_assert!((mcb - dsc + unc - score.compute(&p, &y, &s)).abs() < 1e-12);
            prop_assert!(mcb >= -1e-12 && dsc >= -1e-12);
        }
    }

    /// Common practice: AUC depends on the ranking only, so a strictly
    /// increasing transform keeps it and reversing the order gives 1 − AUC.
    #[test]
    fn auc_is_rank_invariant((p, y) in tied_sample()) {
        let a = m(MetricId::Auc, &p, &y);
        prop_assume!(a.is_finite());
        let cubed: Vec<f64> = p.iter().map(|v| v * v * v).collect();
        let sharpened: Vec<f64> = p.iter().map(|&v| sigmoid(3.0 * logit(v) - 1.0)).collect();
        let reversed: Vec<f64> = p.iter().map(|v| 1.0 - v).collect();
        prop_assert!((m(MetricId::Auc, &cubed, &y) - a).abs() < 1e-12);
        prop_assert!((m(MetricId::Auc, &sharpened, &y) - a).abs() < 1e-12);
        prop_assert!((m(MetricId::Auc, &reversed, &y) - (1.0 - a)).abs() < 1e-12);
    }

    /// From the definitions: every ECE variant lies in [0, 1], and smECE_σ is
    /// at most the mean absolute residual (the kernel integrates to 1).
    #[test]
    fn calibration_errors_are_bounded((p, y) in sample()) {
        let mean_abs: f64 = p.iter().zip(&y).map(|(&q, &l)| ((l as u8 as f64) - q).abs()).sum::<f64>() / p.len() as f64;
        for id in [MetricId::EceWidth, MetricId::EceMass, MetricId::SmoothEce, MetricId::Ici, MetricId::MurphyRel] {
            let v = m(id, &p, &y);
            prop_assert!((0.0..=1.0).contains(&v), "{} = {v}", id.as_str());
        }
        for sigma in [0.01, 0.1, 0.5] {
            prop_assert!(smooth_ece::smooth_ece_sigma(&p, &y, sigma) <= mean_abs + 1e-12);
        }
    }

    /// Błasiok & Nakkiran (2023): the reported value is the fixed point
    /// smECE_σ* = σ*.
    #[test]
    fn smooth_ece_is_a_fixed_point((p, y) in sample()) {
        let v = m(MetricId::SmoothEce, &p, &y);
        prop_assume!(v > 1e-3);
        prop_assert!((smooth_ece::smooth_ece_sigma(&p, &y, v) - v).abs() < 2e-6);
    }

    /// From the model logit P(y) = α + β·logit(p): recalibrating p to
    /// σ(a + b·logit p) divides the slope by b; shifting the logit by c moves
    /// the intercept by −c. (Predictions stay inside [0.0004, 0.9996], so the
    /// 1e-6 clip never acts.)
    #[test]
    fn slope_and_intercept_follow_logit_maps(
        (p, y) in sample().prop_map(|(p, y)| (p.iter().map(|v| 0.02 + 0.96 * v).collect::<Vec<f64>>(), y)),
        b in 0.3f64..2.0,
        c in -2.0f64..2.0,
    ) {
        let s = m(MetricId::CalibrationSlope, &p, &y);
        prop_assume!(s.is_finite());
        let mapped: Vec<f64> = p.iter().map(|&v| sigmoid(0.2 + b * logit(v))).collect();
        let s2 = m(MetricId::CalibrationSlope, &mapped, &y);
        prop_assert!((s2 - s / b).abs() < 1e-6 * (1.0 + s.abs()), "{s2} vs {}", s / b);
        let a = m(MetricId::CalibrationIntercept, &p, &y);
        let shifted: Vec<f64> = p.iter().map(|&v| sigmoid(logit(v) + c)).collect();
        let a2 = m(MetricId::CalibrationIntercept, &shifted, &y);
        prop_assert!((a2 - (a - c)).abs() < 1e-9, "{a2} vs {}", a - c);
    }

    /// From the formula: swapping the classes (p → 1 − p, y → ¬y) leaves
    /// Spiegelhalter's Z unchanged.
    #[test]
    fn spiegelhalter_z_is_symmetric((p, y) in sample()) {
        let z = m(MetricId::SpiegelhalterZ, &p, &y);
        let q: Vec<f64> = p.iter().map(|v| 1.0 - v).collect();
        let w: Vec<bool> = y.iter().map(|l| !l).collect();
        prop_assert!((m(MetricId::SpiegelhalterZ, &q, &w) - z).abs() < 1e-9 * (1.0 + z.abs()));
    }
}

/// Murphy (1973): a constant forecast equal to the base rate ȳ has Brier score
/// ȳ(1 − ȳ) = UNC and no reliability or resolution; its log loss is the binary
/// entropy −ȳ ln ȳ − (1 − ȳ) ln(1 − ȳ) (Shannon 1948), and both CORP
/// decompositions give MCB = DSC = 0.
#[test]
fn base_rate_forecast() {
    let y: Vec<bool> = (0..40).map(|i| i % 5 < 2).collect(); // ȳ = 0.4
    let ybar = 0.4f64;
    let p = vec![ybar; y.len()];
    let s = MetricSettings::default();
    let brier = MetricId::Brier.compute(&p, &y, &s);
    assert!((brier - ybar * (1.0 - ybar)).abs() < 1e-15);
    let entropy = -ybar * ybar.ln() - (1.0 - ybar) * (1.0 - ybar).ln();
    assert!((MetricId::LogLoss.compute(&p, &y, &s) - entropy).abs() < 1e-15);
    let d = decompose::murphy(&p, &y, 10);
    assert!(d.rel.abs() < 1e-15 && d.res.abs() < 1e-15);
    assert!((d.unc - brier).abs() < 1e-15);
    for id in [
        MetricId::CorpBrierMcb,
        MetricId::CorpBrierDsc,
        MetricId::CorpLogMcb,
        MetricId::CorpLogDsc,
    ] {
        assert!(id.compute(&p, &y, &s).abs() < 1e-15, "{}", id.as_str());
    }
    assert!((MetricId::CorpLogUnc.compute(&p, &y, &s) - entropy).abs() < 1e-15);
    // A constant forecast has no ranking: AUC ½ (Hanley & McNeil 1982).
    assert_eq!(MetricId::Auc.compute(&p, &y, &s), 0.5);
}

/// With forecasts spread inside bins the Murphy identity does not hold, and
/// the gap is the within-bin terms of Stephenson, Coelho & Jolliffe (2008):
/// Brier − (REL − RES + UNC) = (1/n) Σ_k Σ_{i∈k} (p_i − p̄_k)(p_i + p̄_k − 2y_i).
#[test]
fn murphy_gap_with_spread_bins() {
    let p = [0.02, 0.08, 0.15, 0.55, 0.61, 0.93, 0.99];
    let y = [false, true, false, true, false, true, true];
    let d = decompose::murphy(&p, &y, 2);
    let brier = MetricId::Brier.compute(&p, &y, &MetricSettings::default());
    let mut gap = 0.0;
    for bin in [&[0usize, 1, 2][..], &[3, 4, 5, 6][..]] {
        let pbar = bin.iter().map(|&i| p[i]).sum::<f64>() / bin.len() as f64;
        for &i in bin {
            let t = y[i] as u8 as f64;
            gap += (p[i] - pbar) * (p[i] + pbar - 2.0 * t);
        }
    }
    gap /= p.len() as f64;
    assert!(gap.abs() > 1e-3);
    assert!((brier - (d.rel - d.res + d.unc) - gap).abs() < 1e-14);
}

proptest! {
    // Floor: 256 cases (proptest's default count); `PROPTEST_CASES` may raise
    // it, a lower value is refused.
    #![proptest_config(ProptestConfig::with_cases(common::proptest_cases(256)))]

    /// On one test set net benefit and the cost-weighted loss are tied by
    /// NB(t) = π − L(t)/(2(1 − t)), π the share of positives (both count the
    /// same FN and FP: Vickers & Elkin 2006; Hernández-Orallo et al. 2012);
    /// acting on nobody gives NB = 0 and L = 2(1 − t)π, acting on everybody
    /// NB = π − (1 − π)t/(1 − t) and L = 2t(1 − π).
    #[test]
    fn net_benefit_and_threshold_cost_are_tied(
        (p, y) in tied_sample(),
        t in 0.01f64..0.99,
    ) {
        let s = MetricSettings { decision_threshold: t, ..MetricSettings::default() };
        let pi = y.iter().filter(|&&v| v).count() as f64 / y.len() as f64;
        let nb = MetricId::NetBenefit.compute(&p, &y, &s);
        let l = MetricId::ThresholdCost.compute(&p, &y, &s);
        prop_assert!((nb - (pi - l / (2.0 * (1.0 - t)))).abs() < 1e-9, "{nb} {l} {pi}");
        let none = vec![0.0; p.len()];
        prop_assert_eq!(MetricId::NetBenefit.compute(&none, &y, &s), 0.0);
        prop_assert!((MetricId::ThresholdCost.compute(&none, &y, &s) - 2.0 * (1.0 - t) * pi).abs() < 1e-12);
        let all = vec![1.0; p.len()];
        prop_assert!((MetricId::NetBenefit.compute(&all, &y, &s) - (pi - (1.0 - pi) * t / (1.0 - t))).abs() < 1e-9);
        prop_assert!((MetricId::ThresholdCost.compute(&all, &y, &s) - 2.0 * t * (1.0 - pi)).abs() < 1e-12);
    }

    /// Robustness (common practice): any input, including NaN, infinities and
    /// values outside [0, 1], and unvalidated settings, yields a number or NaN,
    /// never a panic or a hang.
    #[test]
    fn arbitrary_input_never_panics(
        p in proptest::collection::vec(
            prop_oneof![any::<f64>(), Just(f64::NAN), Just(0.0), Just(1.0), -2.0f64..3.0],
            0..40,
        ),
        y in proptest::collection::vec(any::<bool>(), 0..40),
        bins in 0usize..30,
        span in prop_oneof![Just(f64::NAN), -1.0f64..2.0],
        delta in prop_oneof![Just(f64::NAN), -1.0f64..2.0],
        t in prop_oneof![Just(f64::NAN), Just(0.0), Just(1.0), -1.0f64..2.0],
    ) {
        let n = p.len().min(y.len());
        let s = MetricSettings {
            ece_bins: bins,
            murphy_bins: bins,
            ici_span: span,
            ici_delta: delta,
            decision_threshold: t,
            ..MetricSettings::default()
        };
        for &id in MetricId::ALL {
            let _ = id.compute(&p[..n], &y[..n], &s);
            let _ = id.compute(&p, &y, &s);
        }
    }
}

/// `PROPTEST_CASES` below the floor (or not a number) makes a property test
/// fail with the message saying what to set, and a value above it runs: one
/// property, run in a child process of this very test binary.
#[test]
fn proptest_cases_below_the_floor_are_refused() {
    let run =
        |value: &str| common::rerun_with_env("murphy_terms_sum_to_brier", "PROPTEST_CASES", value);
    let (ok, text) = run("5");
    assert!(!ok, "5 cases accepted:\n{text}");
    assert!(
        text.contains("PROPTEST_CASES=5 is below this file's floor of 256 cases"),
        "{text}"
    );
    let (ok, text) = run("many");
    assert!(!ok, "\"many\" accepted:\n{text}");
    assert!(
        text.contains("PROPTEST_CASES=\"many\" is not a whole number of cases"),
        "{text}"
    );
    let (ok, text) = run("300");
    assert!(ok && text.contains("1 passed"), "300 cases:\n{text}");
}
