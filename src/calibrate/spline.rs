//! Penalized-spline logistic calibration (P-spline on the log-odds).
//!
//! Math: with x = log-odds of the score (the logit of the clipped probability,
//! or the margin itself, see [`super::log_odds`]) the calibrated probability is
//! p(x) = σ(f(x)) with f(x) = Σ_j β_j B_j(x), where B_0 … B_{m−1} are cubic
//! B-splines on equally spaced knots. The calibration sample's range [lo, hi] of
//! x is cut into K equal intervals of width h = (hi − lo)/K (parameter
//! `intervals`, default 20); the knot sequence is t_i = lo + (i − 3)·h for
//! i = 0 … K + 6, so there are m = K + 3 basis functions (three knots outside
//! each end, as in Eilers & Marx).
//!
//! Fit: β minimises the penalized negative log-likelihood
//!   J(β) = Σ_i [softplus(f(x_i)) − y_i f(x_i)] + (λ/2)·‖D₂β‖²,
//! with D₂ the second-order difference matrix ((D₂β)_j = β_j − 2β_{j+1} + β_{j+2}):
//! the P-spline of Eilers & Marx (1996, Statistical Science 11, "Flexible
//! smoothing with B-splines and penalties"), here with a binomial likelihood
//! (their section 8, penalized IRLS). We solve it by Newton's method, which is
//! penalized IRLS: H = BᵀWB + λD₂ᵀD₂, with W = diag(p_i(1 − p_i)), a Cholesky
//! solve of the m × m system per step, and a backtracking (Armijo) line search
//! on J. Each row touches four consecutive B-splines and D₂ᵀD₂ couples
//! coefficients at most two apart, so H is a band matrix with three
//! sub-diagonals: it is stored, factored (H = LLᵀ) and solved as a band, in
//! O(m) work per step instead of O(m³). Tied log-odds are merged into one
//! point with a count and a label sum first, which leaves J unchanged.
//!
//! Null space: on equally spaced knots Σ_j (a + b·j)·B_j(x) is a linear function
//! of x (cubic B-splines reproduce linear functions), and D₂ annihilates exactly
//! the coefficient vectors that are linear in j. So as λ → ∞ the fit tends to the
//! two-parameter logistic regression on the log-odds, σ(a·x + b) (Platt scaling
//! on the log-odds; Platt 1999), and intermediate λ bend it smoothly.
//!
//! Smoothing parameter: unless `lambda` is given, λ is chosen on the grid
//! λ = 10^(−3), 10^(−2.5), …, 10^7 by the information criterion `criterion`:
//! AIC(λ) = 2·NLL(β̂_λ) + 2·edf(λ) (default) or BIC(λ) = 2·NLL + ln(n)·edf, with
//! the effective degrees of freedom edf = tr[(BᵀWB + λP)⁻¹BᵀWB] = trace of the
//! hat matrix (Eilers & Marx 1996, section 6; Hastie & Tibshirani 1990,
//! "Generalized Additive Models"). Since BᵀWB is banded, the trace needs only
//! the band of H⁻¹, which the Cholesky factor gives by the backward recurrence
//! of Hutchinson & de Hoog (1985, Numerische Mathematik 47, "Smoothing noisy
//! data with spline functions"): with Σ = H⁻¹ and j ≥ i,
//! Σ_ij = (δ_ij/L_ii − Σ_{k=i+1}^{i+3} L_ki Σ_kj)/L_ii. The grid is walked from the largest λ down,
//! each fit warm-started from the previous one. Ties in the criterion go to the
//! larger λ. When the sample has more distinct log-odds than 25 per knot
//! interval, the search runs on a binned copy (25 equal bins per knot interval,
//! each bin one point at its count-weighted mean log-odds carrying the bins' row
//! and positive counts); the returned coefficients are then the exact fit on all
//! points at the chosen λ, warm-started from the binned one. A fixed `lambda` is
//! always fitted on the exact points.
//!
//! Outside [lo, hi] the spline is continued linearly with the value and slope it
//! has at the boundary, so the map stays logistic-like in the tails.
//!
//! Edge cases (no panics): one class or no rows → [`FitError`]; a non-finite
//! log-odds (NaN score, infinite margin) → [`FitError::Failed`]; all log-odds equal
//! → the constant map p = mean label, noted `constant-scores`; a sample a
//! threshold separates (see [`super::platt::is_separable`]) → the penalized
//! likelihood has no finite optimum (a steep linear f lies in the penalty's null
//! space), so the fit uses Platt's smoothed targets (N₊+1)/(N₊+2) and 1/(N₋+2)
//! instead of 0/1 and notes `separable`; a λ whose Newton iteration does not
//! converge is skipped, and if none converges the fit fails.

use super::platt::is_separable;
use super::state::{finite, probability, sig, smoothed_line, MapState, SavedMap};
use super::{
    check_sample, log_odds, sigmoid, Calibrator, FitError, Fitted, FittedMap, Method, ParamError,
    ScoreKind, Shape,
};
use serde::{Deserialize, Serialize};

/// Default number of equal knot intervals over the log-odds range.
pub const DEFAULT_INTERVALS: usize = 20;
/// [`DEFAULT_INTERVALS`], for the suite parser's defaults.
pub fn default_intervals() -> usize {
    DEFAULT_INTERVALS
}

/// Largest accepted number of knot intervals.
pub const MAX_INTERVALS: usize = 200;

/// How λ is chosen when it is not fixed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Criterion {
    /// Akaike: 2·NLL + 2·edf.
    #[default]
    Aic,
    /// Schwarz: 2·NLL + ln(n)·edf.
    Bic,
}

impl Criterion {
    pub fn as_str(self) -> &'static str {
        match self {
            Criterion::Aic => "aic",
            Criterion::Bic => "bic",
        }
    }
}

