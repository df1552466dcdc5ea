//! The softmax of an affine map of K features, fitted by penalised Newton
//! steps: the engine shared by matrix scaling ([`super::matrix`], features =
//! logits) and Dirichlet calibration ([`super::dirichlet`], features = log
//! probabilities). Its Newton search ([`minimise`]) also fits vector scaling
//! ([`super::vector`]) on that map's own 2K parameters and derivatives.
//!
//! Math: with features x_i ∈ ℝ^K, p_i = softmax(W x_i + b), W ∈ ℝ^{K×K},
//! b ∈ ℝ^K. The parameters θ are stored class by class, row k of
//! (W | b): θ[k(K+1) + j] = W_kj for j < K and θ[k(K+1) + K] = b_k. The fit
//! minimises
//!
//!   J(θ) = (1/n) Σ_i [lse(a_i) − a_{i,y_i}] + ½ Σ_t c_t (θ_t − τ_t)²,
//!
//! a_i = W x_i + b, with a weight c_t > 0 and a target τ_t per parameter
//! ([`Penalty`]). Every c_t > 0 makes J strongly convex (the log loss of a
//! linear model is convex), so the optimum is one point and Newton's method
//! with a backtracking (Armijo) line search converges from any start.
//!
//! Exact derivatives, with x̃ = (x, 1), p = softmax(a), e = the label's
//! indicator and S = diag(p) − p pᵀ: ∂/∂θ_{(k,j)} = (p_k − e_k) x̃_j and
//! H_{(k,j),(l,m)} = S_kl x̃_j x̃_m (the Kronecker product S ⊗ x̃x̃ᵀ), plus
//! c_t on the diagonal; the Newton system is solved by Cholesky. Steps are
//! damped by backtracking until the Newton decrement gᵀH⁻¹g falls below
//! 1e-10; from there J changes by less than its own rounding can judge, so
//! full Newton steps are taken (the quadratic phase). The search stops when
//! the largest gradient entry falls below 1e-12, the decrement below 1e-20,
//! or a full step no longer halves a largest gradient entry that is already
//! below 1e-9 (the rounding floor of the row sums, reached for poorly
//! conditioned objectives). More than 100 steps, a non-finite value or a
//! failed line search is an error, never a panic. Cost per step:
//! O(n K⁴) for the Hessian and O(K⁶) for the solve, meant for tens of
//! classes. Every lse and softmax subtracts the row's maximum.

use super::{log_sum_exp, softmax_into, MulticlassError};

/// Most Newton steps.
const MAX_STEPS: usize = 100;

/// Converged when every gradient entry is at most this.
const GRADIENT_STOP: f64 = 1e-12;

/// Newton decrement below which full steps are taken without line search.
const LOCAL_DECREMENT: f64 = 1e-10;

/// Converged when a local step leaves the largest gradient entry above half
/// its previous value while it is at most this (the sums' rounding floor).
const FLOOR_STOP: f64 = 1e-9;

/// The quadratic penalty ½ Σ_t c_t (θ_t − τ_t)², one weight and target per
/// parameter in the layout of the module doc.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Penalty {
    pub weight: Vec<f64>,
    pub target: Vec<f64>,
}

impl Penalty {
    fn value(&self, theta: &[f64]) -> f64 {
        0.5 * theta
            .iter()
            .zip(&self.weight)
            .zip(&self.target)
            .map(|((t, c), tau)| c * (t - tau) * (t - tau))
            .sum::<f64>()
    }
}

/// Number of parameters for K classes: K² + K.
pub(crate) fn parameters(k: usize) -> usize {
    k * (k + 1)
}

/// θ for W = `diagonal`·I and b = 0.
pub(crate) fn scaled_identity(k: usize, diagonal: f64) -> Vec<f64> {
    let mut theta = vec![0.0; parameters(k)];
    for c in 0..k {
        theta[c * (k + 1) + c] = diagonal;
    }
    theta
}

/// Splits θ into W (row-major K×K) and b.
pub(crate) fn split(theta: &[f64], k: usize) -> (Vec<f64>, Vec<f64>) {
    let mut w = Vec::with_capacity(k * k);
    let mut b = Vec::with_capacity(k);
    for r in theta.chunks_exact(k + 1) {
        w.extend_from_slice(&r[..k]);
        b.push(r[k]);
    }
    (w, b)
}

/// a = W x + b for one row. Finite parameters and features give a finite
/// or infinite a_k, never NaN: when terms overflow to ∞ − ∞, the row is
/// computed as s·(W (x/s) + b/s) with s = max_j |x_j|.
fn affine(theta: &[f64], x: &[f64], a: &mut [f64]) {
    let k = x.len();
    for (ac, r) in a.iter_mut().zip(theta.chunks_exact(k + 1)) {
        *ac = r[..k].iter().zip(x).map(|(w, v)| w * v).sum::<f64>() + r[k];
        if ac.is_nan() {
            let s = x.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            let scaled = r[..k].iter().zip(x).map(|(w, v)| w * (v / s)).sum::<f64>() + r[k] / s;
            *ac = s * scaled;
        }
    }
}

