//! Maximum-likelihood logistic regression in a few dimensions (an intercept plus
//! up to three features), shared by the methods that are logistic models of
//! transformed scores (Platt scaling, beta calibration and its tied form).
//!
//! Math: with features x_i ∈ ℝ^d and targets t_i ∈ [0, 1], minimise the negative
//! log-likelihood F(β, c) = Σ_i [softplus(z_i) − t_i z_i], z_i = β·x_i + c, where
//! softplus(z) = ln(1 + e^z) is evaluated in the overflow-free form
//! max(z, 0) + ln(1 + e^(−|z|)). F is convex; its gradient is Σ (p_i − t_i)(x_i, 1)
//! and its Hessian Σ w_i (x_i, 1)(x_i, 1)ᵀ with p_i = σ(z_i), w_i = p_i(1 − p_i).
//!
//! Method, fast phase: plain Newton steps from a good start. A sample of at
//! least 32,768 rows starts at the fit of a subsample of about one row in 16
//! (rows chosen by a hash of their values, so the same rows in any order;
//! recursively, so the subsample starts from its own subsample); a smaller one
//! starts at slopes 0 and the logit of the mean target. A step is accepted
//! when it is no longer than one standard deviation per unit of slope and the
//! Newton decrement λ² = −g·δ at the new point is at most half of the old one
//! (a tenth after the third step). λ² is zero only at the optimum and the
//! Hessian is bounded, so such steps converge to the optimum; the objective
//! itself, whose logarithm per row costs as much as the rest of a pass, is
//! then never computed. The phase stops, after a step below 1e-3 in every
//! standardised coordinate, when λ² ≤ 1e-20·Σw, or when λ² ≤ 1e-6·Σw and the
//! quadratic convergence seen over the last two steps
//! (λ²_next ≈ λ⁶/λ⁴_prev) puts the next decrement below 1e-30·Σw; the last
//! Newton step is then taken. Σw = Σ p_i(1 − p_i) is at most F (each row's
//! weight is at most its term of F), so the scale shrinks with F on saturated
//! samples.
//!
//! Method, safeguarded phase (from the last accepted point, when a plain step
//! fails that test or the Hessian is not numerically positive definite):
//! damped Newton steps in the Levenberg–Marquardt form (Levenberg 1944,
//! Quarterly of Applied Mathematics 2; Marquardt 1963, SIAM J. Appl. Math. 11):
//! solve (H + μ·diag H) δ = −g by Cholesky, accept the step when F falls by the
//! Armijo fraction 1e-4 of the predicted decrease (or stays flat to rounding at
//! μ = 0, near the optimum), then divide μ by 10 (down to 0, the plain Newton
//! step); on a rejected step or a Hessian that is not numerically positive
//! definite, raise μ (1e-3, then ×10) and solve again. With μ = 0 accepted at
//! every iteration this is Newton's method as in Lin, Lin & Weng (2007, Machine
//! Learning 68, "A note on Platt's probabilistic outputs for support vector
//! machines").
//!
//! Both phases form the Hessian about the weighted mean
//! ū = Σ w_i u_i / Σ w_i of the (standardised) features, so the slope block is
//! Σ w_i (u_i − ū)(u_i − ū)ᵀ and no longer shares a row with the intercept. This
//! matters for saturated samples (scores of a naive-Bayes model, nearly all
//! within 1e-10 of 0 or 1): there almost all weight w_i sits on a few rows with
//! nearly equal features, and the uncentred form loses the slope's curvature to
//! cancellation. One pass sums Σw, Σw·u and Σw·u·uᵀ about a working centre and
//! subtracts Σw·ū·ūᵀ; the working centre moves to ū before each new point is
//! evaluated, so ū stays near it, and a pass whose subtraction loses more than
//! six digits is repeated about ū. Features are centred and scaled internally
//! for conditioning; coefficients are reported on the raw feature scale.
//!
//! Two safeguards keep the steps useful on saturated samples, where the
//! quadratic model badly misjudges the distance to an optimum whose slope is
//! 1e5–1e10 on the raw score: after a long step the intercept is re-optimised for
//! the new slopes (one-dimensional Newton with halving), and the step is
//! extrapolated (2δ, 4δ, …) while that profiled F keeps falling beyond
//! rounding. The working coordinates are re-centred on the weighted feature
//! mean after a step (the intercept absorbs the shift), so z never comes
//! out of the cancellation of two huge terms (once the shift moves z by more
//! than 1). Intercept profiling and extrapolation are used only for steps
//! longer than one standard deviation per unit of slope. The ridge on the Hessian's
//! diagonal is relative (1e-12 of the diagonal), since the curvature of such
//! a slope can be 1e-20.
//!
//! Stopping (safeguarded phase): an undamped Newton step below 1e-10, a Newton
//! decrement −g·δ (invariant under affine changes of the features) below
//! 1e-20·F, or below 1e-12·F and no longer shrinking quadratically (the
//! rounding floor of the sums) — each only when a doubled step does not lower
//! F either; or no damping up to μ = 1e10 decreases F at machine precision
//! (the current point is then the optimum to that precision); or 500
//! iterations in all.
//!
//! Row order: every sum over the rows (mean, variance, F, gradient, Hessian)
//! is order-free (`exact_sum`: each term is split at fixed grids and the parts
//! are added as integers), and the subsample of the start is chosen by row
//! values, so the fitted model does not depend on the order of the
//! calibration rows, not even in the last bit, and no sort is needed. F and
//! the gradient are summed to the last bits; the Hessian sums, which only
//! steer the steps, to about 2^-42 of their bound.
//!
//! Cost per pass: one exponential per row (and a logarithm in the safeguarded
//! phase), computed in blocks of 128 rows, then the terms and their sums in
//! loops the compiler can vectorise; no allocation per iteration.
//!
//! The optimum is finite unless the sample is (quasi-)separable; callers detect
//! separation beforehand and pass smoothed targets in that case. The design is
//! checked before fitting: a constant feature or features collinear with each
//! other and the intercept on the calibration sample are errors, since then no
//! unique optimum exists.

use super::exact_sum::{self, pow2_above, Grid, Lane, Total, CHUNK};
use super::FitError;

/// Most features supported (plus the intercept).
pub const MAX_FEATURES: usize = 3;
const P: usize = MAX_FEATURES + 1;

/// A fitted logistic model σ(coef·x + intercept).
#[derive(Debug, Clone, PartialEq)]
pub struct LogisticModel {
    /// One coefficient per feature column, on the raw feature scale.
    pub coef: Vec<f64>,
    pub intercept: f64,
    pub iterations: usize,
}

