//! Inputs for the two user-input parsers kept as regression tests: every file
//! under tests/fixtures/fuzz/ (inputs that once made a parser panic under
//! `examples/fuzz_parsers.rs`, and hand-made hostile inputs) must be answered
//! with Ok or a located error, never a panic. `scorefile-*.csv` go through
//! `data::scorefile::load` (columns of the shipped courier files),
//! `suite-*.toml` through `suite::parse` as if they sat in `suites/`.

use std::path::{Path, PathBuf};

use plumbline::calibrate::ScoreKind;
use plumbline::data::scorefile::{self, ScoreFileSpec};

fn inputs(prefix: &str) -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/fuzz");
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| {
            p.file_name()
                .and_then(|n| n.to_str())
                .is_some_and(|n| n.starts_with(prefix))
        })
        .collect();
    v.sort();
    v
}

#[test]
fn score_file_inputs_never_panic() {
    let files = inputs("scorefile-");
    assert!(!files.is_empty());
    for path in files {
        for truth in [None, Some("true_p".to_string())] {
            let spec = ScoreFileSpec {
                path: path.clone(),
                score_column: "p_late".into(),
                label_column: "late".into(),
                score_kind: ScoreKind::Probability,
                split_column: None,
                truth_column: truth,
                fold_column: None,
                origin: scorefile::Origin::Suite,
            };
            let r = std::panic::catch_unwind(|| scorefile::load(&spec).map(|_| ()));
            let r = r.unwrap_or_else(|_| panic!("{} panicked", path.display()));
            if let Err(e) = r {
                // A located message names the file.
                let name = path.file_name().unwrap().to_string_lossy().to_string();
                assert!(e.to_string().contains(&name), "{e}");
            }
        }
    }
}

#[test]
fn duplicate_header_column_is_rejected_with_both_positions() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/fuzz/scorefile-duplicate-column.csv");
    let spec = ScoreFileSpec {
        path,
        score_column: "p_late".into(),
        label_column: "late".into(),
        score_kind: ScoreKind::Probability,
        split_column: None,
        truth_column: None,
        fold_column: None,
        origin: scorefile::Origin::Suite,
    };
    let e = scorefile::load(&spec).err().unwrap().to_string();
    assert!(
        e.contains("scorefile-duplicate-column.csv:1: the header names column `p_late` twice (fields 2 and 4)"),
        "{e}"
    );
}

#[test]
fn suite_inputs_never_panic() {
    let files = inputs("suite-");
    assert!(!files.is_empty());
    let at = Path::new(env!("CARGO_MANIFEST_DIR")).join("suites/fuzz.toml");
    for path in files {
        let text = String::from_utf8_lossy(&std::fs::read(&path).unwrap()).into_owned();
        let r = std::panic::catch_unwind(|| {
            plumbline::suite::parse(&text, &at, String::new()).map(|_| ())
        });
        let r = r.unwrap_or_else(|_| panic!("{} panicked", path.display()));
        let e = r.expect_err("every kept suite input is invalid");
        assert!(e.to_string().contains("fuzz.toml:"), "{e}");
    }
}
