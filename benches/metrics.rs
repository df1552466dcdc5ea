//! Time of each metric on one simulated test set, printed as a table.
//!
//! Run with `cargo bench --bench metrics`. Each metric is evaluated repeatedly
//! for about 0.3 s on test sets of 1,000 and 10,000 rows (predictions
//! σ(1.5·logit q + 0.2) of true probabilities q ~ U(0, 1), labels
//! y ~ Bernoulli(q)), and the mean time per evaluation is printed, with the
//! metric's value on the larger set.

use plumbline::metrics::{MetricId, MetricSettings};
use plumbline::split::{below, rng};
use std::hint::black_box;
use std::time::{Duration, Instant};

fn test_set(n: usize, seed: u64) -> (Vec<f64>, Vec<bool>) {
    let mut r = rng(seed);
    let mut unif = || (below(&mut r, 1 << 53) as f64 + 0.5) / (1u64 << 53) as f64;
    let mut p = Vec::with_capacity(n);
    let mut y = Vec::with_capacity(n);
    for _ in 0..n {
        let q = unif();
        let z = 1.5 * (q / (1.0 - q)).ln() + 0.2;
        p.push(1.0 / (1.0 + (-z).exp()));
        y.push(unif() < q);
    }
    (p, y)
}

fn main() {
    let settings = MetricSettings::default();
    let sizes = [1_000usize, 10_000];
    let sets: Vec<_> = sizes.iter().map(|&n| test_set(n, 7 + n as u64)).collect();
    println!(
        "{:<24} {:>14} {:>14} {:>14}",
        "metric", "n=1000 (µs)", "n=10000 (µs)", "value n=10000"
    );
    let mut total = [0.0f64; 2];
    for &m in MetricId::ALL {
        let mut cells = Vec::new();
        for (k, (p, y)) in sets.iter().enumerate() {
            let start = Instant::now();
            let mut reps = 0u32;
            while reps < 5 || start.elapsed() < Duration::from_millis(300) {
                black_box(m.compute(black_box(p), black_box(y), &settings));
                reps += 1;
            }
            let us = start.elapsed().as_secs_f64() * 1e6 / reps as f64;
            total[k] += us;
            cells.push(us);
        }
        let value = m.compute(&sets[1].0, &sets[1].1, &settings);
        println!(
            "{:<24} {:>14.1} {:>14.1} {:>14.6}",
            m.as_str(),
            cells[0],
            cells[1],
            value
        );
    }
    println!(
        "{:<24} {:>14.1} {:>14.1}",
        "all metrics", total[0], total[1]
    );
}
