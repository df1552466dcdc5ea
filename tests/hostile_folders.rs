//! Output folders that cannot lose a user's files, through the real binary:
//! `--force` replaces only a previous results folder (never an unrelated
//! folder, the current directory or a folder holding the suite), a second
//! writer is refused while the folder's lock is held, a stale lock is taken
//! over, and suite names and ids that would become unsafe paths or clash with
//! the report's figures are refused by `check` with their line. The same
//! guard covers `merge` and `diagnose`. An interrupted `verify` removes its
//! scratch folder at once.

mod common;

use std::fs;
use std::path::{Path, PathBuf};

use common::*;
use tempfile::TempDir;

/// Every file under `dir` with its bytes.
fn snapshot(dir: &Path) -> Vec<(String, Vec<u8>)> {
    files(dir)
        .into_iter()
        .map(|f| {
            let b = fs::read(dir.join(&f)).unwrap();
            (f, b)
        })
        .collect()
}

/// Run the binary in `cwd`, expect failure, and return standard error.
fn fails_in<S: AsRef<std::ffi::OsStr>>(cwd: &Path, args: &[S]) -> String {
    let o = bin()
        .current_dir(cwd)
        .args(args)
        .assert()
        .failure()
        .get_output()
        .clone();
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// No lock, staging or replaced folder left beside `out`.
fn no_leftovers(out: &Path) {
    let name = out.file_name().unwrap().to_string_lossy();
    for suffix in ["lock", "partial", "old"] {
        let p = out.with_file_name(format!(".{name}.{suffix}"));
        assert!(!p.exists(), "{} left behind", p.display());
    }
}

/// A project folder `proj` holding the suite and its score files.
struct Project {
    _dir: TempDir,
    root: PathBuf,
    proj: PathBuf,
    suite: PathBuf,
}

impl Project {
    fn new() -> Self {
        let dir = TempDir::new().unwrap();
        let root = dir.path().canonicalize().unwrap();
        let proj = root.join("proj");
        fs::create_dir(&proj).unwrap();
        let suite = write_suite(&proj, 3, 2, "40");
        Project {
            _dir: dir,
            root,
            proj,
            suite,
        }
    }
    fn s(&self) -> &str {
        self.suite.to_str().unwrap()
    }
}

fn run_args<'a>(suite: &'a str, out: &'a str) -> Vec<&'a str> {
    vec!["run", suite, "--out", out, "--quiet", "--force"]
}

#[test]
fn force_does_not_replace_a_folder_that_is_not_a_results_folder() {
    let p = Project::new();
    let docs = p.root.join("docs");
    fs::create_dir_all(docs.join("deep")).unwrap();
    fs::write(docs.join("notes.md"), "my notes\n").unwrap();
    fs::write(docs.join("deep").join("draft.txt"), "draft\n").unwrap();
    // A manifest.json another tool wrote does not make it a results folder.
    fs::write(
        docs.join("manifest.json"),
        r#"{"tool": "other", "version": "1"}"#,
    )
    .unwrap();
    let before = snapshot(&docs);
    let err = fails_in(&p.root, &run_args(p.s(), docs.to_str().unwrap()));
    has(
        &err,
        &[
            "docs",
            "refusing to replace",
            "not a plumbline results folder",
            "--out",
        ],
    );
    assert_eq!(snapshot(&docs), before, "a file of docs changed");
    no_leftovers(&docs);
}

#[test]
fn force_does_not_replace_the_current_directory_or_a_folder_holding_the_suite() {
    let p = Project::new();
    let sub = p.proj.join("sub");
    fs::create_dir(&sub).unwrap();
    fs::write(sub.join("keep.txt"), "keep\n").unwrap();
    let before = snapshot(&p.root);
    // The current directory, by its full path.
    let err = fails_in(&sub, &run_args(p.s(), sub.to_str().unwrap()));
    has(&err, &["sub", "it is the current directory"]);
    // `.` and `..` name no folder.
    for out in [".", ".."] {
        let err = fails_in(&sub, &run_args(p.s(), out));
        has(&err, &["must end in a folder name"]);
    }
    // A parent of the current directory (which also holds the suite).
    let err = fails_in(&sub, &run_args(p.s(), p.proj.to_str().unwrap()));
    has(&err, &["contains the current directory"]);
    let err = fails_in(&sub, &run_args(p.s(), "../../proj"));
    has(&err, &["contains the current directory"]);
    // A folder holding the suite, seen from elsewhere; even one that looks
    // like a results folder.
    fs::write(
        p.proj.join("manifest.json"),
        r#"{"tool": "plumbline", "version": "0.1.0"}"#,
    )
    .unwrap();
    let before_with_manifest = snapshot(&p.root);
    let err = fails_in(&p.root, &run_args(p.s(), "proj"));
    has(&err, &["proj", "suite.toml", "an input of this command"]);
    assert_eq!(snapshot(&p.root), before_with_manifest);
    fs::remove_file(p.proj.join("manifest.json")).unwrap();
    assert_eq!(snapshot(&p.root), before, "a file changed");
    assert!(p.suite.exists());
}

#[test]
fn force_replaces_a_previous_results_folder() {
    let p = Project::new();
    let out = p.root.join("results").join("scale");
    run(&p.suite, &out, &[]);
    fs::write(out.join("stale.txt"), "from before\n").unwrap();
    // Without --force: a clear refusal, the folder untouched.
    let before = snapshot(&out);
    let err = fails_in(
        &p.root,
        &["run", p.s(), "--out", out.to_str().unwrap(), "--quiet"],
    );
    has(&err, &["already exists", "--force"]);
    assert_eq!(snapshot(&out), before);
    no_leftovers(&out);
    run(&p.suite, &out, &["--force"]);
    assert!(!out.join("stale.txt").exists());
    for f in ["manifest.json", "units.csv.gz", "summary.md"] {
        assert!(out.join(f).exists(), "{f} missing");
    }
    no_leftovers(&out);
    // An empty folder may be replaced too.
    let empty = p.root.join("empty");
    fs::create_dir(&empty).unwrap();
    run(&p.suite, &empty, &["--force"]);
    assert!(empty.join("units.csv.gz").exists());
}

#[test]
fn a_second_writer_is_refused_while_the_lock_is_held() {
    let p = Project::new();
    let out = p.root.join("r");
    let lock = p.root.join(".r.lock");
    let me = format!("{}\n", std::process::id());
    fs::write(&lock, &me).unwrap();
    for extra in [&[][..], &["--force"][..]] {
        let mut args = vec!["run", p.s(), "--out", "r", "--quiet"];
        args.extend_from_slice(extra);
        let err = fails_in(&p.root, &args);
        has(
            &err,
            &[
                "r is being written by another plumbline process",
                &format!("PID {}", std::process::id()),
                ".r.lock",
            ],
        );
        assert!(!err.contains(".partial"), "{err}");
        assert_eq!(fs::read_to_string(&lock).unwrap(), me, "lock was touched");
        assert!(!out.exists());
        assert!(!p.root.join(".r.partial").exists());
    }
    // A finished folder is not replaced while another writer holds the lock.
    fs::remove_file(&lock).unwrap();
    run(&p.suite, &out, &[]);
    let before = snapshot(&out);
    fs::write(&lock, &me).unwrap();
    let err = fails_in(&p.root, &run_args(p.s(), "r"));
    has(&err, &["PID"]);
    assert_eq!(snapshot(&out), before);
    // `report` rewrites the folder's tables: it is a writer too and is
    // refused while the lock is held, leaving the folder as it was; `report
    // --task` only reads and still answers.
    let err = fails_in(&p.root, &["report", "r"]);
    has(
        &err,
        &["r is being written by another plumbline process", "PID"],
    );
    assert_eq!(snapshot(&out), before);
    let ok = std::process::Command::new(env!("CARGO_BIN_EXE_plumbline"))
        .current_dir(&p.root)
        .args(["report", "r", "--task", "a"])
        .output()
        .unwrap();
    assert!(
        ok.status.success(),
        "{}",
        String::from_utf8_lossy(&ok.stderr)
    );
    fs::remove_file(&lock).unwrap();
    std::process::Command::new(env!("CARGO_BIN_EXE_plumbline"))
        .current_dir(&p.root)
        .args(["report", "r"])
        .output()
        .map(|o| assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr)))
        .unwrap();
    assert!(!lock.exists(), "report left its lock behind");
}

