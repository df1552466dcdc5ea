//! Gradient-boosted trees on the logistic loss.
//!
//! Math: an additive model F(x) = F₀ + η Σ_t f_t(x) of depth-limited regression
//! trees, each fitted by a second-order (Newton) step on the logistic loss
//! ℓ(y, F) = softplus(F) − yF, with gradient g = σ(F) − y and Hessian
//! h = σ(F)(1 − σ(F)); a leaf's weight is −Σg / (Σh + λ) and a split's gain is
//! the usual regularised second-order gain (Friedman 2001, "Greedy function
//! approximation: a gradient boosting machine", Annals of Statistics 29; Chen &
//! Guestrin 2016, "XGBoost: a scalable tree boosting system", KDD). F is a
//! log-odds, so the score is P(y = 1 | x) = σ(F(x)).
//!
//! Implementation: `forust-ml`'s `GradientBooster` with the `LogLoss` objective
//! on histogram-binned features (column-major input); its `predict` returns F,
//! to which we apply the sigmoid. Its histogram sums are split into
//! thread-count-independent segments, so results do not depend on the number of
//! threads (checked by a test). Columns constant on the training rows are left
//! out (the library rejects them). NaN feature values are passed through as
//! missing values, which the library routes to a learned branch side.
//! Categorical columns enter as their integer level codes.

use forust_ml::objective::ObjectiveType;
use forust_ml::{GradientBooster, Matrix};
use serde_json::json;

use super::{Model, ModelError};
use crate::calibrate::sigmoid;
use crate::data::Dataset;

#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BoostingSettings {
    pub rounds: usize,
    pub depth: usize,
    pub eta: f64,
    pub l2: f64,
    pub min_child_hessian: f64,
    pub bins: u16,
    pub row_fraction: f64,
}

pub struct Boosting {
    booster: GradientBooster,
    /// Number of dataset columns at fit time.
    features: usize,
    /// Dataset columns used by the booster, in order.
    used: Vec<usize>,
    settings: BoostingSettings,
}

fn check_no_infinities(data: &Dataset, rows: &[usize]) -> Result<(), ModelError> {
    for (j, col) in data.columns.iter().enumerate() {
        for &r in rows {
            if col[r].is_infinite() {
                return Err(ModelError::NonFinite {
                    dataset: data.id.clone(),
                    column: data.names.get(j).cloned().unwrap_or_default(),
                    row: r,
                    value: col[r],
                });
            }
        }
    }
    Ok(())
}

fn column_major(data: &Dataset, cols: &[usize], rows: &[usize]) -> Vec<f64> {
    let mut v = Vec::with_capacity(rows.len() * cols.len());
    for &j in cols {
        let col = &data.columns[j];
        v.extend(rows.iter().map(|&r| col[r]));
    }
    v
}

pub fn fit(
    data: &Dataset,
    rows: &[usize],
    settings: &BoostingSettings,
    seed: u64,
) -> Result<Boosting, ModelError> {
    check_no_infinities(data, rows)?;
    let fail = |reason: String| ModelError::Fit {
        dataset: data.id.clone(),
        model: "boosting",
        reason,
    };
    // Columns with at least two distinct non-missing values on the training rows.
    let used: Vec<usize> = (0..data.columns.len())
        .filter(|&j| {
            let col = &data.columns[j];
            let mut first = None;
            rows.iter().any(|&r| {
                let v = col[r];
                if v.is_nan() {
                    return false;
                }
                match first {
                    None => {
                        first = Some(v);
                        false
                    }
                    Some(f) => v != f,
                }
            })
        })
        .collect();
    if used.is_empty() {
        return Err(fail(
            "every feature column is constant on the training rows".into(),
        ));
    }
    let x = column_major(data, &used, rows);
    let matrix = Matrix::new(&x, rows.len(), used.len());
    let y: Vec<f64> = rows
        .iter()
        .map(|&r| if data.labels[r] { 1.0 } else { 0.0 })
        .collect();
    let mut booster = GradientBooster::default()
        .set_objective_type(ObjectiveType::LogLoss)
        .set_iterations(settings.rounds)
        .set_learning_rate(settings.eta as f32)
        .set_max_depth(settings.depth)
        .set_l2(settings.l2 as f32)
        .set_min_leaf_weight(settings.min_child_hessian as f32)
        .set_nbins(settings.bins)
        .set_subsample(settings.row_fraction as f32)
        .set_seed(seed)
        .set_parallel(true);
    booster
        .fit_unweighted(&matrix, &y, None)
        .map_err(|e| fail(e.to_string()))?;
    Ok(Boosting {
        booster,
        features: data.columns.len(),
        used,
        settings: *settings,
    })
}

