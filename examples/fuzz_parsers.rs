//! Seeded mutation fuzzing of the three readers of user input: the score
//! file reader (`data::scorefile::load`), the suite parser (`suite::parse`)
//! and the map-file reader (`mapfile::from_bytes`, what `apply` loads).
//! Stable Rust has no coverage-guided fuzzer, so this driver starts from the
//! shipped suites and score files (for maps: a map of every method kind,
//! fitted here on seeded samples), applies byte-level and structure-aware
//! mutations, calls the reader inside `catch_unwind`, and counts runs and
//! panics. An input that panics is written to the crash folder (default
//! `target/fuzz-crashes/<target>/`); copy it to `tests/fixtures/fuzz/` so
//! `tests/fuzz_regressions.rs` keeps it.
//!
//! Map files carry a checksum, so most map inputs are mutated as JSON values
//! and sealed again with the checksum of their new content: they reach the
//! schema and fitted-state checks instead of stopping at the checksum. A map
//! that loads is applied to a fixed set of valid scores; a prediction outside
//! [0, 1] (or NaN) counts as a finding and is saved like a panic, and so is an
//! error message that does not name the file.
//!
//! Usage (from the repository root; the run is reproducible for a seed up to
//! the number of runs that fit in the time):
//!
//!     nice -n 19 cargo run --release --example fuzz_parsers -- \
//!         --target scorefile|suite|map [--seconds N] [--seed S] [--crashes DIR]
//!
//! `--reseal FILE...` instead replaces the checksum of each map file by the
//! checksum of its content (after a deliberate edit of a map fixture).

use std::io::Read;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::time::Instant;

use plumbline::calibrate::ScoreKind;
use plumbline::data::scorefile::{self, ScoreFileSpec};
use plumbline::mapfile::{self, MapContent, Training};
use plumbline::split::splitmix64;
use plumbline::suite;
use serde_json::Value;

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
    if args.first().is_some_and(|a| a == "--reseal") {
        reseal_files(&args[1..]);
        return;
    }
    let get = |k: &str| {
        args.iter()
            .position(|a| a == k)
            .and_then(|i| args.get(i + 1).cloned())
    };
    let target = get("--target").unwrap_or_else(|| {
        eprintln!(
            "usage: fuzz_parsers --target scorefile|suite|map [--seconds N] [--seed S] [--crashes DIR]\n       fuzz_parsers --reseal MAP..."
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
        "map" => map_seeds(),
        other => {
            eprintln!("unknown target `{other}` (scorefile, suite or map)");
            std::process::exit(2)
        }
    };
    let mut rng = Rng(seed);
    let t0 = Instant::now();
    let (mut runs, mut panics, mut accepted, mut findings) = (0u64, 0u64, 0u64, 0u64);
    let map_donors: Vec<Value> = if target == "map" {
        seeds
            .iter()
            .map(|b| serde_json::from_slice(b).expect("seed maps are JSON"))
            .collect()
    } else {
        Vec::new()
    };
    while t0.elapsed().as_secs_f64() < seconds {
        let base = &seeds[rng.below(seeds.len())];
        let input = if target == "map" {
            mutate_map(&mut rng, base, &seeds, &map_donors)
        } else {
            mutate(&mut rng, base, &seeds)
        };
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
            "map" => match catch_unwind(AssertUnwindSafe(|| check_map(&input))) {
                Err(_) => Err(input.clone()),
                Ok(Ok(loaded)) => Ok(loaded),
                Ok(Err(problem)) => {
                    findings += 1;
                    let name = format!("map-finding-{:016x}.json", plumbline::split::fnv1a(&input));
                    if findings <= 20 {
                        eprintln!("{name}: {problem}");
                    }
                    let _ = std::fs::write(crashes.join(name), &input);
                    Ok(false)
                }
            },
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
                let ext = match target.as_str() {
                    "suite" => "toml",
                    "map" => "json",
                    _ => "csv",
                };
                let name = format!("{target}-{:016x}.{ext}", plumbline::split::fnv1a(&bytes));
                let _ = std::fs::write(crashes.join(name), &bytes);
            }
        }
    }
    let _ = std::fs::remove_dir_all(&work);
    let secs = t0.elapsed().as_secs_f64();
    let extra = if target == "map" {
        format!(", {findings} findings (predictions outside [0, 1] or unlocated errors)")
    } else {
        String::new()
    };
    println!("target {target}, seed {seed}: {runs} runs in {secs:.0} s ({:.0} runs/s), {accepted} accepted, {panics} panics{extra}", runs as f64 / secs);
}

