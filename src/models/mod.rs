//! Base models: classifiers that turn an open [`Dataset`] into scores
//! P(label = true) for the calibration benchmark.
//!
//! A model is written in a suite as a [`ModelSpec`] (a `kind` plus settings with
//! documented defaults). [`ModelSpec::validate`] checks the settings before any
//! work starts; [`ModelSpec::fit`] trains on a set of dataset rows with a seed and
//! returns a [`Model`] whose [`Model::score`] gives P(label = true) ∈ [0, 1].
//!
//! | kind          | method                                                    | code |
//! |---------------|-----------------------------------------------------------|------|
//! | `logistic`    | L2-penalised logistic regression by Newton's method (IRLS) | ours ([`logistic`]) |
//! | `naive-bayes` | Gaussian naive Bayes, closed form                          | ours ([`naive_bayes`]) |
//! | `forest`      | random forest of regression trees on 0/1 labels (Breiman 2001) | `smartcore` ([`forest`]) |
//! | `boosting`    | gradient-boosted trees on the logistic loss (Friedman 2001) | `forust-ml` ([`boosting`]) |
//!
//! Features: numeric columns enter as they are; a categorical column with L
//! levels (coded 0..L) is one-hot encoded for the linear and naive Bayes models
//! (see [`encode`]) and enters the tree models as its integer code. Every fit is
//! deterministic given its seed, whatever the number of threads.
//!
//! How the rows are chosen — training rows, out-of-fold scores, the pool that
//! calibration methods see — lives in [`protocol`]; the on-disk pool cache lives
//! in [`cache`].

use serde::{Deserialize, Serialize};

use crate::calibrate::ParamError;
use crate::data::{Dataset, FeatureKind};

pub mod boosting;
pub mod cache;
pub mod encode;
pub mod forest;
pub mod logistic;
pub mod naive_bayes;
pub mod protocol;

/// Why a model could not be fitted or could not score.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ModelError {
    #[error("invalid model setting: {0}")]
    Param(#[from] ParamError),
    #[error("dataset {dataset}: no training rows")]
    NoRows { dataset: String },
    #[error("dataset {dataset}: the training rows hold only one class")]
    OneClass { dataset: String },
    #[error("dataset {dataset}: row {row} is out of range ({rows} rows)")]
    RowOutOfRange {
        dataset: String,
        row: usize,
        rows: usize,
    },
    #[error("dataset {dataset}: column `{column}` row {row}: value {value} is not finite")]
    NonFinite {
        dataset: String,
        column: String,
        row: usize,
        value: f64,
    },
    #[error(
        "dataset {dataset}: column `{column}` row {row}: value {value} is not a level code 0..{levels}"
    )]
    BadLevel {
        dataset: String,
        column: String,
        row: usize,
        value: f64,
        levels: usize,
    },
    #[error("dataset {dataset}: {reason}")]
    Shape { dataset: String, reason: String },
    #[error("dataset {dataset}: {model} fit failed: {reason}")]
    Fit {
        dataset: String,
        model: &'static str,
        reason: String,
    },
    #[error("dataset {dataset}: protocol: {reason}")]
    Protocol { dataset: String, reason: String },
}

/// A fitted base model.
pub trait Model: Send + Sync {
    /// P(label = true) for each of `rows` of `data`, in the order given.
    fn score(&self, data: &Dataset, rows: &[usize]) -> Result<Vec<f64>, ModelError>;
    /// The fitted parameters or a summary of them.
    fn describe(&self) -> serde_json::Value;
}

fn d_l2_logistic() -> f64 {
    1.0
}
fn d_max_iterations() -> usize {
    100
}
fn d_var_smoothing() -> f64 {
    1e-9
}
fn d_trees() -> usize {
    100
}
fn d_min_leaf() -> usize {
    5
}
fn d_rounds() -> usize {
    300
}
fn d_depth() -> usize {
    5
}
fn d_eta() -> f64 {
    0.1
}
fn d_l2_boosting() -> f64 {
    1.0
}
fn d_min_child_hessian() -> f64 {
    1.0
}
fn d_bins() -> u16 {
    256
}
fn d_row_fraction() -> f64 {
    1.0
}

