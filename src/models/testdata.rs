//! Synthetic datasets for the model tests (generated, not read from disk).

use crate::data::{Dataset, FeatureKind};
use crate::split::{below, rng};
use rand_chacha::rand_core::Rng;

fn uniform(r: &mut rand_chacha::ChaCha8Rng) -> f64 {
    ((r.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
}

/// Two Gaussian classes: `p − 1` numeric features whose means differ by class
/// (feature j shifted by 1/(j + 1)), and a last categorical column with 3 levels
/// whose distribution depends on the class. About 40% positives.
pub fn two_gaussians(n: usize, p: usize, seed: u64) -> Dataset {
    assert!(p >= 2);
    let mut r = rng(seed);
    let mut columns = vec![Vec::with_capacity(n); p];
    let mut labels = Vec::with_capacity(n);
    for _ in 0..n {
        let y = uniform(&mut r) < 0.4;
        labels.push(y);
        for (j, col) in columns.iter_mut().enumerate().take(p - 1) {
            // Box–Muller.
            let z = (-2.0 * uniform(&mut r).ln()).sqrt()
                * (2.0 * std::f64::consts::PI * uniform(&mut r)).cos();
            let shift = if y { 1.0 / (j as f64 + 1.0) } else { 0.0 };
            col.push(z * (1.0 + 0.3 * j as f64) + shift);
        }
        let level = if y && below(&mut r, 2) == 0 {
            2
        } else {
            below(&mut r, 3)
        };
        columns[p - 1].push(level as f64);
    }
    let mut kinds = vec![FeatureKind::Numeric; p];
    kinds[p - 1] = FeatureKind::Categorical { levels: 3 };
    Dataset {
        id: "two-gaussians".into(),
        names: (0..p).map(|j| format!("x{j}")).collect(),
        columns,
        kinds,
        labels,
    }
}
