//! Seeded mutation fuzzing of the two parsers that read user input: the score
//! file reader (`data::scorefile::load`) and the suite parser
//! (`suite::parse`). Stable Rust has no coverage-guided fuzzer, so this driver
//! starts from the shipped suites and score files, applies byte-level and
//! structure-aware mutations, calls the parser inside `catch_unwind`, and
//! counts runs and panics. An input that panics is written to the crash folder
//! (default `target/fuzz-crashes/<target>/`); copy it to
//! `tests/fixtures/fuzz/` so `tests/fuzz_regressions.rs` keeps it.
//!
//! Usage (from the repository root; the run is reproducible for a seed up to
//! the number of runs that fit in the time):
//!
//!     nice -n 19 cargo run --release --example fuzz_parsers -- \
//!         --target scorefile|suite [--seconds N] [--seed S] [--crashes DIR]

use std::io::Read;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::time::Instant;

use plumbline::calibrate::ScoreKind;
use plumbline::data::scorefile::{self, ScoreFileSpec};
use plumbline::split::splitmix64;
use plumbline::suite;

struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(1);
        splitmix64(self.0)
    }
    fn below(&mut self, n: usize) -> usize {
        if n == 0 {
            0
        } else {
            (self.next() % n as u64) as usize
        }
    }
}

/// Values that have broken parsers elsewhere: extremes, non-numbers, odd text.
const HOSTILE: &[&str] = &[
    "",
    "0",
    "-0",
    "1",
    "-1",
    "2",
    "NaN",
    "nan",
    "inf",
    "-inf",
    "1e309",
    "-1e309",
    "1e-320",
    "9223372036854775807",
    "-9223372036854775808",
    "18446744073709551616",
    "0x10",
    "1_000",
    "0.5",
    "1.0000000000000002",
    "\"\"",
    "\"x\"",
    "[]",
    "[1, 2]",
    "{}",
    "true",
    "false",
    "\u{feff}",
    "\u{0}",
    "é",
    "\"\\u0000\"",
    "'''",
    "\"\"\"",
    ",",
    ";",
    "\t",
    "\r",
    "\n",
    "=",
    "[[",
    "]]",
    "#",
    "..",
    "/",
    "../",
    "a.csv",
    "nonexistent.csv.gz",
];

fn mutate(rng: &mut Rng, input: &[u8], donors: &[Vec<u8>]) -> Vec<u8> {
    let mut b = input.to_vec();
    let rounds = 1 + rng.below(4);
    for _ in 0..rounds {
        match rng.below(12) {
            // Byte level.
            0 if !b.is_empty() => {
                let i = rng.below(b.len());
                b[i] ^= 1 << rng.below(8);
            }
            1 => {
                let i = rng.below(b.len() + 1);
                b.insert(i, rng.next() as u8);
            }
            2 if !b.is_empty() => {
                let i = rng.below(b.len());
                let n = 1 + rng.below(16.min(b.len() - i));
                b.drain(i..i + n);
            }
            3 if !b.is_empty() => {
                let i = rng.below(b.len());
                let n = 1 + rng.below(64.min(b.len() - i));
                let chunk = b[i..i + n].to_vec();
                let at = rng.below(b.len() + 1);
                b.splice(at..at, chunk);
            }
            4 => {
                let n = rng.below(b.len() + 1);
                b.truncate(n);
            }
            // Structure aware: lines and tokens.
            5..=7 => {
                let mut lines: Vec<Vec<u8>> =
                    b.split(|&c| c == b'\n').map(|l| l.to_vec()).collect();
                let n = lines.len();
                match rng.below(4) {
                    0 => {
                        let i = rng.below(n);
                        let l = lines[i].clone();
                        lines.insert(rng.below(n + 1), l);
                    }
                    1 if n > 1 => {
                        lines.remove(rng.below(n));
                    }
                    2 => {
                        let (i, j) = (rng.below(n), rng.below(n));
                        lines.swap(i, j);
                    }
                    _ => {
                        let d = &donors[rng.below(donors.len())];
                        let dl: Vec<&[u8]> = d.split(|&c| c == b'\n').collect();
                        let l = dl[rng.below(dl.len())].to_vec();
                        lines.insert(rng.below(n + 1), l);
                    }
                }
                b = lines.join(&b'\n');
            }
            _ => {
                // Replace one token (a run of characters between separators)
                // by a hostile value.
                let seps = b" ,=\n\t[]{}\"";
                let starts: Vec<usize> = (0..b.len())
                    .filter(|&i| !seps.contains(&b[i]) && (i == 0 || seps.contains(&b[i - 1])))
                    .collect();
                if starts.is_empty() {
                    continue;
                }
                let s = starts[rng.below(starts.len())];
                let mut e = s;
                while e < b.len() && !seps.contains(&b[e]) {
                    e += 1;
                }
                let v = HOSTILE[rng.below(HOSTILE.len())].as_bytes().to_vec();
                b.splice(s..e, v);
            }
        }
    }
    b
}

