//! Inputs for the three user-input readers kept as regression tests: every
//! file under tests/fixtures/fuzz/ (inputs that once made a reader panic under
//! `examples/fuzz_parsers.rs`, and hand-made hostile inputs) must be answered
//! with Ok or a located error, never a panic. `scorefile-*.csv` go through
//! `data::scorefile::load` (columns of the shipped courier files),
//! `suite-*.toml` through `suite::parse` as if they sat in `suites/`, and
//! `map-*.json` through `mapfile::from_bytes`, the reader of `apply`; a map
//! that loads must predict a probability in [0, 1] for every valid score.
//!
//! The hand-made maps carry the checksum of their own content, so each one
//! reaches the check it is made for; after editing one, seal it again with
//! `cargo run --example fuzz_parsers -- --reseal tests/fixtures/fuzz/map-NAME.json`.

use std::path::{Path, PathBuf};

use plumbline::calibrate::ScoreKind;
use plumbline::data::scorefile::{self, ScoreFileSpec};
use plumbline::mapfile;
use serde_json::{json, Value};

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

/// Valid scores of each kind, from the ends of the double range inwards: a
/// map that loads must turn each into a probability.
fn valid_scores(kind: ScoreKind) -> Vec<f64> {
    match kind {
        ScoreKind::Probability => vec![
            0.0,
            5e-324,
            1e-300,
            1e-12,
            0.01,
            0.25,
            0.5,
            0.99,
            0.9999999999999999,
            1.0,
        ],
        ScoreKind::Margin => vec![
            f64::MIN,
            -1e308,
            -9e307,
            -1e300,
            -40.0,
            -1.0,
            -5e-324,
            0.0,
            1.0,
            40.0,
            1e300,
            9e307,
            1e308,
            f64::MAX,
        ],
    }
}

/// Load `bytes` as the map file `name`: `Err` is the refusal's message. A
/// panic, an unlocated message or a prediction outside [0, 1] fails the test.
fn load_map(name: &str, bytes: &[u8]) -> Result<mapfile::LoadedMap, String> {
    let r = std::panic::catch_unwind(|| mapfile::from_bytes(name, bytes));
    let r = r.unwrap_or_else(|_| panic!("{name} panicked"));
    match r {
        Err(e) => {
            let m = e.to_string();
            assert!(m.starts_with(&format!("{name}: ")), "not located: {m}");
            Err(m)
        }
        Ok(loaded) => {
            let scores = valid_scores(loaded.content.score_kind);
            let mut out = vec![0.0; scores.len()];
            loaded.map.predict(&scores, &mut out);
            for (s, p) in scores.iter().zip(&out) {
                assert!(
                    (0.0..=1.0).contains(p),
                    "{name}: predicts {p} for the valid score {s:e}"
                );
            }
            Ok(loaded)
        }
    }
}

#[test]
fn map_inputs_never_panic() {
    let files = inputs("map-");
    assert!(files.len() >= 10, "{files:?}");
    for path in files {
        let name = path.file_name().unwrap().to_string_lossy().to_string();
        let _ = load_map(&name, &std::fs::read(&path).unwrap());
    }
}

