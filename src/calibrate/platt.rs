//! Platt scaling: a logistic map of the raw score.
//!
//! Math: p(s) = σ(a·s + b) with σ(z) = 1/(1 + e^(−z)), fitted by maximum
//! likelihood on the calibration sample (Platt 1999, "Probabilistic outputs for
//! support vector machines and comparisons to regularized likelihood methods").
//! We minimise Σ_i [softplus(z_i) − t_i z_i] with z_i = a·s_i + b, computed in the
//! overflow-free form softplus(z) = max(z, 0) + ln(1 + e^(−|z|)), by Newton's method
//! with a backtracking (Armijo) line search and a tiny ridge (1e-12) on the
//! Hessian diagonal (the shared fitter in `logistic.rs`), as in Lin, Lin & Weng (2007, Machine Learning 68, "A note on
//! Platt's probabilistic outputs for support vector machines"). Scores are
//! centred and scaled internally for conditioning; the reported (a, b) are on the
//! raw score scale.
//!
//! Targets: t_i = y_i (unregularised maximum likelihood, the default), or Platt's
//! smoothed targets t₊ = (N₊ + 1)/(N₊ + 2) for positives and t₋ = 1/(N₋ + 2) for
//! negatives (`target_smoothing = true`), a Bayesian prior that keeps the optimum
//! finite.
//!
//! Separation: when every positive score is ≥ every negative score (or ≤), the
//! unregularised likelihood has no maximum: it keeps rising as |a| → ∞. We detect
//! this before fitting. The method then returns the fit with Platt's smoothed
//! targets (whose optimum always exists) and notes `separable` in the unit's
//! status, so the comparison keeps the unit and the report can count how often
//! it happened.

use serde::{Deserialize, Serialize};

use super::logistic::fit_logistic;
use super::state::{finite, sig, smoothed_line, MapState, SavedMap};
use super::{
    check_sample, sigmoid, Calibrator, FitError, Fitted, FittedMap, Method, ParamError, ScoreKind,
    Shape,
};

/// Platt scaling's parameters (and its calibrator).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Platt {
    /// Use Platt's (1999) smoothed targets instead of 0/1 labels.
    #[serde(default)]
    pub target_smoothing: bool,
}

impl Method for Platt {
    fn kind(&self) -> &'static str {
        "platt"
    }
    fn keys(&self) -> &'static [(&'static str, &'static str)] {
        &[("target_smoothing", "true or false")]
    }
    fn shape(&self) -> Shape {
        Shape::Parametric
    }
    fn validate(&self, _score_kind: ScoreKind) -> Result<(), ParamError> {
        Ok(())
    }
    fn calibrator(&self, _score_kind: ScoreKind) -> Box<dyn Calibrator> {
        Box::new(self.clone())
    }
}

/// Fitted parameters of σ(a·s + b).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LogisticFit {
    pub a: f64,
    pub b: f64,
    pub iterations: usize,
}

/// True when a threshold on the score separates the classes (ties allowed at the
/// threshold: quasi-complete separation also has no finite optimum).
pub fn is_separable(x: &[f64], y: &[bool]) -> bool {
    let mut max_neg = f64::NEG_INFINITY;
    let mut min_neg = f64::INFINITY;
    let mut max_pos = f64::NEG_INFINITY;
    let mut min_pos = f64::INFINITY;
    // Branch-free (the labels are unpredictable): each row updates the
    // extremes of its class, and the other class's with a neutral value.
    for (&s, &l) in x.iter().zip(y) {
        let (inf, ninf) = (f64::INFINITY, f64::NEG_INFINITY);
        max_pos = max_pos.max(if l { s } else { ninf });
        min_pos = min_pos.min(if l { s } else { inf });
        max_neg = max_neg.max(if l { ninf } else { s });
        min_neg = min_neg.min(if l { inf } else { s });
    }
    max_neg <= min_pos || max_pos <= min_neg
}

