//! Maximum-likelihood logistic regression in a few dimensions (an intercept plus
//! up to three features), shared by the methods that are logistic models of
//! transformed scores (Platt scaling, beta calibration and its tied form).
//!
//! Math: with features x_i ∈ ℝ^d and targets t_i ∈ [0, 1], minimise the negative
//! log-likelihood F(β, c) = Σ_i [softplus(z_i) − t_i z_i], z_i = β·x_i + c, where
//! softplus(z) = ln(1 + e^z) is evaluated in the overflow-free form
//! max(z, 0) + ln(1 + e^(−|z|)). F is convex; its gradient is Σ (p_i − t_i)(x_i, 1)
//! and its Hessian Σ w_i (x_i, 1)(x_i, 1)ᵀ with p_i = σ(z_i), w_i = p_i(1 − p_i).
//!
//! Method: damped Newton steps in the Levenberg–Marquardt form (Levenberg 1944,
//! Quarterly of Applied Mathematics 2; Marquardt 1963, SIAM J. Appl. Math. 11):
//! solve (H + μ·diag H) δ = −g by Cholesky, accept the step when F falls by the
//! Armijo fraction 1e-4 of the predicted decrease (or stays flat to rounding at
//! μ = 0, near the optimum), then divide μ by 10 (down to 0, the plain Newton
//! step); on a rejected step or a Hessian that is not numerically positive
//! definite, raise μ (1e-3, then ×10) and solve again. With μ = 0 accepted at
//! every iteration this is Newton's method as in Lin, Lin & Weng (2007, Machine
//! Learning 68, "A note on Platt's probabilistic outputs for support vector
//! machines"). The Hessian is formed about the weighted mean
//! ū = Σ w_i u_i / Σ w_i of the (standardised) features, so the slope block is
//! Σ w_i (u_i − ū)(u_i − ū)ᵀ and no longer shares a row with the intercept. This
//! matters for saturated samples (scores of a naive-Bayes model, nearly all
//! within 1e-10 of 0 or 1): there almost all weight w_i sits on a few rows with
//! nearly equal features, and the uncentred form loses the slope's curvature to
//! cancellation, while the centred sum keeps it. Features are centred and
//! scaled internally for conditioning; coefficients are reported on the raw
//! feature scale.
//!
//! Two safeguards keep the steps useful on saturated samples, where the
//! quadratic model badly misjudges the distance to an optimum whose slope is
//! 1e5–1e10 on the raw score: after a long step the intercept is re-optimised for
//! the new slopes (one-dimensional Newton with halving), and the step is
//! extrapolated (2δ, 4δ, …) while that profiled F keeps falling beyond
//! rounding. The working coordinates are re-centred on the weighted feature
//! mean after a step (the intercept absorbs the shift), so z never comes
//! out of the cancellation of two huge terms (once the shift moves z by more
//! than 1). Intercept profiling and extrapolation are used only for steps
//! longer than one standard deviation per unit of slope. The ridge on the Hessian's
//! diagonal is relative (1e-12 of the diagonal), since the curvature of such
//! a slope can be 1e-20.
//!
//! Stopping: an undamped Newton step below 1e-10, a Newton decrement −g·δ
//! (invariant under affine changes of the features) below 1e-20·F, or below
//! 1e-12·F and no longer shrinking quadratically (the rounding floor of the
//! sums) — each only when a doubled step does not lower F either; or no
//! damping up to μ = 1e10 decreases F at machine precision (the current point
//! is then the optimum to that precision); or 500 iterations.
//!
//! Row order: the rows are summed in a canonical order (sorted by features,
//! then target), so the fitted model does not depend on the order of the
//! calibration rows, not even in the last bit.
//!
//! The optimum is finite unless the sample is (quasi-)separable; callers detect
//! separation beforehand and pass smoothed targets in that case. The design is
//! checked before fitting: a constant feature or features collinear with each
//! other and the intercept on the calibration sample are errors, since then no
//! unique optimum exists.

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
/// columns are collinear with the intercept on the sample.
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
    // Canonical row order. Every sum below is rounded, and the rounding
    // depends on the order of its terms, so a fit of the same rows in another
    // order could land a few ulps away, and a coefficient whose optimum is 0
    // could come out with either sign. Callers act on such signs (beta
    // calibration refits when a slope is negative), so the rows are summed
    // sorted by (features, target): the fitted model is then a function of
    // the set of rows alone, bit for bit, whatever order they came in.
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_unstable_by(|&i, &j| {
        cols.iter()
            .fold(std::cmp::Ordering::Equal, |o, c| {
                o.then_with(|| c[i].total_cmp(&c[j]))
            })
            .then_with(|| t[i].total_cmp(&t[j]))
    });
    let sorted: Vec<Vec<f64>> = cols
        .iter()
        .map(|c| order.iter().map(|&i| c[i]).collect())
        .collect();
    let cols: Vec<&[f64]> = sorted.iter().map(|c| c.as_slice()).collect();
    let t: Vec<f64> = order.iter().map(|&i| t[i]).collect();
    let t = t.as_slice();
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
            return Err(FitError::Failed(format!(
                "logistic fit: {} on the calibration sample (all {n} rows have the value {})",
                if d == 1 {
                    "the feature is constant".to_string()
                } else {
                    format!("feature {} is constant", j + 1)
                },
                c[0]
            )));
        }
        mean[j] = m;
        scale[j] = v.sqrt();
    }
    let k = d + 1; // parameters: d slopes then the intercept
    if d > 1 {
        // Unweighted correlation matrix of the standardised features: a lost
        // pivot means the features are collinear with each other and the
        // intercept on this sample.
        let mut c = [[0.0; P]; P];
        for i in 0..n {
            for a in 0..d {
                for b in 0..=a {
                    c[a][b] +=
                        (cols[a][i] - mean[a]) / scale[a] * (cols[b][i] - mean[b]) / scale[b] / nf;
                }
            }
        }
        for a in 0..d {
            for b in 0..a {
                c[b][a] = c[a][b];
            }
        }
        if cholesky_solve(&c, &[0.0; P], d).is_none() {
            return Err(FitError::Failed(format!(
                "logistic fit: the {d} features are collinear on the calibration sample of {n} rows"
            )));
        }
    }
    // Working coordinates: v_ij = (x_ij − centre_j) / scale_j and
    // z_i = Σ_j w_j v_ij + w_d. The centre starts at the plain mean and moves
    // to the weighted mean Σ p(1 − p) x / Σ p(1 − p) after an accepted
    // step (with the intercept moved to keep z unchanged), so z never comes
    // out of a cancellation of two huge terms.
    let mut centre = mean;
    let features = |centre: &[f64; MAX_FEATURES]| -> Vec<[f64; MAX_FEATURES]> {
        (0..n)
            .map(|i| {
                let mut v = [0.0; MAX_FEATURES];
                for j in 0..d {
                    v[j] = (cols[j][i] - centre[j]) / scale[j];
                }
                v
            })
            .collect()
    };
    // Objective, gradient, and the Hessian about the weighted feature mean
    // (lower triangle of the slope block, the intercept's curvature Σw last);
    // the softplus and the sigmoid share one exponential e^(−|z|). Returns
    // (F, g, H̃, ū) with ū the weighted mean of v.
    type Eval = (f64, [f64; P], [[f64; P]; P], [f64; MAX_FEATURES]);
    let eval = |w: &[f64; P], u: &[[f64; MAX_FEATURES]]| -> Eval {
        let mut f = 0.0;
        let mut g = [0.0; P];
        let mut sw = 0.0;
        let mut swu = [0.0; MAX_FEATURES];
        let mut wts = Vec::with_capacity(n);
        for (ui, &ti) in u.iter().zip(t) {
            let mut z = w[d];
            for j in 0..d {
                z += w[j] * ui[j];
            }
            let e = (-z.abs()).exp();
            f += z.max(0.0) + e.ln_1p() - ti * z;
            // p and q = 1 − p, each without cancellation; then
            // r = p − t = (1 − t)·p − t·q and p(1 − p) = e / (1 + e)².
            let (p, q) = if z >= 0.0 {
                (1.0 / (1.0 + e), e / (1.0 + e))
            } else {
                (e / (1.0 + e), 1.0 / (1.0 + e))
            };
            let r = (1.0 - ti) * p - ti * q;
            let wt = e / ((1.0 + e) * (1.0 + e));
            for a in 0..d {
                g[a] += r * ui[a];
                swu[a] += wt * ui[a];
            }
            g[d] += r;
            sw += wt;
            wts.push(wt);
        }
        let mut ubar = [0.0; MAX_FEATURES];
        if sw > 0.0 {
            for a in 0..d {
                ubar[a] = swu[a] / sw;
            }
        }
        let mut h = [[0.0; P]; P];
        for (ui, &wt) in u.iter().zip(&wts) {
            let mut v = [0.0; MAX_FEATURES];
            for a in 0..d {
                v[a] = ui[a] - ubar[a];
            }
            for a in 0..d {
                for b in 0..=a {
                    h[a][b] += wt * v[a] * v[b];
                }
            }
        }
        h[d][d] = sw;
        (f, g, h, ubar)
    };
    // The intercept re-optimised for fixed slopes (Newton in one dimension,
    // halving a step that does not decrease F): F along the Newton direction
    // is then measured on the floor of the valley that the slopes and the
    // intercept form together, so the extrapolation below follows the valley
    // instead of zig-zagging across it.
    let profile = |mut w: [f64; P], u: &[[f64; MAX_FEATURES]]| -> ([f64; P], Eval) {
        let mut e = eval(&w, u);
        for _ in 0..10 {
            // Stop when the one-dimensional Newton decrement g²/h is down to
            // the rounding of F.
            if !(e.0.is_finite() && e.2[d][d] > 0.0)
                || e.1[d] * e.1[d] / e.2[d][d] <= 1e-15 * e.0.abs().max(1.0)
            {
                break;
            }
            let mut step = -e.1[d] / e.2[d][d];
            let mut moved = false;
            for _ in 0..8 {
                let mut nw = w;
                nw[d] += step;
                let ne = eval(&nw, u);
                if ne.0 < e.0 {
                    (w, e) = (nw, ne);
                    moved = true;
                    break;
                }
                step /= 2.0;
            }
            if !moved {
                break;
            }
        }
        (w, e)
    };
    let tbar = (t.iter().sum::<f64>() / nf).clamp(1e-12, 1.0 - 1e-12);
    let mut w = [0.0; P];
    w[d] = (tbar / (1.0 - tbar)).ln();
    let mut u = features(&centre);
    let (mut f, mut g, mut h, mut ubar) = eval(&w, &u);
    let mut iterations = 0;
    let mut prev_dec = f64::INFINITY;
    let mut mu: f64;
    'outer: for it in 0..500 {
        iterations = it + 1;
        // Every iteration tries the plain Newton step first.
        mu = 0.0;
        // The gradient in the parameters centred at ū (slopes, c + β·ū).
        let mut gc = g;
        for a in 0..d {
            gc[a] = g[a] - ubar[a] * g[d];
        }
        loop {
            let mut hs = h;
            for a in 0..k {
                hs[a][a] += (mu + 1e-12) * h[a][a].max(f64::MIN_POSITIVE);
                for b in 0..a {
                    hs[b][a] = hs[a][b];
                }
            }
            let Some(sc) = cholesky_solve(&hs, &gc, k) else {
                mu = if mu == 0.0 { 1e-3 } else { mu * 10.0 };
                if mu > 1e10 {
                    break 'outer;
                }
                continue;
            };
            // Back to the working parameters: δc = δc̃ − δβ·ū.
            let mut dir = [0.0; P];
            let mut gd = 0.0;
            let mut max_dir: f64 = 0.0;
            dir[d] = -sc[d];
            for a in 0..d {
                dir[a] = -sc[a];
                dir[d] += sc[a] * ubar[a];
            }
            for a in 0..k {
                gd += g[a] * dir[a];
                max_dir = max_dir.max(dir[a].abs());
            }
            // Converged (undamped steps only): the Newton step is negligible,
            // or the Newton decrement −g·δ (invariant under affine changes of
            // the features) is down to 1e-20·F, or it is below 1e-12·F and
            // has stopped shrinking quadratically because the gradient is
            // down to the rounding noise of its sums.
            let dec = -gd;
            let fs = f.abs().max(1.0);
            let at = |mult: f64| {
                let mut nw = w;
                for a in 0..k {
                    nw[a] += mult * dir[a];
                }
                nw
            };
            // A quadratic model can badly misjudge how far the optimum lies
            // (saturated samples), so a small decrement only counts when a
            // doubled step does not lower F beyond rounding either.
            if mu == 0.0
                && (max_dir < 1e-10
                    || dec <= 1e-20 * fs
                    || (dec <= 1e-12 * fs && dec > 0.25 * prev_dec))
                && profile(at(2.0), &u).1 .0 >= f - 1e-12 * fs
            {
                for a in 0..k {
                    w[a] += dir[a];
                }
                break 'outer;
            }
            let nw = at(1.0);
            let (nf_val, ng, nh, nu) = eval(&nw, &u);
            // Armijo decrease; or, for the undamped step, no change beyond the
            // rounding of the objective (near the optimum the objective is
            // flat to machine precision while Newton still gains digits in β).
            let flat = mu == 0.0 && (nf_val - f).abs() <= 1e-12 * fs;
            if nf_val <= f + 1e-4 * gd || flat {
                let mut best = (nw, nf_val, ng, nh, nu);
                let mut expanded = false;
                // Only long steps (more than one standard deviation of a
                // feature per unit of slope) can be far too short; ordinary
                // fits take the plain step.
                if max_dir > 1.0 {
                    let (pw, pe) = profile(nw, &u);
                    if pe.0 < best.1 {
                        best = (pw, pe.0, pe.1, pe.2, pe.3);
                    }
                    // Extrapolate along the step while F keeps falling beyond
                    // rounding (steps 2, 4, 8, … times δ): when the optimum
                    // lies far away on a nearly linear stretch of F (a
                    // saturated sample whose slope is 1e5–1e10 on the raw
                    // score), the quadratic model's steps are far too short.
                    // Near the optimum the doubled step already rises.
                    let mut mult = 2.0;
                    while mult <= 1e18 {
                        let (xw, (xf, xg, xh, xu)) = profile(at(mult), &u);
                        // (A NaN objective also stops the extrapolation.)
                        let lower = xf < best.1 - 1e-12 * best.1.abs().max(1.0);
                        if !lower {
                            break;
                        }
                        best = (xw, xf, xg, xh, xu);
                        expanded = true;
                        mult *= 2.0;
                    }
                }
                prev_dec = if mu == 0.0 && !expanded {
                    dec
                } else {
                    f64::INFINITY
                };
                (w, f, g, h, ubar) = best;
                // Move the centre to the weighted mean when it has moved
                // (z is unchanged: the intercept absorbs the shift).
                if (0..d).any(|j| (w[j] * ubar[j]).abs() > 1.0) {
                    for j in 0..d {
                        centre[j] += ubar[j] * scale[j];
                        w[d] += w[j] * ubar[j];
                    }
                    u = features(&centre);
                    (f, g, h, ubar) = eval(&w, &u);
                }
                break;
            }
            mu = if mu == 0.0 { 1e-3 } else { mu * 10.0 };
            if mu > 1e10 {
                break 'outer; // no further decrease at machine precision
            }
        }
    }
    let mut coef = Vec::with_capacity(d);
    let mut intercept = w[d];
    for j in 0..d {
        coef.push(w[j] / scale[j]);
        intercept -= w[j] * centre[j] / scale[j];
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

    /// Rows are exchangeable in the likelihood, so any row order must give the
    /// same model; the canonical summation order makes it the same to the bit
    /// (every cyclic shift and the reversal of a 40-row sample, two features).
    #[test]
    fn row_order_does_not_change_a_single_bit() {
        use crate::split::splitmix64;
        let unit = |h: u64| ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let n = 40u64;
        let x1: Vec<f64> = (0..n).map(|i| unit(splitmix64(3 * i))).collect();
        let x2: Vec<f64> = (0..n)
            .map(|i| (unit(splitmix64(3 * i + 1)) * 7.0).ln())
            .collect();
        let t: Vec<f64> = (0..n)
            .map(|i| (unit(splitmix64(3 * i + 2)) < x1[i as usize]) as u8 as f64)
            .collect();
        let base = fit_logistic(&[&x1, &x2], &t).unwrap();
        let permuted = |o: &[usize]| {
            let a: Vec<f64> = o.iter().map(|&i| x1[i]).collect();
            let b: Vec<f64> = o.iter().map(|&i| x2[i]).collect();
            let u: Vec<f64> = o.iter().map(|&i| t[i]).collect();
            fit_logistic(&[&a, &b], &u).unwrap()
        };
        let n = n as usize;
        let rev: Vec<usize> = (0..n).rev().collect();
        assert_eq!(permuted(&rev), base);
        for shift in 1..n {
            let o: Vec<usize> = (0..n).map(|i| (i + shift) % n).collect();
            assert_eq!(permuted(&o), base, "shift {shift}");
        }
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