/// Each hand-made hostile map and what the reader must say about it (`None`:
/// it is a valid map and must load). The expected text is the refusal the
/// map-file schema (docs/map-format.md, "When a map is refused") prescribes.
#[test]
fn hand_made_hostile_maps_are_refused_at_their_fault() {
    let cases: &[(&str, Option<&str>)] = &[
        ("map-platt.json", None),
        (
            "map-truncated.json",
            Some("map-truncated.json: not a valid map file: EOF while parsing a string at line 15 column 26 (truncated or not JSON)"),
        ),
        (
            "map-nan-parameter.json",
            Some("map-nan-parameter.json: not a valid map file: expected value at line 26 column 10"),
        ),
        (
            "map-infinite-parameter.json",
            Some("map-infinite-parameter.json: not a valid map file: number out of range at line 26 column 14"),
        ),
        (
            "map-deep-nesting.json",
            Some("not a valid map file: recursion limit exceeded"),
        ),
        (
            "map-newer-version.json",
            Some("map schema version 2 is newer than this plumbline"),
        ),
        (
            "map-version-text.json",
            Some("`schema_version` is \"1\": expected a whole number from 1 to 1"),
        ),
        ("map-unknown-kind.json", Some("unknown variant `quantum`")),
        (
            "map-wrong-kind.json",
            Some("fitted map (isotonic): the fitted map is of kind `isotonic` but the method is `platt`"),
        ),
        (
            "map-wrong-score-kind.json",
            Some("fitted map (temperature): the fitted map reads margin scores but the file says score_kind = probability"),
        ),
        (
            "map-non-monotone-knots.json",
            Some("fitted map (centered-isotonic): x must increase strictly: x[1] = 0.3 but x[2] = 0.2"),
        ),
        (
            "map-venn-abers-short-table.json",
            Some("fitted map (venn-abers): 3 scores need 4 values in gap_p1, found 3"),
        ),
        (
            "map-huge-intervals.json",
            Some("fitted map (spline): intervals = 18446744073709551615 must be between 1 and 200"),
        ),
        (
            "map-extreme-spline-range.json",
            Some("fitted map (spline): the knot range [-1e308, 1e308] is wider than the largest double"),
        ),
        (
            "map-tiny-spline-range.json",
            Some("fitted map (spline): the spline's slope at lo = 0.0 is not a finite number"),
        ),
        ("map-extreme-isotonic-knots.json", None),
    ];
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/fuzz");
    for &(file, want) in cases {
        let bytes = std::fs::read(dir.join(file)).unwrap();
        match (load_map(file, &bytes), want) {
            (Ok(_), None) => {}
            (Err(e), Some(w)) => assert!(e.contains(w), "{file}: expected `{w}` in: {e}"),
            (Ok(_), Some(w)) => panic!("{file} loaded; expected `{w}`"),
            (Err(e), None) => panic!("{file} refused: {e}"),
        }
    }
}

/// A map with the checksum of its content, as `fit` writes it.
fn sealed(mut v: Value) -> Vec<u8> {
    let sum = mapfile::checksum(&v);
    v.as_object_mut()
        .unwrap()
        .insert("checksum".into(), Value::String(sum));
    serde_json::to_vec(&v).unwrap()
}

fn map_of(fitted: Value) -> Value {
    json!({
        "format": "plumbline-map",
        "schema_version": 1,
        "tool_version": "0.1.0",
        "method": {"kind": fitted["kind"].clone()},
        "score_kind": "probability",
        "training": {
            "source": "scores.csv", "score_column": "score", "label_column": "label",
            "fold_column": null, "rows": 10, "positives": 5, "score_min": 0.0,
            "score_max": 1.0, "distinct_scores": 10, "folds": null, "notes": [],
            "fit_seconds": 0.0
        },
        "fitted": fitted,
    })
}

/// Long arrays (a map with a knot per distinct score of a large sample) load
/// in one pass; a long table whose lengths disagree is refused with the
/// lengths, not by running out of memory or time.
#[test]
fn long_map_arrays_load_or_are_refused_with_their_lengths() {
    let n = 200_000;
    let x: Vec<f64> = (0..n).map(|i| i as f64 / n as f64).collect();
    let cir = map_of(json!({
        "kind": "centered-isotonic", "pseudo_count": 0.0, "x": x, "value": x,
    }));
    let loaded = load_map("long.json", &sealed(cir)).unwrap();
    let mut p = [0.0];
    loaded.map.predict(&[0.123456], &mut p);
    assert!((p[0] - 0.123456).abs() < 1e-9, "{}", p[0]);

    let short: Vec<f64> = vec![0.5; n];
    let va = map_of(json!({
        "kind": "venn-abers", "scores": x, "gap_p0": short, "gap_p1": short,
        "tie_p0": short, "tie_p1": short,
    }));
    let e = load_map("table.json", &sealed(va)).err().unwrap();
    assert!(
        e.contains(&format!(
            "{n} scores need {} values in gap_p0, found {n}",
            n + 1
        )),
        "{e}"
    );
}
