//! The demo scenario: score files of an invented company with known truth.
//!
//! Larkspur Parcel, a regional courier (invented), predicts whether a shipment
//! will be delivered late. Its data team runs a few in-house models whose scores
//! are miscalibrated in different, known ways. For each shipment the generator
//! draws a true late-delivery probability q (logit q ~ Normal(−1.1, 1.2), about
//! 29% late on average), writes the model's score s = h(q) for a known monotone
//! distortion h, and draws the label from q. Because the score is a function of
//! q, the true calibration map is known exactly: P(late | s) = h⁻¹(s). It is
//! written beside each row (`true_p`) so the demo can show how far each
//! calibrator lands from the truth.
//!
//! | file | model | distortion (score as a function of q) | true map |
//! |---|---|---|---|
//! | `route-boost.csv.gz` | boosted trees, over-confident | logit s = 1.8·logit q + 0.2 | logit q = (logit s − 0.2)/1.8 |
//! | `depot-logit.csv.gz` | logistic model, under-confident | logit s = 0.55·logit q − 0.3 | logit q = (logit s + 0.3)/0.55 |
//! | `weather-bayes.csv.gz` | naive Bayes, bent | logit q = 0.6 ln s − 1.6 ln(1 − s) + 0.4 (inverted numerically) | as written |
//! | `eta-calibrated.csv.gz` | well calibrated, with a fixed test split | s = q | q = s |
//! | `hub-ranker.csv.gz` | ranking margin (not a probability) | m = 0.8·logit q + 1.0 | q = σ((m − 1)/0.8) |
//!
//! All numbers are invented for the demo; nothing here describes a real firm.

use std::io::Write;
use std::path::Path;

use crate::calibrate::sigmoid;
use crate::split;

fn logit(p: f64) -> f64 {
    (p / (1.0 - p)).ln()
}

/// One demo model: its file stem, score column, score kind and true map.
pub struct DemoModel {
    pub stem: &'static str,
    pub score_column: &'static str,
    pub margin: bool,
    pub pinned_split: bool,
    /// Score from the true probability.
    pub distort: fn(f64) -> f64,
    /// True probability from the score (the exact calibration map).
    pub truth: fn(f64) -> f64,
}

fn weather_truth(s: f64) -> f64 {
    sigmoid(0.6 * s.ln() - 1.6 * (1.0 - s).ln() + 0.4)
}

fn weather_distort(q: f64) -> f64 {
    // weather_truth is increasing in s: invert by bisection on logit s.
    let (mut lo, mut hi) = (-30.0f64, 30.0f64);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if weather_truth(sigmoid(mid)) < q {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    sigmoid(0.5 * (lo + hi))
}

pub const MODELS: &[DemoModel] = &[
    DemoModel {
        stem: "route-boost",
        score_column: "p_late",
        margin: false,
        pinned_split: false,
        distort: |q| sigmoid(1.8 * logit(q) + 0.2),
        truth: |s| sigmoid((logit(s) - 0.2) / 1.8),
    },
    DemoModel {
        stem: "depot-logit",
        score_column: "p_late",
        margin: false,
        pinned_split: false,
        distort: |q| sigmoid(0.55 * logit(q) - 0.3),
        truth: |s| sigmoid((logit(s) + 0.3) / 0.55),
    },
    DemoModel {
        stem: "weather-bayes",
        score_column: "p_late",
        margin: false,
        pinned_split: false,
        distort: weather_distort,
        truth: weather_truth,
    },
    DemoModel {
        stem: "eta-calibrated",
        score_column: "p_late",
        margin: false,
        pinned_split: true,
        distort: |q| q,
        truth: |s| s,
    },
    DemoModel {
        stem: "hub-ranker",
        score_column: "margin",
        margin: true,
        pinned_split: false,
        distort: |q| 0.8 * logit(q) + 1.0,
        truth: |m| sigmoid((m - 1.0) / 0.8),
    },
];

/// A standard normal draw (Box–Muller on two uniforms in (0, 1)).
fn normal(rng: &mut rand_chacha::ChaCha8Rng) -> f64 {
    use rand_chacha::rand_core::Rng;
    let u1 = ((rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
    let u2 = ((rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

fn uniform(rng: &mut rand_chacha::ChaCha8Rng) -> f64 {
    use rand_chacha::rand_core::Rng;
    (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64
}

/// Rows of one demo file as CSV text.
pub fn generate(model: &DemoModel, rows: usize, seed: u64) -> String {
    let mut rng = split::rng(split::mix(seed, &[split::fnv1a(model.stem.as_bytes())]));
    let mut out = String::new();
    out.push_str(&format!(
        "shipment,{},late,true_p{}\n",
        model.score_column,
        if model.pinned_split { ",split" } else { "" }
    ));
    for i in 0..rows {
        let q0 = sigmoid(-1.1 + 1.2 * normal(&mut rng));
        let s = (model.distort)(q0);
        // Round the score as written, then take the truth of the written score.
        let text = if model.margin {
            format!("{s:.6}")
        } else {
            format!("{s:.8}")
        };
        let s_written: f64 = text.parse().unwrap_or(s);
        let q = (model.truth)(
            s_written.clamp(1e-12, if model.margin { f64::MAX } else { 1.0 - 1e-12 }),
        );
        let late = uniform(&mut rng) < q;
        out.push_str(&format!("LP{:06},{text},{},{q:.8}", i + 1, late as u8));
        if model.pinned_split {
            // The team's own fixed split: the last quarter of shipments is the test set.
            out.push_str(if i >= rows * 3 / 4 {
                ",test"
            } else {
                ",calibration"
            });
        }
        out.push('\n');
    }
    out
}

/// Write every demo file, gzip-compressed with a fixed header so reruns are
/// byte-identical.
pub fn write_all(dir: &Path, rows: usize, seed: u64) -> std::io::Result<Vec<String>> {
    std::fs::create_dir_all(dir)?;
    let mut names = Vec::new();
    for m in MODELS {
        let text = generate(m, rows, seed);
        let name = format!("{}.csv.gz", m.stem);
        let tmp = dir.join(format!("{name}.tmp"));
        {
            let f = std::fs::File::create(&tmp)?;
            let mut gz = flate2::GzBuilder::new()
                .mtime(0)
                .write(f, flate2::Compression::best());
            gz.write_all(text.as_bytes())?;
            gz.finish()?.sync_all()?;
        }
        std::fs::rename(&tmp, dir.join(&name))?;
        names.push(name);
    }
    Ok(names)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn weather_inverse_is_exact() {
        for q in [0.01, 0.2, 0.5, 0.9, 0.999] {
            let s = weather_distort(q);
            assert!((weather_truth(s) - q).abs() < 1e-9, "{q}");
        }
    }

    #[test]
    fn truth_inverts_distortion() {
        for m in MODELS {
            for q in [0.05, 0.3, 0.7] {
                assert!(((m.truth)((m.distort)(q)) - q).abs() < 1e-9, "{}", m.stem);
            }
        }
    }

    #[test]
    fn generation_is_seeded() {
        assert_eq!(generate(&MODELS[0], 50, 1), generate(&MODELS[0], 50, 1));
        assert_ne!(generate(&MODELS[0], 50, 1), generate(&MODELS[0], 50, 2));
    }
}
