//! Dirichlet calibration for K classes (Kull, Perelló-Nieto, Kängsepp,
//! Silva Filho, Song & Flach 2019, NeurIPS, "Beyond temperature scaling:
//! obtaining well-calibrated multi-class probabilities with Dirichlet
//! calibration").
//!
//! Math: on a probability vector q_i (a row summing to 1) the calibrated
//! probabilities are p_i = softmax(W ln q_i + b), W ∈ ℝ^{K×K}, b ∈ ℝ^K; it is
//! the multinomial logistic regression on the log probabilities, and the
//! family of maps that Dirichlet-distributed class-conditional q give. A
//! probability of 0 has no logarithm: every q_ik is clipped below at
//! [`LOG_CLIP`] = 1e-12 (`calibrate::LOGIT_EPS`, the clip the binary beta
//! and temperature maps take before a logarithm; ln 1e-12 ≈ −27.6) before
//! ln. The fit minimises the mean log loss plus the ODIR penalty
//! (off-diagonal and intercept regularisation of the paper)
//!
//!   λ·Σ_{j≠k} W_jk² / (K(K−1)) + μ·Σ_k b_k² / K + κ·Σ_k (W_kk − 1)² / K,
//!
//! with κ = [`DIAGONAL_GUARD`] = 1e-6. ODIR leaves the diagonal free; the
//! κ term is plumbline's addition, small enough to move no fit that has a
//! finite optimum by more than its rounding, and it keeps the optimum
//! finite and unique when the diagonal alone would run to infinity (rows
//! where every label has the largest ln q, the separable case in which
//! temperature scaling has no finite optimum). With it every direction is
//! penalised, so the objective is strongly convex; it is fitted by the
//! penalised Newton engine of matrix scaling (`affine.rs`: exact Hessian,
//! Cholesky, backtracking), started at the identity map W = I, b = 0 (which
//! returns q itself, up to the clip). The identity is also the point the
//! penalty pulls towards.
//!
//! Choosing λ and μ ([`select`], used by [`fit`]): λ = μ on the fixed grid
//! [`GRID`] = 1e-5, 1e-4, …, 1, each scored by 5-fold cross-validated log
//! loss on the calibration rows only. A row's fold is
//! mix(seed, bits of its sorted values, bits of its label's value) mod 5
//! (SplitMix64 hashing), which depends only on the row's content — not on
//! its position and not on the order of the classes — so shuffling the rows
//! or permuting the classes gives the same folds; equal rows share a fold.
//! Each fold is fitted on the other folds' rows and scored by the summed
//! log loss of its own rows; the score of a strength is the total over the
//! usable folds divided by their rows (a fold is usable when it holds rows
//! and the others hold at least two classes). The strength with the least
//! score wins; scores within 1e-9 (relative) of the least count as tied and
//! the strongest of them wins, so rounding in sums that run in another row
//! order cannot change the choice. A fit that fails in a fold scores +∞;
//! when no fold is usable (too few rows), the strongest strength on the
//! grid is taken without cross-validation (`cross_validated = false`).
//! The selection costs 5 fits per grid value plus the final fit.

use super::{
    affine, check_fit_input, check_probabilities, check_probability_rows, MulticlassError,
};
use crate::split::mix;

/// Probabilities are clipped below at this value before their logarithm.
pub const LOG_CLIP: f64 = crate::calibrate::LOGIT_EPS;

/// κ: weight of the pull of W's diagonal towards 1 (see the module doc).
pub const DIAGONAL_GUARD: f64 = 1e-6;

/// The strengths λ = μ tried by [`fit`], weakest first.
pub const GRID: [f64; 6] = [1e-5, 1e-4, 1e-3, 1e-2, 1e-1, 1.0];

/// Folds of the cross-validation of [`fit`].
pub const FOLDS: usize = 5;

/// Seed of the fold hash of [`fit`].
pub const FOLD_SEED: u64 = 0x6469_7269_6368_6c74; // "dirichlt"

/// Relative tolerance within which cross-validated scores count as tied.
const TIE: f64 = 1e-9;

/// How [`select`] chooses λ = μ.
#[derive(Debug, Clone, PartialEq)]
pub struct Selection {
    /// Candidate strengths (each finite and > 0), tried as λ = μ.
    pub grid: Vec<f64>,
    /// Number of folds (≥ 2).
    pub folds: usize,
    /// Seed of the fold hash.
    pub seed: u64,
}

