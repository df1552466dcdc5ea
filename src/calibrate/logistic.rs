//! Maximum-likelihood logistic regression in a few dimensions (an intercept plus
//! up to three features), shared by the methods that are logistic models of
//! transformed scores (beta calibration and its tied form).
//!
//! Math: with features x_i ∈ ℝ^d and targets t_i ∈ [0, 1], minimise the negative
//! log-likelihood F(β, c) = Σ_i [softplus(z_i) − t_i z_i], z_i = β·x_i + c, where
//! softplus(z) = ln(1 + e^z) is evaluated in the overflow-free form
//! max(z, 0) + ln(1 + e^(−|z|)). F is convex; its gradient is Σ (p_i − t_i)(x_i, 1)
//! and its Hessian Σ p_i(1 − p_i)(x_i, 1)(x_i, 1)ᵀ with p_i = σ(z_i). We take Newton
//! steps (solved by Cholesky with a 1e-12 ridge on the diagonal) with an Armijo
//! backtracking line search, as for the 1-D fit in `platt.rs` (Lin, Lin & Weng 2007,
//! Machine Learning 68). Features are centred and scaled internally for
//! conditioning; coefficients are reported on the raw feature scale.
//!
//! The optimum is finite unless the sample is (quasi-)separable; callers detect
//! separation beforehand and pass smoothed targets in that case.

use super::FitError;

/// Most features supported (plus the intercept).
pub const MAX_FEATURES: usize = 3;
const P: usize = MAX_FEATURES + 1;

/// A fitted logistic model σ(coef·x + intercept).
#[derive(Debug, Clone, PartialEq)]
pub struct LogisticModel {
    /// One coefficient per feature column, on the raw feature scale.
    pub coef: Vec<f64>,
    pub intercept: f64,
    pub iterations: usize,
}

/// Overflow-free ln(1 + e^z).
pub fn softplus(z: f64) -> f64 {
    z.max(0.0) + (-z.abs()).exp().ln_1p()
}

/// Solve the symmetric positive-definite system `h · x = g` (size `k`) by Cholesky.
/// Returns `None` when the matrix is not numerically positive definite.
#[allow(clippy::needless_range_loop)] // index form mirrors the matrix algebra
fn cholesky_solve(h: &[[f64; P]; P], g: &[f64; P], k: usize) -> Option<[f64; P]> {
    let mut l = [[0.0; P]; P];
    for i in 0..k {
        for j in 0..=i {
            let mut s = h[i][j];
            for m in 0..j {
                s -= l[i][m] * l[j][m];
            }
            if i == j {
                // Relative pivot test: a pivot that is lost in rounding means the
                // features are (numerically) collinear.
                if s.is_nan() || s <= 1e-10 * h[i][i] || !s.is_finite() {
                    return None;
                }
                l[i][i] = s.sqrt();
            } else {
                l[i][j] = s / l[j][j];
            }
        }
    }
    let mut y = [0.0; P];
    for i in 0..k {
        let mut s = g[i];
        for m in 0..i {
            s -= l[i][m] * y[m];
        }
        y[i] = s / l[i][i];
    }
    let mut x = [0.0; P];
    for i in (0..k).rev() {
        let mut s = y[i];
        for m in i + 1..k {
            s -= l[m][i] * x[m];
        }
        x[i] = s / l[i][i];
    }
    Some(x)
}

