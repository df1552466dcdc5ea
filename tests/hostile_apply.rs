//! `plumbline apply` against a hostile output side, through the real binary:
//! a write that fails under a file-size limit, a pipe closed by its reader
//! (`| head`), a FIFO or a directory as `--out`, an interrupt mid-run, a stale
//! staging file and the longest file names. Every child runs under a 60 s
//! limit and is killed past it, so a hang fails the test instead of stalling
//! the suite (the limit is a guard, not a measurement).

mod common;

use std::fs;
use std::io::{BufRead, BufReader, Write};
use std::os::unix::fs::FileTypeExt;
use std::os::unix::process::ExitStatusExt;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::{bin_path, finish, uniform, Done};
use tempfile::TempDir;

const LIMIT: Duration = common::HANG_LIMIT;

/// `id,score,label` rows: probabilities rounded to 3 decimals, labels drawn
/// from a distorted curve.
fn scores_csv(n: usize, seed: u64) -> String {
    let mut st = seed;
    let mut s = String::from("id,score,label\n");
    for i in 0..n {
        let q = 0.02 + 0.96 * uniform(&mut st);
        let y = uniform(&mut st) < q;
        s.push_str(&format!("r{i},{:.3},{}\n", q * q, y as u8));
    }
    s
}

/// A folder with a fitted isotonic map (`map.json`) and a score file of `n`
/// rows (`scores.csv`); the map is fitted with `plumbline fit`.
fn setup(n: usize) -> (TempDir, PathBuf, PathBuf) {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let train = d.join("train.csv");
    fs::write(&train, scores_csv(400, 3)).unwrap();
    let map = d.join("map.json");
    let out = Command::new(bin_path())
        .args(["fit", "--method", "isotonic", "--scores"])
        .arg(&train)
        .arg("--out")
        .arg(&map)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let scores = d.join("scores.csv");
    fs::write(&scores, scores_csv(n, 11)).unwrap();
    (dir, map, scores)
}

fn apply_cmd(map: &Path, scores: &Path, out: &Path) -> Command {
    let mut c = Command::new(bin_path());
    c.arg("apply")
        .arg(map)
        .arg("--scores")
        .arg(scores)
        .arg("--out")
        .arg(out);
    c
}

fn run(mut c: Command, what: &str) -> Done {
    let child = c
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    finish(child, what)
}