impl Default for Selection {
    fn default() -> Self {
        Selection {
            grid: GRID.to_vec(),
            folds: FOLDS,
            seed: FOLD_SEED,
        }
    }
}

/// The outcome of [`select`].
#[derive(Debug, Clone, PartialEq)]
pub struct Choice {
    /// The chosen λ (= μ).
    pub strength: f64,
    /// Cross-validated mean log loss per grid value (in the grid's order);
    /// +∞ where a fold's fit failed, empty when not cross-validated.
    pub scores: Vec<f64>,
    /// False when no fold was usable and the strongest value was taken.
    pub cross_validated: bool,
}

/// A fitted Dirichlet calibration.
#[derive(Debug, Clone, PartialEq)]
pub struct DirichletFit {
    /// W, row-major K×K, applied to ln q.
    pub w: Vec<f64>,
    /// Bias per class.
    pub b: Vec<f64>,
    /// Off-diagonal strength λ.
    pub lambda: f64,
    /// Intercept strength μ.
    pub mu: f64,
    /// Newton steps of the final fit.
    pub iterations: usize,
    /// Largest |∂J/∂θ| where the final fit stopped (at most 1e-12, or 1e-9
    /// at the rounding floor of a poorly conditioned fit).
    pub gradient: f64,
    /// How λ and μ were chosen (None when they were given).
    pub choice: Option<Choice>,
}

impl DirichletFit {
    /// Number of classes K.
    pub fn classes(&self) -> usize {
        self.b.len()
    }

    /// softmax(W ln q_i + b) for every row of the row-major probabilities
    /// `q` (rows checked like the fit's input, clipped at [`LOG_CLIP`]).
    pub fn predict(&self, q: &[f64]) -> Result<Vec<f64>, MulticlassError> {
        let k = self.classes();
        check_probability_rows(q, k)?;
        let mut theta = Vec::with_capacity(affine::parameters(k));
        for (r, &b) in self.w.chunks_exact(k).zip(&self.b) {
            theta.extend_from_slice(r);
            theta.push(b);
        }
        Ok(affine::predict(&theta, &log_features(q), k))
    }
}

/// ln max(q, [`LOG_CLIP`]) of every entry.
pub fn log_features(q: &[f64]) -> Vec<f64> {
    q.iter().map(|&v| v.max(LOG_CLIP).ln()).collect()
}

fn penalty_of(k: usize, lambda: f64, mu: f64) -> affine::Penalty {
    let e = k + 1;
    let kf = k as f64;
    let mut weight = vec![0.0; affine::parameters(k)];
    for c in 0..k {
        for j in 0..k {
            weight[c * e + j] = if c == j {
                2.0 * DIAGONAL_GUARD / kf
            } else {
                2.0 * lambda / (kf * (kf - 1.0))
            };
        }
        weight[c * e + k] = 2.0 * mu / kf;
    }
    affine::Penalty {
        weight,
        target: affine::scaled_identity(k, 1.0),
    }
}

/// The penalised mean log loss the fit minimises at (W, b) (W row-major).
pub fn objective(
    q: &[f64],
    classes: usize,
    labels: &[usize],
    w: &[f64],
    b: &[f64],
    lambda: f64,
    mu: f64,
) -> f64 {
    let mut theta = Vec::with_capacity(affine::parameters(classes));
    for (r, &bk) in w.chunks_exact(classes).zip(b) {
        theta.extend_from_slice(r);
        theta.push(bk);
    }
    affine::objective(
        &log_features(q),
        classes,
        labels,
        &theta,
        &penalty_of(classes, lambda, mu),
    )
}

fn check_strength(what: &str, v: f64) -> Result<(), MulticlassError> {
    if v > 0.0 && v.is_finite() {
        Ok(())
    } else {
        Err(MulticlassError::Failed(format!(
            "Dirichlet calibration: {what} {v} must be positive and finite"
        )))
    }
}

/// Checks the fit's input: probability rows, labels, two classes. Returns
/// the log features.
fn checked_features(
    q: &[f64],
    classes: usize,
    labels: &[usize],
) -> Result<Vec<f64>, MulticlassError> {
    check_probabilities(q, classes, labels)?;
    let x = log_features(q);
    // Finite and bounded by |ln 1e-12|; this also checks two classes.
    check_fit_input(&x, classes, labels)?;
    Ok(x)
}

