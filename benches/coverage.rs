//! Prints the empirical coverage of every paired interval on the synthetic
//! population of `plumbline::stats::coverage` (isotonic vs Platt by default).
//!
//! `cargo bench --bench coverage` runs the default settings; options (after `--`):
//! `--replicates N`, `--truth-samples K`, `--repeats R` (default 30), `--seed S`,
//! `--pseudo-count C` to compare bounded isotonic regression instead,
//! `--method SPEC` and `--reference SPEC` to compare other methods (SPEC is a
//! method as a suite writes it, without the id: `'kind = "spline"'`,
//! `'kind = "binning", bins = 20'`), and `--without-extreme-switch` to keep the
//! second-order reservoir term throughout.

use std::time::Instant;

use plumbline::calibrate::MethodSpec;
use plumbline::stats::coverage::{coverage_study, CoverageConfig};

fn usage(msg: &str) -> ! {
    eprintln!("coverage: {msg}");
    eprintln!(
        "options: --replicates N --truth-samples K --repeats R --seed S --pseudo-count C \
         --method SPEC --reference SPEC --without-extreme-switch"
    );
    std::process::exit(2);
}

fn method(opt: &str, spec: Option<&String>) -> MethodSpec {
    let Some(spec) = spec else {
        usage(&format!("{opt} needs a method, e.g. 'kind = \"beta\"'"))
    };
    let spec = match toml::from_str::<MethodSpec>(spec) {
        Ok(m) => m,
        Err(e) => usage(&format!("{opt} {spec:?}: {e}")),
    };
    if let Err(e) = spec.validate(plumbline::calibrate::ScoreKind::Probability) {
        usage(&format!("{opt} {spec:?}: {e}"));
    }
    spec
}

fn main() {
    let mut cfg = CoverageConfig::default();
    // `cargo bench` passes `--bench` to every bench binary; skip it.
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    let mut i = 0;
    while i < args.len() {
        let opt = args[i].as_str();
        let val = args.get(i + 1);
        let num = |v: Option<&String>| -> u64 {
            v.and_then(|v| v.parse::<u64>().ok())
                .unwrap_or_else(|| usage(&format!("{opt} needs a whole number, got {v:?}")))
        };
        match opt {
            "--without-extreme-switch" => {
                // Keep the second-order reservoir term even with extreme predictions.
                cfg.detect_extreme = false;
                i += 1;
                continue;
            }
            "--pseudo-count" => {
                // Compare bounded isotonic regression (pseudo-rows at the base rate).
                let m = val.and_then(|v| v.parse::<f64>().ok()).unwrap_or_else(|| {
                    usage(&format!("--pseudo-count needs a number, got {val:?}"))
                });
                cfg.method = MethodSpec::Isotonic { pseudo_count: m };
            }
            "--method" => cfg.method = method(opt, val),
            "--reference" => cfg.reference = method(opt, val),
            "--replicates" => cfg.replicates = num(val) as usize,
            "--truth-samples" => cfg.truth_samples = num(val) as usize,
            "--repeats" => cfg.repeats = num(val) as usize,
            "--seed" => cfg.seed = num(val),
            other => usage(&format!("unknown option {other:?}")),
        }
        i += 2;
    }
    let start = Instant::now();
    match coverage_study(&cfg) {
        Ok(t) => {
            println!(
                "method {} reference {}",
                serde_json::to_string(&cfg.method).unwrap_or_default(),
                serde_json::to_string(&cfg.reference).unwrap_or_default()
            );
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
