//! Hostile and mistaken inputs through the real binary: endless score files,
//! gzip bombs, oversized suites and map files, a suite of very many methods,
//! non-CSV files, empty column names and empty name flags (`apply --column
//! ''`, `fit --method ''`, `diagnose --compare ''`), out-of-range parameters, `verify
//! --sample 0`, scratch left by a killed verify, and unit tables with missing
//! repeats or NaN values. Every command runs under a kill bound, so a
//! regression that hangs or fills memory fails instead of stalling the suite.

mod common;

use std::fs;
use std::io::{Read, Write};
use std::path::Path;
use std::process::{Command, Stdio};

use tempfile::TempDir;

struct Out {
    code: i32,
    stdout: String,
    stderr: String,
}

/// Run the binary in `dir` with `args` and extra environment, killing it
/// after [`common::HANG_LIMIT`] (then the test fails).
fn run_bounded(dir: &Path, args: &[&str], env: &[(&str, &str)]) -> Out {
    let mut cmd = Command::new(common::bin_path());
    cmd.current_dir(dir)
        .args(args)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    for (k, v) in env {
        cmd.env(k, v);
    }
    let done = common::finish(cmd.spawn().unwrap(), &format!("plumbline {args:?}"));
    Out {
        code: done.status.code().unwrap_or(-1),
        stdout: done.stdout,
        stderr: done.stderr,
    }
}

fn suite_with(scores: &str, methods: &str) -> String {
    format!(
        r#"name = "hostile"
seed = 1
repeats = 3
sizes = [50]
reference = "platt"
metrics = ["log_loss", "brier"]
primary_metric = "log_loss"

[[method]]
id = "platt"
kind = "platt"
{methods}
[[task]]
id = "a"
scores = "{scores}"
score_column = "score"
label_column = "label"
score_kind = "margin"
"#
    )
}

fn fit(dir: &Path, scores: &str, env: &[(&str, &str)]) -> Out {
    run_bounded(
        dir,
        &[
            "fit",
            "--method",
            "platt",
            "--score-kind",
            "margin",
            "--scores",
            scores,
            "--out",
            "m.json",
        ],
        env,
    )
}

