//! Multiclass metrics and maps against reference libraries.
//!
//! The fixture `tests/fixtures/multiclass/reference.json` is written by
//! `scripts/fixtures_multiclass.py` (library versions in its "generator"
//! header), which says how every reference value is computed: scikit-learn's
//! log loss, the Brier score and binned ECEs by numpy, and temperature,
//! vector and matrix scaling and Dirichlet calibration (at fixed ODIR
//! strengths) fitted by scipy's BFGS.
//!
//! Tolerances:
//! * Metrics: the same sums of at most a few hundred terms in another order,
//!   so they agree to rounding: 1e-12 absolute on values of order 1.
//! * Fitted parameters: for a μ-strongly convex objective a point where the
//!   gradient is g lies within |g|/μ of the optimum, and its value within
//!   |g|²/(2μ) of the minimum. scipy's solution stops at the gradient the
//!   fixture records, plumbline's at a gradient of about 1e-12 or less
//!   (temperature: |F′| below 1e-13 of the logits' sum; vector: gradient
//!   entries below 1e-12 or a Newton decrement below 1e-20), so the two
//!   agree within 2·(|g_scipy| + 1e-12)/μ plus 1e-9 for rounding in the sums.
//!   Vector scaling's objective is globally λ-strongly convex (λ the
//!   penalty; the fixture's smallest Hessian eigenvalue is λ itself, the
//!   direction that shifts every bias alike), so μ = λ there. Temperature
//!   scaling in ln T is convex only near the optimum: μ is the second
//!   derivative there (quadratic model), the factor 2 covering the rest.
//!   Matrix scaling and Dirichlet calibration (K² + K parameters) report the
//!   largest gradient entry g_own where they stopped, a norm below
//!   √(K² + K)·g_own; their
//!   objectives are strongly convex with μ at least the smallest Hessian
//!   eigenvalue the fixture records at scipy's optimum (the Hessian changes
//!   little over the tiny distance between the two points; the factor 2
//!   covers it), so they agree within 2·(|g_scipy| + √(K² + K)·g_own)/μ
//!   plus 1e-9.
//! * Objective at the optimum: the two minima agree within twice |g|²/(2μ)
//!   plus 1e-12.

use plumbline::multiclass::metrics::{self, Binning};
use plumbline::multiclass::{dirichlet, matrix, temperature, vector};
use serde::Deserialize;

#[derive(Deserialize)]
struct Fixture {
    generator: serde_json::Value,
    cases: Vec<Case>,
}

#[derive(Deserialize)]
struct Ece {
    top_label_width: f64,
    top_label_mass: f64,
    classwise_width: f64,
    classwise_mass: f64,
}

#[derive(Deserialize)]
struct Temperature {
    t: f64,
    grad_ln_t: f64,
    curvature_ln_t: f64,
    log_loss: f64,
}

#[derive(Deserialize)]
struct Vector {
    penalty: f64,
    w: Vec<f64>,
    b: Vec<f64>,
    objective: f64,
    grad_norm: f64,
    min_hessian_eigenvalue: f64,
    log_loss: f64,
}

#[derive(Deserialize)]
struct Matrix {
    penalty: f64,
    w: Vec<f64>,
    b: Vec<f64>,
    objective: f64,
    grad_norm: f64,
    min_hessian_eigenvalue: f64,
    log_loss: f64,
}

#[derive(Deserialize)]
struct Dirichlet {
    lambda: f64,
    mu: f64,
    diagonal_guard: f64,
    log_clip: f64,
    w: Vec<f64>,
    b: Vec<f64>,
    objective: f64,
    grad_norm: f64,
    min_hessian_eigenvalue: f64,
    log_loss: f64,
}

#[derive(Deserialize)]
struct Case {
    name: String,
    classes: usize,
    logits: Vec<f64>,
    labels: Vec<usize>,
    probabilities: Vec<f64>,
    bins: usize,
    log_loss: f64,
    brier: f64,
    ece: Ece,
    temperature: Temperature,
    vector: Vector,
    matrix: Matrix,
    dirichlet: Dirichlet,
}

