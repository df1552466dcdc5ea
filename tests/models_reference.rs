//! Base models against reference libraries, through committed fixtures made by
//! `scripts/fixtures_models.py` (library versions in the fixture's
//! `generated_by`): scikit-learn LogisticRegression and statsmodels Logit for
//! logistic regression, scikit-learn GaussianNB for naive Bayes, all on the same
//! synthetic dataset and the same training rows.

use plumbline::data::{Dataset, FeatureKind};
use plumbline::models::{logistic, naive_bayes, Model, ModelSpec};

mod common;
use common::{floats, pairs};

const DIR: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/models");

fn synthetic() -> (Dataset, Vec<usize>, Vec<usize>) {
    let mut rdr = csv::Reader::from_path(format!("{DIR}/synthetic.csv")).unwrap();
    let mut columns = vec![Vec::new(); 4];
    let mut labels = Vec::new();
    let (mut train, mut test) = (Vec::new(), Vec::new());
    for (i, rec) in rdr.records().enumerate() {
        let rec = rec.unwrap();
        for (j, col) in columns.iter_mut().enumerate() {
            col.push(rec[j].parse::<f64>().unwrap());
        }
        labels.push(&rec[4] == "1");
        if &rec[5] == "1" {
            train.push(i);
        } else {
            test.push(i);
        }
    }
    let d = Dataset {
        id: "synthetic".into(),
        names: vec!["x0".into(), "x1".into(), "x2".into(), "c".into()],
        columns,
        kinds: vec![
            FeatureKind::Numeric,
            FeatureKind::Numeric,
            FeatureKind::Numeric,
            FeatureKind::Categorical { levels: 4 },
        ],
        labels,
    };
    (d, train, test)
}

fn reference() -> serde_json::Value {
    let text = std::fs::read_to_string(format!("{DIR}/reference.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

#[test]
fn logistic_matches_scikit_learn_and_statsmodels() {
    let (d, train, test) = synthetic();
    let r = reference();
    assert_eq!(train.len() as u64, r["train_rows"].as_u64().unwrap());
    let cases = r["logistic"].as_array().unwrap();
    assert_eq!(cases.len(), 3);
    for case in cases {
        // λ = 1, 0.1: scikit-learn LogisticRegression(C = 1/λ) (lbfgs, tol 1e-12);
        // λ = 0: statsmodels Logit, Newton, unpenalised. Source in case["source"].
        let l2 = case["l2"].as_f64().unwrap();
        let source = case["source"].as_str().unwrap();
        let m = logistic::fit(&d, &train, l2, 100).unwrap();
        // scikit-learn's lbfgs stops at about 1e-9 from the optimum here;
        // statsmodels' Newton agrees with ours to rounding.
        let tol = if l2 == 0.0 { 1e-10 } else { 1e-7 };
        let want = floats(&case["coef"]);
        assert_eq!(m.coef.len(), want.len(), "{source}");
        let b = case["intercept"].as_f64().unwrap();
        assert!(
            (m.intercept - b).abs() < tol,
            "{source}: intercept {} vs {b}",
            m.intercept
        );
        for (j, (got, want)) in pairs(&m.coef, &want, source).enumerate() {
            assert!(
                (got - want).abs() < tol,
                "{source}: coef {j}: {got} vs {want}"
            );
        }
        let dmax = pairs(&m.coef, &want, source)
            .map(|(a, b)| (a - b).abs())
            .fold((m.intercept - b).abs(), f64::max);
        eprintln!("{source}: largest parameter difference {dmax:.2e}");
        let p = m.score(&d, &test).unwrap();
        let proba = floats(&case["test_proba"]);
        for (got, want) in pairs(&p, &proba, &format!("{source}: test_proba")) {
            assert!((got - want).abs() < 1e-7, "{source}: P {got} vs {want}");
        }
    }
    // The penalty shrinks: ‖w‖ at λ = 1 below ‖w‖ at λ = 0 (and the fixture
    // agrees, so the two λ are not swapped).
    let norm = |w: &[f64]| w.iter().map(|v| v * v).sum::<f64>();
    let w1 = logistic::fit(&d, &train, 1.0, 100).unwrap().coef;
    let w0 = logistic::fit(&d, &train, 0.0, 100).unwrap().coef;
    assert!(norm(&w1) < norm(&w0));
}

#[test]
fn naive_bayes_matches_scikit_learn_gaussian_nb() {
    let (d, train, test) = synthetic();
    let r = &reference()["naive_bayes"];
    let m = naive_bayes::fit(&d, &train, r["var_smoothing"].as_f64().unwrap()).unwrap();
    // scikit-learn GaussianNB: epsilon_ = var_smoothing × max feature variance.
    let eps = r["epsilon"].as_f64().unwrap();
    assert!(
        (m.epsilon - eps).abs() <= 1e-12 * eps,
        "{} vs {eps}",
        m.epsilon
    );
    let prior = floats(&r["class_prior"]);
    assert_eq!(prior.len(), 2, "class_prior");
    for c in 0..2 {
        assert!((m.log_prior[c].exp() - prior[c]).abs() < 1e-14);
        let theta = floats(&r["theta"][c]);
        let var = floats(&r["var"][c]);
        assert_eq!(theta.len(), m.mean[c].len(), "theta[{c}]");
        assert_eq!(var.len(), m.var[c].len(), "var[{c}]");
        for j in 0..theta.len() {
            assert!((m.mean[c][j] - theta[j]).abs() < 1e-12, "theta[{c}][{j}]");
            assert!(
                (m.var[c][j] - var[j]).abs() < 1e-12 * var[j].max(1.0),
                "var[{c}][{j}]"
            );
        }
    }
    let p = m.score(&d, &test).unwrap();
    let proba = floats(&r["test_proba"]);
    for (got, want) in pairs(&p, &proba, "naive Bayes test_proba") {
        assert!((got - want).abs() < 1e-10, "P {got} vs {want}");
    }
}

#[test]
fn spec_fit_uses_the_same_models() {
    // ModelSpec::fit is a thin front: same scores as the direct fits above.
    let (d, train, test) = synthetic();
    let direct = logistic::fit(&d, &train, 1.0, 100).unwrap();
    let via = ModelSpec::logistic().fit(&d, &train, 0).unwrap();
    assert_eq!(
        direct.score(&d, &test).unwrap(),
        via.score(&d, &test).unwrap()
    );
}
