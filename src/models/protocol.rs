//! Protocols: how a dataset and a base model become a score pool, i.e. which
//! rows train the model and which rows' scores the calibration methods see.
//!
//! * `held-out { train_fraction }`: a seeded split of the rows into a training
//!   part (⌊train_fraction·n⌉ rows) for the base model and the unseen rest; the
//!   model's scores on the unseen rows form the pool, unpinned (`sides: None`),
//!   and the run engine later splits it into test set and calibration reservoir.
//!   This is the usual "separate calibration set" design (Niculescu-Mizil &
//!   Caruana 2005, "Predicting good probabilities with supervised learning",
//!   ICML).
//! * `cross-fitted { train_fraction, folds }`: the same split; the training rows
//!   are divided into K stratified folds, each fold scored by a model fitted on
//!   the other K − 1 folds. These out-of-fold scores form the calibration
//!   reservoir (`Side::Reservoir`); the model refitted on all training rows
//!   scores the unseen rows, which form the test set (`Side::Test`). This is the
//!   cross-validated calibration of Platt (1999, §2.2) and of scikit-learn's
//!   `CalibratedClassifierCV(ensemble=False)` documentation. No row's score
//!   comes from a model that saw it (checked on every fit, see [`cross_fit`]).
//!
//! The protocol study ([`protocol_study_unit`]) compares, for one labelled
//! budget N, held-out splits that spend a fraction f of N on calibration with
//! cross-fitting that uses all N for both, on one common test set.
//!
//! Seeds: every split, fold assignment and model fit takes a seed derived from
//! the caller's seed with [`crate::split::mix`] and a tag, so results do not
//! depend on the order or the thread count in which pools are built.

use std::path::Path;
use std::time::Instant;

use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use super::{cache, check_training_rows, ModelError, ModelSpec};
use crate::calibrate::ParamError;
use crate::data::{Dataset, ScorePool, Side};
use crate::split::{mix, partition, rng, sample_indices};

const TAG_SPLIT: u64 = 0x0073_706c_6974; // "split"
const TAG_MODEL: u64 = 0x006d_6f64_656c; // "model"
const TAG_FOLDS: u64 = 0x0066_6f6c_6473; // "folds"
const TAG_BUDGET: u64 = 0x6275_6467_6574; // "budget"

fn d_train_fraction() -> f64 {
    0.5
}
fn d_folds() -> usize {
    5
}

/// How calibration data are obtained, as written in a suite.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case", deny_unknown_fields)]
pub enum Protocol {
    /// Train on a fraction of the rows; the rest are scored and form the pool.
    HeldOut {
        /// Fraction of the dataset's rows that train the base model; default 0.5.
        #[serde(default = "d_train_fraction")]
        train_fraction: f64,
    },
    /// Out-of-fold scores on the training rows form the reservoir; the refitted
    /// model's scores on the other rows form the test set.
    CrossFitted {
        /// Fraction of the dataset's rows used for training and out-of-fold
        /// scores; default 0.5.
        #[serde(default = "d_train_fraction")]
        train_fraction: f64,
        /// Number of folds K; default 5.
        #[serde(default = "d_folds")]
        folds: usize,
    },
}

impl Protocol {
    pub fn kind(&self) -> &'static str {
        match self {
            Protocol::HeldOut { .. } => "held-out",
            Protocol::CrossFitted { .. } => "cross-fitted",
        }
    }

    /// Rows that train the base model out of a dataset of `n` rows:
    /// ⌊train_fraction·n⌉. Held-out pools hold the other n − that rows;
    /// cross-fitted pools hold that many reservoir rows and the rest as test set.
    pub fn train_rows(&self, n: usize) -> usize {
        let tf = match *self {
            Protocol::HeldOut { train_fraction } => train_fraction,
            Protocol::CrossFitted { train_fraction, .. } => train_fraction,
        };
        (tf * n as f64).round() as usize
    }

    pub fn validate(&self) -> Result<(), ParamError> {
        let tf = match *self {
            Protocol::HeldOut { train_fraction } => train_fraction,
            Protocol::CrossFitted {
                train_fraction,
                folds,
            } => {
                if folds < 2 {
                    return Err(ParamError::new("folds", folds, "must be at least 2"));
                }
                train_fraction
            }
        };
        if !(tf > 0.0 && tf < 1.0) {
            return Err(ParamError::new(
                "train_fraction",
                tf,
                "must lie strictly between 0 and 1",
            ));
        }
        Ok(())
    }
}

