//! The coverage study of `docs/statistics.md`: every method of the default
//! suite against Platt scaling and against the identity, on four synthetic
//! populations, at calibration sizes from 50 to half the reservoir, for log
//! loss and the Brier score, every interval kind. Each replicate runs through
//! the run engine and the report's interval code (see `coverage/study.rs`).
//!
//! `cargo bench --bench coverage -- --out docs/coverage` runs the published
//! study and writes `table.csv` there (one row per cell); options:
//! `--replicates N` (default 1000), `--truth-samples K` (default 5000),
//! `--populations a,b` (names: calibrated, over-confident,
//! rare-under-confident, rare-over-confident, two-step), `--methods a,b` (ids of the default
//! suite's methods, compared with platt and identity), `--sizes 50,100`,
//! `--seed S`, `--draws FILE` to also write every replicate's intervals as CSV,
//! `--raw STEM` to write every replicate's raw interval inputs (d_r, test-batch
//! means, calibration positives) to STEM.csv (index) and STEM.bin (f64 values)
//! for studying other interval rules offline, `--reservoir M`, `--test-rows m`
//! and `--repeats R` to change the protocol. The output starts with the
//! command, the commit and the machine it was made on.

#[path = "coverage/study.rs"]
mod study;

use std::time::Instant;

use study::{Population, StudyConfig};

fn usage(msg: &str) -> ! {
    eprintln!("coverage: {msg}");
    eprintln!(
        "options: --out DIR --replicates N --truth-samples K --populations a,b \
         --methods a,b --sizes n,m --seed S --draws FILE --raw STEM --reservoir M \\
         --test-rows m --repeats R"
    );
    std::process::exit(2);
}

fn main() {
    let mut cfg = StudyConfig::published();
    let mut out = None;
    let mut draws = None;
    let mut raw: Option<std::path::PathBuf> = None;
    // `cargo bench` passes `--bench` to every bench binary; skip it.
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    let mut i = 0;
    while i < args.len() {
        let opt = args[i].as_str();
        let Some(val) = args.get(i + 1) else {
            usage(&format!("{opt} needs a value"))
        };
        let num = |v: &str| -> u64 {
            v.parse::<u64>()
                .unwrap_or_else(|_| usage(&format!("{opt} needs a whole number, got {v:?}")))
        };
        match opt {
            "--out" => out = Some(std::path::PathBuf::from(val)),
            "--draws" => draws = Some(std::path::PathBuf::from(val)),
            "--raw" => {
                raw = Some(std::path::PathBuf::from(val));
                cfg.keep_raw = true;
            }
            "--reservoir" => cfg.reservoir = num(val) as usize,
            "--test-rows" => cfg.test_rows = num(val) as usize,
            "--repeats" => cfg.repeats = num(val) as usize,
            "--replicates" => cfg.replicates = num(val) as usize,
            "--truth-samples" => cfg.truth.samples = num(val) as usize,
            "--seed" => {
                cfg.seed = num(val);
                cfg.truth.seed = cfg.seed;
            }
            "--sizes" => cfg.sizes = val.split(',').map(|v| num(v) as usize).collect(),
            "--populations" => {
                let all = Population::all();
                cfg.populations = val
                    .split(',')
                    .map(|name| {
                        all.iter()
                            .find(|p| p.name == name)
                            .cloned()
                            .unwrap_or_else(|| usage(&format!("unknown population {name:?}")))
                    })
                    .collect();
            }
            "--methods" => {
                let keep: Vec<&str> = val.split(',').collect();
                cfg.pairs.retain(|(a, _)| keep.contains(&a.as_str()));
            }
            other => usage(&format!("unknown option {other:?}")),
        }
        i += 2;
    }
    // What made this output: the command line, the commit and the machine,
    // taken before the study runs. "With uncommitted changes" looks only at
    // the code that decides the numbers (src/, benches/, Cargo files).
    let run = |cmd: &str, args: &[&str]| {
        std::process::Command::new(cmd)
            .args(args)
            .output()
            .ok()
            .filter(|o| o.status.success())
            .map(|o| String::from_utf8_lossy(&o.stdout).trim().to_string())
            .unwrap_or_else(|| "unknown".into())
    };
    let dirty = !run(
        "git",
        &[
            "status",
            "--porcelain",
            "--untracked-files=no",
            "--",
            "src",
            "benches",
            "Cargo.toml",
            "Cargo.lock",
        ],
    )
    .is_empty();
    let stamp =
        format!(
        "command: cargo bench --bench coverage -- {}\ncommit: {}{}\nmachine: {} logical cores, {}",
        std::env::args()
            .skip(1)
            .filter(|a| a != "--bench")
            .collect::<Vec<_>>()
            .join(" "),
        run("git", &["rev-parse", "HEAD"]),
        if dirty { " (with uncommitted changes)" } else { "" },
        std::thread::available_parallelism().map_or(0, |n| n.get()),
        run("uname", &["-srm"])
    );
    let start = Instant::now();
    let result = study::run_study(&cfg, &|name| {
        eprintln!(
            "coverage: population {name} done after {:.0} s",
            start.elapsed().as_secs_f64()
        )
    });
    let output = match result {
        Ok(o) => o,
        Err(e) => {
            eprintln!("coverage study failed: {e}");
            std::process::exit(1);
        }
    };
    let table = output.table_csv();
    let default = plumbline::stats::paired::IntervalKind::default();
    let rows = output.rows();
    let mine: Vec<_> = rows.iter().filter(|r| r.kind == default).collect();
    let outside: Vec<_> = mine
        .iter()
        .filter(|r| !(0.93..=0.97).contains(&r.coverage()))
        .collect();
    println!("{stamp}");
    println!(
        "replicates {} truth_samples {} repeats {} reservoir {} test_rows {} confidence {}",
        cfg.replicates,
        cfg.truth.samples,
        cfg.repeats,
        cfg.reservoir,
        cfg.test_rows,
        cfg.confidence
    );
    println!(
        "units {} fallback fits in units {} fallback fits in truth samples {}",
        output.units, output.unit_fallbacks, output.truth_fallbacks
    );
    println!(
        "default interval `{}`: {} of {} cells outside 93–97%",
        default.as_str(),
        outside.len(),
        mine.len()
    );
    for r in &outside {
        println!(
            "  {} {} − {} {} n = {}: {:.1}% (low {}, high {})",
            r.population,
            r.method,
            r.reference,
            r.metric.as_str(),
            r.size,
            100.0 * r.coverage(),
            r.missed_low,
            r.missed_high
        );
    }
    println!("elapsed: {:.1} s", start.elapsed().as_secs_f64());
    match out {
        Some(dir) => {
            if let Err(e) = std::fs::create_dir_all(&dir)
                .and_then(|_| std::fs::write(dir.join("table.csv"), &table))
            {
                eprintln!("coverage: cannot write {}: {e}", dir.display());
                std::process::exit(1);
            }
        }
        None => print!("{table}"),
    }
    if let Some(stem) = raw {
        let (index, bin) = output.raw_files();
        if let Err(e) = std::fs::write(stem.with_extension("csv"), index)
            .and_then(|_| std::fs::write(stem.with_extension("bin"), bin))
        {
            eprintln!("coverage: cannot write {}: {e}", stem.display());
            std::process::exit(1);
        }
    }
    if let Some(path) = draws {
        if let Err(e) = std::fs::write(&path, output.draws_csv()) {
            eprintln!("coverage: cannot write {}: {e}", path.display());
            std::process::exit(1);
        }
    }
}
