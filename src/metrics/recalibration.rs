//! Logistic recalibration of test predictions: calibration slope and
//! calibration intercept.
//!
//! Both regress the test labels on the logit of the prediction, x_i =
//! logit(p_i), with p clipped to [c, 1 − c] by the suite's `log_loss_clip` c
//! so that predictions of exactly 0 or 1 stay finite.
//!
//! Calibration slope (Cox 1958, Biometrika 45, "Two further applications of a
//! model for binary regression"): the maximum-likelihood β of
//! logit P(y = 1) = α + β·x. β = 1 is ideal; β < 1 means predictions are too
//! extreme, β > 1 too moderate. Fitted by Newton's method on standardised
//! logits (mean 0, s.d. 1; β is scaled back), starting from β = 1, α = 0:
//! a step is halved until the
//! negative log-likelihood decreases, or, once the decrease is below rounding
//! (1e-13 relative), until the gradient shrinks; it stops when both score
//! equations hold to 1e-13·n.
//!
//! Calibration intercept, "calibration-in-the-large" (Steyerberg et al. 2010,
//! Epidemiology 21, "Assessing the performance of prediction models: a framework
//! for traditional and novel measures"; Steyerberg 2019, "Clinical Prediction
//! Models", 2nd ed.): the maximum-likelihood α of logit P(y = 1) = α + x, i.e.
//! with the slope fixed at 1 (x enters as an offset). This is NOT the α of the
//! slope fit above. α = 0 is ideal; α > 0 means predictions are too low on
//! average. Fitted by a 1-D Newton iteration on the score equation
//! Σ σ(α + x_i) = Σ y_i (its left side increases with α), halving a step until
//! the residual of the equation shrinks; it stops when that residual is below
//! 1e-13·n.
//!
//! Undefined (NaN): with a single class (no finite maximum), for the slope also
//! when the logits are constant or separate the classes (β → ±∞).

use crate::calibrate::platt::is_separable;
use crate::calibrate::sigmoid;

fn logits(p: &[f64], clip: f64) -> Vec<f64> {
    p.iter()
        .map(|&v| {
            let q = v.clamp(clip, 1.0 - clip);
            (q / (1.0 - q)).ln()
        })
        .collect()
}

fn one_class(y: &[bool]) -> bool {
    y.iter().all(|&l| l) || y.iter().all(|&l| !l)
}

/// Calibration slope β of logit P(y) = α + β·logit(p).
pub fn calibration_slope(p: &[f64], y: &[bool], clip: f64) -> f64 {
    let n = p.len().min(y.len());
    if n == 0 || one_class(&y[..n]) {
        return f64::NAN;
    }
    let x = logits(&p[..n], clip);
    if is_separable(&x, &y[..n]) {
        return f64::NAN;
    }
    slope_newton(&x, &y[..n]).unwrap_or(f64::NAN)
}

