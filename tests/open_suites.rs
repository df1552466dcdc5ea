//! Open-data suites through the real binary: base models turn a shipped
//! dataset into score pools (held-out and cross-fitted), the pool cache makes a
//! rerun skip training, and the protocol study compares held-out calibration
//! data with cross-fitting on a common test set.

use std::fs;

use assert_cmd::Command;

fn data_dir() -> String {
    format!("{}/data-open", env!("CARGO_MANIFEST_DIR")).replace('\\', "/")
}

fn suite(body: &str) -> (tempfile::TempDir, std::path::PathBuf) {
    let dir = tempfile::TempDir::new().unwrap();
    let p = dir.path().join("s.toml");
    fs::write(&p, body.replace("@DATA@", &data_dir())).unwrap();
    (dir, p)
}

const HEAD: &str = r#"seed = 3
repeats = 4
confidence = 0.95
metrics = ["log_loss", "brier"]
primary_metric = "log_loss"
open_data = "@DATA@"

[[method]]
id = "platt"
kind = "platt"

[[method]]
id = "isotonic"
kind = "isotonic"
pseudo_count = 1.0

[[model]]
id = "logistic"
kind = "logistic"
"#;

#[test]
fn held_out_and_cross_fitted_tasks_run_and_cache_their_pools() {
    let (dir, s) = suite(&format!(
        "name = \"open\"\nsizes = [50, 150]\nreference = \"platt\"\n{HEAD}\n\
         [[task]]\nid = \"wdbc-ho\"\ndata = \"wdbc\"\nmodel = \"logistic\"\n\n\
         [[task]]\nid = \"wdbc-cf\"\ndata = \"wdbc\"\nmodel = \"logistic\"\n\
         protocol = {{ kind = \"cross-fitted\", folds = 5, train_fraction = 0.5 }}\n"
    ));
    let out = dir.path().join("results").join("open");
    let run = |force: bool| {
        let mut c = Command::cargo_bin("plumbline").unwrap();
        c.args([
            "run",
            s.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ]);
        if force {
            c.arg("--force");
        }
        c.assert().success();
        serde_json::from_str::<serde_json::Value>(
            &fs::read_to_string(out.join("manifest.json")).unwrap(),
        )
        .unwrap()
    };
    let first = run(false);
    // WDBC: 569 rows (UCI), train fraction 0.5 -> 285 training rows (284.5
    // rounded half away from zero). Held-out: 284 unseen rows, 30% test -> 85
    // test rows (85.2 rounded), 199 reservoir.
    assert_eq!(first["tasks"][0]["reservoir"], 199);
    assert_eq!(first["tasks"][0]["test_rows"], 85);
    // Cross-fitted: out-of-fold scores on the 285 training rows form the reservoir.
    assert_eq!(first["tasks"][1]["reservoir"], 285);
    assert_eq!(first["tasks"][1]["test_rows"], 284);
    assert_eq!(first["score_pools"][0]["cache_hit"], false);
    let units = fs::read(out.join("units.csv.gz")).unwrap();
    let second = run(true);
    assert_eq!(second["score_pools"][0]["cache_hit"], true);
    assert_eq!(second["score_pools"][1]["cache_hit"], true);
    assert_eq!(
        fs::read(out.join("units.csv.gz")).unwrap(),
        units,
        "cached pools changed the results"
    );
}

#[test]
fn protocol_study_compares_variants_against_cross_fitting() {
    let (dir, s) = suite(&format!(
        "name = \"study\"\nsizes = [120, 240]\n{HEAD}\n\
         [protocol_study]\ntest_rows = 200\nfractions = [0.1, 0.3]\nfolds = 4\n\n\
         [[task]]\nid = \"wdbc\"\ndata = \"wdbc\"\nmodel = \"logistic\"\n"
    ));
    let out = dir.path().join("study");
    Command::cargo_bin("plumbline")
        .unwrap()
        .args([
            "run",
            s.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ])
        .assert()
        .success();
    let paired = fs::read_to_string(out.join("paired.csv")).unwrap();
    for v in [
        "wdbc@platt,120,held-out-0.1,cross-fitted-4,log_loss",
        "wdbc@isotonic,240,held-out-0.3,cross-fitted-4,brier",
    ] {
        assert!(paired.contains(v), "{v} missing from paired.csv");
    }
    let summary = fs::read_to_string(out.join("summary.md")).unwrap();
    assert!(summary.contains("protocol study"));
    // A study rejects a `reference` key: the reference is the cross-fitted variant.
    let (_d2, bad) = suite(&format!(
        "name = \"study\"\nsizes = [120]\nreference = \"platt\"\n{HEAD}\n[protocol_study]\ntest_rows = 200\n\n\
         [[task]]\nid = \"wdbc\"\ndata = \"wdbc\"\nmodel = \"logistic\"\n"
    ));
    let a = Command::cargo_bin("plumbline")
        .unwrap()
        .args(["check", bad.to_str().unwrap()])
        .assert()
        .failure();
    assert!(String::from_utf8_lossy(&a.get_output().stderr).contains("cross-fitted variant"));
}

#[test]
fn unknown_dataset_and_model_are_named() {
    let (_d, s) = suite(&format!(
        "name = \"x\"\nsizes = [50]\nreference = \"platt\"\n{HEAD}\n[[task]]\nid = \"t\"\ndata = \"wdcb\"\nmodel = \"logistic\"\n"
    ));
    let a = Command::cargo_bin("plumbline")
        .unwrap()
        .args(["check", s.to_str().unwrap()])
        .assert()
        .failure();
    let e = String::from_utf8_lossy(&a.get_output().stderr).to_string();
    assert!(e.contains("`wdcb`") && e.contains("wdbc"), "{e}");
    let (_d, s) = suite(&format!(
        "name = \"x\"\nsizes = [50]\nreference = \"platt\"\n{HEAD}\n[[task]]\nid = \"t\"\ndata = \"wdbc\"\nmodel = \"forest\"\n"
    ));
    let a = Command::cargo_bin("plumbline")
        .unwrap()
        .args(["check", s.to_str().unwrap()])
        .assert()
        .failure();
    assert!(String::from_utf8_lossy(&a.get_output().stderr).contains("`forest`"));
}
