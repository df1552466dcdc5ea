//! Calibration methods: each one turns raw scores of a base model into
//! probabilities, fitted on a calibration sample.
//!
//! A method is described in a suite by a [`MethodSpec`] (a plain id plus its
//! parameters). [`MethodSpec::validate`] checks the parameters against the score
//! kind of a task before any unit runs; [`MethodSpec::build`] turns a checked spec
//! into a [`Calibrator`]. Fitting returns a [`Fitted`] map plus notes that end up
//! in the unit's status column (for example `separable` for Platt scaling on a
//! perfectly separated sample).
//!
//! Adding a method: one file in this folder with a `//!` doc that states the math
//! and cites the paper, holding its parameters (a [`Method`]), its fit (a
//! [`Calibrator`]) and its saved state (a [`state::SavedMap`]); then one line
//! in the `methods!` list below, one in the `saved_maps!` list of `state.rs`,
//! and its `pub mod` line (see DEVELOPERS.md).

use serde::{Deserialize, Serialize};

pub mod beta;
pub mod binning;
pub mod centered_isotonic;
pub mod exact_sum;
pub mod identity;
pub mod isotonic;
pub mod logistic;
pub mod platt;
pub mod score_order;
pub mod spline;
pub mod state;
pub mod temperature;
pub mod venn_abers;

/// What a task's score column holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ScoreKind {
    /// A probability in [0, 1].
    Probability,
    /// A real-valued margin (log-odds or any monotone score on the real line).
    Margin,
}

impl ScoreKind {
    pub fn as_str(self) -> &'static str {
        match self {
            ScoreKind::Probability => "probability",
            ScoreKind::Margin => "margin",
        }
    }
}

/// Probabilities are clipped to `[LOGIT_EPS, 1 - LOGIT_EPS]` before a method
/// takes their log-odds or logarithms (beta, temperature, spline). The value
/// keeps `ln(s / (1 - s))` finite for scores of exactly 0 or 1 (about ±27.6);
/// every score within 1e-12 of 0 (or of 1) becomes the same value, so a
/// saturated sample (for example naive-Bayes scores that underflow to 0 or 1)
/// may have only two distinct clipped scores. Platt scaling works on the raw
/// score and needs no clip.
pub const LOGIT_EPS: f64 = 1e-12;

/// Log-odds of a score: the logit of a clipped probability, or the margin itself.
pub fn log_odds(score: f64, kind: ScoreKind) -> f64 {
    match kind {
        ScoreKind::Probability => {
            let s = score.clamp(LOGIT_EPS, 1.0 - LOGIT_EPS);
            (s / (1.0 - s)).ln()
        }
        ScoreKind::Margin => score,
    }
}

/// Numerically stable logistic function.
pub fn sigmoid(z: f64) -> f64 {
    if z >= 0.0 {
        1.0 / (1.0 + (-z).exp())
    } else {
        let e = z.exp();
        e / (1.0 + e)
    }
}

/// Why a fit produced no map.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FitError {
    #[error("one class: {positives} positives of {rows}")]
    OneClass { positives: usize, rows: usize },
    #[error("the calibration sample is empty")]
    Empty,
    #[error("{0}")]
    Failed(String),
}

/// A parameter of a method that cannot be used.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{key} = {value}: {reason}")]
pub struct ParamError {
    pub key: String,
    pub value: String,
    pub reason: String,
}

impl ParamError {
    pub fn new(key: &str, value: impl std::fmt::Display, reason: &str) -> Self {
        ParamError {
            key: key.to_string(),
            value: value.to_string(),
            reason: reason.to_string(),
        }
    }
}

/// A fitted calibration map.
pub trait FittedMap: Send + Sync {
    /// Probabilities in [0, 1] for raw scores; `out.len() == scores.len()`.
    fn predict(&self, scores: &[f64], out: &mut [f64]);
    /// Every number `predict` reads, for saving the map and rebuilding it
    /// exactly ([`state::MapState::rebuild`]).
    fn state(&self) -> state::MapState;
    /// The fitted parameters as JSON (the serialised [`Self::state`]).
    fn describe(&self) -> serde_json::Value {
        serde_json::to_value(self.state()).unwrap_or(serde_json::Value::Null)
    }
    /// Extra per-unit figures a method reports about its predictions on the test
    /// scores (for example the mean Venn–Abers interval width). Each name becomes
    /// a column of `units.csv`; methods without extras leave it empty.
    fn extras(&self, _test_scores: &[f64]) -> Vec<(&'static str, f64)> {
        Vec::new()
    }
}

/// The result of a successful fit.
pub struct Fitted {
    pub map: Box<dyn FittedMap>,
    /// Short machine-readable notes (for example `separable`); they are joined
    /// with `+` into the unit's status, which is `ok` when there are none.
    pub notes: Vec<&'static str>,
}

