//! Strictly proper scoring rules: log loss and the Brier score.
//!
//! Log loss (Good 1952, "Rational decisions", JRSS B 14): −(1/n) Σ [y ln p +
//! (1 − y) ln(1 − p)], natural log, with p clipped to [c, 1 − c] so that a
//! confident miss costs −ln c rather than infinity. The clip c is a suite
//! setting; how many test predictions it touched is recorded per unit.
//!
//! Brier score (Brier 1950, Monthly Weather Review 78): (1/n) Σ (p − y)².

/// One row's log loss with clip `c`.
pub fn log_loss_term(p: f64, y: bool, c: f64) -> f64 {
    let q = p.clamp(c, 1.0 - c);
    if y {
        -q.ln()
    } else {
        -(1.0 - q).ln()
    }
}

pub fn log_loss(p: &[f64], y: &[bool], c: f64) -> f64 {
    let s: f64 = p
        .iter()
        .zip(y)
        .map(|(&pi, &yi)| log_loss_term(pi, yi, c))
        .sum();
    s / p.len() as f64
}

/// How many predictions the clip `c` changes.
pub fn clipped_count(p: &[f64], c: f64) -> usize {
    p.iter().filter(|&&pi| pi < c || pi > 1.0 - c).count()
}

pub fn brier_term(p: f64, y: bool) -> f64 {
    let t = if y { 1.0 } else { 0.0 };
    (p - t) * (p - t)
}

pub fn brier(p: &[f64], y: &[bool]) -> f64 {
    let s: f64 = p.iter().zip(y).map(|(&pi, &yi)| brier_term(pi, yi)).sum();
    s / p.len() as f64
}