/// The plumbline log-loss clip; the fixture checks it changes nothing.
const CLIP: f64 = 1e-6;

fn load() -> Fixture {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/multiclass/reference.json"
    );
    let text = std::fs::read_to_string(path).expect("fixture present");
    let f: Fixture = serde_json::from_str(&text).expect("fixture parses");
    assert!(f.generator["scikit-learn"].is_string() && f.generator["scipy"].is_string());
    assert!(!f.cases.is_empty());
    // Every matrix has one row of K values per label: zipping unequal
    // lengths would compare a silently shortened sample.
    for c in &f.cases {
        let n = c.labels.len();
        assert!(n > 0, "{}: no rows", c.name);
        assert_eq!(c.logits.len(), n * c.classes, "{}: logits", c.name);
        assert_eq!(
            c.probabilities.len(),
            n * c.classes,
            "{}: probabilities",
            c.name
        );
        assert_eq!(c.vector.w.len(), c.classes, "{}: w", c.name);
        assert_eq!(c.vector.b.len(), c.classes, "{}: b", c.name);
        let kk = c.classes * c.classes;
        assert_eq!(c.matrix.w.len(), kk, "{}: matrix W", c.name);
        assert_eq!(c.matrix.b.len(), c.classes, "{}: matrix b", c.name);
        assert_eq!(c.dirichlet.w.len(), kk, "{}: Dirichlet W", c.name);
        assert_eq!(c.dirichlet.b.len(), c.classes, "{}: Dirichlet b", c.name);
    }
    f
}

fn close(name: &str, what: &str, got: f64, want: f64, tol: f64) {
    assert!(
        (got - want).abs() <= tol,
        "{name} {what}: plumbline {got} against reference {want} (tolerance {tol:e})"
    );
}

#[test]
fn metrics_match_the_references() {
    for c in load().cases {
        let (p, k, y, n) = (&c.probabilities, c.classes, &c.labels, &c.name);
        close(
            n,
            "log loss",
            metrics::log_loss(p, k, y, CLIP).unwrap(),
            c.log_loss,
            1e-12,
        );
        close(n, "Brier", metrics::brier(p, k, y).unwrap(), c.brier, 1e-12);
        let b = c.bins;
        let cases = [
            (
                "top-label ECE, width",
                metrics::top_label_ece(p, k, y, b, Binning::EqualWidth),
                c.ece.top_label_width,
            ),
            (
                "top-label ECE, mass",
                metrics::top_label_ece(p, k, y, b, Binning::EqualMass),
                c.ece.top_label_mass,
            ),
            (
                "classwise ECE, width",
                metrics::classwise_ece(p, k, y, b, Binning::EqualWidth),
                c.ece.classwise_width,
            ),
            (
                "classwise ECE, mass",
                metrics::classwise_ece(p, k, y, b, Binning::EqualMass),
                c.ece.classwise_mass,
            ),
        ];
        for (what, got, want) in cases {
            close(n, what, got.unwrap(), want, 1e-12);
        }
    }
}

#[test]
fn temperature_matches_scipy() {
    for c in load().cases {
        let r = &c.temperature;
        let f = temperature::fit(&c.logits, c.classes, &c.labels).unwrap();
        assert!(!f.flat);
        let tol = 2.0 * (r.grad_ln_t.abs() + 1e-12) / r.curvature_ln_t + 1e-9;
        close(&c.name, "ln T", f.temperature().ln(), r.t.ln(), tol);
        // The fitted map's predictions, scored like scikit-learn scores scipy's.
        let p = f.predict(&c.logits, c.classes).unwrap();
        let ll = metrics::log_loss(&p, c.classes, &c.labels, CLIP).unwrap();
        let gap = r.grad_ln_t * r.grad_ln_t / r.curvature_ln_t;
        close(&c.name, "log loss at T", ll, r.log_loss, 2.0 * gap + 1e-12);
        // And plumbline's optimum is no worse than scipy's.
        let own =
            temperature::mean_log_loss(&c.logits, c.classes, &c.labels, f.inverse_temperature);
        let theirs = temperature::mean_log_loss(&c.logits, c.classes, &c.labels, 1.0 / r.t);
        assert!(own <= theirs + 1e-14, "{}: {own} > {theirs}", c.name);
    }
}

