//! Spiegelhalter's Z test statistic of calibration.
//!
//! Math (Spiegelhalter 1986, Statistics in Medicine 5, "Probabilistic
//! prediction in patient management and clinical trials"): the Brier score
//! minus its expectation under the hypothesis that y_i ~ Bernoulli(p_i),
//! divided by its standard deviation under that hypothesis:
//!
//!   Z = Σ (y_i − p_i)(1 − 2 p_i) / √( Σ (1 − 2 p_i)² p_i (1 − p_i) ).
//!
//! Under perfect calibration Z is approximately standard normal; Z = 0 is
//! ideal and |Z| > 1.96 rejects calibration at the 5 % level. Predictions are
//! clamped to [0, 1]. Undefined (NaN) when the denominator is 0 (every
//! prediction is 0, ½ or 1).

/// Spiegelhalter's Z of predictions `p` for labels `y`.
pub fn spiegelhalter_z(p: &[f64], y: &[bool]) -> f64 {
    let (mut num, mut var) = (0.0, 0.0);
    for (&pi, &yi) in p.iter().zip(y) {
        let q = pi.clamp(0.0, 1.0);
        let t = if yi { 1.0 } else { 0.0 };
        let a = 1.0 - 2.0 * q;
        num += (t - q) * a;
        var += a * a * q * (1.0 - q);
    }
    if var > 0.0 {
        num / var.sqrt()
    } else {
        f64::NAN
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Derived by hand: p = (0.2, 0.2), y = (1, 0): num = 0.8·0.6 − 0.2·0.6 =
    /// 0.36, var = 2·0.36·0.16 = 0.1152, Z = 0.36/√0.1152.
    #[test]
    fn hand_checked_two_rows() {
        let z = spiegelhalter_z(&[0.2, 0.2], &[true, false]);
        assert!((z - 0.36 / 0.1152f64.sqrt()).abs() < 1e-14);
        assert!(spiegelhalter_z(&[0.5, 0.5], &[true, false]).is_nan());
    }
}
