//! Figures as standalone SVG, written by hand so the bytes are reproducible
//! (no fonts embedded, no timestamps, fixed number formatting).
//!
//! One figure per task: the paired mean difference of each method to the
//! reference against the calibration size (log scale), with the interval as a
//! shaded band and a zero line — below zero is better for a loss. This is the
//! picture behind the data-size question: where a flexible method's band
//! crosses below zero and stays there.

use super::fmt_diff;
use crate::analysis::Analysis;
use crate::metrics::MetricId;

/// Okabe & Ito (2008) colour-blind-safe palette.
const COLOURS: [&str; 8] = [
    "#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442", "#000000",
];

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn f(v: f64) -> String {
    format!("{v:.2}")
}

/// "Nice" tick values covering [lo, hi].
fn ticks(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    let span = (hi - lo).abs().max(1e-12);
    let raw = span / n as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| span / s <= n as f64)
        .unwrap_or(10.0 * mag);
    let start = (lo / step).ceil() * step;
    let mut out = Vec::new();
    let mut v = start;
    while v <= hi + step * 1e-9 {
        out.push(if v.abs() < step * 1e-9 { 0.0 } else { v });
        v += step;
    }
    out
}

/// One method's points of a difference figure: (size, mean, low, high).
type Series<'a> = (&'a String, Vec<(usize, f64, f64, f64)>);

