//! How a method's fit in a unit ended: the `status` column of `units.csv` and
//! the `status` field of the journal.
//!
//! [`UnitStatus`] is written as text ([`UnitStatus::as_str`], also its
//! `Display` and its serde form) and read back with [`UnitStatus::parse`],
//! which round-trips every text exactly: `ok`, `fallback:base-rate`,
//! `one_class` and `failed` are their own variants, and any other text is
//! kept verbatim as [`UnitStatus::Noted`] — the fit notes of today (for
//! example `separable` or `refit+flat`) and whatever a folder written by
//! another version holds, so such a folder still loads and is written back
//! byte for byte.
//!
//! Equality, ordering and hashing go by the text, so a map keyed by statuses
//! sorts them as the text sorts (the order of the report's Unit status table).

use std::cmp::Ordering;
use std::fmt;
use std::hash::{Hash, Hasher};

/// The status text of a unit whose method predicted the smoothed base rate
/// because it could not fit (`on_fit_failure = "fallback"`).
pub const FALLBACK_BASE_RATE: &str = "fallback:base-rate";

const OK: &str = "ok";
const ONE_CLASS: &str = "one_class";
const FAILED: &str = "failed";

/// How a method's fit in one unit ended.
#[derive(Debug, Clone)]
pub enum UnitStatus {
    /// The fit finished without notes (`ok`).
    Ok,
    /// The fit finished with notes, joined by `+` (e.g. `separable`); also
    /// any status text this version does not know, kept as it was read.
    Noted(String),
    /// The method could not fit and predicted the smoothed base rate
    /// (`fallback:base-rate`); its metrics are computed as usual.
    Fallback,
    /// The calibration sample held one class and the unit keeps no values
    /// (`one_class`, under `on_fit_failure = "drop"`).
    OneClass,
    /// The fit failed and the unit keeps no values (`failed`, under
    /// `on_fit_failure = "drop"`, or a base model that could not be fitted).
    Failed,
}

impl UnitStatus {
    /// The status of a finished fit with these notes: `ok` without notes,
    /// else the notes joined by `+` (read as [`UnitStatus::parse`] reads
    /// them, so the value always equals what its text reads back as).
    pub fn from_notes<S: AsRef<str>>(notes: &[S]) -> UnitStatus {
        if notes.is_empty() {
            UnitStatus::Ok
        } else {
            let text: Vec<&str> = notes.iter().map(AsRef::as_ref).collect();
            UnitStatus::parse(&text.join("+"))
        }
    }

    /// The status a text stands for; never fails (unknown text is kept as
    /// [`UnitStatus::Noted`]), and `parse(s).as_str() == s` for every `s`.
    pub fn parse(text: &str) -> UnitStatus {
        match text {
            OK => UnitStatus::Ok,
            FALLBACK_BASE_RATE => UnitStatus::Fallback,
            ONE_CLASS => UnitStatus::OneClass,
            FAILED => UnitStatus::Failed,
            other => UnitStatus::Noted(other.to_string()),
        }
    }

    /// The text written to `units.csv` and the journal.
    pub fn as_str(&self) -> &str {
        match self {
            UnitStatus::Ok => OK,
            UnitStatus::Noted(s) => s,
            UnitStatus::Fallback => FALLBACK_BASE_RATE,
            UnitStatus::OneClass => ONE_CLASS,
            UnitStatus::Failed => FAILED,
        }
    }

    /// True for `ok`.
    pub fn is_ok(&self) -> bool {
        self.as_str() == OK
    }

    /// True when the method predicted the smoothed base rate.
    pub fn is_fallback(&self) -> bool {
        self.as_str() == FALLBACK_BASE_RATE
    }
}

impl fmt::Display for UnitStatus {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl std::str::FromStr for UnitStatus {
    type Err = std::convert::Infallible;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        Ok(UnitStatus::parse(s))
    }
}

impl From<&str> for UnitStatus {
    fn from(s: &str) -> Self {
        UnitStatus::parse(s)
    }
}

impl PartialEq for UnitStatus {
    fn eq(&self, other: &Self) -> bool {
        self.as_str() == other.as_str()
    }
}

impl Eq for UnitStatus {}

impl PartialOrd for UnitStatus {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

impl Ord for UnitStatus {
    fn cmp(&self, other: &Self) -> Ordering {
        self.as_str().cmp(other.as_str())
    }
}

impl Hash for UnitStatus {
    fn hash<H: Hasher>(&self, state: &mut H) {
        self.as_str().hash(state);
    }
}

impl serde::Serialize for UnitStatus {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.as_str())
    }
}