/// Maximum-likelihood fit of σ(a·x + b) to targets `t` in [0, 1] (Newton with
/// backtracking on the stable objective; the one-feature case of
/// [`fit_logistic`]). Fails only when `x` is constant or not finite.
pub fn fit_logistic_1d(x: &[f64], t: &[f64]) -> Result<LogisticFit, FitError> {
    let m = fit_logistic(&[x], t).map_err(|e| match e {
        FitError::Failed(msg) => FitError::Failed(format!("Platt: {msg}")),
        other => other,
    })?;
    Ok(LogisticFit {
        a: m.coef[0],
        b: m.intercept,
        iterations: m.iterations,
    })
}

/// Platt's smoothed targets.
pub fn smoothed_targets(y: &[bool]) -> Vec<f64> {
    let np = y.iter().filter(|&&l| l).count() as f64;
    let nn = y.len() as f64 - np;
    let tp = (np + 1.0) / (np + 2.0);
    let tn = 1.0 / (nn + 2.0);
    y.iter().map(|&l| if l { tp } else { tn }).collect()
}

/// A fitted logistic map σ(a·s + b) of the raw score.
pub struct PlattMap {
    pub fit: LogisticFit,
    pub smoothed: bool,
}

impl FittedMap for PlattMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            *o = sigmoid(self.fit.a * s + self.fit.b);
        }
    }
    fn state(&self) -> MapState {
        MapState::Platt(PlattState {
            a: self.fit.a,
            b: self.fit.b,
            smoothed_targets: self.smoothed,
        })
    }
}

/// The saved Platt map σ(a·s + b).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(
    deny_unknown_fields,
    expecting = "struct variant MapState::Platt with 3 elements"
)]
pub struct PlattState {
    pub a: f64,
    pub b: f64,
    pub smoothed_targets: bool,
}

impl SavedMap for PlattState {
    fn kind(&self) -> &'static str {
        "platt"
    }
    fn summary(&self) -> Vec<String> {
        let mut v = vec![
            "p = σ(a·score + b)".to_string(),
            format!("a = {} (slope)", sig(self.a)),
            format!("b = {} (intercept)", sig(self.b)),
        ];
        v.extend(smoothed_line(self.smoothed_targets));
        v
    }
    fn check(&self) -> Result<(), String> {
        finite("a", self.a)?;
        finite("b", self.b)
    }
    fn restore(&self) -> Box<dyn FittedMap> {
        Box::new(PlattMap {
            fit: LogisticFit {
                a: self.a,
                b: self.b,
                iterations: 0,
            },
            smoothed: self.smoothed_targets,
        })
    }
    fn range_rule(&self) -> &'static str {
        "the parametric map is evaluated as it is (extrapolated)"
    }
}

impl Calibrator for Platt {
    fn kind(&self) -> &'static str {
        "platt"
    }
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError> {
        check_sample(scores, labels)?;
        let separable = !self.target_smoothing && is_separable(scores, labels);
        let smoothed = self.target_smoothing || separable;
        let t: Vec<f64> = if smoothed {
            smoothed_targets(labels)
        } else {
            labels.iter().map(|&l| if l { 1.0 } else { 0.0 }).collect()
        };
        let fit = fit_logistic_1d(scores, &t)?;
        let notes = if separable {
            vec!["separable"]
        } else {
            Vec::new()
        };
        Ok(Fitted {
            map: Box::new(PlattMap { fit, smoothed }),
            notes,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn detects_separation_and_falls_back() {
        let s = [0.1, 0.2, 0.3, 0.6, 0.7];
        let y = [false, false, false, true, true];
        assert!(is_separable(&s, &y));
        let f = Platt {
            target_smoothing: false,
        }
        .fit(&s, &y)
        .unwrap();
        assert_eq!(f.notes, vec!["separable"]);
        let mut out = [0.0; 2];
        f.map.predict(&[0.1, 0.7], &mut out);
        assert!(out[0] < 0.5 && out[1] > 0.5 && out[0] > 0.0 && out[1] < 1.0);
    }

    #[test]
    fn overlapping_sample_is_not_separable() {
        let s = [0.1, 0.2, 0.3, 0.6, 0.7];
        let y = [false, true, false, true, false];
        assert!(!is_separable(&s, &y));
    }
}
