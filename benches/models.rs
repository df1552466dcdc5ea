//! Fit and score times of the base models on MAGIC (10,000 training rows,
//! 9,020 test rows), with test log loss and AUC, and the time to build a
//! held-out and a cross-fitted pool. Prints a Markdown table.
//!
//! Run: `cargo bench --bench models` (release profile). The figures go into
//! docs/performance.md, section "Base models".

use std::io::Read;
use std::time::Instant;

use plumbline::data::{Dataset, FeatureKind};
use plumbline::models::protocol::{score_pool, Protocol};
use plumbline::models::ModelSpec;
use plumbline::split::partition;

fn magic() -> Dataset {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/data-open/magic.csv.gz");
    let f = std::fs::File::open(path).unwrap_or_else(|e| panic!("{path}: {e}"));
    let mut text = String::new();
    flate2::read::GzDecoder::new(f)
        .read_to_string(&mut text)
        .expect("gzip");
    let mut rdr = csv::Reader::from_reader(text.as_bytes());
    let names: Vec<String> = rdr
        .headers()
        .expect("header")
        .iter()
        .map(String::from)
        .collect();
    let mut columns = vec![Vec::new(); 10];
    let mut labels = Vec::new();
    for rec in rdr.records() {
        let rec = rec.expect("record");
        for (j, col) in columns.iter_mut().enumerate() {
            col.push(rec[j].parse::<f64>().expect("number"));
        }
        labels.push(&rec[10] == "h");
    }
    Dataset {
        id: "magic".into(),
        names: names[..10].to_vec(),
        columns,
        kinds: vec![FeatureKind::Numeric; 10],
        labels,
    }
}

fn auc(s: &[f64], y: &[bool]) -> f64 {
    let mut idx: Vec<usize> = (0..s.len()).collect();
    idx.sort_by(|&a, &b| s[a].total_cmp(&s[b]));
    let mut ranks = vec![0.0; s.len()];
    let mut i = 0;
    while i < idx.len() {
        let mut j = i;
        while j + 1 < idx.len() && s[idx[j + 1]] == s[idx[i]] {
            j += 1;
        }
        for &k in &idx[i..=j] {
            ranks[k] = (i + j) as f64 / 2.0 + 1.0;
        }
        i = j + 1;
    }
    let np = y.iter().filter(|&&v| v).count() as f64;
    let nn = y.len() as f64 - np;
    let r: f64 = ranks
        .iter()
        .zip(y)
        .filter(|(_, &v)| v)
        .map(|(r, _)| r)
        .sum();
    (r - np * (np + 1.0) / 2.0) / (np * nn)
}

fn log_loss(p: &[f64], y: &[bool]) -> f64 {
    let eps = 1e-15;
    p.iter()
        .zip(y)
        .map(|(&p, &y)| {
            let p = p.clamp(eps, 1.0 - eps);
            -if y { p.ln() } else { (1.0 - p).ln() }
        })
        .sum::<f64>()
        / p.len() as f64
}

fn main() {
    let d = magic();
    let (train, test) = partition(d.rows(), 9_020, 2024);
    let y: Vec<bool> = test.iter().map(|&r| d.labels[r]).collect();
    let threads = rayon::current_num_threads();
    println!(
        "MAGIC, {} training rows, {} test rows, {threads} threads",
        train.len(),
        test.len()
    );
    println!();
    println!("| model | fit (s) | score (s) | test log loss | test AUC | held-out pool (s) | cross-fitted pool, K = 5 (s) |");
    println!("|---|---|---|---|---|---|---|");
    for spec in [
        ModelSpec::logistic(),
        ModelSpec::naive_bayes(),
        ModelSpec::forest(),
        ModelSpec::boosting(),
    ] {
        let t0 = Instant::now();
        let m = spec.fit(&d, &train, 7).expect("fit");
        let fit = t0.elapsed().as_secs_f64();
        let t1 = Instant::now();
        let p = m.score(&d, &test).expect("score");
        let score = t1.elapsed().as_secs_f64();
        let t2 = Instant::now();
        score_pool(
            &d,
            &spec,
            &Protocol::HeldOut {
                train_fraction: 0.5,
            },
            1,
            None,
        )
        .expect("pool");
        let held = t2.elapsed().as_secs_f64();
        let t3 = Instant::now();
        score_pool(
            &d,
            &spec,
            &Protocol::CrossFitted {
                train_fraction: 0.5,
                folds: 5,
            },
            1,
            None,
        )
        .expect("pool");
        let cross = t3.elapsed().as_secs_f64();
        println!(
            "| {} | {fit:.3} | {score:.3} | {:.4} | {:.4} | {held:.3} | {cross:.3} |",
            spec.kind(),
            log_loss(&p, &y),
            auc(&p, &y)
        );
    }
}
