//! Integrated calibration index (ICI).
//!
//! Math (Austin & Steyerberg 2019, Statistics in Medicine 38, "The Integrated
//! Calibration Index (ICI) and related metrics for quantifying the calibration
//! of logistic regression models"): with ĝ a smooth calibration curve, an
//! estimate of E[y | p], fitted on the test set,
//!
//!   ICI = (1/n) Σ_i |ĝ(p_i) − p_i|.
//!
//! Smoother: the paper uses loess; here ĝ is Cleveland's (1979, JASA 74,
//! "Robust locally weighted regression and smoothing scatterplots") lowess of
//! the 0/1 labels on p: local linear fits with tricube weights over the
//! ⌊span·n⌋ nearest predictions (at least 2), and NO robustness iterations
//! (their bisquare reweighting would discount the minority class of a 0/1
//! outcome). The neighbourhood, weights and skipping rule follow the lowess of
//! statsmodels (0.14/0.15, `frac = span`, `it = 0`, `delta = ici_delta ×
//! range of p`): a regression is fitted at the first prediction, then at the
//! last prediction within `delta` of the previous fit (ties share a fit), and
//! the curve is linearly interpolated between fitted points. The curve is not
//! clipped to [0, 1].
//!
//! Ties: rows tied with the farthest neighbour have tricube weight 0 whether
//! or not they are inside the window, so the order of tied rows never matters,
//! except in two degenerate neighbourhoods: when every neighbour shares the
//! prediction being fitted (radius 0, i.e. more than ⌊span·n⌋ rows tie), or
//! when fewer than 2 neighbours have positive weight. In both the fit is the
//! mean label of all rows tied with the prediction being fitted. (statsmodels
//! returns the row's own label there; the two agree when the prediction is not
//! tied.)
//!
//! Cost: sorting plus about (1/ici_delta + distinct ties) local fits of
//! ⌊span·n⌋ rows each; with the default `ici_delta = 0.01` and n = 10,000 that
//! is roughly 100 fits.

/// Lowess fit of `y` on sorted `x` (statsmodels' algorithm with `it = 0`).
pub fn lowess_sorted(x: &[f64], y: &[f64], frac: f64, delta: f64) -> Vec<f64> {
    let n = x.len();
    let mut fit = vec![0.0; n];
    if n == 0 {
        return fit;
    }
    let k = ((frac * n as f64 + 1e-10) as usize).clamp(2.min(n), n);
    let (mut left, mut right) = (0usize, k);
    let mut i = 0usize;
    let mut last_fit: isize = -1;
    loop {
        let xv = x[i];
        // Slide the window of k points until xv is at (or left of) its centre.
        while right < n && xv > (x[left] + x[right]) / 2.0 {
            left += 1;
            right += 1;
        }
        let radius = (xv - x[left]).max(x[right - 1] - xv);
        fit[i] = if radius > 0.0 {
            local_linear(&x[left..right], &y[left..right], xv, radius)
                .unwrap_or_else(|| tie_mean(x, y, i))
        } else {
            tie_mean(x, y, i)
        };
        if last_fit < i as isize - 1 {
            // Interpolate the skipped points between last_fit and i.
            let l = last_fit as usize;
            let denom = x[i] - x[l];
            for j in l + 1..i {
                let a = (x[j] - x[l]) / denom;
                fit[j] = a * fit[i] + (1.0 - a) * fit[l];
            }
        }
        // Next point to fit.
        let mut lf = i;
        let cut = x[lf] + delta;
        // kk ends at the first point beyond delta, or at n − 1.
        let mut kk = lf;
        for j in lf + 1..n {
            kk = j;
            if x[j] > cut {
                break;
            }
            if x[j] == x[lf] {
                fit[j] = fit[lf];
                lf = j;
            }
        }
        last_fit = lf as isize;
        if lf >= n - 1 {
            break;
        }
        i = (kk.saturating_sub(1)).max(lf + 1);
    }
    fit
}