/// The spline's parameters.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SplineParams {
    /// Number of equal knot intervals over the log-odds range.
    #[serde(default = "default_intervals")]
    pub intervals: usize,
    /// Fixed smoothing parameter λ > 0; when absent λ is chosen by `criterion`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lambda: Option<f64>,
    /// How λ is chosen on its grid (`aic`, the default, or `bic`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub criterion: Option<Criterion>,
}

impl Default for SplineParams {
    fn default() -> Self {
        SplineParams {
            intervals: DEFAULT_INTERVALS,
            lambda: None,
            criterion: None,
        }
    }
}

impl Method for SplineParams {
    fn kind(&self) -> &'static str {
        "spline"
    }
    fn keys(&self) -> &'static [(&'static str, &'static str)] {
        &[
            ("intervals", "1 to 200"),
            ("lambda", "a number > 0"),
            ("criterion", "aic or bic"),
        ]
    }
    fn shape(&self) -> Shape {
        Shape::Flexible
    }

    fn predicts_zero_one(&self) -> bool {
        true
    }
    fn validate(&self, _score_kind: ScoreKind) -> Result<(), ParamError> {
        if self.intervals == 0 || self.intervals > MAX_INTERVALS {
            return Err(ParamError::new(
                "intervals",
                self.intervals,
                "the number of knot intervals must be between 1 and 200",
            ));
        }
        if let Some(l) = self.lambda {
            if !(l.is_finite() && l > 0.0) {
                return Err(ParamError::new(
                    "lambda",
                    l,
                    "the smoothing parameter must be a finite number above 0",
                ));
            }
            if let Some(c) = self.criterion {
                return Err(ParamError::new(
                    "criterion",
                    c.as_str(),
                    "give either a fixed lambda or a criterion to choose it, not both",
                ));
            }
        }
        Ok(())
    }
    fn calibrator(&self, score_kind: ScoreKind) -> Box<dyn Calibrator> {
        Box::new(Spline {
            score_kind,
            intervals: self.intervals,
            lambda: self.lambda,
            criterion: self.criterion.unwrap_or_default(),
        })
    }
}

/// The spline calibrator with checked parameters.
pub struct Spline {
    pub score_kind: ScoreKind,
    pub intervals: usize,
    /// Fixed smoothing parameter; `None` chooses it by `criterion`.
    pub lambda: Option<f64>,
    pub criterion: Criterion,
}

/// The λ grid searched when λ is not fixed: 10^(−3) … 10^7 in steps of 10^0.5.
pub fn lambda_grid() -> Vec<f64> {
    (0..=20)
        .map(|i| 10f64.powf(-3.0 + 0.5 * i as f64))
        .collect()
}

/// Uniform cubic B-spline basis on `intervals` equal intervals of [lo, hi].
#[derive(Debug, Clone, PartialEq)]
pub struct Basis {
    pub lo: f64,
    pub hi: f64,
    pub intervals: usize,
}

impl Basis {
    /// Number of basis functions, `intervals + 3`.
    pub fn len(&self) -> usize {
        self.intervals + 3
    }

    pub fn is_empty(&self) -> bool {
        false
    }

    fn h(&self) -> f64 {
        (self.hi - self.lo) / self.intervals as f64
    }

    /// The full knot vector t_0 … t_{K+6}.
    pub fn knots(&self) -> Vec<f64> {
        let h = self.h();
        (0..self.intervals + 7)
            .map(|i| self.lo + (i as f64 - 3.0) * h)
            .collect()
    }

    /// For x in [lo, hi]: the first non-zero basis index j and the four values
    /// B_j(x) … B_{j+3}(x), plus their derivatives in x.
    pub fn local(&self, x: f64) -> (usize, [f64; 4], [f64; 4]) {
        let h = self.h();
        let t = (x - self.lo) / h;
        let j = (t.floor().max(0.0) as usize).min(self.intervals - 1);
        let u = (t - j as f64).clamp(0.0, 1.0);
        let v = 1.0 - u;
        let u2 = u * u;
        let u3 = u2 * u;
        let b = [
            v * v * v / 6.0,
            (3.0 * u3 - 6.0 * u2 + 4.0) / 6.0,
            (-3.0 * u3 + 3.0 * u2 + 3.0 * u + 1.0) / 6.0,
            u3 / 6.0,
        ];
        let d = [
            -v * v / 2.0 / h,
            (1.5 * u2 - 2.0 * u) / h,
            (-1.5 * u2 + u + 0.5) / h,
            u2 / 2.0 / h,
        ];
        (j, b, d)
    }

    /// f(x) and f′(x) for x in [lo, hi].
    pub fn value_and_slope(&self, beta: &[f64], x: f64) -> (f64, f64) {
        let (j, b, d) = self.local(x);
        let mut f = 0.0;
        let mut df = 0.0;
        for k in 0..4 {
            f += b[k] * beta[j + k];
            df += d[k] * beta[j + k];
        }
        (f, df)
    }

    /// f(x) = Σ β_j B_j(x), continued linearly outside [lo, hi].
    pub fn eval(&self, beta: &[f64], x: f64) -> f64 {
        let edge = if x < self.lo {
            Some(self.lo)
        } else if x > self.hi {
            Some(self.hi)
        } else {
            None
        };
        let (f, df) = self.value_and_slope(beta, edge.unwrap_or(x));
        match edge {
            // A flat end stays flat even at an infinite margin (0·∞ would be NaN).
            Some(_) if df == 0.0 => f,
            Some(e) => f + df * (x - e),
            None => f,
        }
    }
}

/// Half-bandwidth of H: entries more than this many places off the diagonal are 0.
const BAND: usize = 3;

/// A symmetric m × m matrix with [`BAND`] sub-diagonals, stored by rows of its
/// lower band: `rows[i][k]` is entry (i, i − k) for k = 0 … BAND (entries that
/// would fall left of column 0 stay 0).
#[derive(Debug, Clone, PartialEq)]
pub struct BandMatrix {
    pub rows: Vec<[f64; BAND + 1]>,
}

