//! Reliability curves with consistency bands, the data behind the reliability
//! diagrams of a results folder.
//!
//! # CORP reliability curve
//! Dimitriadis, Gneiting & Jordan (2021, PNAS 118, "Stable reliability diagrams
//! for probabilistic classifiers"). The test predictions p are recalibrated by
//! isotonic regression of the labels y on p (pool-adjacent-violators, ties in p
//! merged first). The recalibrated value p̂(x) — the mean label of the PAV block
//! that holds the forecast value x — is the curve: a calibrated forecaster has
//! p̂(x) = x. The curve is piecewise constant on the blocks; we keep the two end
//! points (lowest and highest forecast value) of every block, so the figure
//! joins the blocks by straight lines as in that paper. No bins and no bin
//! count to choose: the same data always give the same curve.
//!
//! # Consistency band
//! Under the hypothesis that the forecasts are calibrated, y_i ~ Bernoulli(p_i)
//! independently. Drawing labels that way B times (seeded), recomputing the PAV
//! curve for each draw and taking pointwise quantiles at every curve point x
//! gives the band inside which the curve of a calibrated forecaster of these
//! very predictions would lie (pointwise, at the band level). This is the
//! resampling idea of Bröcker & Smith (2007, Weather and Forecasting 22,
//! "Increasing the reliability of reliability diagrams"), used with CORP
//! curves in Dimitriadis et al. (2021). Points of the observed curve outside
//! the band mark where miscalibration is larger than chance alone explains.
//!
//! # Score decomposition
//! The CORP decomposition of the Brier score, BS = MCB − DSC + UNC
//! ([`super::decompose::corp`]), printed on every panel.
//!
//! # Histograms
//! Counts of the predictions in 20 equal-width bins of [0, 1] and in 24 bins of
//! width 1 on the log-odds scale over [−12, 12] (values beyond fall in the end
//! bins), for the histogram beneath each panel.

use rand_chacha::rand_core::Rng;

use super::decompose::{corp, CorpScore};
use crate::calibrate::isotonic::pav;

/// Bins of the probability histogram.
pub const HIST_P_BINS: usize = 20;
/// Log-odds histogram: bins of width 1 over [−LOGIT_RANGE, LOGIT_RANGE].
pub const LOGIT_RANGE: f64 = 12.0;
pub const HIST_LOGIT_BINS: usize = 24;
/// At most this many curve points are kept (evenly spaced over the block end
/// points, first and last always kept); enough for a figure.
pub const MAX_POINTS: usize = 48;

/// One point of a reliability curve.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct CurvePoint {
    /// Forecast value.
    pub x: f64,
    /// Recalibrated value p̂(x).
    pub y: f64,
    /// Consistency band at x.
    pub low: f64,
    pub high: f64,
}

/// The reliability data of one method's test predictions.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Curve {
    pub method: String,
    pub test_rows: usize,
    pub points: Vec<CurvePoint>,
    pub hist_p: Vec<u64>,
    pub hist_logit: Vec<u64>,
    /// Brier score and its CORP terms.
    pub brier: f64,
    pub mcb: f64,
    pub dsc: f64,
    pub unc: f64,
    /// Band level and number of label draws.
    pub level: f64,
    pub draws: usize,
    /// Curve points outside the band.
    pub outside: usize,
}

/// How the bands are drawn.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct BandSettings {
    pub draws: usize,
    pub level: f64,
}

/// 200 draws at the default confidence level of the report's intervals
/// (a suite's plan takes its own `confidence` unless `band_level` is set).
impl Default for BandSettings {
    fn default() -> Self {
        BandSettings {
            draws: 200,
            level: crate::suite::DEFAULT_CONFIDENCE,
        }
    }
}

