//! The shipped open datasets: every file matches its manifest entry, the
//! counts match the published facts of the original datasets, and the loader
//! refuses damaged or altered files.

use std::path::{Path, PathBuf};

use plumbline::data::open::{self, OpenDataError};
use plumbline::data::{twonorm, FeatureKind};

fn data_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(open::DEFAULT_DATA_DIR)
}

fn positives(labels: &[bool]) -> usize {
    labels.iter().filter(|&&l| l).count()
}

#[test]
fn every_task_loads_and_matches_its_manifest_entry() {
    let dir = data_dir();
    let manifest = open::read_manifest(&dir).unwrap();
    let tasks = open::list_tasks(&dir).unwrap();
    assert!(tasks.len() >= 10, "{} tasks", tasks.len());
    for t in &tasks {
        let ds = open::load_task(&dir, &t.id).unwrap_or_else(|e| panic!("{}: {e}", t.id));
        let entry = manifest.dataset(&t.dataset).unwrap();
        assert_eq!(ds.rows(), entry.rows, "{}", t.id);
        assert_eq!(positives(&ds.labels), t.positives, "{}", t.id);
        assert_eq!(ds.columns.len(), t.features, "{}", t.id);
        assert!(ds.columns.iter().all(|c| c.len() == ds.rows()), "{}", t.id);
        let nominal = ds
            .kinds
            .iter()
            .filter(|k| matches!(k, FeatureKind::Categorical { .. }))
            .count();
        assert_eq!(nominal, t.nominal, "{}", t.id);
        for (col, kind) in ds.columns.iter().zip(&ds.kinds) {
            if let FeatureKind::Categorical { levels } = kind {
                assert!(col
                    .iter()
                    .all(|&v| v >= 0.0 && v < *levels as f64 && v.fract() == 0.0));
            } else {
                assert!(col.iter().all(|v| v.is_finite()));
            }
        }
    }
}

#[test]
fn counts_match_the_published_dataset_facts() {
    // (task, rows, positives, source). Each figure is the original dataset's
    // published instance / class count, not read from the manifest.
    let facts: &[(&str, usize, Option<usize>, &str)] = &[
        // UCI "MAGIC Gamma Telescope": 19,020 instances, 12,332 gamma
        // (so 6,688 hadron, the positive class here).
        (
            "magic",
            19_020,
            Some(19_020 - 12_332),
            "UCI MAGIC Gamma Telescope",
        ),
        // UCI "Spambase": 4,601 instances, 1,813 spam.
        ("spambase", 4_601, Some(1_813), "UCI Spambase"),
        // UCI "Letter Recognition": 20,000 instances; 753 of letter O (from memory).
        ("letter-o", 20_000, Some(753), "UCI Letter Recognition"),
        // UCI "Pen-Based Recognition of Handwritten Digits": 7,494 training +
        // 3,498 test = 10,992 instances; 1,055 of digit 9 (from memory).
        (
            "pendigits-9",
            7_494 + 3_498,
            Some(1_055),
            "UCI Pen-Based Digits",
        ),
        // UCI "Breast Cancer Wisconsin (Diagnostic)": 569 instances, 212 malignant.
        ("wdbc", 569, Some(212), "UCI WDBC"),
        // UCI "Statlog (German Credit Data)": 1,000 instances, 300 bad.
        ("german", 1_000, Some(300), "UCI Statlog German Credit"),
        // UCI "Statlog (Landsat Satellite)": 4,435 training + 2,000 test = 6,435;
        // 626 damp grey soil (class 4) (from memory).
        (
            "satimage-4",
            4_435 + 2_000,
            Some(626),
            "UCI Statlog Landsat",
        ),
        // UCI "Insurance Company Benchmark (COIL 2000)": 5,822 training + 4,000
        // evaluation rows; 348 + 238 = 586 caravan policy holders (from memory).
        ("coil2000", 5_822 + 4_000, Some(348 + 238), "UCI COIL 2000"),
        // ELENA phoneme as listed by OpenML (data id 1489): 5,404 instances;
        // 1,586 of class 1 (oral) (from memory).
        ("phoneme", 5_404, Some(1_586), "ELENA phoneme"),
        // UCI "Statlog (Shuttle)": 43,500 training + 14,500 test = 58,000 rows,
        // shipped as every third row: ceil(58,000 / 3) = 19,334.
        (
            "shuttle",
            (43_500usize + 14_500).div_ceil(3),
            None,
            "UCI Statlog Shuttle",
        ),
    ];
    for &(task, rows, pos, source) in facts {
        let ds = open::load_task(&data_dir(), task).unwrap();
        assert_eq!(ds.rows(), rows, "{task}: rows vs {source}");
        if let Some(pos) = pos {
            assert_eq!(positives(&ds.labels), pos, "{task}: positives vs {source}");
        }
    }
}

