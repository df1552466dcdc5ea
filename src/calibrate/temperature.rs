//! Temperature scaling, binary case (Guo, Pleiss, Sun & Weinberger 2017, ICML,
//! "On calibration of modern neural networks").
//!
//! Math: p(s) = σ(z / T) with z = log-odds of the score (`log_odds`: the logit of
//! the probability clipped to [ε, 1 − ε], ε = `LOGIT_EPS`, or the margin itself)
//! and one parameter T > 0 fitted by maximum likelihood. There is no intercept:
//! the map keeps p = 1/2 at z = 0 and only sharpens or flattens the scores.
//!
//! Fitting: in β = 1/T the negative log-likelihood
//! F(β) = Σ_i [softplus(β z_i) − t_i β z_i] is convex, with F′(β) = Σ (σ(β z_i) − t_i) z_i
//! and F″(β) = Σ σ(1 − σ) z_i² ≥ 0, so we solve F′(β) = 0 on β ≥ 0 by Newton's method
//! safeguarded by a bracket (bisection, or doubling while no upper end is known).
//! This is the same optimum as minimising over T, since T ↦ 1/T is monotone.
//!
//! Edges:
//! * Sign-separable samples (every positive has z ≥ 0 and every negative z ≤ 0,
//!   some z ≠ 0): F keeps falling as β → ∞ (T → 0), so there is no finite
//!   optimum. As for Platt scaling here, the fit then uses Platt's smoothed targets
//!   t₊ = (N₊ + 1)/(N₊ + 2), t₋ = 1/(N₋ + 2), whose optimum is finite, and notes
//!   `separable`.
//! * No signal (F′(0) = Σ (1/2 − t_i) z_i ≥ 0, e.g. log-odds anti-correlated with the
//!   labels): the constrained optimum is β = 0 (T = ∞), every prediction is 1/2,
//!   and the fit notes `flat`.
//! * All z = 0: every T gives p = 1/2; T = 1 is reported.

use super::platt::smoothed_targets;
use super::{check_sample, log_odds, sigmoid, Calibrator, FitError, Fitted, FittedMap, ScoreKind};

pub struct Temperature {
    pub score_kind: ScoreKind,
}

/// Maximum-likelihood inverse temperature β ≥ 0 for log-odds `z` and targets
/// `t`; returns (β, iterations). The caller handles separation.
///
/// The rows are summed in a canonical (sorted) order, so the result does not
/// depend on the order of the rows, and a gradient within the rounding
/// tolerance at β = 0 counts as stationary: β = 0 is then the optimum.
pub fn fit_inverse_temperature(z: &[f64], t: &[f64]) -> (f64, usize) {
    let mut rows: Vec<(f64, f64)> = z.iter().copied().zip(t.iter().copied()).collect();
    rows.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
    let grad_hess = |beta: f64| -> (f64, f64) {
        let (mut g, mut h) = (0.0, 0.0);
        for &(zi, ti) in &rows {
            let p = sigmoid(beta * zi);
            g += (p - ti) * zi;
            h += p * (1.0 - p) * zi * zi;
        }
        (g, h)
    };
    let zsum: f64 = rows.iter().map(|r| r.0.abs()).sum();
    if zsum == 0.0 {
        return (1.0, 0);
    }
    let tol = 1e-13 * zsum;
    let (g0, _) = grad_hess(0.0);
    if g0 >= -tol {
        return (0.0, 0);
    }
    let (mut lo, mut hi) = (0.0f64, f64::INFINITY);
    let mut beta = 1.0;
    let mut iterations = 0;
    for it in 0..200 {
        iterations = it + 1;
        let (g, h) = grad_hess(beta);
        if g.abs() <= tol {
            break;
        }
        if g < 0.0 {
            lo = beta;
        } else {
            hi = beta;
        }
        let newton = if h > 0.0 { beta - g / h } else { f64::NAN };
        let next = if newton > lo && newton < hi {
            newton
        } else if hi.is_finite() {
            0.5 * (lo + hi)
        } else {
            2.0 * beta
        };
        if (next - beta).abs() <= 1e-15 * beta.max(1e-300) || !next.is_finite() {
            break;
        }
        beta = next;
    }
    (beta, iterations)
}

/// A fitted map σ(β·z).
pub struct TemperatureMap {
    pub inverse_temperature: f64,
    pub score_kind: ScoreKind,
    pub smoothed: bool,
}

