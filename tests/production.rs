//! `plumbline fit` and `plumbline apply` through the real binary: a map file
//! reproduces the in-memory fitted method bit for bit for every method kind on
//! CSV, gzip CSV and Parquet input; applying a map reproduces a benchmark run's
//! scores; damaged, edited and newer-schema maps are refused; bad scores are
//! refused with their row and leave no output; out-of-range scores are counted;
//! cross-fitted folds are checked.
//!
//! The bit-for-bit comparisons are against this crate's own fitted maps (the
//! methods themselves are checked against reference libraries in
//! `tests/methods_reference.rs`); the Parquet files are written here with the
//! `parquet` crate (Snappy pages), the format pyarrow writes by default.

use std::fs;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use assert_cmd::Command;
use plumbline::calibrate::{MethodSpec, ScoreKind};
use tempfile::TempDir;

fn bin() -> Command {
    Command::cargo_bin("plumbline").unwrap()
}

/// SplitMix64 uniform in [0, 1).
fn unif(state: &mut u64) -> f64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^= z >> 31;
    (z >> 11) as f64 / (1u64 << 53) as f64
}

/// Rows (id, score, label, fold): distorted probabilities with ties (scores
/// rounded to 3 decimals), or margins; fold = row % 3.
fn rows(n: usize, seed: u64, kind: ScoreKind) -> Vec<(String, f64, bool, u32)> {
    let mut st = seed;
    (0..n)
        .map(|i| {
            let q = 0.02 + 0.96 * unif(&mut st);
            let y = unif(&mut st) < q;
            let s = match kind {
                ScoreKind::Probability => ((q * q) * 1000.0).round() / 1000.0,
                ScoreKind::Margin => 3.0 * (q / (1.0 - q)).ln() + 0.5,
            };
            (format!("r{i}"), s, y, (i % 3) as u32)
        })
        .collect()
}

fn csv_text(r: &[(String, f64, bool, u32)]) -> String {
    let mut s = String::from("id,score,label,fold\n");
    for (id, sc, y, f) in r {
        s.push_str(&format!("{id},{sc},{},f{f}\n", *y as u8));
    }
    s
}

fn write_gz(path: &Path, text: &str) {
    use std::io::Write;
    let f = fs::File::create(path).unwrap();
    let mut e = flate2::write::GzEncoder::new(f, flate2::Compression::default());
    e.write_all(text.as_bytes()).unwrap();
    e.finish().unwrap();
}

/// A Parquet file with columns id (string), score (double), label (int32),
/// fold (string), Snappy-compressed, in row groups of 300 rows.
fn write_parquet(path: &Path, r: &[(String, f64, bool, u32)]) {
    use parquet::basic::Compression;
    use parquet::data_type::{ByteArray, ByteArrayType, DoubleType, Int32Type};
    use parquet::file::properties::WriterProperties;
    use parquet::file::writer::SerializedFileWriter;
    use parquet::schema::parser::parse_message_type;
    let schema = Arc::new(
        parse_message_type(
            "message scores { required binary id (UTF8); required double score; \
             required int32 label; required binary fold (UTF8); }",
        )
        .unwrap(),
    );
    let props = Arc::new(
        WriterProperties::builder()
            .set_compression(Compression::SNAPPY)
            .build(),
    );
    let file = fs::File::create(path).unwrap();
    let mut w = SerializedFileWriter::new(file, schema, props).unwrap();
    for chunk in r.chunks(300) {
        let mut rg = w.next_row_group().unwrap();
        let ids: Vec<ByteArray> = chunk
            .iter()
            .map(|x| ByteArray::from(x.0.as_str()))
            .collect();
        let sc: Vec<f64> = chunk.iter().map(|x| x.1).collect();
        let lb: Vec<i32> = chunk.iter().map(|x| x.2 as i32).collect();
        let fo: Vec<ByteArray> = chunk
            .iter()
            .map(|x| ByteArray::from(format!("f{}", x.3).as_str()))
            .collect();
        let mut col = rg.next_column().unwrap().unwrap();
        col.typed::<ByteArrayType>()
            .write_batch(&ids, None, None)
            .unwrap();
        col.close().unwrap();
        let mut col = rg.next_column().unwrap().unwrap();
        col.typed::<DoubleType>()
            .write_batch(&sc, None, None)
            .unwrap();
        col.close().unwrap();
        let mut col = rg.next_column().unwrap().unwrap();
        col.typed::<Int32Type>()
            .write_batch(&lb, None, None)
            .unwrap();
        col.close().unwrap();
        let mut col = rg.next_column().unwrap().unwrap();
        col.typed::<ByteArrayType>()
            .write_batch(&fo, None, None)
            .unwrap();
        col.close().unwrap();
        rg.close().unwrap();
    }
    w.close().unwrap();
}

/// The calibrated column of an apply output, with the id column.
fn read_output(path: &Path, column: &str) -> Vec<(String, f64)> {
    let mut rdr = csv::Reader::from_path(path).unwrap();
    let h = rdr.headers().unwrap().clone();
    let ci = h.iter().position(|x| x == column).unwrap();
    rdr.records()
        .map(|r| {
            let r = r.unwrap();
            (r[0].to_string(), r[ci].parse().unwrap())
        })
        .collect()
}

