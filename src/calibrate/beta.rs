//! Beta calibration (Kull, Silva Filho & Flach 2017, AISTATS, "Beta calibration:
//! a well-founded and easily implemented improvement on logistic calibration for
//! binary classifiers").
//!
//! Math: for a score s ∈ (0, 1) the full (three-parameter) map is
//! logit p(s) = a·ln s − b·ln(1 − s) + c, the log-likelihood ratio of two beta
//! densities. It is fitted by unregularised maximum-likelihood logistic
//! regression on the two features x₁ = ln s and x₂ = −ln(1 − s) (see
//! `logistic.rs`). The map is monotone non-decreasing in s when a, b ≥ 0; as in
//! the paper, when a fitted a (or b) is negative the model is refitted with that
//! feature removed (a = 0 or b = 0), and when the remaining coefficient is also
//! negative (or both were negative) the map falls back to the constant base rate
//! of the calibration sample. A refit is noted `refit` in the unit's status.
//! For one feature the sign of the fitted slope is the sign of the covariance
//! of the feature with the labels (see `slope_sign`), computed from exact
//! counts: a slope that is zero in exact arithmetic gives a = 0 and no refit,
//! rather than a rounding-level value of either sign. The shared fitter's sums
//! over the rows are order-free, so the map and its notes do not depend on
//! the order of the calibration rows.
//!
//! The tied (two-parameter) form a = b is logit p = a·logit(s) + c, i.e. logistic
//! calibration of the log-odds (the paper's comparison baseline); a negative a
//! also falls back to the constant base rate (`refit`).
//!
//! Scores: probabilities are clipped to [ε, 1 − ε] with ε = `LOGIT_EPS` = 1e-12
//! before the logarithms, so scores of exactly 0 or 1 give finite features
//! (|x| ≤ 27.7). For margin tasks the score is read as s = σ(m) and the features
//! are computed without clipping in the stable forms x₁ = ln σ(m) = −softplus(−m)
//! and x₂ = −ln(1 − σ(m)) = softplus(m); then x₁ + x₂ = m, so the tied form is
//! exactly Platt scaling of the margin.
//!
//! Separation: (x₁, x₂) lie on a strictly convex curve (dx₂/dx₁ = s/(1 − s)
//! increases with s), so a line in the feature plane meets it at most twice. The
//! unregularised likelihood has no maximum (Albert & Anderson 1984, Biometrika
//! 71) exactly when some line puts all positives on one closed side and all
//! negatives on the other: along the sorted scores, the classes form at most
//! three runs A | B | A, with rows of both classes allowed only at the (at most
//! two) tied scores where the line meets the curve. For one feature (the tied form
//! or a refit) the condition is the usual threshold separation. When detected, the
//! fit uses Platt's smoothed targets t₊ = (N₊ + 1)/(N₊ + 2), t₋ = 1/(N₋ + 2)
//! (finite optimum) and notes `separable`, as Platt scaling does here. The note
//! is kept when separation is found at any stage, even if the final map is a
//! refit that needed no smoothing.

use super::isotonic::merge_ties;
use super::logistic::{fit_logistic, softplus};
use super::platt::smoothed_targets;
use super::state::{finite, sig, smoothed_line, MapState, SavedMap};
use super::{
    check_sample, log_odds, sigmoid, Calibrator, FitError, Fitted, FittedMap, Method, ParamError,
    ScoreKind, Shape, LOGIT_EPS,
};
use serde::{Deserialize, Serialize};

/// Which beta-calibration family to fit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum BetaShape {
    /// a, b and c free (three parameters).
    #[default]
    Full,
    /// a = b (two parameters): logistic calibration of the log-odds.
    Tied,
}

impl BetaShape {
    pub fn as_str(self) -> &'static str {
        match self {
            BetaShape::Full => "full",
            BetaShape::Tied => "tied",
        }
    }
}

