//! Logistic regression with an L2 (ridge) penalty.
//!
//! Math: P(y = 1 | x) = σ(b + wᵀx̃), where x̃ is the standardised, one-hot
//! encoded feature vector (see [`super::encode`]). We minimise
//!
//! f(b, w) = Σ_i [softplus(z_i) − y_i z_i] + (λ/2)·‖w‖²,  z_i = b + wᵀx̃_i,
//!
//! the negative log-likelihood plus a ridge penalty that leaves the intercept
//! free (le Cessie & van Houwelingen 1992, "Ridge estimators in logistic
//! regression", Applied Statistics 41). This is scikit-learn's
//! `LogisticRegression` objective C·Σ loss + ½‖w‖² divided by C, so λ = 1/C; λ = 0
//! is plain maximum likelihood. The minimiser is found by Newton's method —
//! iteratively reweighted least squares (McCullagh & Nelder 1989, "Generalized
//! Linear Models", §4.4): gradient Xᵀ(p − y) + λw, Hessian XᵀWX + λI with
//! W = diag(p_i(1 − p_i)), the Newton system solved by Cholesky, with an
//! Armijo backtracking line search. The objective is strictly convex for λ > 0;
//! for λ = 0 and separated classes it has no minimiser, which we report as a fit
//! failure rather than return huge coefficients.

use serde_json::json;

use super::encode::{Coding, Design, Standardizer};
use super::{check_values, Model, ModelError};
use crate::calibrate::sigmoid;
use crate::data::Dataset;

/// A fitted logistic regression (coefficients on the standardised scale).
#[derive(Debug, Clone)]
pub struct Logistic {
    pub design: Design,
    pub scaler: Standardizer,
    pub intercept: f64,
    pub coef: Vec<f64>,
    pub iterations: usize,
}

fn softplus(z: f64) -> f64 {
    z.max(0.0) + (-z.abs()).exp().ln_1p()
}

/// In-place Cholesky factorisation of a symmetric positive-definite matrix
/// (row-major m × m, lower triangle used). Returns false if not positive definite.
fn cholesky(a: &mut [f64], m: usize) -> bool {
    for j in 0..m {
        let mut d = a[j * m + j];
        for k in 0..j {
            d -= a[j * m + k] * a[j * m + k];
        }
        if d.is_nan() || d <= 0.0 || d.is_infinite() {
            return false;
        }
        let d = d.sqrt();
        a[j * m + j] = d;
        for i in j + 1..m {
            let mut s = a[i * m + j];
            for k in 0..j {
                s -= a[i * m + k] * a[j * m + k];
            }
            a[i * m + j] = s / d;
        }
    }
    true
}

/// Solve L Lᵀ x = b given the factor from [`cholesky`].
fn cholesky_solve(l: &[f64], m: usize, b: &mut [f64]) {
    for i in 0..m {
        let mut s = b[i];
        for k in 0..i {
            s -= l[i * m + k] * b[k];
        }
        b[i] = s / l[i * m + i];
    }
    for i in (0..m).rev() {
        let mut s = b[i];
        for k in i + 1..m {
            s -= l[k * m + i] * b[k];
        }
        b[i] = s / l[i * m + i];
    }
}

