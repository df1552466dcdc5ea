//! Scoring rules and calibration measures computed on a unit's test set.
//!
//! A metric is named in a suite by a plain id (see [`MetricId`]); each id
//! becomes one column of `units.csv`, so a decomposition contributes one id per
//! term. Settings shared by metrics (the log-loss clip, bin counts, the ICI
//! smoother, the decision threshold) live in [`MetricSettings`], the suite's
//! `[metric_settings]` table.
//!
//! Every metric is a function of the test predictions p and labels y only. A
//! value that is undefined on a test set (for example the AUC when the test set
//! holds one class) is NaN, never a panic; see each module for when that
//! happens.
//!
//! Adding a metric: a function in a file of this folder with a `//!` doc that
//! cites its source, one variant in [`MetricId`], one arm in [`MetricId::compute`],
//! and a reference check (see DEVELOPERS.md).
//!
//! Files: [`scoring`] (log loss, Brier), [`decompose`] (Murphy and CORP
//! decompositions), [`binned`] (ECE), [`smooth_ece`], [`recalibration`]
//! (calibration slope and intercept), [`spiegelhalter`], [`ici`], [`ranking`]
//! (AUC), [`threshold`] (cost-weighted loss and net benefit at a decision
//! threshold, or at each of several: [`MetricId::ThresholdCostAt`]),
//! [`elementary`] (elementary scores and the Murphy diagram).

use std::collections::BTreeMap;
use std::sync::{Mutex, OnceLock};

use serde::{Deserialize, Serialize};

pub mod binned;
pub mod decompose;
pub mod elementary;
pub mod ici;
pub mod ranking;
pub mod recalibration;
pub mod reliability;
pub mod scoring;
pub mod smooth_ece;
pub mod spiegelhalter;
pub mod threshold;

use decompose::CorpScore;

/// Settings shared by metrics: the suite's `[metric_settings]` table. Every key
/// is optional; see [`MetricSettings::default`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct MetricSettings {
    /// Probabilities are clipped to [clip, 1 − clip] before the log loss (also
    /// its CORP decomposition) and before the logit of the calibration slope
    /// and intercept. Default 1e-6.
    pub log_loss_clip: f64,
    /// Bins of `ece_width` and `ece_mass`. Default 10.
    pub ece_bins: usize,
    /// Equal-width bins of the Murphy decomposition; 0 groups by distinct
    /// prediction. Default 10.
    pub murphy_bins: usize,
    /// Fraction of the test rows in each local fit of the ICI smoother.
    /// Default 0.75.
    pub ici_span: f64,
    /// The ICI smoother fits at points at least `ici_delta` × (range of p)
    /// apart and interpolates in between; 0 fits at every row. Default 0.01.
    pub ici_delta: f64,
    /// The operating threshold t of `threshold_cost` and `net_benefit`: a
    /// prediction is acted on when p ≥ t. Default 0.5.
    pub decision_threshold: f64,
    /// Several operating thresholds, each in (0, 1): with this list or
    /// `cost_ratios`, `threshold_cost` and `net_benefit` become one metric
    /// per threshold (`threshold_cost@0.2`, …; see [`MetricSettings::thresholds`]).
    /// Default empty.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub decision_thresholds: Vec<f64>,
    /// Operating points given as cost ratios c = (cost of a false positive) :
    /// (cost of a false negative), each finite and above 0; c gives the
    /// threshold t = c/(1 + c) (Hernández-Orallo, Flach & Ferri 2012, JMLR 13).
    /// Default empty.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub cost_ratios: Vec<f64>,
}

impl Default for MetricSettings {
    fn default() -> Self {
        MetricSettings {
            log_loss_clip: 1e-6,
            ece_bins: 10,
            murphy_bins: 10,
            ici_span: 0.75,
            ici_delta: 0.01,
            decision_threshold: 0.5,
            decision_thresholds: Vec::new(),
            cost_ratios: Vec::new(),
        }
    }
}

/// The threshold t = c/(1 + c) of a false-positive : false-negative cost
/// ratio c; NaN unless c is finite and above 0.
pub fn cost_ratio_threshold(c: f64) -> f64 {
    if c.is_finite() && c > 0.0 {
        c / (1.0 + c)
    } else {
        f64::NAN
    }
}