/// σ(z) and 1 − σ(z), each without cancellation, and σ(z)(1 − σ(z)), from
/// e = e^(−|z|): (1/(1 + e), e/(1 + e)) in the order the sign of z gives,
/// chosen with bit masks (the sign of z is unpredictable in the loops over
/// rows, so a branch would often be mispredicted).
#[inline(always)]
pub(crate) fn sigmoid_pair(z: f64, e: f64) -> (f64, f64, f64) {
    let ri = 1.0 / (1.0 + e);
    let small = e * ri;
    let s = (z >= 0.0) as u8 as f64;
    let o = 1.0 - s;
    (s * ri + o * small, s * small + o * ri, small * ri)
}

/// Overflow-free ln(1 + e^z).
pub fn softplus(z: f64) -> f64 {
    z.max(0.0) + (-z.abs()).exp().ln_1p()
}

/// Solve the symmetric positive-definite system `h · x = g` (size `k`) by Cholesky.
/// Returns `None` when the matrix is not numerically positive definite.
#[allow(clippy::needless_range_loop)] // index form mirrors the matrix algebra
fn cholesky_solve(h: &[[f64; P]; P], g: &[f64; P], k: usize) -> Option<[f64; P]> {
    let mut l = [[0.0; P]; P];
    for i in 0..k {
        for j in 0..=i {
            let mut s = h[i][j];
            for m in 0..j {
                s -= l[i][m] * l[j][m];
            }
            if i == j {
                // Relative pivot test: a pivot that is lost in rounding means the
                // features are (numerically) collinear.
                if s.is_nan() || s <= 1e-10 * h[i][i] || !s.is_finite() {
                    return None;
                }
                l[i][i] = s.sqrt();
            } else {
                l[i][j] = s / l[j][j];
            }
        }
    }
    let mut y = [0.0; P];
    for i in 0..k {
        let mut s = g[i];
        for m in 0..i {
            s -= l[i][m] * y[m];
        }
        y[i] = s / l[i][i];
    }
    let mut x = [0.0; P];
    for i in (0..k).rev() {
        let mut s = y[i];
        for m in i + 1..k {
            s -= l[m][i] * x[m];
        }
        x[i] = s / l[i][i];
    }
    Some(x)
}

/// The calibration rows as the fitter reads them: feature columns, targets,
/// and order-free summaries of the columns.
struct Data<'a> {
    cols: [&'a [f64]; MAX_FEATURES],
    t: &'a [f64],
    d: usize,
    n: usize,
    mean: [f64; MAX_FEATURES],
    scale: [f64; MAX_FEATURES],
    inv_scale: [f64; MAX_FEATURES],
    min: [f64; MAX_FEATURES],
    max: [f64; MAX_FEATURES],
    /// Σ t (order-free).
    t_sum: f64,
}

/// A point of the working parameters: z = Σ_j w_j (x_j − c_j)/s_j + w_d.
#[derive(Debug, Clone, Copy)]
struct Point {
    w: [f64; P],
    centre: [f64; MAX_FEATURES],
}

/// One pass over the rows at a point: the objective F (NaN when not asked
/// for), the gradient g, the Hessian about the weighted feature mean H̃
/// (lower triangle of the slope block, Σw last) and that mean ū.
#[derive(Debug, Clone, Copy)]
struct Eval {
    f: f64,
    g: [f64; P],
    h: [[f64; P]; P],
    ubar: [f64; MAX_FEATURES],
}

/// Index of (a, b), b ≤ a, in the packed lower triangle.
const fn tri(a: usize, b: usize) -> usize {
    a * (a + 1) / 2 + b
}

/// Entries of a packed lower triangle of the slope block.
const TRI: usize = MAX_FEATURES * (MAX_FEATURES + 1) / 2;

/// Number of sums of a pass: F, the d + 1 gradient entries, Σw, the d
/// entries of Σw·v and the d(d + 1)/2 of Σw·v·vᵀ.
const SUMS: usize = 1 + P + 1 + MAX_FEATURES + TRI;
/// Index of Σw among the sums (the gradient sums come before it).
const SW: usize = 1 + P;

/// Rows per block of a pass.
const BLOCK: usize = 128;

/// The largest |x| of a block (every term is finite where this is called).
fn block_max(xs: &[f64]) -> f64 {
    xs.iter()
        .fold(0.0f64, |m, x| if x.abs() > m { x.abs() } else { m })
}

/// Bounds of the terms of a run of sums: `Some` bounds to sum again with when
/// a term exceeded its bound (the sums are then wrong) or every term stayed
/// more than 2^20 below it (the sums would be imprecise), else `None`.
fn retighten(bound: &[f64], seen: &[f64]) -> Option<Vec<f64>> {
    let off = bound
        .iter()
        .zip(seen)
        .any(|(&b, &s)| s > b || (s > 0.0 && s < b * 2f64.powi(-20)));
    off.then(|| seen.iter().map(|&s| pow2_above(s)).collect())
}

impl<'a> Data<'a> {
    /// The largest |v_j| = |x_j − c_j|/s_j on the sample (v is monotone in x,
    /// so the extremes of x give it, with the same rounding as the rows).
    fn vmax(&self, centre: &[f64; MAX_FEATURES]) -> [f64; MAX_FEATURES] {
        let mut v = [0.0; MAX_FEATURES];
        for j in 0..self.d {
            v[j] = ((self.max[j] - centre[j]) * self.inv_scale[j])
                .abs()
                .max(((self.min[j] - centre[j]) * self.inv_scale[j]).abs());
        }
        v
    }

    /// Bounds of the terms of every sum at `pt` that hold for any data:
    /// |p − t| ≤ 1, p(1 − p) ≤ 1/4, |v_j| ≤ its largest value, and an
    /// objective term at most |z| + ln 2.
    fn prior_bounds(&self, pt: &Point) -> [f64; SUMS] {
        let vmax = self.vmax(&pt.centre);
        let d = self.d;
        let mut b = [0.0; SUMS];
        b[0] = z_bound(self, pt) + 1.0;
        for j in 0..d {
            b[1 + j] = vmax[j];
            b[SW + 1 + j] = 0.25 * vmax[j];
            for k in 0..=j {
                b[SW + 1 + MAX_FEATURES + tri(j, k)] = 0.25 * vmax[j] * vmax[k];
            }
        }
        b[1 + d] = 1.0;
        b[SW] = 0.25;
        b
    }

