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

/// CPU time of this thread in seconds (user + system, from
/// /proc/thread-self/stat, in clock ticks of 1/100 s); `None` off Linux. On a
/// shared machine the wall-clock median includes time spent waiting for a core,
/// so both are printed.
fn thread_cpu() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/thread-self/stat").ok()?;
    let fields: Vec<&str> = s.rsplit(')').next()?.split_whitespace().collect();
    let utime: f64 = fields.get(11)?.parse().ok()?;
    let stime: f64 = fields.get(12)?.parse().ok()?;
    Some((utime + stime) / 100.0)
}

/// Mean CPU milliseconds per repeat between two readings, as text.
fn cpu_ms(start: Option<f64>, repeats: usize) -> String {
    match (start, thread_cpu()) {
        (Some(a), Some(b)) => format!("{:.2} ms", (b - a) * 1e3 / repeats as f64),
        _ => "n/a".to_string(),
    }
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
    let c0 = thread_cpu();
    for _ in 0..201 {
        let t = Instant::now();
        let f = spline.fit(black_box(&s), black_box(&y)).unwrap();
        times.push(t.elapsed());
        black_box(f);
    }
    println!(
        "spline fit, 3,000 points, {} intervals, AIC over 21 lambdas: wall median {:.2} ms, CPU mean {} over {} fits (target <= 5 ms)",
        DEFAULT_INTERVALS,
        ms(median(times.clone())),
        cpu_ms(c0, times.len()),
        times.len()
    );

    // 1b. The same fit at the calibration sizes suites use.
    for n in [50usize, 200, 1_000] {
        let (s, y) = sample(n, 5);
        let fits = 2_000_000 / n.max(200);
        let c0 = thread_cpu();
        let t = Instant::now();
        for _ in 0..fits {
            black_box(spline.fit(black_box(&s), black_box(&y)).unwrap());
        }
        let wall = t.elapsed();
        println!(
            "spline fit, {n} points, AIC over 21 lambdas: wall mean {:.3} ms, CPU mean {} over {fits} fits",
            ms(wall) / fits as f64,
            cpu_ms(c0, fits),
        );
    }

    // 2. Isotonic regression on 1,000,000 points vs sorting the same pairs.
    let (s, y) = sample(1_000_000, 2);
    let mut fit_t = Vec::new();
    let mut sort_t = Vec::new();
    let (mut fit_cpu, mut sort_cpu) = (0.0, 0.0);
    let reps = 9;
    for _ in 0..reps {
        let mut pairs: Vec<(f64, bool)> = s.iter().copied().zip(y.iter().copied()).collect();
        let c = thread_cpu();
        let t = Instant::now();
        pairs.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        sort_t.push(t.elapsed());
        sort_cpu += thread_cpu().zip(c).map_or(f64::NAN, |(b, a)| b - a);
        black_box(&pairs);
        let c = thread_cpu();
        let t = Instant::now();
        let f = Isotonic { pseudo_count: 0.0 }
            .fit(black_box(&s), black_box(&y))
            .unwrap();
        fit_t.push(t.elapsed());
        fit_cpu += thread_cpu().zip(c).map_or(f64::NAN, |(b, a)| b - a);
        black_box(f);
    }
    let (fit_m, sort_m) = (median(fit_t), median(sort_t));
    println!(
        "isotonic fit, 1,000,000 points: wall median {:.1} ms, CPU mean {:.1} ms; sorting the same 1,000,000 (score, label) pairs: wall median {:.1} ms, CPU mean {:.1} ms; ratio wall {:.2}, CPU {:.2} (target <= 2)",
        ms(fit_m),
        fit_cpu * 1e3 / reps as f64,
        ms(sort_m),
        sort_cpu * 1e3 / reps as f64,
        fit_m.as_secs_f64() / sort_m.as_secs_f64(),
        fit_cpu / sort_cpu
    );

    // 3. Venn–Abers: 10,000 calibration points, 100,000 test points.
    let (cs, cy) = sample(10_000, 3);
    let (ts, _) = sample(100_000, 4);
    let mut out = vec![0.0; ts.len()];
    let mut times = Vec::new();
    let c0 = thread_cpu();
    for _ in 0..21 {
        let t = Instant::now();
        let f = VennAbers {}.fit(black_box(&cs), black_box(&cy)).unwrap();
        f.map.predict(black_box(&ts), &mut out);
        times.push(t.elapsed());
        black_box(&out);
    }
    println!(
        "venn-abers fit (10,000 calibration) + predict (100,000 test): wall median {:.2} ms, CPU mean {} over {} runs (target <= 100 ms)",
        ms(median(times.clone())),
        cpu_ms(c0, times.len()),
        times.len()
    );
}
