//! Random forest probability estimates.
//!
//! Math: B regression trees, each grown on a bootstrap sample of the training
//! rows with m randomly chosen candidate features per split, squared-error
//! splits, and at least `min_leaf` rows per leaf (Breiman 2001, "Random
//! forests", Machine Learning 45). Trees are fitted to the 0/1 labels, so a
//! leaf's value is the positive fraction of its bootstrap rows, and the score
//!
//! p̂(x) = (1/B) Σ_b  (positive fraction of the leaf of tree b containing x)
//!
//! is the "probability forest" of Malley, Kruppa, Dasgupta, Malley & Ziegler
//! (2012, "Probability machines", Methods of Information in Medicine 51). With
//! fully grown trees (leaf size 1) every leaf is pure and the forest falls back
//! to vote fractions, hence the default minimum leaf size of 5.
//!
//! Implementation: `smartcore`'s `RandomForestRegressor`. Trees are grown in
//! fixed chunks of [`CHUNK_TREES`] trees, chunk k with seed mix(seed, k), in
//! parallel; the chunks' means are combined in chunk order weighted by tree
//! count, so the result does not depend on the number of threads. Categorical
//! columns enter as their integer level codes.

use rayon::prelude::*;
use serde_json::json;
use smartcore::ensemble::random_forest_regressor::{
    RandomForestRegressor, RandomForestRegressorParameters,
};
use smartcore::linalg::basic::matrix::DenseMatrix;

use super::{check_values, Model, ModelError};
use crate::data::Dataset;
use crate::split::mix;

/// Trees per independently seeded chunk.
pub const CHUNK_TREES: usize = 10;
const TAG_FOREST: u64 = 0x666f_7265_7374; // "forest"

#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ForestSettings {
    pub trees: usize,
    pub min_leaf: usize,
    pub max_depth: Option<u16>,
    pub split_features: Option<usize>,
}

type Rf = RandomForestRegressor<f64, f64, DenseMatrix<f64>, Vec<f64>>;

pub struct Forest {
    chunks: Vec<(usize, Rf)>,
    settings: ForestSettings,
    features: usize,
}

/// Column-major matrix of all feature columns on `rows`.
pub(crate) fn column_major(data: &Dataset, rows: &[usize]) -> Vec<f64> {
    let mut v = Vec::with_capacity(rows.len() * data.columns.len());
    for col in &data.columns {
        v.extend(rows.iter().map(|&r| col[r]));
    }
    v
}

fn matrix(data: &Dataset, rows: &[usize]) -> Result<DenseMatrix<f64>, ModelError> {
    DenseMatrix::new(
        rows.len(),
        data.columns.len(),
        column_major(data, rows),
        true,
    )
    .map_err(|e| ModelError::Fit {
        dataset: data.id.clone(),
        model: "forest",
        reason: e.to_string(),
    })
}

pub fn fit(
    data: &Dataset,
    rows: &[usize],
    settings: &ForestSettings,
    seed: u64,
) -> Result<Forest, ModelError> {
    check_values(data, rows)?;
    let p = data.columns.len();
    let fail = |reason: String| ModelError::Fit {
        dataset: data.id.clone(),
        model: "forest",
        reason,
    };
    if p == 0 {
        return Err(fail("the dataset has no feature columns".into()));
    }
    if let Some(m) = settings.split_features {
        if m > p {
            return Err(fail(format!(
                "split_features = {m} exceeds the {p} feature columns"
            )));
        }
    }
    let x = matrix(data, rows)?;
    let y: Vec<f64> = rows
        .iter()
        .map(|&r| if data.labels[r] { 1.0 } else { 0.0 })
        .collect();
    let sizes: Vec<usize> = (0..settings.trees.div_ceil(CHUNK_TREES))
        .map(|k| CHUNK_TREES.min(settings.trees - k * CHUNK_TREES))
        .collect();
    let chunks: Result<Vec<(usize, Rf)>, String> = sizes
        .par_iter()
        .enumerate()
        .map(|(k, &size)| {
            let mut params = RandomForestRegressorParameters::default()
                .with_n_trees(size)
                .with_min_samples_leaf(settings.min_leaf)
                .with_min_samples_split(2 * settings.min_leaf)
                .with_seed(mix(seed, &[TAG_FOREST, k as u64]));
            if let Some(d) = settings.max_depth {
                params = params.with_max_depth(d);
            }
            if let Some(m) = settings.split_features {
                params = params.with_m(m);
            }
            Rf::fit(&x, &y, params)
                .map(|f| (size, f))
                .map_err(|e| e.to_string())
        })
        .collect();
    Ok(Forest {
        chunks: chunks.map_err(fail)?,
        settings: *settings,
        features: p,
    })
}