fn fit(dir: &Path, scores: &Path, method: &str, set: &[&str], kind: &str) -> PathBuf {
    let out = dir.join(format!("{method}-{kind}.json"));
    let mut c = bin();
    c.args(["fit", "--method", method, "--scores"])
        .arg(scores)
        .arg("--out")
        .arg(&out)
        .args(["--score-kind", kind]);
    for s in set {
        c.args(["--set", s]);
    }
    c.assert().success();
    out
}

fn apply(map: &Path, scores: &Path, out: &Path) -> assert_cmd::assert::Assert {
    bin()
        .arg("apply")
        .arg(map)
        .arg("--scores")
        .arg(scores)
        .arg("--out")
        .arg(out)
        .assert()
}

/// Every method kind (with a non-default parameter where one exists), both
/// score kinds, fitted on one format and applied to new rows in all three.
#[test]
fn map_file_reproduces_the_fitted_method_bit_for_bit_on_every_format() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let cases: &[(&str, &[&str])] = &[
        ("identity", &[]),
        ("platt", &[]),
        ("platt", &["target_smoothing=true"]),
        ("isotonic", &[]),
        ("isotonic", &["pseudo_count=1"]),
        ("beta", &[]),
        ("beta", &["shape=tied"]),
        ("binning", &["bins=7", "pseudo_count=0.5"]),
        ("temperature", &[]),
        ("centered-isotonic", &["pseudo_count=2"]),
        ("spline", &[]),
        ("spline", &["lambda=3", "intervals=8"]),
        ("venn-abers", &[]),
    ];
    for (kind, kname, seed) in [
        (ScoreKind::Probability, "probability", 11u64),
        (ScoreKind::Margin, "margin", 12),
    ] {
        let train = rows(900, seed, kind);
        // New rows, wider than the training range for margins.
        let mut fresh = rows(700, seed + 100, kind);
        if kind == ScoreKind::Margin {
            fresh[0].1 = -40.0;
            fresh[1].1 = 40.0;
        } else {
            fresh[0].1 = 0.0;
            fresh[1].1 = 1.0;
        }
        let train_csv = d.join(format!("train-{kname}.csv"));
        fs::write(&train_csv, csv_text(&train)).unwrap();
        let inputs = [
            d.join(format!("new-{kname}.csv")),
            d.join(format!("new-{kname}.csv.gz")),
            d.join(format!("new-{kname}.parquet")),
        ];
        fs::write(&inputs[0], csv_text(&fresh)).unwrap();
        write_gz(&inputs[1], &csv_text(&fresh));
        write_parquet(&inputs[2], &fresh);
        let ts: Vec<f64> = train.iter().map(|r| r.1).collect();
        let ty: Vec<bool> = train.iter().map(|r| r.2).collect();
        let fs_: Vec<f64> = fresh.iter().map(|r| r.1).collect();
        for (method, set) in cases {
            if *method == "identity" && kind == ScoreKind::Margin {
                continue;
            }
            let spec = plumbline::commands::fit::method_spec(
                method,
                &set.iter().map(|s| s.to_string()).collect::<Vec<_>>(),
                kind,
            )
            .unwrap();
            let fitted = spec.build(kind).unwrap().fit(&ts, &ty).unwrap();
            let mut want = vec![0.0; fs_.len()];
            fitted.map.predict(&fs_, &mut want);
            let map = fit(d, &train_csv, method, set, kname);
            for input in &inputs {
                let out = d.join("out.csv");
                apply(&map, input, &out).success();
                let got = read_output(&out, "calibrated");
                assert_eq!(
                    got.len(),
                    fresh.len(),
                    "{method} {set:?} {}",
                    input.display()
                );
                for (i, (id, p)) in got.iter().enumerate() {
                    assert_eq!(id, &fresh[i].0, "row order");
                    assert_eq!(
                        p.to_bits(),
                        want[i].to_bits(),
                        "{method} {set:?} {kname} on {}: row {i} score {} gives {p}, fitted map {}",
                        input.display(),
                        fs_[i],
                        want[i]
                    );
                }
            }
        }
    }
}