/// Beta calibration's parameters.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BetaParams {
    /// `full` (a, b, c) or `tied` (a = b).
    #[serde(default)]
    pub shape: BetaShape,
}

impl Method for BetaParams {
    fn kind(&self) -> &'static str {
        "beta"
    }
    fn keys(&self) -> &'static [(&'static str, &'static str)] {
        &[("shape", "full or tied")]
    }
    fn shape(&self) -> Shape {
        Shape::Parametric
    }
    fn validate(&self, _score_kind: ScoreKind) -> Result<(), ParamError> {
        Ok(())
    }
    fn calibrator(&self, score_kind: ScoreKind) -> Box<dyn Calibrator> {
        Box::new(Beta {
            shape: self.shape,
            score_kind,
        })
    }
}

/// The beta calibrator for scores of one kind.
pub struct Beta {
    pub shape: BetaShape,
    pub score_kind: ScoreKind,
}

/// The two features (ln s, −ln(1 − s)) of a score.
pub fn beta_features(score: f64, kind: ScoreKind) -> (f64, f64) {
    match kind {
        ScoreKind::Probability => {
            let s = score.clamp(LOGIT_EPS, 1.0 - LOGIT_EPS);
            (s.ln(), -(-s).ln_1p())
        }
        ScoreKind::Margin => (-softplus(-score), softplus(score)),
    }
}

/// Class of a tied group of rows: 1 all positive, −1 all negative, 0 mixed.
fn group_class(weight: f64, positives: f64) -> i8 {
    if positives == 0.0 {
        -1
    } else if positives == weight {
        1
    } else {
        0
    }
}

/// Quasi-separation along the sorted scores with at most `cuts` crossings: the
/// classes form runs A | B (| A), and mixed tie groups may sit only at a crossing.
/// `classes` are the group classes in score order.
pub fn separable_with_cuts(classes: &[i8], cuts: usize) -> bool {
    'outer: for a in [1i8, -1] {
        // region 0: class a; 1: class −a; 2: class a again.
        let mut region = 0usize;
        for &c in classes {
            let want = if region % 2 == 0 { a } else { -a };
            if c == want {
                continue;
            }
            // A mixed group is a crossing point; a group of the other class
            // starts the next region after a crossing between groups.
            region += 1;
            if region > cuts {
                continue 'outer;
            }
            if c == 0 {
                continue;
            }
            let want = if region % 2 == 0 { a } else { -a };
            debug_assert_eq!(c, want);
        }
        return true;
    }
    false
}

/// A fitted beta map: logit p = a·x₁ + b·x₂ + c.
pub struct BetaMap {
    pub a: f64,
    pub b: f64,
    pub c: f64,
    pub shape: BetaShape,
    pub score_kind: ScoreKind,
    pub smoothed: bool,
}

impl FittedMap for BetaMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            let z = match self.shape {
                BetaShape::Tied => self.a * log_odds(s, self.score_kind) + self.c,
                BetaShape::Full => {
                    let (x1, x2) = beta_features(s, self.score_kind);
                    self.a * x1 + self.b * x2 + self.c
                }
            };
            *o = sigmoid(z);
        }
    }
    fn state(&self) -> MapState {
        MapState::Beta(BetaState {
            shape: self.shape,
            score_kind: self.score_kind,
            a: self.a,
            b: self.b,
            c: self.c,
            smoothed_targets: self.smoothed,
        })
    }
}

/// The saved beta map.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(
    deny_unknown_fields,
    expecting = "struct variant MapState::Beta with 6 elements"
)]
pub struct BetaState {
    pub shape: BetaShape,
    pub score_kind: ScoreKind,
    pub a: f64,
    pub b: f64,
    pub c: f64,
    pub smoothed_targets: bool,
}

