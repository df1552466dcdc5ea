//! `paired.csv`: one row per (task, size, method, metric) against the reference.

use crate::analysis::Analysis;
use crate::run::table::num;

pub const PAIRED_HEADER: &str =
    "task,size,method,reference,metric,repeats,mean_method,mean_reference,mean_diff,ci_low,ci_high,se,wins,ties,losses,interval,confidence,reservoir_order,margin,verdict,minority_rows,rare_class,first_order_share,approximate";

/// Seven significant digits: more than the intervals resolve, and half the
/// bytes of the shortest round-trip form.
fn f(v: f64) -> String {
    if v.is_finite() {
        num(crate::metrics::reliability::round_sig(v, 7))
    } else {
        String::new()
    }
}

pub fn paired_csv(a: &Analysis) -> String {
    let mut s = String::from(PAIRED_HEADER);
    s.push('\n');
    for p in &a.paired {
        s.push_str(&format!(
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}\n",
            p.task,
            p.size,
            p.method,
            p.reference,
            p.metric,
            p.repeats,
            f(p.mean_method),
            f(p.mean_reference),
            f(p.mean_diff),
            f(p.ci_low),
            f(p.ci_high),
            f(p.se),
            p.wins,
            p.ties,
            p.losses,
            p.interval,
            num(p.confidence),
            p.reservoir_order.map(|k| k.to_string()).unwrap_or_default(),
            f(p.margin),
            p.verdict.as_str(),
            f(p.minority_rows),
            p.rare_class(),
            p.first_order_share.map(f).unwrap_or_default(),
            p.approximate().unwrap_or("")
        ));
    }
    s
}

pub const THRESHOLDS_HEADER: &str =
    "task,flexible,parametric,metric,better_from,worse_until,crossover,sizes,note";

/// `thresholds.csv`: per task and (flexible, parametric) pair, the smallest
/// size from which the flexible method is reliably better at every larger
/// tested size, the largest size at which it is reliably worse, and the
/// interpolated crossover of the mean difference on log size. Then every
/// method against the raw scores (`parametric` = the suite's identity
/// method), on the decision metrics, unless the pair is already listed.
pub fn thresholds_csv(a: &Analysis) -> String {
    let mut s = String::from(THRESHOLDS_HEADER);
    s.push('\n');
    let listed = |t: &crate::analysis::ThresholdRow| {
        a.thresholds.iter().any(|x| {
            x.task == t.task
                && x.flexible == t.flexible
                && x.parametric == t.parametric
                && x.metric == t.metric
        })
    };
    let raw = a.raw_thresholds.iter().filter(|t| !listed(t));
    for t in a.thresholds.iter().chain(raw) {
        let sizes = t
            .points
            .iter()
            .map(|p| p.0.to_string())
            .collect::<Vec<_>>()
            .join(" ");
        let (bf, wu, co, note) = match &t.result {
            Ok(r) => (
                r.better_from.map(|x| x.to_string()).unwrap_or_default(),
                r.worse_until.map(|x| x.to_string()).unwrap_or_default(),
                r.crossover.map(num).unwrap_or_default(),
                String::new(),
            ),
            Err(e) => (
                String::new(),
                String::new(),
                String::new(),
                e.replace(',', ";"),
            ),
        };
        s.push_str(&format!(
            "{},{},{},{},{bf},{wu},{co},{sizes},{note}\n",
            t.task, t.flexible, t.parametric, t.metric
        ));
    }
    s
}
