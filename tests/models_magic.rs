//! Base models on the MAGIC Gamma Telescope data (`data-open/magic.csv.gz`,
//! 19,020 rows, 10 numeric features, class g = 12,332 / h = 6,688 as published
//! on the UCI Machine Learning Repository entry). Positive class: h, as in the
//! shipped `magic` task.
//!
//! AUC floors catch an inverted probability orientation (an inverted score
//! would give AUC ≈ 1 − floor) and a broken fit. The floors sit below the
//! figures we measured on this split (see docs/performance.md, "Base models";
//! the margins are common practice); the measured figures themselves are
//! pinned as seeded regression values. The file is owned by the open-data part
//! of the repository.

use std::io::Read;

use plumbline::data::{Dataset, FeatureKind};
use plumbline::models::ModelSpec;
use plumbline::split::partition;

const FILE: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/data-open/magic.csv.gz");

fn magic() -> Dataset {
    let f = std::fs::File::open(FILE).unwrap_or_else(|e| panic!("{FILE}: {e}"));
    let mut text = String::new();
    flate2::read::GzDecoder::new(f)
        .read_to_string(&mut text)
        .unwrap();
    let mut rdr = csv::Reader::from_reader(text.as_bytes());
    let header: Vec<String> = rdr.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(header.len(), 11);
    assert_eq!(header[10], "class");
    let mut columns = vec![Vec::new(); 10];
    let mut labels = Vec::new();
    for rec in rdr.records() {
        let rec = rec.unwrap();
        for (j, col) in columns.iter_mut().enumerate() {
            col.push(rec[j].parse::<f64>().unwrap());
        }
        labels.push(match &rec[10] {
            "h" => true,
            "g" => false,
            other => panic!("class {other}"),
        });
    }
    Dataset {
        id: "magic".into(),
        names: header[..10].to_vec(),
        columns,
        kinds: vec![FeatureKind::Numeric; 10],
        labels,
    }
}

/// Area under the ROC curve by the Mann–Whitney U statistic with mid-ranks for
/// ties (Hanley & McNeil 1982, Radiology 143).
fn auc(scores: &[f64], labels: &[bool]) -> f64 {
    let mut idx: Vec<usize> = (0..scores.len()).collect();
    idx.sort_by(|&a, &b| scores[a].total_cmp(&scores[b]));
    let mut ranks = vec![0.0; scores.len()];
    let mut i = 0;
    while i < idx.len() {
        let mut j = i;
        while j + 1 < idx.len() && scores[idx[j + 1]] == scores[idx[i]] {
            j += 1;
        }
        let mid = (i + j) as f64 / 2.0 + 1.0;
        for &k in &idx[i..=j] {
            ranks[k] = mid;
        }
        i = j + 1;
    }
    let np = labels.iter().filter(|&&y| y).count() as f64;
    let nn = labels.len() as f64 - np;
    let rsum: f64 = ranks
        .iter()
        .zip(labels)
        .filter(|(_, &y)| y)
        .map(|(r, _)| r)
        .sum();
    (rsum - np * (np + 1.0) / 2.0) / (np * nn)
}

#[test]
fn magic_file_matches_published_counts() {
    // UCI entry: 19,020 instances, 12,332 gamma (g) and 6,688 hadron (h).
    let d = magic();
    assert_eq!(d.rows(), 19_020);
    assert_eq!(d.labels.iter().filter(|&&y| y).count(), 6_688);
}

#[test]
fn auc_on_a_hand_example() {
    // Pairs (pos, neg): (0.8 > 0.3), (0.8 > 0.5), (0.4 > 0.3), (0.4 < 0.5) → 3/4.
    assert_eq!(
        auc(&[0.8, 0.4, 0.3, 0.5], &[true, true, false, false]),
        0.75
    );
    // A tie counts one half.
    assert_eq!(auc(&[0.5, 0.5], &[true, false]), 0.5);
}

#[test]
fn every_model_scores_p_of_the_positive_class() {
    let d = magic();
    // 10,000 training rows, 9,020 test rows.
    let (train, test) = partition(d.rows(), 9_020, 2024);
    let y: Vec<bool> = test.iter().map(|&r| d.labels[r]).collect();
    // Floors: common-practice margins below the measured AUCs; they catch an
    // inverted orientation or a broken fit whatever the exact value.
    //
    // Pinned: seeded regression values, not outside facts. The split (seed
    // 2024) and the fits (seed 7) are deterministic, so the AUC is what this
    // code computed when the pin was set (also in docs/performance.md, "Base
    // models"), to a relative 1e-9; a change that moves a base model's scores
    // shows here. The independent checks are elsewhere: logistic regression
    // and naive Bayes against scikit-learn and statsmodels in
    // tests/models_reference.rs, the AUC function against the hand example
    // above. Forest and boosting (smartcore and forust-ml fits) have no
    // outside reference beyond their floors.
    for (spec, floor, pinned) in [
        (ModelSpec::logistic(), 0.80, 0.8405137779891877),
        (ModelSpec::naive_bayes(), 0.70, 0.7546519422606223),
        (ModelSpec::forest(), 0.90, 0.9350289288241719),
        (ModelSpec::boosting(), 0.90, 0.9380520869910721),
    ] {
        let m = spec.fit(&d, &train, 7).unwrap();
        let p = m.score(&d, &test).unwrap();
        assert!(p.iter().all(|v| (0.0..=1.0).contains(v)), "{}", spec.kind());
        let a = auc(&p, &y);
        eprintln!("{}: test AUC {a:?}", spec.kind());
        assert!(a > floor, "{}: AUC {a:.4} ≤ {floor}", spec.kind());
        assert!(
            (a - pinned).abs() <= 1e-9 * pinned,
            "{}: AUC {a:?}, pinned seeded value {pinned:?}",
            spec.kind()
        );
        // Probability orientation also in the mean: positives score higher.
        let mean = |want: bool| {
            let v: Vec<f64> = p
                .iter()
                .zip(&y)
                .filter(|(_, &t)| t == want)
                .map(|(s, _)| *s)
                .collect();
            v.iter().sum::<f64>() / v.len() as f64
        };
        assert!(mean(true) > mean(false), "{}", spec.kind());
    }
}