/// Seed maps: every method kind (and the spline's constant form) fitted on
/// seeded samples of probability and margin scores, written as `fit` writes
/// them. Samples are small so each run stays cheap; scores are rounded so some
/// are tied.
fn map_seeds() -> Vec<Vec<u8>> {
    let mut rng = Rng(20_261_205);
    let n = 80;
    let mut prob = Vec::with_capacity(n);
    let mut margin = Vec::with_capacity(n);
    let mut labels = Vec::with_capacity(n);
    for _ in 0..n {
        let u = (rng.next() >> 11) as f64 / (1u64 << 53) as f64;
        let v = (rng.next() >> 11) as f64 / (1u64 << 53) as f64;
        let p = (u * 100.0).round() / 100.0;
        prob.push(p);
        margin.push(((6.0 * u - 3.0) * 100.0).round() / 100.0);
        labels.push(v < 0.1 + 0.8 * p);
    }
    let constant = vec![0.25; n];
    let fits: &[(&str, &[&str], ScoreKind, &[f64])] = &[
        ("identity", &[], ScoreKind::Probability, &prob),
        ("platt", &[], ScoreKind::Probability, &prob),
        (
            "platt",
            &["target_smoothing=true"],
            ScoreKind::Margin,
            &margin,
        ),
        ("isotonic", &[], ScoreKind::Probability, &prob),
        ("isotonic", &["pseudo_count=1"], ScoreKind::Margin, &margin),
        ("beta", &[], ScoreKind::Probability, &prob),
        ("beta", &["shape=\"tied\""], ScoreKind::Margin, &margin),
        (
            "binning",
            &["bins=5", "pseudo_count=2"],
            ScoreKind::Probability,
            &prob,
        ),
        ("binning", &[], ScoreKind::Margin, &margin),
        ("temperature", &[], ScoreKind::Probability, &prob),
        ("temperature", &[], ScoreKind::Margin, &margin),
        ("centered-isotonic", &[], ScoreKind::Probability, &prob),
        (
            "centered-isotonic",
            &["pseudo_count=0.5"],
            ScoreKind::Margin,
            &margin,
        ),
        ("spline", &[], ScoreKind::Probability, &prob),
        (
            "spline",
            &["intervals=6", "lambda=0.5"],
            ScoreKind::Margin,
            &margin,
        ),
        (
            "spline",
            &["criterion=bic"],
            ScoreKind::Probability,
            &constant,
        ),
        ("venn-abers", &[], ScoreKind::Probability, &prob),
        ("venn-abers", &[], ScoreKind::Margin, &margin),
    ];
    fits.iter()
        .map(|&(method, set, kind, scores)| {
            let set: Vec<String> = set.iter().map(|s| s.to_string()).collect();
            let spec =
                plumbline::commands::fit::method_spec(method, &set, kind).expect("seed method");
            let fitted = spec
                .build(kind)
                .expect("seed method builds")
                .fit(scores, &labels)
                .expect("seed fit");
            let lo = scores.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = scores.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let content = MapContent {
                format: mapfile::FORMAT.into(),
                schema_version: mapfile::SCHEMA_VERSION,
                tool_version: env!("CARGO_PKG_VERSION").into(),
                method: spec,
                score_kind: kind,
                training: Training {
                    source: "seed.csv".into(),
                    score_column: "score".into(),
                    label_column: "label".into(),
                    fold_column: None,
                    rows: n as u64,
                    positives: labels.iter().filter(|&&y| y).count() as u64,
                    score_min: lo,
                    score_max: hi,
                    distinct_scores: 0,
                    folds: None,
                    notes: fitted.notes.iter().map(|s| s.to_string()).collect(),
                    source_sha256: None,
                    fit_seconds: None,
                },
                fitted: fitted.map.state(),
            };
            mapfile::to_bytes(&content).expect("seed map serialises")
        })
        .collect()
}

