//! Progress of long runs on stderr.
//!
//! On a terminal: a bar. Otherwise (Slurm logs, `nohup`, a pipe): one line at most every
//! [`DEFAULT_INTERVAL`] seconds, with the work done, the rate and the estimated time left,
//! printed by a ticker thread, so that a run whose first replicate takes minutes still says
//! that it is alive. Nothing with `--quiet`. The interval can be changed with the
//! environment variable `SEEDLINE_PROGRESS_SECONDS` (used by the tests).

use std::io::{IsTerminal, Write};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, mpsc};
use std::time::{Duration, Instant};

/// Seconds between two progress lines when stderr is not a terminal.
pub const DEFAULT_INTERVAL: f64 = 10.0;

/// How progress is shown.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mode {
    /// Nothing.
    Quiet,
    /// A bar redrawn in place (stderr is a terminal).
    Bar,
    /// A line now and then (stderr is a file or a pipe).
    Lines,
}

impl Mode {
    /// `Quiet` when asked, else `Bar` on a terminal and `Lines` otherwise.
    pub fn detect(quiet: bool) -> Mode {
        if quiet {
            Mode::Quiet
        } else if std::io::stderr().is_terminal() {
            Mode::Bar
        } else {
            Mode::Lines
        }
    }
}

struct Shared {
    label: String,
    unit: String,
    total: u64,
    done: AtomicU64,
    start: Instant,
    printed: AtomicBool,
}

/// A progress report of `total` units of work (see the module documentation).
pub struct Progress {
    shared: Arc<Shared>,
    bar: Option<indicatif::ProgressBar>,
    ticker: Option<(mpsc::Sender<()>, std::thread::JoinHandle<()>)>,
}

impl Progress {
    /// Starts reporting `total` units (`unit`, e.g. "replicates") of the work `label`.
    pub fn new(label: &str, unit: &str, total: u64, mode: Mode) -> Progress {
        let shared = Arc::new(Shared {
            label: label.to_string(),
            unit: unit.to_string(),
            total,
            done: AtomicU64::new(0),
            start: Instant::now(),
            printed: AtomicBool::new(false),
        });
        let mut p = Progress { shared: shared.clone(), bar: None, ticker: None };
        match mode {
            Mode::Quiet => {}
            Mode::Bar => {
                let bar = indicatif::ProgressBar::new(total);
                let template = format!("{{bar:40}} {{pos}}/{{len}} {unit}  {{per_sec}}  eta {{eta}}");
                bar.set_style(
                    indicatif::ProgressStyle::with_template(&template)
                        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
                );
                bar.enable_steady_tick(Duration::from_secs(1));
                p.bar = Some(bar);
            }
            Mode::Lines => {
                let interval = interval();
                let (tx, rx) = mpsc::channel::<()>();
                let handle = std::thread::spawn(move || {
                    while let Err(mpsc::RecvTimeoutError::Timeout) = rx.recv_timeout(interval) {
                        let _ = writeln!(std::io::stderr(), "{}", shared.line());
                        shared.printed.store(true, Ordering::Relaxed);
                    }
                });
                p.ticker = Some((tx, handle));
            }
        }
        p
    }

    /// Adds `n` finished units.
    pub fn inc(&self, n: u64) {
        self.shared.done.fetch_add(n, Ordering::Relaxed);
        if let Some(b) = &self.bar {
            b.inc(n);
        }
    }

    /// Sets the number of finished units.
    pub fn set(&self, done: u64) {
        self.shared.done.fetch_max(done, Ordering::Relaxed);
        if let Some(b) = &self.bar {
            b.set_position(done);
        }
    }

    /// Stops reporting; a line-mode report that printed anything ends with a last line.
    pub fn finish(mut self) {
        self.stop();
    }

