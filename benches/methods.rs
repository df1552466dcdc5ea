//! Timings of the spline, isotonic and Venn–Abers fits.
//!
//! Run: `cargo bench --bench methods` (release profile). Prints the median of
//! repeated runs for each case next to its target.

use std::hint::black_box;
use std::time::{Duration, Instant};

use plumbline::calibrate::isotonic::Isotonic;
use plumbline::calibrate::spline::{Criterion, Spline, DEFAULT_INTERVALS};
use plumbline::calibrate::venn_abers::VennAbers;
use plumbline::calibrate::{sigmoid, Calibrator, ScoreKind};
use plumbline::split::rng;
use rand_chacha::rand_core::Rng;
use rand_chacha::ChaCha8Rng;

fn uniform(r: &mut ChaCha8Rng) -> f64 {
    (r.next_u64() >> 11) as f64 / (1u64 << 53) as f64
}

fn normal(r: &mut ChaCha8Rng) -> f64 {
    let u1 = ((r.next_u64() >> 11) as f64 + 1.0) / (1u64 << 53) as f64;
    let u2 = uniform(r);
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

/// Probability scores of a miscalibrated model and labels drawn from a bent map.
fn sample(n: usize, seed: u64) -> (Vec<f64>, Vec<bool>) {
    let mut r = rng(seed);
    let mut s = Vec::with_capacity(n);
    let mut y = Vec::with_capacity(n);
    for _ in 0..n {
        let z = 1.5 * normal(&mut r);
        s.push(sigmoid(z));
        y.push(uniform(&mut r) < sigmoid(0.7 * z + 0.5 * (1.5 * z).tanh() - 0.2));
    }
    (s, y)
}

fn median(mut v: Vec<Duration>) -> Duration {
    v.sort();
    v[v.len() / 2]
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}

fn main() {
    println!("plumbline method timings (release build, median of repeats)");

    // 1. Spline with automatic smoothing (AIC over the λ grid) on 3,000 points.
    let (s, y) = sample(3_000, 1);
    let spline = Spline {
        score_kind: ScoreKind::Probability,
        intervals: DEFAULT_INTERVALS,
        lambda: None,
        criterion: Criterion::Aic,
    };
    let mut times = Vec::new();
    for _ in 0..31 {
        let t = Instant::now();
        let f = spline.fit(black_box(&s), black_box(&y)).unwrap();
        times.push(t.elapsed());
        black_box(f);
    }
    println!(
        "spline fit, 3,000 points, {} intervals, AIC over 21 lambdas: median {:.2} ms over {} fits (target <= 5 ms)",
        DEFAULT_INTERVALS,
        ms(median(times.clone())),
        times.len()
    );

    // 2. Isotonic regression on 1,000,000 points vs sorting the same pairs.
    let (s, y) = sample(1_000_000, 2);
    let mut fit_t = Vec::new();
    let mut sort_t = Vec::new();
    for _ in 0..7 {
        let mut pairs: Vec<(f64, bool)> = s.iter().copied().zip(y.iter().copied()).collect();
        let t = Instant::now();
        pairs.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        sort_t.push(t.elapsed());
        black_box(&pairs);
        let t = Instant::now();
        let f = Isotonic {}.fit(black_box(&s), black_box(&y)).unwrap();
        fit_t.push(t.elapsed());
        black_box(f);
    }
    let (fit_m, sort_m) = (median(fit_t), median(sort_t));
    println!(
        "isotonic fit, 1,000,000 points: median {:.1} ms; sorting the 1,000,000 (score, label) pairs: median {:.1} ms; ratio {:.2} (target <= 2)",
        ms(fit_m),
        ms(sort_m),
        fit_m.as_secs_f64() / sort_m.as_secs_f64()
    );

    // 3. Venn–Abers: 10,000 calibration points, 100,000 test points.
    let (cs, cy) = sample(10_000, 3);
    let (ts, _) = sample(100_000, 4);
    let mut out = vec![0.0; ts.len()];
    let mut times = Vec::new();
    for _ in 0..11 {
        let t = Instant::now();
        let f = VennAbers {}.fit(black_box(&cs), black_box(&cy)).unwrap();
        f.map.predict(black_box(&ts), &mut out);
        times.push(t.elapsed());
        black_box(&out);
    }
    println!(
        "venn-abers fit (10,000 calibration) + predict (100,000 test): median {:.2} ms over {} runs (target <= 100 ms)",
        ms(median(times.clone())),
        times.len()
    );
}