impl Fitted {
    pub fn plain(map: Box<dyn FittedMap>) -> Self {
        Fitted {
            map,
            notes: Vec::new(),
        }
    }
}

/// A calibration method with checked parameters, ready to fit.
pub trait Calibrator: Send + Sync {
    /// The method's kind id (as written in suites), e.g. `platt`.
    fn kind(&self) -> &'static str;
    /// Fit on a calibration sample. `labels[i]` is true for the positive class.
    fn fit(&self, scores: &[f64], labels: &[bool]) -> Result<Fitted, FitError>;
}

/// Check the common preconditions of every fit.
pub fn check_sample(scores: &[f64], labels: &[bool]) -> Result<(), FitError> {
    if scores.is_empty() {
        return Err(FitError::Empty);
    }
    if scores.len() != labels.len() {
        return Err(FitError::Failed(format!(
            "{} scores but {} labels",
            scores.len(),
            labels.len()
        )));
    }
    let pos = labels.iter().filter(|&&y| y).count();
    if pos == 0 || pos == labels.len() {
        return Err(FitError::OneClass {
            positives: pos,
            rows: labels.len(),
        });
    }
    Ok(())
}

/// Where a method's map stands among the classes of the default data-size
/// threshold pairs (`suite::default_pairs`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Shape {
    /// Adapts its shape to the data (a step or spline map whose complexity
    /// grows with the sample).
    Flexible,
    /// A fixed parametric form the flexible methods are compared with.
    Parametric,
    /// Neither (the identity map, temperature scaling).
    Other,
}

/// The parameters of one method kind: the fields of its [`MethodSpec`]
/// variant, declared in the method's own file with their serde defaults.
pub trait Method {
    /// The kind id as written in suites (the kebab-case variant name).
    fn kind(&self) -> &'static str;
    /// Every parameter key with the values it accepts, for `fit --help`.
    fn keys(&self) -> &'static [(&'static str, &'static str)];
    /// The class of the default threshold pairs.
    fn shape(&self) -> Shape;
    /// Whether the fitted map can predict exactly 0 or 1 (see
    /// [`MethodSpec::can_predict_zero_one`]); no by default.
    fn predicts_zero_one(&self) -> bool {
        false
    }
    /// Check the parameters for a task whose scores are of `score_kind`.
    fn validate(&self, score_kind: ScoreKind) -> Result<(), ParamError>;
    /// The calibrator of checked parameters.
    fn calibrator(&self, score_kind: ScoreKind) -> Box<dyn Calibrator>;
}