/// JSON values that have broken readers elsewhere: extreme and tiny numbers,
/// wrong types, method kinds, empty and nested containers.
const HOSTILE_JSON: &[&str] = &[
    "0",
    "-0.0",
    "1",
    "-1",
    "0.5",
    "2",
    "1e308",
    "-1e308",
    "1.7976931348623157e308",
    "-1.7976931348623157e308",
    "5e-324",
    "-5e-324",
    "2.2250738585072014e-308",
    "1e-12",
    "0.9999999999999999",
    "1.0000000000000002",
    "9007199254740993",
    "18446744073709551615",
    "-9223372036854775808",
    "4294967296",
    "200",
    "201",
    "null",
    "true",
    "false",
    "\"\"",
    "\"probability\"",
    "\"margin\"",
    "\"identity\"",
    "\"platt\"",
    "\"isotonic\"",
    "\"beta\"",
    "\"binning\"",
    "\"temperature\"",
    "\"centered-isotonic\"",
    "\"spline\"",
    "\"constant\"",
    "\"venn-abers\"",
    "\"tied\"",
    "\"full\"",
    "\"aic\"",
    "\"bic\"",
    "\"plumbline-map\"",
    "\"\\u0000\"",
    "[]",
    "[0]",
    "[1e308, -1e308]",
    "[[]]",
    "{}",
    "{\"kind\": \"identity\"}",
    "{\"lo\": 0, \"hi\": 0, \"weight\": 1, \"value\": 0}",
];

/// JSON pointers of every node of `v` (the root is "").
fn pointers(v: &Value, at: String, out: &mut Vec<String>) {
    match v {
        Value::Object(m) => {
            for (k, x) in m {
                pointers(
                    x,
                    format!("{at}/{}", k.replace('~', "~0").replace('/', "~1")),
                    out,
                );
            }
        }
        Value::Array(a) => {
            for (i, x) in a.iter().enumerate() {
                pointers(x, format!("{at}/{i}"), out);
            }
        }
        _ => {}
    }
    out.push(at);
}

/// One structure-aware change at a random node of a map's JSON.
fn mutate_value(rng: &mut Rng, v: &mut Value, donors: &[Value]) {
    let mut ptrs = Vec::new();
    pointers(v, String::new(), &mut ptrs);
    let at = ptrs[rng.below(ptrs.len())].clone();
    let donor = &donors[rng.below(donors.len())];
    let Some(node) = v.pointer_mut(&at) else {
        return;
    };
    match rng.below(8) {
        0 | 1 => {
            *node = serde_json::from_str(HOSTILE_JSON[rng.below(HOSTILE_JSON.len())])
                .expect("hostile values are JSON");
        }
        2 => {
            // The same place in another seed map (a fitted map of another
            // kind, another method, another score kind).
            if let Some(d) = donor.pointer(&at) {
                *node = d.clone();
            }
        }
        3 => {
            if let Some(x) = node.as_f64() {
                let y = match rng.below(8) {
                    0 => -x,
                    1 => x * 2.0,
                    2 => x * 1e300,
                    3 => x / 1e300,
                    4 => x + 1.0,
                    5 => f64::from_bits(x.to_bits().wrapping_add(1)),
                    6 => f64::from_bits(x.to_bits().wrapping_sub(1)),
                    _ => x - 1.0,
                };
                if let Some(n) = serde_json::Number::from_f64(y) {
                    *node = Value::Number(n);
                }
            } else if let Value::Array(a) = node {
                mutate_array(rng, a);
            } else if let Value::Object(m) = node {
                let keys: Vec<String> = m.keys().cloned().collect();
                if !keys.is_empty() && rng.below(2) == 0 {
                    m.remove(&keys[rng.below(keys.len())]);
                } else {
                    m.insert("extra".into(), Value::from(1));
                }
            }
        }
        _ => {
            // Arrays are where fitted maps keep their knots: change them most.
            let mut arrays: Vec<String> = ptrs
                .iter()
                .filter(|p| v.pointer(p).is_some_and(Value::is_array))
                .cloned()
                .collect();
            arrays.sort();
            if arrays.is_empty() {
                return;
            }
            let p = arrays[rng.below(arrays.len())].clone();
            if let Some(Value::Array(a)) = v.pointer_mut(&p) {
                mutate_array(rng, a);
            }
        }
    }
}