impl BandMatrix {
    pub fn zeros(m: usize) -> Self {
        BandMatrix {
            rows: vec![[0.0; BAND + 1]; m],
        }
    }

    pub fn len(&self) -> usize {
        self.rows.len()
    }

    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// Entry (i, j) of the symmetric matrix.
    pub fn get(&self, i: usize, j: usize) -> f64 {
        let (r, c) = if i >= j { (i, j) } else { (j, i) };
        if r - c > BAND {
            0.0
        } else {
            self.rows[r][r - c]
        }
    }

    /// Matrix–vector product (the tests' check of the band layout).
    #[cfg(test)]
    fn mul(&self, v: &[f64]) -> Vec<f64> {
        let m = self.len();
        let mut out = vec![0.0; m];
        for i in 0..m {
            for k in 0..=BAND.min(i) {
                let a = self.rows[i][k];
                out[i] += a * v[i - k];
                if k > 0 {
                    out[i - k] += a * v[i];
                }
            }
        }
        out
    }

    /// `self + s·other`.
    fn plus_scaled(&self, s: f64, other: &BandMatrix) -> BandMatrix {
        let rows = self
            .rows
            .iter()
            .zip(&other.rows)
            .map(|(a, b)| std::array::from_fn(|k| a[k] + s * b[k]))
            .collect();
        BandMatrix { rows }
    }
}

/// The Cholesky factor L (lower, same band) of a positive definite band matrix.
struct BandCholesky {
    l: BandMatrix,
}

impl BandCholesky {
    /// `None` when the matrix is not numerically positive definite.
    fn new(h: &BandMatrix) -> Option<Self> {
        let m = h.len();
        let mut l = BandMatrix::zeros(m);
        for i in 0..m {
            for k in (0..=BAND.min(i)).rev() {
                // Entry (i, j) with j = i − k.
                let j = i - k;
                let mut s = h.rows[i][k];
                // Σ over columns c < j inside both rows' bands: c ≥ i − BAND.
                for c in (i.saturating_sub(BAND))..j {
                    s -= l.rows[i][i - c] * l.rows[j][j - c];
                }
                if k == 0 {
                    if !(s > 0.0 && s.is_finite()) {
                        return None;
                    }
                    l.rows[i][0] = s.sqrt();
                } else {
                    l.rows[i][k] = s / l.rows[j][0];
                }
            }
        }
        Some(BandCholesky { l })
    }

    /// Solve H x = b.
    fn solve(&self, b: &[f64]) -> Vec<f64> {
        let m = b.len();
        let l = &self.l.rows;
        let mut z = b.to_vec();
        for i in 0..m {
            let mut s = z[i];
            for k in 1..=BAND.min(i) {
                s -= l[i][k] * z[i - k];
            }
            z[i] = s / l[i][0];
        }
        for i in (0..m).rev() {
            let mut s = z[i];
            for k in 1..=BAND.min(m - 1 - i) {
                s -= l[i + k][k] * z[i + k];
            }
            z[i] = s / l[i][0];
        }
        z
    }

    /// The band of H⁻¹ (Hutchinson & de Hoog 1985).
    fn inverse_band(&self) -> BandMatrix {
        let m = self.l.len();
        let l = &self.l.rows;
        let mut sig = BandMatrix::zeros(m);
        for i in (0..m).rev() {
            let top = (i + BAND).min(m - 1);
            // Σ_ij for j = top … i (j > i first: the diagonal uses them).
            for j in (i..=top).rev() {
                let mut s = if i == j { 1.0 / l[i][0] } else { 0.0 };
                for k in i + 1..=top {
                    s -= l[k][k - i] * sig.get(k, j);
                }
                sig.rows[j][j - i] = s / l[i][0];
            }
        }
        sig
    }
}

/// D₂ᵀD₂ for `m` coefficients, as a band.
pub fn penalty_matrix(m: usize) -> BandMatrix {
    let mut p = BandMatrix::zeros(m);
    for r in 0..m.saturating_sub(2) {
        let c = [1.0, -2.0, 1.0];
        for a in 0..3 {
            for b in 0..=a {
                p.rows[r + a][a - b] += c[a] * c[b];
            }
        }
    }
    p
}

/// Calibration points after merging tied log-odds, with their basis values.
struct Design {
    basis: Basis,
    /// First non-zero basis index per point.
    first: Vec<usize>,
    /// Four basis values per point.
    vals: Vec<[f64; 4]>,
    /// Row count per point.
    count: Vec<f64>,
    /// Sum of targets per point.
    target: Vec<f64>,
    rows: f64,
}

/// The state of one Newton evaluation: J, gradient, data part of the Hessian.
struct Eval {
    nll: f64,
    grad: Vec<f64>,
    hess: BandMatrix,
}

impl Design {
    /// From points sorted by x with row and positive counts.
    fn new(
        basis: &Basis,
        xs: &[f64],
        count: Vec<f64>,
        positives: &[f64],
        targets: (f64, f64),
    ) -> Self {
        let (t_pos, t_neg) = targets;
        let mut first = Vec::with_capacity(xs.len());
        let mut vals = Vec::with_capacity(xs.len());
        for &x in xs {
            let (j, b, _) = basis.local(x);
            first.push(j);
            vals.push(b);
        }
        let target = count
            .iter()
            .zip(positives)
            .map(|(&c, &k)| k * t_pos + (c - k) * t_neg)
            .collect();
        let rows = count.iter().sum();
        Design {
            basis: basis.clone(),
            first,
            vals,
            count,
            target,
            rows,
        }
    }

    fn m(&self) -> usize {
        self.basis.len()
    }

