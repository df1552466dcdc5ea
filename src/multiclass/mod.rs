//! Multiclass calibration, library only (not yet wired into suites, reports
//! or `fit`/`apply`).
//!
//! Every function here takes a row-major n×K matrix as a flat `&[f64]` of
//! length n·K together with K (`classes`), and labels as `&[usize]` in
//! 0..K. Row i is `values[i·K .. (i+1)·K]`.
//!
//! * [`metrics`]: multiclass log loss, Brier score, top-label and classwise
//!   expected calibration error.
//! * [`temperature`]: temperature scaling, p = softmax(z / T).
//! * [`vector`]: vector scaling, p = softmax(w ⊙ z + b).
//! * [`matrix`]: matrix scaling, p = softmax(W z + b).
//! * [`dirichlet`]: Dirichlet calibration, p = softmax(W ln q + b) with
//!   ODIR regularisation chosen by cross-validation.
//! * [`one_vs_rest`]: any binary method of `crate::calibrate` per class,
//!   rows renormalised.
//!
//! Inputs are checked before any work ([`check_probabilities`],
//! [`check_logits`]); bad input is a [`MulticlassError`] naming the row and
//! column, never a panic and never a NaN result.

mod affine;
pub mod dirichlet;
pub mod matrix;
pub mod metrics;
pub mod one_vs_rest;
pub mod temperature;
pub mod vector;

/// Why a multiclass input or fit cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum MulticlassError {
    #[error("the input holds no rows")]
    Empty,
    #[error("{classes} classes: at least 2 are needed")]
    TooFewClasses { classes: usize },
    #[error("{len} values do not form rows of {classes} classes")]
    Shape { len: usize, classes: usize },
    #[error("{rows} rows but {labels} labels")]
    LabelCount { rows: usize, labels: usize },
    #[error("row {row}: label {label} is not a class (classes are 0..{classes})")]
    LabelOutOfRange {
        row: usize,
        label: usize,
        classes: usize,
    },
    #[error("row {row}, class {class}: value {value} is not finite (a log-probability of a zero probability is −∞: clip the probabilities first)")]
    NotFinite {
        row: usize,
        class: usize,
        value: f64,
    },
    #[error("row {row}, class {class}: probability {value} is outside [0, 1]")]
    NotProbability {
        row: usize,
        class: usize,
        value: f64,
    },
    #[error("row {row}: probabilities sum to {sum}, not 1 (tolerance {ROW_SUM_TOLERANCE:e})")]
    RowSum { row: usize, sum: f64 },
    #[error("every one of the {rows} labels is class {class}: a fit needs at least two classes")]
    OneClass { class: usize, rows: usize },
    #[error("row {row}, class {class}: logit {value:e} is beyond ±{FIT_LOGIT_LIMIT:e}, too large to fit a map to")]
    LogitTooLarge {
        row: usize,
        class: usize,
        value: f64,
    },
    #[error("every row's label has the largest logit: the log loss keeps falling as the temperature goes to 0, so no finite temperature fits")]
    Separable,
    #[error("{0}")]
    Failed(String),
}

/// Largest |logit| a fit accepts: squares and sums of n rows stay far from
/// overflow (a logit of 1e100 already means a probability of e^-1e100).
pub const FIT_LOGIT_LIMIT: f64 = 1e100;

/// How far a probability row's sum may be from 1: a few thousand ulps, so
/// that rows written as decimal text (or normalised in single precision on
/// the way) pass, while rows that are not distributions do not.
pub const ROW_SUM_TOLERANCE: f64 = 1e-6;

/// Checks the shape of a row-major matrix and its labels; returns the number
/// of rows n ≥ 1.
pub fn check_shape(
    values: &[f64],
    classes: usize,
    labels: &[usize],
) -> Result<usize, MulticlassError> {
    if classes < 2 {
        return Err(MulticlassError::TooFewClasses { classes });
    }
    if values.len() % classes != 0 {
        return Err(MulticlassError::Shape {
            len: values.len(),
            classes,
        });
    }
    let rows = values.len() / classes;
    if rows != labels.len() {
        return Err(MulticlassError::LabelCount {
            rows,
            labels: labels.len(),
        });
    }
    if rows == 0 {
        return Err(MulticlassError::Empty);
    }
    if let Some((row, &label)) = labels.iter().enumerate().find(|(_, &l)| l >= classes) {
        return Err(MulticlassError::LabelOutOfRange {
            row,
            label,
            classes,
        });
    }
    Ok(rows)
}

