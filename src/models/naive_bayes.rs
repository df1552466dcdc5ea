//! Gaussian naive Bayes.
//!
//! Math: features are taken as independent Gaussians within each class c ∈
//! {0, 1} (Hastie, Tibshirani & Friedman 2009, "The Elements of Statistical
//! Learning", §6.6.3):
//!
//! ln P(x, c) = ln π_c − ½ Σ_j [ln(2π σ²_cj) + (x_j − μ_cj)² / σ²_cj],
//!
//! with π_c the class frequency, μ_cj the class mean and σ²_cj the class
//! variance (divisor n_c) of design column j on the training rows, plus
//! ε = `var_smoothing` · max_j Var_j, the largest population variance of any
//! design column over all training rows (the same stabiliser as scikit-learn's
//! `GaussianNB(var_smoothing)`, documented in its API reference). The score is
//! P(1 | x) = σ(ln P(x, 1) − ln P(x, 0)). Categorical columns enter one-hot
//! ([`super::encode::Coding::Full`]), each indicator as its own Gaussian.
//!
//! The model is famously over-confident on correlated features, which makes it a
//! useful base model for calibration benchmarks (Zadrozny & Elkan 2001,
//! "Obtaining calibrated probability estimates from decision trees and naive
//! Bayesian classifiers", ICML).

use serde_json::json;

use super::encode::{Coding, Design};
use super::{check_values, Model, ModelError};
use crate::calibrate::sigmoid;
use crate::data::Dataset;

#[derive(Debug, Clone)]
pub struct NaiveBayes {
    pub design: Design,
    /// ln π_c for c = 0, 1.
    pub log_prior: [f64; 2],
    /// Class means, `mean[c][j]`.
    pub mean: [Vec<f64>; 2],
    /// Smoothed class variances, `var[c][j]`.
    pub var: [Vec<f64>; 2],
    pub epsilon: f64,
}

pub fn fit(data: &Dataset, rows: &[usize], var_smoothing: f64) -> Result<NaiveBayes, ModelError> {
    check_values(data, rows)?;
    let design = Design::new(data, Coding::Full);
    let p = design.width();
    let x = design.row_major(data, rows);
    let n = rows.len();
    let fail = |reason: String| ModelError::Fit {
        dataset: data.id.clone(),
        model: "naive-bayes",
        reason,
    };
    if p == 0 {
        return Err(fail("the dataset has no feature columns".into()));
    }
    // Overall population variances for ε.
    let mut all_mean = vec![0.0; p];
    let mut counts = [0usize; 2];
    let mut mean = [vec![0.0; p], vec![0.0; p]];
    for (i, &r) in rows.iter().enumerate() {
        let c = data.labels[r] as usize;
        counts[c] += 1;
        for j in 0..p {
            let v = x[i * p + j];
            all_mean[j] += v;
            mean[c][j] += v;
        }
    }
    for j in 0..p {
        all_mean[j] /= n as f64;
        for c in 0..2 {
            mean[c][j] /= counts[c] as f64;
        }
    }
    let mut all_var = vec![0.0; p];
    let mut var = [vec![0.0; p], vec![0.0; p]];
    for (i, &r) in rows.iter().enumerate() {
        let c = data.labels[r] as usize;
        for j in 0..p {
            let v = x[i * p + j];
            all_var[j] += (v - all_mean[j]).powi(2);
            var[c][j] += (v - mean[c][j]).powi(2);
        }
    }
    let max_var = all_var.iter().map(|s| s / n as f64).fold(0.0f64, f64::max);
    let epsilon = var_smoothing * max_var;
    for (c, var_c) in var.iter_mut().enumerate() {
        for (j, v) in var_c.iter_mut().enumerate() {
            *v = *v / counts[c] as f64 + epsilon;
            if v.is_nan() || *v <= 0.0 {
                return Err(fail(format!(
                    "feature `{}` has zero variance in class {} and var_smoothing \
                     adds nothing (all features constant, or var_smoothing = 0)",
                    design.cols[j].name,
                    c == 1
                )));
            }
        }
    }
    let log_prior = [
        (counts[0] as f64 / n as f64).ln(),
        (counts[1] as f64 / n as f64).ln(),
    ];
    Ok(NaiveBayes {
        design,
        log_prior,
        mean,
        var,
        epsilon,
    })
}

impl NaiveBayes {
    /// ln P(x, 1) − ln P(x, 0) on `rows`.
    pub fn log_odds(&self, data: &Dataset, rows: &[usize]) -> Result<Vec<f64>, ModelError> {
        super::check_rows(data, rows)?;
        super::check_width(data, self.design.source_columns)?;
        check_values(data, rows)?;
        let p = self.design.width();
        let x = self.design.row_major(data, rows);
        let two_pi = 2.0 * std::f64::consts::PI;
        Ok((0..rows.len())
            .map(|i| {
                let xi = &x[i * p..(i + 1) * p];
                let jl: Vec<f64> = (0..2)
                    .map(|c| {
                        let terms = xi.iter().zip(&self.mean[c]).zip(&self.var[c]);
                        self.log_prior[c]
                            - terms
                                .map(|((x, m), v)| {
                                    0.5 * ((two_pi * v).ln() + (x - m) * (x - m) / v)
                                })
                                .sum::<f64>()
                    })
                    .collect();
                jl[1] - jl[0]
            })
            .collect())
    }
}

impl Model for NaiveBayes {
    fn score(&self, data: &Dataset, rows: &[usize]) -> Result<Vec<f64>, ModelError> {
        Ok(self
            .log_odds(data, rows)?
            .into_iter()
            .map(sigmoid)
            .collect())
    }

    fn describe(&self) -> serde_json::Value {
        json!({
            "kind": "naive-bayes",
            "prior_true": self.log_prior[1].exp(),
            "epsilon": self.epsilon,
            "features": self.design.cols.iter().enumerate().map(|(j, c)| json!({
                "feature": c.name,
                "mean": [self.mean[0][j], self.mean[1][j]],
                "variance": [self.var[0][j], self.var[1][j]],
            })).collect::<Vec<_>>(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::FeatureKind;

    #[test]
    fn one_feature_posterior_by_hand() {
        // Class 0: x = 0, 2 (mean 1, var 1); class 1: x = 4, 6 (mean 5, var 1);
        // equal priors. At x = 3 the two densities are equal, so P = 1/2; at x = 4,
        // log-odds = −½(1 − 9) = 4 (ε = 1e-9·5, negligible at this tolerance).
        let d = Dataset {
            id: "t".into(),
            names: vec!["x".into()],
            columns: vec![vec![0.0, 2.0, 4.0, 6.0, 3.0]],
            kinds: vec![FeatureKind::Numeric],
            labels: vec![false, false, true, true, false],
        };
        let m = fit(&d, &[0, 1, 2, 3], 1e-9).unwrap();
        let lo = m.log_odds(&d, &[4, 2]).unwrap();
        assert!(lo[0].abs() < 1e-9, "{lo:?}");
        assert!((lo[1] - 4.0).abs() < 1e-7, "{lo:?}");
    }

    #[test]
    fn constant_features_without_smoothing_fail_cleanly() {
        let d = Dataset {
            id: "t".into(),
            names: vec!["x".into()],
            columns: vec![vec![1.0; 4]],
            kinds: vec![FeatureKind::Numeric],
            labels: vec![false, false, true, true],
        };
        assert!(matches!(
            fit(&d, &[0, 1, 2, 3], 1e-9),
            Err(ModelError::Fit { .. })
        ));
    }
}