/// A map fitted on the same data as a benchmark works for the same rows
/// (Parquet training file too): fit on one unit's calibration sample, apply to
/// the task's test rows, and the log loss equals the one the run wrote in
/// units.csv.gz (written in the shortest form that reads back exactly).
#[test]
fn applying_a_map_reproduces_the_benchmark_scores() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let all = rows(800, 5, ScoreKind::Probability);
    fs::write(d.join("task.csv"), csv_text(&all)).unwrap();
    let suite = d.join("suite.toml");
    fs::write(
        &suite,
        r#"name = "prod"
seed = 31
repeats = 2
sizes = [150]
reference = "platt"
metrics = ["log_loss", "brier"]
primary_metric = "log_loss"

[test_set]
rows = 300

[[method]]
id = "platt"
kind = "platt"

[[method]]
id = "iso1"
kind = "isotonic"
pseudo_count = 1

[[method]]
id = "spl"
kind = "spline"

[[task]]
id = "t"
scores = "task.csv"
score_column = "score"
label_column = "label"
score_kind = "probability"
"#,
    )
    .unwrap();
    let results = d.join("res");
    bin()
        .args(["run", suite.to_str().unwrap(), "--quiet", "--out"])
        .arg(&results)
        .assert()
        .success();
    let plan = plumbline::suite::load(&suite).unwrap();
    let task = &plan.tasks[0];
    let units_file = fs::File::open(results.join(plumbline::run::table::UNITS_FILE)).unwrap();
    let mut rdr = csv::Reader::from_reader(flate2::read::MultiGzDecoder::new(units_file));
    let h = rdr.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let (ci_m, ci_r, ci_ll) = (col("method"), col("repeat"), col("log_loss"));
    let units: Vec<csv::StringRecord> = rdr.records().map(|r| r.unwrap()).collect();

    // The test rows, as a score file to apply the map to.
    let test_rows: Vec<_> = task.test.iter().map(|&i| all[i].clone()).collect();
    let test_csv = d.join("test.csv");
    fs::write(&test_csv, csv_text(&test_rows)).unwrap();
    let test_y: Vec<bool> = test_rows.iter().map(|r| r.2).collect();
    let ll = plumbline::metrics::MetricId::parse("log_loss").unwrap();
    let mut checked = 0;
    for repeat in 0..2 {
        let seed = plumbline::split::unit_seed(plan.seed, &task.id, 150, repeat);
        let picks = plumbline::split::draw_calibration(task.reservoir.len(), 150, seed);
        let cal: Vec<_> = picks
            .iter()
            .map(|&k| all[task.reservoir[k]].clone())
            .collect();
        let cal_file = d.join(format!("cal{repeat}.parquet"));
        write_parquet(&cal_file, &cal);
        for m in &plan.methods {
            let set: Vec<String> = match &m.spec {
                MethodSpec::Isotonic(iso) => {
                    vec![format!("pseudo_count={}", iso.pseudo_count)]
                }
                _ => vec![],
            };
            let set: Vec<&str> = set.iter().map(String::as_str).collect();
            let map = fit(d, &cal_file, m.spec.kind(), &set, "probability");
            let out = d.join("applied.csv");
            apply(&map, &test_csv, &out).success();
            let p: Vec<f64> = read_output(&out, "calibrated")
                .into_iter()
                .map(|x| x.1)
                .collect();
            let got = ll.compute(&p, &test_y, &plan.metric_settings);
            let row = units
                .iter()
                .find(|r| r[ci_m] == *m.id && r[ci_r] == *repeat.to_string())
                .unwrap();
            let want: f64 = row[ci_ll].parse().unwrap();
            assert_eq!(
                got.to_bits(),
                want.to_bits(),
                "{} repeat {repeat}: {got} vs {want}",
                m.id
            );
            checked += 1;
        }
    }
    assert_eq!(checked, 6);
}

/// The same score file, method and options give the same map bytes, hence
/// the same checksum: the map records the input's SHA-256 and the tool
/// version, never the time. The recorded hash is checked against a digest
/// of the file's bytes by the RustCrypto `sha2` crate (FIPS 180-4 SHA-256);
/// a stream read from stdin is recorded without one.
#[test]
fn fitting_twice_gives_identical_map_bytes() {
    use sha2::Digest;
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let text = csv_text(&rows(2000, 31, ScoreKind::Probability));
    let train = d.join("train.csv.gz");
    write_gz(&train, &text);
    let want_sha: String = sha2::Sha256::digest(fs::read(&train).unwrap())
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    for (method, set) in [
        ("spline", &[][..]),
        ("venn-abers", &[]),
        ("isotonic", &["pseudo_count=1"]),
    ] {
        let mut maps = Vec::new();
        for name in ["first.json", "second.json"] {
            let out = d.join(name);
            let mut c = bin();
            c.args(["fit", "--method", method, "--scores"])
                .arg(&train)
                .arg("--out")
                .arg(&out);
            for s in set {
                c.args(["--set", s]);
            }
            c.assert().success();
            maps.push(fs::read(&out).unwrap());
        }
        assert!(
            maps[0] == maps[1],
            "{method}: two fits gave different bytes"
        );
        let v: serde_json::Value = serde_json::from_slice(&maps[0]).unwrap();
        assert_eq!(
            v["training"]["source_sha256"],
            want_sha.as_str(),
            "{method}"
        );
        assert!(v["training"].get("fit_seconds").is_none(), "{method}");
        assert_eq!(v["tool_version"], env!("CARGO_PKG_VERSION"));
    }
    // Standard input: no hash, still the same bytes every time.
    let mut maps = Vec::new();
    for _ in 0..2 {
        let out = d.join("stdin.json");
        bin()
            .args(["fit", "--method", "platt", "--scores", "-", "--out"])
            .arg(&out)
            .write_stdin(text.clone())
            .assert()
            .success();
        maps.push(fs::read(&out).unwrap());
    }
    assert!(maps[0] == maps[1], "stdin: two fits gave different bytes");
    let v: serde_json::Value = serde_json::from_slice(&maps[0]).unwrap();
    assert!(v["training"]["source_sha256"].is_null());
    assert_eq!(v["training"]["source"], "<stdin>");
}