#[cfg(target_os = "linux")]
#[test]
fn a_stale_lock_is_taken_over_with_a_note() {
    let p = Project::new();
    let out = p.root.join("r");
    // Above the largest process id Linux hands out (2^22): never running.
    fs::write(p.root.join(".r.lock"), "4194305\n").unwrap();
    let o = bin()
        .current_dir(&p.root)
        .args(["run", p.s(), "--out", "r", "--quiet"])
        .assert()
        .success()
        .get_output()
        .clone();
    let err = String::from_utf8_lossy(&o.stderr);
    has(&err, &["took over the lock", "4194305"]);
    assert!(out.join("units.csv.gz").exists());
    no_leftovers(&out);
}

/// The suite of `common` with one line replaced.
fn edited_suite(p: &Project, from: &str, to: &str) -> PathBuf {
    let text = fs::read_to_string(&p.suite).unwrap();
    assert!(text.contains(from), "{from}");
    let s = p.proj.join("edited.toml");
    fs::write(&s, text.replacen(from, to, 1)).unwrap();
    s
}

fn line_of(path: &Path, needle: &str) -> usize {
    fs::read_to_string(path)
        .unwrap()
        .lines()
        .position(|l| l.contains(needle))
        .unwrap()
        + 1
}

#[test]
fn check_refuses_reserved_and_path_like_names_with_their_line() {
    let p = Project::new();
    let long = format!("name = \"{}\"", "n".repeat(300));
    let cases: Vec<(&str, String, &str, &str)> = vec![
        // (line replaced, new line, key in the message, words in the message);
        // the message points at the new line.
        (
            "name = \"scale\"",
            "name = \"../../x\"".into(),
            "name",
            "'/'",
        ),
        ("name = \"scale\"", "name = \"/abs\"".into(), "name", "'/'"),
        (
            "name = \"scale\"",
            "name = \"..\"".into(),
            "name",
            "start with",
        ),
        (
            "name = \"scale\"",
            "name = \"a\\u0000b\"".into(),
            "name",
            "'\\0'",
        ),
        ("name = \"scale\"", long, "name", "300 characters"),
        (
            "id = \"a\"",
            "id = \"ranks\"".into(),
            "task #1.id",
            "reserved",
        ),
        (
            "id = \"a\"",
            "id = \"Thresholds\"".into(),
            "task #1.id",
            "reserved",
        ),
        ("id = \"a\"", "id = \"../a\"".into(), "task #1.id", "'/'"),
        (
            "id = \"platt\"",
            "id = \"..\"".into(),
            "method #1.id",
            "start",
        ),
    ];
    for (from, to, key, why) in &cases {
        let s = edited_suite(&p, from, to);
        let line = line_of(&s, to);
        let err = fails_in(&p.root, &["check", s.to_str().unwrap()]);
        has(
            &err,
            &[&format!("edited.toml:{line}:"), &format!("{key}: "), why],
        );
    }
    // Two task ids differing in case only: located at the second one.
    let s = edited_suite(&p, "id = \"a\"", "id = \"B\"");
    let line = line_of(&s, "id = \"b\"");
    let err = fails_in(&p.root, &["check", s.to_str().unwrap()]);
    has(
        &err,
        &[
            &format!("edited.toml:{line}:"),
            "task `b`.id: ",
            "only in letter case",
        ],
    );
    // Nothing was written anywhere.
    assert!(!p.root.join("results").exists());
    assert!(!p.root.join("x").exists());
}