impl<'de> serde::Deserialize<'de> for UnitStatus {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let text = std::borrow::Cow::<'de, str>::deserialize(d)?;
        Ok(UnitStatus::parse(&text))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    /// Every status text a run writes, with the variant it reads as.
    fn written() -> Vec<(&'static str, UnitStatus)> {
        vec![
            ("ok", UnitStatus::Ok),
            ("separable", UnitStatus::Noted("separable".into())),
            ("refit", UnitStatus::Noted("refit".into())),
            ("flat", UnitStatus::Noted("flat".into())),
            (
                "separable+refit",
                UnitStatus::Noted("separable+refit".into()),
            ),
            ("fallback:base-rate", UnitStatus::Fallback),
            ("one_class", UnitStatus::OneClass),
            ("failed", UnitStatus::Failed),
        ]
    }

    #[test]
    fn every_written_status_round_trips() {
        for (text, status) in written() {
            let back = UnitStatus::parse(text);
            assert_eq!(back.as_str(), text);
            assert_eq!(back.to_string(), text);
            assert_eq!(text.parse::<UnitStatus>().unwrap().as_str(), text);
            // The variant, not only the text.
            assert_eq!(
                std::mem::discriminant(&back),
                std::mem::discriminant(&status),
                "{text}"
            );
            let json = serde_json::to_string(&back).unwrap();
            assert_eq!(json, format!("\"{text}\""));
            let from_json: UnitStatus = serde_json::from_str(&json).unwrap();
            assert_eq!(from_json.as_str(), text);
        }
        assert_eq!(FALLBACK_BASE_RATE, UnitStatus::Fallback.as_str());
        assert!(UnitStatus::Fallback.is_fallback() && !UnitStatus::Failed.is_fallback());
        assert!(UnitStatus::Ok.is_ok() && !UnitStatus::OneClass.is_ok());
    }

    #[test]
    fn notes_make_ok_or_a_noted_status() {
        assert_eq!(UnitStatus::from_notes::<&str>(&[]), UnitStatus::Ok);
        let s = UnitStatus::from_notes(&["separable", "refit"]);
        assert!(matches!(&s, UnitStatus::Noted(t) if t == "separable+refit"));
        assert_eq!(
            UnitStatus::from_notes(&["flat".to_string()]).as_str(),
            "flat"
        );
    }

    #[test]
    fn text_of_another_version_loads_and_is_kept() {
        // A status this version never writes (from an older or newer folder,
        // or a hand-edited table): kept verbatim, neither ok nor a fallback.
        for text in ["dropped", "fallback:other", "OK", "", "a,b \"q\""] {
            let s = UnitStatus::parse(text);
            assert!(matches!(&s, UnitStatus::Noted(t) if t == text), "{text:?}");
            assert_eq!(s.as_str(), text);
            assert!(!s.is_ok() && !s.is_fallback(), "{text:?}");
            let json = serde_json::to_string(&s).unwrap();
            assert_eq!(serde_json::from_str::<UnitStatus>(&json).unwrap(), s);
        }
    }

    #[test]
    fn order_and_equality_follow_the_text() {
        let mut by_status: BTreeMap<UnitStatus, usize> = BTreeMap::new();
        let mut by_text: BTreeMap<String, usize> = BTreeMap::new();
        for (i, (text, _)) in written().iter().enumerate() {
            by_status.insert(UnitStatus::parse(text), i);
            by_text.insert(text.to_string(), i);
        }
        let a: Vec<(String, usize)> = by_status
            .into_iter()
            .map(|(k, v)| (k.to_string(), v))
            .collect();
        let b: Vec<(String, usize)> = by_text.into_iter().collect();
        assert_eq!(a, b);
        // `failed` < `fallback:base-rate` < `flat` < `ok` < `one_class`.
        assert!(UnitStatus::Failed < UnitStatus::Fallback);
        assert!(UnitStatus::Fallback < UnitStatus::Noted("flat".into()));
        assert!(UnitStatus::Noted("flat".into()) < UnitStatus::Ok);
        assert!(UnitStatus::Ok < UnitStatus::OneClass);
        // Equal text is equal, however it was built.
        assert_eq!(UnitStatus::Noted("ok".into()), UnitStatus::Ok);
    }
}