/// A map written before the input hash was recorded (with the fit time and
/// no `source_sha256`) still applies, with the same predictions.
#[test]
fn maps_with_a_fit_time_still_apply() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let map = small_map(d);
    let mut v: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(&map).unwrap()).unwrap();
    let t = v["training"].as_object_mut().unwrap();
    t.remove("source_sha256");
    t.insert("fit_seconds".into(), serde_json::json!(0.0123));
    reseal(&mut v);
    let old = d.join("old.json");
    fs::write(&old, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    let train = d.join("train.csv");
    apply(&map, &train, &d.join("new-out.csv")).success();
    apply(&old, &train, &d.join("old-out.csv")).success();
    assert_eq!(
        fs::read(d.join("new-out.csv")).unwrap(),
        fs::read(d.join("old-out.csv")).unwrap()
    );
}

fn small_map(d: &Path) -> PathBuf {
    let train = d.join("train.csv");
    fs::write(&train, csv_text(&rows(400, 3, ScoreKind::Probability))).unwrap();
    fit(d, &train, "isotonic", &[], "probability")
}

fn refused(map: &Path, d: &Path, needle: &str) {
    let scores = d.join("train.csv");
    let out = d.join("refused.csv");
    let a = apply(map, &scores, &out).failure();
    let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
    assert!(err.contains(needle), "expected `{needle}` in: {err}");
    assert!(!out.exists(), "no output for a refused map");
}

/// Recompute the checksum of an edited map (a deliberate hand edit that
/// keeps the file self-consistent, so the content checks must catch it).
fn reseal(v: &mut serde_json::Value) {
    let m = v.as_object_mut().unwrap();
    m.remove("checksum");
    let sum = plumbline::mapfile::checksum(&serde_json::Value::Object(m.clone()));
    m.insert("checksum".into(), serde_json::Value::String(sum));
}

#[test]
fn damaged_edited_and_newer_maps_are_refused() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let map = small_map(d);
    let text = fs::read_to_string(&map).unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();

    // Truncated.
    let p = d.join("truncated.json");
    fs::write(&p, &text[..text.len() / 2]).unwrap();
    refused(&p, d, "not a valid map file");

    // Corrupted / hand-edited value without resealing: checksum.
    let mut e = v.clone();
    let b0 = &mut e["fitted"]["blocks"][0]["value"];
    *b0 = serde_json::json!(b0.as_f64().unwrap() + 0.01);
    let p = d.join("edited.json");
    fs::write(&p, serde_json::to_string_pretty(&e).unwrap()).unwrap();
    refused(&p, d, "checksum mismatch");

    // A flipped byte inside a number.
    let pos = text.find("\"weight\": ").unwrap() + 10;
    let mut bytes = text.clone().into_bytes();
    bytes[pos] = if bytes[pos] == b'7' { b'8' } else { b'7' };
    let p = d.join("flipped.json");
    fs::write(&p, bytes).unwrap();
    refused(&p, d, "checksum mismatch");

    // Newer schema (resealed so only the version is wrong).
    let mut e = v.clone();
    e["schema_version"] = serde_json::json!(2);
    reseal(&mut e);
    let p = d.join("newer.json");
    fs::write(&p, serde_json::to_string(&e).unwrap()).unwrap();
    refused(&p, d, "map schema version 2 is newer than this plumbline");

    // Not monotone blocks, resealed: the state check.
    let mut e = v.clone();
    let n = e["fitted"]["blocks"].as_array().unwrap().len();
    assert!(n >= 2);
    e["fitted"]["blocks"][0]["value"] = serde_json::json!(1.0);
    e["fitted"]["blocks"][1]["value"] = serde_json::json!(0.0);
    reseal(&mut e);
    let p = d.join("decreasing.json");
    fs::write(&p, serde_json::to_string(&e).unwrap()).unwrap();
    refused(&p, d, "blocks.value must not decrease");

    // Blocks out of order.
    let mut e = v.clone();
    let lo1 = e["fitted"]["blocks"][1]["lo"].clone();
    e["fitted"]["blocks"][0]["hi"] = serde_json::json!(lo1.as_f64().unwrap() + 1.0);
    reseal(&mut e);
    let p = d.join("unordered.json");
    fs::write(&p, serde_json::to_string(&e).unwrap()).unwrap();
    refused(&p, d, "blocks must be ordered");

    // Unknown key, resealed: the typed schema.
    let mut e = v.clone();
    e["fitted"]["extra"] = serde_json::json!(1);
    reseal(&mut e);
    let p = d.join("unknown.json");
    fs::write(&p, serde_json::to_string(&e).unwrap()).unwrap();
    refused(&p, d, "unknown field `extra`");

    // Method parameters checked as in a suite.
    let mut e = v.clone();
    e["method"]["pseudo_count"] = serde_json::json!(-1.0);
    reseal(&mut e);
    let p = d.join("param.json");
    fs::write(&p, serde_json::to_string(&e).unwrap()).unwrap();
    refused(&p, d, "pseudo_count = -1");

    // A Platt map with an infinite parameter cannot even be written as JSON
    // (null): the typed schema refuses it.
    let train = d.join("train.csv");
    let platt = fit(d, &train, "platt", &[], "probability");
    let mut e: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(&platt).unwrap()).unwrap();
    e["fitted"]["a"] = serde_json::Value::Null;
    reseal(&mut e);
    let p = d.join("nonfinite.json");
    fs::write(&p, serde_json::to_string(&e).unwrap()).unwrap();
    refused(&p, d, "invalid type: null, expected f64");

    // Not a map file at all.
    let p = d.join("other.json");
    fs::write(&p, "{\"format\": \"something\"}").unwrap();
    refused(&p, d, "not a plumbline map file");

    // The untouched map still works.
    apply(&map, &d.join("train.csv"), &d.join("ok.csv")).success();
}

