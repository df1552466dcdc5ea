//! Temperature scaling for K classes (Guo, Pleiss, Sun & Weinberger 2017,
//! ICML, "On calibration of modern neural networks").
//!
//! Math: with logits z_i ∈ ℝ^K, the calibrated probabilities are
//! p_i = softmax(z_i / T), one parameter T > 0 fitted by minimising the
//! multiclass log loss on the calibration rows,
//!
//!   L(T) = (1/n) Σ_i [ln Σ_k exp(z_ik / T) − z_{i,y_i} / T].
//!
//! Log-probabilities can stand in for logits: they differ from them by a
//! constant per row, which softmax ignores, so the fit and the predictions
//! are the same.
//!
//! Fitting: in β = 1/T the loss F(β) = Σ_i [lse(β z_i) − β z_{i,y_i}] is
//! convex, with F′(β) = Σ_i (E_i[z_i] − z_{i,y_i}) and F″(β) = Σ_i Var_i(z_i)
//! ≥ 0, mean and variance taken under p_i = softmax(β z_i). The search runs
//! on v = ln β = −ln T (so T > 0 throughout and any scale of T is reached):
//! Newton steps in v (G′ = β F′, G″ = β F′ + β² F″), else Newton steps in β,
//! kept inside the bracket that the sign of F′ gives; bisection in v when
//! neither step lands inside, and steps of 1, 2, 4, … in v while one end of
//! the bracket is still open. It stops when |F′| ≤ 1e-13·Σ|z_ik − max_k z_ik|
//! or when a step changes v by less than 1e-15. Each row is shifted by its
//! largest logit first (softmax ignores the shift), so no exponential
//! overflows. Sums run in row order (unlike the binary fit they are not
//! order-free).
//!
//! Edges, both decided exactly before the search:
//! * F′(∞) = Σ_i (max_k z_ik − z_{i,y_i}) ≥ 0. When it is 0 — every row's
//!   label has the largest logit — the loss keeps falling as T → 0 and there
//!   is no finite optimum: [`MulticlassError::Separable`].
//! * F′(0) = Σ_i (mean_k z_ik − z_{i,y_i}) ≥ 0 (within the tolerance): the
//!   logits carry no signal for the labels, the optimum is β = 0 (T = ∞) and
//!   every prediction is the uniform row; the fit says `flat`.
//! * Every row constant: every T gives the uniform row; T = 1 is reported.

use super::{check_finite, check_fit_input, log_sum_exp, softmax_into, MulticlassError};

/// A fitted temperature.
#[derive(Debug, Clone, PartialEq)]
pub struct TemperatureFit {
    /// β = 1/T ≥ 0 (0 when the optimum is T = ∞).
    pub inverse_temperature: f64,
    /// Newton or bracketing steps taken.
    pub iterations: usize,
    /// The logits carry no signal: β = 0, every prediction uniform.
    pub flat: bool,
}

impl TemperatureFit {
    /// T = 1/β (+∞ for a flat fit).
    pub fn temperature(&self) -> f64 {
        1.0 / self.inverse_temperature
    }

    /// softmax(z_i / T) for every row of the row-major logits `z`.
    pub fn predict(&self, z: &[f64], classes: usize) -> Result<Vec<f64>, MulticlassError> {
        check_finite(z, classes)?;
        let beta = self.inverse_temperature;
        let mut out = vec![0.0; z.len()];
        let mut a = vec![0.0; classes];
        for (r, o) in z.chunks_exact(classes).zip(out.chunks_exact_mut(classes)) {
            for (ak, &zk) in a.iter_mut().zip(r) {
                // β = 0 gives 0 (z is finite), so the uniform row.
                *ak = beta * zk;
            }
            softmax_into(&a, o);
        }
        Ok(out)
    }
}

/// Mean multiclass log loss of softmax(β z) (no clipping): the quantity the
/// fit minimises.
pub fn mean_log_loss(z: &[f64], classes: usize, labels: &[usize], beta: f64) -> f64 {
    let mut a = vec![0.0; classes];
    let mut s = 0.0;
    for (r, &y) in z.chunks_exact(classes).zip(labels) {
        for (ak, &zk) in a.iter_mut().zip(r) {
            *ak = beta * zk;
        }
        s += log_sum_exp(&a) - a[y];
    }
    s / labels.len() as f64
}

/// F′(β) and F″(β) on the row-shifted logits `zc` (every row's maximum 0).
fn derivatives(zc: &[f64], classes: usize, labels: &[usize], beta: f64) -> (f64, f64) {
    let mut e = vec![0.0; classes];
    let (mut g, mut h) = (0.0, 0.0);
    for (r, &y) in zc.chunks_exact(classes).zip(labels) {
        let mut s = 0.0;
        let mut sz = 0.0;
        for (ek, &zk) in e.iter_mut().zip(r) {
            // β·z ≤ 0: no overflow; the maximum contributes exp(0) = 1.
            *ek = (beta * zk).exp();
            s += *ek;
            sz += *ek * zk;
        }
        let mean = sz / s;
        let var: f64 = e
            .iter()
            .zip(r)
            .map(|(&ek, &zk)| ek * (zk - mean) * (zk - mean))
            .sum::<f64>()
            / s;
        g += mean - r[y];
        h += var;
    }
    (g, h)
}