#[test]
fn run_with_a_path_like_suite_name_writes_nothing() {
    let p = Project::new();
    let s = edited_suite(&p, "name = \"scale\"", "name = \"../../escaped\"");
    let work = p.root.join("work");
    fs::create_dir(&work).unwrap();
    let err = fails_in(&work, &["run", s.to_str().unwrap(), "--quiet"]);
    has(&err, &["name: `../../escaped`"]);
    assert!(!work.join("results").exists());
    assert!(!p.root.parent().unwrap().join("escaped").exists());
    assert!(files(&p.root).iter().all(|f| !f.contains("escaped")));
}

#[test]
fn merge_uses_the_same_guard() {
    let p = Project::new();
    let shards: Vec<PathBuf> = (1..=2)
        .map(|k| {
            let out = p.root.join(format!("s{k}"));
            run(&p.suite, &out, &["--shard", &format!("{k}/2")]);
            out
        })
        .collect();
    let merge = |out: &str, force: bool| -> Vec<String> {
        let mut a = vec!["merge".to_string()];
        a.extend(shards.iter().map(|s| s.display().to_string()));
        a.extend(["--out".into(), out.into(), "--quiet".into()]);
        if force {
            a.push("--force".into());
        }
        a
    };
    let docs = p.root.join("docs");
    fs::create_dir(&docs).unwrap();
    fs::write(docs.join("notes.md"), "mine\n").unwrap();
    has(
        &fails_in(&p.root, &merge("docs", true)),
        &["docs", "not a plumbline results folder"],
    );
    assert!(docs.join("notes.md").exists());
    // A shard folder is a results folder, but an input of this merge.
    let before = snapshot(&shards[0]);
    has(
        &fails_in(&p.root, &merge("s1", true)),
        &["s1", "an input of this command"],
    );
    assert_eq!(snapshot(&shards[0]), before);
    // The lock is honoured.
    fs::write(p.root.join(".m.lock"), format!("{}\n", std::process::id())).unwrap();
    has(
        &fails_in(&p.root, &merge("m", false)),
        &["being written", "PID"],
    );
    assert!(!p.root.join("m").exists());
    fs::remove_file(p.root.join(".m.lock")).unwrap();
    // A previous merged folder is replaced.
    for force in [false, true] {
        bin()
            .current_dir(&p.root)
            .args(merge("m", force))
            .assert()
            .success();
    }
    assert!(p.root.join("m").join("units.csv.gz").exists());
    no_leftovers(&p.root.join("m"));
}