/// A metric setting that cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("metric_settings.{key} = {value}: {reason}")]
pub struct SettingsError {
    pub key: &'static str,
    pub value: String,
    pub reason: &'static str,
}

/// Largest accepted bin count (more bins than any test set has rows).
pub const MAX_BINS: usize = 1_000_000;

impl MetricSettings {
    /// Check every setting; the error names the first bad key and its value.
    pub fn validate(&self) -> Result<(), SettingsError> {
        let bad = |key, value: String, reason| Err(SettingsError { key, value, reason });
        let c = self.log_loss_clip;
        if !(c > 0.0 && c < 0.5) {
            return bad("log_loss_clip", c.to_string(), "must be in (0, 0.5)");
        }
        if self.ece_bins == 0 || self.ece_bins > MAX_BINS {
            return bad(
                "ece_bins",
                self.ece_bins.to_string(),
                "must be between 1 and 1000000",
            );
        }
        if self.murphy_bins > MAX_BINS {
            return bad(
                "murphy_bins",
                self.murphy_bins.to_string(),
                "must be between 0 (distinct values) and 1000000",
            );
        }
        if !(self.ici_span > 0.0 && self.ici_span <= 1.0) {
            return bad("ici_span", self.ici_span.to_string(), "must be in (0, 1]");
        }
        if !(self.ici_delta >= 0.0 && self.ici_delta < 1.0) {
            return bad("ici_delta", self.ici_delta.to_string(), "must be in [0, 1)");
        }
        let t = self.decision_threshold;
        if !(t > 0.0 && t < 1.0) {
            return bad(
                "decision_threshold",
                t.to_string(),
                "must be in (0, 1): a probability strictly between 0 and 1 from which predictions are acted on",
            );
        }
        for &t in &self.decision_thresholds {
            if !(t > 0.0 && t < 1.0) {
                return bad(
                    "decision_thresholds",
                    t.to_string(),
                    "every threshold must be in (0, 1): a probability strictly between 0 and 1 from which predictions are acted on",
                );
            }
        }
        for &c in &self.cost_ratios {
            let t = cost_ratio_threshold(c);
            if !(t > 0.0 && t < 1.0) {
                return bad(
                    "cost_ratios",
                    c.to_string(),
                    "every cost ratio (false positive : false negative) must be a finite number above 0 whose threshold c/(1 + c) is below 1",
                );
            }
        }
        Ok(())
    }

    /// The operating thresholds of `decision_thresholds` and `cost_ratios`
    /// together, ascending, each once (cost ratios as c/(1 + c)); empty when
    /// neither list is given, and then the metrics at a threshold use
    /// `decision_threshold`. Values outside (0, 1) are left out (see
    /// [`MetricSettings::validate`]).
    pub fn thresholds(&self) -> Vec<Cut> {
        let mut v: Vec<Cut> = self
            .decision_thresholds
            .iter()
            .copied()
            .chain(self.cost_ratios.iter().map(|&c| cost_ratio_threshold(c)))
            .filter_map(Cut::new)
            .collect();
        v.sort();
        v.dedup();
        v
    }
}

/// An operating threshold t in (0, 1) carried by a metric id
/// ([`MetricId::ThresholdCostAt`], [`MetricId::NetBenefitAt`]). It holds the
/// exact double, so ids compare, sort and hash by t and the column name
/// (t in Rust's shortest round-trip form) reads back to the same id.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Cut(u64);

impl Cut {
    /// The threshold `t`, or `None` unless 0 < t < 1.
    pub fn new(t: f64) -> Option<Cut> {
        // For positive doubles the bit patterns order as the values do.
        (t > 0.0 && t < 1.0).then_some(Cut(t.to_bits()))
    }

    pub fn value(self) -> f64 {
        f64::from_bits(self.0)
    }
}

impl std::fmt::Display for Cut {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}", self.value())
    }
}

