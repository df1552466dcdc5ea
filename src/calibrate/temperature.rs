//! Temperature scaling, binary case (Guo, Pleiss, Sun & Weinberger 2017, ICML,
//! "On calibration of modern neural networks").
//!
//! Math: p(s) = σ(z / T) with z = log-odds of the score (`log_odds`: the logit of
//! the probability clipped to [ε, 1 − ε], ε = `LOGIT_EPS`, or the margin itself)
//! and one parameter T > 0 fitted by maximum likelihood. There is no intercept:
//! the map keeps p = 1/2 at z = 0 and only sharpens or flattens the scores.
//!
//! Fitting: in β = 1/T the negative log-likelihood
//! F(β) = Σ_i [softplus(β z_i) − t_i β z_i] is convex, with F′(β) = Σ (σ(β z_i) − t_i) z_i
//! and F″(β) = Σ σ(1 − σ) z_i² ≥ 0, so we solve F′(β) = 0 on β ≥ 0 by Halley's method
//! (Newton's with the third derivative F‴(β) = Σ σ(1 − σ)(1 − 2σ) z_i³, cubic
//! convergence; a plain Newton step when Halley's correction is large), safeguarded
//! by a bracket (bisection, or doubling while no upper end is known).
//! This is the same optimum as minimising over T, since T ↦ 1/T is monotone.
//! The search starts at β = 1, or, for samples of at least 32,768 rows, at the
//! fit of a subsample of about one row in 16 (rows chosen by a hash of their
//! values, recursively). It stops when |F′| ≤ 1e-13·Σ|z_i|, or when the
//! quadratic convergence seen over the last two steps puts |F′| after
//! the current step 100 times below that (the step is then taken).
//!
//! Cost: one exponential per row and step, in blocks of 128 rows, and three
//! order-free sums (`exact_sum`): F′ to the last bits, F″ and F‴ (which only
//! steer the steps) to about 2^-42. The result does not depend on the order of the
//! rows, not even in the last bit, and no sort is needed.
//!
//! Edges:
//! * Sign-separable samples (every positive has z ≥ 0 and every negative z ≤ 0,
//!   some z ≠ 0): F keeps falling as β → ∞ (T → 0), so there is no finite
//!   optimum. As for Platt scaling here, the fit then uses Platt's smoothed targets
//!   t₊ = (N₊ + 1)/(N₊ + 2), t₋ = 1/(N₋ + 2), whose optimum is finite, and notes
//!   `separable`.
//! * No signal (F′(0) = Σ (1/2 − t_i) z_i ≥ 0, e.g. log-odds anti-correlated with the
//!   labels): the constrained optimum is β = 0 (T = ∞), every prediction is 1/2,
//!   and the fit notes `flat`.
//! * All z = 0: every T gives p = 1/2; T = 1 is reported.

use super::exact_sum::{pow2_above, Grid, Lane, Total, CHUNK};
use super::logistic::sigmoid_pair;
use super::platt::smoothed_targets;
use super::state::{finite, sig, smoothed_line, MapState, SavedMap};
use super::{
    check_sample, log_odds, sigmoid, Calibrator, FitError, Fitted, FittedMap, Method, ParamError,
    ScoreKind, Shape,
};
use serde::{Deserialize, Serialize};

/// Temperature scaling's parameters: none.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TemperatureParams {}

impl Method for TemperatureParams {
    fn kind(&self) -> &'static str {
        "temperature"
    }
    fn keys(&self) -> &'static [(&'static str, &'static str)] {
        &[]
    }
    fn shape(&self) -> Shape {
        Shape::Other
    }
    fn validate(&self, _score_kind: ScoreKind) -> Result<(), ParamError> {
        Ok(())
    }
    fn calibrator(&self, score_kind: ScoreKind) -> Box<dyn Calibrator> {
        Box::new(Temperature { score_kind })
    }
}

/// The temperature calibrator for scores of one kind.
pub struct Temperature {
    pub score_kind: ScoreKind,
}

