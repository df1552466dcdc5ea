//! Data-size thresholds: from which calibration size a flexible method (for
//! example isotonic regression) is reliably better than a parametric one (for
//! example Platt scaling) on a task, and where their mean loss difference
//! crosses zero.
//!
//! Input per task: the tested sizes n_1 < … < n_J with the interval of the
//! difference (flexible − parametric; a loss, so negative favours the flexible
//! method) at each size.
//!
//! * `better_from`: the smallest tested n_j such that the verdict of
//!   [`super::verdict`] is *better* at n_j and at every larger tested size
//!   (the interval lies entirely below 0 and is not inside the equivalence
//!   margin).
//! * `worse_until`: the largest tested size whose verdict is *worse*.
//! * `crossover`: at the first pair of consecutive sizes where the mean
//!   difference changes sign (a mean of exactly 0 counts as the crossover
//!   itself), linear interpolation of the mean against ln n:
//!   ln n* = ln n_j + (ln n_{j+1} − ln n_j)·m_j/(m_j − m_{j+1}). None without a
//!   sign change.
//!
//! Across tasks each figure is summarised by its median (mean of the two middle
//! values for an even count), minimum and maximum over the tasks where it is
//! defined, with the count of such tasks. The rule is descriptive (common
//! practice for reading learning curves), not a test with a stated error rate.

use serde::Serialize;

use super::paired::Interval;
use super::verdict::Verdict;
use super::StatsError;

/// The thresholds of one task.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Thresholds {
    pub better_from: Option<usize>,
    pub worse_until: Option<usize>,
    pub crossover: Option<f64>,
}

/// Thresholds from (size, interval) pairs with no equivalence margin; sizes
/// are sorted here and must be distinct and positive.
pub fn thresholds(points: &[(usize, Interval)]) -> Result<Thresholds, StatsError> {
    let p: Vec<(usize, Interval, f64)> = points.iter().map(|&(n, iv)| (n, iv, 0.0)).collect();
    thresholds_within(&p)
}

/// Thresholds from (size, interval, equivalence margin) triples.
pub fn thresholds_within(points: &[(usize, Interval, f64)]) -> Result<Thresholds, StatsError> {
    let mut p: Vec<&(usize, Interval, f64)> = points.iter().collect();
    p.sort_by_key(|x| x.0);
    if p.iter().any(|x| x.0 == 0) || p.windows(2).any(|w| w[0].0 == w[1].0) {
        return Err(StatsError::Shape(
            "thresholds need distinct positive calibration sizes".into(),
        ));
    }
    if p.iter().any(|x| !x.1.mean.is_finite()) {
        return Err(StatsError::NonFinite("mean difference"));
    }
    let mut better_from = None;
    let verdict = |x: &(usize, Interval, f64)| Verdict::of_interval(&x.1, x.2);
    for x in p.iter().rev() {
        if verdict(x) == Verdict::Better {
            better_from = Some(x.0);
        } else {
            break;
        }
    }
    let worse_until = p
        .iter()
        .rev()
        .find(|x| verdict(x) == Verdict::Worse)
        .map(|x| x.0);
    let mut crossover = None;
    if let Some(first) = p.first() {
        if first.1.mean == 0.0 {
            crossover = Some(first.0 as f64);
        }
    }
    if crossover.is_none() {
        for w in p.windows(2) {
            let (n0, m0) = (w[0].0 as f64, w[0].1.mean);
            let (n1, m1) = (w[1].0 as f64, w[1].1.mean);
            if m1 == 0.0 {
                crossover = Some(n1);
                break;
            }
            if (m0 < 0.0) != (m1 < 0.0) {
                let t = m0 / (m0 - m1);
                crossover = Some((n0.ln() + t * (n1.ln() - n0.ln())).exp());
                break;
            }
        }
    }
    Ok(Thresholds {
        better_from,
        worse_until,
        crossover,
    })
}

/// Median, minimum and maximum of a figure over the tasks where it is defined.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Spread {
    pub tasks: usize,
    pub median: f64,
    /// The middle value, or with an even count the two middle values, whose
    /// mean is `median` (equal for an odd count): for tested sizes, the
    /// sizes the median lies between.
    pub median_low: f64,
    pub median_high: f64,
    pub min: f64,
    pub max: f64,
}

