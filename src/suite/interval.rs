//! The settings of the paired intervals, checked the same way wherever they
//! are given: a suite's `confidence` and `interval` keys, and
//! `plumbline report --confidence/--interval`. Each caller puts the name of
//! its key or flag in front of the message.

use crate::stats::paired::IntervalKind;

/// A confidence level or interval estimator that cannot be used. The
/// message starts with the value, so a caller prefixes it with its key or
/// flag (`--confidence 1.5: expected …`).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum IntervalSettingError {
    /// Not strictly between 0.5 and 1 (or not a number).
    #[error("{0}: expected a level between 0.5 and 1")]
    Confidence(f64),
    /// Not the id of an [`IntervalKind`].
    #[error("`{0}`: known estimators: {known}", known = known_intervals())]
    Interval(String),
}

/// The ids of every interval estimator, comma-separated, in
/// [`IntervalKind::ALL`] order.
pub fn known_intervals() -> String {
    IntervalKind::ALL
        .iter()
        .map(|k| k.as_str())
        .collect::<Vec<_>>()
        .join(", ")
}

/// Check a confidence level: strictly between 0.5 and 1 (a NaN is refused).
pub fn check_confidence(level: f64) -> Result<f64, IntervalSettingError> {
    if level > 0.5 && level < 1.0 {
        Ok(level)
    } else {
        Err(IntervalSettingError::Confidence(level))
    }
}

/// Read an interval estimator's id.
pub fn check_interval(id: &str) -> Result<IntervalKind, IntervalSettingError> {
    IntervalKind::parse(id).ok_or_else(|| IntervalSettingError::Interval(id.to_string()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn confidence_lies_strictly_between_one_half_and_one() {
        for ok in [0.5 + 1e-12, 0.8, 0.95, 0.999] {
            assert_eq!(check_confidence(ok), Ok(ok));
        }
        for bad in [0.5, 1.0, 0.0, -0.95, 1.5, 95.0, f64::NAN, f64::INFINITY] {
            let e = check_confidence(bad).unwrap_err();
            assert!(
                matches!(e, IntervalSettingError::Confidence(v) if v.to_bits() == bad.to_bits()),
                "{bad}"
            );
        }
        assert_eq!(
            check_confidence(1.5).unwrap_err().to_string(),
            "1.5: expected a level between 0.5 and 1"
        );
    }

    #[test]
    fn every_estimator_id_reads_back_and_others_are_listed() {
        for &k in IntervalKind::ALL {
            assert_eq!(check_interval(k.as_str()), Ok(k));
        }
        for bad in ["", "paired_t", "Decomposed", "bootstrap", " paired-t"] {
            assert_eq!(
                check_interval(bad),
                Err(IntervalSettingError::Interval(bad.to_string()))
            );
        }
        let msg = check_interval("bootstrap").unwrap_err().to_string();
        assert!(msg.starts_with("`bootstrap`: known estimators: "), "{msg}");
        for &k in IntervalKind::ALL {
            assert!(msg.contains(k.as_str()), "{msg}");
        }
    }
}
