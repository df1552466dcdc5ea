//! Prints the empirical coverage of every paired interval on the synthetic
//! population of `plumbline::stats::coverage` (isotonic vs Platt).
//!
//! `cargo bench --bench coverage` runs the default settings; options:
//! `--replicates N`, `--truth-samples K`, `--repeats R` (default 30), `--seed S`,
//! `--pseudo-count C` to compare bounded isotonic regression instead, and
//! `--without-extreme-switch` to keep the second-order reservoir term throughout.

use std::time::Instant;

use plumbline::stats::coverage::{coverage_study, CoverageConfig};

fn main() {
    let mut cfg = CoverageConfig::default();
    let args: Vec<String> = std::env::args().collect();
    let mut i = 1;
    while i < args.len() {
        if args[i] == "--without-extreme-switch" {
            // Keep the second-order reservoir term even with extreme predictions.
            cfg.detect_extreme = false;
            i += 1;
            continue;
        }
        if args[i] == "--pseudo-count" {
            // Compare bounded isotonic regression (pseudo-rows at the base rate) instead.
            if let Some(m) = args.get(i + 1).and_then(|v| v.parse::<f64>().ok()) {
                cfg.method = plumbline::calibrate::MethodSpec::Isotonic { pseudo_count: m };
            }
            i += 2;
            continue;
        }
        let val = args.get(i + 1).and_then(|v| v.parse::<u64>().ok());
        match (args[i].as_str(), val) {
            ("--replicates", Some(v)) => cfg.replicates = v as usize,
            ("--truth-samples", Some(v)) => cfg.truth_samples = v as usize,
            ("--repeats", Some(v)) => cfg.repeats = v as usize,
            ("--seed", Some(v)) => cfg.seed = v,
            _ => {
                i += 1;
                continue;
            }
        }
        i += 2;
    }
    let start = Instant::now();
    match coverage_study(&cfg) {
        Ok(t) => {
            println!(
                "reservoir {} test_rows {} repeats {} replicates {} truth_samples {} confidence {} extreme_switch {}",
                cfg.reservoir,
                cfg.test_rows,
                cfg.repeats,
                cfg.replicates,
                cfg.truth_samples,
                cfg.confidence,
                cfg.detect_extreme
            );
            print!("{}", t.render());
            println!("failed fits: {}", t.failed_fits);
            println!("elapsed: {:.1} s", start.elapsed().as_secs_f64());
        }
        Err(e) => {
            eprintln!("coverage study failed: {e}");
            std::process::exit(1);
        }
    }
}