/// Maximum-likelihood slope of logit P(y) = α + β·x; None for constant x or
/// no convergence to finite values.
fn slope_newton(x: &[f64], y: &[bool]) -> Option<f64> {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let sd = (x.iter().map(|v| (v - mean) * (v - mean)).sum::<f64>() / n).sqrt();
    if !(sd > 0.0 && sd.is_finite()) {
        return None;
    }
    let u: Vec<f64> = x.iter().map(|v| (v - mean) / sd).collect();
    // Objective, gradient (a: slope on u, b: intercept) and Hessian.
    let eval = |a: f64, b: f64| -> (f64, [f64; 2], [f64; 3]) {
        let (mut f, mut g, mut h) = (0.0, [0.0; 2], [0.0; 3]);
        for (&ui, &yi) in u.iter().zip(y) {
            let z = a * ui + b;
            let t = if yi { 1.0 } else { 0.0 };
            // softplus(z) and σ(z) from one exponential.
            let e = (-z.abs()).exp();
            f += z.max(0.0) + e.ln_1p() - t * z;
            let q = if z >= 0.0 {
                1.0 / (1.0 + e)
            } else {
                e / (1.0 + e)
            };
            let r = q - t;
            let w = q * (1.0 - q);
            g[0] += r * ui;
            g[1] += r;
            h[0] += w * ui * ui;
            h[1] += w * ui;
            h[2] += w;
        }
        (f, g, h)
    };
    // Start at the identity recalibration β = 1, α = 0: a = sd, b = mean.
    let (mut a, mut b) = (sd, mean);
    let (mut f, mut g, mut h) = eval(a, b);
    let norm = |g: &[f64; 2]| g[0].abs().max(g[1].abs());
    for _ in 0..100 {
        if norm(&g) <= 1e-13 * n {
            break;
        }
        let det = h[0] * h[2] - h[1] * h[1];
        if det.is_nan() || det <= 0.0 {
            return None;
        }
        let da = -(h[2] * g[0] - h[1] * g[1]) / det;
        let db = -(h[0] * g[1] - h[1] * g[0]) / det;
        let mut step = 1.0;
        let mut moved = false;
        while step >= 1e-12 {
            let (na, nb) = (a + step * da, b + step * db);
            let (nf, ng, nh) = eval(na, nb);
            let flat = (nf - f).abs() <= 1e-13 * f.abs().max(1.0);
            if nf < f && !flat || flat && norm(&ng) < norm(&g) {
                (a, b, f, g, h) = (na, nb, nf, ng, nh);
                moved = true;
                break;
            }
            step /= 2.0;
        }
        if !moved {
            break;
        }
    }
    let beta = a / sd;
    beta.is_finite().then_some(beta)
}

/// Calibration intercept α of logit P(y) = α + logit(p) (slope fixed at 1).
pub fn calibration_intercept(p: &[f64], y: &[bool], clip: f64) -> f64 {
    let n = p.len().min(y.len());
    if n == 0 || one_class(&y[..n]) {
        return f64::NAN;
    }
    let x = logits(&p[..n], clip);
    let y = &y[..n];
    let ysum = y.iter().filter(|&&l| l).count() as f64;
    // Gradient and curvature of the negative log-likelihood at α.
    let grad = |a: f64| -> (f64, f64) {
        let (mut s, mut h) = (0.0, 0.0);
        for &xi in &x {
            let q = sigmoid(a + xi);
            s += q;
            h += q * (1.0 - q);
        }
        (s - ysum, h)
    };
    let mut a = 0.0;
    let (mut g, mut h) = grad(a);
    for _ in 0..200 {
        if g.abs() <= 1e-13 * n as f64 {
            break;
        }
        if h.is_nan() || h <= 0.0 {
            return f64::NAN;
        }
        let d = -g / h;
        let mut step = 1.0;
        let mut moved = false;
        while step >= 1e-12 {
            let na = a + step * d;
            let (ng, nh) = grad(na);
            if ng.abs() < g.abs() {
                (a, g, h) = (na, ng, nh);
                moved = true;
                break;
            }
            step /= 2.0;
        }
        if !moved {
            break;
        }
    }
    if a.is_finite() {
        a
    } else {
        f64::NAN
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Derived by hand: with every prediction equal to q, the offset model's
    /// MLE solves σ(α + logit q) = ȳ, so α = logit ȳ − logit q.
    #[test]
    fn intercept_of_constant_forecast() {
        let p = [0.2; 8];
        let y = [true, true, true, false, false, false, false, false];
        let a = calibration_intercept(&p, &y, 1e-6);
        let expect = (3.0f64 / 5.0).ln() - (0.2f64 / 0.8).ln();
        assert!((a - expect).abs() < 1e-10, "{a} vs {expect}");
    }

    #[test]
    fn slope_undefined_when_separated_or_one_class() {
        let p = [0.1, 0.2, 0.8, 0.9];
        assert!(calibration_slope(&p, &[false, false, true, true], 1e-6).is_nan());
        assert!(calibration_slope(&p, &[true; 4], 1e-6).is_nan());
        assert!(calibration_intercept(&p, &[true; 4], 1e-6).is_nan());
    }
}
