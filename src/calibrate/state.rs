//! The saved form of a fitted map: every number a map's `predict` reads, so
//! that a map rebuilt from it predicts exactly (bit for bit) what the fitted map
//! predicts. `plumbline fit` writes it into a map file (docs/map-format.md),
//! `plumbline apply` reads it back through [`MapState::rebuild`], which checks
//! it first ([`MapState::check`]: finite numbers, ordered and monotone
//! blocks/knots, probabilities in [0, 1], consistent lengths), so a hand-edited
//! or damaged map is never used.
//!
//! Exactness: the rebuilt map is the same Rust type with the same fields (any
//! derived lookup structure, such as the isotonic knots or the binning cut
//! points, is recomputed by the same code the fit uses), and every `f64` goes
//! through JSON in the shortest form that parses back to the same double
//! (`serde_json` with `float_roundtrip`).

use serde::{Deserialize, Serialize};

use super::beta::{BetaMap, BetaShape};
use super::binning::{Bin, BinningMap};
use super::isotonic::Block;
use super::platt::{LogisticFit, PlattMap};
use super::spline::{Basis, Criterion, LambdaFit, SplineFit, SplineMap, MAX_INTERVALS};
use super::temperature::TemperatureMap;
use super::venn_abers::VennAbersTable;
use super::{FittedMap, ScoreKind};

/// The parameters of a fitted map, by method kind.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case", deny_unknown_fields)]
pub enum MapState {
    /// p = s clamped to [0, 1].
    Identity {},
    /// p = σ(a·s + b).
    Platt {
        a: f64,
        b: f64,
        smoothed_targets: bool,
    },
    /// PAV blocks; linear between blocks, flat outside.
    Isotonic {
        pseudo_count: f64,
        blocks: Vec<Block>,
    },
    /// logit p = a·ln s − b·ln(1 − s) + c (tied: a·logit s + c).
    Beta {
        shape: BetaShape,
        score_kind: ScoreKind,
        a: f64,
        b: f64,
        c: f64,
        smoothed_targets: bool,
    },
    /// Bins; a score takes the value of its bin, split at midpoints.
    Binning { pseudo_count: f64, bins: Vec<Bin> },
    /// p = σ(β·z), z the log-odds.
    Temperature {
        score_kind: ScoreKind,
        inverse_temperature: f64,
        smoothed_targets: bool,
    },
    /// Points (x, value); linear between, flat outside.
    CenteredIsotonic {
        pseudo_count: f64,
        x: Vec<f64>,
        value: Vec<f64>,
    },
    /// Cubic B-spline coefficients on `intervals` equal intervals of [lo, hi]
    /// of the log-odds; linear continuation outside.
    Spline {
        score_kind: ScoreKind,
        lo: f64,
        hi: f64,
        intervals: usize,
        coefficients: Vec<f64>,
        lambda: f64,
        edf: f64,
        criterion: Option<Criterion>,
        smoothed_targets: bool,
    },
    /// The constant map p (a spline fitted on all-equal log-odds).
    Constant { p: f64 },
    /// Venn–Abers pairs: at each gap (below, between, above the distinct
    /// calibration scores) and each tie (on a distinct score).
    VennAbers {
        scores: Vec<f64>,
        gap_p0: Vec<f64>,
        gap_p1: Vec<f64>,
        tie_p0: Vec<f64>,
        tie_p1: Vec<f64>,
    },
}

/// A number with six significant digits, without trailing zeros.
fn sig(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    if !(1e-4..1e9).contains(&v.abs()) {
        return format!("{v:.5e}");
    }
    let digits = (5 - v.abs().log10().floor() as i32).clamp(0, 17) as usize;
    let t = format!("{v:.digits$}");
    if t.contains('.') {
        t.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        t
    }
}

fn finite(name: &str, v: f64) -> Result<(), String> {
    if v.is_finite() {
        Ok(())
    } else {
        Err(format!("{name} = {v} is not a finite number"))
    }
}