    /// The raw sums of one pass at `pt` (see [`SUMS`]; F only `WITH_F`),
    /// each term at most `bound` in magnitude; returns the sums and the
    /// largest magnitude of each sum's terms. `None` when a bound or z is not
    /// finite.
    #[allow(clippy::needless_range_loop)] // index form mirrors the matrix algebra
    fn pass<const D: usize, const WITH_F: bool>(
        &self,
        pt: &Point,
        bound: &[f64; SUMS],
    ) -> Option<([f64; SUMS], [f64; SUMS])> {
        if !z_bound(self, pt).is_finite() {
            return None; // every z, and so every term, is finite otherwise
        }
        // The sums in use: F (with WITH_F), the D + 1 gradient entries, Σw,
        // Σw·v and the lower triangle of Σw·v·vᵀ.
        let mut used = [false; SUMS];
        used[0] = WITH_F;
        for j in 0..=D {
            used[1 + j] = true;
        }
        used[SW] = true;
        for j in 0..D {
            used[SW + 1 + j] = true;
            for k in 0..=j {
                used[SW + 1 + MAX_FEATURES + tri(j, k)] = true;
            }
        }
        // (A margin for the rounding of the products that form the terms.)
        let mut grid = [Grid::for_bound(1.0)?; SUMS];
        for s in 0..SUMS {
            if used[s] {
                grid[s] = Grid::for_bound(bound[s] * (1.0 + 1e-9))?;
            }
        }
        let mut total = [Total::default(); SUMS];
        let mut seen = [0.0f64; SUMS];
        let (w, c, inv) = (pt.w, pt.centre, self.inv_scale);
        // Rows go through in blocks: the features and z, then the
        // exponentials (library calls), then the terms, then the sums, each
        // a loop the compiler can keep in registers or vectorise.
        let mut zb = [0.0f64; BLOCK];
        let mut eb = [0.0f64; BLOCK];
        let mut vb = [[0.0f64; BLOCK]; MAX_FEATURES];
        let mut terms = [[0.0f64; BLOCK]; SUMS];
        let mut start = 0;
        while start < self.n {
            let end = (start + CHUNK).min(self.n);
            let mut lanes = [Lane::default(); SUMS];
            let mut bs = start;
            while bs < end {
                let be = (bs + BLOCK).min(end);
                let m = be - bs;
                let tb = &self.t[bs..be];
                zb[..m].fill(w[D]);
                for j in 0..D {
                    let xs = &self.cols[j][bs..be];
                    for i in 0..m {
                        vb[j][i] = (xs[i] - c[j]) * inv[j];
                        zb[i] += w[j] * vb[j][i];
                    }
                }
                for i in 0..m {
                    eb[i] = (-zb[i].abs()).exp();
                }
                if WITH_F {
                    for i in 0..m {
                        // softplus(z) − t·z as a sum of two non-negative parts.
                        let (z, ti) = (zb[i], tb[i]);
                        terms[0][i] =
                            eb[i].ln_1p() + if z >= 0.0 { (1.0 - ti) * z } else { -ti * z };
                    }
                }
                for i in 0..m {
                    // p and q = 1 − p, each without cancellation; then
                    // r = p − t = (1 − t)·p − t·q and p(1 − p) = e / (1 + e)².
                    let (p, q, wt) = sigmoid_pair(zb[i], eb[i]);
                    let ti = tb[i];
                    let r = (1.0 - ti) * p - ti * q;
                    terms[1 + D][i] = r;
                    terms[SW][i] = wt;
                    for j in 0..D {
                        let v = vb[j][i];
                        terms[1 + j][i] = r * v;
                        terms[SW + 1 + j][i] = wt * v;
                        for k in 0..=j {
                            terms[SW + 1 + MAX_FEATURES + tri(j, k)][i] = wt * v * vb[k][i];
                        }
                    }
                }
                // F and the gradient to the last bits; the Hessian sums
                // (from Σw on), which only steer the steps, to about 2^-42.
                for s in 0..SUMS {
                    if used[s] {
                        let ts = &terms[s][..m];
                        seen[s] = seen[s].max(block_max(ts));
                        if s < SW {
                            lanes[s].add_slice(ts, &grid[s]);
                        } else {
                            lanes[s].add_slice_coarse(ts, &grid[s]);
                        }
                    }
                }
                bs = be;
            }
            for s in 0..SUMS {
                if used[s] {
                    total[s].flush(&mut lanes[s], &grid[s]);
                }
            }
            start = end;
        }
        let mut sums = [0.0; SUMS];
        for s in 0..SUMS {
            sums[s] = if used[s] {
                total[s].value(&grid[s])
            } else {
                0.0
            };
        }
        if !WITH_F {
            sums[0] = f64::NAN;
        }
        Some((sums, seen))
    }

    fn pass_dyn<const WITH_F: bool>(
        &self,
        pt: &Point,
        bound: &[f64; SUMS],
    ) -> Option<([f64; SUMS], [f64; SUMS])> {
        match self.d {
            0 => self.pass::<0, WITH_F>(pt, bound),
            1 => self.pass::<1, WITH_F>(pt, bound),
            2 => self.pass::<2, WITH_F>(pt, bound),
            _ => self.pass::<3, WITH_F>(pt, bound),
        }
    }

    /// Σ w·(v − ū)(v − ū)ᵀ at `pt` (packed lower triangle), each term at
    /// most `bound` in magnitude, to the last bits; with the largest
    /// magnitude of each sum's terms. `None` when a bound or z is not finite.
    #[allow(clippy::needless_range_loop)] // index form mirrors the matrix algebra
    fn centred<const D: usize>(
        &self,
        pt: &Point,
        ubar: &[f64; MAX_FEATURES],
        bound: &[f64; TRI],
    ) -> Option<([f64; TRI], [f64; TRI])> {
        if !z_bound(self, pt).is_finite() {
            return None;
        }
        let mut grid = [Grid::for_bound(1.0)?; TRI];
        for a in 0..D {
            for b in 0..=a {
                grid[tri(a, b)] = Grid::for_bound(bound[tri(a, b)] * (1.0 + 1e-9))?;
            }
        }
        let mut total = [Total::default(); TRI];
        let mut seen = [0.0f64; TRI];
        let (w, c, inv) = (pt.w, pt.centre, self.inv_scale);
        let mut start = 0;
        while start < self.n {
            let end = (start + CHUNK).min(self.n);
            let mut lanes = [Lane::default(); TRI];
            for i in start..end {
                let mut v = [0.0; MAX_FEATURES];
                let mut z = w[D];
                for j in 0..D {
                    v[j] = (self.cols[j][i] - c[j]) * inv[j];
                    z += w[j] * v[j];
                }
                let e = (-z.abs()).exp();
                let ri = 1.0 / (1.0 + e);
                let wt = e * ri * ri;
                for a in 0..D {
                    for b in 0..=a {
                        let term = wt * (v[a] - ubar[a]) * (v[b] - ubar[b]);
                        seen[tri(a, b)] = seen[tri(a, b)].max(term.abs());
                        lanes[tri(a, b)].add(term, &grid[tri(a, b)]);
                    }
                }
            }
            for a in 0..D {
                for b in 0..=a {
                    total[tri(a, b)].flush(&mut lanes[tri(a, b)], &grid[tri(a, b)]);
                }
            }
            start = end;
        }
        let mut out = [0.0; TRI];
        for a in 0..D {
            for b in 0..=a {
                out[tri(a, b)] = total[tri(a, b)].value(&grid[tri(a, b)]);
            }
        }
        Some((out, seen))
    }

