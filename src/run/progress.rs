//! Progress of a run on standard error: a bar on a terminal; where standard
//! error is not a terminal (a CI log, a Slurm output file) a plain line every
//! few seconds with the count done, the time elapsed and an estimate of the
//! time left. Never on standard output, and nothing with `--quiet`.

use std::io::IsTerminal;
use std::sync::Mutex;
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressState, ProgressStyle};

/// Seconds between two progress lines when standard error is not a terminal.
pub const DEFAULT_INTERVAL_SECONDS: f64 = 5.0;
/// The variable that sets those seconds (0: a line for every step).
pub const INTERVAL_VAR: &str = "PLUMBLINE_PROGRESS_SECONDS";

/// A progress display over `len` steps (units, or score pools).
pub struct Progress {
    inner: Inner,
}

enum Inner {
    Hidden,
    Bar(ProgressBar),
    Lines(Mutex<Lines>),
}

struct Lines {
    /// What the line starts with (`run`, `score pools`, ...).
    label: String,
    /// What is counted (`units`, `tasks`).
    what: String,
    len: u64,
    pos: u64,
    /// Position when counting started (resumed units are not work done now).
    start_pos: u64,
    started: Instant,
    last: Instant,
    every: Duration,
}

/// A rate for the bar: three significant figures at most (`41.7/s`, `0.52/s`).
pub fn rate(per_sec: f64) -> String {
    if !per_sec.is_finite() {
        "–".into()
    } else if per_sec >= 100.0 {
        format!("{per_sec:.0}/s")
    } else if per_sec >= 10.0 {
        format!("{per_sec:.1}/s")
    } else {
        format!("{per_sec:.2}/s")
    }
}

/// A duration in words for progress lines: `8.2 s`, `42 s`, `3 min 05 s`,
/// `2 h 07 min`.
pub fn duration(secs: f64) -> String {
    if !secs.is_finite() || secs < 0.0 {
        return "–".into();
    }
    if secs < 10.0 {
        return format!("{secs:.1} s");
    }
    let s = secs.round() as u64;
    if s < 60 {
        format!("{s} s")
    } else if s < 3600 {
        format!("{} min {:02} s", s / 60, s % 60)
    } else {
        format!("{} h {:02} min", s / 3600, (s % 3600) / 60)
    }
}

/// The interval between progress lines from [`INTERVAL_VAR`]: a
/// non-negative number of seconds; anything else is reported once and the
/// default used.
fn interval() -> Duration {
    let default = Duration::from_secs_f64(DEFAULT_INTERVAL_SECONDS);
    match std::env::var(INTERVAL_VAR) {
        Err(std::env::VarError::NotPresent) => default,
        Ok(v) if v.trim().is_empty() => default,
        Ok(v) => match v.trim().parse::<f64>() {
            Ok(x) if (0.0..1e9).contains(&x) => Duration::from_secs_f64(x),
            _ => {
                eprintln!(
                    "warning: {INTERVAL_VAR}={v:?} is not a number of seconds (0 or more); progress lines every {DEFAULT_INTERVAL_SECONDS} s"
                );
                default
            }
        },
        Err(_) => {
            eprintln!("warning: {INTERVAL_VAR} is not valid text; progress lines every {DEFAULT_INTERVAL_SECONDS} s");
            default
        }
    }
}

impl Progress {
    /// Progress over `len` steps counted as `what`; `template` is the bar's
    /// indicatif template (`{rate}`: steps per second, rounded).
    pub fn new(len: u64, template: &str, label: &str, what: &str, quiet: bool) -> Progress {
        let inner = if quiet {
            Inner::Hidden
        } else if std::io::stderr().is_terminal() {
            let b = ProgressBar::with_draw_target(Some(len), ProgressDrawTarget::stderr());
            b.set_style(
                ProgressStyle::with_template(template)
                    .unwrap_or_else(|_| ProgressStyle::default_bar())
                    .with_key("rate", |s: &ProgressState, w: &mut dyn std::fmt::Write| {
                        let _ = w.write_str(&rate(s.per_sec()));
                    }),
            );
            Inner::Bar(b)
        } else {
            let now = Instant::now();
            Inner::Lines(Mutex::new(Lines {
                label: label.to_string(),
                what: what.to_string(),
                len,
                pos: 0,
                start_pos: 0,
                started: now,
                last: now,
                every: interval(),
            }))
        };
        Progress { inner }
    }

    /// Steps already done before this run (resumed).
    pub fn set_position(&self, pos: u64) {
        match &self.inner {
            Inner::Hidden => {}
            Inner::Bar(b) => b.set_position(pos),
            Inner::Lines(l) => {
                if let Ok(mut l) = l.lock() {
                    l.pos = pos;
                    l.start_pos = pos;
                }
            }
        }
    }

    /// Shown beside the bar (the step just finished); not in progress lines.
    pub fn set_message(&self, msg: String) {
        if let Inner::Bar(b) = &self.inner {
            b.set_message(msg);
        }
    }

    /// One more step done; a progress line when the interval has passed.
    pub fn inc(&self) {
        match &self.inner {
            Inner::Hidden => {}
            Inner::Bar(b) => b.inc(1),
            Inner::Lines(l) => {
                let Ok(mut l) = l.lock() else { return };
                l.pos += 1;
                let now = Instant::now();
                if now.duration_since(l.last) >= l.every {
                    l.last = now;
                    eprintln!("{}", l.line(now));
                }
            }
        }
    }

    /// The bar disappears; progress lines stop.
    pub fn finish(&self) {
        if let Inner::Bar(b) = &self.inner {
            b.finish_and_clear();
        }
    }
}

impl Lines {
    /// `run: 120/800 units done · 1 min 04 s elapsed · about 6 min 02 s left`.
    fn line(&self, now: Instant) -> String {
        let elapsed = now.duration_since(self.started).as_secs_f64();
        let done_now = self.pos.saturating_sub(self.start_pos);
        let left = self.len.saturating_sub(self.pos);
        let estimate = if left == 0 {
            "done".to_string()
        } else if done_now == 0 || elapsed <= 0.0 {
            "time left not yet known".to_string()
        } else {
            format!(
                "about {} left",
                duration(elapsed / done_now as f64 * left as f64)
            )
        };
        format!(
            "{}: {}/{} {} done · {} elapsed · {estimate}",
            self.label,
            self.pos,
            self.len,
            self.what,
            duration(elapsed)
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rates_and_durations_read_plainly() {
        assert_eq!(rate(41.655_3), "41.7/s");
        assert_eq!(rate(417.4), "417/s");
        assert_eq!(rate(0.523), "0.52/s");
        assert_eq!(duration(8.24), "8.2 s");
        assert_eq!(duration(42.4), "42 s");
        assert_eq!(duration(185.0), "3 min 05 s");
        assert_eq!(duration(7620.0), "2 h 07 min");
    }

    #[test]
    fn a_line_counts_done_elapsed_and_left() {
        let t0 = Instant::now();
        let l = Lines {
            label: "run".into(),
            what: "units".into(),
            len: 100,
            pos: 30,
            start_pos: 10,
            started: t0,
            last: t0,
            every: Duration::ZERO,
        };
        // 20 units in 40 s: 2 s a unit, 70 left.
        let line = l.line(t0 + Duration::from_secs(40));
        assert_eq!(
            line,
            "run: 30/100 units done · 40 s elapsed · about 2 min 20 s left"
        );
        let fresh = Lines { pos: 10, ..l };
        assert!(fresh
            .line(t0 + Duration::from_secs(1))
            .ends_with("time left not yet known"));
    }
}