/// Names in `d`, sorted.
fn listing(d: &Path) -> Vec<String> {
    let mut v: Vec<String> = fs::read_dir(d)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

fn no_staging(d: &Path) {
    let left: Vec<String> = listing(d)
        .into_iter()
        .filter(|n| n.ends_with(".partial"))
        .collect();
    assert!(left.is_empty(), "staging files left behind: {left:?}");
}

/// Under a file-size limit the write that crosses it fails: the command says
/// so naming the requested file (once, with the system's reason once), exits
/// non-zero, leaves no staging file and keeps the file it was to replace.
#[test]
fn write_failure_under_a_file_size_limit_names_the_target() {
    let (dir, map, scores) = setup(60_000);
    let d = dir.path();
    for name in ["out.csv", "out.csv.gz"] {
        let out = d.join(name);
        fs::write(&out, "earlier output\n").unwrap();
        let before = listing(d);
        // 64 blocks of 512 bytes (dash) or 1 KiB (bash): far below the
        // output of 60,000 rows, even gzipped.
        let mut c = Command::new("sh");
        c.arg("-c")
            .arg("ulimit -f 64 && exec \"$0\" \"$@\"")
            .arg(bin_path())
            .arg("apply")
            .arg(&map)
            .arg("--scores")
            .arg(&scores)
            .arg("--out")
            .arg(&out);
        let done = run(c, name);
        assert_eq!(
            done.status.code(),
            Some(2),
            "{name}: a reported failure, not a signal: {:?} {}",
            done.status,
            done.stderr
        );
        let want = format!("{}: cannot write: ", out.display());
        assert!(done.stderr.contains(&want), "{name}: {}", done.stderr);
        assert!(!done.stderr.contains(".partial"), "{}", done.stderr);
        assert_eq!(
            done.stderr.matches("os error").count(),
            1,
            "the system's reason once: {}",
            done.stderr
        );
        assert_eq!(fs::read_to_string(&out).unwrap(), "earlier output\n");
        assert_eq!(listing(d), before);
        no_staging(d);
    }
}

/// `apply --out - | head -1`: the reader of stdout goes away while rows are
/// still coming. Every run ends, quietly, with exit 0; half the runs close at
/// once, half after a pause that lets the stdout pipe fill and the reader
/// stage run ahead and wait for a free batch.
#[test]
fn closed_stdout_ends_quietly_every_time() {
    let (dir, map, scores) = setup(200_000);
    for i in 0..20 {
        let mut child = apply_cmd(&map, &scores, Path::new("-"))
            .stdin(Stdio::null())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        let mut first = String::new();
        BufReader::new(child.stdout.as_mut().unwrap())
            .read_line(&mut first)
            .unwrap();
        assert_eq!(first, "id,score,label,calibrated\n");
        if i % 2 == 1 {
            std::thread::sleep(Duration::from_millis(300));
        }
        drop(child.stdout.take());
        let done = finish(child, &format!("run {i}"));
        assert_eq!(
            done.status.code(),
            Some(0),
            "run {i}: {:?} {}",
            done.status,
            done.stderr
        );
        assert_eq!(done.stderr, "", "run {i}: quiet");
    }
    no_staging(dir.path());
}

/// Join a FIFO's reader thread once the writer has ended; fail (leaving the
/// thread blocked) if it does not end, as when nothing ever opened the FIFO.
fn join_within<T>(h: std::thread::JoinHandle<T>, what: &str) -> T {
    let start = Instant::now();
    while !h.is_finished() {
        assert!(
            start.elapsed() < LIMIT,
            "{what}: the FIFO's reader never got an end of file"
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    h.join().unwrap()
}

fn mkfifo(p: &Path) {
    let st = Command::new("mkfifo").arg(p).status().unwrap();
    assert!(st.success(), "mkfifo {}", p.display());
}

/// A FIFO as `--out` is written in place: it is still a FIFO afterwards and
/// its reader got every row in order.
#[test]
fn fifo_out_is_written_in_place() {
    let n = 20_000;
    let (dir, map, scores) = setup(n);
    let d = dir.path();
    let fifo = d.join("calibrated.fifo");
    mkfifo(&fifo);
    let reader = {
        let fifo = fifo.clone();
        std::thread::spawn(move || fs::read_to_string(&fifo).unwrap())
    };
    let done = run(apply_cmd(&map, &scores, &fifo), "fifo");
    assert!(done.status.success(), "{}", done.stderr);
    assert!(done.stdout.is_empty());
    let ft = fs::symlink_metadata(&fifo).unwrap().file_type();
    assert!(ft.is_fifo(), "the FIFO was replaced: {ft:?}");
    let text = join_within(reader, "fifo");
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), n + 1);
    assert_eq!(lines[0], "id,score,label,calibrated");
    for (i, l) in lines[1..].iter().enumerate() {
        assert!(l.starts_with(&format!("r{i},")), "row {i}: {l}");
    }
    no_staging(d);
}

/// A FIFO whose reader takes one line and closes it ends like a closed
/// stdout: exit 0, and the FIFO stays.
#[test]
fn fifo_closed_by_its_reader_ends_quietly() {
    let (dir, map, scores) = setup(200_000);
    let d = dir.path();
    let fifo = d.join("head.fifo");
    mkfifo(&fifo);
    let reader = {
        let fifo = fifo.clone();
        std::thread::spawn(move || {
            let mut first = String::new();
            BufReader::new(fs::File::open(&fifo).unwrap())
                .read_line(&mut first)
                .unwrap();
            first
        })
    };
    let done = run(apply_cmd(&map, &scores, &fifo), "closed fifo");
    assert!(fs::symlink_metadata(&fifo).unwrap().file_type().is_fifo());
    assert_eq!(
        join_within(reader, "closed fifo"),
        "id,score,label,calibrated\n"
    );
    assert_eq!(done.status.code(), Some(0), "{}", done.stderr);
    assert_eq!(done.stderr, "");
    no_staging(d);
}

/// A directory as `--out` is refused with its name before any work; the
/// directory and what it holds are untouched.
#[test]
fn directory_out_is_refused() {
    let (dir, map, scores) = setup(100);
    let d = dir.path();
    let out = d.join("results");
    fs::create_dir(&out).unwrap();
    fs::write(out.join("keep.txt"), "kept").unwrap();
    let before = listing(d);
    let done = run(apply_cmd(&map, &scores, &out), "directory");
    assert_eq!(done.status.code(), Some(2), "{}", done.stderr);
    assert!(
        done.stderr
            .contains(&format!("{}: is a directory", out.display())),
        "{}",
        done.stderr
    );
    assert!(out.is_dir());
    assert_eq!(listing(&out), ["keep.txt"]);
    assert_eq!(fs::read_to_string(out.join("keep.txt")).unwrap(), "kept");
    assert_eq!(listing(d), before);
    // Before any work: even a missing score file is not looked at first.
    let done = run(
        apply_cmd(&map, &d.join("missing.csv"), &out),
        "directory first",
    );
    assert!(done.stderr.contains("is a directory"), "{}", done.stderr);
}

/// Output names up to the usual 255-byte limit work (the staging name is
/// shortened, not the target's), and leave no staging file.
#[test]
fn long_output_names_work() {
    let n = 500;
    let (dir, map, scores) = setup(n);
    let d = dir.path();
    for len in [246, 247, 250, 255] {
        let name = format!("{}.csv", "c".repeat(len - 4));
        assert_eq!(name.len(), len);
        let out = d.join(&name);
        let done = run(apply_cmd(&map, &scores, &out), &format!("{len} bytes"));
        assert!(done.status.success(), "{len} bytes: {}", done.stderr);
        let text = fs::read_to_string(&out).unwrap();
        assert_eq!(text.lines().count(), n + 1, "{len} bytes");
        no_staging(d);
    }
}

/// A staging file left by a killed earlier run (power cut, SIGKILL) is
/// reused and gone after the next run for the same target.
#[test]
fn stale_staging_file_is_cleared_by_the_next_run() {
    let (dir, map, scores) = setup(300);
    let d = dir.path();
    fs::write(d.join(".out.csv.partial"), "half a file").unwrap();
    let out = d.join("out.csv");
    let done = run(apply_cmd(&map, &scores, &out), "after a crash");
    assert!(done.status.success(), "{}", done.stderr);
    assert_eq!(fs::read_to_string(&out).unwrap().lines().count(), 301);
    no_staging(d);
}

/// SIGINT or SIGTERM mid-run (rows still arriving on stdin) removes the
/// staging file and ends the process by that signal; no output appears.
#[test]
fn interrupt_removes_the_staging_file() {
    let (dir, map, _) = setup(10);
    let d = dir.path();
    let text = scores_csv(5_000, 5);
    for (sig, name) in [(2, "INT"), (15, "TERM")] {
        let out = d.join(format!("interrupted-{name}.csv"));
        let mut child = apply_cmd(&map, Path::new("-"), &out)
            .stdin(Stdio::piped())
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        // Rows go in and stdin stays open, so the command is mid-run.
        let mut stdin = child.stdin.take().unwrap();
        stdin.write_all(text.as_bytes()).unwrap();
        let staging = d.join(format!(".interrupted-{name}.csv.partial"));
        let start = Instant::now();
        while !staging.exists() {
            assert!(start.elapsed() < LIMIT, "{name}: no staging file appeared");
            std::thread::sleep(Duration::from_millis(20));
        }
        let st = Command::new("kill")
            .arg(format!("-{name}"))
            .arg(child.id().to_string())
            .status()
            .unwrap();
        assert!(st.success());
        let done = finish(child, name);
        drop(stdin);
        assert_eq!(done.status.signal(), Some(sig), "{name}: {:?}", done.status);
        assert!(!out.exists(), "{name}: no output");
        no_staging(d);
    }
}