impl SavedMap for BetaState {
    fn kind(&self) -> &'static str {
        "beta"
    }
    fn summary(&self) -> Vec<String> {
        let (a, b, c) = (self.a, self.b, self.c);
        let mut v = match self.shape {
            BetaShape::Full => vec![
                "logit p = a·ln s − b·ln(1 − s) + c".to_string(),
                format!("a = {}", sig(a)),
                format!("b = {}", sig(b)),
                format!("c = {}", sig(c)),
            ],
            BetaShape::Tied => vec![
                "logit p = a·logit s + c (tied: a = b)".to_string(),
                format!("a = {}", sig(a)),
                format!("c = {}", sig(c)),
            ],
        };
        v.extend(smoothed_line(self.smoothed_targets));
        v
    }
    fn check(&self) -> Result<(), String> {
        let (a, b, c) = (self.a, self.b, self.c);
        finite("a", a)?;
        finite("b", b)?;
        finite("c", c)?;
        if a < 0.0 || b < 0.0 {
            return Err(format!(
                "a = {a} and b = {b} must be >= 0 (the map must not decrease)"
            ));
        }
        if self.shape == BetaShape::Tied && a != b {
            return Err(format!("the tied shape needs a = b, found {a} and {b}"));
        }
        Ok(())
    }
    fn restore(&self) -> Box<dyn FittedMap> {
        Box::new(BetaMap {
            a: self.a,
            b: self.b,
            c: self.c,
            shape: self.shape,
            score_kind: self.score_kind,
            smoothed: self.smoothed_targets,
        })
    }
    fn range_rule(&self) -> &'static str {
        "the parametric map is evaluated as it is (extrapolated)"
    }
    fn score_kind(&self) -> Option<ScoreKind> {
        Some(self.score_kind)
    }
}

fn targets(labels: &[bool], smoothed: bool) -> Vec<f64> {
    if smoothed {
        smoothed_targets(labels)
    } else {
        labels.iter().map(|&l| if l { 1.0 } else { 0.0 }).collect()
    }
}

/// (slope, intercept, smoothed targets used) of a one-feature fit.
type OneFit = (f64, f64, bool);

/// Sign of the maximum-likelihood slope of the one-feature model
/// σ(a·x + c) on 0/1 labels (or on Platt's smoothed targets, which keep the
/// order t₋ < t₊).
///
/// The likelihood profiled over c is convex in a, with derivative
/// −Σ (y_i − ȳ) x_i at a = 0, so the optimal slope has the sign of the
/// covariance S = Σ (y_i − ȳ)(x_i − x̄) (zero: a = 0 is optimal). S is read
/// here rather than off the fitted coefficient, because a slope that is 0 in
/// exact arithmetic (for example every tied score carrying the base rate)
/// comes out of an iterative fit as a rounding-level value of either sign,
/// and a negative sign would trigger a refit. Summed per distinct x with the
/// exact integer weights k = N·pos − n·P (N rows, P positives; n rows and pos
/// positives at that x, Σ k = 0, so the centre x̄ only conditions the sum),
/// compensated (Neumaier 1974), and in sorted order, S has a rounding error
/// of about 5e-16·Σ|terms|; it counts as zero below 1e-13·Σ|terms|, far above
/// that error and far below any covariance that moves a fit. Everything is
/// computed from the sorted rows, so the answer does not depend on row order.
fn slope_sign(x: &[f64], labels: &[bool]) -> std::cmp::Ordering {
    let mut rows: Vec<(f64, bool)> = x.iter().copied().zip(labels.iter().copied()).collect();
    rows.sort_unstable_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let total = rows.len() as i128;
    let positives = rows.iter().filter(|r| r.1).count() as i128;
    let centre = rows.iter().map(|r| r.0).sum::<f64>() / rows.len() as f64;
    let (mut sum, mut comp, mut size) = (0.0f64, 0.0f64, 0.0f64);
    let mut i = 0;
    while i < rows.len() {
        let xg = rows[i].0;
        let (mut n, mut pos) = (0i128, 0i128);
        while i < rows.len() && rows[i].0 == xg {
            n += 1;
            pos += rows[i].1 as i128;
            i += 1;
        }
        let term = (xg - centre) * (total * pos - n * positives) as f64;
        let next = sum + term;
        comp += if sum.abs() >= term.abs() {
            (sum - next) + term
        } else {
            (term - next) + sum
        };
        sum = next;
        size += term.abs();
    }
    let s = sum + comp;
    if s.abs() <= 1e-13 * size {
        std::cmp::Ordering::Equal
    } else if s > 0.0 {
        std::cmp::Ordering::Greater
    } else {
        std::cmp::Ordering::Less
    }
}

