//! Elementary scores and the Murphy diagram.
//!
//! Ehm, Gneiting, Jordan & Krüger (2016), "Of quantiles and expectiles:
//! consistent scoring functions, Choquet representations and forecast
//! rankings", JRSS B 78, show that every scoring function consistent for the
//! α-expectile is a mixture over θ of the elementary scores
//!
//! S_θ(x, y) = |1{y < x} − α| · |y − θ| · 1{min(x, y) ≤ θ < max(x, y)}.
//!
//! A probability forecast p of a binary event y ∈ {0, 1} is a forecast of the
//! mean, the expectile at α = ½, so |1{y < x} − α| = ½ and
//!
//! S_θ(p, 1) = ½ (1 − θ) · 1{p ≤ θ}   (the event came although p ≤ θ),
//! S_θ(p, 0) = ½ θ · 1{p > θ}         (it did not come although p > θ).
//!
//! S_θ is the loss of a decision maker who acts when p > θ, with a false alarm
//! costing θ/2 and a missed event (1 − θ)/2: the same decision as
//! `threshold_cost` at t = θ, which is 4·S_θ (the two differ only for a
//! prediction exactly on θ, which `threshold_cost` acts on).
//!
//! The **Murphy diagram** plots the mean elementary score over the test rows,
//! S̄(θ) = (1/n) Σ S_θ(pᵢ, yᵢ), against θ ∈ (0, 1). A forecast whose curve
//! lies below another's everywhere is better under every consistent scoring
//! function (Ehm et al., Corollary 1), so the diagram shows at which
//! operating points one method beats another.
//!
//! **Link to the Brier score.** Ehm et al.'s mixture representation for
//! expectiles (their Theorem 1b and its example) gives the asymmetric
//! piecewise quadratic score |1{y < x} − α|·(x − y)² as 2 ∫ S_θ(x, y) dθ.
//! At α = ½ that is ½(x − y)² = 2 ∫ S_θ dθ, so
//!
//! ∫₀¹ S̄(θ) dθ = Brier / 4.
//!
//! (Check one row: y = 1 gives ∫_p^1 ½(1 − θ) dθ = ¼(1 − p)².) The curve
//! is piecewise linear in θ with a jump at every prediction, so a trapezoid
//! rule on a grid of spacing h is within h/4 of this integral.
//!
//! [`murphy_curve`] evaluates S̄ on any grid in O((n + K) log n) after one
//! sort; [`murphy_grid`] is the fixed grid the report and `plumbline diagnose`
//! use. A NaN prediction, an empty or mismatched input gives a curve of NaN,
//! never a panic.

/// Points of the fixed grid [`murphy_grid`]: θ = 0.01, 0.02, …, 0.99.
pub const MURPHY_GRID_POINTS: usize = 99;

/// The fixed θ grid of the Murphy diagram: θₖ = k/100 for k = 1 … 99.
pub fn murphy_grid() -> Vec<f64> {
    (1..=MURPHY_GRID_POINTS)
        .map(|k| k as f64 / (MURPHY_GRID_POINTS + 1) as f64)
        .collect()
}

/// One row's elementary score S_θ(p, y) (module doc); NaN for a NaN `p`
/// or `theta`.
pub fn elementary_score(p: f64, y: bool, theta: f64) -> f64 {
    if p.is_nan() || theta.is_nan() {
        return f64::NAN;
    }
    match (y, p > theta) {
        (true, false) => 0.5 * (1.0 - theta),
        (false, true) => 0.5 * theta,
        _ => 0.0,
    }
}

