//! Sharded runs and their merge, and `verify`, through the real binary: the
//! merged folder equals the one-machine run byte for byte (outside the
//! documented machine fields), every inconsistent set of shards is refused
//! with a message naming the shard or unit, and verify tells an untouched
//! folder from an edited one.

mod common;

use std::fs;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};

use common::*;
use tempfile::TempDir;

const SIZES: &str = "40, 120, 400";

struct Setup {
    dir: TempDir,
    suite: PathBuf,
}

impl Setup {
    fn new() -> Self {
        let dir = TempDir::new().unwrap();
        let suite = write_suite(dir.path(), 5, 4, SIZES);
        Setup { dir, suite }
    }
    fn p(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }
    fn shards(&self, n: usize, prefix: &str) -> Vec<PathBuf> {
        (1..=n)
            .map(|k| {
                let out = self.p(&format!("{prefix}{k}"));
                run(
                    &self.suite,
                    &out,
                    &["--shard", &format!("{k}/{n}"), "--threads", "1"],
                );
                out
            })
            .collect()
    }
}

fn merge_args(shards: &[PathBuf], out: &Path) -> Vec<String> {
    let mut a = vec!["merge".to_string()];
    a.extend(shards.iter().map(|s| s.display().to_string()));
    a.extend(["--out".into(), out.display().to_string(), "--quiet".into()]);
    a
}

fn merge_fails(shards: &[PathBuf], out: &Path, needles: &[&str]) {
    let o = bin()
        .args(merge_args(shards, out))
        .assert()
        .failure()
        .get_output()
        .clone();
    let err = String::from_utf8_lossy(&o.stderr).to_string();
    for n in needles {
        assert!(err.contains(n), "`{n}` not in: {err}");
    }
    assert!(!out.exists(), "a refused merge left {}", out.display());
}

#[test]
fn merged_shards_equal_the_one_machine_run() {
    let s = Setup::new();
    let full = s.p("full");
    run(&s.suite, &full, &["--threads", "2"]);
    let shards = s.shards(3, "s");
    // Shards hold a share each, and together every unit once.
    let counts: Vec<u64> = shards
        .iter()
        .map(|d| {
            let m: serde_json::Value =
                serde_json::from_slice(&fs::read(d.join("manifest.json")).unwrap()).unwrap();
            m["shard"]["units"].as_u64().unwrap()
        })
        .collect();
    assert_eq!(counts.iter().sum::<u64>(), 2 * 3 * 4, "{counts:?}");
    assert!(counts.iter().all(|&c| c > 0), "{counts:?}");
    // Any order on the command line.
    let merged = s.p("merged");
    let mut order = shards.clone();
    order.reverse();
    bin().args(merge_args(&order, &merged)).assert().success();
    assert_same_results(&full, &merged);
    // A one-shard split is the whole run too.
    let one = s.shards(1, "one");
    let merged1 = s.p("merged1");
    bin().args(merge_args(&one, &merged1)).assert().success();
    assert_same_results(&full, &merged1);
}

#[test]
fn merge_refuses_inconsistent_shards() {
    let s = Setup::new();
    let shards = s.shards(3, "s");
    let out = s.p("merged");
    // A missing shard.
    merge_fails(&shards[..2], &out, &["shard 3/3 missing"]);
    // A shard given twice.
    merge_fails(
        &[shards[0].clone(), shards[1].clone(), shards[1].clone()],
        &out,
        &["shard 2/3 is given twice"],
    );
    // A shard of another split.
    let other = s.p("other");
    run(&s.suite, &other, &["--shard", "2/4"]);
    merge_fails(
        &[shards[0].clone(), other.clone(), shards[2].clone()],
        &out,
        &["shard 2/4", "one --shard K/N split"],
    );
    // A shard of another suite (another seed).
    let d2 = TempDir::new().unwrap();
    let suite2 = write_suite(d2.path(), 6, 4, SIZES);
    let foreign = d2.path().join("s2");
    run(&suite2, &foreign, &["--shard", "2/3"]);
    merge_fails(
        &[shards[0].clone(), foreign, shards[2].clone()],
        &out,
        &["comes from another suite", "SHA-256"],
    );
    // A shard run on other data: same suite text, task `b`'s file changed.
    let d3 = TempDir::new().unwrap();
    let suite3 = write_suite(d3.path(), 5, 4, SIZES);
    fs::write(d3.path().join("b.csv"), score_csv(1100, 99)).unwrap();
    let otherdata = d3.path().join("s2");
    run(&suite3, &otherdata, &["--shard", "2/3"]);
    merge_fails(
        &[shards[0].clone(), otherdata, shards[2].clone()],
        &out,
        &["ran on other data", "task `b`"],
    );
    // Not a shard folder.
    let full = s.p("full");
    run(&s.suite, &full, &[]);
    merge_fails(&[full], &out, &["not a shard folder"]);
    // A shard that lost a unit (its last record).
    let gz = shards[1].join("units.jsonl.gz");
    let mut text = String::new();
    flate2::read::GzDecoder::new(fs::File::open(&gz).unwrap())
        .read_to_string(&mut text)
        .unwrap();
    let kept: Vec<&str> = text.lines().collect();
    let mut enc = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    for l in &kept[..kept.len() - 1] {
        writeln!(enc, "{l}").unwrap();
    }
    fs::write(&gz, enc.finish().unwrap()).unwrap();
    merge_fails(&shards, &out, &["1 unit(s) missing", "of shard 2/3", "s2"]);
    // ... or holds one of another shard twice.
    let mut enc = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    for l in &kept {
        writeln!(enc, "{l}").unwrap();
    }
    let mut first3 = String::new();
    flate2::read::GzDecoder::new(fs::File::open(shards[2].join("units.jsonl.gz")).unwrap())
        .read_to_string(&mut first3)
        .unwrap();
    writeln!(enc, "{}", first3.lines().next().unwrap()).unwrap();
    fs::write(&gz, enc.finish().unwrap()).unwrap();
    merge_fails(&shards, &out, &["belongs to shard 3/3, not to shard 2/3"]);
}