#[test]
fn nan_and_non_numeric_scores_name_the_row_and_leave_no_output() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let map = small_map(d);
    for (name, bad, needle) in [
        (
            "nan.csv",
            "NaN",
            "nan.csv:4: column `score` (field 2): scores must be finite: `NaN`",
        ),
        (
            "text.csv",
            "high",
            "text.csv:4: column `score` (field 2): not a number: `high`",
        ),
        (
            "empty.csv",
            "",
            "empty.csv:4: column `score` (field 2): not a number: ``",
        ),
        (
            "range.csv",
            "1.5",
            "range.csv:4: column `score` (field 2): a probability score must lie in [0, 1]",
        ),
    ] {
        let p = d.join(name);
        fs::write(
            &p,
            format!("id,score,label,fold\na,0.1,0,x\nb,0.2,1,x\nc,{bad},1,x\nd,0.3,0,x\n"),
        )
        .unwrap();
        let out = d.join(format!("{name}.out.csv"));
        let a = apply(&map, &p, &out).failure();
        let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
        assert!(err.contains(needle), "{err}");
        assert!(!out.exists());
        let partial = d.join(format!(".{name}.out.csv.partial"));
        assert!(!partial.exists(), "temporary file left behind");
    }
    // Parquet: the row is the data row.
    let mut r = rows(10, 9, ScoreKind::Probability);
    r[6].1 = f64::NAN;
    let p = d.join("nan.parquet");
    write_parquet(&p, &r);
    let out = d.join("pq.out.csv");
    let a = apply(&map, &p, &out).failure();
    let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
    assert!(
        err.contains("nan.parquet: row 7: column `score` (field 2): scores must be finite: `NaN`"),
        "{err}"
    );
    assert!(!out.exists());
    // Parquet rows are bounded like CSV records: a row whose text passes
    // PLUMBLINE_MAX_LINE_BYTES is refused with its row number, and a row
    // group whose stated uncompressed size passes
    // PLUMBLINE_MAX_ROW_GROUP_BYTES is refused before it is decoded.
    let mut r = rows(10, 9, ScoreKind::Probability);
    r[4].0 = "x".repeat(5000);
    let p = d.join("long.parquet");
    write_parquet(&p, &r);
    let bounded = |var: &str, value: &str| {
        let a = bin()
            .env(var, value)
            .arg("apply")
            .arg(&map)
            .arg("--scores")
            .arg(&p)
            .arg("--out")
            .arg(&out)
            .assert()
            .failure();
        assert!(!out.exists());
        String::from_utf8_lossy(&a.get_output().stderr).into_owned()
    };
    let err = bounded("PLUMBLINE_MAX_LINE_BYTES", "1000");
    assert!(
        err.contains("long.parquet:5: a line or record longer than 1000 bytes"),
        "{err}"
    );
    let err = bounded("PLUMBLINE_MAX_ROW_GROUP_BYTES", "1000");
    assert!(
        err.contains("long.parquet: row group 0 (rows 1–10) holds")
            && err.contains("PLUMBLINE_MAX_ROW_GROUP_BYTES"),
        "{err}"
    );
    // Within the default limits the same file is read.
    apply(&map, &p, &out).success();
}

#[test]
fn out_of_range_scores_are_counted() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let train = d.join("train.csv");
    // Training scores in [0.2, 0.8].
    let mut st = 4u64;
    let mut s = String::from("score,label\n");
    for _ in 0..300 {
        let q = 0.2 + 0.6 * unif(&mut st);
        s.push_str(&format!("{q},{}\n", (unif(&mut st) < q) as u8));
    }
    s.push_str("0.2,0\n0.8,1\n");
    fs::write(&train, s).unwrap();
    let map = fit(d, &train, "isotonic", &[], "probability");
    let newf = d.join("new.csv");
    fs::write(
        &newf,
        "score,label\n0.1,0\n0.2,0\n0.5,1\n0.8,1\n0.9,1\n0.95,0\n",
    )
    .unwrap();
    let out = d.join("o.csv");
    let a = apply(&map, &newf, &out).success();
    let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
    assert!(
        err.contains("3 of 6 rows (50.00%) have scores outside the fitted range [0.2, 0.8] (1 below, 2 above)"),
        "{err}"
    );
    // Flat beyond the ends: clamped to the end values.
    let p = read_output(&out, "calibrated");
    assert_eq!(p[0].1, p[1].1);
    assert_eq!(p[4].1, p[3].1);
    assert_eq!(p[5].1, p[3].1);
    // In range: no warning.
    let a = apply(&map, &train, &d.join("o2.csv")).success();
    assert!(!String::from_utf8_lossy(&a.get_output().stderr).contains("warning"));
}