/// The mean elementary score S̄(θ) over the rows, at every θ of `thetas`
/// (any order). NaN at every θ when the input is empty, of mismatched
/// lengths or holds a NaN prediction; NaN at a NaN θ.
pub fn murphy_curve(p: &[f64], y: &[bool], thetas: &[f64]) -> Vec<f64> {
    if p.is_empty() || p.len() != y.len() || p.iter().any(|v| v.is_nan()) {
        return vec![f64::NAN; thetas.len()];
    }
    let mut pos: Vec<f64> = Vec::new();
    let mut neg: Vec<f64> = Vec::new();
    for (&pi, &yi) in p.iter().zip(y) {
        if yi {
            pos.push(pi);
        } else {
            neg.push(pi);
        }
    }
    pos.sort_by(f64::total_cmp);
    neg.sort_by(f64::total_cmp);
    let n = p.len() as f64;
    thetas
        .iter()
        .map(|&t| {
            if t.is_nan() {
                return f64::NAN;
            }
            // Positives with p ≤ θ were missed; negatives with p > θ were
            // false alarms.
            let missed = pos.partition_point(|&v| v <= t) as f64;
            let alarms = (neg.len() - neg.partition_point(|&v| v <= t)) as f64;
            0.5 * ((1.0 - t) * missed + t * alarms) / n
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::metrics::{scoring, threshold};

    /// Five rows worked by hand at θ = 0.3: positives 0.9 (acted on), 0.3
    /// (on θ: not acted on, missed) and 0.1 (missed); negatives 0.5 (false
    /// alarm) and 0.2. S̄ = [2·½(0.7) + ½(0.3)]/5 = 0.85/5 = 0.17.
    #[test]
    fn hand_worked_case() {
        let p = [0.9, 0.3, 0.1, 0.5, 0.2];
        let y = [true, true, true, false, false];
        let c = murphy_curve(&p, &y, &[0.3, 0.05, 0.95]);
        assert!((c[0] - 0.17).abs() < 1e-15, "{c:?}");
        // θ = 0.05: no positive missed, both negatives are alarms: ½·0.05·2/5.
        assert!((c[1] - 0.01).abs() < 1e-15, "{c:?}");
        // θ = 0.95: every positive missed, no alarm: ½·0.05·3/5.
        assert!((c[2] - 0.015).abs() < 1e-15, "{c:?}");
        for (i, &t) in [0.3, 0.05, 0.95].iter().enumerate() {
            let mean = p
                .iter()
                .zip(&y)
                .map(|(&pi, &yi)| elementary_score(pi, yi, t))
                .sum::<f64>()
                / 5.0;
            assert!((c[i] - mean).abs() < 1e-15);
        }
    }

    /// A small seeded generator (SplitMix64) so the test needs no crate.
    fn uniform(state: &mut u64) -> f64 {
        *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = *state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64
    }

    /// ∫₀¹ S̄(θ) dθ = Brier/4 (module doc), by the trapezoid rule on a grid
    /// of spacing h = 1/K, within the rule's bound h/4 (one jump of at most
    /// ½ per row, which the rule misplaces by at most h/2).
    #[test]
    fn integral_of_the_curve_is_a_quarter_of_the_brier_score() {
        let mut s = 20_261_207u64;
        for n in [1usize, 7, 200, 3_000] {
            let p: Vec<f64> = (0..n).map(|_| uniform(&mut s)).collect();
            let y: Vec<bool> = p.iter().map(|&pi| uniform(&mut s) < pi * pi).collect();
            let k = 20_000usize;
            let h = 1.0 / k as f64;
            let grid: Vec<f64> = (0..=k).map(|i| i as f64 * h).collect();
            let c = murphy_curve(&p, &y, &grid);
            let integral = h * (c.iter().sum::<f64>() - 0.5 * (c[0] + c[k]));
            let want = scoring::brier(&p, &y) / 4.0;
            assert!(
                (integral - want).abs() <= h / 4.0 + 1e-12,
                "n = {n}: {integral} vs {want}"
            );
            // Half the Brier score (a constant twice too large) is far off.
            assert!(want < h || (integral - 2.0 * want).abs() > h, "n = {n}");
        }
    }

    /// Away from ties, 4·S̄(θ) is `threshold_cost` at t = θ.
    #[test]
    fn four_times_the_curve_is_the_threshold_cost() {
        let mut s = 7u64;
        let p: Vec<f64> = (0..500).map(|_| uniform(&mut s)).collect();
        let y: Vec<bool> = p.iter().map(|&pi| uniform(&mut s) < pi).collect();
        let grid = murphy_grid();
        assert_eq!(grid.len(), MURPHY_GRID_POINTS);
        assert_eq!(grid[0], 0.01);
        assert_eq!(grid[98], 0.99);
        let c = murphy_curve(&p, &y, &grid);
        for (&t, &v) in grid.iter().zip(&c) {
            let cost = threshold::threshold_cost(&p, &y, t);
            assert!((4.0 * v - cost).abs() < 1e-12, "θ = {t}: {v} vs {cost}");
        }
    }

    #[test]
    fn undefined_inputs_give_nan() {
        assert!(murphy_curve(&[], &[], &[0.5])[0].is_nan());
        assert!(murphy_curve(&[0.5, 0.2], &[true], &[0.5])[0].is_nan());
        assert!(murphy_curve(&[f64::NAN], &[true], &[0.5])[0].is_nan());
        let c = murphy_curve(&[0.5], &[true], &[f64::NAN, 0.7]);
        assert!(c[0].is_nan());
        assert!((c[1] - 0.15).abs() < 1e-15);
        assert!(elementary_score(f64::NAN, true, 0.5).is_nan());
    }
}