/// Rounds to `digits` significant digits (figures need no more; the CSV then
/// reads back to exactly these doubles).
pub fn round_sig(v: f64, digits: usize) -> f64 {
    if !v.is_finite() || v == 0.0 {
        return v;
    }
    format!("{v:.*e}", digits.saturating_sub(1))
        .parse()
        .unwrap_or(v)
}

/// Distinct forecast values in ascending order with their row counts and
/// label sums, and for every row its group index.
fn groups(p: &[f64], y: &[bool]) -> (Vec<(f64, f64, f64)>, Vec<usize>) {
    let mut idx: Vec<usize> = (0..p.len()).collect();
    idx.sort_by(|&a, &b| p[a].total_cmp(&p[b]).then(a.cmp(&b)));
    let mut g: Vec<(f64, f64, f64)> = Vec::new();
    let mut of_row = vec![0; p.len()];
    for &i in &idx {
        let l = if y[i] { 1.0 } else { 0.0 };
        match g.last_mut() {
            Some(last) if last.0 == p[i] => {
                last.1 += 1.0;
                last.2 += l;
            }
            _ => g.push((p[i], 1.0, l)),
        }
        of_row[i] = g.len() - 1;
    }
    (g, of_row)
}

/// PAV value at each group: blocks cover consecutive groups.
fn values_per_group(points: &[(f64, f64, f64)]) -> Vec<f64> {
    let blocks = pav(points);
    let mut out = Vec::with_capacity(points.len());
    let mut b = 0;
    for &(x, _, _) in points {
        while b + 1 < blocks.len() && x > blocks[b].hi {
            b += 1;
        }
        out.push(blocks[b].value);
    }
    out
}

fn quantile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    // Linear interpolation between order statistics (type 7).
    let h = (sorted.len() - 1) as f64 * q;
    let lo = h.floor() as usize;
    let hi = h.ceil() as usize;
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// Reliability data of predictions `p` against labels `y`; `seed` drives the
/// band's label draws. Values are rounded to 6 significant digits. `None` on
/// empty input or non-finite predictions.
pub fn curve(method: &str, p: &[f64], y: &[bool], band: BandSettings, seed: u64) -> Option<Curve> {
    let n = p.len().min(y.len());
    if n == 0 || p[..n].iter().any(|v| !v.is_finite()) {
        return None;
    }
    let (p, y) = (&p[..n], &y[..n]);
    let (g, of_row) = groups(p, y);
    let fitted = values_per_group(&g);
    // Curve points: the end groups of every block (where the value changes).
    let mut keep: Vec<usize> = Vec::new();
    for j in 0..g.len() {
        let starts = j == 0 || fitted[j] != fitted[j - 1];
        let ends = j + 1 == g.len() || fitted[j] != fitted[j + 1];
        if starts || ends {
            keep.push(j);
        }
    }
    if keep.len() > MAX_POINTS {
        let m = keep.len();
        keep = (0..MAX_POINTS)
            .map(|i| keep[(i * (m - 1) + (MAX_POINTS - 1) / 2) / (MAX_POINTS - 1)])
            .collect();
        keep.dedup();
    }
    // Band: draws of labels under calibration, PAV per draw.
    let mut rng = crate::split::rng(seed);
    let mut at: Vec<Vec<f64>> = vec![Vec::with_capacity(band.draws); keep.len()];
    let mut sums = vec![0.0; g.len()];
    for _ in 0..band.draws {
        sums.iter_mut().for_each(|s| *s = 0.0);
        for (i, &pi) in p.iter().enumerate() {
            let u = (rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64);
            if u < pi {
                sums[of_row[i]] += 1.0;
            }
        }
        let pts: Vec<(f64, f64, f64)> = g
            .iter()
            .zip(&sums)
            .map(|(&(x, w, _), &s)| (x, w, s))
            .collect();
        let v = values_per_group(&pts);
        for (k, &j) in keep.iter().enumerate() {
            at[k].push(v[j]);
        }
    }
    let tail = (1.0 - band.level) / 2.0;
    let mut points = Vec::with_capacity(keep.len());
    let mut outside = 0;
    for (k, &j) in keep.iter().enumerate() {
        let col = &mut at[k];
        col.sort_by(f64::total_cmp);
        let (low, high) = if col.is_empty() {
            (f64::NAN, f64::NAN)
        } else {
            (quantile(col, tail), quantile(col, 1.0 - tail))
        };
        let pt = CurvePoint {
            x: round_sig(g[j].0, 6),
            y: round_sig(fitted[j], 6),
            low: round_sig(low, 6),
            high: round_sig(high, 6),
        };
        if pt.y < pt.low || pt.y > pt.high {
            outside += 1;
        }
        points.push(pt);
    }
    let mut hist_p = vec![0u64; HIST_P_BINS];
    let mut hist_logit = vec![0u64; HIST_LOGIT_BINS];
    for &pi in p {
        let b = ((pi * HIST_P_BINS as f64).floor().max(0.0) as usize).min(HIST_P_BINS - 1);
        hist_p[b] += 1;
        let z = (pi.ln() - (-pi).ln_1p()).clamp(-LOGIT_RANGE, LOGIT_RANGE);
        let b = ((z + LOGIT_RANGE).floor().max(0.0) as usize).min(HIST_LOGIT_BINS - 1);
        hist_logit[b] += 1;
    }
    let c = corp(p, y, CorpScore::Brier, 0.0);
    let brier = c.mcb - c.dsc + c.unc;
    Some(Curve {
        method: method.to_string(),
        test_rows: n,
        points,
        hist_p,
        hist_logit,
        brier: round_sig(brier, 6),
        mcb: round_sig(c.mcb, 6),
        dsc: round_sig(c.dsc, 6),
        unc: round_sig(c.unc, 6),
        level: band.level,
        draws: band.draws,
        outside,
    })
}