fn read_seed(path: &Path, max_lines: usize) -> Vec<u8> {
    let raw = std::fs::read(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let text = if path.extension().is_some_and(|e| e == "gz") {
        let mut s = Vec::new();
        flate2::read::MultiGzDecoder::new(&raw[..])
            .read_to_end(&mut s)
            .expect("seed decompresses");
        s
    } else {
        raw
    };
    // Short seeds keep each run cheap; the reader's work per row is the same.
    let mut out: Vec<u8> = Vec::new();
    for l in text.split(|&c| c == b'\n').take(max_lines) {
        out.extend_from_slice(l);
        out.push(b'\n');
    }
    out
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let get = |k: &str| {
        args.iter()
            .position(|a| a == k)
            .and_then(|i| args.get(i + 1).cloned())
    };
    let target = get("--target").unwrap_or_else(|| {
        eprintln!(
            "usage: fuzz_parsers --target scorefile|suite [--seconds N] [--seed S] [--crashes DIR]"
        );
        std::process::exit(2)
    });
    let seconds: f64 = get("--seconds")
        .and_then(|s| s.parse().ok())
        .unwrap_or(60.0);
    let seed: u64 = get("--seed").and_then(|s| s.parse().ok()).unwrap_or(1);
    let crashes =
        PathBuf::from(get("--crashes").unwrap_or_else(|| format!("target/fuzz-crashes/{target}")));
    std::fs::create_dir_all(&crashes).expect("crash folder");
    let work = std::env::temp_dir().join(format!("plumbline-fuzz-{}-{target}", std::process::id()));
    std::fs::create_dir_all(&work).expect("scratch folder");
    // Silence the default panic message; panics are counted and saved.
    std::panic::set_hook(Box::new(|_| {}));

    let seeds: Vec<Vec<u8>> = match target.as_str() {
        "scorefile" => {
            let mut v: Vec<Vec<u8>> = std::fs::read_dir("suites/courier-data")
                .expect("run from the repository root")
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|p| p.to_string_lossy().ends_with(".csv.gz"))
                .map(|p| read_seed(&p, 40))
                .collect();
            v.sort();
            v
        }
        "suite" => {
            let mut v: Vec<Vec<u8>> = [
                "suites/courier-demo.toml",
                "suites/open-uci.toml",
                "suites/protocol-study.toml",
            ]
            .iter()
            .map(|p| read_seed(Path::new(p), usize::MAX))
            .collect();
            v.sort();
            v
        }
        other => {
            eprintln!("unknown target `{other}` (scorefile or suite)");
            std::process::exit(2)
        }
    };
    let mut rng = Rng(seed);
    let t0 = Instant::now();
    let (mut runs, mut panics, mut accepted) = (0u64, 0u64, 0u64);
    while t0.elapsed().as_secs_f64() < seconds {
        let base = &seeds[rng.below(seeds.len())];
        let input = mutate(&mut rng, base, &seeds);
        runs += 1;
        let outcome = match target.as_str() {
            "scorefile" => {
                let gz = rng.below(8) == 0;
                let path = work.join(if gz { "s.csv.gz" } else { "s.csv" });
                let bytes = if gz {
                    use std::io::Write;
                    let mut e =
                        flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
                    e.write_all(&input).expect("in memory");
                    let mut z = e.finish().expect("in memory");
                    // Sometimes damage the compressed stream itself.
                    if rng.below(2) == 0 && !z.is_empty() {
                        let i = rng.below(z.len());
                        z[i] ^= 1 << rng.below(8);
                    }
                    z
                } else {
                    input.clone()
                };
                std::fs::write(&path, &bytes).expect("scratch write");
                let spec = ScoreFileSpec {
                    path: path.clone(),
                    score_column: "p_late".into(),
                    label_column: "late".into(),
                    score_kind: if rng.below(4) == 0 {
                        ScoreKind::Margin
                    } else {
                        ScoreKind::Probability
                    },
                    split_column: None,
                    truth_column: if rng.below(2) == 0 {
                        Some("true_p".into())
                    } else {
                        None
                    },
                    fold_column: None,
                    origin: scorefile::Origin::Suite,
                };
                catch_unwind(AssertUnwindSafe(|| scorefile::load(&spec).is_ok())).map_err(|_| bytes)
            }
            _ => {
                let text = String::from_utf8_lossy(&input).into_owned();
                catch_unwind(AssertUnwindSafe(|| {
                    suite::parse(&text, Path::new("suites/fuzz.toml"), String::new()).is_ok()
                }))
                .map_err(|_| text.into_bytes())
            }
        };
        match outcome {
            Ok(true) => accepted += 1,
            Ok(false) => {}
            Err(bytes) => {
                panics += 1;
                let ext = if target == "suite" { "toml" } else { "csv" };
                let name = format!("{target}-{:016x}.{ext}", plumbline::split::fnv1a(&bytes));
                let _ = std::fs::write(crashes.join(name), &bytes);
            }
        }
    }
    let _ = std::fs::remove_dir_all(&work);
    let secs = t0.elapsed().as_secs_f64();
    println!("target {target}, seed {seed}: {runs} runs in {secs:.0} s ({:.0} runs/s), {accepted} accepted, {panics} panics", runs as f64 / secs);
}
