//! `paired.csv`: one row per (task, size, method, metric) against the reference.

use crate::analysis::Analysis;
use crate::run::table::num;

pub const PAIRED_HEADER: &str =
    "task,size,method,reference,metric,repeats,mean_method,mean_reference,mean_diff,ci_low,ci_high,se,wins,ties,losses,interval,confidence";

fn f(v: f64) -> String {
    if v.is_finite() {
        num(v)
    } else {
        String::new()
    }
}

pub fn paired_csv(a: &Analysis) -> String {
    let mut s = String::from(PAIRED_HEADER);
    s.push('\n');
    for p in &a.paired {
        s.push_str(&format!(
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}\n",
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
            num(p.confidence)
        ));
    }
    s
}