fn mutate_array(rng: &mut Rng, a: &mut Vec<Value>) {
    let n = a.len();
    match rng.below(9) {
        0 if n > 0 => {
            a.remove(rng.below(n));
        }
        1 if n > 0 => {
            let x = a[rng.below(n)].clone();
            a.insert(rng.below(n + 1), x);
        }
        2 if n > 1 => {
            let (i, j) = (rng.below(n), rng.below(n));
            a.swap(i, j);
        }
        3 => a.reverse(),
        4 => a.truncate(rng.below(n + 1)),
        5 if n > 0 => {
            // Many copies of one element: long arrays and ties.
            let x = a[rng.below(n)].clone();
            let k = [1, 10, 1000, 20_000][rng.below(4)];
            let at = rng.below(n + 1);
            a.splice(at..at, std::iter::repeat_n(x, k));
        }
        6 => a.clear(),
        // Every number in the array (or the score range of its blocks and
        // bins) scaled: knots of scores on an extreme scale.
        7 => {
            let f = [1e300, -1e300, 1e-300, 6e307][rng.below(4)];
            for x in a.iter_mut() {
                scale_numbers(x, f);
            }
        }
        _ if n > 0 => {
            let i = rng.below(n);
            a[i] = serde_json::from_str(HOSTILE_JSON[rng.below(HOSTILE_JSON.len())])
                .expect("hostile values are JSON");
        }
        _ => {}
    }
}

fn scale_numbers(v: &mut Value, f: f64) {
    match v {
        Value::Number(n) => {
            if let Some(y) = n.as_f64().and_then(|x| serde_json::Number::from_f64(x * f)) {
                *n = y;
            }
        }
        Value::Array(a) => a.iter_mut().for_each(|x| scale_numbers(x, f)),
        // Blocks and bins: their score range, not their values.
        Value::Object(m) => {
            for k in ["lo", "hi"] {
                if let Some(x) = m.get_mut(k) {
                    scale_numbers(x, f);
                }
            }
        }
        _ => {}
    }
}

/// Replace the checksum of a map's JSON by the checksum of its content, as
/// `fit` computes it; `false` when the top level is not an object.
fn reseal(v: &mut Value) -> bool {
    let Value::Object(m) = v else {
        return false;
    };
    m.remove("checksum");
    let sum = mapfile::checksum(&Value::Object(m.clone()));
    m.insert("checksum".into(), Value::String(sum));
    true
}

