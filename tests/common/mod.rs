//! Helpers shared by the integration tests: the binary, seeded draws, small
//! suites and score files, runs bounded by a hang limit, the reference
//! fixtures and the case count of the property tests.
#![allow(dead_code)]

use std::fs;
use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Child, ExitStatus};
use std::time::{Duration, Instant};

use assert_cmd::Command;

pub fn bin() -> Command {
    Command::cargo_bin("plumbline").unwrap()
}

pub fn bin_path() -> PathBuf {
    assert_cmd::cargo::cargo_bin("plumbline")
}

/// SplitMix64 (Steele, Lea and Flood 2014): the tests' own seeded draws.
pub fn splitmix(x: &mut u64) -> u64 {
    *x = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *x;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

pub fn uniform(x: &mut u64) -> f64 {
    (splitmix(x) >> 11) as f64 / (1u64 << 53) as f64
}

/// Invented scores for the tests: a logit score whose label is drawn from a
/// slightly steeper logistic curve.
pub fn score_csv(rows: usize, seed: u64) -> String {
    let mut s = String::from("score,label\n");
    let mut x = seed;
    for _ in 0..rows {
        let z = 6.0 * uniform(&mut x) - 3.0;
        let y = uniform(&mut x) < 1.0 / (1.0 + (-1.4 * z).exp());
        s.push_str(&format!("{z:.6},{}\n", y as u8));
    }
    s
}

/// A small suite over the score files `a.csv` and `b.csv` of its folder.
pub fn suite_text(seed: u64, repeats: usize, sizes: &str) -> String {
    format!(
        r#"name = "scale"
seed = {seed}
repeats = {repeats}
sizes = [{sizes}]
reference = "platt"
metrics = ["log_loss", "brier", "ece_mass"]
primary_metric = "log_loss"

[test_set]
rows = 300

[[method]]
id = "platt"
kind = "platt"

[[method]]
id = "isotonic"
kind = "isotonic"

[[method]]
id = "beta"
kind = "beta"

[[method]]
id = "spline"
kind = "spline"

[[task]]
id = "a"
scores = "a.csv"
score_column = "score"
label_column = "label"
score_kind = "margin"

[[task]]
id = "b"
scores = "b.csv"
score_column = "score"
label_column = "label"
score_kind = "margin"
"#
    )
}

/// Write the score files and the suite into `dir`; returns the suite path.
pub fn write_suite(dir: &Path, seed: u64, repeats: usize, sizes: &str) -> PathBuf {
    fs::write(dir.join("a.csv"), score_csv(1500, 1)).unwrap();
    fs::write(dir.join("b.csv"), score_csv(1100, 2)).unwrap();
    let p = dir.join("suite.toml");
    fs::write(&p, suite_text(seed, repeats, sizes)).unwrap();
    p
}

pub fn run(suite: &Path, out: &Path, extra: &[&str]) {
    let mut args = vec![
        "run",
        suite.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--quiet",
    ];
    args.extend_from_slice(extra);
    bin().args(&args).assert().success();
}

/// Relative paths of every file under `dir`, sorted.
pub fn files(dir: &Path) -> Vec<String> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.push(
                    p.strip_prefix(dir)
                        .unwrap()
                        .to_string_lossy()
                        .replace('\\', "/"),
                );
            }
        }
    }
    out.sort();
    out
}

/// Two results folders hold the same files with the same bytes, except the
/// documented machine-dependent parts: the manifest's machine fields and the
/// fit times of timings.csv (whose rows must still name the same fits).
pub fn assert_same_results(a: &Path, b: &Path) {
    assert_eq!(files(a), files(b), "{} vs {}", a.display(), b.display());
    for f in files(a) {
        let (x, y) = (fs::read(a.join(&f)).unwrap(), fs::read(b.join(&f)).unwrap());
        match f.as_str() {
            "manifest.json" => {
                let p = |v: &[u8]| {
                    plumbline::results::without_machine_fields(&serde_json::from_slice(v).unwrap())
                };
                assert_eq!(p(&x), p(&y), "manifest.json differs");
            }
            "timings.csv" => {
                let keys = |v: &[u8]| -> Vec<String> {
                    String::from_utf8_lossy(v)
                        .lines()
                        .map(|l| l.rsplit_once(',').unwrap().0.to_string())
                        .collect()
                };
                assert_eq!(keys(&x), keys(&y), "timings.csv names other fits");
            }
            _ => assert!(
                x == y,
                "{f} differs between {} and {}",
                a.display(),
                b.display()
            ),
        }
    }
}

/// Copy a folder and everything below it.
pub fn copy_dir(from: &Path, to: &Path) {
    fs::create_dir_all(to).unwrap();
    for e in fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let p = e.path();
        if p.is_dir() {
            copy_dir(&p, &to.join(e.file_name()));
        } else {
            fs::copy(&p, to.join(e.file_name())).unwrap();
        }
    }
}

