//! One-vs-rest calibration with any binary method (Zadrozny & Elkan 2002,
//! KDD, "Transforming classifier scores into accurate multiclass probability
//! estimates").
//!
//! Math: for each class k a binary map f_k is fitted by one of the binary
//! methods of `crate::calibrate` (any [`MethodSpec`]) on the pairs
//! (s_ik, [y_i = k]), the class's own score column against "this class or
//! not". A row s_i is then mapped column by column and renormalised:
//!
//!   p_ik = f_k(s_ik) / Σ_j f_j(s_ij).
//!
//! The binary maps return probabilities in [0, 1], so the sum is ≥ 0; when it
//! is 0 (every map gives 0, as isotonic or binning maps can below their
//! lowest positive) the row has no calibrated information and falls back to
//! the uncalibrated row: the scores themselves for probability rows, and
//! softmax(s_i) for margins. [`OneVsRestFit::predict_with_fallbacks`] names
//! those rows. Like the binary methods, each map sees only its class's
//! score; the K maps are fitted independently, so permuting the classes
//! permutes the maps and the outputs.
//!
//! Scores are either probability rows ([`ScoreKind::Probability`]: entries
//! in [0, 1] summing to 1 within `ROW_SUM_TOLERANCE`, as the other
//! multiclass maps take them) or margins ([`ScoreKind::Margin`]: any finite
//! reals, such as logits or one-vs-rest decision values). The method's
//! parameters are checked for the score kind by [`MethodSpec::build`]. Every
//! class needs a positive and a negative row among the calibration rows (a
//! binary fit needs two classes): otherwise the fit is an error naming the
//! class.

use super::{
    check_finite, check_logits, check_probabilities, check_probability_rows, check_two_classes,
    softmax_into, MulticlassError,
};
use crate::calibrate::{state::MapState, FittedMap, MethodSpec, ScoreKind};

/// K fitted binary maps, one per class.
pub struct OneVsRestFit {
    maps: Vec<Box<dyn FittedMap>>,
    /// The binary method's kind id (as written in suites).
    pub kind: &'static str,
    /// What the score columns hold.
    pub score_kind: ScoreKind,
    /// Each class's fit notes (for example `separable` for Platt scaling).
    pub notes: Vec<Vec<&'static str>>,
}

impl std::fmt::Debug for OneVsRestFit {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("OneVsRestFit")
            .field("kind", &self.kind)
            .field("score_kind", &self.score_kind)
            .field("notes", &self.notes)
            .field("maps", &self.states())
            .finish()
    }
}

impl OneVsRestFit {
    /// Number of classes K.
    pub fn classes(&self) -> usize {
        self.maps.len()
    }

    /// The saved form of each class's binary map.
    pub fn states(&self) -> Vec<MapState> {
        self.maps.iter().map(|m| m.state()).collect()
    }

    /// Calibrated probability rows for the row-major scores (rows of K).
    pub fn predict(&self, scores: &[f64]) -> Result<Vec<f64>, MulticlassError> {
        Ok(self.predict_with_fallbacks(scores)?.0)
    }

    /// Calibrated rows and the rows (by index) where every map gave 0 and
    /// the uncalibrated row was used.
    pub fn predict_with_fallbacks(
        &self,
        scores: &[f64],
    ) -> Result<(Vec<f64>, Vec<usize>), MulticlassError> {
        let k = self.classes();
        let n = match self.score_kind {
            ScoreKind::Probability => check_probability_rows(scores, k)?,
            ScoreKind::Margin => check_finite(scores, k)?,
        };
        let mut out = vec![0.0; scores.len()];
        let (mut column, mut mapped) = (vec![0.0; n], vec![0.0; n]);
        for (c, map) in self.maps.iter().enumerate() {
            for (v, r) in column.iter_mut().zip(scores.chunks_exact(k)) {
                *v = r[c];
            }
            map.predict(&column, &mut mapped);
            for (o, &v) in out.chunks_exact_mut(k).zip(&mapped) {
                // A binary map's output is in [0, 1]; anything else (never
                // expected) counts as no information.
                o[c] = if (0.0..=1.0).contains(&v) { v } else { 0.0 };
            }
        }
        let mut fallbacks = Vec::new();
        for (i, (o, r)) in out
            .chunks_exact_mut(k)
            .zip(scores.chunks_exact(k))
            .enumerate()
        {
            let sum: f64 = o.iter().sum();
            if sum > 0.0 {
                o.iter_mut().for_each(|v| *v /= sum);
            } else {
                fallbacks.push(i);
                match self.score_kind {
                    ScoreKind::Probability => o.copy_from_slice(r),
                    ScoreKind::Margin => softmax_into(r, o),
                }
            }
        }
        Ok((out, fallbacks))
    }
}