fn mutate_map(rng: &mut Rng, input: &[u8], seeds: &[Vec<u8>], donors: &[Value]) -> Vec<u8> {
    match rng.below(8) {
        // Bytes, checksum untouched: JSON syntax, format, version, checksum.
        0 => mutate(rng, input, seeds),
        // Bytes, then sealed again when still a JSON object.
        1 => {
            let b = mutate(rng, input, seeds);
            match serde_json::from_slice::<Value>(&b) {
                Ok(mut v) => {
                    if reseal(&mut v) {
                        serde_json::to_vec(&v).unwrap_or(b)
                    } else {
                        b
                    }
                }
                Err(_) => b,
            }
        }
        // Values, then sealed (mostly).
        _ => {
            let mut v: Value = serde_json::from_slice(input).expect("seed maps are JSON");
            for _ in 0..1 + rng.below(3) {
                mutate_value(rng, &mut v, donors);
            }
            if rng.below(8) != 0 {
                reseal(&mut v);
            }
            if rng.below(2) == 0 {
                serde_json::to_vec_pretty(&v)
            } else {
                serde_json::to_vec(&v)
            }
            .expect("a JSON value serialises")
        }
    }
}

/// Load map bytes as `apply` does and, when they load, predict a fixed set of
/// valid scores. `Ok(true)`: loaded and every prediction in [0, 1];
/// `Ok(false)`: refused with a message naming the file; `Err`: a finding.
fn check_map(bytes: &[u8]) -> Result<bool, String> {
    const NAME: &str = "fuzz.json";
    let loaded = match mapfile::from_bytes(NAME, bytes) {
        Ok(l) => l,
        Err(e) => {
            let m = e.to_string();
            return if m.starts_with(&format!("{NAME}: ")) {
                Ok(false)
            } else {
                Err(format!("the error does not name the file: {m}"))
            };
        }
    };
    let t = &loaded.content.training;
    let mut scores: Vec<f64> = match loaded.content.score_kind {
        ScoreKind::Probability => vec![
            0.0,
            5e-324,
            1e-300,
            1e-12,
            1e-6,
            0.01,
            0.25,
            0.3,
            0.5,
            0.75,
            0.99,
            0.999999,
            0.9999999999999999,
            1.0,
        ],
        ScoreKind::Margin => vec![
            f64::MIN,
            -1e308,
            -9e307,
            -1e300,
            -1e30,
            -745.0,
            -40.0,
            -3.0,
            -1.0,
            -5e-324,
            0.0,
            0.5,
            1.0,
            3.0,
            40.0,
            710.0,
            1e30,
            1e300,
            9e307,
            1e308,
            f64::MAX,
        ],
    };
    for s in [t.score_min, t.score_max] {
        let ok = s.is_finite()
            && (loaded.content.score_kind == ScoreKind::Margin || (0.0..=1.0).contains(&s));
        if ok {
            scores.push(s);
        }
    }
    let mut out = vec![0.0; scores.len()];
    loaded.map.predict(&scores, &mut out);
    match scores
        .iter()
        .zip(&out)
        .find(|(_, p)| !(0.0..=1.0).contains(*p))
    {
        Some((s, p)) => Err(format!(
            "the {} map loads but predicts {p} for the score {s}",
            loaded.content.fitted.kind()
        )),
        None => Ok(true),
    }
}

/// `--reseal FILE...`: replace each map file's checksum by its content's.
fn reseal_files(files: &[String]) {
    if files.is_empty() {
        eprintln!("usage: fuzz_parsers --reseal MAP...");
        std::process::exit(2);
    }
    for f in files {
        let text = std::fs::read(f).unwrap_or_else(|e| {
            eprintln!("{f}: {e}");
            std::process::exit(2)
        });
        let mut v: Value = serde_json::from_slice(&text).unwrap_or_else(|e| {
            eprintln!("{f}: not JSON ({e}); nothing to seal");
            std::process::exit(2)
        });
        if !reseal(&mut v) {
            eprintln!("{f}: the top level is not an object; nothing to seal");
            std::process::exit(2);
        }
        let mut out = serde_json::to_vec_pretty(&v).expect("a JSON value serialises");
        out.push(b'\n');
        std::fs::write(f, out).unwrap_or_else(|e| {
            eprintln!("{f}: {e}");
            std::process::exit(2)
        });
        println!("{f}: sealed");
    }
}