    /// [`Data::centred`] with bounds from the largest weight and the largest
    /// |v − ū|, then, when those are far off, from the terms themselves.
    #[allow(clippy::needless_range_loop)] // index form mirrors the matrix algebra
    fn centred_hessian(
        &self,
        pt: &Point,
        ubar: &[f64; MAX_FEATURES],
        wmax: f64,
    ) -> Option<[f64; TRI]> {
        let vmax = self.vmax(&pt.centre);
        let mut bound = [0.0; TRI];
        for a in 0..self.d {
            for b in 0..=a {
                bound[tri(a, b)] = wmax * (vmax[a] + ubar[a].abs()) * (vmax[b] + ubar[b].abs());
            }
        }
        let run = |bound: &[f64; TRI]| match self.d {
            0 => self.centred::<0>(pt, ubar, bound),
            1 => self.centred::<1>(pt, ubar, bound),
            2 => self.centred::<2>(pt, ubar, bound),
            _ => self.centred::<3>(pt, ubar, bound),
        };
        let (h, seen) = run(&bound)?;
        match retighten(&bound, &seen) {
            None => Some(h),
            Some(b) => run(&b.try_into().ok()?).map(|r| r.0),
        }
    }
}

/// The fitter's state between passes: the data and the largest terms of
/// each sum in the last pass, which set the bounds of the next one.
struct Fitter<'a> {
    data: Data<'a>,
    hint: [f64; SUMS],
}

/// The largest |z| at a point (bounds the objective's terms).
fn z_bound(data: &Data, pt: &Point) -> f64 {
    let vmax = data.vmax(&pt.centre);
    let slopes: f64 = pt.w[..data.d]
        .iter()
        .zip(&vmax)
        .map(|(w, v)| w.abs() * v)
        .sum();
    pt.w[data.d].abs() + slopes
}

impl<'a> Fitter<'a> {
    /// One evaluation at `pt`, with the objective when `with_f`. Each sum's
    /// terms are bounded by 2^10 times its largest term in the previous pass,
    /// at most by the bound that holds for any data (`Data::prior_bounds`); a
    /// pass with a term above its bound, or with all of a sum's terms more
    /// than 2^20 below it (which would cost precision), is repeated with the
    /// bounds its own largest terms give. When the Hessian about ū loses more
    /// than four digits to cancellation in the one-pass form, a second pass
    /// sums Σw·(v − ū)(v − ū)ᵀ directly.
    #[allow(clippy::needless_range_loop)] // index form mirrors the matrix algebra
    fn evaluate(&mut self, pt: Point, with_f: bool) -> (Point, Eval) {
        let d = self.data.d;
        let nan_eval = Eval {
            f: f64::NAN,
            g: [f64::NAN; P],
            h: [[f64::NAN; P]; P],
            ubar: [0.0; MAX_FEATURES],
        };
        let prior = self.data.prior_bounds(&pt);
        let mut bound = prior;
        for s in 0..SUMS {
            let h = self.hint[s];
            if h.is_finite() && h > 0.0 {
                bound[s] = (h * 1024.0).min(prior[s]);
            }
        }
        if !with_f {
            bound[0] = 0.0;
        }
        let run = |bound: &[f64; SUMS]| {
            if with_f {
                self.data.pass_dyn::<true>(&pt, bound)
            } else {
                self.data.pass_dyn::<false>(&pt, bound)
            }
        };
        let Some((mut sums, mut seen)) = run(&bound) else {
            return (pt, nan_eval);
        };
        if let Some(tight) = retighten(&bound, &seen) {
            let tight: [f64; SUMS] = tight.try_into().expect("one bound per sum");
            let Some(again) = run(&tight) else {
                return (pt, nan_eval);
            };
            (sums, seen) = again;
        }
        for s in 0..SUMS {
            if s > 0 || with_f {
                self.hint[s] = seen[s];
            }
        }
        let sw = sums[SW];
        let mut ev = Eval {
            f: sums[0],
            g: [0.0; P],
            h: [[0.0; P]; P],
            ubar: [0.0; MAX_FEATURES],
        };
        ev.g[..=d].copy_from_slice(&sums[1..=d + 1]);
        if sw > 0.0 {
            for j in 0..d {
                ev.ubar[j] = sums[SW + 1 + j] / sw;
            }
        }
        let mut cancelled = false;
        for a in 0..d {
            for b in 0..=a {
                let raw = sums[SW + 1 + MAX_FEATURES + tri(a, b)];
                ev.h[a][b] = raw - ev.ubar[a] * sums[SW + 1 + b];
                // (A NaN also counts as lost.)
                let kept = ev.h[a][a] > 1e-4 * raw;
                if a == b && raw > 0.0 && !kept {
                    cancelled = true;
                }
            }
        }
        ev.h[d][d] = sw;
        if cancelled {
            if let Some(hc) = self.data.centred_hessian(&pt, &ev.ubar, seen[SW]) {
                for a in 0..d {
                    for b in 0..=a {
                        ev.h[a][b] = hc[tri(a, b)];
                    }
                }
            }
        }
        (pt, ev)
    }
}