#[test]
fn feature_counts_and_kinds_match_the_published_descriptions() {
    let dir = data_dir();
    // (task, numeric, nominal, source)
    let facts: &[(&str, usize, usize, &str)] = &[
        ("magic", 10, 0, "UCI MAGIC: 10 real attributes"),
        ("spambase", 57, 0, "UCI Spambase: 57 continuous attributes"),
        (
            "letter-o",
            16,
            0,
            "UCI Letter Recognition: 16 integer attributes",
        ),
        (
            "pendigits-9",
            16,
            0,
            "UCI Pen-Based Digits: 16 integer attributes",
        ),
        (
            "satimage-4",
            36,
            0,
            "UCI Statlog Landsat: 36 attributes (4 bands x 9 pixels)",
        ),
        ("wdbc", 30, 0, "UCI WDBC: 30 real-valued features"),
        // UCI German: 7 numerical and 13 qualitative attributes.
        ("german", 7, 13, "UCI Statlog German Credit"),
        // UCI COIL 2000: 86 variables including the target; MOSTYPE and
        // MOSHOOFD are the nominal customer (sub)types.
        ("coil2000", 83, 2, "UCI COIL 2000"),
        ("phoneme", 5, 0, "ELENA phoneme: 5 attributes"),
        (
            "shuttle",
            9,
            0,
            "UCI Statlog Shuttle: 9 numerical attributes",
        ),
        ("twonorm", 20, 0, "Breiman (1996): 20 features"),
    ];
    for &(task, numeric, nominal, source) in facts {
        let ds = open::load_task(&dir, task).unwrap();
        let nom = ds
            .kinds
            .iter()
            .filter(|k| matches!(k, FeatureKind::Categorical { .. }))
            .count();
        assert_eq!(
            ds.columns.len() - nom,
            numeric,
            "{task}: numeric vs {source}"
        );
        assert_eq!(nom, nominal, "{task}: nominal vs {source}");
    }
    // UCI German: attribute 1 (status of checking account) has the four
    // codes A11-A14; attribute 4 (purpose) has ten codes in use (A47 unused).
    let german = open::load_task(&dir, "german").unwrap();
    assert_eq!(german.kinds[0], FeatureKind::Categorical { levels: 4 });
    assert_eq!(german.kinds[3], FeatureKind::Categorical { levels: 10 });
}

#[test]
fn wdbc_first_row_is_the_published_first_case() {
    // UCI wdbc.data, first record (ID 842302, diagnosis M): radius mean 17.99,
    // texture mean 10.38, perimeter mean 122.8, area mean 1001 (from memory).
    let ds = open::load_task(&data_dir(), "wdbc").unwrap();
    assert_eq!(
        &ds.names[..4],
        ["radius_mean", "texture_mean", "perimeter_mean", "area_mean"]
    );
    let first: Vec<f64> = ds.columns[..4].iter().map(|c| c[0]).collect();
    assert_eq!(first, vec![17.99, 10.38, 122.8, 1001.0]);
    assert!(ds.labels[0]);
}

#[test]
fn an_unknown_task_is_refused_with_the_known_ones() {
    let err = open::load_task(&data_dir(), "no-such-task").unwrap_err();
    let msg = err.to_string();
    assert!(matches!(err, OpenDataError::UnknownTask { .. }), "{msg}");
    assert!(msg.contains("magic") && msg.contains("twonorm"), "{msg}");
}

