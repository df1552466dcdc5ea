//! Twonorm: a synthetic two-class problem with a known Bayes rule.
//!
//! Breiman, L. (1996). "Bias, variance, and arcing classifiers". Technical
//! Report 460, Statistics Department, University of California, Berkeley.
//! There are 20 features; the two classes are equally likely and
//!
//! ```text
//!   x | class 1 ~ N( a·1, I₂₀),   x | class 0 ~ N(−a·1, I₂₀),   a = 2/√20.
//! ```
//!
//! The true posterior is therefore logistic in the feature sum,
//! `P(class 1 | x) = σ(2a·Σⱼ xⱼ)`, which makes the set a useful calibration
//! check: a base model that learns the linear rule produces scores whose ideal
//! recalibration is a monotone logistic map.
//!
//! Rows are drawn from one ChaCha8 stream (`split::rng`). Each row first takes
//! its class from the top bit of one 64-bit draw (probability ½ each), then
//! its 20 standard normal deviates by the Box–Muller transform (Box & Muller
//! 1958, "A note on the generation of random normal deviates", Ann. Math.
//! Statist. 29(2)), two deviates per pair of uniforms, and shifts them by ±a.

use rand_chacha::rand_core::Rng;
use rand_chacha::ChaCha8Rng;

use super::{Dataset, FeatureKind};
use crate::split;

/// Number of features in Breiman's definition.
pub const FEATURES: usize = 20;

/// Default row count: 7,400, the size of the widely used DELVE copy of
/// twonorm (from memory); the manifest may ask for another count.
pub const DEFAULT_ROWS: usize = 7_400;

/// The class mean offset `a = 2/√20`.
pub fn offset() -> f64 {
    2.0 / (FEATURES as f64).sqrt()
}

/// Uniform in the open-closed interval (0, 1] from the top 53 bits of a draw.
fn uniform_open0(rng: &mut ChaCha8Rng) -> f64 {
    ((rng.next_u64() >> 11) + 1) as f64 * (1.0 / (1u64 << 53) as f64)
}

/// Standard normal deviates by Box–Muller, buffered in pairs.
struct Normals {
    spare: Option<f64>,
}

impl Normals {
    fn next(&mut self, rng: &mut ChaCha8Rng) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        let u1 = uniform_open0(rng);
        let u2 = uniform_open0(rng);
        let r = (-2.0 * u1.ln()).sqrt();
        let theta = std::f64::consts::TAU * u2;
        self.spare = Some(r * theta.sin());
        r * theta.cos()
    }
}

/// Draw `rows` twonorm rows from `seed`. Feature names are `x1` … `x20`;
/// `labels[i]` is true for class 1 (mean `+a`).
pub fn generate(id: &str, rows: usize, seed: u64) -> Dataset {
    let a = offset();
    let mut rng = split::rng(seed);
    let mut normals = Normals { spare: None };
    let mut columns: Vec<Vec<f64>> = (0..FEATURES).map(|_| Vec::with_capacity(rows)).collect();
    let mut labels = Vec::with_capacity(rows);
    for _ in 0..rows {
        let positive = rng.next_u64() >> 63 == 1;
        let shift = if positive { a } else { -a };
        for column in columns.iter_mut() {
            column.push(shift + normals.next(&mut rng));
        }
        // A row never shares a Box–Muller pair with the next one, so row i
        // depends on the stream alone and not on the feature count's parity.
        normals.spare = None;
        labels.push(positive);
    }
    Dataset {
        id: id.to_string(),
        names: (1..=FEATURES).map(|j| format!("x{j}")).collect(),
        columns,
        kinds: vec![FeatureKind::Numeric; FEATURES],
        labels,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn same_seed_same_rows_other_seed_other_rows() {
        let a = generate("t", 50, 7);
        let b = generate("t", 50, 7);
        let c = generate("t", 50, 8);
        assert_eq!(a.columns, b.columns);
        assert_eq!(a.labels, b.labels);
        assert_ne!(a.columns, c.columns);
    }

    #[test]
    fn shape_and_names() {
        let d = generate("twonorm", 10, 1);
        assert_eq!(d.rows(), 10);
        assert_eq!(d.columns.len(), 20);
        assert!(d.columns.iter().all(|c| c.len() == 10));
        assert_eq!(d.names[0], "x1");
        assert_eq!(d.names[19], "x20");
    }

    #[test]
    fn a_prefix_of_a_longer_draw_is_the_shorter_draw() {
        let short = generate("t", 30, 99);
        let long = generate("t", 60, 99);
        for j in 0..FEATURES {
            assert_eq!(short.columns[j][..], long.columns[j][..30]);
        }
        assert_eq!(short.labels[..], long.labels[..30]);
    }
}
