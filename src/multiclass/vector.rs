//! Vector scaling for K classes (Guo, Pleiss, Sun & Weinberger 2017, ICML,
//! "On calibration of modern neural networks").
//!
//! Math: with logits z_i ∈ ℝ^K the calibrated probabilities are
//! p_i = softmax(w ⊙ z_i + b), 2K parameters (a scale w_k and a bias b_k per
//! class), fitted by minimising the penalised mean log loss
//!
//!   J(w, b) = (1/n) Σ_i [lse(a_i) − a_{i,y_i}] + (λ/2)(‖w − 1‖² + ‖b‖²),
//!   a_ik = w_k z_ik + b_k,  lse(a) = ln Σ_k exp(a_k),
//!
//! with λ = [`DEFAULT_PENALTY`] = 1e-4 unless another λ > 0 is given. The
//! penalty pulls towards the identity map (w = 1, b = 0). It is needed, not
//! only convenient: softmax ignores adding one constant to every b_k, so
//! without it the optimum is a line, not a point (the penalty picks the
//! point with Σ b_k = 0), and a class absent from the calibration rows would
//! send its b_k to −∞ (with it, b_k stays finite and that class keeps a
//! small probability). At λ = 1e-4 the penalty moves a fit on a few hundred
//! rows by far less than its sampling error.
//!
//! Unlike temperature scaling, vector scaling depends on which constant a
//! row's logits carry: w ⊙ (z + c·1) = w ⊙ z + c·w, which softmax does not
//! ignore unless every w_k is equal. Logits and log-probabilities therefore
//! give different fits.
//!
//! Fitting: J is convex (a linear model in (w, b) under the log loss) and
//! λ-strongly convex, so Newton's method with a backtracking (Armijo) line
//! search converges from any start. The gradient and the 2K×2K Hessian are
//! exact: per row, with p = softmax(a), e = the label's indicator and
//! u = p ⊙ z,
//!   ∂/∂w_k = z_k (p_k − e_k),  ∂/∂b_k = p_k − e_k,
//!   H_ww = diag(p ⊙ z²) − u uᵀ,  H_wb = diag(u) − u pᵀ,  H_bb = diag(p) − p pᵀ,
//! plus λ on the diagonal; the Newton system is solved by Cholesky. The
//! search is the one of matrix scaling (`affine::minimise`, whose module doc
//! states it), run on these 2K parameters: it backtracks while the Newton
//! decrement gᵀH⁻¹g is above 1e-10 and takes full steps below it, where J
//! changes by less than its own rounding can judge (a line search there
//! would refuse good steps and never finish), and it stops when the largest
//! gradient entry falls below 1e-12, the decrement below 1e-20, or a full
//! step no longer halves a largest gradient entry already below 1e-9. It
//! starts from the temperature-scaling fit (w = 1/T, b = 0) when one exists,
//! else from the identity.
//! Cost per step: O(n K²) for the Hessian and O(K³) for the solve.
//! A fit that does not converge in 100 steps, or meets a non-finite value,
//! is an error, never a panic. Every lse and softmax subtracts the row's
//! maximum, so extreme logits give no NaN.

use super::{
    affine, check_finite, check_fit_input, log_sum_exp, softmax_into, temperature, MulticlassError,
};

/// The L2 penalty λ of [`fit`].
pub const DEFAULT_PENALTY: f64 = 1e-4;

/// A fitted vector scaling.
#[derive(Debug, Clone, PartialEq)]
pub struct VectorFit {
    /// Scale per class.
    pub w: Vec<f64>,
    /// Bias per class (Σ b_k = 0 at the optimum).
    pub b: Vec<f64>,
    /// The penalty λ the fit used.
    pub penalty: f64,
    /// Newton steps taken.
    pub iterations: usize,
}