/// The name `<base>@<t>` of a metric at a threshold, made once per distinct
/// name and kept for the life of the process (there are as many as a suite
/// has thresholds), so [`MetricId::as_str`] can stay `&'static str`.
fn at_name(base: &'static str, t: Cut) -> &'static str {
    static NAMES: OnceLock<Mutex<BTreeMap<(&'static str, Cut), &'static str>>> = OnceLock::new();
    let mut names = NAMES
        .get_or_init(Default::default)
        .lock()
        .unwrap_or_else(|e| e.into_inner());
    names
        .entry((base, t))
        .or_insert_with(|| Box::leak(format!("{base}@{t}").into_boxed_str()))
}

/// Which way a metric is better.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Goal {
    /// A loss: lower is better.
    Lower,
    /// Higher is better (AUC, resolution, discrimination, net benefit).
    Higher,
    /// Closer to this value is better (calibration slope 1, intercept 0, Z 0).
    Toward(f64),
    /// A property of the labels, not of the predictions (uncertainty terms).
    Descriptive,
}

/// A metric id as written in suites. Most metrics are losses: see
/// [`MetricId::goal`]. Serialised as its [`MetricId::as_str`] text.
///
/// `ThresholdCostAt(t)` and `NetBenefitAt(t)` are `threshold_cost` and
/// `net_benefit` at one of the suite's several operating thresholds, named
/// `threshold_cost@<t>` and `net_benefit@<t>` with t in its shortest
/// round-trip decimal form (`threshold_cost@0.2`); they are not in
/// [`MetricId::ALL`]. The plain ids use `decision_threshold`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum MetricId {
    LogLoss,
    Brier,
    MurphyRel,
    MurphyRes,
    MurphyUnc,
    CorpBrierMcb,
    CorpBrierDsc,
    CorpBrierUnc,
    CorpLogMcb,
    CorpLogDsc,
    CorpLogUnc,
    EceWidth,
    EceMass,
    SmoothEce,
    CalibrationSlope,
    CalibrationIntercept,
    SpiegelhalterZ,
    Ici,
    Auc,
    ThresholdCost,
    NetBenefit,
    ThresholdCostAt(Cut),
    NetBenefitAt(Cut),
}

impl Serialize for MetricId {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.as_str())
    }
}

impl<'de> Deserialize<'de> for MetricId {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        let text = String::deserialize(d)?;
        MetricId::parse(&text)
            .ok_or_else(|| serde::de::Error::custom(format!("unknown metric `{text}`")))
    }
}

impl std::fmt::Display for MetricId {
    /// The id as written in suites and in the `units.csv` header.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.pad(self.as_str())
    }
}

impl AsRef<str> for MetricId {
    fn as_ref(&self) -> &str {
        self.as_str()
    }
}

impl PartialEq<str> for MetricId {
    fn eq(&self, other: &str) -> bool {
        self.as_str() == other
    }
}

impl PartialEq<&str> for MetricId {
    fn eq(&self, other: &&str) -> bool {
        self.as_str() == *other
    }
}

