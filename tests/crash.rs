//! Crash safety: a run killed with SIGKILL at seeded random moments and
//! rerun ends with the same folder as an uninterrupted run; a torn journal
//! tail loses exactly the torn record; a journal of an edited suite or changed
//! data is refused with a message naming the change, and `--force` starts over.

mod common;

use std::fs;
use std::io::Write;
use std::process::Command as Proc;
use std::time::Instant;

use common::*;
use plumbline::run::{self, journal::Journal, RunOptions};
use tempfile::TempDir;

#[test]
fn sigkill_at_random_moments_then_rerun_gives_the_uninterrupted_folder() {
    let dir = TempDir::new().unwrap();
    let suite = write_suite(dir.path(), 3, 40, "40, 150, 400, 800");
    let full = dir.path().join("full");
    let t0 = Instant::now();
    run(&suite, &full, &["--threads", "1"]);
    let t = t0.elapsed();
    let out = dir.path().join("out");
    let mut seed = 0x5eed_u64;
    let mut interrupted = 0;
    for _ in 0..6 {
        let mut child = Proc::new(bin_path())
            .args([
                "run",
                suite.to_str().unwrap(),
                "--out",
                out.to_str().unwrap(),
                "--quiet",
                "--threads",
                "1",
            ])
            .spawn()
            .unwrap();
        // A moment within the first 90% of an uninterrupted run's time.
        std::thread::sleep(t.mul_f64(0.9 * uniform(&mut seed)));
        if child.try_wait().unwrap().is_none() {
            child.kill().unwrap(); // SIGKILL on Unix
            interrupted += 1;
        }
        child.wait().unwrap();
        if out.exists() {
            break;
        }
    }
    assert!(
        interrupted >= 3,
        "only {interrupted} runs were killed mid-way (run took {t:?})"
    );
    if !out.exists() {
        run(&suite, &out, &["--threads", "1"]);
    }
    assert_same_results(&full, &out);
    assert!(!dir.path().join(".out.partial").exists());
}

fn journal_lines(path: &std::path::Path) -> Vec<String> {
    fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(String::from)
        .collect()
}

#[test]
fn a_torn_journal_tail_loses_exactly_the_torn_record() {
    let dir = TempDir::new().unwrap();
    let suite = write_suite(dir.path(), 9, 3, "40, 200");
    let plan = plumbline::suite::load(&suite).unwrap();
    let key = plumbline::results::run_key(&plan, None);
    let opts = RunOptions {
        threads: Some(1),
        quiet: true,
    };
    let staging = dir.path().join("staging");
    fs::create_dir_all(&staging).unwrap();
    let (j, _) = Journal::open(&staging, &key, false).unwrap();
    let full = run::run(&plan, &opts, Vec::new(), &|u| j.append(u)).unwrap();
    drop(j);
    let path = staging.join(plumbline::run::journal::FILE_NAME);
    let lines = journal_lines(&path);
    let n = lines.len() - 1; // after the header
    assert_eq!(n, 12);

    // Truncated in the middle of the last record.
    let bytes = fs::read(&path).unwrap();
    let cut = bytes.len() - 1 - lines[n].len() / 2;
    fs::write(&path, &bytes[..cut]).unwrap();
    let (j, done) = Journal::open(&staging, &key, false).unwrap();
    assert_eq!((done.len(), j.dropped), (n - 1, 1));
    drop(j);
    let kept = journal_lines(&path);
    assert_eq!(kept[..], lines[..n], "the whole records are kept unchanged");

    // Garbage appended after whole records (two lines of it).
    let mut f = fs::OpenOptions::new().append(true).open(&path).unwrap();
    f.write_all(b"{\"task\":\"a\",\"si\n\x00\x00garbage")
        .unwrap();
    drop(f);
    let (j, done) = Journal::open(&staging, &key, false).unwrap();
    assert_eq!((done.len(), j.dropped), (n - 1, 2));
    // The resumed run runs the lost unit again and ends with the same table.
    let resumed = run::run(&plan, &opts, done, &|u| j.append(u)).unwrap();
    assert_eq!(resumed.resumed_units, n - 1);
    let (mut a, mut b) = (Vec::new(), Vec::new());
    full.table.write_csv(&mut a).unwrap();
    resumed.table.write_csv(&mut b).unwrap();
    assert!(a == b);
    drop(j);

    // A damaged record followed by whole ones is corruption, not a torn tail.
    let mut lines = journal_lines(&path);
    lines[3] = "not json".into();
    fs::write(&path, lines.join("\n") + "\n").unwrap();
    let err = Journal::open(&staging, &key, false).err().unwrap();
    assert!(
        err.contains("line 4 is damaged but line 5 after it is whole"),
        "{err}"
    );
}

#[test]
fn resuming_an_edited_suite_or_changed_data_is_refused() {
    let dir = TempDir::new().unwrap();
    let suite = write_suite(dir.path(), 9, 3, "40, 200");
    let out = dir.path().join("out");
    // An interrupted run: a journal with two units in the staging folder.
    let plan = plumbline::suite::load(&suite).unwrap();
    let staging = plumbline::run::output::staging_dir(&out);
    fs::create_dir_all(&staging).unwrap();
    let (j, _) = Journal::open(&staging, &plumbline::results::run_key(&plan, None), false).unwrap();
    let opts = RunOptions {
        threads: Some(1),
        quiet: true,
    };
    let keys = run::unit_keys(&plan);
    run::run_keys(&plan, &opts, &keys[..2], Vec::new(), &|u| j.append(u)).unwrap();
    drop(j);
    let text = fs::read_to_string(&suite).unwrap();

    let refused = |needle: &str| {
        let o = bin()
            .args([
                "run",
                suite.to_str().unwrap(),
                "--out",
                out.to_str().unwrap(),
                "--quiet",
            ])
            .assert()
            .failure()
            .get_output()
            .clone();
        let err = String::from_utf8_lossy(&o.stderr).to_string();
        assert!(err.contains(needle) && err.contains("--force"), "{err}");
        assert!(!out.exists());
    };
    fs::write(&suite, text.replace("repeats = 3", "repeats = 4")).unwrap();
    refused("the suite file was edited");
    fs::write(&suite, &text).unwrap();
    let a = fs::read(dir.path().join("a.csv")).unwrap();
    fs::write(dir.path().join("a.csv"), score_csv(1500, 77)).unwrap();
    refused("the data of task `a` changed");
    // --force discards the journal and starts over.
    run(&suite, &out, &["--force"]);
    // The original suite and data resume nothing but run cleanly too.
    fs::write(dir.path().join("a.csv"), a).unwrap();
    let again = dir.path().join("again");
    run(&suite, &again, &[]);
}
