//! Statistics of a benchmark run: paired intervals per task, tests across
//! tasks and data-size thresholds. (The simulation that checks the intervals'
//! coverage lives beside its bench, `benches/coverage/study.rs`.)
//!
//! The reporting code computes no statistics itself: it hands per-unit values
//! (as read back from `units.csv`) to the functions here and prints the plain
//! structs they return.
//!
//! * [`paired`]: intervals for the mean paired difference of a method against a
//!   reference over repeats — Student's paired t, the corrected resampled t of
//!   Nadeau & Bengio (2003, Machine Learning 52, "Inference for the
//!   generalization error") and plumbline's own variance decomposition, which
//!   also accounts for the shared test set and for the finite reservoir.
//! * [`across`]: average ranks, Friedman and Iman–Davenport tests, Nemenyi
//!   critical difference and Holm-corrected Wilcoxon signed-rank tests, following
//!   Demšar (2006, JMLR 7, "Statistical comparisons of classifiers over multiple
//!   data sets").
//! * [`bayes`]: the Bayesian signed-rank test with a region of practical
//!   equivalence (Benavoli, Corani, Demšar & Zaffalon 2017, JMLR 18, §5), the
//!   across-dataset evidence of the decision: P(better), P(equivalent),
//!   P(worse) from Dirichlet-process posterior samples.
//! * [`thresholds`]: from which calibration size a flexible method is reliably
//!   better than a parametric one, and where the mean difference crosses zero.
//! * [`verdict`]: the one rule that reads a paired interval and an
//!   equivalence margin as better / equivalent / undetermined / worse.
//!
//! Quantiles and tail probabilities of the t, χ², F and normal distributions
//! come from `statrs`.

pub mod across;
pub mod bayes;
pub mod paired;
pub mod thresholds;
pub mod verdict;

use statrs::distribution::{ContinuousCDF, StudentsT};

/// Why a statistic could not be computed from the data given.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StatsError {
    #[error("an interval needs at least 2 repeats, got {0}")]
    TooFewRepeats(usize),
    #[error("a value is not finite (NaN or infinite): {0}")]
    NonFinite(&'static str),
    #[error("confidence must lie strictly between 0 and 1, got {0}")]
    BadConfidence(f64),
    #[error(
        "calibration size {size} is not below the reservoir size {reservoir}: the spread \
         of the reservoir itself cannot be estimated from repeats"
    )]
    SizeNotBelowReservoir { size: usize, reservoir: usize },
    #[error("{0}")]
    Shape(String),
    #[error("{0}")]
    Distribution(String),
}

/// Two-sided Student t quantile: the `p` quantile with `df` degrees of freedom
/// (fractional df allowed).
pub fn t_quantile(p: f64, df: f64) -> Result<f64, StatsError> {
    if df.is_nan() || df <= 0.0 || !df.is_finite() {
        return Err(StatsError::Distribution(format!(
            "t distribution needs positive finite degrees of freedom, got {df}"
        )));
    }
    let t = StudentsT::new(0.0, 1.0, df).map_err(|e| StatsError::Distribution(e.to_string()))?;
    Ok(t.inverse_cdf(p))
}

/// Sample mean and unbiased variance (n − 1 denominator) by Welford's update.
pub(crate) fn mean_var(x: &[f64]) -> (f64, f64) {
    let mut mean = 0.0;
    let mut m2 = 0.0;
    for (i, &v) in x.iter().enumerate() {
        let d = v - mean;
        mean += d / (i + 1) as f64;
        m2 += d * (v - mean);
    }
    let var = if x.len() > 1 {
        m2 / (x.len() - 1) as f64
    } else {
        f64::NAN
    };
    (mean, var)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn t_quantiles_match_handbook_table() {
        // Abramowitz & Stegun (1964), Table 26.10, and any textbook t table:
        // t(0.975, 9) = 2.262, t(0.975, 29) = 2.045, t(0.95, 9) = 1.833.
        assert!((t_quantile(0.975, 9.0).unwrap() - 2.262).abs() < 5e-4);
        assert!((t_quantile(0.975, 29.0).unwrap() - 2.045).abs() < 5e-4);
        assert!((t_quantile(0.95, 9.0).unwrap() - 1.833).abs() < 5e-4);
        assert!(t_quantile(0.975, 0.0).is_err());
    }

    #[test]
    fn mean_var_matches_two_pass() {
        let x = [1.0, 2.0, 4.0, 7.0];
        let (m, v) = mean_var(&x);
        assert!((m - 3.5).abs() < 1e-15);
        // Σ(x − 3.5)² = 6.25 + 2.25 + 0.25 + 12.25 = 21, / 3 = 7.
        assert!((v - 7.0).abs() < 1e-12);
    }
}
