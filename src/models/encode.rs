//! Feature encoding for the linear and naive Bayes models.
//!
//! A numeric column becomes one design column. A categorical column with L
//! levels (coded 0..L) becomes indicator columns 1{x = ℓ}: all L of them
//! ([`Coding::Full`], for naive Bayes, where each indicator gets its own
//! per-class Gaussian), or levels 1..L with level 0 as the reference
//! ([`Coding::Reference`], for logistic regression, so the indicators are not
//! collinear with the intercept — common practice, "treatment coding").
//!
//! Standardisation (logistic regression): each design column is centred by its
//! mean and divided by its population standard deviation (divisor n), both
//! computed on the training rows only, so no information from scored rows enters
//! the fit. A column that is constant on the training rows is set to 0 (its
//! coefficient is then 0 at the penalised optimum and irrelevant without one).

use crate::data::{Dataset, FeatureKind};

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Coding {
    /// Indicators for every level.
    Full,
    /// Indicators for levels 1..L; level 0 is the reference.
    Reference,
}

/// One design column: a source column, and for categorical ones the level.
#[derive(Debug, Clone, PartialEq)]
pub struct DesignCol {
    pub source: usize,
    pub level: Option<usize>,
    pub name: String,
}

/// The mapping from dataset columns to design columns.
#[derive(Debug, Clone, PartialEq)]
pub struct Design {
    pub cols: Vec<DesignCol>,
    /// Number of dataset columns the design was built for.
    pub source_columns: usize,
}

impl Design {
    pub fn new(data: &Dataset, coding: Coding) -> Self {
        let mut cols = Vec::new();
        for j in 0..data.columns.len() {
            let name = data
                .names
                .get(j)
                .cloned()
                .unwrap_or_else(|| format!("#{}", j + 1));
            match data.kinds.get(j).copied().unwrap_or(FeatureKind::Numeric) {
                FeatureKind::Numeric => cols.push(DesignCol {
                    source: j,
                    level: None,
                    name,
                }),
                FeatureKind::Categorical { levels } => {
                    let first = match coding {
                        Coding::Full => 0,
                        Coding::Reference => 1,
                    };
                    for l in first..levels {
                        cols.push(DesignCol {
                            source: j,
                            level: Some(l),
                            name: format!("{name}={l}"),
                        });
                    }
                }
            }
        }
        Design {
            cols,
            source_columns: data.columns.len(),
        }
    }

    pub fn width(&self) -> usize {
        self.cols.len()
    }

    /// Row-major matrix (`rows.len()` × `width()`) of the design on `rows`.
    /// Values must have been checked with [`super::check_values`].
    pub fn row_major(&self, data: &Dataset, rows: &[usize]) -> Vec<f64> {
        let p = self.width();
        let mut x = vec![0.0; rows.len() * p];
        for (k, c) in self.cols.iter().enumerate() {
            let col = &data.columns[c.source];
            for (i, &r) in rows.iter().enumerate() {
                x[i * p + k] = match c.level {
                    None => col[r],
                    Some(l) => {
                        if col[r] == l as f64 {
                            1.0
                        } else {
                            0.0
                        }
                    }
                };
            }
        }
        x
    }
}

/// Column means and population standard deviations of the training rows.
#[derive(Debug, Clone, PartialEq)]
pub struct Standardizer {
    pub mean: Vec<f64>,
    /// 0 marks a column constant on the training rows.
    pub sd: Vec<f64>,
}

impl Standardizer {
    /// Statistics of a row-major `n × p` matrix.
    pub fn fit(x: &[f64], p: usize) -> Self {
        let n = x.len().checked_div(p).unwrap_or(0);
        let mut mean = vec![0.0; p];
        for row in x.chunks_exact(p.max(1)) {
            for (m, v) in mean.iter_mut().zip(row) {
                *m += v;
            }
        }
        for m in &mut mean {
            *m /= n.max(1) as f64;
        }
        let mut var = vec![0.0; p];
        for row in x.chunks_exact(p.max(1)) {
            for ((s, v), m) in var.iter_mut().zip(row).zip(&mean) {
                *s += (v - m) * (v - m);
            }
        }
        let sd = var
            .iter()
            .zip(&mean)
            .map(|(s, m)| {
                let sd = (s / n.max(1) as f64).sqrt();
                // Constant up to rounding of the mean.
                if sd <= 1e-12 * m.abs().max(1.0) {
                    0.0
                } else {
                    sd
                }
            })
            .collect();
        Standardizer { mean, sd }
    }

    /// Standardise a row-major matrix in place.
    pub fn apply(&self, x: &mut [f64]) {
        let p = self.mean.len();
        if p == 0 {
            return;
        }
        for row in x.chunks_exact_mut(p) {
            for ((v, m), s) in row.iter_mut().zip(&self.mean).zip(&self.sd) {
                *v = if *s > 0.0 { (*v - m) / s } else { 0.0 };
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn small() -> Dataset {
        Dataset {
            id: "t".into(),
            names: vec!["a".into(), "c".into()],
            columns: vec![vec![1.0, 2.0, 3.0, 4.0], vec![0.0, 2.0, 1.0, 2.0]],
            kinds: vec![FeatureKind::Numeric, FeatureKind::Categorical { levels: 3 }],
            labels: vec![false, true, false, true],
        }
    }

    #[test]
    fn one_hot_codings() {
        let d = small();
        let full = Design::new(&d, Coding::Full);
        assert_eq!(full.width(), 4);
        let x = full.row_major(&d, &[0, 1, 2]);
        assert_eq!(
            x,
            vec![1.0, 1.0, 0.0, 0.0, 2.0, 0.0, 0.0, 1.0, 3.0, 0.0, 1.0, 0.0]
        );
        let reference = Design::new(&d, Coding::Reference);
        assert_eq!(reference.width(), 3);
        assert_eq!(reference.cols[1].name, "c=1");
        let x = reference.row_major(&d, &[0, 3]);
        assert_eq!(x, vec![1.0, 0.0, 0.0, 4.0, 0.0, 1.0]);
    }

    #[test]
    fn standardiser_uses_population_sd_and_zeroes_constants() {
        // Column 0: 1, 2, 3, 4 -> mean 2.5, population sd sqrt(1.25); column 1 constant.
        let mut x = vec![1.0, 7.0, 2.0, 7.0, 3.0, 7.0, 4.0, 7.0];
        let s = Standardizer::fit(&x, 2);
        assert_eq!(s.mean, vec![2.5, 7.0]);
        assert!((s.sd[0] - 1.25f64.sqrt()).abs() < 1e-15);
        assert_eq!(s.sd[1], 0.0);
        s.apply(&mut x);
        assert!((x[0] + 1.5 / 1.25f64.sqrt()).abs() < 1e-15);
        assert_eq!(x[1], 0.0);
    }
}