/// Most steps of the search.
const MAX_STEPS: usize = 200;

/// Fits T on the row-major logits `z` (n×`classes`) and labels.
///
/// Errors: bad shapes, labels or values ([`check_fit_input`]), labels of one
/// class only, [`MulticlassError::Separable`], or a search that does not
/// settle within 200 steps.
pub fn fit(z: &[f64], classes: usize, labels: &[usize]) -> Result<TemperatureFit, MulticlassError> {
    check_fit_input(z, classes, labels)?;
    // Shift every row by its maximum.
    let mut zc = z.to_vec();
    for r in zc.chunks_exact_mut(classes) {
        let m = r.iter().fold(f64::NEG_INFINITY, |m, &v| m.max(v));
        r.iter_mut().for_each(|v| *v -= m);
    }
    let zsum: f64 = zc.iter().map(|v| v.abs()).sum();
    if zsum == 0.0 {
        return Ok(TemperatureFit {
            inverse_temperature: 1.0,
            iterations: 0,
            flat: false,
        });
    }
    // F′(∞) = Σ (0 − zc_iy): zero exactly when every label has the maximum.
    if zc
        .chunks_exact(classes)
        .zip(labels)
        .all(|(r, &y)| r[y] == 0.0)
    {
        return Err(MulticlassError::Separable);
    }
    let tol = 1e-13 * zsum;
    let g0: f64 = zc
        .chunks_exact(classes)
        .zip(labels)
        .map(|(r, &y)| r.iter().sum::<f64>() / classes as f64 - r[y])
        .sum();
    if g0 >= -tol {
        return Ok(TemperatureFit {
            inverse_temperature: 0.0,
            iterations: 0,
            flat: true,
        });
    }
    // Search on v = ln β; (lo, hi) brackets the root of F′ in v.
    let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
    let mut v = 0.0f64;
    let mut step = 1.0f64;
    // e^v stays a normal, finite double.
    let v_max = 709.0;
    let v_min = -708.0;
    for it in 1..=MAX_STEPS {
        let beta = v.exp();
        let (g, h) = derivatives(&zc, classes, labels, beta);
        if !(g.is_finite() && h.is_finite()) {
            return Err(MulticlassError::Failed(format!(
                "temperature scaling: the log-loss gradient is not finite at T = {:e}",
                1.0 / beta
            )));
        }
        if g.abs() <= tol {
            return Ok(TemperatureFit {
                inverse_temperature: beta,
                iterations: it,
                flat: false,
            });
        }
        if g < 0.0 {
            lo = v;
        } else {
            hi = v;
        }
        let within = |x: f64| x.is_finite() && x > lo && x < hi;
        let gpp = beta * g + beta * beta * h;
        let newton_v = if gpp > 0.0 {
            v - beta * g / gpp
        } else {
            f64::NAN
        };
        let beta_n = if h > 0.0 { beta - g / h } else { f64::NAN };
        let newton_beta = if beta_n > 0.0 { beta_n.ln() } else { f64::NAN };
        let next = if within(newton_v) {
            newton_v
        } else if within(newton_beta) {
            newton_beta
        } else if lo.is_finite() && hi.is_finite() {
            0.5 * (lo + hi)
        } else if hi.is_finite() {
            let n = hi - step;
            step *= 2.0;
            n
        } else {
            let n = lo + step;
            step *= 2.0;
            n
        };
        if !(v_min..=v_max).contains(&next) {
            return Err(MulticlassError::Failed(format!(
                "temperature scaling: the optimum lies beyond T = {:e}",
                (-next).exp()
            )));
        }
        if (next - v).abs() <= 1e-15 * v.abs().max(1.0) {
            return Ok(TemperatureFit {
                inverse_temperature: next.exp(),
                iterations: it,
                flat: false,
            });
        }
        v = next;
    }
    Err(MulticlassError::Failed(format!(
        "temperature scaling did not settle in {MAX_STEPS} steps"
    )))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// n rows of K classes: labels drawn from softmax(l) of latent logits l,
    /// the given logits 3·l (overconfident, so T ≈ 3).
    fn sample(n: usize, k: usize, seed: u64) -> (Vec<f64>, Vec<usize>) {
        crate::multiclass::testdata::labelled(n, k, seed, |_, v| 3.0 * v)
    }

    #[test]
    fn optimum_is_stationary_and_near_the_true_scale() {
        let (z, y) = sample(2000, 4, 7);
        let f = fit(&z, 4, &y).unwrap();
        let b = f.inverse_temperature;
        // A minimum: the loss is no lower a little to either side.
        let l = mean_log_loss(&z, 4, &y, b);
        assert!(l <= mean_log_loss(&z, 4, &y, b * (1.0 + 1e-6)));
        assert!(l <= mean_log_loss(&z, 4, &y, b * (1.0 - 1e-6)));
        assert!(
            (f.temperature() - 3.0).abs() < 0.5,
            "T = {}",
            f.temperature()
        );
    }

    #[test]
    fn row_shifts_and_class_permutations() {
        let (z, y) = sample(300, 3, 11);
        let f = fit(&z, 3, &y).unwrap();
        // A different constant added to every logit of each row.
        let shifted: Vec<f64> = z
            .iter()
            .enumerate()
            .map(|(i, &v)| v + 50.0 * ((i / 3) % 7) as f64 - 100.0)
            .collect();
        let g = fit(&shifted, 3, &y).unwrap();
        assert!((f.temperature() / g.temperature() - 1.0).abs() < 1e-12);
        let (pf, pg) = (f.predict(&z, 3).unwrap(), g.predict(&shifted, 3).unwrap());
        assert_eq!(pf.len(), pg.len());
        for (a, b) in pf.iter().zip(&pg) {
            assert!((a - b).abs() < 1e-12);
        }
        // Class k becomes class perm[k].
        let perm = [1, 2, 0];
        let mut zp = vec![0.0; z.len()];
        for (i, r) in z.chunks(3).enumerate() {
            for k in 0..3 {
                zp[3 * i + perm[k]] = r[k];
            }
        }
        let yp: Vec<usize> = y.iter().map(|&c| perm[c]).collect();
        let h = fit(&zp, 3, &yp).unwrap();
        assert!((f.temperature() / h.temperature() - 1.0).abs() < 1e-12);
        let ph = h.predict(&zp, 3).unwrap();
        for i in 0..y.len() {
            for k in 0..3 {
                assert!((pf[3 * i + k] - ph[3 * i + perm[k]]).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn extreme_logits_give_no_nan() {
        let (z, y) = sample(200, 3, 5);
        let big: Vec<f64> = z.iter().map(|v| v * 1e4).collect();
        let f = fit(&big, 3, &y).unwrap();
        assert!((f.temperature() / 1e4 - fit(&z, 3, &y).unwrap().temperature()).abs() < 1e-6);
        let p = f.predict(&big, 3).unwrap();
        assert!(p.iter().all(|v| v.is_finite() && (0.0..=1.0).contains(v)));
        let far = TemperatureFit {
            inverse_temperature: 1.0,
            iterations: 0,
            flat: false,
        }
        .predict(&[1e308, -1e308, 0.0], 3)
        .unwrap();
        assert_eq!(far, vec![1.0, 0.0, 0.0]);
    }

    #[test]
    fn edges() {
        // Every label has the largest logit.
        assert_eq!(
            fit(&[2.0, 0.0, 0.0, 1.0], 2, &[0, 1]),
            Err(MulticlassError::Separable)
        );
        // Logits against the labels: T = ∞, the uniform row.
        let f = fit(&[0.0, 2.0, 3.0, 0.0, 0.0, 1.0], 2, &[0, 1, 1]).unwrap();
        assert!(f.flat && f.inverse_temperature == 0.0);
        assert_eq!(f.predict(&[5.0, -5.0], 2).unwrap(), vec![0.5, 0.5]);
        // Constant rows: T = 1.
        let f = fit(&[1.0, 1.0, -3.0, -3.0], 2, &[0, 1]).unwrap();
        assert_eq!(f.temperature(), 1.0);
    }

    #[test]
    fn bad_input_is_an_error() {
        assert_eq!(fit(&[], 3, &[]), Err(MulticlassError::Empty));
        assert_eq!(
            fit(&[1.0, 0.0, 2.0, 0.0], 2, &[1, 1]),
            Err(MulticlassError::OneClass { class: 1, rows: 2 })
        );
        assert!(matches!(
            fit(&[1.0, f64::NAN, 2.0, 0.0], 2, &[0, 1]),
            Err(MulticlassError::NotFinite {
                row: 0,
                class: 1,
                ..
            })
        ));
        assert!(matches!(
            fit(&[1.0, 1e200, 2.0, 0.0], 2, &[0, 1]),
            Err(MulticlassError::LogitTooLarge {
                row: 0,
                class: 1,
                ..
            })
        ));
        assert!(fit(&[1.0, 0.0, 2.0], 2, &[0, 1]).is_err());
        assert!(TemperatureFit {
            inverse_temperature: 1.0,
            iterations: 0,
            flat: false
        }
        .predict(&[1.0, 2.0, 3.0], 2)
        .is_err());
    }
}