fn fit_folds(d: &Path, text: &str) -> assert_cmd::assert::Assert {
    let p = d.join("folds.csv");
    fs::write(&p, text).unwrap();
    bin()
        .args([
            "fit",
            "--method",
            "platt",
            "--fold-column",
            "fold",
            "--scores",
        ])
        .arg(&p)
        .arg("--out")
        .arg(d.join("folds.json"))
        .assert()
}

#[test]
fn fold_column_is_checked() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let good = csv_text(&rows(300, 8, ScoreKind::Probability));
    fit_folds(d, &good).success();
    let v: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(d.join("folds.json")).unwrap()).unwrap();
    let folds = v["training"]["folds"].as_array().unwrap();
    assert_eq!(folds.len(), 3);
    assert_eq!(
        folds
            .iter()
            .map(|f| f["rows"].as_u64().unwrap())
            .sum::<u64>(),
        300
    );

    let cases = [
        (
            "id,score,label,fold\na,0.1,0,k\nb,0.7,1,k\nc,0.4,1,k\n",
            "fold column `fold`: every row is in fold `k`: cross-fitted data needs more than one fold",
        ),
        (
            "id,score,label,fold\na,0.1,0,k\nb,0.7,1,k\nc,0.4,1,\nd,0.3,0,m\n",
            "folds.csv:4: column `fold` (field 4): every row must name its fold",
        ),
        (
            "id,score,label,fold\na,0.1,0,k\nb,0.7,1,k\nc,0.4,1,m\nd,0.3,1,m\n",
            "fold `m` has 2 rows, all with label 1: every fold needs both classes",
        ),
    ];
    for (text, needle) in cases {
        fs::remove_file(d.join("folds.json")).ok();
        let a = fit_folds(d, text).failure();
        let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
        assert!(err.contains(needle), "expected `{needle}` in {err}");
        assert!(!d.join("folds.json").exists());
    }
}

#[test]
fn stdin_and_stdout_stream_csv() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let map = small_map(d);
    let input = "id,score,label,fold\na,0.25,0,x\nb,\"0.5\",1,y\n";
    let a = bin()
        .arg("apply")
        .arg(&map)
        .args(["--scores", "-", "--out", "-", "--column", "p"])
        .write_stdin(input)
        .assert()
        .success();
    let out = String::from_utf8_lossy(&a.get_output().stdout).into_owned();
    let lines: Vec<&str> = out.lines().collect();
    assert_eq!(lines[0], "id,score,label,fold,p");
    assert!(lines[1].starts_with("a,0.25,0,x,"), "{out}");
    assert!(lines[2].starts_with("b,0.5,1,y,"), "{out}");
    assert_eq!(lines.len(), 3);
}

#[test]
fn fit_checks_parameters_like_a_suite() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let train = d.join("t.csv");
    fs::write(&train, csv_text(&rows(100, 1, ScoreKind::Probability))).unwrap();
    for (args, needle) in [
        (
            vec!["--method", "isotonic", "--set", "pseudo_count=-1"],
            "pseudo_count = -1: must be a finite number >= 0",
        ),
        (
            vec!["--method", "isotonic", "--set", "pseudo=1"],
            "unknown field `pseudo`",
        ),
        (
            vec!["--method", "spline", "--set", "intervals=0"],
            "intervals = 0",
        ),
        (
            vec!["--method", "platypus"],
            "--method platypus: not a method id of suites/open-uci.toml (identity, platt,",
        ),
        (
            vec!["--method", "platt", "--set", "x"],
            "--set x: expected KEY=VALUE",
        ),
        (
            vec!["--method", "identity", "--score-kind", "margin"],
            "the identity map needs probability scores",
        ),
        (
            vec!["--method", "platt", "--score-column", "p"],
            "no column named `p` (--score-column)",
        ),
    ] {
        let out = d.join("m.json");
        let a = bin()
            .arg("fit")
            .args(&args)
            .arg("--scores")
            .arg(&train)
            .arg("--out")
            .arg(&out)
            .assert()
            .failure();
        let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
        assert!(err.contains(needle), "{args:?}: {err}");
        assert!(!out.exists());
    }
}