    /// NLL, its gradient and BᵀWB at β (penalty not included).
    fn eval(&self, beta: &[f64]) -> Eval {
        let m = self.m();
        let mut grad = vec![0.0; m];
        let mut hess = BandMatrix::zeros(m);
        let mut nll = 0.0;
        for i in 0..self.first.len() {
            let j = self.first[i];
            let b = &self.vals[i];
            let bj = &beta[j..j + 4];
            let eta = b[0] * bj[0] + b[1] * bj[1] + b[2] * bj[2] + b[3] * bj[3];
            let n = self.count[i];
            // One exponential for both σ(η) and softplus(η).
            let e = (-eta.abs()).exp();
            let p = if eta >= 0.0 {
                1.0 / (1.0 + e)
            } else {
                e / (1.0 + e)
            };
            nll += n * (eta.max(0.0) + e.ln_1p()) - self.target[i] * eta;
            let r = n * p - self.target[i];
            let w = n * p * (1.0 - p);
            for a in 0..4 {
                grad[j + a] += r * b[a];
                let wa = w * b[a];
                // Lower band: entry (j + a, j + c) for c ≤ a.
                let row = &mut hess.rows[j + a];
                for c in 0..=a {
                    row[a - c] += wa * b[c];
                }
            }
        }
        Eval { nll, grad, hess }
    }
}

/// One converged fit for a fixed λ.
#[derive(Debug, Clone)]
pub struct LambdaFit {
    pub lambda: f64,
    pub beta: Vec<f64>,
    /// Negative log-likelihood at β (penalty excluded).
    pub nll: f64,
    /// Effective degrees of freedom, trace of the hat matrix.
    pub edf: f64,
    pub iterations: usize,
}

/// ‖D₂β‖², from the differences themselves (no cancellation in βᵀPβ).
fn penalty_value(beta: &[f64]) -> f64 {
    beta.windows(3)
        .map(|w| {
            let d = w[0] - 2.0 * w[1] + w[2];
            d * d
        })
        .sum()
}

/// D₂ᵀD₂β, from the differences.
fn penalty_gradient(beta: &[f64]) -> Vec<f64> {
    let mut g = vec![0.0; beta.len()];
    for (r, w) in beta.windows(3).enumerate() {
        let d = w[0] - 2.0 * w[1] + w[2];
        g[r] += d;
        g[r + 1] -= 2.0 * d;
        g[r + 2] += d;
    }
    g
}

/// Newton / penalized IRLS for one λ from `start`. `None` when it does not converge.
fn fit_lambda(d: &Design, p: &BandMatrix, lambda: f64, start: &[f64]) -> Option<LambdaFit> {
    let m = d.m();
    let mut beta = start.to_vec();
    let mut ev = d.eval(&beta);
    let mut obj = ev.nll + 0.5 * lambda * penalty_value(&beta);
    for it in 0..100 {
        let h = ev.hess.plus_scaled(lambda, p);
        let pb = penalty_gradient(&beta);
        let g: Vec<f64> = (0..m).map(|k| ev.grad[k] + lambda * pb[k]).collect();
        let chol = BandCholesky::new(&h)?;
        let step: Vec<f64> = chol.solve(&g).into_iter().map(|v| -v).collect();
        let gd: f64 = g.iter().zip(&step).map(|(a, b)| a * b).sum();
        let size = step.iter().fold(0.0f64, |a, b| a.max(b.abs()));
        if !size.is_finite() {
            return None;
        }
        let mut t = 1.0;
        let mut accepted = false;
        while t >= 1e-10 {
            let trial: Vec<f64> = (0..m).map(|k| beta[k] + t * step[k]).collect();
            let tev = d.eval(&trial);
            let tobj = tev.nll + 0.5 * lambda * penalty_value(&trial);
            // Armijo, with slack for rounding in J itself.
            if tobj.is_finite() && tobj <= obj + 1e-4 * t * gd + 1e-14 * obj.abs() {
                beta = trial;
                ev = tev;
                obj = tobj;
                accepted = true;
                break;
            }
            t /= 2.0;
        }
        let done = size * t < 1e-10 * (1.0 + beta.iter().fold(0.0f64, |a, b| a.max(b.abs())));
        if !accepted {
            // No decrease is possible at machine precision: converged only if the
            // proposed step was already negligible.
            if size < 1e-6 * (1.0 + beta.iter().fold(0.0f64, |a, b| a.max(b.abs()))) {
                return finish(d, p, lambda, beta, ev, it + 1);
            }
            return None;
        }
        if done {
            return finish(d, p, lambda, beta, ev, it + 1);
        }
    }
    None
}

fn finish(
    d: &Design,
    p: &BandMatrix,
    lambda: f64,
    beta: Vec<f64>,
    ev: Eval,
    iterations: usize,
) -> Option<LambdaFit> {
    let m = d.m();
    let h = ev.hess.plus_scaled(lambda, p);
    let sig = BandCholesky::new(&h)?.inverse_band();
    // edf = tr(H⁻¹ BᵀWB) = Σ_ij Σ_ij (BᵀWB)_ji, over the band where BᵀWB lives.
    let mut edf = 0.0;
    for i in 0..m {
        for k in 0..=BAND.min(i) {
            let both = if k == 0 { 1.0 } else { 2.0 };
            edf += both * sig.rows[i][k] * ev.hess.rows[i][k];
        }
    }
    if !(edf.is_finite() && ev.nll.is_finite()) {
        return None;
    }
    Some(LambdaFit {
        lambda,
        beta,
        nll: ev.nll,
        edf,
        iterations,
    })
}

/// Sub-bins per knot interval for the binned copy used in the λ search.
pub const BINS_PER_INTERVAL: usize = 25;