/// Minimise the penalised objective for a row-major design `x` (n × p) and
/// labels `y`. Parameters are returned as (intercept, w, iterations).
pub fn newton(
    x: &[f64],
    p: usize,
    y: &[bool],
    l2: f64,
    max_iterations: usize,
) -> Result<(f64, Vec<f64>, usize), String> {
    let n = y.len();
    let m = p + 1; // parameters: w_0..w_{p-1}, then b
    let objective = |beta: &[f64]| -> f64 {
        let mut f = 0.0;
        for i in 0..n {
            let xi = &x[i * p..(i + 1) * p];
            let z = beta[p] + xi.iter().zip(beta).map(|(a, b)| a * b).sum::<f64>();
            f += softplus(z) - if y[i] { z } else { 0.0 };
        }
        f + 0.5 * l2 * beta[..p].iter().map(|w| w * w).sum::<f64>()
    };
    let pos = y.iter().filter(|&&v| v).count() as f64;
    let ybar = pos / n as f64;
    let mut beta = vec![0.0; m];
    beta[p] = (ybar / (1.0 - ybar)).ln();
    let mut f = objective(&beta);
    let mut grad = vec![0.0; m];
    let mut hess = vec![0.0; m * m];
    for it in 0..max_iterations {
        grad.iter_mut().for_each(|g| *g = 0.0);
        hess.iter_mut().for_each(|h| *h = 0.0);
        for i in 0..n {
            let xi = &x[i * p..(i + 1) * p];
            let z = beta[p] + xi.iter().zip(&beta).map(|(a, b)| a * b).sum::<f64>();
            let pi = sigmoid(z);
            let r = pi - if y[i] { 1.0 } else { 0.0 };
            let w = pi * (1.0 - pi);
            for a in 0..m {
                let xa = if a < p { xi[a] } else { 1.0 };
                grad[a] += r * xa;
                let wa = w * xa;
                if wa == 0.0 {
                    continue;
                }
                let row = &mut hess[a * m..a * m + a + 1];
                for (bidx, h) in row.iter_mut().enumerate() {
                    let xb = if bidx < p { xi[bidx] } else { 1.0 };
                    *h += wa * xb;
                }
            }
        }
        for j in 0..p {
            grad[j] += l2 * beta[j];
            hess[j * m + j] += l2;
        }
        let gmax = grad.iter().fold(0.0f64, |a, g| a.max(g.abs()));
        if !cholesky(&mut hess, m) {
            return Err(if l2 == 0.0 {
                "the Hessian became singular: separated classes (no maximum-likelihood \
                 fit; use l2 > 0) or collinear features"
                    .into()
            } else {
                "the Hessian is not positive definite".into()
            });
        }
        let mut step: Vec<f64> = grad.iter().map(|g| -g).collect();
        cholesky_solve(&hess, m, &mut step);
        // Converged when the Newton step is negligible (quadratic convergence
        // near a finite optimum). Under separation the step stays of order one
        // while the gradient vanishes, so a gradient test alone would accept a
        // diverging fit.
        let smax = step.iter().fold(0.0f64, |a, s| a.max(s.abs()));
        let bmax = beta.iter().fold(0.0f64, |a, b| a.max(b.abs()));
        if smax <= 1e-10 * (1.0 + bmax) {
            for (b, s) in beta.iter_mut().zip(&step) {
                *b += s;
            }
            return Ok((beta[p], beta[..p].to_vec(), it + 1));
        }
        let slope: f64 = grad.iter().zip(&step).map(|(g, s)| g * s).sum();
        // When the predicted decrease (half the Newton decrement −slope) is
        // below the objective's rounding, no line search can make progress:
        // accept the point if the step is small (precision-limited optimum of an
        // ill-conditioned problem), else report the stall.
        let at_precision = -slope <= 1e-15 * (1.0 + f.abs());
        let mut accepted = false;
        if !at_precision {
            let mut t = 1.0;
            while t >= 1e-12 {
                let trial: Vec<f64> = beta.iter().zip(&step).map(|(b, s)| b + t * s).collect();
                let ft = objective(&trial);
                if ft < f && ft <= f + 1e-4 * t * slope {
                    beta = trial;
                    f = ft;
                    accepted = true;
                    break;
                }
                t /= 2.0;
            }
        }
        if !accepted {
            if smax <= 1e-6 * (1.0 + bmax) {
                for (b, s) in beta.iter_mut().zip(&step) {
                    *b += s;
                }
                return Ok((beta[p], beta[..p].to_vec(), it + 1));
            }
            return Err(format!(
                "no further decrease possible (largest gradient component {gmax:.3e}, \
                 Newton step {smax:.3e}){}",
                if l2 == 0.0 {
                    "; separated classes have no maximum-likelihood fit, use l2 > 0"
                } else {
                    ""
                }
            ));
        }
        if beta.iter().any(|b| !b.is_finite()) {
            return Err("coefficients became non-finite".into());
        }
    }
    Err(format!(
        "no convergence in {max_iterations} Newton iterations{}",
        if l2 == 0.0 {
            " (separated classes have no maximum-likelihood fit; use l2 > 0)"
        } else {
            ""
        }
    ))
}

/// Fit logistic regression on `rows`.
pub fn fit(
    data: &Dataset,
    rows: &[usize],
    l2: f64,
    max_iterations: usize,
) -> Result<Logistic, ModelError> {
    check_values(data, rows)?;
    let design = Design::new(data, Coding::Reference);
    let p = design.width();
    let mut x = design.row_major(data, rows);
    let scaler = Standardizer::fit(&x, p);
    scaler.apply(&mut x);
    // Columns constant on the training rows carry no information: they are
    // left out of the fit and keep weight 0.
    let active: Vec<usize> = (0..p).filter(|&j| scaler.sd[j] > 0.0).collect();
    let q = active.len();
    let xa: Vec<f64> = if q == p {
        x
    } else {
        let n = rows.len();
        let mut xa = Vec::with_capacity(n * q);
        for i in 0..n {
            xa.extend(active.iter().map(|&j| x[i * p + j]));
        }
        xa
    };
    let y: Vec<bool> = rows.iter().map(|&r| data.labels[r]).collect();
    let (intercept, wa, iterations) =
        newton(&xa, q, &y, l2, max_iterations).map_err(|reason| ModelError::Fit {
            dataset: data.id.clone(),
            model: "logistic",
            reason,
        })?;
    let mut coef = vec![0.0; p];
    for (k, &j) in active.iter().enumerate() {
        coef[j] = wa[k];
    }
    Ok(Logistic {
        design,
        scaler,
        intercept,
        coef,
        iterations,
    })
}