#[test]
fn vector_scaling_matches_scipy() {
    for c in load().cases {
        let r = &c.vector;
        assert_eq!(
            r.penalty,
            vector::DEFAULT_PENALTY,
            "{}: the fixture's penalty",
            c.name
        );
        let f = vector::fit(&c.logits, c.classes, &c.labels).unwrap();
        // λ-strong convexity; the Hessian's smallest eigenvalue is never below λ.
        assert!(r.min_hessian_eigenvalue >= r.penalty * (1.0 - 1e-6));
        let mu = r.penalty;
        let tol = 2.0 * (r.grad_norm + 1e-12) / mu + 1e-9;
        let dist =
            f.w.iter()
                .chain(&f.b)
                .zip(r.w.iter().chain(&r.b))
                .map(|(a, b)| (a - b) * (a - b))
                .sum::<f64>()
                .sqrt();
        assert!(
            dist <= tol,
            "{}: (w, b) {:?} {:?} against scipy's {:?} {:?}: distance {dist:e} > {tol:e}",
            c.name,
            f.w,
            f.b,
            r.w,
            r.b
        );
        let gap = r.grad_norm * r.grad_norm / (2.0 * mu);
        let j = vector::objective(&c.logits, c.classes, &c.labels, &f.w, &f.b, f.penalty);
        let jtol = 2.0 * gap + 1e-12;
        close(&c.name, "objective", j, r.objective, jtol);
        let p = f.predict(&c.logits).unwrap();
        let ll = metrics::log_loss(&p, c.classes, &c.labels, CLIP).unwrap();
        // The log loss alone is J − (λ/2)‖θ − θ₀‖² with θ₀ = (1, 0), and
        // |‖x‖² − ‖y‖²| ≤ ‖x − y‖(‖x‖ + ‖y‖): so the two log losses differ by
        // at most the objective's tolerance plus (λ/2)·distance·(‖θ − θ₀‖ of
        // each fit), plus rounding.
        let norm = |w: &[f64], b: &[f64]| {
            w.iter()
                .map(|v| (v - 1.0) * (v - 1.0))
                .chain(b.iter().map(|v| v * v))
                .sum::<f64>()
                .sqrt()
        };
        let spread = 0.5 * r.penalty * dist * (norm(&f.w, &f.b) + norm(&r.w, &r.b));
        close(&c.name, "log loss", ll, r.log_loss, jtol + spread + 1e-12);
    }
}

/// Euclidean distance between two parameter lists.
fn distance(a: &[f64], b: &[f64]) -> f64 {
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y) * (x - y))
        .sum::<f64>()
        .sqrt()
}

/// The distance bound of a (K² + K)-parameter fit (module doc); `own_max`
/// is the largest gradient entry where plumbline's fit stopped.
fn affine_tolerance(classes: usize, grad_norm: f64, own_max: f64, min_eigenvalue: f64) -> f64 {
    assert!(
        own_max <= 1e-9,
        "the fit stopped at a gradient entry of {own_max:e}"
    );
    let own = ((classes * (classes + 1)) as f64).sqrt() * own_max;
    2.0 * (grad_norm + own) / min_eigenvalue + 1e-9
}