/// Bin distinct sorted points into `BINS_PER_INTERVAL` equal bins per knot
/// interval: each bin becomes one point at the count-weighted mean x of its
/// points, with their row and positive counts summed. `None` when there are no
/// more points than bins (the search then runs on the points themselves).
#[allow(clippy::type_complexity)]
fn bin_points(
    basis: &Basis,
    xs: &[f64],
    count: &[f64],
    positives: &[f64],
) -> Option<(Vec<f64>, Vec<f64>, Vec<f64>)> {
    let bins = BINS_PER_INTERVAL * basis.intervals;
    if xs.len() <= bins {
        return None;
    }
    let w = (basis.hi - basis.lo) / bins as f64;
    let (mut bx, mut bc, mut bp) = (Vec::new(), Vec::new(), Vec::new());
    let mut cur = usize::MAX;
    let mut sx = 0.0;
    for i in 0..xs.len() {
        let k = (((xs[i] - basis.lo) / w).floor().max(0.0) as usize).min(bins - 1);
        if k != cur {
            if cur != usize::MAX {
                let c: f64 = *bc.last().unwrap();
                bx.push(sx / c);
            }
            cur = k;
            sx = 0.0;
            bc.push(0.0);
            bp.push(0.0);
        }
        sx += xs[i] * count[i];
        *bc.last_mut().unwrap() += count[i];
        *bp.last_mut().unwrap() += positives[i];
    }
    let c: f64 = *bc.last().unwrap();
    bx.push((sx / c).clamp(basis.lo, basis.hi));
    for v in bx.iter_mut() {
        *v = v.clamp(basis.lo, basis.hi);
    }
    Some((bx, bc, bp))
}

/// Walk the λ grid from large to small with warm starts; returns the fit with the
/// smallest criterion 2·NLL + `per_df`·edf (ties keep the larger λ) and the path
/// of (λ, criterion).
#[allow(clippy::type_complexity)]
fn search_grid(
    d: &Design,
    p: &BandMatrix,
    per_df: f64,
    start: &[f64],
) -> (Option<(f64, LambdaFit)>, Vec<(f64, f64)>) {
    let mut grid = lambda_grid();
    grid.reverse();
    let mut best: Option<(f64, LambdaFit)> = None;
    let mut path = Vec::with_capacity(grid.len());
    let mut warm = start.to_vec();
    for &l in &grid {
        let Some(fit) = fit_lambda(d, p, l, &warm) else {
            continue;
        };
        let score = 2.0 * fit.nll + per_df * fit.edf;
        path.push((l, score));
        warm.clone_from(&fit.beta);
        if best.as_ref().is_none_or(|(s, _)| score < *s) {
            best = Some((score, fit));
        }
    }
    (best, path)
}

/// The outcome of [`fit_spline`].
#[derive(Debug, Clone)]
pub struct SplineFit {
    pub basis: Basis,
    pub chosen: LambdaFit,
    /// Every λ tried with its criterion value (empty for a fixed λ); computed on
    /// the binned copy when the search used one.
    pub path: Vec<(f64, f64)>,
    pub separable: bool,
}

/// Fit on log-odds `x` with 0/1 labels `y` (the Platt smoothed targets replace
/// them when a threshold separates the classes).
///
/// `x` must be finite with a positive range and `y` must hold both classes.
pub fn fit_spline(
    x: &[f64],
    y: &[bool],
    intervals: usize,
    lambda: Option<f64>,
    criterion: Criterion,
) -> Result<SplineFit, FitError> {
    check_sample(x, y)?;
    if intervals == 0 || intervals > MAX_INTERVALS {
        return Err(FitError::Failed(format!(
            "spline: intervals must be in 1..={MAX_INTERVALS}, got {intervals}"
        )));
    }
    if x.iter().any(|v| !v.is_finite()) {
        return Err(FitError::Failed(
            "spline: a log-odds value is not finite (NaN score or infinite margin)".into(),
        ));
    }
    let lo = x.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = x.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    // Equal values, or a range so small that the knot spacing underflows.
    let spacing_ok = matches!(
        ((hi - lo) / intervals as f64).partial_cmp(&0.0),
        Some(std::cmp::Ordering::Greater)
    );
    if hi <= lo || !spacing_ok {
        return Err(FitError::Failed(
            "spline: the log-odds of the calibration sample are all equal".into(),
        ));
    }
    let separable = is_separable(x, y);
    // Targets of a positive and of a negative row.
    let (t_pos, t_neg) = if separable {
        let np = y.iter().filter(|&&l| l).count() as f64;
        let nn = y.len() as f64 - np;
        ((np + 1.0) / (np + 2.0), 1.0 / (nn + 2.0))
    } else {
        (1.0, 0.0)
    };
    let basis = Basis { lo, hi, intervals };
    // Merge ties: sort by x, count rows and positives per distinct x. Counting
    // (rather than summing targets) keeps the result independent of row order.
    let mut xs: Vec<f64> = Vec::new();
    let mut count: Vec<f64> = Vec::new();
    let mut positives: Vec<f64> = Vec::new();
    super::score_order::for_each_distinct(x, y, super::score_order::KeySort::Auto, |xi, r, p| {
        xs.push(xi);
        count.push(r as f64);
        positives.push(p as f64);
    });
    let total_pos: f64 = positives.iter().sum();
    let total_target = total_pos * t_pos + (x.len() as f64 - total_pos) * t_neg;
    let design = Design::new(&basis, &xs, count.clone(), &positives, (t_pos, t_neg));
    let m = basis.len();
    let p = penalty_matrix(m);
    let tbar = (total_target / x.len() as f64).clamp(1e-12, 1.0 - 1e-12);
    let start = vec![(tbar / (1.0 - tbar)).ln(); m];

    if let Some(l) = lambda {
        let fit = fit_lambda(&design, &p, l, &start).ok_or_else(|| {
            FitError::Failed(format!(
                "spline: penalized IRLS did not converge for lambda = {l}"
            ))
        })?;
        return Ok(SplineFit {
            basis,
            chosen: fit,
            path: Vec::new(),
            separable,
        });
    }

    let penalty_per_df = match criterion {
        Criterion::Aic => 2.0,
        Criterion::Bic => design.rows.ln(),
    };
    // The λ search runs on a binned copy when there are many distinct points.
    let binned = bin_points(&basis, &xs, &count, &positives)
        .map(|(bx, bc, bp)| Design::new(&basis, &bx, bc, &bp, (t_pos, t_neg)));
    let search = binned.as_ref().unwrap_or(&design);
    let (best, path) = search_grid(search, &p, penalty_per_df, &start);
    let (_, mut chosen) = best.ok_or_else(|| {
        FitError::Failed(
            "spline: penalized IRLS did not converge for any lambda of the grid".into(),
        )
    })?;
    if binned.is_some() {
        // The exact fit at the chosen λ, warm-started from the binned one.
        let l = chosen.lambda;
        chosen = fit_lambda(&design, &p, l, &chosen.beta)
            .or_else(|| fit_lambda(&design, &p, l, &start))
            .ok_or_else(|| {
                FitError::Failed(format!(
                    "spline: penalized IRLS did not converge for lambda = {l}"
                ))
            })?;
    }
    Ok(SplineFit {
        basis,
        chosen,
        path,
        separable,
    })
}