/// Maximum-likelihood inverse temperature β ≥ 0 for log-odds `z` and targets
/// `t`; returns (β, iterations). The caller handles separation.
///
/// Every sum is order-free (`exact_sum`: each term is split at fixed grids
/// and the parts are added as integers), so the result does not depend on
/// the order of the rows and no sort is needed; a gradient within the
/// rounding tolerance at β = 0 counts as stationary: β = 0 is then the
/// optimum.
pub fn fit_inverse_temperature(z: &[f64], t: &[f64]) -> (f64, usize) {
    fit_at_level(z, t, 0)
}

/// Rows from which the search starts at the optimum of a subsample.
const WARM_START_ROWS: usize = 1 << 15;

/// [`fit_inverse_temperature`] of the subsample of level `level` (0: the
/// caller's rows). Samples of at least [`WARM_START_ROWS`] rows start from the
/// fit of about one row in 16, chosen by a hash of the row's values (so the
/// same rows in any order; each level reads the next four bits of the hash).
fn fit_at_level(z: &[f64], t: &[f64], level: u32) -> (f64, usize) {
    let zmax = z.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    // The largest |1/2 − t|, NaN when some t is not finite.
    let half_dev = t.iter().fold(0.0f64, |m, &v| {
        let d = (0.5 - v).abs();
        if d > m || d.is_nan() {
            d
        } else {
            m
        }
    });
    if !(zmax.is_finite() && half_dev.is_finite()) || z.iter().any(|v| v.is_nan()) {
        return (f64::NAN, 0);
    }
    // Σ|z| and F′(0) = Σ (1/2 − t)·z in one pass.
    let (Some(ga), Some(g0g)) = (
        Grid::for_bound(zmax),
        Grid::for_bound(zmax * half_dev * (1.0 + 1e-9)),
    ) else {
        return (f64::NAN, 0);
    };
    let (mut ta, mut t0) = (Total::default(), Total::default());
    let (mut ab, mut gb) = ([0.0f64; 128], [0.0f64; 128]);
    for (zc, tc) in z.chunks(CHUNK).zip(t.chunks(CHUNK)) {
        let (mut la, mut l0) = (Lane::default(), Lane::default());
        for (zs, ts) in zc.chunks(128).zip(tc.chunks(128)) {
            let m = zs.len();
            for i in 0..m {
                ab[i] = zs[i].abs();
                gb[i] = (0.5 - ts[i]) * zs[i];
            }
            la.add_slice(&ab[..m], &ga);
            l0.add_slice(&gb[..m], &g0g);
        }
        ta.flush(&mut la, &ga);
        t0.flush(&mut l0, &g0g);
    }
    let (zsum, g0) = (ta.value(&ga), t0.value(&g0g));
    if zsum == 0.0 {
        return (1.0, 0);
    }
    let tol = 1e-13 * zsum;
    if g0 >= -tol {
        return (0.0, 0);
    }
    // F′, F″ and F‴ at β, with the largest |p − t| and p(1 − p) seen, whose
    // bounds set the grids (|p − t| ≤ 1, p(1 − p) ≤ 1/4 at first, then 2^10
    // above the largest terms of the previous pass; a pass whose terms exceed
    // the bounds, or stay 2^20 below them, runs again with tight bounds).
    let nan5 = (f64::NAN, f64::NAN, f64::NAN, f64::NAN, f64::NAN);
    let pass = |beta: f64, rb: f64, wb: f64| -> (f64, f64, f64, f64, f64) {
        // Every β·z, and so every term, is finite when this is.
        if !(beta * zmax).is_finite() {
            return nan5;
        }
        let (Some(gg), Some(gh), Some(gk)) = (
            Grid::for_bound(zmax * rb * (1.0 + 1e-9)),
            Grid::for_bound(zmax * zmax * wb * (1.0 + 1e-9)),
            Grid::for_bound(zmax * zmax * zmax * wb * (1.0 + 1e-9)),
        ) else {
            return nan5;
        };
        let (mut tg, mut th, mut tk) = (Total::default(), Total::default(), Total::default());
        let (mut rmax, mut wmax) = (0.0f64, 0.0f64);
        // Blocks of rows: the exponentials (library calls) first, then the
        // terms and their sums in loops the compiler can vectorise.
        const BLOCK: usize = 128;
        let mut eb = [0.0f64; BLOCK];
        let mut gb = [0.0f64; BLOCK];
        let mut hb = [0.0f64; BLOCK];
        let mut kb = [0.0f64; BLOCK];
        for (zc, tc) in z.chunks(CHUNK).zip(t.chunks(CHUNK)) {
            let (mut lg, mut lh, mut lk) = (Lane::default(), Lane::default(), Lane::default());
            for (zs, ts) in zc.chunks(BLOCK).zip(tc.chunks(BLOCK)) {
                let m = zs.len();
                for i in 0..m {
                    eb[i] = (-(beta * zs[i]).abs()).exp();
                }
                for i in 0..m {
                    let (zi, ti) = (zs[i], ts[i]);
                    // p and q = 1 − p without cancellation; r = p − t.
                    let (p, q, w) = sigmoid_pair(beta * zi, eb[i]);
                    let r = (1.0 - ti) * p - ti * q;
                    // (Plain comparisons: every term is finite here.)
                    let ra = r.abs();
                    rmax = if ra > rmax { ra } else { rmax };
                    wmax = if w > wmax { w } else { wmax };
                    gb[i] = r * zi;
                    hb[i] = w * zi * zi;
                    kb[i] = hb[i] * (q - p) * zi;
                }
                // F′ to the last bits; F″ and F‴, which only steer the
                // steps, to about 2^-42 (`Lane::add_slice_coarse`).
                lg.add_slice(&gb[..m], &gg);
                lh.add_slice_coarse(&hb[..m], &gh);
                lk.add_slice_coarse(&kb[..m], &gk);
            }
            tg.flush(&mut lg, &gg);
            th.flush(&mut lh, &gh);
            tk.flush(&mut lk, &gk);
        }
        (tg.value(&gg), th.value(&gh), tk.value(&gk), rmax, wmax)
    };
    let mut bounds = (1.0f64, 0.25f64);
    let mut derivatives = |beta: f64| -> (f64, f64, f64) {
        let (rb, wb) = bounds;
        let (mut g, mut h, mut k, rmax, wmax) = pass(beta, rb, wb);
        let over = rmax > rb || wmax > wb;
        let loose = |s: f64, b: f64| s > 0.0 && s < b * 2f64.powi(-20);
        if over || loose(rmax, rb) || loose(wmax, wb) {
            (g, h, k, _, _) = pass(beta, pow2_above(rmax), pow2_above(wmax));
        }
        bounds = ((rmax * 1024.0).min(1.0), (wmax * 1024.0).min(0.25));
        (g, h, k)
    };
    let (mut lo, mut hi) = (0.0f64, f64::INFINITY);
    let mut beta = 1.0;
    if z.len() >= WARM_START_ROWS && level < 15 {
        let hash = |zi: f64, ti: f64| {
            let h =
                (zi.to_bits() ^ ti.to_bits().rotate_left(32)).wrapping_mul(0x9e37_79b9_7f4a_7c15);
            let h = (h ^ (h >> 29)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            h ^ (h >> 32)
        };
        let (sz, st): (Vec<f64>, Vec<f64>) = z
            .iter()
            .zip(t)
            .filter(|(&zi, &ti)| (hash(zi, ti) >> (4 * level)) & 15 == 0)
            .map(|(&zi, &ti)| (zi, ti))
            .unzip();
        if sz.len() >= 1024 {
            let (b, _) = fit_at_level(&sz, &st, level + 1);
            if b.is_finite() && b > 0.0 {
                beta = b;
            }
        }
    }
    let mut iterations = 0;
    let mut prev_g = f64::NAN;
    for it in 0..200 {
        iterations = it + 1;
        let (g, h, k) = derivatives(beta);
        if g.abs() <= tol {
            break;
        }
        if g < 0.0 {
            lo = beta;
        } else {
            hi = beta;
        }
        // Halley's step β − (g/h)/(1 − g·k/(2h²)) (cubic convergence; k =
        // F‴), when its correction to the Newton step is moderate, else the
        // Newton step; either only inside the bracket.
        let newton = if h > 0.0 { beta - g / h } else { f64::NAN };
        let c = g * k / (2.0 * h * h);
        let halley = if c.abs() <= 0.5 {
            beta - (g / h) / (1.0 - c)
        } else {
            f64::NAN
        };
        let within = |x: f64| x > lo && x < hi;
        let inside = within(halley) || within(newton);
        let next = if within(halley) {
            halley
        } else if within(newton) {
            newton
        } else if hi.is_finite() {
            0.5 * (lo + hi)
        } else {
            2.0 * beta
        };
        if (next - beta).abs() <= 1e-15 * beta.max(1e-300) || !next.is_finite() {
            break;
        }
        // Quadratic convergence seen over the last two steps (|g_k| ≈
        // K·g_(k−1)²; Halley's steps converge faster, so this overestimates)
        // that puts the gradient after this step 100 times below the
        // tolerance: take it and stop.
        let predicted = g.abs() * (g / prev_g) * (g / prev_g);
        prev_g = if inside { g } else { f64::NAN };
        beta = next;
        if inside && g.abs() <= 1e-3 * zsum && 100.0 * predicted <= tol {
            break;
        }
    }
    (beta, iterations)
}

/// A fitted map σ(β·z).
pub struct TemperatureMap {
    pub inverse_temperature: f64,
    pub score_kind: ScoreKind,
    pub smoothed: bool,
}

impl FittedMap for TemperatureMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            *o = sigmoid(self.inverse_temperature * log_odds(s, self.score_kind));
        }
    }
    /// The saved state plus the temperature T = 1/β (null for T = ∞).
    fn describe(&self) -> serde_json::Value {
        let mut v = serde_json::to_value(self.state()).unwrap_or(serde_json::Value::Null);
        v["temperature"] = if self.inverse_temperature > 0.0 {
            serde_json::json!(1.0 / self.inverse_temperature)
        } else {
            serde_json::Value::Null
        };
        v
    }
    fn state(&self) -> MapState {
        MapState::Temperature(TemperatureState {
            score_kind: self.score_kind,
            inverse_temperature: self.inverse_temperature,
            smoothed_targets: self.smoothed,
        })
    }
}