fn fit_features(
    x: &[f64],
    k: usize,
    labels: &[usize],
    lambda: f64,
    mu: f64,
) -> Result<(Vec<f64>, usize, f64), MulticlassError> {
    affine::fit(
        x,
        k,
        labels,
        affine::scaled_identity(k, 1.0),
        &penalty_of(k, lambda, mu),
        "Dirichlet calibration",
    )
}

/// Fits Dirichlet calibration at the given strengths λ (off-diagonal) and
/// μ (intercepts), both > 0 and finite.
pub fn fit_with(
    q: &[f64],
    classes: usize,
    labels: &[usize],
    lambda: f64,
    mu: f64,
) -> Result<DirichletFit, MulticlassError> {
    let x = checked_features(q, classes, labels)?;
    check_strength("lambda", lambda)?;
    check_strength("mu", mu)?;
    let (theta, iterations, gradient) = fit_features(&x, classes, labels, lambda, mu)?;
    let (w, b) = affine::split(&theta, classes);
    Ok(DirichletFit {
        w,
        b,
        lambda,
        mu,
        iterations,
        gradient,
        choice: None,
    })
}

/// Fits Dirichlet calibration with λ = μ chosen by [`select`] under the
/// default [`Selection`].
pub fn fit(q: &[f64], classes: usize, labels: &[usize]) -> Result<DirichletFit, MulticlassError> {
    fit_selected(q, classes, labels, &Selection::default())
}

/// Fits Dirichlet calibration with λ = μ chosen by [`select`].
pub fn fit_selected(
    q: &[f64],
    classes: usize,
    labels: &[usize],
    selection: &Selection,
) -> Result<DirichletFit, MulticlassError> {
    let choice = select(q, classes, labels, selection)?;
    let mut f = fit_with(q, classes, labels, choice.strength, choice.strength)?;
    f.choice = Some(choice);
    Ok(f)
}

/// The fold of a row of K probabilities with its label: depends on the
/// row's values as a set and the label's value only (module doc).
pub fn fold_of(row: &[f64], label: usize, folds: usize, seed: u64) -> usize {
    // + 0.0 maps −0 to +0, so equal values hash alike.
    let mut parts: Vec<u64> = row.iter().map(|v| (v + 0.0).to_bits()).collect();
    parts.sort_unstable();
    parts.push((row[label] + 0.0).to_bits());
    (mix(seed, &parts) % folds.max(1) as u64) as usize
}