/// The difference-vs-size figure for one task and metric.
pub fn diff_figure(a: &Analysis, task: &str, metric: &str, reference: &str) -> Option<String> {
    let sizes = a.sizes.get(task)?;
    if sizes.is_empty() {
        return None;
    }
    let series: Vec<Series> = a
        .methods
        .iter()
        .filter(|m| *m != reference)
        .map(|m| {
            let pts = a
                .paired
                .iter()
                .filter(|p| {
                    p.task == task
                        && p.metric == metric
                        && &p.method == m
                        && p.mean_diff.is_finite()
                })
                .map(|p| (p.size, p.mean_diff, p.ci_low, p.ci_high))
                .collect::<Vec<_>>();
            (m, pts)
        })
        .filter(|(_, p)| !p.is_empty())
        .collect();
    if series.is_empty() {
        return None;
    }
    let (w, h) = (720.0, 420.0);
    let (ml, mr, mt, mb) = (80.0, 170.0, 40.0, 50.0);
    let pw = w - ml - mr;
    let ph = h - mt - mb;
    let xmin = (*sizes.first()? as f64).ln();
    let xmax = (*sizes.last()? as f64).ln();
    let xspan = if xmax > xmin { xmax - xmin } else { 1.0 };
    let mut ylo = 0.0f64;
    let mut yhi = 0.0f64;
    for (_, pts) in &series {
        for &(_, m, lo, hi) in pts {
            for v in [m, lo, hi] {
                if v.is_finite() {
                    ylo = ylo.min(v);
                    yhi = yhi.max(v);
                }
            }
        }
    }
    let pad = (yhi - ylo).max(1e-9) * 0.06;
    ylo -= pad;
    yhi += pad;
    let x = |n: usize| ml + ((n as f64).ln() - xmin) / xspan * pw;
    let y = |v: f64| mt + (yhi - v) / (yhi - ylo) * ph;
    let mut s = String::new();
    s.push_str(&format!(
        "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 {w} {h}\" width=\"{w}\" height=\"{h}\" font-family=\"sans-serif\" font-size=\"12\">\n"
    ));
    s.push_str(&format!(
        "<rect width=\"{w}\" height=\"{h}\" fill=\"white\"/>\n"
    ));
    let better = if MetricId::parse(metric)
        .map(|m| m.higher_is_better())
        .unwrap_or(false)
    {
        "above"
    } else {
        "below"
    };
    s.push_str(&format!(
        "<text x=\"{}\" y=\"22\" font-size=\"14\">{}: {} − {} ({} zero is better)</text>\n",
        ml,
        esc(task),
        esc(metric),
        esc(reference),
        better
    ));
    // Grid and axes.
    for t in ticks(ylo, yhi, 6) {
        let yy = y(t);
        s.push_str(&format!(
            "<line x1=\"{ml}\" x2=\"{}\" y1=\"{}\" y2=\"{}\" stroke=\"#e5e5e5\"/>\n",
            ml + pw,
            f(yy),
            f(yy)
        ));
        s.push_str(&format!(
            "<text x=\"{}\" y=\"{}\" text-anchor=\"end\">{}</text>\n",
            ml - 6.0,
            f(yy + 4.0),
            esc(&fmt_diff(t))
        ));
    }
    for &n in sizes {
        let xx = x(n);
        s.push_str(&format!(
            "<line x1=\"{}\" x2=\"{}\" y1=\"{mt}\" y2=\"{}\" stroke=\"#f0f0f0\"/>\n",
            f(xx),
            f(xx),
            mt + ph
        ));
        s.push_str(&format!(
            "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\">{n}</text>\n",
            f(xx),
            mt + ph + 18.0
        ));
    }
    s.push_str(&format!(
        "<text x=\"{}\" y=\"{}\" text-anchor=\"middle\">calibration-set size (log scale)</text>\n",
        ml + pw / 2.0,
        h - 10.0
    ));
    s.push_str(&format!(
        "<line x1=\"{ml}\" x2=\"{}\" y1=\"{}\" y2=\"{}\" stroke=\"#333\" stroke-width=\"1.2\"/>\n",
        ml + pw,
        f(y(0.0)),
        f(y(0.0))
    ));
    s.push_str(&format!("<rect x=\"{ml}\" y=\"{mt}\" width=\"{pw}\" height=\"{ph}\" fill=\"none\" stroke=\"#999\"/>\n"));
    for (i, (m, pts)) in series.iter().enumerate() {
        let c = COLOURS[i % COLOURS.len()];
        // Past eight series the colours repeat: tell them apart by dashes.
        let dash = match i / COLOURS.len() {
            0 => "",
            1 => " stroke-dasharray=\"7 3\"",
            _ => " stroke-dasharray=\"2 3\"",
        };
        let band: Vec<String> = pts
            .iter()
            .filter(|p| p.2.is_finite())
            .map(|p| format!("{},{}", f(x(p.0)), f(y(p.3))))
            .chain(
                pts.iter()
                    .rev()
                    .filter(|p| p.2.is_finite())
                    .map(|p| format!("{},{}", f(x(p.0)), f(y(p.2)))),
            )
            .collect();
        if !band.is_empty() {
            s.push_str(&format!(
                "<polygon points=\"{}\" fill=\"{c}\" fill-opacity=\"0.15\" stroke=\"none\"/>\n",
                band.join(" ")
            ));
        }
        let line: Vec<String> = pts
            .iter()
            .map(|p| format!("{},{}", f(x(p.0)), f(y(p.1))))
            .collect();
        s.push_str(&format!(
            "<polyline points=\"{}\" fill=\"none\" stroke=\"{c}\" stroke-width=\"2\"{dash}/>\n",
            line.join(" ")
        ));
        for p in pts {
            s.push_str(&format!(
                "<circle cx=\"{}\" cy=\"{}\" r=\"3\" fill=\"{c}\"/>\n",
                f(x(p.0)),
                f(y(p.1))
            ));
        }
        let ly = mt + 14.0 + 18.0 * i as f64;
        s.push_str(&format!(
            "<line x1=\"{}\" x2=\"{}\" y1=\"{}\" y2=\"{}\" stroke=\"{c}\" stroke-width=\"3\"{dash}/>\n",
            ml + pw + 12.0,
            ml + pw + 32.0,
            f(ly - 4.0),
            f(ly - 4.0)
        ));
        s.push_str(&format!(
            "<text x=\"{}\" y=\"{}\">{}</text>\n",
            ml + pw + 38.0,
            f(ly),
            esc(m)
        ));
    }
    s.push_str("</svg>\n");
    Some(s)
}

/// File name of a task's figure.
pub fn figure_name(task: &str, metric: &str) -> String {
    format!("figures/{task}--{metric}.svg")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_cover_the_range() {
        let t = ticks(-0.013, 0.041, 6);
        assert!(t.first().unwrap() >= &-0.013 && t.last().unwrap() <= &0.041);
        assert!(t.contains(&0.0));
        assert!(t.len() >= 3);
    }
}