#[test]
fn digests_are_stable_and_differ_between_tasks() {
    let dir = data_dir();
    let a = open::dataset_digest(&dir, "letter-o").unwrap();
    let b = open::dataset_digest(&dir, "letter-o").unwrap();
    let c = open::dataset_digest(&dir, "letter-am").unwrap();
    let t = open::dataset_digest(&dir, "twonorm").unwrap();
    assert_eq!(a, b);
    assert_ne!(a, c, "same file, other positive rule");
    assert_eq!(a.len(), 64);
    assert!(a.bytes().all(|c| c.is_ascii_hexdigit()));
    assert_ne!(t, a);
}

/// A private copy of the data directory with only the manifest and wdbc.
fn scratch_copy() -> tempfile::TempDir {
    let tmp = tempfile::tempdir().unwrap();
    for f in [open::MANIFEST_FILE, "wdbc.csv.gz"] {
        std::fs::copy(data_dir().join(f), tmp.path().join(f)).unwrap();
    }
    tmp
}

fn edit_manifest(dir: &Path, from: &str, to: &str) {
    let p = dir.join(open::MANIFEST_FILE);
    let text = std::fs::read_to_string(&p).unwrap();
    assert!(text.contains(from), "manifest lacks {from:?}");
    std::fs::write(&p, text.replacen(from, to, 1)).unwrap();
}

#[test]
fn a_changed_byte_is_a_checksum_error_naming_the_file() {
    let tmp = scratch_copy();
    let file = tmp.path().join("wdbc.csv.gz");
    let mut bytes = std::fs::read(&file).unwrap();
    let k = bytes.len() / 2;
    bytes[k] ^= 0x01;
    std::fs::write(&file, &bytes).unwrap();
    let err = open::load_task(tmp.path(), "wdbc").unwrap_err();
    let msg = err.to_string();
    assert!(matches!(err, OpenDataError::Checksum { .. }), "{msg}");
    assert!(msg.contains("wdbc.csv.gz"), "{msg}");
    assert!(msg.contains("92bf41d5"), "expected digest shown: {msg}");
    assert!(open::dataset_digest(tmp.path(), "wdbc").is_err());
}

/// Rewrite wdbc with one row fewer and put the new file's SHA-256 in the
/// manifest, so that only the counts disagree.
fn drop_last_row(dir: &Path) {
    use std::io::{Read, Write};
    let file = dir.join("wdbc.csv.gz");
    let gz = std::fs::read(&file).unwrap();
    let mut text = String::new();
    flate2::read::GzDecoder::new(gz.as_slice())
        .read_to_string(&mut text)
        .unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    let last = lines.pop().unwrap();
    assert!(last.ends_with(",B"), "last wdbc row is benign: {last}");
    let mut e = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    e.write_all((lines.join("\n") + "\n").as_bytes()).unwrap();
    let new = e.finish().unwrap();
    std::fs::write(&file, &new).unwrap();
    let old_sum = open::sha256_hex(&gz);
    edit_manifest(dir, &old_sum, &open::sha256_hex(&new));
}

#[test]
fn a_file_with_a_row_missing_is_a_row_count_error() {
    let tmp = scratch_copy();
    drop_last_row(tmp.path());
    let err = open::load_task(tmp.path(), "wdbc").unwrap_err();
    let msg = err.to_string();
    match err {
        OpenDataError::RowCount {
            expected, found, ..
        } => assert_eq!((expected, found), (569, 568)),
        other => panic!("expected a row-count error, got {other}"),
    }
    assert!(msg.contains("wdbc.csv.gz") && msg.contains("569") && msg.contains("568"));
}

#[test]
fn a_manifest_class_count_that_disagrees_is_a_class_count_error() {
    let tmp = scratch_copy();
    // Shift one row between the classes in the manifest: rows still add up,
    // the file now disagrees.
    edit_manifest(tmp.path(), "{ B = 357, M = 212 }", "{ B = 358, M = 211 }");
    edit_manifest(
        tmp.path(),
        "positive = [\"M\"]\npositives = 212",
        "positive = [\"M\"]\npositives = 211",
    );
    let err = open::load_task(tmp.path(), "wdbc").unwrap_err();
    let msg = err.to_string();
    match &err {
        OpenDataError::ClassCount {
            class,
            expected,
            found,
            ..
        } => {
            assert_eq!(class, "B");
            assert_eq!((*expected, *found), (358, 357));
        }
        other => panic!("expected a class-count error, got {other}"),
    }
    assert!(msg.contains("wdbc.csv.gz"), "{msg}");
}

