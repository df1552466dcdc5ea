//! Matrix scaling for K classes (Guo, Pleiss, Sun & Weinberger 2017, ICML,
//! "On calibration of modern neural networks").
//!
//! Math: with logits z_i ∈ ℝ^K the calibrated probabilities are
//! p_i = softmax(W z_i + b), K² + K parameters (a full K×K matrix W and a
//! bias per class), fitted by minimising the penalised mean log loss
//!
//!   J(W, b) = (1/n) Σ_i [lse(a_i) − a_{i,y_i}] + (λ/2)(‖W − I‖²_F + ‖b‖²),
//!   a_i = W z_i + b,
//!
//! with λ = [`DEFAULT_PENALTY`] = 1e-4 unless another λ > 0 is given. The
//! penalty pulls towards the identity map (W = I, b = 0: the uncalibrated
//! softmax). It is needed, not only convenient: softmax ignores adding one
//! vector v to every row of W (W + 1vᵀ adds v·z_i to every class's logit)
//! and one constant to every b_k, so without it the optimum is a set, not a
//! point; a class absent from the calibration rows would send its row of
//! (W, b) to infinity. With it J is λ-strongly convex. Guo et al. fit W
//! without a penalty and report that matrix scaling overfits when K is large;
//! λ = 1e-4 only settles the directions the loss leaves flat and moves a fit
//! on a few hundred rows far less than its sampling error. A stronger λ
//! (`fit_with_penalty`) shrinks towards the identity.
//!
//! Like vector scaling, and unlike temperature scaling, the map depends on
//! which constant a row's logits carry (W(z + c·1) = Wz + c·W1), so logits
//! and log-probabilities give different fits.
//!
//! Fitting: exact gradient and Hessian, Newton steps with Cholesky and
//! backtracking, as described in the shared engine `affine.rs`; the search
//! starts from the temperature-scaling fit (W = I/T, b = 0) when one exists,
//! else from the identity. A fit that does not converge, or meets a
//! non-finite value, is an error, never a panic.

use super::{affine, check_finite, check_fit_input, temperature, MulticlassError};

/// The L2 penalty λ of [`fit`].
pub const DEFAULT_PENALTY: f64 = 1e-4;

/// A fitted matrix scaling.
#[derive(Debug, Clone, PartialEq)]
pub struct MatrixFit {
    /// W, row-major K×K: row k gives class k's calibrated logit.
    pub w: Vec<f64>,
    /// Bias per class.
    pub b: Vec<f64>,
    /// The penalty λ the fit used.
    pub penalty: f64,
    /// Newton steps taken.
    pub iterations: usize,
    /// Largest |∂J/∂θ| where the fit stopped (at most 1e-12, or 1e-9 at the
    /// rounding floor of a poorly conditioned fit).
    pub gradient: f64,
}

impl MatrixFit {
    /// Number of classes K.
    pub fn classes(&self) -> usize {
        self.b.len()
    }

    /// softmax(W z_i + b) for every row of the row-major logits `z`, whose
    /// rows must have as many classes as the fit.
    pub fn predict(&self, z: &[f64]) -> Result<Vec<f64>, MulticlassError> {
        let k = self.classes();
        check_finite(z, k)?;
        Ok(affine::predict(&self.theta(), z, k))
    }

    fn theta(&self) -> Vec<f64> {
        let k = self.classes();
        let mut theta = Vec::with_capacity(affine::parameters(k));
        for (r, &b) in self.w.chunks_exact(k).zip(&self.b) {
            theta.extend_from_slice(r);
            theta.push(b);
        }
        theta
    }
}

fn penalty_of(k: usize, lambda: f64) -> affine::Penalty {
    affine::Penalty {
        weight: vec![lambda; affine::parameters(k)],
        target: affine::scaled_identity(k, 1.0),
    }
}

/// J(W, b): the penalised mean log loss the fit minimises (W row-major).
pub fn objective(
    z: &[f64],
    classes: usize,
    labels: &[usize],
    w: &[f64],
    b: &[f64],
    penalty: f64,
) -> f64 {
    let fit = MatrixFit {
        w: w.to_vec(),
        b: b.to_vec(),
        penalty,
        iterations: 0,
        gradient: f64::NAN,
    };
    affine::objective(
        z,
        classes,
        labels,
        &fit.theta(),
        &penalty_of(classes, penalty),
    )
}

/// Fits matrix scaling with the penalty [`DEFAULT_PENALTY`].
pub fn fit(z: &[f64], classes: usize, labels: &[usize]) -> Result<MatrixFit, MulticlassError> {
    fit_with_penalty(z, classes, labels, DEFAULT_PENALTY)
}