impl Logistic {
    /// Linear predictors b + wᵀx̃ on `rows`.
    pub fn margins(&self, data: &Dataset, rows: &[usize]) -> Result<Vec<f64>, ModelError> {
        super::check_rows(data, rows)?;
        super::check_width(data, self.design.source_columns)?;
        check_values(data, rows)?;
        let p = self.design.width();
        let mut x = self.design.row_major(data, rows);
        self.scaler.apply(&mut x);
        Ok((0..rows.len())
            .map(|i| {
                self.intercept
                    + x[i * p..(i + 1) * p]
                        .iter()
                        .zip(&self.coef)
                        .map(|(a, b)| a * b)
                        .sum::<f64>()
            })
            .collect())
    }
}

impl Model for Logistic {
    fn score(&self, data: &Dataset, rows: &[usize]) -> Result<Vec<f64>, ModelError> {
        Ok(self.margins(data, rows)?.into_iter().map(sigmoid).collect())
    }

    fn describe(&self) -> serde_json::Value {
        json!({
            "kind": "logistic",
            "scale": "standardised features",
            "intercept": self.intercept,
            "coefficients": self.design.cols.iter().zip(&self.coef)
                .map(|(c, w)| json!({"feature": c.name, "weight": w}))
                .collect::<Vec<_>>(),
            "iterations": self.iterations,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cholesky_solves_a_known_system() {
        // [[4, 2], [2, 3]] x = [2, 1] has x = [0.5, 0] (by hand).
        let mut a = vec![4.0, 0.0, 2.0, 3.0];
        assert!(cholesky(&mut a, 2));
        let mut b = vec![2.0, 1.0];
        cholesky_solve(&a, 2, &mut b);
        assert!((b[0] - 0.5).abs() < 1e-15 && b[1].abs() < 1e-15, "{b:?}");
    }

    #[test]
    fn gradient_vanishes_at_the_fit() {
        // First-order optimality of the penalised objective (definition).
        let d = crate::models::testdata::two_gaussians(400, 4, 3);
        let rows: Vec<usize> = (0..d.rows()).collect();
        let m = fit(&d, &rows, 2.5, 100).unwrap();
        let z = m.margins(&d, &rows).unwrap();
        let p = m.design.width();
        let mut x = m.design.row_major(&d, &rows);
        m.scaler.apply(&mut x);
        let mut g = vec![0.0; p + 1];
        for (i, &r) in rows.iter().enumerate() {
            let res = sigmoid(z[i]) - if d.labels[r] { 1.0 } else { 0.0 };
            for j in 0..p {
                g[j] += res * x[i * p + j];
            }
            g[p] += res;
        }
        for (gj, w) in g.iter_mut().zip(&m.coef) {
            *gj += 2.5 * w;
        }
        assert!(g.iter().all(|v| v.abs() < 1e-6), "{g:?}");
    }

    #[test]
    fn standardisation_uses_training_rows_only() {
        // Changing feature values of rows outside the training set must not
        // change the fitted coefficients.
        let d = crate::models::testdata::two_gaussians(300, 3, 9);
        let train: Vec<usize> = (0..200).collect();
        let a = fit(&d, &train, 1.0, 100).unwrap();
        let mut e = d.clone();
        for v in &mut e.columns[0][200..] {
            *v = *v * 100.0 + 50.0;
        }
        let b = fit(&e, &train, 1.0, 100).unwrap();
        assert_eq!(a.coef, b.coef);
        assert_eq!(a.scaler, b.scaler);
        // ... while the training rows' statistics are what the scaler holds.
        let x0: Vec<f64> = train.iter().map(|&r| d.columns[0][r]).collect();
        let mean = x0.iter().sum::<f64>() / 200.0;
        assert!((a.scaler.mean[0] - mean).abs() < 1e-12);
    }

    #[test]
    fn separated_classes_without_penalty_fail_cleanly() {
        let d = Dataset {
            id: "sep".into(),
            names: vec!["x".into()],
            columns: vec![vec![0.0, 1.0, 2.0, 3.0, 4.0, 5.0]],
            kinds: vec![crate::data::FeatureKind::Numeric],
            labels: vec![false, false, false, true, true, true],
        };
        let rows: Vec<usize> = (0..6).collect();
        let e = fit(&d, &rows, 0.0, 100).unwrap_err();
        assert!(matches!(e, ModelError::Fit { .. }), "{e}");
        // With a penalty the optimum exists.
        assert!(fit(&d, &rows, 1.0, 100).is_ok());
    }
}