/// Fit a one-feature logistic model with the separation rule; returns
/// (slope, intercept, smoothed), or `None` when the slope is negative, and
/// whether the sample was separable for this model. The sign comes from
/// [`slope_sign`], so the refit decision does not rest on rounding; a zero
/// slope gives the constant base rate without a refit.
fn fit_one(x: &[f64], labels: &[bool], classes: &[i8]) -> Result<(Option<OneFit>, bool), FitError> {
    let sep = separable_with_cuts(classes, 1);
    match slope_sign(x, labels) {
        std::cmp::Ordering::Less => return Ok((None, sep)),
        std::cmp::Ordering::Equal => {
            return Ok((Some((0.0, base_rate_intercept(labels), false)), sep));
        }
        std::cmp::Ordering::Greater => {}
    }
    let m = fit_logistic(&[x], &targets(labels, sep))?;
    // The optimum is positive here; a negative fitted slope could only come
    // from a fit that stopped short, and the monotone answer is then flat.
    if m.coef[0] < 0.0 {
        return Ok((None, sep));
    }
    Ok((Some((m.coef[0], m.intercept, sep)), sep))
}

fn base_rate_intercept(labels: &[bool]) -> f64 {
    let pos = labels.iter().filter(|&&l| l).count() as f64;
    let neg = labels.len() as f64 - pos;
    (pos / neg).ln()
}