/// A base model as written in a suite: `kind` picks the model, the other keys
/// are its settings (all optional, defaults below). Unknown keys are rejected.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case", deny_unknown_fields)]
pub enum ModelSpec {
    /// Logistic regression on standardised, one-hot encoded features.
    Logistic {
        /// Ridge penalty λ in Σ logloss + (λ/2)·‖w‖² (intercept not penalised);
        /// default 1.0; 0 gives plain maximum likelihood.
        #[serde(default = "d_l2_logistic")]
        l2: f64,
        /// Newton iterations at most; default 100.
        #[serde(default = "d_max_iterations")]
        max_iterations: usize,
    },
    /// Gaussian naive Bayes on one-hot encoded features.
    NaiveBayes {
        /// Added to every variance, as a fraction of the largest feature
        /// variance of the training rows; default 1e-9.
        #[serde(default = "d_var_smoothing")]
        var_smoothing: f64,
    },
    /// Random forest of regression trees fitted to the 0/1 labels; the score is
    /// the mean over trees of the leaf's positive fraction.
    Forest {
        /// Number of trees; default 100.
        #[serde(default = "d_trees")]
        trees: usize,
        /// Fewest training rows in a leaf; default 5.
        #[serde(default = "d_min_leaf")]
        min_leaf: usize,
        /// Deepest tree level; default unlimited.
        #[serde(default)]
        max_depth: Option<u16>,
        /// Features tried at each split; default ⌊√(number of features)⌋.
        #[serde(default)]
        split_features: Option<usize>,
    },
    /// Gradient-boosted trees on the logistic loss; the score is the sigmoid of
    /// the ensemble's log-odds.
    Boosting {
        /// Boosting rounds (trees); default 300.
        #[serde(default = "d_rounds")]
        rounds: usize,
        /// Tree depth; default 5.
        #[serde(default = "d_depth")]
        depth: usize,
        /// Learning rate (shrinkage); default 0.1.
        #[serde(default = "d_eta")]
        eta: f64,
        /// L2 penalty on leaf weights; default 1.0.
        #[serde(default = "d_l2_boosting")]
        l2: f64,
        /// Smallest Hessian sum in a leaf; default 1.0.
        #[serde(default = "d_min_child_hessian")]
        min_child_hessian: f64,
        /// Histogram bins per feature; default 256.
        #[serde(default = "d_bins")]
        bins: u16,
        /// Fraction of training rows sampled for each tree; default 1.0.
        #[serde(default = "d_row_fraction")]
        row_fraction: f64,
    },
}

impl ModelSpec {
    /// Logistic regression with default settings.
    pub fn logistic() -> Self {
        ModelSpec::Logistic {
            l2: d_l2_logistic(),
            max_iterations: d_max_iterations(),
        }
    }
    /// Gaussian naive Bayes with default settings.
    pub fn naive_bayes() -> Self {
        ModelSpec::NaiveBayes {
            var_smoothing: d_var_smoothing(),
        }
    }
    /// Random forest with default settings.
    pub fn forest() -> Self {
        ModelSpec::Forest {
            trees: d_trees(),
            min_leaf: d_min_leaf(),
            max_depth: None,
            split_features: None,
        }
    }
    /// Gradient boosting with default settings.
    pub fn boosting() -> Self {
        ModelSpec::Boosting {
            rounds: d_rounds(),
            depth: d_depth(),
            eta: d_eta(),
            l2: d_l2_boosting(),
            min_child_hessian: d_min_child_hessian(),
            bins: d_bins(),
            row_fraction: d_row_fraction(),
        }
    }