impl Model for Forest {
    fn score(&self, data: &Dataset, rows: &[usize]) -> Result<Vec<f64>, ModelError> {
        super::check_rows(data, rows)?;
        super::check_width(data, self.features)?;
        check_values(data, rows)?;
        if rows.is_empty() {
            return Ok(Vec::new());
        }
        let x = matrix(data, rows)?;
        let preds: Result<Vec<Vec<f64>>, String> = self
            .chunks
            .par_iter()
            .map(|(_, f)| f.predict(&x).map_err(|e| e.to_string()))
            .collect();
        let preds = preds.map_err(|reason| ModelError::Fit {
            dataset: data.id.clone(),
            model: "forest",
            reason,
        })?;
        let total: usize = self.chunks.iter().map(|(s, _)| s).sum();
        let mut out = vec![0.0; rows.len()];
        for ((size, _), pred) in self.chunks.iter().zip(&preds) {
            let w = *size as f64 / total as f64;
            for (o, v) in out.iter_mut().zip(pred) {
                *o += w * v;
            }
        }
        Ok(out.into_iter().map(|v| v.clamp(0.0, 1.0)).collect())
    }

    fn describe(&self) -> serde_json::Value {
        json!({
            "kind": "forest",
            "trees": self.settings.trees,
            "min_leaf": self.settings.min_leaf,
            "max_depth": self.settings.max_depth,
            "split_features": self.settings.split_features
                .unwrap_or((self.features as f64).sqrt().floor() as usize),
            "seeded_chunks": self.chunks.len(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::FeatureKind;

    /// One feature x = i/n; P(y = 1 | x) = x (labels drawn with a fixed
    /// generator), so the true probability rises with x.
    fn ramp(n: usize) -> Dataset {
        let mut r = crate::split::rng(3);
        let x: Vec<f64> = (0..n).map(|i| i as f64 / n as f64).collect();
        let labels = x
            .iter()
            .map(|&v| (crate::split::below(&mut r, 1_000_000) as f64) < v * 1e6)
            .collect();
        Dataset {
            id: "ramp".into(),
            names: vec!["x".into()],
            columns: vec![x],
            kinds: vec![FeatureKind::Numeric],
            labels,
        }
    }

    #[test]
    fn leaf_frequencies_not_votes_and_rising_with_the_truth() {
        let d = ramp(2000);
        let rows: Vec<usize> = (0..d.rows()).collect();
        let s = ForestSettings {
            trees: 30,
            min_leaf: 20,
            max_depth: None,
            split_features: None,
        };
        let m = fit(&d, &rows, &s, 1).unwrap();
        let p = m.score(&d, &rows).unwrap();
        // With leaves of ≥ 20 noisy rows, scores are frequencies strictly inside (0, 1)
        // for most rows (hard votes would give mostly 0 or 1).
        let inner = p.iter().filter(|&&v| v > 0.02 && v < 0.98).count();
        assert!(inner > 1800, "{inner}");
        // Orientation: mean score on the top tenth of x well above the bottom tenth,
        // close to the true means 0.95 and 0.05 (definition of the ramp).
        let lo = p[..200].iter().sum::<f64>() / 200.0;
        let hi = p[1800..].iter().sum::<f64>() / 200.0;
        assert!(lo < 0.15 && hi > 0.85, "{lo} {hi}");
    }

    #[test]
    fn chunked_seeds_give_distinct_trees() {
        // Two chunks with their own seeds: a 20-tree forest differs from a
        // 10-tree one on the same seed (else the chunks would repeat each other).
        let d = ramp(500);
        let rows: Vec<usize> = (0..d.rows()).collect();
        let s10 = ForestSettings {
            trees: 10,
            min_leaf: 5,
            max_depth: None,
            split_features: None,
        };
        let s20 = ForestSettings { trees: 20, ..s10 };
        let a = fit(&d, &rows, &s10, 4).unwrap().score(&d, &rows).unwrap();
        let b = fit(&d, &rows, &s20, 4).unwrap().score(&d, &rows).unwrap();
        assert_ne!(a, b);
    }
}