/// Every method id of the default suite (read here from the committed
/// `suites/open-uci.toml` with the `toml` crate) is accepted by
/// `fit --method ID` and gives the same map bytes as its kind with each of
/// the suite's parameters given by `--set`.
#[test]
fn fit_accepts_the_method_ids_of_the_default_suite() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let train = d.join("t.csv");
    fs::write(&train, csv_text(&rows(300, 5, ScoreKind::Probability))).unwrap();
    let suite: toml::Table = toml::from_str(
        &fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("suites/open-uci.toml"))
            .unwrap(),
    )
    .unwrap();
    let methods = suite["method"].as_array().unwrap();
    assert!(methods.len() >= 10, "{}", methods.len());
    let fit_to = |out: &Path, args: &[String]| {
        bin()
            .arg("fit")
            .args(args)
            .arg("--scores")
            .arg(&train)
            .arg("--out")
            .arg(out)
            .assert()
            .success();
        fs::read(out).unwrap()
    };
    let mut with_parameters = 0;
    for m in methods {
        let t = m.as_table().unwrap();
        let id = t["id"].as_str().unwrap();
        let kind = t["kind"].as_str().unwrap();
        let mut by_kind = vec!["--method".to_string(), kind.to_string()];
        for (k, v) in t.iter().filter(|(k, _)| *k != "id" && *k != "kind") {
            let v = match v {
                toml::Value::String(s) => s.clone(),
                other => other.to_string(),
            };
            by_kind.extend(["--set".to_string(), format!("{k}={v}")]);
        }
        with_parameters += usize::from(by_kind.len() > 2);
        let a = fit_to(
            &d.join("by-id.json"),
            &["--method".to_string(), id.to_string()],
        );
        let b = fit_to(&d.join("by-kind.json"), &by_kind);
        assert!(
            a == b,
            "{id}: `--method {id}` and `{}` differ",
            by_kind.join(" ")
        );
    }
    assert!(with_parameters >= 3, "the suite has ids with parameters");
    // The map records the parameters of the id.
    fit_to(
        &d.join("iso.json"),
        &["--method".into(), "isotonic-bounded".into()],
    );
    let v: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(d.join("iso.json")).unwrap()).unwrap();
    assert_eq!(
        v["method"],
        serde_json::json!({"kind": "isotonic", "pseudo_count": 1.0})
    );
    // --set replaces a parameter of the id.
    fit_to(
        &d.join("bins.json"),
        &[
            "--method".into(),
            "binning-bounded".into(),
            "--set".into(),
            "bins=5".into(),
        ],
    );
    let v: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(d.join("bins.json")).unwrap()).unwrap();
    assert_eq!(
        v["method"],
        serde_json::json!({"kind": "binning", "bins": 5, "pseudo_count": 1.0})
    );
}

/// `--suite FILE` resolves the ids of another suite's method table; an
/// unknown id lists that suite's ids, and a bad method table is reported
/// with its file, line and column.
#[test]
fn fit_resolves_ids_in_a_given_suite() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let train = d.join("t.csv");
    fs::write(&train, csv_text(&rows(300, 6, ScoreKind::Probability))).unwrap();
    let suite = d.join("mine.toml");
    fs::write(
        &suite,
        "name = \"mine\"\n\n[[method]]\nid = \"platt-smoothed\"\nkind = \"platt\"\ntarget_smoothing = true\n\n[[method]]\nid = \"fine-spline\"\nkind = \"spline\"\nintervals = 30\n",
    )
    .unwrap();
    let out = d.join("m.json");
    let run = |method: &str, suite: &Path| {
        bin()
            .args(["fit", "--method", method, "--suite"])
            .arg(suite)
            .arg("--scores")
            .arg(&train)
            .arg("--out")
            .arg(&out)
            .assert()
    };
    run("platt-smoothed", &suite).success();
    let v: serde_json::Value = serde_json::from_str(&fs::read_to_string(&out).unwrap()).unwrap();
    assert_eq!(
        v["method"],
        serde_json::json!({"kind": "platt", "target_smoothing": true})
    );
    fs::remove_file(&out).unwrap();
    let a = run("isotonic-bounded", &suite).failure();
    let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
    assert!(
        err.contains("--method isotonic-bounded: not a method id of")
            && err.contains(
                "mine.toml (platt-smoothed, fine-spline) nor a method kind (identity, platt,"
            ),
        "{err}"
    );
    assert!(!out.exists());
    let bad = d.join("bad.toml");
    fs::write(
        &bad,
        "name = \"bad\"\n\n[[method]]\nid = \"p\"\nkind = \"platt\"\nsmoothing = true\n",
    )
    .unwrap();
    let a = run("p", &bad).failure();
    let err = String::from_utf8_lossy(&a.get_output().stderr).into_owned();
    assert!(
        err.contains("bad.toml:3:1: method `p`: unknown field `smoothing`"),
        "{err}"
    );
    assert!(!out.exists());
}

/// A case of a committed reference fixture (`tests/fixtures/methods/`, made
/// by `scripts/fixtures_methods.py`) written as a score file.
fn fixture_case(d: &Path, file: &str, case: &str) -> (PathBuf, serde_json::Value) {
    let all: serde_json::Value = serde_json::from_str(
        &fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join(format!("tests/fixtures/methods/{file}")),
        )
        .unwrap(),
    )
    .unwrap();
    let c = all["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == case)
        .unwrap()
        .clone();
    let mut text = String::from("score,label\n");
    for (s, y) in c["scores"]
        .as_array()
        .unwrap()
        .iter()
        .zip(c["labels"].as_array().unwrap())
    {
        let y = y
            .as_f64()
            .unwrap_or_else(|| y.as_bool().map_or(f64::NAN, f64::from));
        text.push_str(&format!("{},{}\n", s.as_f64().unwrap(), y));
    }
    let p = d.join(format!("{case}.csv"));
    fs::write(&p, text).unwrap();
    (p, c)
}

/// The number after `NAME = ` on a line of `fit`'s terminal output.
fn printed(err: &str, name: &str) -> f64 {
    let line = err
        .lines()
        .find(|l| l.trim_start().starts_with(&format!("{name} = ")))
        .unwrap_or_else(|| panic!("no `{name} = ` line in: {err}"));
    let rest = &line.trim_start()[name.len() + 3..];
    rest.split_whitespace().next().unwrap().parse().unwrap()
}

