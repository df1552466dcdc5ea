//! The saved form of a fitted map: every number a map's `predict` reads, so
//! that a map rebuilt from it predicts exactly (bit for bit) what the fitted map
//! predicts. `plumbline fit` writes it into a map file (docs/map-format.md),
//! `plumbline apply` reads it back through [`MapState::rebuild`], which checks
//! it first ([`MapState::check`]: finite numbers, ordered and monotone
//! blocks/knots, probabilities in [0, 1], consistent lengths), so a hand-edited
//! or damaged map is never used.
//!
//! Each method's file declares its saved state (a struct implementing
//! [`SavedMap`]: summary lines, check, rebuild, out-of-range rule); this file
//! holds the tagged enum over them and the checks they share. Each state
//! struct names its variant in a serde `expecting`, so a saved state written
//! as a list that is too short is refused in the words of this enum.
//!
//! Exactness: the rebuilt map is the same Rust type with the same fields (any
//! derived lookup structure, such as the isotonic knots or the binning cut
//! points, is recomputed by the same code the fit uses), and every `f64` goes
//! through JSON in the shortest form that parses back to the same double
//! (`serde_json` with `float_roundtrip`).

use serde::{Deserialize, Serialize};

use super::{FittedMap, ScoreKind};

/// The saved state of one method's fitted map, declared in the method's file.
pub trait SavedMap {
    /// The method kind id this state belongs to.
    fn kind(&self) -> &'static str;
    /// The fitted parameters in short human lines (six significant digits),
    /// for the terminal after a fit.
    fn summary(&self) -> Vec<String>;
    /// Check that the state describes a usable map of its kind.
    fn check(&self) -> Result<(), String>;
    /// The map of a checked state, as the fit builds it.
    fn restore(&self) -> Box<dyn FittedMap>;
    /// What the map does with scores outside the range it was fitted on,
    /// as `apply` reports it.
    fn range_rule(&self) -> &'static str;
    /// The score kind the map reads, when its predictions depend on it.
    fn score_kind(&self) -> Option<ScoreKind> {
        None
    }
}