/// How long a child process may run before a test counts it as hung (a
/// guard, not a measurement).
pub const HANG_LIMIT: Duration = Duration::from_secs(60);

/// What a finished child left: its status, stdout and stderr.
pub struct Done {
    pub status: ExitStatus,
    pub stdout: String,
    pub stderr: String,
}

/// Wait for `child` (stdout and stderr piped or null), draining its pipes on
/// threads so a chatty child never blocks; kill it and fail the test if it
/// has not ended within [`HANG_LIMIT`].
pub fn finish(mut child: Child, what: &str) -> Done {
    fn drain(r: Option<impl Read + Send + 'static>) -> std::thread::JoinHandle<String> {
        std::thread::spawn(move || {
            let mut b = Vec::new();
            if let Some(mut r) = r {
                let _ = r.read_to_end(&mut b);
            }
            String::from_utf8_lossy(&b).into_owned()
        })
    }
    let out = drain(child.stdout.take());
    let err = drain(child.stderr.take());
    let status = wait_or_kill(&mut child, what);
    Done {
        status,
        stdout: out.join().unwrap(),
        stderr: err.join().unwrap(),
    }
}

/// Wait for `child`; kill it and fail the test past [`HANG_LIMIT`].
pub fn wait_or_kill(child: &mut Child, what: &str) -> ExitStatus {
    let start = Instant::now();
    loop {
        if let Some(st) = child.try_wait().unwrap() {
            return st;
        }
        if start.elapsed() > HANG_LIMIT {
            let _ = child.kill();
            let _ = child.wait();
            panic!("{what}: still running after {HANG_LIMIT:?}, killed (a hang)");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

/// A committed reference fixture under `tests/fixtures/`, parsed as JSON.
pub fn json_fixture(rel: &str) -> serde_json::Value {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures")
        .join(rel);
    let text =
        fs::read_to_string(&path).unwrap_or_else(|e| panic!("fixture {}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("fixture {}: {e}", path.display()))
}

/// A JSON array of numbers (a fixture array); panics naming what is not one.
pub fn floats(v: &serde_json::Value) -> Vec<f64> {
    v.as_array()
        .unwrap_or_else(|| panic!("fixture: expected an array of numbers, found {v}"))
        .iter()
        .map(|x| {
            x.as_f64()
                .unwrap_or_else(|| panic!("fixture: {x} is not a number"))
        })
        .collect()
}

/// The element pairs of two equally long sequences: a fixture array and what
/// it is checked against. `zip` alone stops at the shorter one, so a truncated
/// or over-long fixture array would pass unnoticed; this fails first, naming
/// `what` and both lengths.
pub fn pairs<'a, A, B>(
    ours: &'a [A],
    fixture: &'a [B],
    what: &str,
) -> std::iter::Zip<std::slice::Iter<'a, A>, std::slice::Iter<'a, B>> {
    assert_eq!(
        ours.len(),
        fixture.len(),
        "{what}: {} values against {} in the fixture",
        ours.len(),
        fixture.len()
    );
    ours.iter().zip(fixture)
}

/// Every needle is in `text`; the first missing one is named with the text.
pub fn has(text: &str, needles: &[&str]) {
    // Warnings are wrapped to the terminal width: a needle may span lines.
    let flat = |s: &str| s.split_whitespace().collect::<Vec<_>>().join(" ");
    let text_flat = flat(text);
    for n in needles {
        assert!(
            text.contains(n) || text_flat.contains(&flat(n)),
            "`{n}` not in: {text}"
        );
    }
}

/// Run one test of this very test binary in a child process with `var` set
/// to `value`: whether it passed, and its standard output and error.
pub fn rerun_with_env(test: &str, var: &str, value: &str) -> (bool, String) {
    let me = std::env::current_exe().unwrap();
    let out = std::process::Command::new(me)
        .args(["--exact", test])
        .env(var, value)
        .output()
        .unwrap();
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    (out.status.success(), text)
}

/// Cases for a file's property tests: `floor` (stated beside each
/// `proptest_config`) unless `PROPTEST_CASES` asks for more. A lower value, or
/// one that is not a whole number, is refused with a message saying what to
/// set, so the variable can raise the number of cases but never silently
/// shrink the tests to a handful.
pub fn proptest_cases(floor: u32) -> u32 {
    match std::env::var("PROPTEST_CASES") {
        Err(std::env::VarError::NotPresent) => floor,
        Err(std::env::VarError::NotUnicode(v)) => panic!(
            "PROPTEST_CASES={v:?} is not a whole number of cases: unset it or set at least {floor}"
        ),
        Ok(v) => match v.trim().parse::<u32>() {
            Ok(n) if n >= floor => n,
            Ok(n) => panic!(
                "PROPTEST_CASES={n} is below this file's floor of {floor} cases: unset it or set at least {floor}"
            ),
            Err(_) => panic!(
                "PROPTEST_CASES={v:?} is not a whole number of cases: unset it or set at least {floor}"
            ),
        },
    }
}