/// The Newton step at an evaluation with damping μ (Levenberg–Marquardt):
/// the direction in the working parameters, −g·δ and the largest |δ_j|.
/// `None` when the damped Hessian is not numerically positive definite.
#[allow(clippy::needless_range_loop)] // index form mirrors the matrix algebra
fn newton_step(ev: &Eval, d: usize, mu: f64) -> Option<([f64; P], f64, f64)> {
    let k = d + 1;
    // The gradient in the parameters centred at ū (slopes, c + β·ū).
    let mut gc = ev.g;
    for a in 0..d {
        gc[a] = ev.g[a] - ev.ubar[a] * ev.g[d];
    }
    let mut hs = ev.h;
    for a in 0..k {
        hs[a][a] += (mu + 1e-12) * ev.h[a][a].max(f64::MIN_POSITIVE);
        for b in 0..a {
            hs[b][a] = hs[a][b];
        }
    }
    let sc = cholesky_solve(&hs, &gc, k)?;
    // Back to the working parameters: δc = δc̃ − δβ·ū.
    let mut dir = [0.0; P];
    dir[d] = -sc[d];
    for a in 0..d {
        dir[a] = -sc[a];
        dir[d] += sc[a] * ev.ubar[a];
    }
    let mut gd = 0.0;
    let mut max_dir: f64 = 0.0;
    for a in 0..k {
        gd += ev.g[a] * dir[a];
        max_dir = max_dir.max(dir[a].abs());
    }
    if !(gd.is_finite() && max_dir.is_finite()) {
        return None;
    }
    Some((dir, -gd, max_dir))
}

/// Row hash for the warm-start subsample: a function of the row's values
/// (multiply–xorshift mixing of their bits).
fn row_hash(data: &Data, i: usize) -> u64 {
    let mut h = data.t[i].to_bits().rotate_left(32);
    for j in 0..data.d {
        h = (h ^ data.cols[j][i].to_bits()).wrapping_mul(0x9e37_79b9_7f4a_7c15);
        h ^= h >> 29;
    }
    h = h.wrapping_mul(0xbf58_476d_1ce4_e5b9);
    h ^ (h >> 32)
}

/// Rows from which a fit starts at the optimum of a subsample.
const WARM_START_ROWS: usize = 1 << 15;

/// Starting parameters (slopes, intercept) on the raw feature scale from the
/// fit of a subsample of about one row in 16, chosen by a hash of each row's
/// values (so the same rows whatever their order; the subsample of a
/// subsample uses the next four bits of the hash); `None` for small samples
/// or when the subsample cannot be fitted.
fn warm_start(data: &Data, level: u32) -> Option<LogisticModel> {
    if data.n < WARM_START_ROWS || level >= 15 {
        return None;
    }
    let keep: Vec<usize> = (0..data.n)
        .filter(|&i| (row_hash(data, i) >> (4 * level)) & 15 == 0)
        .collect();
    if keep.len() < 1024 {
        return None;
    }
    let cols: Vec<Vec<f64>> = (0..data.d)
        .map(|j| keep.iter().map(|&i| data.cols[j][i]).collect())
        .collect();
    let t: Vec<f64> = keep.iter().map(|&i| data.t[i]).collect();
    let refs: Vec<&[f64]> = cols.iter().map(|c| c.as_slice()).collect();
    let m = fit_at_level(&refs, &t, level + 1, Phase::Auto).ok()?;
    // A subsample fit that needed many iterations (a saturated or nearly
    // separable sample) is no reliable start.
    (m.iterations <= 50).then_some(m)
}

/// Fit σ(coef·x + c) to targets `t` by maximum likelihood. `cols` holds the
/// feature columns (each of length `t.len()`, at most [`MAX_FEATURES`] of them;
/// none gives the intercept-only model). Fails when a column is constant or the
/// columns are collinear with the intercept on the sample.
pub fn fit_logistic(cols: &[&[f64]], t: &[f64]) -> Result<LogisticModel, FitError> {
    fit_at_level(cols, t, 0, Phase::Auto)
}

/// Where a fit starts its iteration.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Phase {
    /// The fast phase, then the safeguarded one if a plain step fails.
    Auto,
    /// The safeguarded phase from the start (tests compare the two).
    #[cfg_attr(not(test), allow(dead_code))]
    Safeguarded,
}