/// The saved temperature map σ(β·z).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(
    deny_unknown_fields,
    expecting = "struct variant MapState::Temperature with 3 elements"
)]
pub struct TemperatureState {
    pub score_kind: ScoreKind,
    pub inverse_temperature: f64,
    pub smoothed_targets: bool,
}

impl SavedMap for TemperatureState {
    fn kind(&self) -> &'static str {
        "temperature"
    }
    fn summary(&self) -> Vec<String> {
        let beta = self.inverse_temperature;
        let mut v = vec![
            "p = σ(β·log-odds)".to_string(),
            format!("β = {} (temperature 1/β = {})", sig(beta), sig(1.0 / beta)),
        ];
        v.extend(smoothed_line(self.smoothed_targets));
        v
    }
    fn check(&self) -> Result<(), String> {
        let inverse_temperature = self.inverse_temperature;
        finite("inverse_temperature", inverse_temperature)?;
        if inverse_temperature < 0.0 {
            return Err(format!(
                "inverse_temperature = {inverse_temperature} must be >= 0"
            ));
        }
        Ok(())
    }
    fn restore(&self) -> Box<dyn FittedMap> {
        Box::new(TemperatureMap {
            inverse_temperature: self.inverse_temperature,
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

impl Calibrator for Temperature {
    fn kind(&self) -> &'static str {
        "temperature"
    }
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError> {
        check_sample(scores, labels)?;
        let z: Vec<f64> = scores
            .iter()
            .map(|&s| log_odds(s, self.score_kind))
            .collect();
        if z.iter().any(|v| !v.is_finite()) {
            return Err(FitError::Failed("temperature: non-finite score".into()));
        }
        let separable = z.iter().any(|&v| v != 0.0)
            && z.iter()
                .zip(labels)
                .all(|(&v, &l)| if l { v >= 0.0 } else { v <= 0.0 });
        let t: Vec<f64> = if separable {
            smoothed_targets(labels)
        } else {
            labels.iter().map(|&l| if l { 1.0 } else { 0.0 }).collect()
        };
        let (beta, _) = fit_inverse_temperature(&z, &t);
        let mut notes = Vec::new();
        if separable {
            notes.push("separable");
        }
        if beta == 0.0 {
            notes.push("flat");
        }
        Ok(Fitted {
            map: Box::new(TemperatureMap {
                inverse_temperature: beta,
                score_kind: self.score_kind,
                smoothed: separable,
            }),
            notes,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Derived by hand: four rows with z = 1 and labels 1, 1, 1, 0:
    /// F′(β) = 4σ(β) − 3 = 0 gives σ(β) = 3/4, i.e. β = ln 3.
    #[test]
    fn closed_form_case() {
        let z = [1.0, 1.0, 1.0, 1.0];
        let t = [1.0, 1.0, 1.0, 0.0];
        let (beta, _) = fit_inverse_temperature(&z, &t);
        assert!((beta - 3f64.ln()).abs() < 1e-12, "{beta}");
    }

    /// A sample large enough for the subsample start: F′(β) = 0 holds to
    /// rounding at the result (checked with a plain compensated sum), and
    /// reversed or rotated rows give the same bits.
    #[test]
    fn large_sample_reaches_the_root_in_any_order() {
        use crate::split::splitmix64;
        let unit = |h: u64| ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let n = 50_000usize;
        assert!(n >= WARM_START_ROWS);
        let z: Vec<f64> = (0..n as u64)
            .map(|i| 6.0 * unit(splitmix64(2 * i)) - 3.0)
            .collect();
        let t: Vec<f64> = (0..n as u64)
            .map(|i| (unit(splitmix64(2 * i + 1)) < sigmoid(0.4 * z[i as usize])) as u8 as f64)
            .collect();
        let (beta, _) = fit_inverse_temperature(&z, &t);
        assert!((beta - 0.4).abs() < 0.05, "{beta}");
        let (mut g, mut size) = (0.0f64, 0.0f64);
        for i in 0..n {
            let term = (sigmoid(beta * z[i]) - t[i]) * z[i];
            g += term;
            size += term.abs();
        }
        assert!(g.abs() <= 1e-10 * size, "{g} of {size}");
        for o in [
            &(|i: usize| n - 1 - i) as &dyn Fn(usize) -> usize,
            &|i: usize| (i + 777) % n,
        ] {
            let z2: Vec<f64> = (0..n).map(|i| z[o(i)]).collect();
            let t2: Vec<f64> = (0..n).map(|i| t[o(i)]).collect();
            assert_eq!(
                fit_inverse_temperature(&z2, &t2).0.to_bits(),
                beta.to_bits()
            );
        }
    }

    #[test]
    fn anti_correlated_scores_give_flat_map() {
        let f = Temperature {
            score_kind: ScoreKind::Margin,
        }
        .fit(&[-2.0, -1.0, 1.0, 2.0], &[true, true, false, false])
        .unwrap();
        assert_eq!(f.notes, vec!["flat"]);
        let mut out = [0.0; 1];
        f.map.predict(&[5.0], &mut out);
        assert_eq!(out[0], 0.5);
    }

    /// Each score appears once with each label, so F′(0) = 0 exactly and
    /// F′(β) > 0 for β > 0: the optimum is β = 0 whatever the row order, even
    /// though the floating-point sum F′(0) need not round to exactly zero.
    #[test]
    fn balanced_ties_are_flat_in_every_row_order() {
        let s = [0.625, 1.0, 1.0, 0.625, 0.125, 0.125];
        let y = [true, false, true, false, false, true];
        let cal = Temperature {
            score_kind: ScoreKind::Probability,
        };
        // Every row order (Heap's algorithm over the 6! permutations).
        let seen = crate::calibrate::for_each_order(&s, &y, |s2, y2, o| {
            let f = cal.fit(s2, y2).unwrap();
            assert_eq!(f.notes, vec!["flat"], "order {o:?}");
            let b = f.map.describe()["inverse_temperature"].as_f64().unwrap();
            assert_eq!(b, 0.0, "order {o:?}");
        });
        assert_eq!(seen, 720);
    }

    #[test]
    fn sign_separable_sample_is_noted_and_finite() {
        let f = Temperature {
            score_kind: ScoreKind::Margin,
        }
        .fit(&[-2.0, -1.0, 1.0, 2.0], &[false, false, true, true])
        .unwrap();
        assert_eq!(f.notes, vec!["separable"]);
        let b = f.map.describe()["inverse_temperature"].as_f64().unwrap();
        assert!(b.is_finite() && b > 0.0);
    }
}