    fn stop(&mut self) {
        if let Some(b) = self.bar.take() {
            b.finish_and_clear();
        }
        if let Some((tx, handle)) = self.ticker.take() {
            drop(tx);
            let _ = handle.join();
            if self.shared.printed.load(Ordering::Relaxed) {
                let _ = writeln!(std::io::stderr(), "{}", self.shared.line());
            }
        }
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        if let Some((tx, handle)) = self.ticker.take() {
            drop(tx);
            let _ = handle.join();
        }
        if let Some(b) = self.bar.take() {
            b.finish_and_clear();
        }
    }
}

fn interval() -> Duration {
    let secs = std::env::var("SEEDLINE_PROGRESS_SECONDS")
        .ok()
        .and_then(|s| s.parse::<f64>().ok())
        .filter(|s| s.is_finite() && *s > 0.0)
        .unwrap_or(DEFAULT_INTERVAL);
    Duration::from_secs_f64(secs)
}

impl Shared {
    fn line(&self) -> String {
        let done = self.done.load(Ordering::Relaxed);
        let elapsed = self.start.elapsed().as_secs_f64();
        status_line(&self.label, &self.unit, done, self.total, elapsed)
    }
}

/// `label: done/total unit (p %), r per s, about t left, e elapsed`.
pub fn status_line(label: &str, unit: &str, done: u64, total: u64, elapsed: f64) -> String {
    let pct = if total > 0 { 100.0 * done as f64 / total as f64 } else { 100.0 };
    let mut s = format!("{label}: {done}/{total} {unit} ({pct:.1} %)");
    if done == 0 {
        s.push_str(&format!(", {} elapsed, none finished yet", duration(elapsed)));
        return s;
    }
    let rate = done as f64 / elapsed.max(1e-9);
    let left = total.saturating_sub(done) as f64 / rate;
    let rate = if rate >= 100.0 {
        format!("{rate:.0}")
    } else if rate >= 1.0 {
        format!("{rate:.1}")
    } else {
        format!("{rate:.3}")
    };
    s.push_str(&format!(", {rate} per s, about {} left, {} elapsed", duration(left), duration(elapsed)));
    s
}

/// A duration in words: `42 s`, `3 min 5 s`, `2 h 10 min`, `3.2 days`, `1.5e6 years`.
pub fn duration(secs: f64) -> String {
    if !secs.is_finite() {
        return "forever".to_string();
    }
    let s = secs.max(0.0);
    if s < 60.0 {
        format!("{} s", s.round() as u64)
    } else if s < 3600.0 {
        format!("{} min {} s", (s / 60.0).floor() as u64, (s % 60.0).round() as u64)
    } else if s < 86400.0 * 2.0 {
        format!("{} h {} min", (s / 3600.0).floor() as u64, ((s % 3600.0) / 60.0).round() as u64)
    } else if s < 86400.0 * 365.25 * 2.0 {
        format!("{:.1} days", s / 86400.0)
    } else {
        format!("{} years", crate::report::fmt_num(s / (86400.0 * 365.25)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lines_say_done_rate_and_time_left() {
        // 30 of 120 in 60 s: 0.5 per s, 90 left take 180 s.
        let l = status_line("simulate", "replicates", 30, 120, 60.0);
        assert_eq!(l, "simulate: 30/120 replicates (25.0 %), 0.500 per s, about 3 min 0 s left, 1 min 0 s elapsed");
        assert!(status_line("null", "replicates", 0, 5, 12.0).contains("none finished yet"));
        assert_eq!(duration(7200.0), "2 h 0 min");
        assert_eq!(duration(86400.0 * 3.0), "3.0 days");
        assert_eq!(duration(f64::INFINITY), "forever");
    }

    #[test]
    fn quiet_progress_counts_without_printing() {
        let p = Progress::new("x", "replicates", 10, Mode::Quiet);
        p.inc(3);
        p.set(7);
        assert_eq!(p.shared.done.load(Ordering::Relaxed), 7);
        p.finish();
    }
}