impl MetricId {
    pub const ALL: &'static [MetricId] = &[
        MetricId::LogLoss,
        MetricId::Brier,
        MetricId::MurphyRel,
        MetricId::MurphyRes,
        MetricId::MurphyUnc,
        MetricId::CorpBrierMcb,
        MetricId::CorpBrierDsc,
        MetricId::CorpBrierUnc,
        MetricId::CorpLogMcb,
        MetricId::CorpLogDsc,
        MetricId::CorpLogUnc,
        MetricId::EceWidth,
        MetricId::EceMass,
        MetricId::SmoothEce,
        MetricId::CalibrationSlope,
        MetricId::CalibrationIntercept,
        MetricId::SpiegelhalterZ,
        MetricId::Ici,
        MetricId::Auc,
        MetricId::ThresholdCost,
        MetricId::NetBenefit,
    ];

    pub fn as_str(self) -> &'static str {
        match self {
            MetricId::LogLoss => "log_loss",
            MetricId::Brier => "brier",
            MetricId::MurphyRel => "murphy_rel",
            MetricId::MurphyRes => "murphy_res",
            MetricId::MurphyUnc => "murphy_unc",
            MetricId::CorpBrierMcb => "corp_brier_mcb",
            MetricId::CorpBrierDsc => "corp_brier_dsc",
            MetricId::CorpBrierUnc => "corp_brier_unc",
            MetricId::CorpLogMcb => "corp_log_mcb",
            MetricId::CorpLogDsc => "corp_log_dsc",
            MetricId::CorpLogUnc => "corp_log_unc",
            MetricId::EceWidth => "ece_width",
            MetricId::EceMass => "ece_mass",
            MetricId::SmoothEce => "smooth_ece",
            MetricId::CalibrationSlope => "calibration_slope",
            MetricId::CalibrationIntercept => "calibration_intercept",
            MetricId::SpiegelhalterZ => "spiegelhalter_z",
            MetricId::Ici => "ici",
            MetricId::Auc => "auc",
            MetricId::ThresholdCost => "threshold_cost",
            MetricId::NetBenefit => "net_benefit",
            MetricId::ThresholdCostAt(t) => at_name("threshold_cost", t),
            MetricId::NetBenefitAt(t) => at_name("net_benefit", t),
        }
    }

    /// The id of a name: one of [`MetricId::ALL`], or `threshold_cost@<t>` /
    /// `net_benefit@<t>` with 0 < t < 1 written exactly as [`MetricId::as_str`]
    /// writes it (so a name and its id round-trip).
    pub fn parse(s: &str) -> Option<MetricId> {
        if let Some((base, t)) = s.split_once('@') {
            let cut = t.parse::<f64>().ok().and_then(Cut::new)?;
            if cut.to_string() != t {
                return None;
            }
            return match base {
                "threshold_cost" => Some(MetricId::ThresholdCostAt(cut)),
                "net_benefit" => Some(MetricId::NetBenefitAt(cut)),
                _ => None,
            };
        }
        Self::ALL.iter().copied().find(|m| m.as_str() == s)
    }

    /// The same metric at operating threshold `t` (`threshold_cost` →
    /// `threshold_cost@t`); `None` for a metric that uses no threshold.
    pub fn at(self, t: Cut) -> Option<MetricId> {
        match self {
            MetricId::ThresholdCost | MetricId::ThresholdCostAt(_) => {
                Some(MetricId::ThresholdCostAt(t))
            }
            MetricId::NetBenefit | MetricId::NetBenefitAt(_) => Some(MetricId::NetBenefitAt(t)),
            _ => None,
        }
    }

    /// The operating threshold this metric scores at: its own for an id of
    /// several thresholds, else `decision_threshold`; `None` for a metric
    /// that uses no threshold.
    pub fn threshold(self, settings: &MetricSettings) -> Option<f64> {
        match self {
            MetricId::ThresholdCost | MetricId::NetBenefit => Some(settings.decision_threshold),
            MetricId::ThresholdCostAt(t) | MetricId::NetBenefitAt(t) => Some(t.value()),
            _ => None,
        }
    }

    /// Which way the metric is better.
    pub fn goal(self) -> Goal {
        use MetricId::*;
        match self {
            Auc | MurphyRes | CorpBrierDsc | CorpLogDsc | NetBenefit | NetBenefitAt(_) => {
                Goal::Higher
            }
            MurphyUnc | CorpBrierUnc | CorpLogUnc => Goal::Descriptive,
            CalibrationSlope => Goal::Toward(1.0),
            CalibrationIntercept | SpiegelhalterZ => Goal::Toward(0.0),
            LogLoss | Brier | MurphyRel | CorpBrierMcb | CorpLogMcb | EceWidth | EceMass
            | SmoothEce | Ici | ThresholdCost | ThresholdCostAt(_) => Goal::Lower,
        }
    }

    /// True when a larger value is better ([`Goal::Higher`]); every other
    /// goal is compared as a loss.
    pub fn higher_is_better(self) -> bool {
        self.goal() == Goal::Higher
    }

    /// True when the metric depends on `decision_threshold` (it scores the
    /// decision p ≥ t rather than the probability).
    pub fn uses_decision_threshold(self) -> bool {
        matches!(
            self,
            MetricId::ThresholdCost
                | MetricId::NetBenefit
                | MetricId::ThresholdCostAt(_)
                | MetricId::NetBenefitAt(_)
        )
    }

    /// True when the metric is a mean of per-row terms (so its test-set spread
    /// can be estimated from the rows).
    pub fn row_terms(self) -> bool {
        matches!(self, MetricId::LogLoss | MetricId::Brier) || self.uses_decision_threshold()
    }

    /// The row loss from which a prediction counts as extreme for this metric,
    /// or `None` when the metric is smooth in the prediction everywhere.
    ///
    /// For log loss that is the clipped maximum −ln(clip) (less 10⁻⁷ nats for
    /// rounding): the clip had to bound the row's loss because the method gave
    /// the observed class a probability ≤ clip — typically an exact 0 or 1 from
    /// a step-function map such as plain isotonic regression or histogram
    /// binning. Where a map reaches 0 or 1 is decided by single calibration
    /// rows (which rows end its first and last blocks), and −ln p has
    /// curvature 1/p², so the loss is far from its second-order expansion
    /// there. The Brier score is a quadratic and never has extreme rows.
    pub fn extreme_row_loss(self, settings: &MetricSettings) -> Option<f64> {
        match self {
            MetricId::LogLoss => Some(-settings.log_loss_clip.ln() - 1e-7),
            _ => None,
        }
    }

    /// The per-row term of a row-decomposable metric; NaN for the others.
    pub fn row_term(self, p: f64, y: bool, settings: &MetricSettings) -> f64 {
        match self {
            MetricId::LogLoss => scoring::log_loss_term(p, y, settings.log_loss_clip),
            MetricId::Brier => scoring::brier_term(p, y),
            MetricId::ThresholdCost => {
                threshold::threshold_cost_term(p, y, settings.decision_threshold)
            }
            MetricId::NetBenefit => threshold::net_benefit_term(p, y, settings.decision_threshold),
            MetricId::ThresholdCostAt(t) => threshold::threshold_cost_term(p, y, t.value()),
            MetricId::NetBenefitAt(t) => threshold::net_benefit_term(p, y, t.value()),
            _ => f64::NAN,
        }
    }

    /// The metric on predictions `p` for labels `y` (NaN when undefined).
    pub fn compute(self, p: &[f64], y: &[bool], settings: &MetricSettings) -> f64 {
        let clip = settings.log_loss_clip;
        if p.is_empty() || p.len() != y.len() {
            return f64::NAN;
        }
        match self {
            MetricId::LogLoss => scoring::log_loss(p, y, clip),
            MetricId::Brier => scoring::brier(p, y),
            MetricId::MurphyRel => decompose::murphy(p, y, settings.murphy_bins).rel,
            MetricId::MurphyRes => decompose::murphy(p, y, settings.murphy_bins).res,
            MetricId::MurphyUnc => decompose::murphy(p, y, settings.murphy_bins).unc,
            MetricId::CorpBrierMcb => decompose::corp(p, y, CorpScore::Brier, clip).mcb,
            MetricId::CorpBrierDsc => decompose::corp(p, y, CorpScore::Brier, clip).dsc,
            MetricId::CorpBrierUnc => decompose::corp(p, y, CorpScore::Brier, clip).unc,
            MetricId::CorpLogMcb => decompose::corp(p, y, CorpScore::LogLoss, clip).mcb,
            MetricId::CorpLogDsc => decompose::corp(p, y, CorpScore::LogLoss, clip).dsc,
            MetricId::CorpLogUnc => decompose::corp(p, y, CorpScore::LogLoss, clip).unc,
            MetricId::EceWidth => binned::ece_equal_width(p, y, settings.ece_bins),
            MetricId::EceMass => binned::ece_equal_mass(p, y, settings.ece_bins),
            MetricId::SmoothEce => smooth_ece::smooth_ece(p, y),
            MetricId::CalibrationSlope => recalibration::calibration_slope(p, y, clip),
            MetricId::CalibrationIntercept => recalibration::calibration_intercept(p, y, clip),
            MetricId::SpiegelhalterZ => spiegelhalter::spiegelhalter_z(p, y),
            MetricId::Ici => ici::ici(p, y, settings.ici_span, settings.ici_delta),
            MetricId::Auc => ranking::auc(p, y),
            MetricId::ThresholdCost => threshold::threshold_cost(p, y, settings.decision_threshold),
            MetricId::NetBenefit => threshold::net_benefit(p, y, settings.decision_threshold),
            MetricId::ThresholdCostAt(t) => threshold::threshold_cost(p, y, t.value()),
            MetricId::NetBenefitAt(t) => threshold::net_benefit(p, y, t.value()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ids_round_trip_and_match_serde_names() {
        for &m in MetricId::ALL {
            assert_eq!(MetricId::parse(m.as_str()), Some(m));
            let json = serde_json::to_string(&m).unwrap();
            assert_eq!(json, format!("\"{}\"", m.as_str()));
        }
        assert_eq!(MetricId::parse("nope"), None);
    }

    #[test]
    fn extreme_row_loss_is_the_clipped_maximum_for_log_loss_only() {
        let s = MetricSettings::default();
        let limit = MetricId::LogLoss.extreme_row_loss(&s).unwrap();
        // −ln 10⁻⁶ = 6 ln 10 = 13.8155… nats, less the rounding allowance.
        assert!((limit - (6.0 * 10f64.ln() - 1e-7)).abs() < 1e-12);
        // Exact 0 and 1 predictions against the observed class reach it, from
        // either side of the clip; a probability of 10⁻⁵ does not.
        assert!(MetricId::LogLoss.row_term(0.0, true, &s) >= limit);
        assert!(MetricId::LogLoss.row_term(1.0, false, &s) >= limit);
        assert!(MetricId::LogLoss.row_term(1e-6, true, &s) >= limit);
        assert!(MetricId::LogLoss.row_term(1e-5, true, &s) < limit);
        assert!(MetricId::LogLoss.row_term(0.0, false, &s) < limit);
        for &m in MetricId::ALL.iter().filter(|&&m| m != MetricId::LogLoss) {
            assert_eq!(m.extreme_row_loss(&s), None, "{}", m.as_str());
        }
    }

    #[test]
    fn settings_defaults_unknown_keys_and_validation() {
        let s: MetricSettings = toml::from_str("ece_bins = 15").unwrap();
        assert_eq!(s.ece_bins, 15);
        assert_eq!(s.murphy_bins, MetricSettings::default().murphy_bins);
        assert!(toml::from_str::<MetricSettings>("ece_binz = 15").is_err());
        assert!(MetricSettings::default().validate().is_ok());
        let e = MetricSettings {
            ece_bins: 0,
            ..Default::default()
        }
        .validate()
        .unwrap_err();
        assert_eq!(e.key, "ece_bins");
        assert!(e.to_string().contains("ece_bins = 0"));
        let e = MetricSettings {
            ici_span: f64::NAN,
            ..Default::default()
        }
        .validate()
        .unwrap_err();
        assert_eq!(e.key, "ici_span");
        let e = MetricSettings {
            log_loss_clip: 0.5,
            ..Default::default()
        }
        .validate()
        .unwrap_err();
        assert_eq!(e.key, "log_loss_clip");
        for t in [0.0, 1.0, -0.2, 1.5, f64::NAN] {
            let e = MetricSettings {
                decision_threshold: t,
                ..Default::default()
            }
            .validate()
            .unwrap_err();
            assert_eq!(e.key, "decision_threshold");
            assert!(
                e.to_string().starts_with(&format!(
                    "metric_settings.decision_threshold = {t}: must be in (0, 1)"
                )),
                "{e}"
            );
        }
        let s: MetricSettings = toml::from_str("decision_threshold = 0.1").unwrap();
        assert_eq!(s.decision_threshold, 0.1);
        assert!(s.validate().is_ok());
    }

    #[test]
    fn decision_metrics_are_means_of_their_row_terms() {
        let s = MetricSettings {
            decision_threshold: 0.25,
            ..Default::default()
        };
        let p = [0.1, 0.25, 0.3, 0.9, 0.2, 0.6, 0.05];
        let y = [true, false, true, false, false, true, true];
        for m in [MetricId::ThresholdCost, MetricId::NetBenefit] {
            assert!(m.row_terms());
            let mean = p
                .iter()
                .zip(&y)
                .map(|(&pi, &yi)| m.row_term(pi, yi, &s))
                .sum::<f64>()
                / p.len() as f64;
            assert_eq!(m.compute(&p, &y, &s), mean, "{m}");
        }
        assert_eq!(MetricId::ThresholdCost.goal(), Goal::Lower);
        assert!(MetricId::NetBenefit.higher_is_better());
    }

    #[test]
    fn ids_at_a_threshold_round_trip_through_their_names() {
        let t = Cut::new(0.2).unwrap();
        let m = MetricId::ThresholdCost.at(t).unwrap();
        assert_eq!(m, MetricId::ThresholdCostAt(t));
        assert_eq!(m.as_str(), "threshold_cost@0.2");
        assert_eq!(MetricId::parse("threshold_cost@0.2"), Some(m));
        assert_eq!(serde_json::to_string(&m).unwrap(), "\"threshold_cost@0.2\"");
        let back: MetricId = serde_json::from_str("\"net_benefit@0.75\"").unwrap();
        assert_eq!(back, MetricId::NetBenefitAt(Cut::new(0.75).unwrap()));
        assert!(serde_json::from_str::<MetricId>("\"net_benefit@2\"").is_err());
        // A cost ratio of 2 gives t = 2/3, written in full so it reads back.
        let third = Cut::new(cost_ratio_threshold(2.0)).unwrap();
        let name = MetricId::NetBenefitAt(third).as_str();
        assert_eq!(name, "net_benefit@0.6666666666666666");
        assert_eq!(MetricId::parse(name), Some(MetricId::NetBenefitAt(third)));
        // Other spellings of a threshold, thresholds outside (0, 1) and
        // metrics without a threshold are no ids.
        for bad in [
            "threshold_cost@0.20",
            "threshold_cost@.2",
            "threshold_cost@0",
            "threshold_cost@1",
            "threshold_cost@NaN",
            "threshold_cost@",
            "brier@0.2",
            "threshold_cost@0.2@0.3",
        ] {
            assert_eq!(MetricId::parse(bad), None, "{bad}");
        }
        assert_eq!(MetricId::Brier.at(t), None);
        // Ids order by base metric, then by threshold.
        let lo = MetricId::ThresholdCostAt(Cut::new(0.1).unwrap());
        assert!(lo < m && m < MetricId::NetBenefitAt(Cut::new(0.01).unwrap()));
        // Each id scores at its own threshold, whatever `decision_threshold` is.
        let s = MetricSettings::default();
        let p = [0.1, 0.25, 0.3, 0.9];
        let y = [true, false, true, false];
        assert_eq!(
            m.compute(&p, &y, &s),
            threshold::threshold_cost(&p, &y, 0.2)
        );
        assert_eq!(m.threshold(&s), Some(0.2));
        assert_eq!(MetricId::ThresholdCost.threshold(&s), Some(0.5));
        assert_eq!(MetricId::Auc.threshold(&s), None);
        assert!(m.row_terms() && m.uses_decision_threshold());
        assert_eq!(m.goal(), Goal::Lower);
        assert!(MetricId::NetBenefitAt(t).higher_is_better());
    }

    #[test]
    fn threshold_lists_are_checked_and_merged() {
        let s: MetricSettings =
            toml::from_str("decision_thresholds = [0.3, 0.1, 0.5]\ncost_ratios = [1.0, 0.25]")
                .unwrap();
        assert!(s.validate().is_ok());
        // 0.5 from both lists once; 0.25 : 1 gives 0.2.
        let t: Vec<f64> = s.thresholds().iter().map(|c| c.value()).collect();
        assert_eq!(t, [0.1, 0.2, 0.3, 0.5]);
        assert!(MetricSettings::default().thresholds().is_empty());
        for (toml, key, value) in [
            (
                "decision_thresholds = [0.2, 1.0]",
                "decision_thresholds",
                "1",
            ),
            ("decision_thresholds = [0.0]", "decision_thresholds", "0"),
            ("decision_thresholds = [nan]", "decision_thresholds", "NaN"),
            ("cost_ratios = [0.0]", "cost_ratios", "0"),
            ("cost_ratios = [-1.0]", "cost_ratios", "-1"),
            ("cost_ratios = [inf]", "cost_ratios", "inf"),
            // Finite, but its threshold rounds to 1.
            (
                "cost_ratios = [1e300]",
                "cost_ratios",
                &1e300f64.to_string(),
            ),
        ] {
            let s: MetricSettings = toml::from_str(toml).unwrap();
            let e = s.validate().unwrap_err();
            assert_eq!(e.key, key, "{toml}");
            assert_eq!(e.value, value, "{toml}");
        }
        assert!((cost_ratio_threshold(3.0) - 0.75).abs() < 1e-15);
        assert!(cost_ratio_threshold(0.0).is_nan());
    }

    #[test]
    fn mismatched_lengths_give_nan_not_panic() {
        let s = MetricSettings::default();
        for &m in MetricId::ALL {
            assert!(m.compute(&[0.5, 0.2], &[true], &s).is_nan());
            assert!(m.compute(&[], &[], &s).is_nan());
        }
    }
}
