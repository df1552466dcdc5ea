//! A run interrupted part-way resumes from its journal and ends with the same
//! bytes as an uninterrupted run: a finished unit is never lost or redone.

use std::fs;

use plumbline::run::{self, journal::Journal, RunOptions};

const SUITE: &str = r#"name = "resume"
seed = 11
repeats = 6
sizes = [30, 90]
reference = "platt"
metrics = ["log_loss", "brier"]
primary_metric = "log_loss"

[[method]]
id = "platt"
kind = "platt"

[[method]]
id = "isotonic"
kind = "isotonic"

[[task]]
id = "t"
scores = "t.csv"
score_column = "s"
label_column = "y"
score_kind = "margin"
"#;

#[test]
fn interrupted_run_resumes_from_the_journal() {
    let dir = tempfile::TempDir::new().unwrap();
    let mut csv = String::from("s,y\n");
    for i in 0..400 {
        let s = (i as f64 * 0.37).sin() * 3.0;
        let y = ((i * 7919) % 13) as f64 / 13.0 < 1.0 / (1.0 + (-s).exp());
        csv.push_str(&format!("{s:.5},{}\n", y as u8));
    }
    fs::write(dir.path().join("t.csv"), csv).unwrap();
    let suite = dir.path().join("s.toml");
    fs::write(&suite, SUITE).unwrap();
    let plan = plumbline::suite::load(&suite).unwrap();
    let key = plumbline::results::run_key(&plan, None);
    let opts = RunOptions {
        threads: Some(1),
        quiet: true,
    };

    // Uninterrupted reference run.
    let full = run::run(&plan, &opts, Vec::new(), &|_| Ok(())).unwrap();

    // Interrupted run: the journal accepts 5 units, then the "disk" fails.
    let staging = dir.path().join("staging");
    fs::create_dir_all(&staging).unwrap();
    let (journal, done) = Journal::open(&staging, &key, false).unwrap();
    assert!(done.is_empty());
    let count = std::sync::atomic::AtomicUsize::new(0);
    let res = run::run(&plan, &opts, Vec::new(), &|u| {
        if count.fetch_add(1, std::sync::atomic::Ordering::SeqCst) < 5 {
            journal.append(u)
        } else {
            Err("simulated failure".into())
        }
    });
    assert!(res.is_err());
    drop(journal);

    // Resume: 5 units come from the journal, the rest are run.
    let (journal, done) = Journal::open(&staging, &key, false).unwrap();
    assert_eq!(done.len(), 5);
    let resumed = run::run(&plan, &opts, done, &|u| journal.append(u)).unwrap();
    assert_eq!(resumed.resumed_units, 5);
    let (mut a, mut b) = (Vec::new(), Vec::new());
    full.table.write_csv(&mut a).unwrap();
    resumed.table.write_csv(&mut b).unwrap();
    assert_eq!(String::from_utf8(a).unwrap(), String::from_utf8(b).unwrap());

    // A journal written for another suite is refused, naming the change,
    // and discarded only on request.
    drop(journal);
    let mut other = key.clone();
    other.suite_sha256 = "0".repeat(64);
    let err = Journal::open(&staging, &other, false).err().unwrap();
    assert!(err.contains("the suite file was edited"), "{err}");
    let (_j, done) = Journal::open(&staging, &other, true).unwrap();
    assert!(done.is_empty());
}