#[test]
fn an_inconsistent_manifest_is_refused() {
    let tmp = scratch_copy();
    edit_manifest(
        tmp.path(),
        "positive = [\"M\"]\npositives = 212",
        "positive = [\"M\"]\npositives = 213",
    );
    let err = open::read_manifest(tmp.path()).unwrap_err();
    assert!(matches!(err, OpenDataError::Manifest { .. }), "{err}");
    assert!(err.to_string().contains("wdbc"), "{err}");

    let tmp = scratch_copy();
    edit_manifest(tmp.path(), "format = 1", "format = 1\nunknown_key = 3");
    let err = open::read_manifest(tmp.path()).unwrap_err();
    assert!(err.to_string().contains("unknown_key"), "{err}");
}

#[test]
fn twonorm_has_the_published_class_means_unit_variance_and_balance() {
    // Breiman (1996), Tech. Rep. 460: class 1 ~ N(a·1, I), class 0 ~ N(−a·1, I),
    // a = 2/√20, classes equally likely.
    let n = 200_000;
    let ds = twonorm::generate("twonorm", n, 12_345);
    let a = 2.0 / 20f64.sqrt();
    assert!((twonorm::offset() - a).abs() < 1e-15);
    let n1 = positives(&ds.labels);
    let share = n1 as f64 / n as f64;
    // Standard error of the share is 0.5/sqrt(n) ≈ 0.0011; allow 5 of them.
    assert!((share - 0.5).abs() < 0.0056, "class-1 share {share}");
    for (j, col) in ds.columns.iter().enumerate() {
        for (class, mean_true) in [(true, a), (false, -a)] {
            let xs: Vec<f64> = col
                .iter()
                .zip(&ds.labels)
                .filter(|(_, &l)| l == class)
                .map(|(&x, _)| x)
                .collect();
            let m = xs.iter().sum::<f64>() / xs.len() as f64;
            let v = xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (xs.len() - 1) as f64;
            // SE of a class mean ≈ 1/sqrt(100,000) ≈ 0.0032; of a variance
            // ≈ sqrt(2/100,000) ≈ 0.0045. Allow 5 SE each.
            assert!(
                (m - mean_true).abs() < 0.016,
                "x{} class {class}: mean {m}",
                j + 1
            );
            assert!(
                (v - 1.0).abs() < 0.023,
                "x{} class {class}: variance {v}",
                j + 1
            );
        }
    }
    // Features are independent within a class: correlation of x1 and x2.
    let (x1, x2) = (&ds.columns[0], &ds.columns[1]);
    let mut s = 0.0;
    let mut c = 0usize;
    for i in 0..n {
        let shift = if ds.labels[i] { a } else { -a };
        s += (x1[i] - shift) * (x2[i] - shift);
        c += 1;
    }
    let r = s / c as f64;
    assert!(r.abs() < 0.012, "within-class covariance of x1, x2: {r}");
}

#[test]
fn twonorm_through_the_manifest_is_reproducible() {
    let a = open::load_task(&data_dir(), "twonorm").unwrap();
    let b = open::load_task(&data_dir(), "twonorm").unwrap();
    assert_eq!(a.rows(), twonorm::DEFAULT_ROWS);
    assert_eq!(a.columns, b.columns);
    assert_eq!(a.labels, b.labels);
}

#[test]
fn the_task_table_in_the_docs_matches_the_manifest() {
    let docs =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/datasets.md"))
            .unwrap();
    let number = |s: &str| s.trim().replace(',', "").parse::<usize>().unwrap();
    let mut seen = 0;
    for t in open::list_tasks(&data_dir()).unwrap() {
        let prefix = format!("| `{}` |", t.id);
        let line = docs
            .lines()
            .find(|l| l.starts_with(&prefix))
            .unwrap_or_else(|| panic!("docs/datasets.md has no row for {}", t.id));
        let cells: Vec<&str> = line.split('|').collect();
        assert_eq!(number(cells[2]), t.rows, "{}: rows", t.id);
        assert_eq!(number(cells[3]), t.positives, "{}: positives", t.id);
        let rate = format!("{:.1}%", 100.0 * t.base_rate());
        assert_eq!(cells[4].trim(), rate, "{}: base rate", t.id);
        seen += 1;
    }
    assert_eq!(seen, 12);
}