/// Chooses λ = μ by cross-validated log loss on the calibration rows
/// (module doc).
pub fn select(
    q: &[f64],
    classes: usize,
    labels: &[usize],
    selection: &Selection,
) -> Result<Choice, MulticlassError> {
    let x = checked_features(q, classes, labels)?;
    let grid = &selection.grid;
    if grid.is_empty() {
        return Err(MulticlassError::Failed(
            "Dirichlet calibration: the strength grid is empty".into(),
        ));
    }
    for &v in grid {
        check_strength("grid strength", v)?;
    }
    if selection.folds < 2 {
        return Err(MulticlassError::Failed(format!(
            "Dirichlet calibration: {} folds; cross-validation needs at least 2",
            selection.folds
        )));
    }
    let k = classes;
    let fold: Vec<usize> = q
        .chunks_exact(k)
        .zip(labels)
        .map(|(r, &y)| fold_of(r, y, selection.folds, selection.seed))
        .collect();
    // Usable folds with their training and validation rows.
    let mut splits = Vec::new();
    for f in 0..selection.folds {
        let (mut xt, mut yt, mut xv, mut yv) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
        for (i, (r, &y)) in x.chunks_exact(k).zip(labels).enumerate() {
            if fold[i] == f {
                xv.extend_from_slice(r);
                yv.push(y);
            } else {
                xt.extend_from_slice(r);
                yt.push(y);
            }
        }
        let two = yt.first().is_some_and(|&c| yt.iter().any(|&l| l != c));
        if !yv.is_empty() && two {
            splits.push((xt, yt, xv, yv));
        }
    }
    let strongest = grid.iter().fold(f64::NEG_INFINITY, |m, &v| m.max(v));
    if splits.is_empty() {
        return Ok(Choice {
            strength: strongest,
            scores: Vec::new(),
            cross_validated: false,
        });
    }
    let rows: usize = splits.iter().map(|s| s.3.len()).sum();
    let scores: Vec<f64> = grid
        .iter()
        .map(|&s| {
            let mut total = 0.0;
            for (xt, yt, xv, yv) in &splits {
                match fit_features(xt, k, yt, s, s) {
                    Ok((theta, _, _)) => total += affine::summed_log_loss(xv, k, yv, &theta),
                    Err(_) => return f64::INFINITY,
                }
            }
            total / rows as f64
        })
        .collect();
    let best = scores.iter().fold(f64::INFINITY, |m, &v| m.min(v));
    if !best.is_finite() {
        return Err(MulticlassError::Failed(
            "Dirichlet calibration: every strength on the grid failed in cross-validation".into(),
        ));
    }
    let limit = best + TIE * best.abs().max(1.0);
    let strength = grid
        .iter()
        .zip(&scores)
        .filter(|(_, &sc)| sc <= limit)
        .fold(f64::NEG_INFINITY, |m, (&g, _)| m.max(g));
    Ok(Choice {
        strength,
        scores,
        cross_validated: true,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::multiclass::softmax_into;

    /// Probabilities softmax(z) of over-confident, biased logits
    /// z_c = (1 + c)·l_c + c/2, labels from softmax(l).
    fn sample(n: usize, k: usize, seed: u64) -> (Vec<f64>, Vec<usize>) {
        let (z, y) = crate::multiclass::testdata::labelled(n, k, seed, |c, v| {
            (1.0 + c as f64) * v + 0.5 * c as f64
        });
        let mut q = vec![0.0; z.len()];
        for (zr, qr) in z.chunks_exact(k).zip(q.chunks_exact_mut(k)) {
            softmax_into(zr, qr);
        }
        (q, y)
    }

    fn permute(q: &[f64], y: &[usize], perm: &[usize]) -> (Vec<f64>, Vec<usize>) {
        let k = perm.len();
        let mut qp = vec![0.0; q.len()];
        for (i, r) in q.chunks(k).enumerate() {
            for c in 0..k {
                qp[k * i + perm[c]] = r[c];
            }
        }
        (qp, y.iter().map(|&c| perm[c]).collect())
    }

    #[test]
    fn optimum_is_stationary_and_improves_the_log_loss() {
        let (q, y) = sample(600, 3, 11);
        let f = fit_with(&q, 3, &y, 1e-2, 1e-2).unwrap();
        let mut theta = Vec::new();
        for c in 0..3 {
            theta.extend_from_slice(&f.w[3 * c..3 * c + 3]);
            theta.push(f.b[c]);
        }
        let (g, _) =
            affine::gradient_hessian(&log_features(&q), 3, &y, &theta, &penalty_of(3, 1e-2, 1e-2));
        assert!(g.iter().all(|v| v.abs() < 1e-10), "{g:?}");
        let ll = |p: &[f64]| crate::multiclass::metrics::log_loss(p, 3, &y, 1e-6).unwrap();
        let p = f.predict(&q).unwrap();
        assert!(ll(&p) < ll(&q) - 0.01, "{} vs {}", ll(&p), ll(&q));
        // A stronger off-diagonal penalty shrinks the off-diagonal entries.
        let strong = fit_with(&q, 3, &y, 10.0, 1e-2).unwrap();
        let off = |w: &[f64]| {
            (0..9)
                .filter(|t| t % 4 != 0)
                .map(|t| w[t] * w[t])
                .sum::<f64>()
        };
        assert!(off(&strong.w) < off(&f.w));
    }

    #[test]
    fn permuting_classes_permutes_the_fit_and_the_choice() {
        let (q, y) = sample(300, 3, 21);
        let perm = [2, 0, 1];
        let (qp, yp) = permute(&q, &y, &perm);
        let f = fit(&q, 3, &y).unwrap();
        let g = fit(&qp, 3, &yp).unwrap();
        assert_eq!(f.lambda, g.lambda);
        for c in 0..3 {
            assert!((f.b[c] - g.b[perm[c]]).abs() < 1e-8);
            for d in 0..3 {
                assert!((f.w[3 * c + d] - g.w[3 * perm[c] + perm[d]]).abs() < 1e-8);
            }
        }
        let (pf, pg) = (f.predict(&q).unwrap(), g.predict(&qp).unwrap());
        for i in 0..y.len() {
            for c in 0..3 {
                assert!((pf[3 * i + c] - pg[3 * i + perm[c]]).abs() < 1e-9);
            }
        }
    }

    #[test]
    fn the_choice_ignores_the_row_order() {
        let (q, y) = sample(240, 4, 7);
        let a = select(&q, 4, &y, &Selection::default()).unwrap();
        assert!(a.cross_validated && a.scores.iter().all(|s| s.is_finite()));
        // Shuffle the rows with a seeded Fisher–Yates.
        let n = y.len();
        let mut order: Vec<usize> = (0..n).collect();
        let mut h = 99u64;
        for i in (1..n).rev() {
            h = crate::split::splitmix64(h);
            order.swap(i, (h % (i as u64 + 1)) as usize);
        }
        let qs: Vec<f64> = order
            .iter()
            .flat_map(|&i| q[4 * i..4 * i + 4].iter().copied())
            .collect();
        let ys: Vec<usize> = order.iter().map(|&i| y[i]).collect();
        let b = select(&qs, 4, &ys, &Selection::default()).unwrap();
        assert_eq!(a.strength, b.strength);
        for (x, z) in a.scores.iter().zip(&b.scores) {
            assert!((x - z).abs() <= 1e-9 * x.abs(), "{x} vs {z}");
        }
        // Another seed gives other folds (and so other scores).
        let other = Selection {
            seed: 1,
            ..Selection::default()
        };
        let c = select(&q, 4, &y, &other).unwrap();
        assert_ne!(a.scores, c.scores);
        // Folds are spread: every fold holds some of the 240 rows.
        let mut count = [0usize; FOLDS];
        for (r, &l) in q.chunks_exact(4).zip(&y) {
            count[fold_of(r, l, FOLDS, FOLD_SEED)] += 1;
        }
        assert!(count.iter().all(|&c| c > 20), "{count:?}");
    }

    #[test]
    fn few_rows_take_the_strongest_value_and_zeros_are_clipped() {
        // Two rows of two classes: every fold split leaves one class.
        let q = [1.0, 0.0, 0.0, 1.0];
        let f = fit(&q, 2, &[0, 1]).unwrap();
        let c = f.choice.as_ref().unwrap();
        assert!(!c.cross_validated);
        assert_eq!(f.lambda, 1.0);
        let p = f.predict(&[0.0, 1.0, 0.5, 0.5]).unwrap();
        assert!(p.iter().all(|v| v.is_finite() && (0.0..=1.0).contains(v)));
        // Separable rows: the diagonal guard keeps the fit finite.
        let (q, _) = sample(60, 3, 3);
        let y: Vec<usize> = q
            .chunks_exact(3)
            .map(|r| (0..3).fold(0, |b, c| if r[c] > r[b] { c } else { b }))
            .collect();
        let f = fit_with(&q, 3, &y, 1e-3, 1e-3).unwrap();
        assert!(f.w.iter().chain(&f.b).all(|v| v.is_finite()));
    }

    #[test]
    fn bad_input_is_an_error() {
        assert_eq!(fit(&[], 3, &[]), Err(MulticlassError::Empty));
        assert_eq!(
            fit(&[0.2, 0.8, 0.5, 0.5], 2, &[1, 1]),
            Err(MulticlassError::OneClass { class: 1, rows: 2 })
        );
        assert!(matches!(
            fit(&[0.2, 0.7, 0.5, 0.5], 2, &[0, 1]),
            Err(MulticlassError::RowSum { row: 0, .. })
        ));
        assert!(fit(&[0.2, 0.8], 1, &[0, 0]).is_err());
        let q = [0.2, 0.8, 0.6, 0.4, 0.3, 0.7];
        assert!(fit_with(&q, 2, &[0, 1, 1], 0.0, 1.0).is_err());
        assert!(fit_with(&q, 2, &[0, 1, 1], 1.0, f64::INFINITY).is_err());
        let empty = Selection {
            grid: Vec::new(),
            ..Selection::default()
        };
        assert!(fit_selected(&q, 2, &[0, 1, 1], &empty).is_err());
        let one = Selection {
            folds: 1,
            ..Selection::default()
        };
        assert!(fit_selected(&q, 2, &[0, 1, 1], &one).is_err());
        let f = fit_with(&q, 2, &[0, 1, 1], 1.0, 1.0).unwrap();
        assert!(f.predict(&[0.2, 0.8, 0.5]).is_err());
        assert!(f.predict(&[1.2, -0.2]).is_err());
        assert!(f.predict(&[f64::NAN, 0.5]).is_err());
    }
}