impl Boosting {
    /// The ensemble's log-odds F(x) on `rows`.
    pub fn log_odds(&self, data: &Dataset, rows: &[usize]) -> Result<Vec<f64>, ModelError> {
        super::check_rows(data, rows)?;
        super::check_width(data, self.features)?;
        check_no_infinities(data, rows)?;
        if rows.is_empty() {
            return Ok(Vec::new());
        }
        let x = column_major(data, &self.used, rows);
        let matrix = Matrix::new(&x, rows.len(), self.used.len());
        Ok(self.booster.predict(&matrix, true))
    }
}

impl Model for Boosting {
    fn score(&self, data: &Dataset, rows: &[usize]) -> Result<Vec<f64>, ModelError> {
        Ok(self
            .log_odds(data, rows)?
            .into_iter()
            .map(sigmoid)
            .collect())
    }

    fn describe(&self) -> serde_json::Value {
        json!({
            "kind": "boosting",
            "rounds": self.settings.rounds,
            "depth": self.settings.depth,
            "eta": self.settings.eta,
            "l2": self.settings.l2,
            "min_child_hessian": self.settings.min_child_hessian,
            "bins": self.settings.bins,
            "row_fraction": self.settings.row_fraction,
            "base_log_odds": self.booster.base_score,
            "features_used": self.used.len(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::FeatureKind;

    fn settings() -> BoostingSettings {
        BoostingSettings {
            rounds: 50,
            depth: 3,
            eta: 0.1,
            l2: 1.0,
            min_child_hessian: 1.0,
            bins: 64,
            row_fraction: 1.0,
        }
    }

    #[test]
    fn score_is_the_sigmoid_of_rising_log_odds() {
        // y = 1 exactly when x > 0.5: the log-odds must rise with x, so an
        // inverted orientation fails.
        let n = 400;
        let x: Vec<f64> = (0..n).map(|i| i as f64 / n as f64).collect();
        let labels: Vec<bool> = x.iter().map(|&v| v > 0.5).collect();
        let d = Dataset {
            id: "step".into(),
            names: vec!["x".into(), "constant".into()],
            columns: vec![x, vec![1.0; n]],
            kinds: vec![FeatureKind::Numeric, FeatureKind::Numeric],
            labels,
        };
        let rows: Vec<usize> = (0..n).collect();
        let m = fit(&d, &rows, &settings(), 0).unwrap();
        assert_eq!(m.used, vec![0], "the constant column is left out");
        let f = m.log_odds(&d, &[0, 399]).unwrap();
        assert!(f[0] < -1.0 && f[1] > 1.0, "{f:?}");
        let p = m.score(&d, &[0, 399]).unwrap();
        assert!((p[0] - sigmoid(f[0])).abs() < 1e-15);
        assert!((p[1] - sigmoid(f[1])).abs() < 1e-15);
    }

    #[test]
    fn missing_values_are_accepted_and_infinities_rejected() {
        let n = 300;
        let mut x: Vec<f64> = (0..n).map(|i| i as f64).collect();
        let labels: Vec<bool> = (0..n).map(|i| i % 3 == 0 || i > 200).collect();
        for v in x.iter_mut().step_by(7) {
            *v = f64::NAN;
        }
        let mut d = Dataset {
            id: "nan".into(),
            names: vec!["x".into()],
            columns: vec![x],
            kinds: vec![FeatureKind::Numeric],
            labels,
        };
        let rows: Vec<usize> = (0..n).collect();
        let m = fit(&d, &rows, &settings(), 0).unwrap();
        let p = m.score(&d, &rows).unwrap();
        assert!(p.iter().all(|v| (0.0..=1.0).contains(v)));
        d.columns[0][5] = f64::INFINITY;
        assert!(matches!(
            fit(&d, &rows, &settings(), 0),
            Err(ModelError::NonFinite { row: 5, .. })
        ));
    }
}