    /// The kind id as written in suites.
    pub fn kind(&self) -> &'static str {
        match self {
            ModelSpec::Logistic { .. } => "logistic",
            ModelSpec::NaiveBayes { .. } => "naive-bayes",
            ModelSpec::Forest { .. } => "forest",
            ModelSpec::Boosting { .. } => "boosting",
        }
    }

    /// Check every setting; the error names the key and its value.
    pub fn validate(&self) -> Result<(), ParamError> {
        fn finite_nonneg(key: &str, v: f64) -> Result<(), ParamError> {
            if !(v.is_finite() && v >= 0.0) {
                return Err(ParamError::new(key, v, "must be a finite number ≥ 0"));
            }
            Ok(())
        }
        match *self {
            ModelSpec::Logistic { l2, max_iterations } => {
                finite_nonneg("l2", l2)?;
                if max_iterations == 0 {
                    return Err(ParamError::new("max_iterations", 0, "must be at least 1"));
                }
            }
            ModelSpec::NaiveBayes { var_smoothing } => {
                finite_nonneg("var_smoothing", var_smoothing)?;
            }
            ModelSpec::Forest {
                trees,
                min_leaf,
                max_depth,
                split_features,
            } => {
                if trees == 0 {
                    return Err(ParamError::new("trees", 0, "must be at least 1"));
                }
                if min_leaf == 0 {
                    return Err(ParamError::new("min_leaf", 0, "must be at least 1"));
                }
                if max_depth == Some(0) {
                    return Err(ParamError::new("max_depth", 0, "must be at least 1"));
                }
                if split_features == Some(0) {
                    return Err(ParamError::new("split_features", 0, "must be at least 1"));
                }
            }
            ModelSpec::Boosting {
                rounds,
                depth,
                eta,
                l2,
                min_child_hessian,
                bins,
                row_fraction,
            } => {
                if rounds == 0 {
                    return Err(ParamError::new("rounds", 0, "must be at least 1"));
                }
                if depth == 0 {
                    return Err(ParamError::new("depth", 0, "must be at least 1"));
                }
                if !(eta.is_finite() && eta > 0.0 && eta <= 1.0) {
                    return Err(ParamError::new("eta", eta, "must lie in (0, 1]"));
                }
                finite_nonneg("l2", l2)?;
                finite_nonneg("min_child_hessian", min_child_hessian)?;
                if !(2..=256).contains(&bins) {
                    return Err(ParamError::new("bins", bins, "must lie in 2..=256"));
                }
                if !(row_fraction.is_finite() && row_fraction > 0.0 && row_fraction <= 1.0) {
                    return Err(ParamError::new(
                        "row_fraction",
                        row_fraction,
                        "must lie in (0, 1]",
                    ));
                }
            }
        }
        Ok(())
    }

    /// Fit on `train_rows` of `data`. The same spec, rows and seed give the
    /// same model bit for bit, whatever the number of threads.
    pub fn fit(
        &self,
        data: &Dataset,
        train_rows: &[usize],
        seed: u64,
    ) -> Result<Box<dyn Model>, ModelError> {
        self.validate()?;
        check_training_rows(data, train_rows)?;
        match *self {
            ModelSpec::Logistic { l2, max_iterations } => Ok(Box::new(logistic::fit(
                data,
                train_rows,
                l2,
                max_iterations,
            )?)),
            ModelSpec::NaiveBayes { var_smoothing } => {
                Ok(Box::new(naive_bayes::fit(data, train_rows, var_smoothing)?))
            }
            ModelSpec::Forest {
                trees,
                min_leaf,
                max_depth,
                split_features,
            } => Ok(Box::new(forest::fit(
                data,
                train_rows,
                &forest::ForestSettings {
                    trees,
                    min_leaf,
                    max_depth,
                    split_features,
                },
                seed,
            )?)),
            ModelSpec::Boosting {
                rounds,
                depth,
                eta,
                l2,
                min_child_hessian,
                bins,
                row_fraction,
            } => Ok(Box::new(boosting::fit(
                data,
                train_rows,
                &boosting::BoostingSettings {
                    rounds,
                    depth,
                    eta,
                    l2,
                    min_child_hessian,
                    bins,
                    row_fraction,
                },
                seed,
            )?)),
        }
    }
}

/// Rows in range, at least one, both classes present.
pub fn check_training_rows(data: &Dataset, rows: &[usize]) -> Result<(), ModelError> {
    check_rows(data, rows)?;
    if rows.is_empty() {
        return Err(ModelError::NoRows {
            dataset: data.id.clone(),
        });
    }
    let pos = rows.iter().filter(|&&r| data.labels[r]).count();
    if pos == 0 || pos == rows.len() {
        return Err(ModelError::OneClass {
            dataset: data.id.clone(),
        });
    }
    Ok(())
}

/// The dataset's columns all have one value per label and one kind each, and
/// every row index is within the dataset.
pub fn check_rows(data: &Dataset, rows: &[usize]) -> Result<(), ModelError> {
    let n = data.rows();
    if let Some((j, col)) = data.columns.iter().enumerate().find(|(_, c)| c.len() != n) {
        return Err(ModelError::Shape {
            dataset: data.id.clone(),
            reason: format!(
                "column `{}` has {} values for {n} labels",
                column_name(data, j),
                col.len()
            ),
        });
    }
    if data.kinds.len() != data.columns.len() {
        return Err(ModelError::Shape {
            dataset: data.id.clone(),
            reason: format!(
                "{} column kinds for {} columns",
                data.kinds.len(),
                data.columns.len()
            ),
        });
    }
    if let Some(&row) = rows.iter().find(|&&r| r >= n) {
        return Err(ModelError::RowOutOfRange {
            dataset: data.id.clone(),
            row,
            rows: n,
        });
    }
    Ok(())
}