impl VectorFit {
    /// softmax(w ⊙ z_i + b) for every row of the row-major logits `z`, whose
    /// rows must have as many classes as the fit.
    pub fn predict(&self, z: &[f64]) -> Result<Vec<f64>, MulticlassError> {
        let k = self.w.len();
        check_finite(z, k)?;
        let mut out = vec![0.0; z.len()];
        let mut a = vec![0.0; k];
        for (r, o) in z.chunks_exact(k).zip(out.chunks_exact_mut(k)) {
            for (j, aj) in a.iter_mut().enumerate() {
                // Finite times finite plus finite: ±∞ at worst, never NaN;
                // softmax_into takes the limit.
                *aj = self.w[j] * r[j] + self.b[j];
            }
            softmax_into(&a, o);
        }
        Ok(out)
    }
}

/// J(w, b): the penalised mean log loss the fit minimises.
pub fn objective(
    z: &[f64],
    classes: usize,
    labels: &[usize],
    w: &[f64],
    b: &[f64],
    penalty: f64,
) -> f64 {
    let mut a = vec![0.0; classes];
    let mut s = 0.0;
    for (r, &y) in z.chunks_exact(classes).zip(labels) {
        for j in 0..classes {
            a[j] = w[j] * r[j] + b[j];
        }
        s += log_sum_exp(&a) - a[y];
    }
    let reg: f64 =
        w.iter().map(|v| (v - 1.0) * (v - 1.0)).sum::<f64>() + b.iter().map(|v| v * v).sum::<f64>();
    s / labels.len() as f64 + 0.5 * penalty * reg
}

/// Gradient and Hessian (row-major 2K×2K) of J at θ = (w, b).
fn gradient_hessian(
    z: &[f64],
    k: usize,
    labels: &[usize],
    theta: &[f64],
    penalty: f64,
) -> (Vec<f64>, Vec<f64>) {
    let m = 2 * k;
    let (w, b) = theta.split_at(k);
    let mut g = vec![0.0; m];
    let mut h = vec![0.0; m * m];
    let (mut a, mut p, mut u) = (vec![0.0; k], vec![0.0; k], vec![0.0; k]);
    for (r, &y) in z.chunks_exact(k).zip(labels) {
        for j in 0..k {
            a[j] = w[j] * r[j] + b[j];
        }
        softmax_into(&a, &mut p);
        for j in 0..k {
            u[j] = p[j] * r[j];
            let d = p[j] - if j == y { 1.0 } else { 0.0 };
            g[j] += r[j] * d;
            g[k + j] += d;
        }
        for i in 0..k {
            let (ww, wb, bb) = (i * m, i * m + k, (k + i) * m + k);
            for j in 0..k {
                h[ww + j] -= u[i] * u[j];
                h[wb + j] -= u[i] * p[j];
                h[bb + j] -= p[i] * p[j];
            }
            h[ww + i] += u[i] * r[i];
            h[wb + i] += u[i];
            h[bb + i] += p[i];
        }
    }
    let n = labels.len() as f64;
    for v in g.iter_mut().chain(h.iter_mut()) {
        *v /= n;
    }
    // H_bw = H_wbᵀ.
    for i in 0..k {
        for j in 0..k {
            h[(k + j) * m + i] = h[i * m + k + j];
        }
    }
    for j in 0..k {
        g[j] += penalty * (w[j] - 1.0);
        g[k + j] += penalty * b[j];
    }
    for i in 0..m {
        h[i * m + i] += penalty;
    }
    (g, h)
}

/// Fits vector scaling with the penalty [`DEFAULT_PENALTY`].
pub fn fit(z: &[f64], classes: usize, labels: &[usize]) -> Result<VectorFit, MulticlassError> {
    fit_with_penalty(z, classes, labels, DEFAULT_PENALTY)
}