#[cfg(unix)]
#[test]
fn endless_score_file_is_refused_with_file_and_line() {
    if !Path::new("/dev/zero").exists() {
        return;
    }
    let d = TempDir::new().unwrap();
    std::os::unix::fs::symlink("/dev/zero", d.path().join("zero.csv")).unwrap();
    let o = fit(d.path(), "zero.csv", &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(
        &o.stderr,
        &["zero.csv:1: a line or record longer than 1 MiB"],
    );
    common::has(&o.stderr, &["PLUMBLINE_MAX_LINE_BYTES"]);
    assert!(!d.path().join("m.json").exists());
    // The same file named by a suite: `check` refuses it with the task key.
    fs::write(d.path().join("s.toml"), suite_with("zero.csv", "")).unwrap();
    let o = run_bounded(d.path(), &["check", "s.toml"], &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(&o.stderr, &["task `a`.scores"]);
    common::has(&o.stderr, &["zero.csv:1: a line or record"]);
    // A lower limit from the environment is obeyed and named.
    fs::write(
        d.path().join("wide.csv"),
        format!("score,label\n{},1\n", "1".repeat(300)),
    )
    .unwrap();
    let o = fit(d.path(), "wide.csv", &[("PLUMBLINE_MAX_LINE_BYTES", "100")]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(
        &o.stderr,
        &["wide.csv:2: a line or record longer than 100 bytes"],
    );
    let o = fit(
        d.path(),
        "wide.csv",
        &[("PLUMBLINE_MAX_LINE_BYTES", "lots")],
    );
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(&o.stderr, &["PLUMBLINE_MAX_LINE_BYTES=`lots`"]);
}

#[cfg(unix)]
#[test]
fn endless_fifo_score_file_is_refused() {
    let d = TempDir::new().unwrap();
    let fifo = d.path().join("pipe.csv");
    let made = Command::new("mkfifo").arg(&fifo).status();
    if !made.is_ok_and(|s| s.success()) {
        return; // no mkfifo on this system
    }
    // A writer that feeds the pipe without end (until the reader goes away).
    let writer_path = fifo.clone();
    let writer = std::thread::spawn(move || {
        let Ok(mut f) = fs::OpenOptions::new().write(true).open(&writer_path) else {
            return;
        };
        let _ = f.write_all(b"score,label\n");
        let block = vec![b'7'; 1 << 16];
        while f.write_all(&block).is_ok() {}
    });
    let o = fit(d.path(), "pipe.csv", &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(
        &o.stderr,
        &["pipe.csv:2: a line or record longer than 1 MiB"],
    );
    // The writer stops when the reader has gone (a broken pipe); it is not
    // joined, so a reader that never opened the pipe cannot stall the test.
    drop(writer);
}

#[test]
fn gzip_bombs_are_refused_cleanly() {
    let d = TempDir::new().unwrap();
    // 200 MB of zero bytes, compressed while written: about 200 KB on disk.
    let f = fs::File::create(d.path().join("bomb.csv.gz")).unwrap();
    let mut gz = flate2::write::GzEncoder::new(f, flate2::Compression::best());
    let block = vec![0u8; 1 << 20];
    for _ in 0..200 {
        gz.write_all(&block).unwrap();
    }
    gz.finish().unwrap();
    assert!(fs::metadata(d.path().join("bomb.csv.gz")).unwrap().len() < 1 << 20);
    let o = fit(d.path(), "bomb.csv.gz", &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(&o.stderr, &["bomb.csv.gz:1: a line or record longer than"]);
    assert!(!d.path().join("m.json").exists());

    // A bomb of valid rows is stopped by the decompressed-size limit.
    let f = fs::File::create(d.path().join("rows.csv.gz")).unwrap();
    let mut gz = flate2::write::GzEncoder::new(f, flate2::Compression::best());
    gz.write_all(b"score,label\n").unwrap();
    for _ in 0..20_000 {
        gz.write_all(b"0.5,1\n-0.5,0\n").unwrap();
    }
    gz.finish().unwrap();
    let o = fit(
        d.path(),
        "rows.csv.gz",
        &[("PLUMBLINE_MAX_DECOMPRESSED_BYTES", "100000")],
    );
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(&o.stderr, &["rows.csv.gz:"]);
    common::has(&o.stderr, &["the decompressed text passes 100000 bytes (raise it with PLUMBLINE_MAX_DECOMPRESSED_BYTES)"]);
    // Under the default limit the same file is read.
    let o = fit(d.path(), "rows.csv.gz", &[]);
    assert_eq!(o.code, 0, "{}", o.stderr);
}

#[cfg(unix)]
#[test]
fn oversized_suite_and_map_files_are_refused_by_size() {
    let d = TempDir::new().unwrap();
    fs::write(d.path().join("a.csv"), common::score_csv(300, 1)).unwrap();
    fs::write(d.path().join("s.toml"), suite_with("a.csv", "")).unwrap();
    let o = run_bounded(
        d.path(),
        &["check", "s.toml"],
        &[("PLUMBLINE_MAX_SUITE_BYTES", "100")],
    );
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(
        &o.stderr,
        &["error: s.toml: cannot read the suite: the file ("],
    );
    common::has(&o.stderr, &["PLUMBLINE_MAX_SUITE_BYTES"]);
    let o = run_bounded(d.path(), &["check", "s.toml"], &[]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    // A suite that is not text: the file is named, with no made-up position.
    fs::write(d.path().join("bin.toml"), b"name = \"x\"\n\xff\xfe\n").unwrap();
    let o = run_bounded(d.path(), &["check", "bin.toml"], &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(
        o.stderr
            .starts_with("error: bin.toml: the suite is not UTF-8 text: invalid utf-8"),
        "{}",
        o.stderr
    );
    if Path::new("/dev/zero").exists() {
        std::os::unix::fs::symlink("/dev/zero", d.path().join("zero.toml")).unwrap();
        let o = run_bounded(d.path(), &["check", "zero.toml"], &[]);
        assert_eq!(o.code, 2, "{}", o.stderr);
        common::has(&o.stderr, &["zero.toml"]);
        common::has(
            &o.stderr,
            &["the input is larger than the limit on a suite file of 64 MiB"],
        );
        std::os::unix::fs::symlink("/dev/zero", d.path().join("zero.json")).unwrap();
        let o = run_bounded(
            d.path(),
            &["apply", "zero.json", "--scores", "a.csv", "--out", "o.csv"],
            &[],
        );
        assert_eq!(o.code, 2, "{}", o.stderr);
        common::has(&o.stderr, &["zero.json: cannot read the map file: the input is larger than the limit on a map file of 256 MiB"]);
        assert!(!d.path().join("o.csv").exists());
    }
}

#[test]
fn check_of_a_suite_with_twenty_thousand_methods_finishes() {
    let d = TempDir::new().unwrap();
    fs::write(d.path().join("a.csv"), common::score_csv(300, 1)).unwrap();
    let mut methods = String::new();
    for i in 0..20_000 {
        let kind = ["platt", "beta", "temperature"][i % 3];
        methods.push_str(&format!("\n[[method]]\nid = \"m{i}\"\nkind = \"{kind}\"\n"));
    }
    fs::write(d.path().join("s.toml"), suite_with("a.csv", &methods)).unwrap();
    let o = run_bounded(d.path(), &["check", "s.toml"], &[]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(o.stdout.contains("ok: the suite is valid"), "{}", o.stdout);
    assert!(o.stdout.contains("m19999 (beta)"), "{}", o.stdout);
    // A duplicate id among them is still found, at its own table.
    let dup = methods.replace("id = \"m19999\"", "id = \"m7\"");
    fs::write(d.path().join("d.toml"), suite_with("a.csv", &dup)).unwrap();
    let o = run_bounded(d.path(), &["check", "d.toml"], &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(
        &o.stderr,
        &["method `m7`: this id is used by another method"],
    );
}

#[test]
fn default_threshold_pairs_are_bounded() {
    let d = TempDir::new().unwrap();
    fs::write(d.path().join("a.csv"), common::score_csv(300, 1)).unwrap();
    let mut methods = String::new();
    for i in 0..202 {
        let kind = ["platt", "isotonic"][i % 2];
        methods.push_str(&format!("\n[[method]]\nid = \"m{i}\"\nkind = \"{kind}\"\n"));
    }
    fs::write(d.path().join("s.toml"), suite_with("a.csv", &methods)).unwrap();
    let o = run_bounded(d.path(), &["check", "s.toml"], &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(&o.stderr, &["threshold_pairs: 101 flexible and 102 Platt or beta methods make 10302 default threshold pairs"]);
}

#[test]
fn too_many_bins_is_a_located_suite_error() {
    let d = TempDir::new().unwrap();
    fs::write(d.path().join("a.csv"), common::score_csv(300, 1)).unwrap();
    let m = "\n[[method]]\nid = \"hist\"\nkind = \"binning\"\nbins = 100000\n";
    fs::write(d.path().join("s.toml"), suite_with("a.csv", m)).unwrap();
    let o = run_bounded(d.path(), &["check", "s.toml"], &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(&o.stderr, &["s.toml:16:8: method `hist`: bins = 100000: the number of bins must be between 1 and 10000"]);
    let ok = m.replace("100000", "10000");
    fs::write(d.path().join("s.toml"), suite_with("a.csv", &ok)).unwrap();
    assert_eq!(run_bounded(d.path(), &["check", "s.toml"], &[]).code, 0);
    let o = run_bounded(
        d.path(),
        &[
            "fit",
            "--method",
            "binning",
            "--set",
            "bins=20000",
            "--score-kind",
            "margin",
            "--scores",
            "a.csv",
            "--out",
            "m.json",
        ],
        &[],
    );
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(&o.stderr, &["bins = 20000"]);
}

#[test]
fn empty_column_names_are_refused() {
    let d = TempDir::new().unwrap();
    // A header with an empty column name must not match an empty option.
    fs::write(d.path().join("a.csv"), "score,,label\n0.5,x,1\n-0.5,y,0\n").unwrap();
    let o = run_bounded(
        d.path(),
        &[
            "fit",
            "--method",
            "platt",
            "--score-kind",
            "margin",
            "--scores",
            "a.csv",
            "--score-column",
            "",
            "--out",
            "m.json",
        ],
        &[],
    );
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(
        &o.stderr,
        &["a.csv: --score-column is empty: name a column of the file"],
    );
    assert!(!d.path().join("m.json").exists());
    let suite = suite_with("a.csv", "").replace("label_column = \"label\"", "label_column = \" \"");
    fs::write(d.path().join("s.toml"), suite).unwrap();
    let o = run_bounded(d.path(), &["check", "s.toml"], &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(&o.stderr, &["the suite's label_column is empty"]);
}

/// Flags that name something new (the added column of `apply`, the method
/// of `fit`, the compared column of `diagnose`) refuse an empty or blank
/// name before any work, naming the flag and the value; nothing is written.
#[test]
fn empty_name_flags_are_refused_with_the_flag_and_value() {
    let d = TempDir::new().unwrap();
    fs::write(d.path().join("a.csv"), common::score_csv(300, 3)).unwrap();
    let fit_args = [
        "fit",
        "--method",
        "platt",
        "--score-kind",
        "margin",
        "--scores",
        "a.csv",
        "--out",
        "m.json",
    ];
    let o = run_bounded(d.path(), &fit_args, &[]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    // A probability file for diagnose: the map's output.
    let o = run_bounded(
        d.path(),
        &["apply", "m.json", "--scores", "a.csv", "--out", "p.csv"],
        &[],
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    for value in ["", " ", "\t"] {
        let value = value.to_string();
        let cases: Vec<(Vec<&str>, &str, &str)> = vec![
            (
                vec![
                    "apply", "m.json", "--scores", "a.csv", "--out", "o.csv", "--column", &value,
                ],
                "--column",
                "o.csv",
            ),
            (
                vec![
                    "fit",
                    "--method",
                    &value,
                    "--score-kind",
                    "margin",
                    "--scores",
                    "a.csv",
                    "--out",
                    "o.json",
                ],
                "--method",
                "o.json",
            ),
            (
                vec![
                    "diagnose",
                    "p.csv",
                    "--score-column",
                    "calibrated",
                    "--out",
                    "dd",
                    "--bootstrap",
                    "10",
                    "--compare",
                    &value,
                ],
                "--compare",
                "dd",
            ),
        ];
        for (args, flag, out) in cases {
            let o = run_bounded(d.path(), &args, &[]);
            assert_eq!(o.code, 2, "{args:?}: {}", o.stderr);
            let shown = value.replace('\t', "\\t");
            let want = format!("error: {flag} `{shown}`: the name is empty; ");
            assert!(
                o.stderr.starts_with(&want),
                "{args:?}: expected `{want}` in: {}",
                o.stderr
            );
            assert!(!d.path().join(out).exists(), "{args:?}: {out} written");
        }
    }
    // The untouched commands still work.
    let o = run_bounded(
        d.path(),
        &[
            "apply", "m.json", "--scores", "a.csv", "--out", "o.csv", "--column", "p",
        ],
        &[],
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
}

#[test]
fn a_file_that_is_not_csv_is_not_echoed() {
    let d = TempDir::new().unwrap();
    fs::write(
        d.path().join("accounts.csv"),
        "root:x:0:0:root:/root:/bin/bash\ndaemon:x:1:1:daemon:/usr/sbin:/usr/sbin/nologin\n",
    )
    .unwrap();
    let o = fit(d.path(), "accounts.csv", &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(&o.stderr, &["expected columns `score`, `label`"]);
    common::has(&o.stderr, &["the header has 1 column and does not look like CSV column names (it starts `root:x:0…`)"]);
    assert!(!o.stderr.contains("/bin/bash"), "{}", o.stderr);
    // A real CSV header is listed, names escaped.
    fs::write(d.path().join("other.csv"), "p,y\tz\n0.5,1\n").unwrap();
    let o = fit(d.path(), "other.csv", &[]);
    common::has(&o.stderr, &["the header has 2 columns: `p`, `y\\tz`"]);
}

fn gunzip(p: &Path) -> String {
    let mut s = String::new();
    flate2::read::GzDecoder::new(fs::File::open(p).unwrap())
        .read_to_string(&mut s)
        .unwrap();
    s
}

fn gzip(p: &Path, text: &str) {
    let mut e =
        flate2::write::GzEncoder::new(fs::File::create(p).unwrap(), flate2::Compression::fast());
    e.write_all(text.as_bytes()).unwrap();
    e.finish().unwrap();
}

#[test]
fn verify_and_report_on_damaged_or_interrupted_folders() {
    let d = TempDir::new().unwrap();
    let suite = common::write_suite(d.path(), 7, 3, "50");
    let out = d.path().join("out");
    common::run(&suite, &out, &[]);

    // --sample 0 compares nothing: refused.
    let o = run_bounded(d.path(), &["verify", "out", "--sample", "0"], &[]);
    assert_eq!(o.code, 2, "{}", o.stderr);
    common::has(&o.stderr, &["--sample 0 would compare nothing"]);
    assert!(!o.stdout.contains("match"), "{}", o.stdout);

    // Scratch of a killed verify (a process that has ended) is removed by
    // the next verify; a name that only looks similar is kept.
    let mut gone = Command::new("true").spawn().unwrap();
    let dead = gone.id();
    gone.wait().unwrap();
    let scratch = d.path().join(format!(".out.verify-{dead}"));
    fs::create_dir_all(scratch.join("figures")).unwrap();
    fs::write(scratch.join("figures/x.svg"), vec![b'x'; 1 << 20]).unwrap();
    let staging = d.path().join(format!("..out.verify-{dead}.partial"));
    fs::create_dir_all(&staging).unwrap();
    let lock = d.path().join(format!("..out.verify-{dead}.lock"));
    fs::write(&lock, format!("{dead}\n")).unwrap();
    let keep = d.path().join(".out.verify-notes");
    fs::write(&keep, "mine").unwrap();
    let o = run_bounded(d.path(), &["verify", "out", "--sample", "2"], &[]);
    assert_eq!(o.code, 0, "{}{}", o.stdout, o.stderr);
    assert!(
        o.stdout.contains("left by an interrupted verify"),
        "{}",
        o.stdout
    );
    assert!(!scratch.exists() && !staging.exists() && !lock.exists());
    assert!(keep.exists());

    // A unit table with missing repeats and a NaN value: report warns.
    let units = out.join("units.csv.gz");
    let text = gunzip(&units);
    let mut lines: Vec<String> = Vec::new();
    let mut nan_done = false;
    for (i, l) in text.lines().enumerate() {
        let cells: Vec<&str> = l.split(',').collect();
        if i > 0 && cells[0] == "a" && cells[2] == "1" && cells[3] == "isotonic" {
            continue; // drop repeat 1 of isotonic on task a
        }
        if i > 0 && !nan_done && cells[0] == "b" && cells[2] == "2" && cells[3] == "beta" {
            let mut c: Vec<String> = cells.iter().map(|s| s.to_string()).collect();
            c[5] = "NaN".to_string();
            lines.push(c.join(","));
            nan_done = true;
            continue;
        }
        lines.push(l.to_string());
    }
    assert!(nan_done);
    gzip(&units, &(lines.join("\n") + "\n"));
    let o = run_bounded(d.path(), &["report", "out"], &[]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    common::has(&o.stderr, &["task `a`, size 50, method `isotonic`: no unit rows for 1 of 3 repeats (repeat 1); its summaries and comparisons rest on 2 repeats"]);
    common::has(
        &o.stderr,
        &["task `b`, size 50, method `beta`: `log_loss` is NaN in 1 repeat(s) (repeat 2)"],
    );
    // The untouched folder gives no such warning.
    let clean = d.path().join("clean");
    common::run(&suite, &clean, &[]);
    let o = run_bounded(d.path(), &["report", "clean"], &[]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        !o.stderr.contains("no unit rows") && !o.stderr.contains("is NaN"),
        "{}",
        o.stderr
    );
}

/// A reader that stops reading (`plumbline check suite.toml | head`) ends the
/// command quietly: exit 0, no panic message. Every command prints its
/// terminal output through `commands::say`; `check` shows it here. The read
/// end is closed before the command writes, so the write meets a closed pipe.
#[test]
fn a_closed_stdout_pipe_is_not_a_panic() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let suite = root.join("suites/open-uci.toml");
    let mut child = Command::new(env!("CARGO_BIN_EXE_plumbline"))
        .args(["check", suite.to_str().unwrap()])
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    let mut err = String::new();
    child
        .stderr
        .take()
        .unwrap()
        .read_to_string(&mut err)
        .unwrap();
    let status = child.wait().unwrap();
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(status.code(), Some(0), "{err}");
}
