//! Scoring rules and calibration measures computed on a unit's test set.
//!
//! A metric is named in a suite by a plain id (see [`MetricId`]); each id
//! becomes one column of `units.csv`. Settings shared by metrics (the log-loss
//! clip, bin counts) live in [`MetricSettings`].
//!
//! Adding a metric: a function in a file of this folder with a `//!` doc that
//! cites its source, one variant in [`MetricId`], one arm in [`MetricId::compute`],
//! and a reference check (see DEVELOPERS.md).

use serde::{Deserialize, Serialize};

pub mod scoring;

/// Settings shared by metrics.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct MetricSettings {
    /// Probabilities are clipped to [clip, 1 − clip] before the log loss.
    pub log_loss_clip: f64,
}

impl Default for MetricSettings {
    fn default() -> Self {
        MetricSettings {
            log_loss_clip: 1e-6,
        }
    }
}

/// A metric id as written in suites. All metrics are losses: lower is better,
/// except where [`MetricId::higher_is_better`] says otherwise.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MetricId {
    LogLoss,
    Brier,
}

impl MetricId {
    pub const ALL: &'static [MetricId] = &[MetricId::LogLoss, MetricId::Brier];

    pub fn as_str(self) -> &'static str {
        match self {
            MetricId::LogLoss => "log_loss",
            MetricId::Brier => "brier",
        }
    }

    pub fn parse(s: &str) -> Option<MetricId> {
        Self::ALL.iter().copied().find(|m| m.as_str() == s)
    }

    pub fn higher_is_better(self) -> bool {
        false
    }

    /// True when the metric is a mean of per-row terms (so its test-set spread
    /// can be estimated from the rows).
    pub fn row_terms(self) -> bool {
        matches!(self, MetricId::LogLoss | MetricId::Brier)
    }

    /// The per-row term of a row-decomposable metric.
    pub fn row_term(self, p: f64, y: bool, settings: &MetricSettings) -> f64 {
        match self {
            MetricId::LogLoss => scoring::log_loss_term(p, y, settings.log_loss_clip),
            MetricId::Brier => scoring::brier_term(p, y),
        }
    }

    /// The metric on predictions `p` for labels `y`.
    pub fn compute(self, p: &[f64], y: &[bool], settings: &MetricSettings) -> f64 {
        match self {
            MetricId::LogLoss => scoring::log_loss(p, y, settings.log_loss_clip),
            MetricId::Brier => scoring::brier(p, y),
        }
    }
}