/// Fits vector scaling with the L2 penalty λ = `penalty` (> 0, finite).
pub fn fit_with_penalty(
    z: &[f64],
    classes: usize,
    labels: &[usize],
    penalty: f64,
) -> Result<VectorFit, MulticlassError> {
    check_fit_input(z, classes, labels)?;
    if !(penalty > 0.0 && penalty.is_finite()) {
        return Err(MulticlassError::Failed(format!(
            "vector scaling: penalty {penalty} must be positive and finite"
        )));
    }
    let k = classes;
    let start = match temperature::fit(z, classes, labels) {
        Ok(t) => t.inverse_temperature,
        Err(_) => 1.0,
    };
    let mut theta = vec![0.0; 2 * k];
    theta[..k].iter_mut().for_each(|v| *v = start);
    let j_of = |t: &[f64]| objective(z, k, labels, &t[..k], &t[k..], penalty);
    if !j_of(&theta).is_finite() {
        theta[..k].iter_mut().for_each(|v| *v = 1.0);
    }
    let (theta, iterations, _) = affine::minimise(
        theta,
        j_of,
        |t| gradient_hessian(z, k, labels, t, penalty),
        "vector scaling",
    )?;
    Ok(done(theta, k, penalty, iterations))
}

fn done(theta: Vec<f64>, k: usize, penalty: f64, iterations: usize) -> VectorFit {
    let (w, b) = theta.split_at(k);
    VectorFit {
        w: w.to_vec(),
        b: b.to_vec(),
        penalty,
        iterations,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Labels from softmax(l), given logits (1 + c)·l_c + c/2: a scale and an
    /// offset per class c.
    fn sample(n: usize, k: usize, seed: u64) -> (Vec<f64>, Vec<usize>) {
        crate::multiclass::testdata::labelled(n, k, seed, |c, v| {
            (1.0 + c as f64) * v + 0.5 * c as f64
        })
    }

    /// Labels from softmax(l), given logits mixed across neighbouring
    /// classes: z_c = l_c + 0.8·l_{c+1} + c/2 (classes taken cyclically).
    fn mixed_sample(n: usize, k: usize, seed: u64) -> (Vec<f64>, Vec<usize>) {
        let (l, y) = crate::multiclass::testdata::labelled(n, k, seed, |_, v| v);
        let mut z = vec![0.0; l.len()];
        for (zr, lr) in z.chunks_exact_mut(k).zip(l.chunks_exact(k)) {
            for c in 0..k {
                zr[c] = lr[c] + 0.8 * lr[(c + 1) % k] + 0.5 * c as f64;
            }
        }
        (z, y)
    }

    #[test]
    fn mixed_logits_converge_to_a_stationary_point() {
        let (z, y) = mixed_sample(800, 3, 9);
        let f = fit(&z, 3, &y).unwrap();
        let mut theta = f.w.clone();
        theta.extend(&f.b);
        let (g, _) = gradient_hessian(&z, 3, &y, &theta, f.penalty);
        assert!(g.iter().all(|v| v.abs() < 1e-9), "{g:?}");
        assert!(f.iterations < 30, "{} steps", f.iterations);
    }

    #[test]
    fn gradient_matches_finite_differences() {
        let (z, y) = sample(50, 3, 3);
        let theta = [0.7, 1.3, 0.9, 0.2, -0.1, 0.4];
        let (g, h) = gradient_hessian(&z, 3, &y, &theta, 0.01);
        let j = |t: &[f64]| objective(&z, 3, &y, &t[..3], &t[3..], 0.01);
        let eps = 1e-6;
        for i in 0..6 {
            let (mut up, mut dn) = (theta.to_vec(), theta.to_vec());
            up[i] += eps;
            dn[i] -= eps;
            let fd = (j(&up) - j(&dn)) / (2.0 * eps);
            assert!((fd - g[i]).abs() < 1e-7, "gradient {i}: {fd} vs {}", g[i]);
            let (gu, _) = gradient_hessian(&z, 3, &y, &up, 0.01);
            let (gd, _) = gradient_hessian(&z, 3, &y, &dn, 0.01);
            for c in 0..6 {
                let fd = (gu[c] - gd[c]) / (2.0 * eps);
                assert!((fd - h[c * 6 + i]).abs() < 1e-6, "hessian {c},{i}");
            }
        }
    }

    #[test]
    fn optimum_is_stationary_with_centred_biases() {
        let (z, y) = sample(800, 3, 9);
        let f = fit(&z, 3, &y).unwrap();
        let mut theta = f.w.clone();
        theta.extend(&f.b);
        let (g, _) = gradient_hessian(&z, 3, &y, &theta, f.penalty);
        assert!(g.iter().all(|v| v.abs() < 1e-10), "{g:?}");
        // Σ_k ∂J/∂b_k = λ Σ b_k (the loss part sums to 0 in every row).
        assert!(f.b.iter().sum::<f64>().abs() < 1e-8);
        // The later classes' logits are stretched: their scales come out smaller.
        assert!(f.w[0] > f.w[1] && f.w[1] > f.w[2], "{:?}", f.w);
    }

    #[test]
    fn permuting_classes_permutes_the_fit() {
        let (z, y) = sample(300, 3, 21);
        let f = fit(&z, 3, &y).unwrap();
        let perm = [2, 0, 1];
        let mut zp = vec![0.0; z.len()];
        for (i, r) in z.chunks(3).enumerate() {
            for c in 0..3 {
                zp[3 * i + perm[c]] = r[c];
            }
        }
        let yp: Vec<usize> = y.iter().map(|&c| perm[c]).collect();
        let g = fit(&zp, 3, &yp).unwrap();
        for (c, &pc) in perm.iter().enumerate() {
            assert!((f.w[c] - g.w[pc]).abs() < 1e-9);
            assert!((f.b[c] - g.b[pc]).abs() < 1e-9);
        }
        let (pf, pg) = (f.predict(&z).unwrap(), g.predict(&zp).unwrap());
        assert_eq!(pf.len(), pg.len());
        for i in 0..y.len() {
            for c in 0..3 {
                assert!((pf[3 * i + c] - pg[3 * i + perm[c]]).abs() < 1e-10);
            }
        }
    }

    #[test]
    fn extreme_logits_and_an_absent_class() {
        let (z, y) = sample(200, 3, 4);
        let big: Vec<f64> = z.iter().map(|v| v * 1e3).collect();
        let f = fit(&big, 3, &y).unwrap();
        let p = f.predict(&big).unwrap();
        assert!(p.iter().all(|v| v.is_finite() && (0.0..=1.0).contains(v)));
        // Separable rows (every label has the largest logit) still fit.
        let sep = [5.0, 0.0, 0.0, 0.0, 5.0, 0.0, 0.0, 0.0, 5.0];
        let f = fit(&sep, 3, &[0, 1, 2]).unwrap();
        assert!(f.w.iter().all(|v| v.is_finite()));
        // Class 2 never occurs: its bias stays finite and negative.
        let y2: Vec<usize> = y.iter().map(|&c| c.min(1)).collect();
        let f = fit(&z, 3, &y2).unwrap();
        assert!(
            f.b[2].is_finite() && f.b[2] < f.b[0] && f.b[2] < f.b[1],
            "{:?}",
            f.b
        );
        let far = f.predict(&[1e308, -1e308, 0.0]).unwrap();
        assert!(far.iter().all(|v| v.is_finite()));
    }

    /// Labels from softmax(l) as in [`testdata::labelled`], given logits
    /// z = A l + o: a diagonal scale in [0.3, 3], off-diagonal mixing in
    /// [−1, 1] and an offset in [−2, 2] per class, all drawn from `seed`.
    ///
    /// [`testdata::labelled`]: crate::multiclass::testdata::labelled
    fn randomly_mixed(n: usize, k: usize, seed: u64) -> (Vec<f64>, Vec<usize>) {
        use crate::split::splitmix64;
        let mut h = seed ^ 0x005e_ed0f_4d17;
        let mut next = || {
            h = splitmix64(h);
            ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        };
        let mut a = vec![0.0; k * k];
        for c in 0..k {
            for j in 0..k {
                a[c * k + j] = if c == j {
                    0.3 + 2.7 * next()
                } else {
                    2.0 * next() - 1.0
                };
            }
        }
        let o: Vec<f64> = (0..k).map(|_| 4.0 * next() - 2.0).collect();
        let (l, y) = crate::multiclass::testdata::labelled(n, k, seed, |_, v| v);
        let mut z = vec![0.0; l.len()];
        for (zr, lr) in z.chunks_exact_mut(k).zip(l.chunks_exact(k)) {
            for c in 0..k {
                zr[c] = o[c] + (0..k).map(|j| a[c * k + j] * lr[j]).sum::<f64>();
            }
        }
        (z, y)
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(64))]

        /// Vector scaling fits every randomly mixed sample, and its log loss
        /// on the calibration rows is never above temperature scaling's.
        ///
        /// Tolerance: temperature scaling is the point θ_T = (β·1, 0) of
        /// vector scaling's parameter space, with penalty P(θ_T) =
        /// (λ/2)·K·(β − 1)². The fit θ_V minimises J = L + P, so
        /// L(θ_V) ≤ J(θ_V) ≤ J(θ_T) + ε = L(θ_T) + P(θ_T) + ε, where ε covers
        /// the stopping rules and rounding: at a stop on the gradient (every
        /// entry at most 1e-9, 2K ≤ 12 entries) λ-strong convexity gives
        /// J(θ_V) − min J ≤ ‖g‖²/(2λ) ≤ 12·1e-18/2e-4 = 6e-14; at a stop on
        /// the Newton decrement δ (at most 1e-14·max(J, 1), and J is below
        /// its start, the temperature fit's log loss ≤ ln K plus a penalty
        /// far below 1) the gap is about δ/2 < 1e-13; and the two mean log losses
        /// of at most 1,000 rows each carry rounding far below 1e-12. So the
        /// bound is L(θ_T) + P(θ_T) + 1e-12. The temperature fit θ_T is only
        /// compared when it exists (not for separable rows).
        #[test]
        fn converges_and_never_loses_to_temperature_scaling(
            seed in proptest::prelude::any::<u64>(),
            k in 3usize..=6,
            n in 200usize..=1000,
        ) {
            let (z, y) = randomly_mixed(n, k, seed);
            let f = fit(&z, k, &y);
            proptest::prop_assert!(f.is_ok(), "{:?}", f);
            let f = f.unwrap();
            proptest::prop_assert!(f.w.iter().chain(&f.b).all(|v| v.is_finite()));
            if let Ok(t) = temperature::fit(&z, k, &y) {
                let beta = t.inverse_temperature;
                let lt = temperature::mean_log_loss(&z, k, &y, beta);
                let lv = objective(&z, k, &y, &f.w, &f.b, 0.0);
                let slack = 0.5 * f.penalty * k as f64 * (beta - 1.0) * (beta - 1.0) + 1e-12;
                proptest::prop_assert!(
                    lv <= lt + slack,
                    "vector {lv} above temperature {lt} + {slack}"
                );
            }
        }
    }

    #[test]
    fn bad_input_is_an_error() {
        assert_eq!(fit(&[], 3, &[]), Err(MulticlassError::Empty));
        assert_eq!(
            fit(&[1.0, 0.0, 0.0, 2.0, 0.0, 0.0], 3, &[0, 0]),
            Err(MulticlassError::OneClass { class: 0, rows: 2 })
        );
        assert!(fit_with_penalty(&[1.0, 0.0, 0.0, 2.0], 2, &[0, 1], 0.0).is_err());
        assert!(fit(&[1.0, f64::INFINITY, 0.0, 2.0], 2, &[0, 1]).is_err());
        let f = fit(&[1.0, 0.0, 0.0, 2.0, 3.0, 1.0], 2, &[0, 1, 1]).unwrap();
        assert!(f.predict(&[1.0, 2.0, 3.0]).is_err());
    }
}