fn verify(dir: &Path, extra: &[&str]) -> (i32, String) {
    let mut args = vec!["verify", dir.to_str().unwrap()];
    args.extend_from_slice(extra);
    let o = bin().args(&args).output().unwrap();
    (
        o.status.code().unwrap_or(-1),
        format!(
            "{}{}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        ),
    )
}

/// Replace the first number after the header of a CSV file by another.
fn edit_first_number(path: &Path) {
    let text = fs::read_to_string(path).unwrap();
    let (head, rest) = text.split_once('\n').unwrap();
    let (row, tail) = rest.split_once('\n').unwrap();
    let mut cells: Vec<String> = row.split(',').map(String::from).collect();
    let i = cells
        .iter()
        .position(|c| c.contains('.') && c.parse::<f64>().is_ok())
        .unwrap();
    let v: f64 = cells[i].parse().unwrap();
    cells[i] = format!("{}", v + 1e-9);
    fs::write(path, format!("{head}\n{}\n{tail}", cells.join(","))).unwrap();
}

#[test]
fn verify_tells_untouched_from_edited_folders() {
    let s = Setup::new();
    let out = s.p("full");
    run(&s.suite, &out, &[]);
    let (code, text) = verify(&out, &[]);
    assert_eq!(code, 0, "{text}");
    assert!(
        text.contains("match: every compared file is identical"),
        "{text}"
    );
    let (code, text) = verify(&out, &["--sample", "5"]);
    assert_eq!(code, 0, "{text}");
    assert!(text.contains("reran 5 of 24 units"), "{text}");

    // A published folder without the unit table or timings: the files present
    // are compared.
    let published = s.p("published");
    fs::create_dir_all(published.join("figures")).unwrap();
    for f in common::files(&out) {
        if f.starts_with("units.csv") || f == "timings.csv" || f == "tables.tex" {
            continue;
        }
        fs::copy(out.join(&f), published.join(&f)).unwrap();
    }
    let (code, text) = verify(&published, &[]);
    assert_eq!(code, 0, "{text}");
    // --sample needs the unit table: an error, not a mismatch.
    let (code, text) = verify(&published, &["--sample", "3"]);
    assert_eq!(code, 2, "{text}");
    assert!(text.contains("--sample needs the unit table"), "{text}");

    // One number edited in paired.csv: a mismatch naming the file.
    edit_first_number(&published.join("paired.csv"));
    let (code, text) = verify(&published, &[]);
    assert_eq!(code, 1, "{text}");
    assert!(
        text.contains("paired.csv: first difference on line 2"),
        "{text}"
    );

    // One number edited in the unit table: the unit and column are named.
    let units = plumbline::run::table::units_path(&out).unwrap();
    let plain = out.join("units.csv");
    if units != plain {
        // A compressed table: edit its text and write it back compressed.
        let mut t = String::new();
        flate2::read::GzDecoder::new(fs::File::open(&units).unwrap())
            .read_to_string(&mut t)
            .unwrap();
        fs::write(&plain, t).unwrap();
        edit_first_number(&plain);
        let mut enc = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
        enc.write_all(&fs::read(&plain).unwrap()).unwrap();
        fs::write(&units, enc.finish().unwrap()).unwrap();
        fs::remove_file(&plain).unwrap();
    } else {
        edit_first_number(&plain);
    }
    let (code, text) = verify(&out, &[]);
    assert_eq!(code, 1, "{text}");
    assert!(
        text.contains("1 row(s) differ")
            && text.contains("task `a`, size 40, repeat 0, method `platt`: differs in log_loss"),
        "{text}"
    );

    // An edited suite cannot be verified: an error.
    let edited = fs::read_to_string(&s.suite)
        .unwrap()
        .replace("seed = 5", "seed = 8");
    fs::write(&s.suite, edited).unwrap();
    let (code, text) = verify(&out, &[]);
    assert_eq!(code, 2, "{text}");
    assert!(text.contains("the suite was edited"), "{text}");
}