/// Fit σ(coef·x + c) to targets `t` by maximum likelihood. `cols` holds the
/// feature columns (each of length `t.len()`, at most [`MAX_FEATURES`] of them;
/// none gives the intercept-only model). Fails when a column is constant or the
/// columns are collinear with the intercept.
#[allow(clippy::needless_range_loop)] // index form mirrors the matrix algebra
pub fn fit_logistic(cols: &[&[f64]], t: &[f64]) -> Result<LogisticModel, FitError> {
    let d = cols.len();
    let n = t.len();
    if d > MAX_FEATURES {
        return Err(FitError::Failed(format!(
            "logistic fit: {d} features, at most {MAX_FEATURES} supported"
        )));
    }
    if n == 0 {
        return Err(FitError::Empty);
    }
    if cols.iter().any(|c| c.len() != n) {
        return Err(FitError::Failed(
            "logistic fit: feature and target lengths differ".into(),
        ));
    }
    let nf = n as f64;
    // Standardise each column.
    let mut mean = [0.0; MAX_FEATURES];
    let mut scale = [1.0; MAX_FEATURES];
    for (j, c) in cols.iter().enumerate() {
        let m = c.iter().sum::<f64>() / nf;
        let v = c.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / nf;
        if !m.is_finite() || !v.is_finite() {
            return Err(FitError::Failed(
                "logistic fit: non-finite feature values".into(),
            ));
        }
        if v <= 0.0 {
            return Err(FitError::Failed(
                "logistic fit: a feature is constant on the calibration sample".into(),
            ));
        }
        mean[j] = m;
        scale[j] = v.sqrt();
    }
    let k = d + 1; // parameters: d slopes then the intercept
    let mut u: Vec<[f64; MAX_FEATURES]> = vec![[0.0; MAX_FEATURES]; n];
    for (j, c) in cols.iter().enumerate() {
        for (ui, &x) in u.iter_mut().zip(c.iter()) {
            ui[j] = (x - mean[j]) / scale[j];
        }
    }
    let lin = |w: &[f64; P], ui: &[f64; MAX_FEATURES]| -> f64 {
        let mut z = w[d];
        for j in 0..d {
            z += w[j] * ui[j];
        }
        z
    };
    // Objective, gradient and Hessian (lower triangle) in one pass; the
    // softplus and the sigmoid share one exponential e^(−|z|).
    let eval = |w: &[f64; P]| -> (f64, [f64; P], [[f64; P]; P]) {
        let mut f = 0.0;
        let mut g = [0.0; P];
        let mut h = [[0.0; P]; P];
        for (ui, &ti) in u.iter().zip(t) {
            let z = lin(w, ui);
            let e = (-z.abs()).exp();
            f += z.max(0.0) + e.ln_1p() - ti * z;
            let p = if z >= 0.0 {
                1.0 / (1.0 + e)
            } else {
                e / (1.0 + e)
            };
            let r = p - ti;
            let wt = p * (1.0 - p);
            let mut x = [1.0; P];
            x[..d].copy_from_slice(&ui[..d]);
            for a in 0..k {
                g[a] += r * x[a];
                for b in 0..=a {
                    h[a][b] += wt * x[a] * x[b];
                }
            }
        }
        (f, g, h)
    };
    let tbar = (t.iter().sum::<f64>() / nf).clamp(1e-12, 1.0 - 1e-12);
    let mut w = [0.0; P];
    w[d] = (tbar / (1.0 - tbar)).ln();
    let (mut f, mut g, mut h) = eval(&w);
    let mut iterations = 0;
    let mut prev_dir = f64::INFINITY;
    for it in 0..200 {
        iterations = it + 1;
        if g[..k].iter().all(|ga| ga.abs() < 1e-11 * nf) {
            break;
        }
        let mut hs = h;
        for a in 0..k {
            hs[a][a] += 1e-12;
            for b in 0..a {
                hs[b][a] = hs[a][b];
            }
        }
        let step_dir = match cholesky_solve(&hs, &g, k) {
            Some(s) => s,
            None => {
                return Err(FitError::Failed(
                    "logistic fit: singular Hessian (scores nearly constant or collinear, or fitted probabilities saturated at 0 or 1)".into(),
                ))
            }
        };
        let mut dir = [0.0; P];
        let mut gd = 0.0;
        let mut max_dir: f64 = 0.0;
        for a in 0..k {
            dir[a] = -step_dir[a];
            gd += g[a] * dir[a];
            max_dir = max_dir.max(dir[a].abs());
        }
        // Converged: the Newton step (standardised scale) is negligible, or it
        // has stopped shrinking quadratically because the gradient is down to
        // the rounding noise of its sums.
        if max_dir < 1e-10 || (max_dir < 1e-6 && max_dir > 0.5 * prev_dir) {
            for a in 0..k {
                w[a] += dir[a];
            }
            break;
        }
        prev_dir = max_dir;
        let mut step = 1.0;
        let mut accepted = false;
        while step >= 1e-10 {
            let mut nw = w;
            for a in 0..k {
                nw[a] += step * dir[a];
            }
            let (nf_val, ng, nh) = eval(&nw);
            // Armijo decrease; or, for the full Newton step, no change beyond
            // the rounding of the objective (near the optimum the objective is
            // flat to machine precision while Newton still gains digits in β).
            let flat = step == 1.0 && (nf_val - f).abs() <= 1e-12 * f.abs().max(1.0);
            if nf_val <= f + 1e-4 * step * gd || flat {
                w = nw;
                f = nf_val;
                g = ng;
                h = nh;
                accepted = true;
                break;
            }
            step /= 2.0;
        }
        if !accepted {
            break; // no further decrease at machine precision
        }
    }
    let mut coef = Vec::with_capacity(d);
    let mut intercept = w[d];
    for j in 0..d {
        coef.push(w[j] / scale[j]);
        intercept -= w[j] * mean[j] / scale[j];
    }
    if !(intercept.is_finite() && coef.iter().all(|c| c.is_finite())) {
        return Err(FitError::Failed(
            "logistic fit did not converge to finite values".into(),
        ));
    }
    Ok(LogisticModel {
        coef,
        intercept,
        iterations,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::calibrate::platt::fit_logistic_1d;
    use crate::calibrate::sigmoid;

    /// At the maximum-likelihood optimum the score equations hold:
    /// Σ (p_i − t_i) = 0 and Σ (p_i − t_i) x_ij = 0 for every feature (first-order
    /// optimality of a convex objective; common practice).
    #[test]
    fn score_equations_hold_at_optimum() {
        let x1 = [0.1, 0.4, 0.35, 0.8, 0.6, 0.2, 0.9, 0.55, 0.3];
        let x2 = [1.0, -0.5, 0.2, 0.3, -1.2, 0.8, 0.1, 0.0, 0.4];
        let t = [0.0, 0.0, 1.0, 1.0, 0.0, 0.0, 1.0, 1.0, 0.0];
        let m = fit_logistic(&[&x1, &x2], &t).unwrap();
        let (mut g0, mut g1, mut g2) = (0.0, 0.0, 0.0);
        for i in 0..t.len() {
            let r = sigmoid(m.coef[0] * x1[i] + m.coef[1] * x2[i] + m.intercept) - t[i];
            g0 += r;
            g1 += r * x1[i];
            g2 += r * x2[i];
        }
        assert!(
            g0.abs() < 1e-10 && g1.abs() < 1e-10 && g2.abs() < 1e-10,
            "{g0} {g1} {g2}"
        );
        // The one-feature wrapper used by Platt scaling reports the same model.
        let one = fit_logistic(&[&x1], &t).unwrap();
        let p = fit_logistic_1d(&x1, &t).unwrap();
        assert_eq!((one.coef[0], one.intercept), (p.a, p.b));
    }

    /// Intercept-only: the optimum is the logit of the mean target (score
    /// equation Σ (p − t) = 0; common practice).
    #[test]
    fn intercept_only_is_logit_of_mean() {
        let t = [1.0, 0.0, 0.0, 1.0, 0.0];
        let m = fit_logistic(&[], &t).unwrap();
        assert!((m.intercept - (0.4f64 / 0.6).ln()).abs() < 1e-12);
    }

    #[test]
    fn constant_feature_is_an_error_not_a_panic() {
        let x = [1.0; 4];
        let t = [0.0, 1.0, 0.0, 1.0];
        assert!(matches!(fit_logistic(&[&x], &t), Err(FitError::Failed(_))));
    }

    #[test]
    fn collinear_features_are_an_error() {
        let x = [0.1, 0.5, 0.2, 0.9, 0.7];
        let x2: Vec<f64> = x.iter().map(|v| 2.0 * v + 1.0).collect();
        let t = [0.0, 1.0, 0.0, 1.0, 0.0];
        assert!(fit_logistic(&[&x, &x2], &t).is_err());
    }
}