/// Checks a probability matrix: the shape, every entry finite and in [0, 1],
/// every row summing to 1 within [`ROW_SUM_TOLERANCE`]. Returns n.
pub fn check_probabilities(
    p: &[f64],
    classes: usize,
    labels: &[usize],
) -> Result<usize, MulticlassError> {
    check_shape(p, classes, labels)?;
    check_probability_rows(p, classes)
}

/// Checks probability rows without labels (for predictions): K ≥ 2, whole
/// rows, every entry finite and in [0, 1], every row summing to 1 within
/// [`ROW_SUM_TOLERANCE`]. Returns n (0 for no values).
pub fn check_probability_rows(p: &[f64], classes: usize) -> Result<usize, MulticlassError> {
    if classes < 2 {
        return Err(MulticlassError::TooFewClasses { classes });
    }
    if p.len() % classes != 0 {
        return Err(MulticlassError::Shape {
            len: p.len(),
            classes,
        });
    }
    for (row, r) in p.chunks_exact(classes).enumerate() {
        for (class, &value) in r.iter().enumerate() {
            if !value.is_finite() {
                return Err(MulticlassError::NotFinite { row, class, value });
            }
            if !(0.0..=1.0).contains(&value) {
                return Err(MulticlassError::NotProbability { row, class, value });
            }
        }
        let sum: f64 = r.iter().sum();
        if (sum - 1.0).abs() > ROW_SUM_TOLERANCE {
            return Err(MulticlassError::RowSum { row, sum });
        }
    }
    Ok(p.len() / classes)
}

/// Checks a logit matrix: the shape and every entry finite. Returns n.
pub fn check_logits(z: &[f64], classes: usize, labels: &[usize]) -> Result<usize, MulticlassError> {
    let rows = check_shape(z, classes, labels)?;
    check_finite(z, classes)?;
    Ok(rows)
}

/// Checks the logits and labels a fit takes: [`check_logits`], every
/// |logit| ≤ [`FIT_LOGIT_LIMIT`] and labels of at least two classes.
pub fn check_fit_input(
    z: &[f64],
    classes: usize,
    labels: &[usize],
) -> Result<usize, MulticlassError> {
    let rows = check_logits(z, classes, labels)?;
    if let Some(i) = z.iter().position(|v| v.abs() > FIT_LOGIT_LIMIT) {
        return Err(MulticlassError::LogitTooLarge {
            row: i / classes,
            class: i % classes,
            value: z[i],
        });
    }
    check_two_classes(labels)?;
    Ok(rows)
}

/// Every entry of a row-major matrix finite (for predictions, which have no labels).
pub fn check_finite(z: &[f64], classes: usize) -> Result<usize, MulticlassError> {
    if classes < 2 {
        return Err(MulticlassError::TooFewClasses { classes });
    }
    if z.len() % classes != 0 {
        return Err(MulticlassError::Shape {
            len: z.len(),
            classes,
        });
    }
    if let Some(i) = z.iter().position(|v| !v.is_finite()) {
        return Err(MulticlassError::NotFinite {
            row: i / classes,
            class: i % classes,
            value: z[i],
        });
    }
    Ok(z.len() / classes)
}

/// A fit needs labels of at least two classes.
pub fn check_two_classes(labels: &[usize]) -> Result<(), MulticlassError> {
    match labels.first() {
        None => Err(MulticlassError::Empty),
        Some(&first) if labels.iter().all(|&l| l == first) => Err(MulticlassError::OneClass {
            class: first,
            rows: labels.len(),
        }),
        Some(_) => Ok(()),
    }
}

/// ln Σ_k exp(a_k) without overflow: m + ln Σ exp(a_k − m), m = max a_k.
/// +∞ when some a_k is +∞, −∞ when every a_k is −∞ (or `a` is empty).
pub fn log_sum_exp(a: &[f64]) -> f64 {
    let m = a.iter().fold(f64::NEG_INFINITY, |m, &v| m.max(v));
    if !m.is_finite() {
        return m;
    }
    m + a.iter().map(|&v| (v - m).exp()).sum::<f64>().ln()
}