#[test]
fn matrix_scaling_matches_scipy() {
    for c in load().cases {
        let r = &c.matrix;
        assert_eq!(r.penalty, matrix::DEFAULT_PENALTY, "{}: penalty", c.name);
        let f = matrix::fit(&c.logits, c.classes, &c.labels).unwrap();
        // λ-strong convexity: the Hessian's smallest eigenvalue is never below λ.
        assert!(r.min_hessian_eigenvalue >= r.penalty * (1.0 - 1e-6));
        let tol = affine_tolerance(c.classes, r.grad_norm, f.gradient, r.min_hessian_eigenvalue);
        let (own, theirs): (Vec<f64>, Vec<f64>) = (
            f.w.iter().chain(&f.b).copied().collect(),
            r.w.iter().chain(&r.b).copied().collect(),
        );
        let dist = distance(&own, &theirs);
        assert!(
            dist <= tol,
            "{}: (W, b) {own:?} against scipy's {theirs:?}: distance {dist:e} > {tol:e}",
            c.name
        );
        let j = matrix::objective(&c.logits, c.classes, &c.labels, &f.w, &f.b, f.penalty);
        let gap = r.grad_norm * r.grad_norm / (2.0 * r.min_hessian_eigenvalue);
        close(
            &c.name,
            "matrix objective",
            j,
            r.objective,
            2.0 * gap + 1e-12,
        );
        // The log loss alone: within the Lipschitz bound of the mean log loss
        // in the parameters over the distance (features below max|z| + 1 per
        // row), plus rounding.
        let p = f.predict(&c.logits).unwrap();
        let ll = metrics::log_loss(&p, c.classes, &c.labels, CLIP).unwrap();
        let zmax = c.logits.iter().fold(1.0f64, |m, v| m.max(v.abs()));
        let lip = 2.0 * zmax * ((c.classes + 1) as f64).sqrt();
        close(
            &c.name,
            "matrix log loss",
            ll,
            r.log_loss,
            lip * dist + 1e-12,
        );
    }
}

#[test]
fn dirichlet_matches_scipy_at_fixed_strengths() {
    for c in load().cases {
        let r = &c.dirichlet;
        assert_eq!(r.diagonal_guard, dirichlet::DIAGONAL_GUARD, "{}", c.name);
        assert_eq!(r.log_clip, dirichlet::LOG_CLIP, "{}", c.name);
        let q = &c.probabilities;
        let f = dirichlet::fit_with(q, c.classes, &c.labels, r.lambda, r.mu).unwrap();
        assert!(f.choice.is_none());
        assert!(r.min_hessian_eigenvalue > 0.0);
        let tol = affine_tolerance(c.classes, r.grad_norm, f.gradient, r.min_hessian_eigenvalue);
        let (own, theirs): (Vec<f64>, Vec<f64>) = (
            f.w.iter().chain(&f.b).copied().collect(),
            r.w.iter().chain(&r.b).copied().collect(),
        );
        let dist = distance(&own, &theirs);
        assert!(
            dist <= tol,
            "{}: (W, b) {own:?} against scipy's {theirs:?}: distance {dist:e} > {tol:e}",
            c.name
        );
        let j = dirichlet::objective(q, c.classes, &c.labels, &f.w, &f.b, r.lambda, r.mu);
        let gap = r.grad_norm * r.grad_norm / (2.0 * r.min_hessian_eigenvalue);
        close(
            &c.name,
            "Dirichlet objective",
            j,
            r.objective,
            2.0 * gap + 1e-12,
        );
        // The log loss alone: Lipschitz in the parameters with features
        // ln q (|ln q| ≤ |ln 1e-12|, and at most max|ln q| here) plus the 1.
        let p = f.predict(q).unwrap();
        let ll = metrics::log_loss(&p, c.classes, &c.labels, CLIP).unwrap();
        let xmax = q
            .iter()
            .fold(1.0f64, |m, v| m.max(v.max(dirichlet::LOG_CLIP).ln().abs()));
        let lip = 2.0 * xmax * ((c.classes + 1) as f64).sqrt();
        close(
            &c.name,
            "Dirichlet log loss",
            ll,
            r.log_loss,
            lip * dist + 1e-12,
        );
    }
}