/// `fit` prints the fitted parameters: Platt's a and b and beta's a, b and c
/// agree with statsmodels' Logit (fixtures of `scripts/fixtures_methods.py`)
/// to the six significant digits printed; an isotonic map prints its number
/// of steps, the distinct values of scipy's `isotonic_regression` fit.
#[test]
fn fit_prints_the_fitted_parameters() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let fit_err = |method: &str, scores: &Path| {
        let a = bin()
            .args(["fit", "--method", method, "--scores"])
            .arg(scores)
            .arg("--out")
            .arg(d.join("m.json"))
            .assert()
            .success();
        assert!(a.get_output().stdout.is_empty());
        String::from_utf8_lossy(&a.get_output().stderr).into_owned()
    };
    let close = |got: f64, want: f64, what: &str| {
        assert!(
            (got - want).abs() <= 1e-5 * want.abs().max(1e-3),
            "{what}: printed {got}, reference {want}"
        );
    };
    let (p, c) = fixture_case(d, "platt.json", "prob-400");
    let err = fit_err("platt", &p);
    close(printed(&err, "a"), c["a"].as_f64().unwrap(), "platt a");
    close(printed(&err, "b"), c["b"].as_f64().unwrap(), "platt b");

    let (p, c) = fixture_case(d, "beta.json", "beta-200");
    let err = fit_err("beta", &p);
    for k in ["a", "b", "c"] {
        close(printed(&err, k), c["full"][k].as_f64().unwrap(), k);
    }

    let (p, c) = fixture_case(d, "isotonic.json", "distinct-300");
    let err = fit_err("isotonic", &p);
    let mut levels: Vec<f64> = c["fitted"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    levels.sort_by(f64::total_cmp);
    levels.dedup_by(|a, b| (*a - *b).abs() < 1e-12);
    assert!(
        err.contains(&format!("\n  {} steps (", levels.len())),
        "{} steps expected in: {err}",
        levels.len()
    );
}

/// A probability score outside [0, 1] is refused with a hint in the terms of
/// the command: `fit` names its `--score-kind` flag, `apply` the map's score
/// kind, `diagnose` what it reads, and only a suite names the suite key.
#[test]
fn out_of_range_hints_name_what_the_user_can_change() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let scores = d.join("wide.csv");
    fs::write(&scores, "score,label\n0.2,0\n0.7,1\n1.5,1\n0.4,0\n").unwrap();
    let stderr = |a: assert_cmd::assert::Assert| {
        String::from_utf8_lossy(&a.get_output().stderr).into_owned()
    };
    let at = "wide.csv:4: column `score` (field 1): a probability score must lie in [0, 1]";

    let err = stderr(
        bin()
            .args(["fit", "--method", "platt", "--scores"])
            .arg(&scores)
            .arg("--out")
            .arg(d.join("m.json"))
            .assert()
            .failure(),
    );
    assert!(
        err.contains(&format!(
            "{at} (use --score-kind margin for other scores): `1.5`"
        )),
        "{err}"
    );
    assert!(!err.contains("score_kind ="), "{err}");

    let map = small_map(d);
    let err = stderr(apply(&map, &scores, &d.join("o.csv")).failure());
    assert!(
        err.contains(&format!("{at} (the map was fitted on probabilities; fit one with --score-kind margin for other scores)")),
        "{err}"
    );

    let err = stderr(
        bin()
            .arg("diagnose")
            .arg(&scores)
            .arg("--out")
            .arg(d.join("diag"))
            .assert()
            .failure(),
    );
    assert!(
        err.contains(&format!("{at} (diagnose reads probabilities)")),
        "{err}"
    );
    assert!(!err.contains("score_kind ="), "{err}");

    let suite = d.join("s.toml");
    fs::write(
        &suite,
        "name = \"s\"\nseed = 1\nrepeats = 2\nsizes = [2]\nreference = \"platt\"\n\
         metrics = [\"log_loss\"]\nprimary_metric = \"log_loss\"\n\n\
         [[method]]\nid = \"platt\"\nkind = \"platt\"\n\n\
         [[task]]\nid = \"w\"\nscores = \"wide.csv\"\nscore_column = \"score\"\n\
         label_column = \"label\"\nscore_kind = \"probability\"\n",
    )
    .unwrap();
    let err = stderr(bin().arg("check").arg(&suite).assert().failure());
    assert!(
        err.contains(&format!(
            "{at} (use score_kind = \"margin\" for other scores)"
        )),
        "{err}"
    );
}

/// Many batches (the reader and writer stages hand over rows in batches):
/// every row arrives once, in order, for a file that ends mid-batch.
#[test]
fn long_files_keep_every_row_in_order() {
    let dir = TempDir::new().unwrap();
    let d = dir.path();
    let map = small_map(d);
    let n = 41_234;
    let r = rows(n, 21, ScoreKind::Probability);
    let input = d.join("long.csv");
    fs::write(&input, csv_text(&r)).unwrap();
    for _ in 0..3 {
        let out = d.join("long-out.csv");
        apply(&map, &input, &out).success();
        let got = read_output(&out, "calibrated");
        assert_eq!(got.len(), n);
        assert!(got.iter().zip(&r).all(|(g, w)| g.0 == w.0));
    }
}