/// Declares [`MapState`] from one line per saved state (its variant and its
/// type) and the dispatch to the state.
macro_rules! saved_maps {
    ($($(#[$doc:meta])* $variant:ident($state:ty),)*) => {
        /// The parameters of a fitted map, by method kind.
        #[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
        #[serde(tag = "kind", rename_all = "kebab-case")]
        pub enum MapState {
            $($(#[$doc])* $variant($state),)*
        }

        impl MapState {
            /// The state of this kind, through which every call dispatches.
            pub fn saved(&self) -> &dyn SavedMap {
                match self {
                    $(MapState::$variant(s) => s,)*
                }
            }
        }
    };
}

saved_maps! {
    /// p = s clamped to [0, 1].
    Identity(super::identity::IdentityState),
    /// p = σ(a·s + b).
    Platt(super::platt::PlattState),
    /// PAV blocks; linear between blocks, flat outside.
    Isotonic(super::isotonic::IsotonicState),
    /// logit p = a·ln s − b·ln(1 − s) + c (tied: a·logit s + c).
    Beta(super::beta::BetaState),
    /// Bins; a score takes the value of its bin, split at midpoints.
    Binning(super::binning::BinningState),
    /// p = σ(β·z), z the log-odds.
    Temperature(super::temperature::TemperatureState),
    /// Points (x, value); linear between, flat outside.
    CenteredIsotonic(super::centered_isotonic::CenteredIsotonicState),
    /// Cubic B-spline coefficients on `intervals` equal intervals of [lo, hi]
    /// of the log-odds; linear continuation outside.
    Spline(super::spline::SplineState),
    /// The constant map p (a spline fitted on all-equal log-odds).
    Constant(super::spline::ConstantState),
    /// Venn–Abers pairs: at each gap (below, between, above the distinct
    /// calibration scores) and each tie (on a distinct score).
    VennAbers(super::venn_abers::VennAbersState),
}

/// The summary line of a fit on Platt's smoothed targets, when `on`.
pub(super) fn smoothed_line(on: bool) -> Vec<String> {
    if on {
        vec!["fitted on Platt's smoothed targets (separable sample)".to_string()]
    } else {
        Vec::new()
    }
}

/// The number of distinct levels of non-decreasing values, and the first and
/// last of them.
pub(super) fn levels(vs: impl Iterator<Item = f64>) -> (usize, f64, f64) {
    let v: Vec<f64> = vs.collect();
    let mut distinct = v.clone();
    distinct.dedup();
    let lo = v.first().copied().unwrap_or(f64::NAN);
    let hi = v.last().copied().unwrap_or(f64::NAN);
    (distinct.len(), lo, hi)
}

/// A number with six significant digits, without trailing zeros.
pub(super) fn sig(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    if !(1e-4..1e9).contains(&v.abs()) {
        return format!("{v:.5e}");
    }
    let digits = (5 - v.abs().log10().floor() as i32).clamp(0, 17) as usize;
    let t = format!("{v:.digits$}");
    if t.contains('.') {
        t.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        t
    }
}

pub(super) fn finite(name: &str, v: f64) -> Result<(), String> {
    if v.is_finite() {
        Ok(())
    } else {
        Err(format!("{name} = {v} is not a finite number"))
    }
}

pub(super) fn probability(name: &str, i: usize, v: f64) -> Result<(), String> {
    if (0.0..=1.0).contains(&v) {
        Ok(())
    } else {
        Err(format!("{name}[{i}] = {v} is not a probability in [0, 1]"))
    }
}

pub(super) fn pseudo(m: f64) -> Result<(), String> {
    if m.is_finite() && m >= 0.0 {
        Ok(())
    } else {
        Err(format!("pseudo_count = {m} must be a finite number >= 0"))
    }
}

/// Strictly increasing, finite, non-empty.
pub(super) fn increasing(name: &str, xs: &[f64]) -> Result<(), String> {
    if xs.is_empty() {
        return Err(format!("{name} is empty"));
    }
    for (i, &x) in xs.iter().enumerate() {
        finite(&format!("{name}[{i}]"), x)?;
        if i > 0 && x <= xs[i - 1] {
            return Err(format!(
                "{name} must increase strictly: {name}[{}] = {} but {name}[{i}] = {x}",
                i - 1,
                xs[i - 1]
            ));
        }
    }
    Ok(())
}

/// Non-decreasing probabilities.
pub(super) fn monotone(name: &str, vs: &[f64]) -> Result<(), String> {
    for (i, &v) in vs.iter().enumerate() {
        probability(name, i, v)?;
        if i > 0 && v < vs[i - 1] {
            return Err(format!(
                "{name} must not decrease: {name}[{}] = {} but {name}[{i}] = {v}",
                i - 1,
                vs[i - 1]
            ));
        }
    }
    Ok(())
}

/// Score ranges [lo, hi] of consecutive pieces: finite, lo ≤ hi, and each
/// piece starting above the previous one's end.
pub(super) fn ranges(name: &str, r: &[(f64, f64)]) -> Result<(), String> {
    if r.is_empty() {
        return Err(format!("{name} is empty"));
    }
    for (i, &(lo, hi)) in r.iter().enumerate() {
        finite(&format!("{name}[{i}].lo"), lo)?;
        finite(&format!("{name}[{i}].hi"), hi)?;
        if hi < lo {
            return Err(format!("{name}[{i}]: hi = {hi} is below lo = {lo}"));
        }
        if i > 0 && lo <= r[i - 1].1 {
            return Err(format!(
                "{name} must be ordered: {name}[{i}].lo = {lo} is not above {name}[{}].hi = {}",
                i - 1,
                r[i - 1].1
            ));
        }
    }
    Ok(())
}

impl MapState {
    /// The method kind id this state belongs to (`constant` is the spline's
    /// map for a sample with one distinct log-odds).
    pub fn kind(&self) -> &'static str {
        self.saved().kind()
    }

    /// The fitted parameters in short human lines (six significant digits):
    /// Platt's a and b, beta's a, b and c, the steps of a step map, the
    /// spline's knots and smoothing, for the terminal after a fit.
    pub fn summary(&self) -> Vec<String> {
        self.saved().summary()
    }

    /// Check that the state describes a usable map of its kind.
    pub fn check(&self) -> Result<(), String> {
        self.saved().check()
    }

    /// Check the state, then rebuild the map it describes.
    pub fn rebuild(&self) -> Result<Box<dyn FittedMap>, String> {
        self.check()?;
        Ok(self.saved().restore())
    }

    /// What the map does with scores outside its fitted range, as `apply`
    /// reports it.
    pub fn range_rule(&self) -> &'static str {
        self.saved().range_rule()
    }

    /// The score kind the map reads, for maps whose predictions depend on it
    /// (beta, temperature, spline).
    pub fn score_kind(&self) -> Option<ScoreKind> {
        self.saved().score_kind()
    }
}
#[cfg(test)]
mod tests {
    use super::MapState;

    /// A saved state may also be written as a list (tag first, then the
    /// fields in order); a short list is refused in the words of a variant
    /// of this enum, as each state's `expecting` says.
    #[test]
    fn short_lists_are_refused_in_the_enum_words() {
        for (tag, variant, fields) in [
            ("identity", "Identity", 0),
            ("platt", "Platt", 3),
            ("isotonic", "Isotonic", 2),
            ("beta", "Beta", 6),
            ("binning", "Binning", 2),
            ("temperature", "Temperature", 3),
            ("centered-isotonic", "CenteredIsotonic", 3),
            ("spline", "Spline", 9),
            ("constant", "Constant", 1),
            ("venn-abers", "VennAbers", 5),
        ] {
            let got = serde_json::from_str::<MapState>(&format!("[\"{tag}\"]"));
            if fields == 0 {
                assert!(got.is_ok(), "{tag}");
                continue;
            }
            let e = got.err().unwrap().to_string();
            let unit = if fields == 1 { "element" } else { "elements" };
            assert_eq!(
                e,
                format!(
                    "invalid length 0, expected struct variant MapState::{variant} with {fields} {unit}"
                ),
                "{tag}"
            );
        }
    }
}