fn probability(name: &str, i: usize, v: f64) -> Result<(), String> {
    if (0.0..=1.0).contains(&v) {
        Ok(())
    } else {
        Err(format!("{name}[{i}] = {v} is not a probability in [0, 1]"))
    }
}

fn pseudo(m: f64) -> Result<(), String> {
    if m.is_finite() && m >= 0.0 {
        Ok(())
    } else {
        Err(format!("pseudo_count = {m} must be a finite number >= 0"))
    }
}

/// Strictly increasing, finite, non-empty.
fn increasing(name: &str, xs: &[f64]) -> Result<(), String> {
    if xs.is_empty() {
        return Err(format!("{name} is empty"));
    }
    for (i, &x) in xs.iter().enumerate() {
        finite(&format!("{name}[{i}]"), x)?;
        if i > 0 && x <= xs[i - 1] {
            return Err(format!(
                "{name} must increase strictly: {name}[{}] = {} but {name}[{i}] = {x}",
                i - 1,
                xs[i - 1]
            ));
        }
    }
    Ok(())
}

/// Non-decreasing probabilities.
fn monotone(name: &str, vs: &[f64]) -> Result<(), String> {
    for (i, &v) in vs.iter().enumerate() {
        probability(name, i, v)?;
        if i > 0 && v < vs[i - 1] {
            return Err(format!(
                "{name} must not decrease: {name}[{}] = {} but {name}[{i}] = {v}",
                i - 1,
                vs[i - 1]
            ));
        }
    }
    Ok(())
}

/// Score ranges [lo, hi] of consecutive pieces: finite, lo ≤ hi, and each
/// piece starting above the previous one's end.
fn ranges(name: &str, r: &[(f64, f64)]) -> Result<(), String> {
    if r.is_empty() {
        return Err(format!("{name} is empty"));
    }
    for (i, &(lo, hi)) in r.iter().enumerate() {
        finite(&format!("{name}[{i}].lo"), lo)?;
        finite(&format!("{name}[{i}].hi"), hi)?;
        if hi < lo {
            return Err(format!("{name}[{i}]: hi = {hi} is below lo = {lo}"));
        }
        if i > 0 && lo <= r[i - 1].1 {
            return Err(format!(
                "{name} must be ordered: {name}[{i}].lo = {lo} is not above {name}[{}].hi = {}",
                i - 1,
                r[i - 1].1
            ));
        }
    }
    Ok(())
}

