//! Metrics of the decision at an operating threshold t: a prediction is
//! acted on ("positive") when p ≥ t. Both are means of per-row terms.
//!
//! **Cost-weighted misclassification loss** (`threshold_cost`). A false
//! positive costs t and a false negative 1 − t, so that for a calibrated p the
//! Bayes-optimal decision is exactly "act when p ≥ t":
//!
//! L(t) = (2/n) Σ [(1 − t)·[y = 1, p < t] + t·[y = 0, p ≥ t]].
//!
//! The factor 2 makes t = ½ the error rate. This is the cost-weighted loss of
//! Hernández-Orallo, Flach & Ferri (2012), "A unified view of performance
//! metrics: translating threshold choice into expected classification loss",
//! JMLR 13, with cost proportion t, and 4 times the elementary score S_t
//! (see [`super::elementary`]; the two agree except for p exactly t) of Ehm,
//! Gneiting, Jordan & Krüger (2016), "Of quantiles and expectiles:
//! consistent scoring functions, Choquet representations and forecast
//! rankings", JRSS B 78, whose mixtures over t give every proper
//! scoring rule of a binary event. Lower is better.
//!
//! **Net benefit** (`net_benefit`). Vickers & Elkin (2006), "Decision curve
//! analysis: a novel method for evaluating prediction models", Medical
//! Decision Making 26:
//!
//! NB(t) = TP/n − FP/n · t/(1 − t),
//!
//! with TP and FP counted among the rows with p ≥ t: the true positives less
//! the false positives weighted by the odds of the threshold, in units of true
//! positives per row. Treating nobody gives 0, treating everybody gives
//! π − (1 − π)·t/(1 − t) for prevalence π. Higher is better.
//!
//! Both need 0 < t < 1 (`metric_settings.decision_threshold`, or each of
//! `decision_thresholds` and `cost_ratios` for the ids `threshold_cost@t`
//! and `net_benefit@t` of [`super::MetricId`]; checked in
//! [`super::MetricSettings::validate`]); a threshold outside, or a NaN
//! prediction, gives NaN, never a panic.

/// True when a prediction is acted on at threshold `t`.
fn acts(p: f64, t: f64) -> bool {
    p >= t
}

fn usable(p: f64, t: f64) -> bool {
    !p.is_nan() && t > 0.0 && t < 1.0
}

/// One row's term of [`threshold_cost`]: 2(1 − t) for a missed positive, 2t
/// for a false alarm, 0 otherwise.
pub fn threshold_cost_term(p: f64, y: bool, t: f64) -> f64 {
    if !usable(p, t) {
        return f64::NAN;
    }
    match (y, acts(p, t)) {
        (true, false) => 2.0 * (1.0 - t),
        (false, true) => 2.0 * t,
        _ => 0.0,
    }
}

/// The cost-weighted misclassification loss at threshold `t` (mean of
/// [`threshold_cost_term`]); NaN on an empty or mismatched input.
pub fn threshold_cost(p: &[f64], y: &[bool], t: f64) -> f64 {
    mean_of(p, y, |pi, yi| threshold_cost_term(pi, yi, t))
}

/// One row's term of [`net_benefit`]: 1 for a true positive, −t/(1 − t) for a
/// false positive, 0 for a row not acted on.
pub fn net_benefit_term(p: f64, y: bool, t: f64) -> f64 {
    if !usable(p, t) {
        return f64::NAN;
    }
    match (y, acts(p, t)) {
        (true, true) => 1.0,
        (false, true) => -t / (1.0 - t),
        _ => 0.0,
    }
}

/// The net benefit at threshold `t` (mean of [`net_benefit_term`]); NaN on an
/// empty or mismatched input.
pub fn net_benefit(p: &[f64], y: &[bool], t: f64) -> f64 {
    mean_of(p, y, |pi, yi| net_benefit_term(pi, yi, t))
}

fn mean_of(p: &[f64], y: &[bool], term: impl Fn(f64, bool) -> f64) -> f64 {
    if p.is_empty() || p.len() != y.len() {
        return f64::NAN;
    }
    let s: f64 = p.iter().zip(y).map(|(&pi, &yi)| term(pi, yi)).sum();
    s / p.len() as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Six rows worked by hand at t = 0.3: acted on are p ≥ 0.3, i.e. rows
    /// 0.9 (y = 1, TP), 0.3 (y = 0, FP, on the threshold itself) and 0.5
    /// (y = 0, FP); not acted on are 0.1 (y = 1, FN), 0.29 (y = 0, TN) and
    /// 0.0 (y = 0, TN).
    /// Cost: (2/6)(0.7·1 + 0.3·2) = 2.6/6. Net benefit: 1/6 − (2/6)(0.3/0.7)
    /// = (1 − 6/7)/6 = 1/42.
    #[test]
    fn hand_worked_case() {
        let p = [0.9, 0.3, 0.5, 0.1, 0.29, 0.0];
        let y = [true, false, false, true, false, false];
        let c = threshold_cost(&p, &y, 0.3);
        assert!((c - 2.6 / 6.0).abs() < 1e-15, "{c}");
        let nb = net_benefit(&p, &y, 0.3);
        assert!((nb - 1.0 / 42.0).abs() < 1e-15, "{nb}");
    }

    #[test]
    fn half_gives_the_error_rate() {
        let p = [0.9, 0.6, 0.4, 0.2, 0.5];
        let y = [true, false, true, false, false];
        // Errors: 0.6 (FP), 0.4 (FN), 0.5 (FP on the threshold) → 3/5.
        assert!((threshold_cost(&p, &y, 0.5) - 0.6).abs() < 1e-15);
    }

    #[test]
    fn treat_none_and_treat_all() {
        let y = [true, false, false, true, false];
        // Nobody acted on: no benefit, every positive missed.
        let none = [0.0; 5];
        assert_eq!(net_benefit(&none, &y, 0.2), 0.0);
        assert!((threshold_cost(&none, &y, 0.2) - 2.0 * 0.8 * 2.0 / 5.0).abs() < 1e-15);
        // Everybody acted on: π − (1 − π)·t/(1 − t) with π = 2/5, t = 0.2.
        let all = [1.0; 5];
        let want = 0.4 - 0.6 * 0.25;
        assert!((net_benefit(&all, &y, 0.2) - want).abs() < 1e-15);
        assert!((threshold_cost(&all, &y, 0.2) - 2.0 * 0.2 * 3.0 / 5.0).abs() < 1e-15);
    }

    #[test]
    fn undefined_inputs_give_nan() {
        for t in [0.0, 1.0, -0.1, f64::NAN] {
            assert!(threshold_cost(&[0.5], &[true], t).is_nan());
            assert!(net_benefit(&[0.5], &[true], t).is_nan());
        }
        assert!(threshold_cost(&[f64::NAN], &[true], 0.5).is_nan());
        assert!(net_benefit(&[], &[], 0.5).is_nan());
        assert!(net_benefit(&[0.5, 0.2], &[true], 0.5).is_nan());
    }
}
