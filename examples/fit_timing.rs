//! Fit times of isotonic, Platt, beta and temperature on one sample from a file.
//!
//! Run: `cargo run --release --example fit_timing -- ROWS_FILE RUNS`, where
//! ROWS_FILE holds n little-endian f64 probability scores followed by n label
//! bytes (0 or 1), n = file size / 9 (`scripts/bench_fits.py` writes it, so
//! that numpy and scikit-learn time the same rows). Prints one line per case:
//! the case name and the median wall-clock milliseconds over RUNS runs. Also
//! timed: the bare comparison sort of (score, label) pairs by `f64::total_cmp`
//! (`pair-sort`), the isotonic fit computed as before the key sort
//! (`isotonic-before`: that pair sort, tie merge, PAV, prediction curve), the
//! isotonic blocks with the comparison and with the radix sort of the keys, and
//! the same two on the first 256 … 16,384 rows (`small-N comparison radix`, in
//! microseconds, medians of 201 runs): where the radix sort starts to pay.

use std::hint::black_box;
use std::time::Instant;

use plumbline::calibrate::isotonic::{fit_blocks_with, pav, StepLinear};
use plumbline::calibrate::score_order::KeySort;
use plumbline::calibrate::{MethodSpec, ScoreKind};

#[derive(serde::Deserialize)]
struct W {
    m: MethodSpec,
}

fn median_ms(runs: usize, mut f: impl FnMut()) -> f64 {
    let mut t: Vec<f64> = (0..runs)
        .map(|_| {
            let t0 = Instant::now();
            f();
            t0.elapsed().as_secs_f64() * 1e3
        })
        .collect();
    t.sort_by(f64::total_cmp);
    t[t.len() / 2]
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if args.len() != 3 {
        eprintln!("usage: fit_timing ROWS_FILE RUNS");
        std::process::exit(2);
    }
    let bytes = match std::fs::read(&args[1]) {
        Ok(b) => b,
        Err(e) => {
            eprintln!("fit_timing: cannot read {}: {e}", args[1]);
            std::process::exit(2);
        }
    };
    let runs: usize = match args[2].parse() {
        Ok(r) if r >= 1 => r,
        _ => {
            eprintln!(
                "fit_timing: RUNS must be a whole number >= 1, got {:?}",
                args[2]
            );
            std::process::exit(2);
        }
    };
    if bytes.len() % 9 != 0 || bytes.is_empty() {
        eprintln!(
            "fit_timing: file size {} is not a multiple of 9 bytes",
            bytes.len()
        );
        std::process::exit(2);
    }
    let n = bytes.len() / 9;
    let s: Vec<f64> = bytes[..8 * n]
        .chunks_exact(8)
        .map(|c| f64::from_le_bytes(c.try_into().unwrap()))
        .collect();
    let y: Vec<bool> = bytes[8 * n..].iter().map(|&b| b != 0).collect();
    println!("rows {n}");

    let t = median_ms(runs, || {
        let mut p: Vec<(f64, bool)> = s.iter().copied().zip(y.iter().copied()).collect();
        p.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        black_box(p);
    });
    println!("pair-sort {t:.3}");
    // The isotonic fit as computed before the key sort: sort the pairs, merge
    // ties, PAV, prediction curve.
    let t = median_ms(runs, || {
        let mut p: Vec<(f64, bool)> = s.iter().copied().zip(y.iter().copied()).collect();
        p.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        let mut pts: Vec<(f64, f64, f64)> = Vec::new();
        for (x, l) in p {
            let v = if l { 1.0 } else { 0.0 };
            match pts.last_mut() {
                Some(last) if last.0 == x => {
                    last.1 += 1.0;
                    last.2 += v;
                }
                _ => pts.push((x, 1.0, v)),
            }
        }
        black_box(StepLinear::from_blocks(&pav(&pts)));
    });
    println!("isotonic-before {t:.3}");
    let t = median_ms(runs, || {
        black_box(fit_blocks_with(&s, &y, KeySort::Comparison));
    });
    println!("isotonic-blocks-comparison {t:.3}");
    let t = median_ms(runs, || {
        black_box(fit_blocks_with(&s, &y, KeySort::Radix));
    });
    println!("isotonic-blocks-radix {t:.3}");
    for k in 8..=14 {
        let m = (1usize << k).min(n);
        let (ss, yy) = (&s[..m], &y[..m]);
        let c = median_ms(201, || {
            black_box(fit_blocks_with(ss, yy, KeySort::Comparison));
        });
        let r = median_ms(201, || {
            black_box(fit_blocks_with(ss, yy, KeySort::Radix));
        });
        println!("small-{m} {:.1} {:.1}", c * 1e3, r * 1e3);
    }
    for (name, spec) in [
        ("isotonic", "{ kind = \"isotonic\" }"),
        ("platt", "{ kind = \"platt\" }"),
        ("beta", "{ kind = \"beta\" }"),
        ("temperature", "{ kind = \"temperature\" }"),
    ] {
        let m = toml::from_str::<W>(&format!("m = {spec}")).unwrap().m;
        let cal = m.build(ScoreKind::Probability).unwrap();
        let t = median_ms(runs, || {
            black_box(cal.fit(&s, &y).expect("fit"));
        });
        println!("{name} {t:.3}");
    }
}