impl Calibrator for Beta {
    fn kind(&self) -> &'static str {
        "beta"
    }
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError> {
        check_sample(scores, labels)?;
        if scores.iter().any(|s| !s.is_finite()) {
            return Err(FitError::Failed("beta: non-finite score".into()));
        }
        // Classes of tied groups in the order of the transformed scores (both
        // features are increasing in the score, and the clip only merges ties).
        let keyed: Vec<f64> = match self.score_kind {
            ScoreKind::Probability => scores
                .iter()
                .map(|s| s.clamp(LOGIT_EPS, 1.0 - LOGIT_EPS))
                .collect(),
            ScoreKind::Margin => scores.to_vec(),
        };
        let groups = merge_ties(&keyed, labels);
        let classes: Vec<i8> = groups.iter().map(|g| group_class(g.1, g.2)).collect();
        let mut notes = Vec::new();
        // Separation seen at any stage (the full fit or a refit).
        let mut separation_seen: bool;
        let (a, b, c, smoothed) = match self.shape {
            BetaShape::Tied => {
                if groups.len() < 2 {
                    return Err(FitError::Failed(format!(
                        "beta (tied) needs at least 2 distinct scores: all {} scores in {} distinct value (after clipping to [1e-12, 1 - 1e-12])",
                        scores.len(),
                        groups.len()
                    )));
                }
                let z: Vec<f64> = scores
                    .iter()
                    .map(|&s| log_odds(s, self.score_kind))
                    .collect();
                let (fitted, sep) = fit_one(&z, labels, &classes)?;
                separation_seen = sep;
                match fitted {
                    Some((a, c, sm)) => (a, a, c, sm),
                    None => {
                        notes.push("refit");
                        (0.0, 0.0, base_rate_intercept(labels), false)
                    }
                }
            }
            BetaShape::Full => {
                if groups.len() < 3 {
                    return Err(FitError::Failed(format!(
                        "beta (full) needs at least 3 distinct scores: all {} scores in {} distinct values (after clipping to [1e-12, 1 - 1e-12])",
                        scores.len(),
                        groups.len()
                    )));
                }
                let (x1, x2): (Vec<f64>, Vec<f64>) = scores
                    .iter()
                    .map(|&s| beta_features(s, self.score_kind))
                    .unzip();
                let sep = separable_with_cuts(&classes, 2);
                separation_seen = sep;
                let m = fit_logistic(&[&x1, &x2], &targets(labels, sep))?;
                let (fa, fb) = (m.coef[0], m.coef[1]);
                if fa >= 0.0 && fb >= 0.0 {
                    (fa, fb, m.intercept, sep)
                } else {
                    notes.push("refit");
                    let reduced = if fa < 0.0 && fb < 0.0 {
                        None
                    } else {
                        let x = if fa < 0.0 { &x2 } else { &x1 };
                        let (fitted, sep1) = fit_one(x, labels, &classes)?;
                        separation_seen |= sep1;
                        fitted.map(|(s, c, sm)| {
                            if fa < 0.0 {
                                (0.0, s, c, sm)
                            } else {
                                (s, 0.0, c, sm)
                            }
                        })
                    };
                    reduced.unwrap_or((0.0, 0.0, base_rate_intercept(labels), false))
                }
            }
        };
        if smoothed || separation_seen {
            notes.insert(0, "separable");
        }
        Ok(Fitted {
            map: Box::new(BetaMap {
                a,
                b,
                c,
                shape: self.shape,
                score_kind: self.score_kind,
                smoothed,
            }),
            notes,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Derived by hand from the geometry above: threshold and interval patterns
    /// are separable by a line on the convex feature curve, A|B|A|B is not.
    #[test]
    fn separation_patterns() {
        assert!(separable_with_cuts(&[-1, -1, 1, 1], 1));
        assert!(separable_with_cuts(&[1, 1, -1], 1));
        assert!(separable_with_cuts(&[-1, 0, 1], 1));
        assert!(!separable_with_cuts(&[-1, 1, -1], 1));
        assert!(separable_with_cuts(&[-1, 1, -1], 2));
        assert!(separable_with_cuts(&[-1, 0, 1, 0, -1], 2));
        assert!(!separable_with_cuts(&[-1, 1, -1, 1], 2));
        assert!(!separable_with_cuts(&[-1, 0, 0, 0, 1], 2));
        assert!(!separable_with_cuts(&[0, 0, 0], 2));
        assert!(separable_with_cuts(&[0, 0], 2));
    }

    fn fit(shape: BetaShape, s: &[f64], y: &[bool]) -> Fitted {
        Beta {
            shape,
            score_kind: ScoreKind::Probability,
        }
        .fit(s, y)
        .unwrap()
    }

    #[test]
    fn separable_sample_is_noted_and_finite() {
        let s = [0.1, 0.2, 0.3, 0.6, 0.7, 0.8];
        let y = [false, false, false, true, true, true];
        for shape in [BetaShape::Full, BetaShape::Tied] {
            let f = fit(shape, &s, &y);
            assert_eq!(f.notes[0], "separable");
            let mut out = [0.0; 2];
            f.map.predict(&[0.1, 0.8], &mut out);
            assert!(out[0] > 0.0 && out[0] < 0.5 && out[1] > 0.5 && out[1] < 1.0);
        }
    }

    /// Positives only in the middle: separable for the full model by a line that
    /// crosses the curve twice, and the best finite fit bends down (a or b < 0),
    /// which forces a monotone refit.
    #[test]
    fn interval_separation_is_detected_and_refit() {
        let s = [0.05, 0.1, 0.4, 0.5, 0.6, 0.9, 0.95];
        let y = [false, false, true, true, true, false, false];
        let f = fit(BetaShape::Full, &s, &y);
        assert!(f.notes.contains(&"separable"), "{:?}", f.notes);
        assert!(f.notes.contains(&"refit"), "{:?}", f.notes);
        let d = f.map.describe();
        assert!(d["a"].as_f64().unwrap() >= 0.0 && d["b"].as_f64().unwrap() >= 0.0);
    }

    /// Labels drawn with P(y = 1) = 1 − s: the true map is logit p = −ln s +
    /// ln(1 − s), so both a and b come out negative and the monotone fit is the
    /// constant base rate (derived from the model family).
    #[test]
    fn decreasing_relation_falls_back_to_base_rate() {
        use crate::split::splitmix64;
        let unit = |h: u64| ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let n = 2000u64;
        let s: Vec<f64> = (0..n).map(|i| unit(splitmix64(2 * i))).collect();
        let y: Vec<bool> = (0..n)
            .map(|i| unit(splitmix64(2 * i + 1)) < 1.0 - s[i as usize])
            .collect();
        let f = fit(BetaShape::Full, &s, &y);
        assert_eq!(f.notes, vec!["refit"]);
        let rate = y.iter().filter(|&&l| l).count() as f64 / n as f64;
        let mut out = [0.0; 3];
        f.map.predict(&[0.01, 0.5, 0.99], &mut out);
        for p in out {
            assert!((p - rate).abs() < 1e-12, "{p} vs {rate}");
        }
        let t = fit(BetaShape::Tied, &s, &y);
        assert_eq!(t.notes, vec!["refit"]);
    }

    /// Each score carries one positive and one negative, so the covariance of
    /// the log-odds with the labels is exactly zero: the maximum-likelihood
    /// slope is a = 0 (score equation Σ (p − y) x = 0 at p = 1/2), which is
    /// monotone, so no refit happens and the map is the base rate 1/2. This
    /// holds in every row order, although the floating-point fit of a zero
    /// slope can round to either sign.
    #[test]
    fn tied_balanced_ties_need_no_refit_in_any_row_order() {
        for (s, y) in [
            ([0.0, 0.875, 0.0, 0.875], [true, false, false, true]),
            ([0.625, 0.0, 0.0, 0.625], [true, false, true, false]),
        ] {
            let seen = crate::calibrate::for_each_order(&s, &y, |s2, y2, o| {
                let f = fit(BetaShape::Tied, s2, y2);
                assert!(f.notes.is_empty(), "{s:?} order {o:?}: {:?}", f.notes);
                let mut out = [0.0; 3];
                f.map.predict(&[0.0, 0.5, 1.0], &mut out);
                for p in out {
                    assert!((p - 0.5).abs() < 1e-15, "{s:?} order {o:?}: {p}");
                }
            });
            assert_eq!(seen, 24);
        }
    }

    #[test]
    fn too_few_distinct_scores_is_an_error() {
        let r = Beta {
            shape: BetaShape::Full,
            score_kind: ScoreKind::Probability,
        }
        .fit(&[0.2, 0.2, 0.7, 0.7], &[true, false, true, false]);
        assert!(matches!(r, Err(FitError::Failed(_))));
    }

    /// For margins the tied form is Platt scaling of the margin (x₁ + x₂ = m).
    #[test]
    fn tied_on_margins_equals_platt() {
        let m = [-2.0, -0.5, 0.3, 1.1, -1.2, 2.5, 0.0, 0.7];
        let y = [false, true, false, true, false, true, false, false];
        let f = Beta {
            shape: BetaShape::Tied,
            score_kind: ScoreKind::Margin,
        }
        .fit(&m, &y)
        .unwrap();
        let t: Vec<f64> = y.iter().map(|&l| l as u8 as f64).collect();
        let p = crate::calibrate::platt::fit_logistic_1d(&m, &t).unwrap();
        let d = f.map.describe();
        assert!((d["a"].as_f64().unwrap() - p.a).abs() < 1e-8);
        assert!((d["c"].as_f64().unwrap() - p.b).abs() < 1e-8);
    }
}
