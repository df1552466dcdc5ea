//! Data sources: a task's rows come from a user's score file or from an open
//! dataset shipped in `data-open/` that a base model turns into scores.

pub mod open;
pub mod rows;
pub mod scorefile;
pub mod twonorm;

/// A feature table for base models: column-major, with per-column kind.
#[derive(Debug, Clone)]
pub struct Dataset {
    pub id: String,
    /// Column names, in order.
    pub names: Vec<String>,
    /// `columns[j][i]` is feature j of row i. Categorical values are coded as
    /// 0, 1, 2, ... (see `kinds`).
    pub columns: Vec<Vec<f64>>,
    pub kinds: Vec<FeatureKind>,
    /// `labels[i]` is true for the positive class.
    pub labels: Vec<bool>,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FeatureKind {
    Numeric,
    /// Nominal with this many levels, coded 0..levels.
    Categorical {
        levels: usize,
    },
}

impl Dataset {
    pub fn rows(&self) -> usize {
        self.labels.len()
    }
}

/// Which part of a task a row belongs to when the task pins it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Side {
    /// The calibration reservoir that calibration samples are drawn from.
    Reservoir,
    /// The fixed test set.
    Test,
}

/// One row set with scores: what every task becomes before the sweep.
///
/// With `sides = None` the run engine splits the rows once with the task seed
/// into test set and reservoir by the suite's test-set rule. With `Some`, every
/// row is pinned (a score file's split column; the cross-fitted protocol, where
/// out-of-fold training scores form the reservoir and the refitted model's scores
/// on held-out rows form the test set).
#[derive(Debug, Clone)]
pub struct ScorePool {
    pub scores: Vec<f64>,
    pub labels: Vec<bool>,
    pub sides: Option<Vec<Side>>,
}