/// A fitted spline map on the log-odds.
pub struct SplineMap {
    pub score_kind: ScoreKind,
    pub fit: SplineFit,
    pub criterion: Option<Criterion>,
}

impl SplineMap {
    /// f(x) on the log-odds scale.
    pub fn logit(&self, x: f64) -> f64 {
        self.fit.basis.eval(&self.fit.chosen.beta, x)
    }
}

impl FittedMap for SplineMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            let x = log_odds(s, self.score_kind);
            *o = if x.is_nan() {
                f64::NAN
            } else {
                sigmoid(self.logit(x))
            };
        }
    }
    fn state(&self) -> MapState {
        let b = &self.fit.basis;
        MapState::Spline(SplineState {
            score_kind: self.score_kind,
            lo: b.lo,
            hi: b.hi,
            intervals: b.intervals,
            coefficients: self.fit.chosen.beta.clone(),
            lambda: self.fit.chosen.lambda,
            edf: self.fit.chosen.edf,
            criterion: self.criterion,
            smoothed_targets: self.fit.separable,
        })
    }
    fn extras(&self, _test_scores: &[f64]) -> Vec<(&'static str, f64)> {
        vec![("spline_edf", self.fit.chosen.edf)]
    }
}

/// The constant map p = mean label, for samples whose log-odds are all equal.
struct ConstantMap {
    p: f64,
}

impl FittedMap for ConstantMap {
    fn predict(&self, scores: &[f64], out: &mut [f64]) {
        for (o, &s) in out.iter_mut().zip(scores) {
            *o = if s.is_nan() { f64::NAN } else { self.p };
        }
    }
    fn state(&self) -> MapState {
        MapState::Constant(ConstantState { p: self.p })
    }
}

/// The saved spline map: cubic B-spline coefficients on `intervals` equal
/// intervals of [lo, hi] of the log-odds; linear continuation outside.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(
    deny_unknown_fields,
    expecting = "struct variant MapState::Spline with 9 elements"
)]
pub struct SplineState {
    pub score_kind: ScoreKind,
    pub lo: f64,
    pub hi: f64,
    pub intervals: usize,
    pub coefficients: Vec<f64>,
    pub lambda: f64,
    pub edf: f64,
    pub criterion: Option<Criterion>,
    pub smoothed_targets: bool,
}

impl SavedMap for SplineState {
    fn kind(&self) -> &'static str {
        "spline"
    }
    fn summary(&self) -> Vec<String> {
        let intervals = self.intervals;
        let mut v = vec![
            format!(
                "{intervals} knot intervals on the log-odds [{}, {}], {} coefficients",
                sig(self.lo),
                sig(self.hi),
                intervals + 3
            ),
            format!(
                "λ = {}{}, effective degrees of freedom {}",
                sig(self.lambda),
                self.criterion.map_or(" (fixed)".to_string(), |c| format!(
                    " (chosen by {})",
                    c.as_str()
                )),
                sig(self.edf)
            ),
        ];
        v.extend(smoothed_line(self.smoothed_targets));
        v
    }
    fn check(&self) -> Result<(), String> {
        let (lo, hi, intervals) = (self.lo, self.hi, self.intervals);
        finite("lo", lo)?;
        finite("hi", hi)?;
        if !(hi > lo && (hi - lo) / intervals.max(1) as f64 > 0.0) {
            return Err(format!("the knot range needs lo < hi, found [{lo}, {hi}]"));
        }
        if intervals == 0 || intervals > MAX_INTERVALS {
            return Err(format!(
                "intervals = {intervals} must be between 1 and {MAX_INTERVALS}"
            ));
        }
        if self.coefficients.len() != intervals + 3 {
            return Err(format!(
                "{intervals} knot intervals need {} coefficients, found {}",
                intervals + 3,
                self.coefficients.len()
            ));
        }
        for (i, &c) in self.coefficients.iter().enumerate() {
            finite(&format!("coefficients[{i}]"), c)?;
        }
        if !(hi - lo).is_finite() {
            return Err(format!(
                "the knot range [{lo:?}, {hi:?}] is wider than the largest double"
            ));
        }
        // Beyond the knot range the spline continues with its value
        // and slope at the ends: both must be numbers.
        let basis = Basis { lo, hi, intervals };
        for (name, at) in [("lo", lo), ("hi", hi)] {
            let (value, slope) = basis.value_and_slope(&self.coefficients, at);
            if !value.is_finite() || !slope.is_finite() {
                return Err(format!(
                    "the spline's {} at {name} = {at:?} is not a finite number (value {value:?}, slope {slope:?}); the knot intervals of [{lo:?}, {hi:?}] are too narrow or the coefficients too large",
                    if value.is_finite() { "slope" } else { "value" }
                ));
            }
        }
        finite("lambda", self.lambda)?;
        finite("edf", self.edf)
    }
    fn restore(&self) -> Box<dyn FittedMap> {
        Box::new(SplineMap {
            score_kind: self.score_kind,
            fit: SplineFit {
                basis: Basis {
                    lo: self.lo,
                    hi: self.hi,
                    intervals: self.intervals,
                },
                chosen: LambdaFit {
                    lambda: self.lambda,
                    beta: self.coefficients.clone(),
                    nll: f64::NAN,
                    edf: self.edf,
                    iterations: 0,
                },
                path: Vec::new(),
                separable: self.smoothed_targets,
            },
            criterion: self.criterion,
        })
    }
    fn range_rule(&self) -> &'static str {
        "the spline continues linearly on the log-odds scale with its boundary value and slope (extrapolated)"
    }
    fn score_kind(&self) -> Option<ScoreKind> {
        Some(self.score_kind)
    }
}