/// A curve with the unit it belongs to.
#[derive(Debug, Clone, PartialEq)]
pub struct CurveRecord {
    pub task: String,
    pub size: usize,
    pub repeat: usize,
    pub curve: Curve,
}

/// Header of `reliability.csv` (one row per curve point).
pub const POINTS_HEADER: &str = "task,size,repeat,method,x,recalibrated,band_low,band_high";
/// Header of `reliability_hist.csv` (one row per histogram bin holding any
/// prediction).
pub const HIST_HEADER: &str = "task,size,repeat,method,scale,bin_low,bin_high,count";
/// Header of `reliability_terms.csv` (one row per curve).
pub const TERMS_HEADER: &str = "task,size,repeat,method,test_rows,brier,miscalibration,discrimination,uncertainty,band_level,band_draws,points,points_outside_band";

/// The three tidy CSV files of a run's reliability data:
/// (`reliability.csv`, `reliability_hist.csv`, `reliability_terms.csv`).
pub fn to_csv(records: &[CurveRecord]) -> (String, String, String) {
    let mut pts = format!("{POINTS_HEADER}\n");
    let mut hist = format!("{HIST_HEADER}\n");
    let mut terms = format!("{TERMS_HEADER}\n");
    for r in records {
        let key = format!("{},{},{},{}", r.task, r.size, r.repeat, r.curve.method);
        let c = &r.curve;
        for p in &c.points {
            pts.push_str(&format!("{key},{},{},{},{}\n", p.x, p.y, p.low, p.high));
        }
        // Empty bins are left out.
        for (b, n) in c.hist_p.iter().enumerate().filter(|x| *x.1 > 0) {
            let w = 1.0 / HIST_P_BINS as f64;
            hist.push_str(&format!(
                "{key},probability,{},{},{n}\n",
                round_sig(b as f64 * w, 6),
                round_sig((b + 1) as f64 * w, 6)
            ));
        }
        for (b, n) in c.hist_logit.iter().enumerate().filter(|x| *x.1 > 0) {
            let lo = b as f64 - LOGIT_RANGE;
            hist.push_str(&format!("{key},log_odds,{lo},{},{n}\n", lo + 1.0));
        }
        terms.push_str(&format!(
            "{key},{},{},{},{},{},{},{},{},{}\n",
            c.test_rows,
            c.brier,
            c.mcb,
            c.dsc,
            c.unc,
            c.level,
            c.draws,
            c.points.len(),
            c.outside
        ));
    }
    (pts, hist, terms)
}