#[test]
fn diagnose_uses_the_same_guard() {
    let p = Project::new();
    let f = p.root.join("scores.csv");
    let mut x = 5u64;
    let mut text = String::from("score,label\n");
    for _ in 0..300 {
        let q = 0.02 + 0.96 * uniform(&mut x);
        text.push_str(&format!("{q:.6},{}\n", (uniform(&mut x) < q) as u8));
    }
    fs::write(&f, text).unwrap();
    let diag = |out: &str, force: bool| -> Vec<String> {
        let mut a: Vec<String> = ["diagnose", "scores.csv", "--bootstrap", "20", "--out", out]
            .iter()
            .map(|s| s.to_string())
            .collect();
        if force {
            a.push("--force".into());
        }
        a
    };
    let docs = p.root.join("docs");
    fs::create_dir(&docs).unwrap();
    fs::write(docs.join("notes.md"), "mine\n").unwrap();
    has(
        &fails_in(&p.root, &diag("docs", true)),
        &["docs", "not a plumbline results folder"],
    );
    assert!(docs.join("notes.md").exists());
    no_leftovers(&docs);
    // A folder holding the score file.
    let holder = p.root.join("holder");
    fs::create_dir(&holder).unwrap();
    fs::copy(&f, holder.join("scores.csv")).unwrap();
    let a: Vec<&str> = vec![
        "diagnose",
        "holder/scores.csv",
        "--bootstrap",
        "20",
        "--out",
        "holder",
        "--force",
    ];
    has(&fails_in(&p.root, &a), &["holder", "scores.csv", "input"]);
    assert!(holder.join("scores.csv").exists());
    // The lock is honoured.
    fs::write(p.root.join(".d.lock"), format!("{}\n", std::process::id())).unwrap();
    has(
        &fails_in(&p.root, &diag("d", true)),
        &["being written", "PID"],
    );
    assert!(!p.root.join("d").exists());
    fs::remove_file(p.root.join(".d.lock")).unwrap();
    // Its own previous folder is replaced.
    bin()
        .current_dir(&p.root)
        .args(diag("d", false))
        .assert()
        .success();
    let m: serde_json::Value =
        serde_json::from_slice(&fs::read(p.root.join("d").join("manifest.json")).unwrap()).unwrap();
    assert_eq!(m["tool"], "plumbline");
    assert_eq!(m["command"], "diagnose");
    bin()
        .current_dir(&p.root)
        .args(diag("d", true))
        .assert()
        .success();
    assert!(p.root.join("d").join("metrics.csv").exists());
    no_leftovers(&p.root.join("d"));
}

