//! The one rule that turns a paired interval into a verdict, used by every
//! report format.
//!
//! Input: an interval [low, high] for the difference "method − other", turned
//! so that below zero means the method is better (a loss; a metric where
//! higher is better is negated first, see [`Verdict::of_metric`]), and an
//! equivalence margin δ ≥ 0 in the units of the difference.
//!
//! * **equivalent**: the whole interval lies inside [−δ, +δ] (ends included).
//!   This is the two one-sided tests procedure (Schuirmann 1987, J.
//!   Pharmacokinet. Biopharm. 15) read off the interval: with a two-sided
//!   interval at level 1 − α each one-sided test runs at α/2, so the
//!   equivalence call is conservative at level α/2 (the exact TOST at level α
//!   would use the 1 − 2α interval; see `docs/statistics.md`).
//! * **better**: the interval lies entirely below 0 and is not inside [−δ, +δ]
//!   (it reaches below −δ).
//! * **worse**: entirely above 0 and not inside [−δ, +δ].
//! * **undetermined**: everything else — the interval covers 0 and reaches
//!   beyond −δ or +δ, or it is not finite.
//!
//! Precedence: equivalence is checked first. An interval that excludes zero
//! but lies within ±δ is *equivalent*: the difference is reliably not zero,
//! but it is reliably smaller than the margin the suite calls negligible.
//! With δ = 0 an interval is equivalent only when it is the point [0, 0]
//! (every repeat gave exactly the same loss); otherwise the four verdicts
//! reduce to the three of a plain significance reading.

use serde::Serialize;

use super::paired::Interval;

/// The verdict of one paired comparison.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    Better,
    Equivalent,
    Undetermined,
    Worse,
}

impl Verdict {
    /// In the order counts are reported: better, equivalent, undetermined, worse.
    pub const ALL: [Verdict; 4] = [
        Verdict::Better,
        Verdict::Equivalent,
        Verdict::Undetermined,
        Verdict::Worse,
    ];

    /// The verdict of an interval turned so that below zero is better, at
    /// margin `margin` (a non-finite margin allows no equivalence call).
    pub fn of(low: f64, high: f64, margin: f64) -> Verdict {
        if !(low.is_finite() && high.is_finite()) || low > high {
            return Verdict::Undetermined;
        }
        let margin = if margin.is_finite() {
            margin.abs()
        } else {
            f64::NAN
        };
        if low >= -margin && high <= margin {
            Verdict::Equivalent
        } else if high < 0.0 {
            Verdict::Better
        } else if low > 0.0 {
            Verdict::Worse
        } else {
            Verdict::Undetermined
        }
    }

    /// The verdict of an interval of "method − other" on a metric: for a
    /// metric where higher is better the interval is negated first.
    pub fn of_metric(low: f64, high: f64, margin: f64, higher_is_better: bool) -> Verdict {
        if higher_is_better {
            Verdict::of(-high, -low, margin)
        } else {
            Verdict::of(low, high, margin)
        }
    }

    /// The verdict of an [`Interval`] already turned so that below zero is better.
    pub fn of_interval(iv: &Interval, margin: f64) -> Verdict {
        Verdict::of(iv.low, iv.high, margin)
    }

    /// The word written in `paired.csv`.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Better => "better",
            Verdict::Equivalent => "equivalent",
            Verdict::Undetermined => "undetermined",
            Verdict::Worse => "worse",
        }
    }

    /// The words used in reports.
    pub fn words(self) -> &'static str {
        match self {
            Verdict::Better => "reliably better",
            Verdict::Equivalent => "equivalent within the margin",
            Verdict::Undetermined => "undetermined",
            Verdict::Worse => "reliably worse",
        }
    }

    /// The mark used in every report (LaTeX tables translate it).
    pub fn mark(self) -> &'static str {
        match self {
            Verdict::Better => "✓",
            Verdict::Equivalent => "=",
            Verdict::Undetermined => "?",
            Verdict::Worse => "✗",
        }
    }

    /// The same mark in LaTeX text mode (`=` and `?` are plain text there).
    pub fn latex(self) -> &'static str {
        match self {
            Verdict::Better => "$\\surd$",
            Verdict::Equivalent => "=",
            Verdict::Undetermined => "?",
            Verdict::Worse => "$\\times$",
        }
    }

    /// The verdict named `s` (its [`Verdict::as_str`] word).
    pub fn parse(s: &str) -> Option<Verdict> {
        Verdict::ALL.into_iter().find(|v| v.as_str() == s)
    }
}

/// How many comparisons (tasks) got each verdict.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
pub struct VerdictCounts {
    pub better: usize,
    pub equivalent: usize,
    pub undetermined: usize,
    pub worse: usize,
}

impl VerdictCounts {
    pub fn add(&mut self, v: Verdict) {
        match v {
            Verdict::Better => self.better += 1,
            Verdict::Equivalent => self.equivalent += 1,
            Verdict::Undetermined => self.undetermined += 1,
            Verdict::Worse => self.worse += 1,
        }
    }

    /// `better/equivalent/undetermined/worse`, the order of [`Verdict::ALL`].
    pub fn slashed(&self) -> String {
        format!(
            "{}/{}/{}/{}",
            self.better, self.equivalent, self.undetermined, self.worse
        )
    }
}