impl MapState {
    /// The method kind id this state belongs to (`constant` is the spline's
    /// map for a sample with one distinct log-odds).
    pub fn kind(&self) -> &'static str {
        match self {
            MapState::Identity {} => "identity",
            MapState::Platt { .. } => "platt",
            MapState::Isotonic { .. } => "isotonic",
            MapState::Beta { .. } => "beta",
            MapState::Binning { .. } => "binning",
            MapState::Temperature { .. } => "temperature",
            MapState::CenteredIsotonic { .. } => "centered-isotonic",
            MapState::Spline { .. } | MapState::Constant { .. } => "spline",
            MapState::VennAbers { .. } => "venn-abers",
        }
    }

    /// The fitted parameters in short human lines (six significant digits):
    /// Platt's a and b, beta's a, b and c, the steps of a step map, the
    /// spline's knots and smoothing, for the terminal after a fit.
    pub fn summary(&self) -> Vec<String> {
        fn levels(vs: impl Iterator<Item = f64>) -> (usize, f64, f64) {
            let v: Vec<f64> = vs.collect();
            let mut distinct = v.clone();
            distinct.dedup();
            let lo = v.first().copied().unwrap_or(f64::NAN);
            let hi = v.last().copied().unwrap_or(f64::NAN);
            (distinct.len(), lo, hi)
        }
        let smoothed = |on: bool| {
            if on {
                vec!["fitted on Platt's smoothed targets (separable sample)".to_string()]
            } else {
                Vec::new()
            }
        };
        match self {
            MapState::Identity {} => vec!["p = score, clamped to [0, 1] (nothing fitted)".into()],
            MapState::Platt {
                a,
                b,
                smoothed_targets,
            } => {
                let mut v = vec![
                    "p = σ(a·score + b)".to_string(),
                    format!("a = {} (slope)", sig(*a)),
                    format!("b = {} (intercept)", sig(*b)),
                ];
                v.extend(smoothed(*smoothed_targets));
                v
            }
            MapState::Isotonic {
                pseudo_count,
                blocks,
            } => {
                let (n, lo, hi) = levels(blocks.iter().map(|b| b.value));
                vec![format!(
                    "{n} steps ({} blocks) from {} to {}, pseudo_count = {}",
                    blocks.len(),
                    sig(lo),
                    sig(hi),
                    sig(*pseudo_count)
                )]
            }
            MapState::Beta {
                shape,
                a,
                b,
                c,
                smoothed_targets,
                ..
            } => {
                let mut v = match shape {
                    BetaShape::Full => vec![
                        "logit p = a·ln s − b·ln(1 − s) + c".to_string(),
                        format!("a = {}", sig(*a)),
                        format!("b = {}", sig(*b)),
                        format!("c = {}", sig(*c)),
                    ],
                    BetaShape::Tied => vec![
                        "logit p = a·logit s + c (tied: a = b)".to_string(),
                        format!("a = {}", sig(*a)),
                        format!("c = {}", sig(*c)),
                    ],
                };
                v.extend(smoothed(*smoothed_targets));
                v
            }
            MapState::Binning { pseudo_count, bins } => {
                let (n, lo, hi) = levels(bins.iter().map(|b| b.value));
                vec![format!(
                    "{} bins, {n} distinct values from {} to {}, pseudo_count = {}",
                    bins.len(),
                    sig(lo),
                    sig(hi),
                    sig(*pseudo_count)
                )]
            }
            MapState::Temperature {
                inverse_temperature,
                smoothed_targets,
                ..
            } => {
                let mut v = vec![
                    "p = σ(β·log-odds)".to_string(),
                    format!(
                        "β = {} (temperature 1/β = {})",
                        sig(*inverse_temperature),
                        sig(1.0 / inverse_temperature)
                    ),
                ];
                v.extend(smoothed(*smoothed_targets));
                v
            }
            MapState::CenteredIsotonic {
                pseudo_count,
                x,
                value,
            } => {
                let (n, lo, hi) = levels(value.iter().copied());
                vec![format!(
                    "{} points, {n} distinct values from {} to {}, pseudo_count = {}",
                    x.len(),
                    sig(lo),
                    sig(hi),
                    sig(*pseudo_count)
                )]
            }
            MapState::Spline {
                lo,
                hi,
                intervals,
                lambda,
                edf,
                criterion,
                smoothed_targets,
                ..
            } => {
                let mut v = vec![
                    format!(
                        "{intervals} knot intervals on the log-odds [{}, {}], {} coefficients",
                        sig(*lo),
                        sig(*hi),
                        intervals + 3
                    ),
                    format!(
                        "λ = {}{}, effective degrees of freedom {}",
                        sig(*lambda),
                        criterion.map_or(" (fixed)".to_string(), |c| format!(
                            " (chosen by {})",
                            c.as_str()
                        )),
                        sig(*edf)
                    ),
                ];
                v.extend(smoothed(*smoothed_targets));
                v
            }
            MapState::Constant { p } => vec![format!("p = {} for every score", sig(*p))],
            MapState::VennAbers { scores, .. } => vec![format!(
                "{} distinct calibration scores (a probability pair per score and gap)",
                scores.len()
            )],
        }
    }

    /// Check that the state describes a usable map of its kind.
    pub fn check(&self) -> Result<(), String> {
        match self {
            MapState::Identity {} => Ok(()),
            MapState::Platt { a, b, .. } => {
                finite("a", *a)?;
                finite("b", *b)
            }
            MapState::Isotonic {
                pseudo_count,
                blocks,
            } => {
                pseudo(*pseudo_count)?;
                let r: Vec<(f64, f64)> = blocks.iter().map(|b| (b.lo, b.hi)).collect();
                ranges("blocks", &r)?;
                for (i, b) in blocks.iter().enumerate() {
                    if !(b.weight.is_finite() && b.weight > 0.0) {
                        return Err(format!("blocks[{i}].weight = {} must be above 0", b.weight));
                    }
                }
                let v: Vec<f64> = blocks.iter().map(|b| b.value).collect();
                monotone("blocks.value", &v)
            }
            MapState::Beta { shape, a, b, c, .. } => {
                finite("a", *a)?;
                finite("b", *b)?;
                finite("c", *c)?;
                if *a < 0.0 || *b < 0.0 {
                    return Err(format!(
                        "a = {a} and b = {b} must be >= 0 (the map must not decrease)"
                    ));
                }
                if *shape == BetaShape::Tied && a != b {
                    return Err(format!("the tied shape needs a = b, found {a} and {b}"));
                }
                Ok(())
            }
            MapState::Binning { pseudo_count, bins } => {
                pseudo(*pseudo_count)?;
                let r: Vec<(f64, f64)> = bins.iter().map(|b| (b.lo, b.hi)).collect();
                ranges("bins", &r)?;
                for (i, b) in bins.iter().enumerate() {
                    probability("bins.value", i, b.value)?;
                    if !(b.rows.is_finite()
                        && b.rows > 0.0
                        && (0.0..=b.rows).contains(&b.positives))
                    {
                        return Err(format!(
                            "bins[{i}]: rows = {} and positives = {} must satisfy 0 <= positives <= rows, rows > 0",
                            b.rows, b.positives
                        ));
                    }
                }
                Ok(())
            }
            MapState::Temperature {
                inverse_temperature,
                ..
            } => {
                finite("inverse_temperature", *inverse_temperature)?;
                if *inverse_temperature < 0.0 {
                    return Err(format!(
                        "inverse_temperature = {inverse_temperature} must be >= 0"
                    ));
                }
                Ok(())
            }
            MapState::CenteredIsotonic {
                pseudo_count,
                x,
                value,
            } => {
                pseudo(*pseudo_count)?;
                increasing("x", x)?;
                if x.len() != value.len() {
                    return Err(format!(
                        "x has {} points but value has {}",
                        x.len(),
                        value.len()
                    ));
                }
                monotone("value", value)
            }
            MapState::Spline {
                lo,
                hi,
                intervals,
                coefficients,
                lambda,
                edf,
                ..
            } => {
                finite("lo", *lo)?;
                finite("hi", *hi)?;
                if !(hi > lo && (hi - lo) / *intervals.max(&1) as f64 > 0.0) {
                    return Err(format!("the knot range needs lo < hi, found [{lo}, {hi}]"));
                }
                if *intervals == 0 || *intervals > MAX_INTERVALS {
                    return Err(format!(
                        "intervals = {intervals} must be between 1 and {MAX_INTERVALS}"
                    ));
                }
                if coefficients.len() != intervals + 3 {
                    return Err(format!(
                        "{intervals} knot intervals need {} coefficients, found {}",
                        intervals + 3,
                        coefficients.len()
                    ));
                }
                for (i, &c) in coefficients.iter().enumerate() {
                    finite(&format!("coefficients[{i}]"), c)?;
                }
                if !(hi - lo).is_finite() {
                    return Err(format!(
                        "the knot range [{lo:?}, {hi:?}] is wider than the largest double"
                    ));
                }
                // Beyond the knot range the spline continues with its value
                // and slope at the ends: both must be numbers.
                let basis = Basis {
                    lo: *lo,
                    hi: *hi,
                    intervals: *intervals,
                };
                for (name, at) in [("lo", *lo), ("hi", *hi)] {
                    let (value, slope) = basis.value_and_slope(coefficients, at);
                    if !value.is_finite() || !slope.is_finite() {
                        return Err(format!(
                            "the spline's {} at {name} = {at:?} is not a finite number (value {value:?}, slope {slope:?}); the knot intervals of [{lo:?}, {hi:?}] are too narrow or the coefficients too large",
                            if value.is_finite() { "slope" } else { "value" }
                        ));
                    }
                }
                finite("lambda", *lambda)?;
                finite("edf", *edf)
            }
            MapState::Constant { p } => probability("p", 0, *p),
            MapState::VennAbers {
                scores,
                gap_p0,
                gap_p1,
                tie_p0,
                tie_p1,
            } => {
                increasing("scores", scores)?;
                let k = scores.len();
                for (name, v, want) in [
                    ("gap_p0", gap_p0, k + 1),
                    ("gap_p1", gap_p1, k + 1),
                    ("tie_p0", tie_p0, k),
                    ("tie_p1", tie_p1, k),
                ] {
                    if v.len() != want {
                        return Err(format!(
                            "{k} scores need {want} values in {name}, found {}",
                            v.len()
                        ));
                    }
                    for (i, &p) in v.iter().enumerate() {
                        probability(name, i, p)?;
                    }
                }
                for (name, p0, p1) in [("gap", gap_p0, gap_p1), ("tie", tie_p0, tie_p1)] {
                    if let Some(i) = (0..p0.len()).find(|&i| p0[i] > p1[i]) {
                        return Err(format!(
                            "{name}_p0[{i}] = {} exceeds {name}_p1[{i}] = {}",
                            p0[i], p1[i]
                        ));
                    }
                }
                Ok(())
            }
        }
    }

    /// Check the state, then rebuild the map it describes.
    pub fn rebuild(&self) -> Result<Box<dyn FittedMap>, String> {
        self.check()?;
        Ok(match self.clone() {
            MapState::Identity {} => Box::new(super::identity::IdentityMap),
            MapState::Platt {
                a,
                b,
                smoothed_targets,
            } => Box::new(PlattMap {
                fit: LogisticFit {
                    a,
                    b,
                    iterations: 0,
                },
                smoothed: smoothed_targets,
            }),
            MapState::Isotonic {
                pseudo_count,
                blocks,
            } => super::isotonic::restore(blocks, pseudo_count),
            MapState::Beta {
                shape,
                score_kind,
                a,
                b,
                c,
                smoothed_targets,
            } => Box::new(BetaMap {
                a,
                b,
                c,
                shape,
                score_kind,
                smoothed: smoothed_targets,
            }),
            MapState::Binning { pseudo_count, bins } => {
                Box::new(BinningMap::new(bins, pseudo_count))
            }
            MapState::Temperature {
                score_kind,
                inverse_temperature,
                smoothed_targets,
            } => Box::new(TemperatureMap {
                inverse_temperature,
                score_kind,
                smoothed: smoothed_targets,
            }),
            MapState::CenteredIsotonic {
                pseudo_count,
                x,
                value,
            } => super::centered_isotonic::restore(x, value, pseudo_count),
            MapState::Spline {
                score_kind,
                lo,
                hi,
                intervals,
                coefficients,
                lambda,
                edf,
                criterion,
                smoothed_targets,
            } => Box::new(SplineMap {
                score_kind,
                fit: SplineFit {
                    basis: Basis { lo, hi, intervals },
                    chosen: LambdaFit {
                        lambda,
                        beta: coefficients,
                        nll: f64::NAN,
                        edf,
                        iterations: 0,
                    },
                    path: Vec::new(),
                    separable: smoothed_targets,
                },
                criterion,
            }),
            MapState::Constant { p } => super::spline::constant_map(p),
            MapState::VennAbers {
                scores,
                gap_p0,
                gap_p1,
                tie_p0,
                tie_p1,
            } => {
                let interleave = |gap: &[f64], tie: &[f64]| {
                    let mut v = Vec::with_capacity(gap.len() + tie.len());
                    for (i, &g) in gap.iter().enumerate() {
                        v.push(g);
                        if let Some(&t) = tie.get(i) {
                            v.push(t);
                        }
                    }
                    v
                };
                super::venn_abers::restore(VennAbersTable {
                    p0: interleave(&gap_p0, &tie_p0),
                    p1: interleave(&gap_p1, &tie_p1),
                    scores,
                })
            }
        })
    }
}