/// Every value of every feature on `rows` is finite, and categorical values are
/// level codes. Used by the models that cannot take missing values.
pub fn check_values(data: &Dataset, rows: &[usize]) -> Result<(), ModelError> {
    for (j, col) in data.columns.iter().enumerate() {
        let kind = data.kinds.get(j).copied().unwrap_or(FeatureKind::Numeric);
        for &r in rows {
            let v = col[r];
            if !v.is_finite() {
                return Err(ModelError::NonFinite {
                    dataset: data.id.clone(),
                    column: column_name(data, j),
                    row: r,
                    value: v,
                });
            }
            if let FeatureKind::Categorical { levels } = kind {
                if v < 0.0 || v.fract() != 0.0 || v >= levels as f64 {
                    return Err(ModelError::BadLevel {
                        dataset: data.id.clone(),
                        column: column_name(data, j),
                        row: r,
                        value: v,
                        levels,
                    });
                }
            }
        }
    }
    Ok(())
}

/// The dataset has the `features` columns a model was fitted on.
pub fn check_width(data: &Dataset, features: usize) -> Result<(), ModelError> {
    if data.columns.len() != features {
        return Err(ModelError::Shape {
            dataset: data.id.clone(),
            reason: format!(
                "the model was fitted on {features} feature columns, this dataset has {}",
                data.columns.len()
            ),
        });
    }
    Ok(())
}

fn column_name(data: &Dataset, j: usize) -> String {
    data.names
        .get(j)
        .cloned()
        .unwrap_or_else(|| format!("#{}", j + 1))
}

#[cfg(test)]
pub(crate) mod testdata;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spec_parses_with_defaults_and_rejects_unknown_keys() {
        let spec: ModelSpec = toml::from_str("kind = \"forest\"\ntrees = 50").unwrap();
        assert_eq!(
            spec,
            ModelSpec::Forest {
                trees: 50,
                min_leaf: 5,
                max_depth: None,
                split_features: None
            }
        );
        let spec: ModelSpec = toml::from_str("kind = \"naive-bayes\"").unwrap();
        assert_eq!(spec, ModelSpec::naive_bayes());
        let spec: ModelSpec = toml::from_str("kind = \"boosting\"").unwrap();
        assert_eq!(spec, ModelSpec::boosting());
        assert!(toml::from_str::<ModelSpec>("kind = \"logistic\"\nC = 2.0").is_err());
        assert!(toml::from_str::<ModelSpec>("kind = \"svm\"").is_err());
    }

    #[test]
    fn validate_names_key_and_value() {
        let mut spec = ModelSpec::boosting();
        if let ModelSpec::Boosting { eta, .. } = &mut spec {
            *eta = 1.5;
        }
        let e = spec.validate().unwrap_err();
        assert_eq!(e.key, "eta");
        assert_eq!(e.value, "1.5");
        let e = ModelSpec::Logistic {
            l2: -1.0,
            max_iterations: 10,
        }
        .validate()
        .unwrap_err();
        assert_eq!((e.key.as_str(), e.value.as_str()), ("l2", "-1"));
    }

    #[test]
    fn fit_reports_bad_rows_and_values() {
        let mut d = testdata::two_gaussians(200, 3, 1);
        let spec = ModelSpec::logistic();
        assert!(matches!(
            spec.fit(&d, &[0, 1, 500], 1),
            Err(ModelError::RowOutOfRange { row: 500, .. })
        ));
        assert!(matches!(
            spec.fit(&d, &[], 1),
            Err(ModelError::NoRows { .. })
        ));
        let one_class: Vec<usize> = (0..d.rows()).filter(|&r| d.labels[r]).collect();
        assert!(matches!(
            spec.fit(&d, &one_class, 1),
            Err(ModelError::OneClass { .. })
        ));
        d.columns[0][3] = f64::NAN;
        let rows: Vec<usize> = (0..d.rows()).collect();
        let e = spec.fit(&d, &rows, 1).err().unwrap();
        assert!(matches!(e, ModelError::NonFinite { row: 3, .. }), "{e}");
        d.columns[0][3] = 0.0;
        let mut short = d.clone();
        short.columns[1].pop();
        let e = spec.fit(&short, &rows, 1).err().unwrap();
        assert!(matches!(e, ModelError::Shape { .. }), "{e}");
        let mut narrow = d.clone();
        narrow.columns.pop();
        narrow.kinds.pop();
        narrow.names.pop();
        for spec in [
            ModelSpec::logistic(),
            ModelSpec::naive_bayes(),
            ModelSpec::forest(),
            ModelSpec::boosting(),
        ] {
            let m = spec.fit(&d, &rows, 1).unwrap();
            let e = m.score(&narrow, &[0, 1]).err().unwrap();
            assert!(
                matches!(e, ModelError::Shape { .. }),
                "{}: {e}",
                spec.kind()
            );
        }
        d.columns[2][4] = 7.0; // column 2 is categorical with 3 levels
        let e = ModelSpec::naive_bayes().fit(&d, &rows, 1).err().unwrap();
        assert!(matches!(e, ModelError::BadLevel { row: 4, .. }), "{e}");
    }
}