/// [`fit_logistic`] of a sample that is the subsample of level `level`
/// (0: the caller's rows).
#[allow(clippy::needless_range_loop)] // index form mirrors the matrix algebra
fn fit_at_level(
    cols: &[&[f64]],
    t: &[f64],
    level: u32,
    phase: Phase,
) -> Result<LogisticModel, FitError> {
    let d = cols.len();
    let n = t.len();
    if d > MAX_FEATURES {
        return Err(FitError::Failed(format!(
            "logistic fit: {d} features, at most {MAX_FEATURES} supported"
        )));
    }
    if n == 0 {
        return Err(FitError::Empty);
    }
    if cols.iter().any(|c| c.len() != n) {
        return Err(FitError::Failed(
            "logistic fit: feature and target lengths differ".into(),
        ));
    }
    let nf = n as f64;
    // Standardise each column. Every sum is order-free (`exact_sum`), so the
    // fitted model is a function of the set of rows alone, bit for bit,
    // whatever order they came in.
    let mut data = Data {
        cols: [&[]; MAX_FEATURES],
        t,
        d,
        n,
        mean: [0.0; MAX_FEATURES],
        scale: [1.0; MAX_FEATURES],
        inv_scale: [1.0; MAX_FEATURES],
        min: [0.0; MAX_FEATURES],
        max: [0.0; MAX_FEATURES],
        t_sum: 0.0,
    };
    for (j, c) in cols.iter().enumerate() {
        data.cols[j] = c;
        let (lo, hi) = c
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
                (lo.min(x), hi.max(x))
            });
        // (min and max ignore NaN; infinities show in them.)
        let finite = lo.is_finite() && hi.is_finite() && !c.iter().any(|x| x.is_nan());
        let m = if finite {
            exact_sum::sum_bounded(c.iter().copied(), lo.abs().max(hi.abs())) / nf
        } else {
            f64::NAN
        };
        let v = if m.is_finite() {
            let dev = (lo - m).abs().max((hi - m).abs());
            exact_sum::sum_bounded(
                c.iter().map(|x| (x - m) * (x - m)),
                dev * dev * (1.0 + 1e-9),
            ) / nf
        } else {
            f64::NAN
        };
        if !m.is_finite() || !v.is_finite() {
            return Err(FitError::Failed(
                "logistic fit: non-finite feature values".into(),
            ));
        }
        if v <= 0.0 || lo == hi {
            return Err(FitError::Failed(format!(
                "logistic fit: {} on the calibration sample (all {n} rows have the value {})",
                if d == 1 {
                    "the feature is constant".to_string()
                } else {
                    format!("feature {} is constant", j + 1)
                },
                c[0]
            )));
        }
        data.mean[j] = m;
        data.scale[j] = v.sqrt();
        data.inv_scale[j] = 1.0 / data.scale[j];
        data.min[j] = lo;
        data.max[j] = hi;
    }
    let t_bound = t.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    data.t_sum = if t.iter().all(|x| x.is_finite()) {
        exact_sum::sum_bounded(t.iter().copied(), t_bound)
    } else {
        f64::NAN
    };
    let k = d + 1; // parameters: d slopes then the intercept
    if d > 1 {
        // Unweighted correlation matrix of the standardised features: a lost
        // pivot means the features are collinear with each other and the
        // intercept on this sample.
        let vmax = data.vmax(&data.mean);
        let mut c = [[0.0; P]; P];
        for a in 0..d {
            for b in 0..=a {
                let (ca, cb) = (data.cols[a], data.cols[b]);
                let (ma, mb) = (data.mean[a], data.mean[b]);
                let (ia, ib) = (data.inv_scale[a], data.inv_scale[b]);
                c[a][b] = exact_sum::sum_bounded(
                    ca.iter()
                        .zip(cb)
                        .map(|(&x, &y)| (x - ma) * ia * ((y - mb) * ib)),
                    vmax[a] * vmax[b] * (1.0 + 1e-9),
                ) / nf;
                c[b][a] = c[a][b];
            }
        }
        if cholesky_solve(&c, &[0.0; P], d).is_none() {
            return Err(FitError::Failed(format!(
                "logistic fit: the {d} features are collinear on the calibration sample of {n} rows"
            )));
        }
    }
    let tbar = (data.t_sum / nf).clamp(1e-12, 1.0 - 1e-12);
    let c0 = (tbar / (1.0 - tbar)).ln();
    // Start: the fit of a subsample when there is one (rows by hash, so the
    // start is order-free too), else slopes 0 and the logit of the mean target.
    let mut pt = Point {
        w: [0.0; P],
        centre: data.mean,
    };
    pt.w[d] = c0;
    if let Some(m) = warm_start(&data, level) {
        let mut wd = m.intercept;
        for j in 0..d {
            pt.w[j] = m.coef[j] * data.scale[j];
            wd += m.coef[j] * data.mean[j];
        }
        pt.w[d] = wd;
        if !pt.w.iter().all(|v| v.is_finite()) {
            pt.w = [0.0; P];
            pt.w[d] = c0;
        }
    }
    let mut fitter = Fitter {
        data,
        hint: [f64::NAN; SUMS],
    };
    // Fast phase: plain Newton steps, accepted while the Newton decrement
    // −g·δ (a norm of the gradient, zero only at the optimum) falls by at
    // least half per step. The objective itself, whose logarithms cost as
    // much as the rest of a pass, is not needed for that.
    let (first, mut ev) = fitter.evaluate(pt, false);
    pt = first;
    let mut iterations = 0;
    let mut prev_dec = f64::INFINITY;
    let mut done = false;
    let mut it = 0;
    while it < 500 && phase == Phase::Auto {
        it += 1;
        iterations = it;
        let Some((dir, dec, max_dir)) = newton_step(&ev, d, 0.0) else {
            break;
        };
        // Converged: a short step (below 1e-3 in every standardised
        // coordinate) and the decrement down to 1e-20·Σw, or the quadratic
        // convergence seen over the last two steps (λ_next ≈ K·λ², so
        // λ²_next ≈ λ⁶/λ⁴_prev) puts the decrement after this step below
        // 1e-30·Σw. Σw ≤ F (each row's p(1 − p) is at most its term of F), so
        // the scale shrinks with F on saturated samples, where a decrement
        // relative to a fixed scale would stop far from the optimum.
        let fs = ev.h[d][d];
        let predicted = if prev_dec.is_finite() {
            dec * (dec / prev_dec) * (dec / prev_dec)
        } else {
            f64::INFINITY
        };
        if max_dir <= 1e-3 && (dec <= 1e-20 * fs || (dec <= 1e-6 * fs && predicted <= 1e-30 * fs)) {
            for a in 0..k {
                pt.w[a] += dir[a];
            }
            done = true;
            break;
        }
        let mut cand = pt;
        for a in 0..k {
            cand.w[a] += dir[a];
        }
        // Evaluate the candidate about the current weighted mean.
        for j in 0..d {
            cand.centre[j] += ev.ubar[j] * fitter.data.scale[j];
            cand.w[d] += cand.w[j] * ev.ubar[j];
        }
        let (next, next_ev) = fitter.evaluate(cand, false);
        ev = next_ev;
        // Accepted: a step no longer than one standard deviation per unit of
        // slope (longer ones may be far too short, which the safeguarded
        // phase handles) that halves the decrement, and after three steps
        // cuts it tenfold (slower, linear progress means the quadratic model
        // misjudges the objective).
        let ok = max_dir <= 1.0
            && newton_step(&ev, d, 0.0)
                .is_some_and(|(_, nd, _)| nd <= 0.5 * dec && (it <= 3 || nd <= 0.1 * dec));
        if ok {
            pt = next;
            prev_dec = dec;
            continue;
        }
        // The plain step did not work: continue from the last accepted
        // point with the safeguarded steps.
        break;
    }
    if !done {
        let (p, e) = fitter.evaluate(pt, true);
        pt = p;
        ev = e;
        let (w, extra) = careful(&mut fitter, pt, ev, 500 - it.min(500));
        pt = w;
        iterations += extra;
    }
    let data = &fitter.data;
    let mut coef = Vec::with_capacity(d);
    let mut intercept = pt.w[d];
    for j in 0..d {
        coef.push(pt.w[j] / data.scale[j]);
        intercept -= pt.w[j] * pt.centre[j] / data.scale[j];
    }
    if !(intercept.is_finite() && coef.iter().all(|c| c.is_finite())) {
        return Err(FitError::Failed(
            "logistic fit did not converge to finite values".into(),
        ));
    }
    Ok(LogisticModel {
        coef,
        intercept,
        iterations,
    })
}

