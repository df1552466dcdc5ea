//! The identity map: predicts the raw probability unchanged.
//!
//! It is the natural reference for probability tasks: a calibrator only earns
//! its place when it beats doing nothing. Only valid for probability scores.

use serde::{Deserialize, Serialize};

use super::state::{MapState, SavedMap};
use super::{
    check_sample, Calibrator, FitError, Fitted, FittedMap, Method, ParamError, ScoreKind, Shape,
};

/// The identity method; it takes no parameters.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Identity {}

impl Method for Identity {
    fn kind(&self) -> &'static str {
        "identity"
    }
    fn keys(&self) -> &'static [(&'static str, &'static str)] {
        &[]
    }
    fn shape(&self) -> Shape {
        Shape::Other
    }
    fn validate(&self, score_kind: ScoreKind) -> Result<(), ParamError> {
        if score_kind != ScoreKind::Probability {
            return Err(ParamError::new(
                "kind",
                "identity",
                "the identity map needs probability scores; this task's scores are margins",
            ));
        }
        Ok(())
    }
    fn calibrator(&self, _score_kind: ScoreKind) -> Box<dyn Calibrator> {
        Box::new(Identity {})
    }
}

pub struct IdentityMap;

impl FittedMap for IdentityMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            *o = s.clamp(0.0, 1.0);
        }
    }
    fn state(&self) -> MapState {
        MapState::Identity(IdentityState {})
    }
}

/// The saved identity map: nothing fitted.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(
    deny_unknown_fields,
    expecting = "struct variant MapState::Identity with 0 elements"
)]
pub struct IdentityState {}

impl SavedMap for IdentityState {
    fn kind(&self) -> &'static str {
        "identity"
    }
    fn summary(&self) -> Vec<String> {
        vec!["p = score, clamped to [0, 1] (nothing fitted)".into()]
    }
    fn check(&self) -> Result<(), String> {
        Ok(())
    }
    fn restore(&self) -> Box<dyn FittedMap> {
        Box::new(IdentityMap)
    }
    fn range_rule(&self) -> &'static str {
        "the identity map passes them through unchanged"
    }
}

impl Calibrator for Identity {
    fn kind(&self) -> &'static str {
        "identity"
    }
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError> {
        check_sample(scores, labels)?;
        Ok(Fitted::plain(Box::new(IdentityMap)))
    }
}