/// Fits matrix scaling with the L2 penalty λ = `penalty` (> 0, finite).
pub fn fit_with_penalty(
    z: &[f64],
    classes: usize,
    labels: &[usize],
    penalty: f64,
) -> Result<MatrixFit, MulticlassError> {
    check_fit_input(z, classes, labels)?;
    if !(penalty > 0.0 && penalty.is_finite()) {
        return Err(MulticlassError::Failed(format!(
            "matrix scaling: penalty {penalty} must be positive and finite"
        )));
    }
    let k = classes;
    let pen = penalty_of(k, penalty);
    let mut start = match temperature::fit(z, classes, labels) {
        Ok(t) => affine::scaled_identity(k, t.inverse_temperature),
        Err(_) => affine::scaled_identity(k, 1.0),
    };
    if !affine::objective(z, k, labels, &start, &pen).is_finite() {
        start = affine::scaled_identity(k, 1.0);
    }
    let (theta, iterations, gradient) = affine::fit(z, k, labels, start, &pen, "matrix scaling")?;
    let (w, b) = affine::split(&theta, k);
    Ok(MatrixFit {
        w,
        b,
        penalty,
        iterations,
        gradient,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Labels from softmax(l); given logits mix the classes: z_c = l_c +
    /// 0.8·l_{c+1} + c/2, which W can undo and one temperature cannot.
    fn sample(n: usize, k: usize, seed: u64) -> (Vec<f64>, Vec<usize>) {
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
    fn optimum_is_stationary_and_beats_temperature_scaling() {
        let (z, y) = sample(800, 3, 9);
        let f = fit(&z, 3, &y).unwrap();
        let th = f.theta();
        let (g, _) = affine::gradient_hessian(&z, 3, &y, &th, &penalty_of(3, f.penalty));
        assert!(g.iter().all(|v| v.abs() < 1e-10), "{g:?}");
        // Σ_k ∂J/∂b_k = λ Σ b_k: the biases are centred at the optimum.
        assert!(f.b.iter().sum::<f64>().abs() < 1e-8);
        // A full matrix can undo the mixing; one temperature cannot.
        let own = f.predict(&z).unwrap();
        let t = temperature::fit(&z, 3, &y).unwrap();
        let pv = t.predict(&z, 3).unwrap();
        let ll = |p: &[f64]| crate::multiclass::metrics::log_loss(p, 3, &y, 1e-6).unwrap();
        assert!(ll(&own) < ll(&pv) - 0.01, "{} vs {}", ll(&own), ll(&pv));
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
        for c in 0..3 {
            assert!((f.b[c] - g.b[perm[c]]).abs() < 1e-9);
            for d in 0..3 {
                assert!((f.w[3 * c + d] - g.w[3 * perm[c] + perm[d]]).abs() < 1e-9);
            }
        }
        let (pf, pg) = (f.predict(&z).unwrap(), g.predict(&zp).unwrap());
        for i in 0..y.len() {
            for c in 0..3 {
                assert!((pf[3 * i + c] - pg[3 * i + perm[c]]).abs() < 1e-10);
            }
        }
    }

    #[test]
    fn extreme_logits_separable_rows_and_an_absent_class() {
        let (z, y) = sample(200, 3, 4);
        let big: Vec<f64> = z.iter().map(|v| v * 1e3).collect();
        let f = fit(&big, 3, &y).unwrap();
        let p = f.predict(&big).unwrap();
        assert!(p.iter().all(|v| v.is_finite() && (0.0..=1.0).contains(v)));
        let sep = [5.0, 0.0, 0.0, 0.0, 5.0, 0.0, 0.0, 0.0, 5.0];
        let f = fit(&sep, 3, &[0, 1, 2]).unwrap();
        assert!(f.w.iter().chain(&f.b).all(|v| v.is_finite()));
        let y2: Vec<usize> = y.iter().map(|&c| c.min(1)).collect();
        let f = fit(&z, 3, &y2).unwrap();
        assert!(f.b[2].is_finite() && f.b[2] < f.b[0] && f.b[2] < f.b[1]);
        let far = f.predict(&[1e308, -1e308, 0.0]).unwrap();
        assert!(far.iter().all(|v| v.is_finite()));
        // A larger penalty pulls W towards I.
        let strong = fit_with_penalty(&z, 3, &y, 10.0).unwrap();
        let weak = fit(&z, 3, &y).unwrap();
        let off = |w: &[f64]| {
            (0..9)
                .map(|t| w[t] - if t % 4 == 0 { 1.0 } else { 0.0 })
                .map(|d| d * d)
                .sum::<f64>()
        };
        assert!(off(&strong.w) < off(&weak.w));
    }

    #[test]
    fn bad_input_is_an_error() {
        assert_eq!(fit(&[], 3, &[]), Err(MulticlassError::Empty));
        assert_eq!(
            fit(&[1.0, 0.0, 0.0, 2.0, 0.0, 0.0], 3, &[0, 0]),
            Err(MulticlassError::OneClass { class: 0, rows: 2 })
        );
        assert!(fit_with_penalty(&[1.0, 0.0, 0.0, 2.0], 2, &[0, 1], 0.0).is_err());
        assert!(fit_with_penalty(&[1.0, 0.0, 0.0, 2.0], 2, &[0, 1], f64::NAN).is_err());
        assert!(fit(&[1.0, f64::NAN, 0.0, 2.0], 2, &[0, 1]).is_err());
        assert!(fit(&[1.0, 0.0], 1, &[0, 0]).is_err());
        let f = fit(&[1.0, 0.0, 0.0, 2.0, 3.0, 1.0], 2, &[0, 1, 1]).unwrap();
        assert!(f.predict(&[1.0, 2.0, 3.0]).is_err());
        assert!(f.predict(&[1.0, f64::INFINITY]).is_err());
    }
}