/// The safeguarded iteration (damping, intercept profiling, extrapolation;
/// see the module documentation) from `pt` with its evaluation `ev` (which
/// includes F); returns the final point and the iterations used.
#[allow(clippy::needless_range_loop)] // index form mirrors the matrix algebra
fn careful(fitter: &mut Fitter, mut pt: Point, mut ev: Eval, max_iter: usize) -> (Point, usize) {
    let d = fitter.data.d;
    let k = d + 1;
    // The intercept re-optimised for fixed slopes (Newton in one dimension,
    // halving a step that does not decrease F): F along the Newton direction
    // is then measured on the floor of the valley that the slopes and the
    // intercept form together, so the extrapolation below follows the valley
    // instead of zig-zagging across it.
    let profile = |fitter: &mut Fitter, p: Point| -> (Point, Eval) {
        let (mut p, mut e) = fitter.evaluate(p, true);
        for _ in 0..10 {
            // Stop when the one-dimensional Newton decrement g²/h is down to
            // the rounding of F.
            if !(e.f.is_finite() && e.h[d][d] > 0.0)
                || e.g[d] * e.g[d] / e.h[d][d] <= 1e-15 * e.f.abs().max(1.0)
            {
                break;
            }
            let mut step = -e.g[d] / e.h[d][d];
            let mut moved = false;
            for _ in 0..8 {
                let mut np = p;
                np.w[d] += step;
                let (np, ne) = fitter.evaluate(np, true);
                if ne.f < e.f {
                    (p, e) = (np, ne);
                    moved = true;
                    break;
                }
                step /= 2.0;
            }
            if !moved {
                break;
            }
        }
        (p, e)
    };
    let mut iterations = 0;
    let mut prev_dec = f64::INFINITY;
    let mut mu: f64;
    'outer: for it in 0..max_iter {
        iterations = it + 1;
        // Every iteration tries the plain Newton step first.
        mu = 0.0;
        let f = ev.f;
        loop {
            let Some((dir, dec, max_dir)) = newton_step(&ev, d, mu) else {
                mu = if mu == 0.0 { 1e-3 } else { mu * 10.0 };
                if mu > 1e10 {
                    break 'outer;
                }
                continue;
            };
            let gd = -dec;
            let fs = f.abs().max(1.0);
            let at = |mult: f64| {
                let mut np = pt;
                for a in 0..k {
                    np.w[a] += mult * dir[a];
                }
                np
            };
            // Converged (undamped steps only): the Newton step is negligible,
            // or the Newton decrement −g·δ (invariant under affine changes of
            // the features) is down to 1e-20·F, or it is below 1e-12·F and
            // has stopped shrinking quadratically because the gradient is
            // down to the rounding noise of its sums. A quadratic model can
            // badly misjudge how far the optimum lies (saturated samples), so
            // a small decrement only counts when a doubled step does not
            // lower F beyond rounding either.
            if mu == 0.0
                && (max_dir < 1e-10
                    || dec <= 1e-20 * fs
                    || (dec <= 1e-12 * fs && dec > 0.25 * prev_dec))
                && profile(fitter, at(2.0)).1.f >= f - 1e-12 * fs
            {
                pt = at(1.0);
                break 'outer;
            }
            let (np, ne) = fitter.evaluate(at(1.0), true);
            // Armijo decrease; or, for the undamped step, no change beyond the
            // rounding of the objective (near the optimum the objective is
            // flat to machine precision while Newton still gains digits in β).
            let flat = mu == 0.0 && (ne.f - f).abs() <= 1e-12 * fs;
            if ne.f <= f + 1e-4 * gd || flat {
                let mut best = (np, ne);
                let mut expanded = false;
                // Only long steps (more than one standard deviation of a
                // feature per unit of slope) can be far too short; ordinary
                // fits take the plain step.
                if max_dir > 1.0 {
                    let (pp, pe) = profile(fitter, np);
                    if pe.f < best.1.f {
                        best = (pp, pe);
                    }
                    // Extrapolate along the step while F keeps falling beyond
                    // rounding (steps 2, 4, 8, … times δ): when the optimum
                    // lies far away on a nearly linear stretch of F (a
                    // saturated sample whose slope is 1e5–1e10 on the raw
                    // score), the quadratic model's steps are far too short.
                    // Near the optimum the doubled step already rises.
                    let mut mult = 2.0;
                    while mult <= 1e18 {
                        let (xp, xe) = profile(fitter, at(mult));
                        // (A NaN objective also stops the extrapolation.)
                        let lower = xe.f < best.1.f - 1e-12 * best.1.f.abs().max(1.0);
                        if !lower {
                            break;
                        }
                        best = (xp, xe);
                        expanded = true;
                        mult *= 2.0;
                    }
                }
                prev_dec = if mu == 0.0 && !expanded {
                    dec
                } else {
                    f64::INFINITY
                };
                (pt, ev) = best;
                // Move the centre to the weighted mean when it has moved
                // (z is unchanged: the intercept absorbs the shift).
                if (0..d).any(|j| (pt.w[j] * ev.ubar[j]).abs() > 1.0) {
                    for j in 0..d {
                        pt.centre[j] += ev.ubar[j] * fitter.data.scale[j];
                        pt.w[d] += pt.w[j] * ev.ubar[j];
                    }
                    (pt, ev) = fitter.evaluate(pt, true);
                }
                break;
            }
            mu = if mu == 0.0 { 1e-3 } else { mu * 10.0 };
            if mu > 1e10 {
                break 'outer; // no further decrease at machine precision
            }
        }
    }
    (pt, iterations)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::calibrate::platt::fit_logistic_1d;
    use crate::calibrate::sigmoid;

    /// At the maximum-likelihood optimum the score equations hold:
    /// Σ (p_i − t_i) = 0 and Σ (p_i − t_i) x_ij = 0 for every feature (first-order
    /// optimality of a convex objective; common practice).
    #[test]
    fn score_equations_hold_at_optimum() {
        let x1 = [0.1, 0.4, 0.35, 0.8, 0.6, 0.2, 0.9, 0.55, 0.3];
        let x2 = [1.0, -0.5, 0.2, 0.3, -1.2, 0.8, 0.1, 0.0, 0.4];
        let t = [0.0, 0.0, 1.0, 1.0, 0.0, 0.0, 1.0, 1.0, 0.0];
        let m = fit_logistic(&[&x1, &x2], &t).unwrap();
        let (mut g0, mut g1, mut g2) = (0.0, 0.0, 0.0);
        for i in 0..t.len() {
            let r = sigmoid(m.coef[0] * x1[i] + m.coef[1] * x2[i] + m.intercept) - t[i];
            g0 += r;
            g1 += r * x1[i];
            g2 += r * x2[i];
        }
        assert!(
            g0.abs() < 1e-10 && g1.abs() < 1e-10 && g2.abs() < 1e-10,
            "{g0} {g1} {g2}"
        );
        // The one-feature wrapper used by Platt scaling reports the same model.
        let one = fit_logistic(&[&x1], &t).unwrap();
        let p = fit_logistic_1d(&x1, &t).unwrap();
        assert_eq!((one.coef[0], one.intercept), (p.a, p.b));
    }

    /// Rows are exchangeable in the likelihood, so any row order must give the
    /// same model; the order-free sums make it the same to the bit
    /// (every cyclic shift and the reversal of a 40-row sample, two features).
    #[test]
    fn row_order_does_not_change_a_single_bit() {
        use crate::split::splitmix64;
        let unit = |h: u64| ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let n = 40u64;
        let x1: Vec<f64> = (0..n).map(|i| unit(splitmix64(3 * i))).collect();
        let x2: Vec<f64> = (0..n)
            .map(|i| (unit(splitmix64(3 * i + 1)) * 7.0).ln())
            .collect();
        let t: Vec<f64> = (0..n)
            .map(|i| (unit(splitmix64(3 * i + 2)) < x1[i as usize]) as u8 as f64)
            .collect();
        let base = fit_logistic(&[&x1, &x2], &t).unwrap();
        let permuted = |o: &[usize]| {
            let a: Vec<f64> = o.iter().map(|&i| x1[i]).collect();
            let b: Vec<f64> = o.iter().map(|&i| x2[i]).collect();
            let u: Vec<f64> = o.iter().map(|&i| t[i]).collect();
            fit_logistic(&[&a, &b], &u).unwrap()
        };
        let n = n as usize;
        let rev: Vec<usize> = (0..n).rev().collect();
        assert_eq!(permuted(&rev), base);
        for shift in 1..n {
            let o: Vec<usize> = (0..n).map(|i| (i + shift) % n).collect();
            assert_eq!(permuted(&o), base, "shift {shift}");
        }
    }

    /// A sample large enough for the subsample start (40,000 rows, two
    /// features): the score equations hold to rounding at the fitted model
    /// (checked with plain compensated sums here, independent of the fitter's
    /// sums), and reversed or rotated rows give the same bits.
    #[test]
    fn large_sample_fits_to_the_optimum_in_any_order() {
        use crate::split::splitmix64;
        let unit = |h: u64| ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let n = 40_000usize;
        assert!(n >= WARM_START_ROWS);
        let x1: Vec<f64> = (0..n as u64)
            .map(|i| unit(splitmix64(3 * i)).ln())
            .collect();
        let x2: Vec<f64> = (0..n as u64)
            .map(|i| -(-unit(splitmix64(3 * i))).ln_1p())
            .collect();
        let t: Vec<f64> = (0..n as u64)
            .map(|i| {
                let z = 0.8 * x1[i as usize] + 1.3 * x2[i as usize] + 0.2;
                (unit(splitmix64(3 * i + 2)) < sigmoid(z)) as u8 as f64
            })
            .collect();
        let m = fit_logistic(&[&x1, &x2], &t).unwrap();
        let (mut g, mut size) = ([0.0f64; 3], [0.0f64; 3]);
        for i in 0..n {
            let r = sigmoid(m.coef[0] * x1[i] + m.coef[1] * x2[i] + m.intercept) - t[i];
            for (j, x) in [x1[i], x2[i], 1.0].into_iter().enumerate() {
                g[j] += r * x;
                size[j] += (r * x).abs();
            }
        }
        for j in 0..3 {
            assert!(
                g[j].abs() <= 1e-10 * size[j],
                "equation {j}: {} of {}",
                g[j],
                size[j]
            );
        }
        assert!(
            (m.coef[0] - 0.8).abs() < 0.1 && (m.coef[1] - 1.3).abs() < 0.1,
            "{m:?}"
        );
        let permuted = |o: &dyn Fn(usize) -> usize| {
            let a: Vec<f64> = (0..n).map(|i| x1[o(i)]).collect();
            let b: Vec<f64> = (0..n).map(|i| x2[o(i)]).collect();
            let u: Vec<f64> = (0..n).map(|i| t[o(i)]).collect();
            fit_logistic(&[&a, &b], &u).unwrap()
        };
        assert_eq!(permuted(&|i| n - 1 - i), m);
        assert_eq!(permuted(&|i| (i + 12_345) % n), m);
        // Odd rows first, then even ones.
        assert_eq!(
            permuted(&|i| if i < n / 2 {
                2 * i + 1
            } else {
                2 * (i - n / 2)
            }),
            m
        );
    }

    /// The fast phase and the safeguarded phase reach the same optimum (the
    /// safeguarded one forced from the start): the score equations hold to
    /// rounding for both, and the coefficients agree to 1e-9.
    #[test]
    fn both_phases_reach_the_same_optimum() {
        use crate::split::splitmix64;
        let unit = |h: u64| ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        let n = 2000usize;
        let x: Vec<f64> = (0..n as u64)
            .map(|i| 4.0 * unit(splitmix64(2 * i)) - 2.0)
            .collect();
        let t: Vec<f64> = (0..n as u64)
            .map(|i| {
                (unit(splitmix64(2 * i + 1)) < sigmoid(1.5 * x[i as usize] - 0.3)) as u8 as f64
            })
            .collect();
        let fast = fit_at_level(&[&x], &t, 0, Phase::Auto).unwrap();
        let safe = fit_at_level(&[&x], &t, 0, Phase::Safeguarded).unwrap();
        for m in [&fast, &safe] {
            let (mut g0, mut g1, mut s0, mut s1) = (0.0, 0.0, 0.0, 0.0);
            for i in 0..n {
                let r = sigmoid(m.coef[0] * x[i] + m.intercept) - t[i];
                g0 += r;
                g1 += r * x[i];
                s0 += r.abs();
                s1 += (r * x[i]).abs();
            }
            assert!(
                g0.abs() <= 1e-10 * s0 && g1.abs() <= 1e-10 * s1,
                "{m:?}: {g0} {g1}"
            );
        }
        assert!((fast.coef[0] - safe.coef[0]).abs() <= 1e-9 * fast.coef[0].abs());
        assert!((fast.intercept - safe.intercept).abs() <= 1e-9 * fast.intercept.abs().max(1.0));
    }

    /// Intercept-only: the optimum is the logit of the mean target (score
    /// equation Σ (p − t) = 0; common practice).
    #[test]
    fn intercept_only_is_logit_of_mean() {
        let t = [1.0, 0.0, 0.0, 1.0, 0.0];
        let m = fit_logistic(&[], &t).unwrap();
        assert!((m.intercept - (0.4f64 / 0.6).ln()).abs() < 1e-12);
    }

    #[test]
    fn constant_feature_is_an_error_not_a_panic() {
        let x = [1.0; 4];
        let t = [0.0, 1.0, 0.0, 1.0];
        assert!(matches!(fit_logistic(&[&x], &t), Err(FitError::Failed(_))));
    }

    #[test]
    fn collinear_features_are_an_error() {
        let x = [0.1, 0.5, 0.2, 0.9, 0.7];
        let x2: Vec<f64> = x.iter().map(|v| 2.0 * v + 1.0).collect();
        let t = [0.0, 1.0, 0.0, 1.0, 0.0];
        assert!(fit_logistic(&[&x, &x2], &t).is_err());
    }
}