/// Read the three files back (the inverse of [`to_csv`]); errors name the file
/// and the line.
pub fn from_csv(points: &str, hist: &str, terms: &str) -> Result<Vec<CurveRecord>, String> {
    type Key = (String, usize, usize, String);
    fn fields<'a>(
        text: &'a str,
        file: &str,
        header: &str,
        n: usize,
    ) -> Result<Vec<(usize, Vec<&'a str>)>, String> {
        let mut lines = text.lines();
        match lines.next() {
            Some(h) if h == header => {}
            other => {
                return Err(format!(
                    "{file}: line 1: expected header `{header}`, found `{}`",
                    other.unwrap_or("")
                ))
            }
        }
        lines
            .enumerate()
            .filter(|(_, l)| !l.is_empty())
            .map(|(i, l)| {
                let f: Vec<&str> = l.split(',').collect();
                if f.len() == n {
                    Ok((i + 2, f))
                } else {
                    Err(format!(
                        "{file}: line {}: expected {n} fields, found {}",
                        i + 2,
                        f.len()
                    ))
                }
            })
            .collect()
    }
    fn num<T: std::str::FromStr>(file: &str, line: usize, v: &str) -> Result<T, String> {
        v.parse()
            .map_err(|_| format!("{file}: line {line}: `{v}` is not a number"))
    }
    fn key(file: &str, line: usize, f: &[&str]) -> Result<Key, String> {
        Ok((
            f[0].to_string(),
            num(file, line, f[1])?,
            num(file, line, f[2])?,
            f[3].to_string(),
        ))
    }
    let mut order: Vec<Key> = Vec::new();
    let mut curves: std::collections::BTreeMap<Key, Curve> = Default::default();
    for (line, f) in fields(terms, "reliability_terms.csv", TERMS_HEADER, 13)? {
        let file = "reliability_terms.csv";
        let k = key(file, line, &f)?;
        let c = Curve {
            method: k.3.clone(),
            test_rows: num(file, line, f[4])?,
            points: Vec::new(),
            hist_p: vec![0; HIST_P_BINS],
            hist_logit: vec![0; HIST_LOGIT_BINS],
            brier: num(file, line, f[5])?,
            mcb: num(file, line, f[6])?,
            dsc: num(file, line, f[7])?,
            unc: num(file, line, f[8])?,
            level: num(file, line, f[9])?,
            draws: num(file, line, f[10])?,
            outside: num(file, line, f[12])?,
        };
        if curves.insert(k.clone(), c).is_some() {
            return Err(format!("{file}: line {line}: curve listed twice"));
        }
        order.push(k);
    }
    for (line, f) in fields(points, "reliability.csv", POINTS_HEADER, 8)? {
        let file = "reliability.csv";
        let k = key(file, line, &f)?;
        let c = curves.get_mut(&k).ok_or_else(|| {
            format!("{file}: line {line}: no such curve in reliability_terms.csv")
        })?;
        c.points.push(CurvePoint {
            x: num(file, line, f[4])?,
            y: num(file, line, f[5])?,
            low: num(file, line, f[6])?,
            high: num(file, line, f[7])?,
        });
    }
    for (line, f) in fields(hist, "reliability_hist.csv", HIST_HEADER, 8)? {
        let file = "reliability_hist.csv";
        let k = key(file, line, &f)?;
        let c = curves.get_mut(&k).ok_or_else(|| {
            format!("{file}: line {line}: no such curve in reliability_terms.csv")
        })?;
        let n: u64 = num(file, line, f[7])?;
        let low: f64 = num(file, line, f[5])?;
        let (bins, idx) = match f[4] {
            "probability" => (&mut c.hist_p, (low * HIST_P_BINS as f64).round()),
            "log_odds" => (&mut c.hist_logit, low + LOGIT_RANGE),
            other => return Err(format!("{file}: line {line}: unknown scale `{other}`")),
        };
        match (idx >= 0.0)
            .then_some(idx as usize)
            .and_then(|i| bins.get_mut(i))
        {
            Some(slot) => *slot = n,
            None => return Err(format!("{file}: line {line}: bin_low {low} is not a bin")),
        }
    }
    Ok(order
        .into_iter()
        .filter_map(|k| {
            curves.remove(&k).map(|curve| CurveRecord {
                task: k.0,
                size: k.1,
                repeat: k.2,
                curve,
            })
        })
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn calibrated(n: usize, seed: u64) -> (Vec<f64>, Vec<bool>) {
        let mut rng = crate::split::rng(seed);
        let mut p = Vec::new();
        let mut y = Vec::new();
        for _ in 0..n {
            let u = (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
            let v = (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
            p.push(0.02 + 0.96 * u);
            y.push(v < 0.02 + 0.96 * u);
        }
        (p, y)
    }

    /// Hand-worked PAV: forecasts 0.1, 0.2, 0.3, 0.4 with labels 0, 1, 0, 1
    /// pool the middle two into one block of mean 0.5.
    #[test]
    fn curve_points_are_the_block_ends() {
        let p = [0.1, 0.2, 0.3, 0.4];
        let y = [false, true, false, true];
        let c = curve(
            "m",
            &p,
            &y,
            BandSettings {
                draws: 10,
                level: 0.9,
            },
            1,
        )
        .unwrap();
        let xy: Vec<(f64, f64)> = c.points.iter().map(|q| (q.x, q.y)).collect();
        assert_eq!(xy, vec![(0.1, 0.0), (0.2, 0.5), (0.3, 0.5), (0.4, 1.0)]);
        assert_eq!(c.hist_p.iter().sum::<u64>(), 4);
        assert_eq!(c.hist_logit.iter().sum::<u64>(), 4);
        assert!((c.brier - (0.01 + 0.64 + 0.09 + 0.36) / 4.0).abs() < 1e-9);
    }

    #[test]
    fn band_is_seeded_and_ordered() {
        let (p, y) = calibrated(2000, 7);
        let a = curve("m", &p, &y, BandSettings::default(), 11).unwrap();
        let b = curve("m", &p, &y, BandSettings::default(), 11).unwrap();
        assert_eq!(a, b);
        assert!(a.points.iter().all(|q| q.low <= q.high));
        assert!(a.points.len() <= MAX_POINTS);
    }

    #[test]
    fn csv_round_trip_is_exact() {
        let (p, y) = calibrated(500, 3);
        let c = curve(
            "platt",
            &p,
            &y,
            BandSettings {
                draws: 50,
                level: 0.9,
            },
            5,
        )
        .unwrap();
        let recs = vec![CurveRecord {
            task: "t".into(),
            size: 100,
            repeat: 0,
            curve: c,
        }];
        let (a, b, t) = to_csv(&recs);
        let back = from_csv(&a, &b, &t).unwrap();
        assert_eq!(back, recs);
    }

    #[test]
    fn malformed_csv_names_file_and_line() {
        let e = from_csv(
            &format!("{POINTS_HEADER}\n"),
            &format!("{HIST_HEADER}\n"),
            &format!("{TERMS_HEADER}\nt,1,0,m,10,x,0,0,0,0.9,10,0,0\n"),
        )
        .unwrap_err();
        assert!(e.contains("reliability_terms.csv: line 2"), "{e}");
    }
}