/// softmax(W x_i + b) for every row of the row-major features `x`.
pub(crate) fn predict(theta: &[f64], x: &[f64], k: usize) -> Vec<f64> {
    let mut out = vec![0.0; x.len()];
    let mut a = vec![0.0; k];
    for (r, o) in x.chunks_exact(k).zip(out.chunks_exact_mut(k)) {
        affine(theta, r, &mut a);
        softmax_into(&a, o);
    }
    out
}

/// Σ_i [lse(a_i) − a_{i,y_i}] over the rows: the summed log loss, no penalty.
pub(crate) fn summed_log_loss(x: &[f64], k: usize, labels: &[usize], theta: &[f64]) -> f64 {
    let mut a = vec![0.0; k];
    let mut s = 0.0;
    for (r, &y) in x.chunks_exact(k).zip(labels) {
        affine(theta, r, &mut a);
        s += log_sum_exp(&a) - a[y];
    }
    s
}

/// J(θ): the mean log loss plus the penalty.
pub(crate) fn objective(
    x: &[f64],
    k: usize,
    labels: &[usize],
    theta: &[f64],
    penalty: &Penalty,
) -> f64 {
    summed_log_loss(x, k, labels, theta) / labels.len() as f64 + penalty.value(theta)
}

/// Gradient and Hessian (row-major m×m, m = K² + K) of J at θ.
pub(crate) fn gradient_hessian(
    x: &[f64],
    k: usize,
    labels: &[usize],
    theta: &[f64],
    penalty: &Penalty,
) -> (Vec<f64>, Vec<f64>) {
    let e = k + 1;
    let m = parameters(k);
    let mut g = vec![0.0; m];
    let mut h = vec![0.0; m * m];
    let (mut a, mut p) = (vec![0.0; k], vec![0.0; k]);
    let mut xt = vec![1.0; e];
    let mut xx = vec![0.0; e * e];
    for (r, &y) in x.chunks_exact(k).zip(labels) {
        affine(theta, r, &mut a);
        softmax_into(&a, &mut p);
        xt[..k].copy_from_slice(r);
        for j in 0..e {
            for l in 0..e {
                xx[j * e + l] = xt[j] * xt[l];
            }
        }
        for c in 0..k {
            let d = p[c] - if c == y { 1.0 } else { 0.0 };
            for j in 0..e {
                g[c * e + j] += d * xt[j];
            }
            for l in 0..k {
                let s = if c == l {
                    p[c] - p[c] * p[l]
                } else {
                    -p[c] * p[l]
                };
                if s == 0.0 {
                    continue;
                }
                for j in 0..e {
                    let row = (c * e + j) * m + l * e;
                    for (hv, &xv) in h[row..row + e].iter_mut().zip(&xx[j * e..(j + 1) * e]) {
                        *hv += s * xv;
                    }
                }
            }
        }
    }
    let n = labels.len() as f64;
    for v in g.iter_mut().chain(h.iter_mut()) {
        *v /= n;
    }
    for t in 0..m {
        g[t] += penalty.weight[t] * (theta[t] - penalty.target[t]);
        h[t * m + t] += penalty.weight[t];
    }
    (g, h)
}

/// Solves H x = r for symmetric positive definite H (row-major m×m) by
/// Cholesky; None when H is not numerically positive definite.
pub(super) fn cholesky_solve(h: &[f64], r: &[f64]) -> Option<Vec<f64>> {
    let m = r.len();
    let mut l = vec![0.0; m * m];
    for i in 0..m {
        for j in 0..=i {
            let s: f64 = (0..j).map(|t| l[i * m + t] * l[j * m + t]).sum();
            if i == j {
                let d = h[i * m + i] - s;
                if !(d > 0.0 && d.is_finite()) {
                    return None;
                }
                l[i * m + i] = d.sqrt();
            } else {
                l[i * m + j] = (h[i * m + j] - s) / l[j * m + j];
            }
        }
    }
    let mut x = r.to_vec();
    for i in 0..m {
        let s: f64 = (0..i).map(|t| l[i * m + t] * x[t]).sum();
        x[i] = (x[i] - s) / l[i * m + i];
    }
    for i in (0..m).rev() {
        let s: f64 = (i + 1..m).map(|t| l[t * m + i] * x[t]).sum();
        x[i] = (x[i] - s) / l[i * m + i];
    }
    Some(x)
}

/// Minimises J from `start`; returns θ, the Newton steps taken and the
/// largest gradient entry at the last check (before the last step when the
/// search stopped on the decrement). `what` names the method in messages.
pub(crate) fn fit(
    x: &[f64],
    k: usize,
    labels: &[usize],
    start: Vec<f64>,
    penalty: &Penalty,
    what: &str,
) -> Result<(Vec<f64>, usize, f64), MulticlassError> {
    minimise(
        start,
        |t| objective(x, k, labels, t, penalty),
        |t| gradient_hessian(x, k, labels, t, penalty),
        what,
    )
}