/// Fits one binary map of `method` per class on the row-major `scores`
/// (rows of K = `classes`) of the given kind.
pub fn fit(
    scores: &[f64],
    classes: usize,
    labels: &[usize],
    method: &MethodSpec,
    score_kind: ScoreKind,
) -> Result<OneVsRestFit, MulticlassError> {
    let n = match score_kind {
        ScoreKind::Probability => check_probabilities(scores, classes, labels)?,
        ScoreKind::Margin => check_logits(scores, classes, labels)?,
    };
    check_two_classes(labels)?;
    let calibrator = method
        .build(score_kind)
        .map_err(|e| MulticlassError::Failed(format!("one-vs-rest {}: {e}", method.kind())))?;
    let mut maps = Vec::with_capacity(classes);
    let mut notes = Vec::with_capacity(classes);
    let mut column = vec![0.0; n];
    let mut hit = vec![false; n];
    for c in 0..classes {
        for ((v, h), (r, &y)) in column
            .iter_mut()
            .zip(hit.iter_mut())
            .zip(scores.chunks_exact(classes).zip(labels))
        {
            *v = r[c];
            *h = y == c;
        }
        let fitted = calibrator.fit(&column, &hit).map_err(|e| {
            MulticlassError::Failed(format!(
                "one-vs-rest {}, class {c} against the rest: {e}",
                calibrator.kind()
            ))
        })?;
        maps.push(fitted.map);
        notes.push(fitted.notes);
    }
    Ok(OneVsRestFit {
        maps,
        kind: calibrator.kind(),
        score_kind,
        notes,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn margins(n: usize, k: usize, seed: u64) -> (Vec<f64>, Vec<usize>) {
        crate::multiclass::testdata::labelled(n, k, seed, |c, v| {
            (1.0 + c as f64) * v + 0.5 * c as f64
        })
    }

    fn probabilities(n: usize, k: usize, seed: u64) -> (Vec<f64>, Vec<usize>) {
        let (z, y) = margins(n, k, seed);
        let mut q = vec![0.0; z.len()];
        for (zr, qr) in z.chunks_exact(k).zip(q.chunks_exact_mut(k)) {
            softmax_into(zr, qr);
        }
        (q, y)
    }

    /// A method spec as a suite writes it, e.g. `kind = "binning", bins = 5`.
    fn spec(toml_fields: &str) -> MethodSpec {
        #[derive(serde::Deserialize)]
        struct W {
            m: MethodSpec,
        }
        toml::from_str::<W>(&format!("m = {{ {toml_fields} }}"))
            .unwrap()
            .m
    }

    fn methods() -> Vec<MethodSpec> {
        [
            r#"kind = "platt""#,
            r#"kind = "isotonic""#,
            r#"kind = "beta""#,
            r#"kind = "binning", bins = 5"#,
            r#"kind = "temperature""#,
            r#"kind = "venn-abers""#,
        ]
        .iter()
        .map(|s| spec(s))
        .collect()
    }

    #[test]
    fn rows_sum_to_one_for_every_method() {
        let (q, y) = probabilities(300, 3, 5);
        let (z, yz) = margins(300, 4, 6);
        let (tq, _) = probabilities(200, 3, 55);
        let (tz, _) = margins(200, 4, 66);
        for m in methods() {
            for (s, k, y, t, kind) in [
                (&q, 3, &y, &tq, ScoreKind::Probability),
                (&z, 4, &yz, &tz, ScoreKind::Margin),
            ] {
                let f = fit(s, k, y, &m, kind).unwrap();
                assert_eq!(f.classes(), k);
                assert_eq!(f.kind, m.kind());
                let (p, fallbacks) = f.predict_with_fallbacks(t).unwrap();
                assert_eq!(p.len(), t.len());
                for (i, r) in p.chunks_exact(k).enumerate() {
                    let sum: f64 = r.iter().sum();
                    assert!((sum - 1.0).abs() < 1e-12, "{} row {i}: {sum}", m.kind());
                    assert!(r.iter().all(|v| (0.0..=1.0).contains(v)));
                }
                assert!(fallbacks.len() < t.len() / k, "{}: {fallbacks:?}", m.kind());
            }
        }
    }

    #[test]
    fn identity_returns_the_probability_rows() {
        let (q, y) = probabilities(50, 3, 8);
        let f = fit(
            &q,
            3,
            &y,
            &spec(r#"kind = "identity""#),
            ScoreKind::Probability,
        )
        .unwrap();
        let p = f.predict(&q).unwrap();
        for (a, b) in p.iter().zip(&q) {
            assert!((a - b).abs() < 1e-15);
        }
        // The identity needs probabilities.
        assert!(fit(&q, 3, &y, &spec(r#"kind = "identity""#), ScoreKind::Margin).is_err());
    }

    #[test]
    fn permuting_classes_permutes_the_outputs() {
        let (z, y) = margins(200, 3, 12);
        let perm = [1, 2, 0];
        let mut zp = vec![0.0; z.len()];
        for (i, r) in z.chunks(3).enumerate() {
            for c in 0..3 {
                zp[3 * i + perm[c]] = r[c];
            }
        }
        let yp: Vec<usize> = y.iter().map(|&c| perm[c]).collect();
        for m in methods() {
            let f = fit(&z, 3, &y, &m, ScoreKind::Margin).unwrap();
            let g = fit(&zp, 3, &yp, &m, ScoreKind::Margin).unwrap();
            let (pf, pg) = (f.predict(&z).unwrap(), g.predict(&zp).unwrap());
            for i in 0..y.len() {
                for c in 0..3 {
                    assert!((pf[3 * i + c] - pg[3 * i + perm[c]]).abs() < 1e-12);
                }
            }
        }
    }

    #[test]
    fn rows_where_every_map_gives_zero_fall_back() {
        // Class c's positives are exactly the rows with the largest score
        // in column c, and the lowest scores are all negatives, so plain
        // isotonic maps give 0 below them.
        let mut z = Vec::new();
        let mut y = Vec::new();
        for i in 0..60 {
            let c = i % 3;
            let mut r = [0.0; 3];
            r[c] = 1.0 + (i / 3) as f64 * 0.01;
            z.extend_from_slice(&r);
            y.push(c);
        }
        let iso = spec(r#"kind = "isotonic""#);
        let f = fit(&z, 3, &y, &iso, ScoreKind::Margin).unwrap();
        let rows = [-5.0, -6.0, -7.0, 2.0, -1.0, -1.0];
        let (p, fallbacks) = f.predict_with_fallbacks(&rows).unwrap();
        assert_eq!(fallbacks, vec![0]);
        let mut soft = [0.0; 3];
        softmax_into(&rows[..3], &mut soft);
        assert_eq!(&p[..3], &soft);
        assert_eq!(&p[3..], &[1.0, 0.0, 0.0]);
    }

    #[test]
    fn bad_input_is_an_error() {
        let platt = spec(r#"kind = "platt""#);
        let m = ScoreKind::Margin;
        assert_eq!(
            fit(&[], 3, &[], &platt, m).unwrap_err(),
            MulticlassError::Empty
        );
        assert_eq!(
            fit(&[1.0, 0.0, 0.0, 2.0, 0.0, 0.0], 3, &[0, 0], &platt, m).unwrap_err(),
            MulticlassError::OneClass { class: 0, rows: 2 }
        );
        // A class without a row of its own: named in the error.
        let e = fit(&[1.0, 0.0, 0.0, 0.0, 2.0, 0.0], 3, &[0, 1], &platt, m).unwrap_err();
        assert!(e.to_string().contains("class 2"), "{e}");
        assert!(fit(&[1.0, f64::NAN, 0.0, 2.0], 2, &[0, 1], &platt, m).is_err());
        assert!(fit(
            &[0.3, 0.3, 0.5, 0.5],
            2,
            &[0, 1],
            &platt,
            ScoreKind::Probability
        )
        .is_err());
        let bad = spec(r#"kind = "binning", bins = 0"#);
        let e = fit(&[1.0, 0.0, 0.0, 2.0], 2, &[0, 1], &bad, m).unwrap_err();
        assert!(e.to_string().contains("bins"), "{e}");
        let f = fit(&[1.0, 0.0, 0.0, 2.0, 3.0, 1.0], 2, &[0, 1, 0], &platt, m).unwrap();
        assert!(f.predict(&[1.0, 2.0, 3.0]).is_err());
        assert!(f.predict(&[1.0, f64::INFINITY]).is_err());
    }
}