/// What building a pool cost and produced.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PoolInfo {
    /// Rows that trained the (final) base model.
    pub train_rows: usize,
    /// `pool_rows[i]` is the dataset row of pool entry i.
    pub pool_rows: Vec<usize>,
    /// The final model's description ([`super::Model::describe`]).
    pub model: serde_json::Value,
    /// Wall-clock seconds spent fitting models (all folds and the refit).
    pub fit_seconds: f64,
    /// Wall-clock seconds spent scoring rows.
    pub score_seconds: f64,
    /// True when the pool was read from the cache (timings are then zero).
    pub cache_hit: bool,
    /// Why the cache was not used or not written, if it was asked for.
    pub cache_note: Option<String>,
}

/// Out-of-fold scores of one row set.
#[derive(Debug, Clone, PartialEq)]
pub struct CrossFit {
    /// The scored rows, as given.
    pub rows: Vec<usize>,
    /// `fold_of[i]` is the fold of `rows[i]`.
    pub fold_of: Vec<usize>,
    /// `scores[i]` comes from the model of fold `fold_of[i]`.
    pub scores: Vec<f64>,
    /// `trained_on[k]`: the rows that trained the model of fold k.
    pub trained_on: Vec<Vec<usize>>,
    pub fit_seconds: f64,
    pub score_seconds: f64,
}

fn protocol_error(data: &Dataset, reason: String) -> ModelError {
    ModelError::Protocol {
        dataset: data.id.clone(),
        reason,
    }
}

/// Stratified fold assignment: positives and negatives are each shuffled and
/// dealt round-robin to the K folds (common practice), so every fold holds
/// ⌊n_c/K⌋ or ⌈n_c/K⌉ rows of each class c.
pub fn assign_folds(labels: &[bool], folds: usize, seed: u64) -> Vec<usize> {
    let mut r = rng(seed);
    let mut fold_of = vec![0; labels.len()];
    let mut next = 0;
    for class in [true, false] {
        let members: Vec<usize> = (0..labels.len()).filter(|&i| labels[i] == class).collect();
        let order = sample_indices(members.len(), members.len(), &mut r);
        for &o in &order {
            fold_of[members[o]] = next % folds;
            next += 1;
        }
    }
    fold_of
}