/// The Newton search of the module doc for any strongly convex J given by
/// `objective` and `derivatives` (gradient and row-major Hessian at θ):
/// backtracking while the decrement is large, full steps in the quadratic
/// phase, and the stopping rules stated there. Vector scaling uses it with
/// its own 2K-parameter derivatives. Returns as [`fit`] does.
pub(crate) fn minimise(
    start: Vec<f64>,
    objective: impl Fn(&[f64]) -> f64,
    derivatives: impl Fn(&[f64]) -> (Vec<f64>, Vec<f64>),
    what: &str,
) -> Result<(Vec<f64>, usize, f64), MulticlassError> {
    let mut theta = start;
    let j_of = objective;
    let mut j = j_of(&theta);
    if !j.is_finite() {
        return Err(MulticlassError::Failed(format!(
            "{what}: the log loss at the start is not finite"
        )));
    }
    // The largest gradient entry after a full step of the local phase.
    let mut local_gmax: Option<f64> = None;
    for it in 1..=MAX_STEPS {
        let (g, h) = derivatives(&theta);
        if g.iter().any(|v| !v.is_finite()) || h.iter().any(|v| !v.is_finite()) {
            return Err(MulticlassError::Failed(format!(
                "{what}: the gradient or Hessian is not finite"
            )));
        }
        let gmax = g.iter().fold(0.0f64, |m, v| m.max(v.abs()));
        if gmax <= GRADIENT_STOP {
            return Ok((theta, it, gmax));
        }
        // A local step that no longer halves the gradient has reached the
        // rounding floor of the sums.
        if local_gmax.is_some_and(|prev| gmax > 0.5 * prev && gmax <= FLOOR_STOP) {
            return Ok((theta, it, gmax));
        }
        let Some(step) = cholesky_solve(&h, &g) else {
            return Err(MulticlassError::Failed(format!(
                "{what}: the Hessian is not positive definite"
            )));
        };
        let decrement: f64 = g.iter().zip(&step).map(|(a, b)| a * b).sum();
        if decrement <= 1e-20 {
            theta.iter_mut().zip(&step).for_each(|(t, s)| *t -= s);
            return Ok((theta, it, gmax));
        }
        if decrement <= LOCAL_DECREMENT {
            // Local phase: J changes by about decrement / 2, near its own
            // rounding, so a line search would judge noise; the full Newton
            // step is safe this close to the optimum.
            let trial: Vec<f64> = theta.iter().zip(&step).map(|(a, s)| a - s).collect();
            let jt = j_of(&trial);
            if jt.is_finite() {
                theta = trial;
                j = jt;
                local_gmax = Some(gmax);
                continue;
            }
        }
        local_gmax = None;
        let mut t = 1.0;
        loop {
            let trial: Vec<f64> = theta.iter().zip(&step).map(|(a, s)| a - t * s).collect();
            let jt = j_of(&trial);
            if jt.is_finite() && jt <= j - 0.1 * t * decrement {
                theta = trial;
                j = jt;
                break;
            }
            t *= 0.5;
            if t < 1e-12 {
                if decrement <= 1e-14 * j.abs().max(1.0) {
                    return Ok((theta, it, gmax));
                }
                return Err(MulticlassError::Failed(format!(
                    "{what}: the line search failed at step {it}"
                )));
            }
        }
    }
    Err(MulticlassError::Failed(format!(
        "{what} did not converge in {MAX_STEPS} Newton steps"
    )))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gradient_and_hessian_match_finite_differences() {
        let (x, y) = crate::multiclass::testdata::labelled(40, 3, 5, |c, v| v + 0.3 * c as f64);
        let m = parameters(3);
        let theta: Vec<f64> = (0..m).map(|t| 0.1 * ((t * 7) % 5) as f64 - 0.2).collect();
        let pen = Penalty {
            weight: (0..m).map(|t| 0.01 + 0.001 * t as f64).collect(),
            target: (0..m).map(|t| 0.05 * t as f64).collect(),
        };
        let (g, h) = gradient_hessian(&x, 3, &y, &theta, &pen);
        let eps = 1e-6;
        for i in 0..m {
            let (mut up, mut dn) = (theta.clone(), theta.clone());
            up[i] += eps;
            dn[i] -= eps;
            let fd =
                (objective(&x, 3, &y, &up, &pen) - objective(&x, 3, &y, &dn, &pen)) / (2.0 * eps);
            assert!((fd - g[i]).abs() < 1e-7, "gradient {i}: {fd} vs {}", g[i]);
            let (gu, _) = gradient_hessian(&x, 3, &y, &up, &pen);
            let (gd, _) = gradient_hessian(&x, 3, &y, &dn, &pen);
            for c in 0..m {
                let fd = (gu[c] - gd[c]) / (2.0 * eps);
                assert!((fd - h[c * m + i]).abs() < 1e-6, "hessian {c},{i}");
            }
        }
    }
}
