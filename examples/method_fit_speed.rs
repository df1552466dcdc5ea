//! Fit and predict throughput of every calibration method.
//!
//! Run: `cargo run --release --example method_fit_speed` (any optimised profile
//! works, e.g. `--profile test`). Prints, per method and calibration size, the
//! mean time per fit and per 10 000 predictions on synthetic calibrated scores
//! (s ~ U(0, 1), y ~ Bernoulli(s)), seeded so runs are comparable.

use plumbline::calibrate::{MethodSpec, ScoreKind};
use plumbline::split::splitmix64;
use std::time::Instant;

fn unit(h: u64) -> f64 {
    ((h >> 11) as f64 + 0.5) / (1u64 << 53) as f64
}

#[derive(serde::Deserialize)]
struct W {
    m: MethodSpec,
}

fn main() {
    let specs = [
        "{ kind = \"platt\" }",
        "{ kind = \"isotonic\" }",
        "{ kind = \"isotonic\", pseudo_count = 1.0 }",
        "{ kind = \"beta\" }",
        "{ kind = \"beta\", shape = \"tied\" }",
        "{ kind = \"binning\" }",
        "{ kind = \"temperature\" }",
        "{ kind = \"centered-isotonic\" }",
    ];
    let test: Vec<f64> = (0..10_000u64).map(|i| unit(splitmix64(!i))).collect();
    let mut out = vec![0.0; test.len()];
    println!(
        "{:<46} {:>7} {:>12} {:>18}",
        "method", "n", "fit (µs)", "predict 10k (µs)"
    );
    for spec in specs {
        let m = toml::from_str::<W>(&format!("m = {spec}")).unwrap().m;
        let cal = m.build(ScoreKind::Probability).unwrap();
        for n in [100usize, 1_000, 10_000] {
            let s: Vec<f64> = (0..n as u64).map(|i| unit(splitmix64(2 * i))).collect();
            let y: Vec<bool> = (0..n as u64)
                .map(|i| unit(splitmix64(2 * i + 1)) < s[i as usize])
                .collect();
            let reps = (200_000 / n).max(5);
            let t0 = Instant::now();
            let mut fitted = None;
            for _ in 0..reps {
                fitted = Some(cal.fit(&s, &y).expect("fit"));
            }
            let fit_us = t0.elapsed().as_secs_f64() * 1e6 / reps as f64;
            let f = fitted.unwrap();
            let t1 = Instant::now();
            for _ in 0..20 {
                f.map.predict(&test, &mut out);
            }
            let pred_us = t1.elapsed().as_secs_f64() * 1e6 / 20.0;
            println!("{spec:<46} {n:>7} {fit_us:>12.1} {pred_us:>18.1}");
        }
    }
}