/// K-fold out-of-fold scores of `rows`: fold k is scored by a model fitted on
/// the rows of the other folds with seed mix(seed, model tag, k).
pub fn cross_fit(
    data: &Dataset,
    model: &ModelSpec,
    rows: &[usize],
    folds: usize,
    seed: u64,
) -> Result<CrossFit, ModelError> {
    check_training_rows(data, rows)?;
    let labels: Vec<bool> = rows.iter().map(|&r| data.labels[r]).collect();
    let pos = labels.iter().filter(|&&y| y).count();
    let fewest = pos.min(rows.len() - pos);
    if folds < 2 || folds > fewest {
        return Err(protocol_error(
            data,
            format!(
                "{folds} folds need 2 ≤ K ≤ {fewest} (the smaller class count of the {} training rows)",
                rows.len()
            ),
        ));
    }
    let fold_of = assign_folds(&labels, folds, mix(seed, &[TAG_FOLDS]));
    let parts: Vec<(Vec<usize>, Vec<usize>)> = (0..folds)
        .map(|k| {
            let mut train = Vec::new();
            let mut scored = Vec::new();
            for (i, &r) in rows.iter().enumerate() {
                if fold_of[i] == k {
                    scored.push(i);
                } else {
                    train.push(r);
                }
            }
            (train, scored)
        })
        .collect();
    type FoldOut = (Vec<f64>, f64, f64);
    let outs: Result<Vec<FoldOut>, ModelError> = parts
        .par_iter()
        .enumerate()
        .map(|(k, (train, scored))| {
            let t0 = Instant::now();
            let m = model.fit(data, train, mix(seed, &[TAG_MODEL, k as u64]))?;
            let fit = t0.elapsed().as_secs_f64();
            let t1 = Instant::now();
            let target: Vec<usize> = scored.iter().map(|&i| rows[i]).collect();
            let s = m.score(data, &target)?;
            Ok((s, fit, t1.elapsed().as_secs_f64()))
        })
        .collect();
    let outs = outs?;
    let mut scores = vec![f64::NAN; rows.len()];
    let (mut fit_seconds, mut score_seconds) = (0.0, 0.0);
    for ((_, scored), (s, f, t)) in parts.iter().zip(&outs) {
        for (&i, &v) in scored.iter().zip(s) {
            scores[i] = v;
        }
        fit_seconds += f;
        score_seconds += t;
    }
    let trained_on: Vec<Vec<usize>> = parts.into_iter().map(|(t, _)| t).collect();
    // By construction no row is scored by a model that saw it; check anyway, so
    // a future change to the fold logic cannot silently leak.
    if let Some(r) = first_leak(data.rows(), rows, &fold_of, &trained_on) {
        return Err(protocol_error(
            data,
            format!("row {r} was scored by a model trained on it"),
        ));
    }
    Ok(CrossFit {
        rows: rows.to_vec(),
        fold_of,
        scores,
        trained_on,
        fit_seconds,
        score_seconds,
    })
}

/// The first row scored by a fold model whose training rows contain it, if any
/// (`n` = dataset rows).
pub fn first_leak(
    n: usize,
    rows: &[usize],
    fold_of: &[usize],
    trained_on: &[Vec<usize>],
) -> Option<usize> {
    for (k, train) in trained_on.iter().enumerate() {
        let mut seen = vec![false; n];
        for &r in train {
            seen[r] = true;
        }
        if let Some((_, &r)) = rows
            .iter()
            .enumerate()
            .find(|&(i, &r)| fold_of[i] == k && seen[r])
        {
            return Some(r);
        }
    }
    None
}

/// Training rows and unseen rows of a protocol's split.
fn split_rows(
    data: &Dataset,
    protocol: &Protocol,
    seed: u64,
) -> Result<(Vec<usize>, Vec<usize>), ModelError> {
    let n = data.rows();
    let n_train = protocol.train_rows(n);
    if n_train < 2 || n_train >= n {
        return Err(protocol_error(
            data,
            format!(
                "{} splits {n} rows into {n_train} training and {} other rows",
                protocol.kind(),
                n.saturating_sub(n_train)
            ),
        ));
    }
    Ok(partition(n, n - n_train, mix(seed, &[TAG_SPLIT])))
}

/// Build a task's score pool by `protocol`, reading and writing `cache` (a
/// directory) when given. A cache file that cannot be read or does not match
/// is ignored and rewritten; a failure to write is noted in [`PoolInfo`].
pub fn score_pool(
    data: &Dataset,
    model: &ModelSpec,
    protocol: &Protocol,
    seed: u64,
    cache_dir: Option<&Path>,
) -> Result<(ScorePool, PoolInfo), ModelError> {
    model.validate()?;
    protocol.validate()?;
    let key = cache::pool_key(data, model, protocol, seed);
    let mut note = None;
    if let Some(dir) = cache_dir {
        match cache::read(dir, &key) {
            Ok(Some(hit)) => {
                // The key covers the dataset digest; this guards against a file
                // that was valid but belongs elsewhere (copied by hand).
                let consistent = hit
                    .1
                    .pool_rows
                    .iter()
                    .zip(&hit.0.labels)
                    .all(|(&r, &y)| r < data.rows() && data.labels[r] == y);
                if consistent {
                    return Ok(hit);
                }
                note = Some("cache file ignored: rows do not match the dataset".into());
            }
            Ok(None) => {}
            Err(e) => note = Some(format!("cache file ignored: {e}")),
        }
    }
    let (pool, mut info) = build_pool(data, model, protocol, seed)?;
    if let Some(dir) = cache_dir {
        if let Err(e) = cache::write(dir, &key, &pool, &info) {
            note = Some(format!("cache not written: {e}"));
        }
    }
    info.cache_note = note;
    Ok((pool, info))
}