fn spread(mut v: Vec<f64>) -> Option<Spread> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(|a, b| a.total_cmp(b));
    let k = v.len();
    let (median_low, median_high) = if k % 2 == 1 {
        (v[k / 2], v[k / 2])
    } else {
        (v[k / 2 - 1], v[k / 2])
    };
    Some(Spread {
        tasks: k,
        median: (median_low + median_high) / 2.0,
        median_low,
        median_high,
        min: v[0],
        max: v[k - 1],
    })
}

/// Summary of [`Thresholds`] over tasks.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ThresholdSummary {
    pub tasks: usize,
    pub better_from: Option<Spread>,
    pub worse_until: Option<Spread>,
    pub crossover: Option<Spread>,
}

pub fn summarize(per_task: &[Thresholds]) -> ThresholdSummary {
    let pick =
        |f: &dyn Fn(&Thresholds) -> Option<f64>| spread(per_task.iter().filter_map(f).collect());
    ThresholdSummary {
        tasks: per_task.len(),
        better_from: pick(&|t| t.better_from.map(|x| x as f64)),
        worse_until: pick(&|t| t.worse_until.map(|x| x as f64)),
        crossover: pick(&|t| t.crossover),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::paired::IntervalKind;

    fn iv(mean: f64, half: f64) -> Interval {
        Interval {
            kind: IntervalKind::Decomposed,
            mean,
            low: mean - half,
            high: mean + half,
            se: half / 2.0,
            df: 9.0,
            confidence: 0.95,
            test_term: None,
            reservoir_order: None,
            first_order_share: None,
        }
    }

    #[test]
    fn known_crossover_on_log_size() {
        // Mean difference 0.01·(ln 400 − ln n): zero exactly at n = 400 (constructed).
        let sizes = [50usize, 100, 200, 500, 1000, 2000];
        let pts: Vec<(usize, Interval)> = sizes
            .iter()
            .map(|&n| (n, iv(0.01 * (400f64.ln() - (n as f64).ln()), 0.004)))
            .collect();
        let t = thresholds(&pts).unwrap();
        // Linear in ln n, so the interpolation is exact.
        assert!((t.crossover.unwrap() - 400.0).abs() < 1e-6, "{t:?}");
        // Means: 50 → +0.0208, 100 → +0.0139, 200 → +0.0069 (all > 0.004: worse),
        // 500 → −0.0022 (covers 0), 1000 → −0.0092, 2000 → −0.0161 (better).
        assert_eq!(t.worse_until, Some(200));
        assert_eq!(t.better_from, Some(1000));
    }

    #[test]
    fn better_must_hold_at_every_larger_size() {
        let pts = vec![
            (100, iv(-0.02, 0.01)),
            (200, iv(0.0005, 0.01)),
            (400, iv(-0.03, 0.01)),
        ];
        let t = thresholds(&pts).unwrap();
        assert_eq!(t.better_from, Some(400));
        assert_eq!(t.worse_until, None);
        // First sign change between 100 (−) and 200 (+): m0/(m0 − m1) = 0.02/0.0205.
        let x = (100f64.ln() + 0.02 / 0.0205 * 2f64.ln()).exp();
        assert!((t.crossover.unwrap() - x).abs() < 1e-9);
        let none = thresholds(&[(100, iv(0.02, 0.001)), (200, iv(0.01, 0.001))]).unwrap();
        assert_eq!(none.crossover, None);
        assert_eq!(none.better_from, None);
        assert!(thresholds(&[(100, iv(0.0, 1.0)), (100, iv(0.0, 1.0))]).is_err());
    }

    #[test]
    fn summary_median_and_range() {
        let t = |b: Option<usize>, c: Option<f64>| Thresholds {
            better_from: b,
            worse_until: None,
            crossover: c,
        };
        let s = summarize(&[
            t(Some(100), Some(80.0)),
            t(Some(400), None),
            t(None, Some(120.0)),
            t(Some(200), Some(300.0)),
        ]);
        let b = s.better_from.unwrap();
        assert_eq!((b.tasks, b.median, b.min, b.max), (3, 200.0, 100.0, 400.0));
        assert_eq!((b.median_low, b.median_high), (200.0, 200.0));
        let even = summarize(&[t(Some(100), None), t(Some(400), None)]);
        let e = even.better_from.unwrap();
        assert_eq!(
            (e.median, e.median_low, e.median_high),
            (250.0, 100.0, 400.0)
        );
        let c = s.crossover.unwrap();
        assert_eq!((c.tasks, c.median), (3, 120.0));
        assert!(s.worse_until.is_none());
    }
}