/// The saved constant map p (a spline fitted on all-equal log-odds).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(
    deny_unknown_fields,
    expecting = "struct variant MapState::Constant with 1 element"
)]
pub struct ConstantState {
    pub p: f64,
}

impl SavedMap for ConstantState {
    fn kind(&self) -> &'static str {
        "spline"
    }
    fn summary(&self) -> Vec<String> {
        vec![format!("p = {} for every score", sig(self.p))]
    }
    fn check(&self) -> Result<(), String> {
        probability("p", 0, self.p)
    }
    fn restore(&self) -> Box<dyn FittedMap> {
        Box::new(ConstantMap { p: self.p })
    }
    fn range_rule(&self) -> &'static str {
        "the map is constant"
    }
}

impl Calibrator for Spline {
    fn kind(&self) -> &'static str {
        "spline"
    }
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError> {
        check_sample(scores, labels)?;
        let x: Vec<f64> = scores
            .iter()
            .map(|&s| log_odds(s, self.score_kind))
            .collect();
        if x.iter().any(|v| !v.is_finite()) {
            return Err(FitError::Failed(
                "spline: a score has no finite log-odds (NaN score or infinite margin)".into(),
            ));
        }
        if x.iter().all(|&v| v == x[0]) {
            let p = labels.iter().filter(|&&l| l).count() as f64 / labels.len() as f64;
            return Ok(Fitted {
                map: Box::new(ConstantMap { p }),
                notes: vec!["constant-scores"],
            });
        }
        let fit = fit_spline(&x, labels, self.intervals, self.lambda, self.criterion)?;
        let notes = if fit.separable {
            vec!["separable"]
        } else {
            Vec::new()
        };
        Ok(Fitted {
            map: Box::new(SplineMap {
                score_kind: self.score_kind,
                fit,
                criterion: if self.lambda.is_none() {
                    Some(self.criterion)
                } else {
                    None
                },
            }),
            notes,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Cubic B-splines on uniform knots form a partition of unity and reproduce
    /// linear functions: Σ_j (j − 1)·h·B_j(x) + lo = x (de Boor 1978, "A Practical
    /// Guide to Splines", Marsden's identity). This is what makes the null space
    /// of the second-difference penalty the linear functions of x.
    #[test]
    fn basis_reproduces_constants_and_lines() {
        let b = Basis {
            lo: -2.0,
            hi: 3.0,
            intervals: 7,
        };
        let h = 5.0 / 7.0;
        let ones = vec![1.0; b.len()];
        let line: Vec<f64> = (0..b.len()).map(|j| -2.0 + (j as f64 - 1.0) * h).collect();
        for i in 0..=100 {
            let x = -2.0 + 5.0 * i as f64 / 100.0;
            assert!((b.eval(&ones, x) - 1.0).abs() < 1e-13);
            assert!((b.eval(&line, x) - x).abs() < 1e-12, "x = {x}");
        }
        // Outside the range the linear continuation stays on the line.
        assert!((b.eval(&line, -10.0) + 10.0).abs() < 1e-11);
        assert!((b.eval(&line, 9.0) - 9.0).abs() < 1e-11);
        assert_eq!(b.eval(&line, f64::INFINITY), f64::INFINITY);
        assert!((b.eval(&ones, f64::NEG_INFINITY) - 1.0).abs() < 1e-13);
    }

    /// The derivative used for extrapolation matches a central difference.
    #[test]
    fn basis_derivative_matches_finite_difference() {
        let b = Basis {
            lo: 0.0,
            hi: 1.0,
            intervals: 4,
        };
        let beta = [0.3, -1.0, 2.0, 0.5, 0.1, 1.7, -0.4];
        for &x in &[0.1, 0.37, 0.5, 0.8] {
            let (j, _, d) = b.local(x);
            let df: f64 = (0..4).map(|k| d[k] * beta[j + k]).sum();
            let e = 1e-6;
            let fd = (b.eval(&beta, x + e) - b.eval(&beta, x - e)) / (2.0 * e);
            assert!((df - fd).abs() < 1e-6, "{df} vs {fd}");
        }
    }

    #[test]
    fn penalty_kills_linear_coefficients() {
        let p = penalty_matrix(9);
        let lin: Vec<f64> = (0..9).map(|j| 2.0 - 0.7 * j as f64).collect();
        assert!(p.mul(&lin).iter().all(|v| v.abs() < 1e-12));
    }

    /// The band Cholesky solve and the band of the inverse agree with nalgebra's
    /// dense Cholesky (a general-purpose linear-algebra library) on a matrix of
    /// the same shape as a spline Hessian.
    #[test]
    fn band_factor_matches_dense_reference() {
        use nalgebra::{DMatrix, DVector};
        let m = 12;
        let p = penalty_matrix(m);
        let mut h = BandMatrix::zeros(m);
        for i in 0..m {
            for k in 0..=BAND.min(i) {
                // A diagonally weighted Gram-like band, positive definite.
                h.rows[i][k] = if k == 0 {
                    2.0 + (i as f64 * 0.7).sin()
                } else {
                    0.3 * ((i * 7 + k) as f64).cos() / k as f64
                };
            }
        }
        let h = h.plus_scaled(0.5, &p);
        let dense = DMatrix::from_fn(m, m, |i, j| h.get(i, j));
        let chol = nalgebra::linalg::Cholesky::new(dense.clone()).unwrap();
        let b: Vec<f64> = (0..m).map(|i| (i as f64 - 4.0) / 3.0).collect();
        let ours = BandCholesky::new(&h).unwrap();
        let x = ours.solve(&b);
        let xr = chol.solve(&DVector::from_column_slice(&b));
        for i in 0..m {
            assert!(
                (x[i] - xr[i]).abs() < 1e-12,
                "x[{i}]: {} vs {}",
                x[i],
                xr[i]
            );
        }
        let inv = chol.inverse();
        let band = ours.inverse_band();
        for i in 0..m {
            for k in 0..=BAND.min(i) {
                let (a, r) = (band.rows[i][k], inv[(i, i - k)]);
                assert!(
                    (a - r).abs() < 1e-12,
                    "inverse ({i}, {}): {a} vs {r}",
                    i - k
                );
            }
        }
        // Products of the band form agree with the dense product too.
        let hb = h.mul(&b);
        let hr = &dense * DVector::from_column_slice(&b);
        assert!((0..m).all(|i| (hb[i] - hr[i]).abs() < 1e-12));
        // Not positive definite: refused, not a NaN factor.
        let mut bad = h.clone();
        bad.rows[5][0] = -1.0;
        assert!(BandCholesky::new(&bad).is_none());
    }

    #[test]
    fn degenerate_samples_do_not_panic() {
        let s = Spline {
            score_kind: ScoreKind::Probability,
            intervals: DEFAULT_INTERVALS,
            lambda: None,
            criterion: Criterion::Aic,
        };
        let c = s.fit(&[0.3, 0.3, 0.3], &[true, false, true]).unwrap();
        assert_eq!(c.notes, vec!["constant-scores"]);
        let mut out = [0.0];
        c.map.predict(&[0.9], &mut out);
        assert!((out[0] - 2.0 / 3.0).abs() < 1e-15);
        assert_eq!(
            s.fit(&[0.1, 0.2], &[true, true]).err(),
            Some(FitError::OneClass {
                positives: 2,
                rows: 2
            })
        );
        assert!(matches!(
            s.fit(&[0.1, f64::NAN], &[true, false]),
            Err(FitError::Failed(_))
        ));
        let sep = s
            .fit(
                &[0.1, 0.2, 0.3, 0.7, 0.8],
                &[false, false, false, true, true],
            )
            .unwrap();
        assert_eq!(sep.notes, vec!["separable"]);
        let mut o = [0.0; 2];
        sep.map.predict(&[0.1, 0.8], &mut o);
        assert!(
            o[0] < 0.5 && o[1] > 0.5 && o[0] > 0.0 && o[1] < 1.0,
            "{o:?}"
        );
        // Two distinct points only.
        let two = s
            .fit(&[0.2, 0.2, 0.6, 0.6], &[false, true, true, true])
            .unwrap();
        // Quasi-separated (the only negative shares the smallest score with a
        // positive): smoothed targets, an increasing map strictly inside (0, 1).
        assert_eq!(two.notes, vec!["separable"]);
        let mut o2 = [0.0; 2];
        two.map.predict(&[0.2, 0.6], &mut o2);
        assert!(0.0 < o2[0] && o2[0] < o2[1] && o2[1] < 1.0, "{o2:?}");
    }

    /// The λ search on the binned copy tracks the search on the exact points:
    /// the criterion curves agree closely and the chosen λ is the same grid
    /// value or a neighbour (tolerances of our choosing).
    #[test]
    fn binned_search_tracks_exact_search() {
        use crate::split::rng;
        use rand_chacha::rand_core::Rng;
        for seed in 0..4u64 {
            let mut r = rng(seed);
            let mut unif = || (r.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
            let n = 4000;
            let mut xs: Vec<f64> = (0..n).map(|_| 6.0 * unif() - 3.0).collect();
            xs.sort_by(f64::total_cmp);
            let count = vec![1.0; n];
            let positives: Vec<f64> = xs
                .iter()
                .map(|&v| {
                    if unif() < sigmoid(v + 0.8 * (2.0 * v).sin()) {
                        1.0
                    } else {
                        0.0
                    }
                })
                .collect();
            let basis = Basis {
                lo: xs[0],
                hi: xs[n - 1],
                intervals: 20,
            };
            let exact = Design::new(&basis, &xs, count.clone(), &positives, (1.0, 0.0));
            let (bx, bc, bp) = bin_points(&basis, &xs, &count, &positives).unwrap();
            assert!(bx.len() <= 500 && bc.iter().sum::<f64>() == n as f64);
            let binned = Design::new(&basis, &bx, bc, &bp, (1.0, 0.0));
            let p = penalty_matrix(basis.len());
            let start = vec![0.0; basis.len()];
            let (be, pe) = search_grid(&exact, &p, 2.0, &start);
            let (bb, pb) = search_grid(&binned, &p, 2.0, &start);
            assert_eq!(pe.len(), pb.len());
            for ((l, a), (_, b)) in pe.iter().zip(&pb) {
                assert!(
                    (a - b).abs() < 1.0,
                    "seed {seed}, lambda {l}: AIC {a} vs {b}"
                );
            }
            let grid = lambda_grid();
            let pos = |l: f64| grid.iter().position(|&g| g == l).unwrap() as i64;
            let (le, lb) = (be.unwrap().1.lambda, bb.unwrap().1.lambda);
            assert!((pos(le) - pos(lb)).abs() <= 1, "seed {seed}: {le} vs {lb}");
        }
    }
}
