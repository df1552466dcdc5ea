//! The identity map: predicts the raw probability unchanged.
//!
//! It is the natural reference for probability tasks: a calibrator only earns
//! its place when it beats doing nothing. Only valid for probability scores.

use super::{check_sample, Calibrator, FitError, Fitted, FittedMap};

pub struct Identity;

pub struct IdentityMap;

impl FittedMap for IdentityMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            *o = s.clamp(0.0, 1.0);
        }
    }
    fn state(&self) -> super::state::MapState {
        super::state::MapState::Identity {}
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