/// softmax(a) into `out`, never NaN for a without NaN: the usual
/// exp(a_k − max a) / Σ; when some a_k are +∞ the mass is shared equally
/// among them (the limit), and a row of −∞ only gives the uniform row.
pub fn softmax_into(a: &[f64], out: &mut [f64]) {
    let m = a.iter().fold(f64::NEG_INFINITY, |m, &v| m.max(v));
    if m == f64::INFINITY {
        let top = a.iter().filter(|&&v| v == m).count() as f64;
        for (o, &v) in out.iter_mut().zip(a) {
            *o = if v == m { 1.0 / top } else { 0.0 };
        }
        return;
    }
    if m == f64::NEG_INFINITY {
        let u = 1.0 / a.len() as f64;
        out.iter_mut().for_each(|o| *o = u);
        return;
    }
    let mut s = 0.0;
    for (o, &v) in out.iter_mut().zip(a) {
        *o = (v - m).exp();
        s += *o;
    }
    // s ≥ 1 (the maximum contributes exp(0)).
    for o in out.iter_mut() {
        *o /= s;
    }
}

/// Seeded labelled logits for the fitters' unit tests.
#[cfg(test)]
pub(crate) mod testdata {
    use super::softmax_into;
    use crate::split::splitmix64;

    fn unit(h: u64) -> f64 {
        ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// n rows of K classes: latent logits l ~ U(−2, 2)^K (SplitMix64 from
    /// `seed`), a label drawn from softmax(l), and the given logits
    /// `given(c, l_c)` of each class c (row-major).
    pub fn labelled(
        n: usize,
        k: usize,
        seed: u64,
        given: impl Fn(usize, f64) -> f64,
    ) -> (Vec<f64>, Vec<usize>) {
        let mut z = Vec::with_capacity(n * k);
        let mut y = Vec::with_capacity(n);
        let mut h = seed;
        let mut next = || {
            h = splitmix64(h);
            unit(h)
        };
        let mut p = vec![0.0; k];
        for _ in 0..n {
            let l: Vec<f64> = (0..k).map(|_| 4.0 * next() - 2.0).collect();
            softmax_into(&l, &mut p);
            let u = next();
            let (mut acc, mut label) = (0.0, k - 1);
            for (c, &pc) in p.iter().enumerate() {
                acc += pc;
                if u < acc {
                    label = c;
                    break;
                }
            }
            y.push(label);
            z.extend(l.iter().enumerate().map(|(c, &v)| given(c, v)));
        }
        (z, y)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shape_errors_are_named() {
        assert_eq!(
            check_shape(&[0.5, 0.5], 1, &[0, 0]),
            Err(MulticlassError::TooFewClasses { classes: 1 })
        );
        assert_eq!(
            check_shape(&[0.5, 0.5, 0.1], 2, &[0]),
            Err(MulticlassError::Shape { len: 3, classes: 2 })
        );
        assert_eq!(
            check_shape(&[0.5, 0.5], 2, &[0, 1]),
            Err(MulticlassError::LabelCount { rows: 1, labels: 2 })
        );
        assert_eq!(check_shape(&[], 3, &[]), Err(MulticlassError::Empty));
        assert_eq!(
            check_shape(&[0.5, 0.5], 2, &[2]),
            Err(MulticlassError::LabelOutOfRange {
                row: 0,
                label: 2,
                classes: 2
            })
        );
    }

    #[test]
    fn probability_rows_are_checked() {
        assert!(check_probabilities(&[0.2, 0.8, 1.0, 0.0], 2, &[0, 1]).is_ok());
        assert!(matches!(
            check_probabilities(&[0.2, 0.7], 2, &[0]),
            Err(MulticlassError::RowSum { row: 0, .. })
        ));
        assert!(matches!(
            check_probabilities(&[0.2, 0.8, -0.5, 1.5], 2, &[0, 1]),
            Err(MulticlassError::NotProbability {
                row: 1,
                class: 0,
                ..
            })
        ));
        assert!(matches!(
            check_logits(&[0.0, f64::NEG_INFINITY], 2, &[0]),
            Err(MulticlassError::NotFinite {
                row: 0,
                class: 1,
                ..
            })
        ));
    }

    #[test]
    fn softmax_and_log_sum_exp_survive_extremes() {
        let mut out = [0.0; 3];
        softmax_into(&[1e308, -1e308, 0.0], &mut out);
        assert_eq!(out, [1.0, 0.0, 0.0]);
        softmax_into(&[f64::INFINITY, f64::INFINITY, 3.0], &mut out);
        assert_eq!(out, [0.5, 0.5, 0.0]);
        softmax_into(&[f64::NEG_INFINITY; 3], &mut out);
        assert_eq!(out, [1.0 / 3.0; 3]);
        assert_eq!(log_sum_exp(&[1000.0, 1000.0]), 1000.0 + 2f64.ln());
        assert!(
            (log_sum_exp(&[-1000.0, -1001.0]) - (-1000.0 + (1.0 + (-1f64).exp()).ln())).abs()
                < 1e-12
        );
    }
}