impl FromIterator<Verdict> for VerdictCounts {
    fn from_iter<I: IntoIterator<Item = Verdict>>(iter: I) -> Self {
        let mut c = VerdictCounts::default();
        for v in iter {
            c.add(v);
        }
        c
    }
}

/// The four marks in report order, joined by `/` (for column headers).
pub fn marks_slashed() -> String {
    Verdict::ALL
        .iter()
        .map(|v| v.mark())
        .collect::<Vec<_>>()
        .join("/")
}

#[cfg(test)]
mod tests {
    use super::*;
    use Verdict::*;

    const D: f64 = 0.01;

    #[test]
    fn clear_cases() {
        assert_eq!(Verdict::of(-0.05, -0.02, D), Better);
        assert_eq!(Verdict::of(0.02, 0.05, D), Worse);
        assert_eq!(Verdict::of(-0.004, 0.006, D), Equivalent);
        assert_eq!(Verdict::of(-0.02, 0.005, D), Undetermined);
        assert_eq!(Verdict::of(-0.005, 0.02, D), Undetermined);
        assert_eq!(Verdict::of(-0.02, 0.02, D), Undetermined);
    }

    #[test]
    fn touching_the_margin_is_inside() {
        // Ends included: [−δ, +δ] itself is equivalent.
        assert_eq!(Verdict::of(-D, D, D), Equivalent);
        assert_eq!(Verdict::of(-0.001, D, D), Equivalent);
        assert_eq!(Verdict::of(-D, 0.001, D), Equivalent);
        // Just beyond either end is not.
        let past = D * (1.0 + 1e-12);
        assert_eq!(Verdict::of(-0.001, past, D), Undetermined);
        assert_eq!(Verdict::of(-past, 0.001, D), Undetermined);
        // Beyond the margin and clear of zero: better / worse.
        assert_eq!(Verdict::of(-past, -0.001, D), Better);
        assert_eq!(Verdict::of(0.001, past, D), Worse);
    }

    #[test]
    fn excluding_zero_inside_the_margin_is_equivalent() {
        assert_eq!(Verdict::of(-0.009, -0.001, D), Equivalent);
        assert_eq!(Verdict::of(0.001, 0.009, D), Equivalent);
        assert_eq!(Verdict::of(0.001, D, D), Equivalent);
    }

    #[test]
    fn touching_zero_covers_it() {
        assert_eq!(Verdict::of(-0.05, 0.0, D), Undetermined);
        assert_eq!(Verdict::of(0.0, 0.05, D), Undetermined);
        assert_eq!(Verdict::of(-0.05, 0.0, 0.0), Undetermined);
    }

    #[test]
    fn zero_margin_allows_only_the_point_at_zero() {
        assert_eq!(Verdict::of(0.0, 0.0, 0.0), Equivalent);
        assert_eq!(Verdict::of(-1e-15, 1e-15, 0.0), Undetermined);
        assert_eq!(Verdict::of(-0.02, -1e-9, 0.0), Better);
        assert_eq!(Verdict::of(1e-9, 0.02, 0.0), Worse);
        assert_eq!(Verdict::of(-0.02, 0.02, 0.0), Undetermined);
    }

    #[test]
    fn no_margin_or_no_interval() {
        assert_eq!(Verdict::of(-0.001, 0.001, f64::NAN), Undetermined);
        assert_eq!(Verdict::of(-0.02, -0.01, f64::NAN), Better);
        assert_eq!(Verdict::of(f64::NAN, f64::NAN, D), Undetermined);
        assert_eq!(Verdict::of(-0.001, f64::INFINITY, D), Undetermined);
        // A negative margin is read as its size.
        assert_eq!(Verdict::of(-0.004, 0.006, -D), Equivalent);
    }

    #[test]
    fn higher_is_better_is_turned() {
        // AUC of method − other in [+0.02, +0.05]: the method is better.
        assert_eq!(Verdict::of_metric(0.02, 0.05, D, true), Better);
        assert_eq!(Verdict::of_metric(0.02, 0.05, D, false), Worse);
        assert_eq!(Verdict::of_metric(-0.05, -0.02, D, true), Worse);
        assert_eq!(Verdict::of_metric(-0.004, 0.009, D, true), Equivalent);
        assert_eq!(Verdict::of_metric(-0.004, 0.02, D, true), Undetermined);
    }

    #[test]
    fn words_marks_and_counts() {
        let marks: Vec<&str> = Verdict::ALL.iter().map(|v| v.mark()).collect();
        let mut dedup = marks.clone();
        dedup.sort();
        dedup.dedup();
        assert_eq!(dedup.len(), 4, "{marks:?}");
        for v in Verdict::ALL {
            assert_eq!(Verdict::parse(v.as_str()), Some(v));
        }
        let c: VerdictCounts = [Better, Worse, Equivalent, Equivalent, Undetermined]
            .into_iter()
            .collect();
        assert_eq!(c.slashed(), "1/2/1/1");
        assert_eq!(marks_slashed(), "✓/=/?/✗");
    }
}