impl FittedMap for TemperatureMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            *o = sigmoid(self.inverse_temperature * log_odds(s, self.score_kind));
        }
    }
    /// The saved state plus the temperature T = 1/β (null for T = ∞).
    fn describe(&self) -> serde_json::Value {
        let mut v = serde_json::to_value(self.state()).unwrap_or(serde_json::Value::Null);
        v["temperature"] = if self.inverse_temperature > 0.0 {
            serde_json::json!(1.0 / self.inverse_temperature)
        } else {
            serde_json::Value::Null
        };
        v
    }
    fn state(&self) -> super::state::MapState {
        super::state::MapState::Temperature {
            score_kind: self.score_kind,
            inverse_temperature: self.inverse_temperature,
            smoothed_targets: self.smoothed,
        }
    }
}

impl Calibrator for Temperature {
    fn kind(&self) -> &'static str {
        "temperature"
    }
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError> {
        check_sample(scores, labels)?;
        let z: Vec<f64> = scores
            .iter()
            .map(|&s| log_odds(s, self.score_kind))
            .collect();
        if z.iter().any(|v| !v.is_finite()) {
            return Err(FitError::Failed("temperature: non-finite score".into()));
        }
        let separable = z.iter().any(|&v| v != 0.0)
            && z.iter()
                .zip(labels)
                .all(|(&v, &l)| if l { v >= 0.0 } else { v <= 0.0 });
        let t: Vec<f64> = if separable {
            smoothed_targets(labels)
        } else {
            labels.iter().map(|&l| if l { 1.0 } else { 0.0 }).collect()
        };
        let (beta, _) = fit_inverse_temperature(&z, &t);
        let mut notes = Vec::new();
        if separable {
            notes.push("separable");
        }
        if beta == 0.0 {
            notes.push("flat");
        }
        Ok(Fitted {
            map: Box::new(TemperatureMap {
                inverse_temperature: beta,
                score_kind: self.score_kind,
                smoothed: separable,
            }),
            notes,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Derived by hand: four rows with z = 1 and labels 1, 1, 1, 0:
    /// F′(β) = 4σ(β) − 3 = 0 gives σ(β) = 3/4, i.e. β = ln 3.
    #[test]
    fn closed_form_case() {
        let z = [1.0, 1.0, 1.0, 1.0];
        let t = [1.0, 1.0, 1.0, 0.0];
        let (beta, _) = fit_inverse_temperature(&z, &t);
        assert!((beta - 3f64.ln()).abs() < 1e-12, "{beta}");
    }

    #[test]
    fn anti_correlated_scores_give_flat_map() {
        let f = Temperature {
            score_kind: ScoreKind::Margin,
        }
        .fit(&[-2.0, -1.0, 1.0, 2.0], &[true, true, false, false])
        .unwrap();
        assert_eq!(f.notes, vec!["flat"]);
        let mut out = [0.0; 1];
        f.map.predict(&[5.0], &mut out);
        assert_eq!(out[0], 0.5);
    }

    /// Each score appears once with each label, so F′(0) = 0 exactly and
    /// F′(β) > 0 for β > 0: the optimum is β = 0 whatever the row order, even
    /// though the floating-point sum F′(0) need not round to exactly zero.
    #[test]
    fn balanced_ties_are_flat_in_every_row_order() {
        let s = [0.625, 1.0, 1.0, 0.625, 0.125, 0.125];
        let y = [true, false, true, false, false, true];
        let cal = Temperature {
            score_kind: ScoreKind::Probability,
        };
        // Every row order (Heap's algorithm over the 6! permutations).
        let seen = crate::calibrate::for_each_order(&s, &y, |s2, y2, o| {
            let f = cal.fit(s2, y2).unwrap();
            assert_eq!(f.notes, vec!["flat"], "order {o:?}");
            let b = f.map.describe()["inverse_temperature"].as_f64().unwrap();
            assert_eq!(b, 0.0, "order {o:?}");
        });
        assert_eq!(seen, 720);
    }

    #[test]
    fn sign_separable_sample_is_noted_and_finite() {
        let f = Temperature {
            score_kind: ScoreKind::Margin,
        }
        .fit(&[-2.0, -1.0, 1.0, 2.0], &[false, false, true, true])
        .unwrap();
        assert_eq!(f.notes, vec!["separable"]);
        let b = f.map.describe()["inverse_temperature"].as_f64().unwrap();
        assert!(b.is_finite() && b > 0.0);
    }
}