/// Declares [`MethodSpec`] from one line per method (its variant and its
/// parameters type) and the dispatch to the parameters.
macro_rules! methods {
    ($($(#[$doc:meta])* $variant:ident($params:ty),)*) => {
        /// A method as written in a suite: `kind` picks the method, the other
        /// keys are its parameters. Unknown keys are rejected.
        #[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
        #[serde(tag = "kind", rename_all = "kebab-case")]
        pub enum MethodSpec {
            $($(#[$doc])* $variant($params),)*
        }

        impl MethodSpec {
            /// The parameters of this kind, through which every call dispatches.
            pub fn params(&self) -> &dyn Method {
                match self {
                    $(MethodSpec::$variant(p) => p,)*
                }
            }

            /// Every kind with its default parameters, in declaration order.
            pub fn defaults() -> Vec<MethodSpec> {
                vec![$(MethodSpec::$variant(<$params>::default()),)*]
            }
        }
    };
}

methods! {
    /// The raw probability, unchanged (probability tasks only).
    Identity(identity::Identity),
    /// Platt scaling.
    Platt(platt::Platt),
    /// Isotonic regression by pool-adjacent-violators.
    Isotonic(isotonic::Isotonic),
    /// Beta calibration (Kull, Silva Filho & Flach 2017).
    Beta(beta::BetaParams),
    /// Histogram binning with equal-mass bins (Zadrozny & Elkan 2001).
    Binning(binning::Binning),
    /// Temperature scaling of the log-odds (Guo et al. 2017).
    Temperature(temperature::TemperatureParams),
    /// Centered isotonic regression (Oron & Flournoy 2017).
    CenteredIsotonic(centered_isotonic::CenteredIsotonic),
    /// Penalized cubic-spline logistic calibration on the log-odds (P-spline).
    Spline(spline::SplineParams),
    /// Inductive Venn–Abers predictor (isotonic fits with the test point added).
    VennAbers(venn_abers::VennAbers),
}

/// The shared check of a `pseudo_count` parameter.
pub(crate) fn check_pseudo_count(m: f64) -> Result<(), ParamError> {
    if !(m.is_finite() && m >= 0.0) {
        return Err(ParamError::new(
            "pseudo_count",
            m,
            "must be a finite number >= 0 (0 = plain fit)",
        ));
    }
    Ok(())
}

impl MethodSpec {
    /// The kind id as written in suites.
    pub fn kind(&self) -> &'static str {
        self.params().kind()
    }

    /// Every parameter key of this kind with the values it accepts.
    pub fn keys(&self) -> &'static [(&'static str, &'static str)] {
        self.params().keys()
    }

    /// Whether the method adapts its shape to the data (a step or spline
    /// map whose complexity grows with the sample). Flexible methods are
    /// paired with the [`Self::is_parametric`] ones for the default
    /// data-size thresholds of a suite.
    pub fn is_flexible(&self) -> bool {
        self.params().shape() == Shape::Flexible
    }

    /// Whether the method has a fixed parametric shape that the default
    /// threshold pairs compare flexible methods with (Platt and beta).
    pub fn is_parametric(&self) -> bool {
        self.params().shape() == Shape::Parametric
    }

    /// Whether the fitted map can predict a probability of exactly 0 or 1
    /// (or within the log-loss clip of them) for scores like those it was
    /// fitted on: the step maps without pseudo-rows (isotonic, centered
    /// isotonic, binning), whose end blocks can be all of one class, and the
    /// spline, whose ends follow few rows. In the coverage study these maps'
    /// log-loss intervals fell short where the others did not
    /// (`docs/statistics.md`, "Approximate intervals").
    pub fn can_predict_zero_one(&self) -> bool {
        self.params().predicts_zero_one()
    }

    /// Check the parameters for a task whose scores are of `score_kind`.
    pub fn validate(&self, score_kind: ScoreKind) -> Result<(), ParamError> {
        self.params().validate(score_kind)
    }

    /// Build a calibrator for scores of `score_kind`; calls [`Self::validate`].
    pub fn build(&self, score_kind: ScoreKind) -> Result<Box<dyn Calibrator>, ParamError> {
        self.validate(score_kind)?;
        Ok(self.params().calibrator(score_kind))
    }
}

/// Tests: every row order of `s`, `y` (Heap's algorithm), each passed to
/// `check` with the permutation; returns how many orders were visited.
#[cfg(test)]
pub(crate) fn for_each_order(
    s: &[f64],
    y: &[bool],
    mut check: impl FnMut(&[f64], &[bool], &[usize]),
) -> usize {
    let n = s.len();
    let mut order: Vec<usize> = (0..n).collect();
    let mut c = vec![0usize; n];
    let mut visit = |o: &[usize]| {
        let s2: Vec<f64> = o.iter().map(|&i| s[i]).collect();
        let y2: Vec<bool> = o.iter().map(|&i| y[i]).collect();
        check(&s2, &y2, o);
    };
    visit(&order);
    let (mut i, mut seen) = (1, 1);
    while i < n {
        if c[i] < i {
            order.swap(if i % 2 == 0 { 0 } else { c[i] }, i);
            visit(&order);
            seen += 1;
            c[i] += 1;
            i = 1;
        } else {
            c[i] = 0;
            i += 1;
        }
    }
    seen
}

#[cfg(test)]
mod spec_tests {
    use super::*;

    #[derive(Deserialize)]
    struct W {
        m: MethodSpec,
    }

    #[test]
    fn spec_rejects_unknown_keys_and_kinds() {
        let ok: W = toml::from_str("m = { kind = \"platt\", target_smoothing = true }").unwrap();
        assert_eq!(
            ok.m,
            MethodSpec::Platt(platt::Platt {
                target_smoothing: true
            })
        );
        let iso: W = toml::from_str("m = { kind = \"isotonic\" }").unwrap();
        assert_eq!(iso.m.kind(), "isotonic");
        let e = toml::from_str::<W>("m = { kind = \"platt\", smoothing = true }")
            .err()
            .unwrap();
        assert!(e.to_string().contains("smoothing"), "{e}");
        assert!(toml::from_str::<W>("m = { kind = \"platypus\" }").is_err());
        // The identity map takes no parameters: an unknown key is refused
        // as for every other kind, in a method and in a saved map.
        let id: W = toml::from_str("m = { kind = \"identity\" }").unwrap();
        assert_eq!(id.m, MethodSpec::Identity(identity::Identity {}));
        let e = toml::from_str::<W>("m = { kind = \"identity\", foo = 1 }")
            .err()
            .unwrap();
        assert!(e.to_string().contains("unknown field `foo`"), "{e}");
        let e = serde_json::from_str::<state::MapState>(r#"{"kind": "identity", "foo": 1}"#)
            .err()
            .unwrap();
        assert!(e.to_string().contains("unknown field `foo`"), "{e}");
        assert_eq!(
            serde_json::to_string(&state::MapState::Identity(identity::IdentityState {})).unwrap(),
            r#"{"kind":"identity"}"#
        );
    }

    #[test]
    fn method_specs_parse_with_defaults_and_validate() {
        let parse = |s: &str| toml::from_str::<W>(s).map(|w| w.m);
        assert_eq!(
            parse("m = { kind = \"isotonic\" }").unwrap(),
            MethodSpec::Isotonic(isotonic::Isotonic { pseudo_count: 0.0 })
        );
        assert_eq!(
            parse("m = { kind = \"beta\" }").unwrap(),
            MethodSpec::Beta(beta::BetaParams {
                shape: beta::BetaShape::Full
            })
        );
        assert_eq!(
            parse("m = { kind = \"beta\", shape = \"tied\" }").unwrap(),
            MethodSpec::Beta(beta::BetaParams {
                shape: beta::BetaShape::Tied
            })
        );
        assert!(parse("m = { kind = \"beta\", shape = \"three\" }").is_err());
        assert_eq!(
            parse("m = { kind = \"binning\" }").unwrap(),
            MethodSpec::Binning(binning::Binning {
                bins: 10,
                pseudo_count: 0.0
            })
        );
        let b = parse("m = { kind = \"binning\", bins = 0 }").unwrap();
        let e = b.validate(ScoreKind::Probability).err().unwrap();
        assert_eq!(e.key, "bins");
        let big = parse("m = { kind = \"binning\", bins = 10001 }").unwrap();
        assert_eq!(big.validate(ScoreKind::Margin).err().unwrap().key, "bins");
        let most = parse("m = { kind = \"binning\", bins = 10000 }").unwrap();
        assert!(most.validate(ScoreKind::Margin).is_ok());
        let c = parse("m = { kind = \"centered-isotonic\", pseudo_count = -1.0 }").unwrap();
        assert_eq!(
            c.validate(ScoreKind::Margin).err().unwrap().key,
            "pseudo_count"
        );
        let t = parse("m = { kind = \"temperature\" }").unwrap();
        assert_eq!(t.build(ScoreKind::Margin).unwrap().kind(), "temperature");
        assert!(parse("m = { kind = \"temperature\", t = 1.0 }").is_err());
        assert_eq!((b.kind(), c.kind()), ("binning", "centered-isotonic"));
    }

    /// The shape classes of the default threshold pairs: every kind is in
    /// at most one, and the classes are the documented ones. Each kind's
    /// default parameters are those of a bare `{ kind = "..." }`.
    #[test]
    fn zero_one_kinds_are_the_unbounded_step_maps_and_the_spline() {
        let zero_one: Vec<&str> = MethodSpec::defaults()
            .iter()
            .filter(|m| m.can_predict_zero_one())
            .map(|m| m.kind())
            .collect();
        assert_eq!(
            zero_one,
            ["isotonic", "binning", "centered-isotonic", "spline"]
        );
        // Pseudo-rows keep the step maps strictly inside (0, 1).
        for k in ["isotonic", "binning", "centered-isotonic"] {
            let spec =
                toml::from_str::<W>(&format!("m = {{ kind = \"{k}\", pseudo_count = 1.0 }}"))
                    .unwrap()
                    .m;
            assert!(!spec.can_predict_zero_one(), "{k}");
        }
    }

    #[test]
    fn flexible_and_parametric_kinds() {
        let mut kinds = Vec::new();
        let mut flexible = Vec::new();
        let mut parametric = Vec::new();
        for default in MethodSpec::defaults() {
            let k = default.kind();
            kinds.push(k);
            let spec = toml::from_str::<W>(&format!("m = {{ kind = \"{k}\" }}"))
                .unwrap_or_else(|e| panic!("{k}: {e}"))
                .m;
            assert_eq!(spec, default, "{k}");
            assert_eq!(spec.kind(), k);
            assert!(!(spec.is_flexible() && spec.is_parametric()), "{k}");
            if spec.is_flexible() {
                flexible.push(k);
            }
            if spec.is_parametric() {
                parametric.push(k);
            }
        }
        assert_eq!(
            kinds,
            [
                "identity",
                "platt",
                "isotonic",
                "beta",
                "binning",
                "temperature",
                "centered-isotonic",
                "spline",
                "venn-abers",
            ]
        );
        assert_eq!(
            flexible,
            [
                "isotonic",
                "binning",
                "centered-isotonic",
                "spline",
                "venn-abers"
            ]
        );
        assert_eq!(parametric, ["platt", "beta"]);
    }
}