/// A full `verify` interrupted while it reruns the suite (SIGINT, SIGTERM,
/// SIGHUP) removes its scratch at once (the rerun's staging folder, its lock
/// and the scratch folder), ends by that signal, and leaves the verified
/// folder as it was.
#[cfg(unix)]
#[test]
fn interrupted_verify_removes_its_scratch_at_once() {
    use std::os::unix::process::ExitStatusExt;
    use std::process::{Command, Stdio};
    use std::time::{Duration, Instant};

    let dir = TempDir::new().unwrap();
    let d = dir.path();
    // Enough units that the rerun is still going when the signal arrives.
    let suite = write_suite(d, 11, 60, "100, 200, 400, 800");
    let out = d.join("out");
    run(&suite, &out, &[]);
    let before = snapshot(&out);
    let verify_entries = || -> Vec<String> {
        fs::read_dir(d)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n.contains(".verify-"))
            .collect()
    };
    for (sig, name) in [(2, "INT"), (15, "TERM"), (1, "HUP")] {
        let mut child = Command::new(bin_path())
            .current_dir(d)
            .args(["verify", "out", "--threads", "1"])
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        // The rerun's staging folder appears once it has taken its lock.
        let staging = d.join(format!("..out.verify-{}.partial", child.id()));
        let start = Instant::now();
        while !staging.exists() {
            if let Some(st) = child.try_wait().unwrap() {
                panic!("{name}: verify ended ({st:?}) before its rerun could be interrupted");
            }
            if start.elapsed() > HANG_LIMIT {
                let _ = child.kill();
                let _ = child.wait();
                panic!("{name}: no rerun staging folder after {HANG_LIMIT:?}");
            }
            std::thread::sleep(Duration::from_millis(5));
        }
        assert!(Command::new("kill")
            .arg(format!("-{name}"))
            .arg(child.id().to_string())
            .status()
            .unwrap()
            .success());
        let done = finish(child, &format!("verify after SIG{name}"));
        assert_eq!(
            done.status.signal(),
            Some(sig),
            "{name}: {:?} {}",
            done.status,
            done.stderr
        );
        assert_eq!(
            verify_entries(),
            Vec::<String>::new(),
            "{name}: scratch left"
        );
        assert!(
            snapshot(&out) == before,
            "{name}: the verified folder changed"
        );
    }
}