fn build_pool(
    data: &Dataset,
    model: &ModelSpec,
    protocol: &Protocol,
    seed: u64,
) -> Result<(ScorePool, PoolInfo), ModelError> {
    match *protocol {
        Protocol::HeldOut { .. } => {
            let (train, unseen) = split_rows(data, protocol, seed)?;
            let t0 = Instant::now();
            let m = model.fit(data, &train, mix(seed, &[TAG_MODEL, 0]))?;
            let fit_seconds = t0.elapsed().as_secs_f64();
            let t1 = Instant::now();
            let scores = m.score(data, &unseen)?;
            let score_seconds = t1.elapsed().as_secs_f64();
            let pool = ScorePool {
                scores,
                labels: unseen.iter().map(|&r| data.labels[r]).collect(),
                sides: None,
            };
            let info = PoolInfo {
                train_rows: train.len(),
                pool_rows: unseen,
                model: m.describe(),
                fit_seconds,
                score_seconds,
                cache_hit: false,
                cache_note: None,
            };
            Ok((pool, info))
        }
        Protocol::CrossFitted { folds, .. } => {
            let (train, unseen) = split_rows(data, protocol, seed)?;
            let cf = cross_fit(data, model, &train, folds, seed)?;
            let t0 = Instant::now();
            let m = model.fit(data, &train, mix(seed, &[TAG_MODEL, folds as u64]))?;
            let refit = t0.elapsed().as_secs_f64();
            let t1 = Instant::now();
            let test_scores = m.score(data, &unseen)?;
            let test_time = t1.elapsed().as_secs_f64();
            let mut scores = cf.scores;
            scores.extend(test_scores);
            let mut rows = train.clone();
            rows.extend(&unseen);
            let mut sides = vec![Side::Reservoir; train.len()];
            sides.extend(std::iter::repeat_n(Side::Test, unseen.len()));
            let pool = ScorePool {
                scores,
                labels: rows.iter().map(|&r| data.labels[r]).collect(),
                sides: Some(sides),
            };
            let info = PoolInfo {
                train_rows: train.len(),
                pool_rows: rows,
                model: m.describe(),
                fit_seconds: cf.fit_seconds + refit,
                score_seconds: cf.score_seconds + test_time,
                cache_hit: false,
                cache_note: None,
            };
            Ok((pool, info))
        }
    }
}

/// Settings of the protocol study.
#[derive(Debug, Clone, PartialEq)]
pub struct StudySettings {
    /// Calibration fractions f of the held-out variants.
    pub fractions: Vec<f64>,
    /// Folds K of the cross-fitted variant.
    pub folds: usize,
}

impl Default for StudySettings {
    /// f ∈ {0.05, 0.1, 0.2, 0.3} and K = 5.
    fn default() -> Self {
        StudySettings {
            fractions: vec![0.05, 0.1, 0.2, 0.3],
            folds: 5,
        }
    }
}

/// The fixed common test set of a protocol study: `test_rows` rows of the
/// dataset drawn with `seed`; returns (other rows, test rows), both sorted.
pub fn study_test_rows(
    data: &Dataset,
    test_rows: usize,
    seed: u64,
) -> Result<(Vec<usize>, Vec<usize>), ModelError> {
    if test_rows == 0 || test_rows >= data.rows() {
        return Err(protocol_error(
            data,
            format!(
                "a study test set of {test_rows} rows needs 1 ≤ size < {} rows",
                data.rows()
            ),
        ));
    }
    Ok(partition(data.rows(), test_rows, mix(seed, &[TAG_SPLIT])))
}