/// Mean of `y` over the rows whose `x` equals `x[i]` (sorted `x`).
fn tie_mean(x: &[f64], y: &[f64], i: usize) -> f64 {
    let v = x[i];
    let mut a = i;
    while a > 0 && x[a - 1] == v {
        a -= 1;
    }
    let mut b = i + 1;
    while b < x.len() && x[b] == v {
        b += 1;
    }
    y[a..b].iter().sum::<f64>() / (b - a) as f64
}

/// One weighted local-linear fit at `xv` with tricube weights of radius
/// `radius` > 0; None when fewer than 2 weights are positive. One pass over
/// the window: with normalised weights w, x̄ = Σwx, ȳ = Σwy and
/// s_xx = max(Σw(x − x̄)², 1e-12) (the floor statsmodels uses), the fit is
/// ȳ + (xv − x̄)·Σw(x − x̄)y / s_xx, computed on x − xv for accuracy.
fn local_linear(x: &[f64], y: &[f64], xv: f64, radius: f64) -> Option<f64> {
    let (mut sw, mut su, mut suu, mut sy, mut suy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    let mut nonzero = 0usize;
    let inv = 1.0 / radius;
    for (&xj, &yj) in x.iter().zip(y) {
        let uj = xj - xv;
        let d = uj.abs() * inv;
        let t = 1.0 - d * d * d;
        let w = t * t * t;
        nonzero += (w > 1e-12) as usize;
        sw += w;
        su += w * uj;
        suu += w * uj * uj;
        sy += w * yj;
        suy += w * uj * yj;
    }
    if nonzero < 2 {
        return None;
    }
    let mu = su / sw;
    let ybar = sy / sw;
    let sxx = (suu / sw - mu * mu).max(1e-12);
    let sxy = suy / sw - mu * ybar;
    Some(ybar - mu * sxy / sxx)
}

/// ICI with a lowess of span `span` ∈ (0, 1] and skip distance `delta_frac` ×
/// (range of p). NaN on an empty test set.
pub fn ici(p: &[f64], y: &[bool], span: f64, delta_frac: f64) -> f64 {
    let n = p.len().min(y.len());
    if n == 0 {
        return f64::NAN;
    }
    let mut rows: Vec<(f64, bool)> = p[..n].iter().copied().zip(y[..n].iter().copied()).collect();
    rows.sort_unstable_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let xs: Vec<f64> = rows.iter().map(|r| r.0).collect();
    let ys: Vec<f64> = rows.iter().map(|r| if r.1 { 1.0 } else { 0.0 }).collect();
    let range = xs[n - 1] - xs[0];
    let fit = lowess_sorted(&xs, &ys, span, delta_frac * range);
    fit.iter().zip(&xs).map(|(g, x)| (g - x).abs()).sum::<f64>() / n as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Derived by hand: when more than ⌊span·n⌋ rows share one prediction the
    /// curve there is their mean label: ten rows at 0.3 with four positives
    /// give ĝ = 0.4 and ICI = 0.1.
    #[test]
    fn heavy_ties_use_the_tie_mean() {
        let p = [0.3; 10];
        let y = [
            true, false, false, true, false, true, false, false, true, false,
        ];
        assert!((ici(&p, &y, 0.75, 0.01) - 0.1).abs() < 1e-15);
    }

    /// Derived by hand: a local linear fit reproduces a straight line exactly,
    /// so lowess of y = 2x + 1 returns the line (with or without skipping).
    #[test]
    fn lowess_reproduces_a_line() {
        let x: Vec<f64> = (0..50).map(|i| i as f64 / 49.0).collect();
        let y: Vec<f64> = x.iter().map(|v| 2.0 * v + 1.0).collect();
        for delta in [0.0, 0.1] {
            let f = lowess_sorted(&x, &y, 0.3, delta);
            for (fi, yi) in f.iter().zip(&y) {
                assert!((fi - yi).abs() < 1e-10, "{fi} vs {yi}");
            }
        }
    }
}