/// One unit of the protocol study. From the rows not in `test_rows`, a labelled
/// budget of `budget` rows is drawn with `seed`. Variants, each a pinned pool
/// whose `Side::Reservoir` entries are its calibration data and whose
/// `Side::Test` entries are the scores on `test_rows` (in the given order):
///
/// * `held-out-f` for each f in `settings.fractions`: the first ⌊f·N⌉ budget
///   rows in draw order are the calibration rows, the other rows train the
///   model. Calibration sets are nested across f (the same draw order), which
///   pairs the variants.
/// * `cross-fitted-K`: out-of-fold scores on all N rows are the calibration
///   data; the model refitted on all N rows scores the test set.
pub fn protocol_study_unit(
    data: &Dataset,
    model: &ModelSpec,
    test_rows: &[usize],
    budget: usize,
    settings: &StudySettings,
    seed: u64,
) -> Result<Vec<(String, ScorePool)>, ModelError> {
    model.validate()?;
    super::check_rows(data, test_rows)?;
    let mut in_test = vec![false; data.rows()];
    for &r in test_rows {
        in_test[r] = true;
    }
    let others: Vec<usize> = (0..data.rows()).filter(|&r| !in_test[r]).collect();
    if budget > others.len() || budget < 4 {
        return Err(protocol_error(
            data,
            format!(
                "budget {budget} needs 4 ≤ N ≤ {} (rows outside the test set)",
                others.len()
            ),
        ));
    }
    let mut r = rng(mix(seed, &[TAG_BUDGET]));
    let drawn: Vec<usize> = sample_indices(others.len(), budget, &mut r)
        .into_iter()
        .map(|i| others[i])
        .collect();
    let test_labels: Vec<bool> = test_rows.iter().map(|&r| data.labels[r]).collect();
    let pinned = |cal_rows: &[usize], cal_scores: Vec<f64>, test_scores: Vec<f64>| {
        let mut scores = cal_scores;
        scores.extend(test_scores);
        let mut labels: Vec<bool> = cal_rows.iter().map(|&r| data.labels[r]).collect();
        labels.extend(&test_labels);
        let mut sides = vec![Side::Reservoir; cal_rows.len()];
        sides.extend(std::iter::repeat_n(Side::Test, test_rows.len()));
        ScorePool {
            scores,
            labels,
            sides: Some(sides),
        }
    };
    // Check every variant before fitting any.
    for &f in &settings.fractions {
        if !(f > 0.0 && f < 1.0) {
            return Err(ParamError::new("fraction", f, "must lie strictly between 0 and 1").into());
        }
        let n_cal = (f * budget as f64).round() as usize;
        if n_cal == 0 || n_cal >= budget {
            return Err(protocol_error(
                data,
                format!("calibration fraction {f} of budget {budget} leaves {n_cal} rows"),
            ));
        }
    }
    let mut out = Vec::new();
    for (v, &f) in settings.fractions.iter().enumerate() {
        let n_cal = (f * budget as f64).round() as usize;
        let (cal, train) = drawn.split_at(n_cal);
        let mut train = train.to_vec();
        train.sort_unstable();
        let m = model.fit(data, &train, mix(seed, &[TAG_MODEL, v as u64]))?;
        let cal_scores = m.score(data, cal)?;
        let test_scores = m.score(data, test_rows)?;
        out.push((
            format!("held-out-{f}"),
            pinned(cal, cal_scores, test_scores),
        ));
    }
    let mut all = drawn.clone();
    all.sort_unstable();
    let k = settings.folds;
    let cf = cross_fit(data, model, &all, k, mix(seed, &[TAG_FOLDS, k as u64]))?;
    let m = model.fit(data, &all, mix(seed, &[TAG_MODEL, u64::MAX]))?;
    let test_scores = m.score(data, test_rows)?;
    out.push((
        format!("cross-fitted-{k}"),
        pinned(&all, cf.scores, test_scores),
    ));
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::models::testdata::two_gaussians;

    fn small_forest() -> ModelSpec {
        ModelSpec::Forest {
            trees: 25,
            min_leaf: 5,
            max_depth: None,
            split_features: None,
        }
    }

    fn small_boosting() -> ModelSpec {
        let mut b = ModelSpec::boosting();
        if let ModelSpec::Boosting {
            rounds,
            row_fraction,
            ..
        } = &mut b
        {
            *rounds = 40;
            *row_fraction = 0.8; // exercises the library's seeded row sampling
        }
        b
    }

    #[test]
    fn cross_fit_never_scores_a_row_with_a_model_that_saw_it() {
        let d = two_gaussians(300, 4, 11);
        let rows: Vec<usize> = (0..d.rows()).step_by(2).collect();
        let cf = cross_fit(&d, &ModelSpec::logistic(), &rows, 5, 3).unwrap();
        assert_eq!(cf.trained_on.len(), 5);
        for (i, &r) in rows.iter().enumerate() {
            let k = cf.fold_of[i];
            assert!(
                !cf.trained_on[k].contains(&r),
                "row {r} in its own fold's training set"
            );
            // Every other fold's model did train on it (K − 1 folds each).
            for (j, t) in cf.trained_on.iter().enumerate() {
                if j != k {
                    assert!(t.contains(&r));
                }
            }
            assert!((0.0..=1.0).contains(&cf.scores[i]));
        }
        // Stratified: each fold holds ⌊n_c/5⌋ or ⌈n_c/5⌉ of each class.
        for class in [true, false] {
            let total = rows.iter().filter(|&&r| d.labels[r] == class).count();
            for k in 0..5 {
                let c = rows
                    .iter()
                    .enumerate()
                    .filter(|&(i, &r)| cf.fold_of[i] == k && d.labels[r] == class)
                    .count();
                assert!(
                    c == total / 5 || c == total.div_ceil(5),
                    "fold {k}: {c} of {total}"
                );
            }
        }
    }

    #[test]
    fn leak_check_finds_a_row_in_its_own_fold_model() {
        // Rows 0..6 in folds 0, 1, 2, 0, 1, 2; fold k's model trained on the rest.
        let rows: Vec<usize> = (0..6).collect();
        let fold_of = vec![0, 1, 2, 0, 1, 2];
        let mut trained_on: Vec<Vec<usize>> = (0..3)
            .map(|k| (0..6).filter(|&r| fold_of[r] != k).collect())
            .collect();
        assert_eq!(first_leak(6, &rows, &fold_of, &trained_on), None);
        trained_on[2].push(5); // fold 2's model saw row 5, which it scores
        assert_eq!(first_leak(6, &rows, &fold_of, &trained_on), Some(5));
        // A row listed twice in different folds is a leak too.
        let rows = vec![0, 1, 2, 3, 4, 5, 1];
        let fold_of = vec![0, 1, 2, 0, 1, 2, 0];
        let trained_on: Vec<Vec<usize>> = (0..3)
            .map(|k| {
                rows.iter()
                    .zip(&fold_of)
                    .filter(|&(_, &f)| f != k)
                    .map(|(&r, _)| r)
                    .collect()
            })
            .collect();
        assert_eq!(first_leak(6, &rows, &fold_of, &trained_on), Some(1));
    }

    #[test]
    fn held_out_pool_is_unpinned_and_covers_the_unseen_rows() {
        let d = two_gaussians(301, 3, 5);
        let proto = Protocol::HeldOut {
            train_fraction: 0.4,
        };
        let (pool, info) = score_pool(&d, &ModelSpec::logistic(), &proto, 9, None).unwrap();
        assert!(pool.sides.is_none());
        assert_eq!(info.train_rows, 120); // round(0.4 · 301)
        assert_eq!(proto.train_rows(301), 120);
        assert_eq!(pool.scores.len(), 181);
        assert!(info.pool_rows.windows(2).all(|w| w[0] < w[1]));
        for (i, &r) in info.pool_rows.iter().enumerate() {
            assert_eq!(pool.labels[i], d.labels[r]);
        }
        assert!(!info.cache_hit);
    }

    #[test]
    fn cross_fitted_pool_pins_reservoir_and_test() {
        let d = two_gaussians(400, 3, 6);
        let proto = Protocol::CrossFitted {
            train_fraction: 0.5,
            folds: 4,
        };
        let (pool, info) = score_pool(&d, &ModelSpec::logistic(), &proto, 9, None).unwrap();
        let sides = pool.sides.as_ref().unwrap();
        let res = sides.iter().filter(|&&s| s == Side::Reservoir).count();
        assert_eq!(res, 200);
        assert_eq!(sides.len(), 400);
        assert!(sides[..200].iter().all(|&s| s == Side::Reservoir));
        let mut all = info.pool_rows.clone();
        all.sort_unstable();
        assert_eq!(all, (0..400).collect::<Vec<_>>());
        // Out-of-fold scores differ from in-sample scores of the refitted model.
        let train = &info.pool_rows[..200];
        let refit = ModelSpec::logistic()
            .fit(&d, train, mix(9, &[TAG_MODEL, 4]))
            .unwrap()
            .score(&d, train)
            .unwrap();
        assert!(refit.iter().zip(&pool.scores[..200]).any(|(a, b)| a != b));
    }

    #[test]
    fn pools_are_deterministic_and_thread_count_independent() {
        let d = two_gaussians(600, 5, 8);
        let proto = Protocol::CrossFitted {
            train_fraction: 0.5,
            folds: 3,
        };
        for spec in [
            ModelSpec::logistic(),
            ModelSpec::naive_bayes(),
            small_forest(),
            small_boosting(),
        ] {
            let run = |threads: usize, seed: u64| {
                rayon::ThreadPoolBuilder::new()
                    .num_threads(threads)
                    .build()
                    .unwrap()
                    .install(|| score_pool(&d, &spec, &proto, seed, None).unwrap().0)
            };
            let a = run(1, 4);
            let b = run(3, 4);
            assert_eq!(
                a.scores.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
                b.scores.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
                "{}",
                spec.kind()
            );
            let c = run(2, 5);
            assert_ne!(a.scores, c.scores, "{}: seed has no effect", spec.kind());
        }
    }

    #[test]
    fn cache_round_trip_and_corruption() {
        let dir = tempfile::tempdir().unwrap();
        let d = two_gaussians(200, 3, 1);
        let spec = ModelSpec::naive_bayes();
        for proto in [
            Protocol::HeldOut {
                train_fraction: 0.5,
            },
            Protocol::CrossFitted {
                train_fraction: 0.5,
                folds: 3,
            },
        ] {
            let (p1, i1) = score_pool(&d, &spec, &proto, 2, Some(dir.path())).unwrap();
            assert!(!i1.cache_hit && i1.cache_note.is_none());
            let (p2, i2) = score_pool(&d, &spec, &proto, 2, Some(dir.path())).unwrap();
            assert!(i2.cache_hit);
            assert_eq!(p1.scores, p2.scores);
            assert_eq!(p1.labels, p2.labels);
            assert_eq!(p1.sides, p2.sides);
            assert_eq!(i1.pool_rows, i2.pool_rows);
            assert_eq!(i1.model, i2.model);
            // Another seed is another key.
            let (_, i3) = score_pool(&d, &spec, &proto, 3, Some(dir.path())).unwrap();
            assert!(!i3.cache_hit);
            // Flip one byte in the middle: ignored, recomputed, rewritten.
            let file = cache::path(dir.path(), &cache::pool_key(&d, &spec, &proto, 2));
            let mut bytes = std::fs::read(&file).unwrap();
            let mid = bytes.len() / 2;
            bytes[mid] ^= 0x40;
            std::fs::write(&file, &bytes).unwrap();
            let (p4, i4) = score_pool(&d, &spec, &proto, 2, Some(dir.path())).unwrap();
            assert!(!i4.cache_hit);
            assert!(i4.cache_note.as_deref().unwrap().contains("checksum"));
            assert_eq!(p4.scores, p1.scores);
            let (_, i5) = score_pool(&d, &spec, &proto, 2, Some(dir.path())).unwrap();
            assert!(i5.cache_hit, "the corrupt file was not rewritten");
            // Truncated file.
            std::fs::write(&file, &bytes[..40]).unwrap();
            let (_, i6) = score_pool(&d, &spec, &proto, 2, Some(dir.path())).unwrap();
            assert!(!i6.cache_hit && i6.cache_note.is_some());
        }
        // No temporary files are left behind.
        for e in std::fs::read_dir(dir.path()).unwrap() {
            let name = e.unwrap().file_name().into_string().unwrap();
            assert!(name.ends_with(".pool"), "{name}");
        }
    }

    #[test]
    fn cache_key_changes_with_data_model_and_protocol() {
        let d = two_gaussians(50, 3, 1);
        let p = Protocol::HeldOut {
            train_fraction: 0.5,
        };
        let base = cache::pool_key(&d, &ModelSpec::logistic(), &p, 1);
        let mut d2 = d.clone();
        d2.columns[0][7] += 1e-12;
        assert_ne!(base, cache::pool_key(&d2, &ModelSpec::logistic(), &p, 1));
        let l2 = ModelSpec::Logistic {
            l2: 0.5,
            max_iterations: 100,
        };
        assert_ne!(base, cache::pool_key(&d, &l2, &p, 1));
        let p2 = Protocol::HeldOut {
            train_fraction: 0.6,
        };
        assert_ne!(base, cache::pool_key(&d, &ModelSpec::logistic(), &p2, 1));
        assert_eq!(base, cache::pool_key(&d, &ModelSpec::logistic(), &p, 1));
    }

    #[test]
    fn protocol_study_variants_share_the_test_set() {
        let d = two_gaussians(1000, 4, 3);
        let (_, test) = study_test_rows(&d, 300, 1).unwrap();
        let settings = StudySettings::default();
        let pools =
            protocol_study_unit(&d, &ModelSpec::logistic(), &test, 400, &settings, 7).unwrap();
        let names: Vec<&str> = pools.iter().map(|(n, _)| n.as_str()).collect();
        assert_eq!(
            names,
            [
                "held-out-0.05",
                "held-out-0.1",
                "held-out-0.2",
                "held-out-0.3",
                "cross-fitted-5"
            ]
        );
        let expected_cal = [20, 40, 80, 120, 400];
        for ((_, pool), &n_cal) in pools.iter().zip(&expected_cal) {
            let sides = pool.sides.as_ref().unwrap();
            assert_eq!(
                sides.iter().filter(|&&s| s == Side::Reservoir).count(),
                n_cal
            );
            assert_eq!(sides.iter().filter(|&&s| s == Side::Test).count(), 300);
            let test_labels: Vec<bool> = test.iter().map(|&r| d.labels[r]).collect();
            assert_eq!(&pool.labels[n_cal..], &test_labels[..]);
        }
        // Same seed, same pools.
        let again =
            protocol_study_unit(&d, &ModelSpec::logistic(), &test, 400, &settings, 7).unwrap();
        assert_eq!(pools[2].1.scores, again[2].1.scores);
        // Budget larger than the non-test rows is an error, not a panic.
        assert!(protocol_study_unit(&d, &ModelSpec::logistic(), &test, 701, &settings, 7).is_err());
    }

    #[test]
    fn protocol_settings_are_checked() {
        let p: Protocol = toml::from_str("kind = \"cross-fitted\"").unwrap();
        assert_eq!(
            p,
            Protocol::CrossFitted {
                train_fraction: 0.5,
                folds: 5
            }
        );
        assert!(toml::from_str::<Protocol>("kind = \"held-out\"\nfolds = 3").is_err());
        let e = Protocol::CrossFitted {
            train_fraction: 0.5,
            folds: 1,
        }
        .validate()
        .unwrap_err();
        assert_eq!(e.key, "folds");
        let e = Protocol::HeldOut {
            train_fraction: 1.0,
        }
        .validate()
        .unwrap_err();
        assert_eq!((e.key.as_str(), e.value.as_str()), ("train_fraction", "1"));
    }
}
