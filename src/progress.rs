//! The terminal progress bar of long searches and simulations (`indicatif`, on standard error).
//!
//! Owns only presentation of progress: it is hidden when standard error is not a terminal or
//! when the user asked for quiet, so piped output and CI logs stay clean. It never touches
//! results.

use crate::search::Observer;
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Mutex;

/// A progress bar counting steps (branches, levels, sweep points) with sets scored, the best
/// power so far and the rate.
pub struct Bar {
    bar: ProgressBar,
    scored: AtomicU64,
    best: Mutex<f64>,
    /// Power unit and conversion from kT, for the "best" figure.
    unit: String,
    per_kt: f64,
}

impl Bar {
    /// A bar on standard error, or a hidden one when `quiet` or not a terminal.
    pub fn new(quiet: bool, unit: String, per_kt: f64) -> Self {
        let target = if quiet || !std::io::stderr().is_terminal() {
            ProgressDrawTarget::hidden()
        } else {
            ProgressDrawTarget::stderr()
        };
        let bar = ProgressBar::with_draw_target(Some(0), target);
        if let Ok(style) = ProgressStyle::with_template(
            "{prefix} [{bar:30}] {pos}/{len} {msg} ({elapsed}, eta {eta})",
        ) {
            bar.set_style(style.progress_chars("=> "));
        }
        Self {
            bar,
            scored: AtomicU64::new(0),
            best: Mutex::new(f64::NEG_INFINITY),
            unit,
            per_kt,
        }
    }
}

impl Bar {
    /// Starts counting `steps` steps of `what` (runs of a simulation).
    pub fn start_counting(&self, steps: u64, what: &str) {
        self.bar.set_length(steps);
        self.bar.set_position(0);
        self.bar.set_prefix(what.to_string());
    }

    /// One step done, with `message` beside the bar (safe from several threads).
    pub fn step(&self, message: String) {
        self.bar.set_message(message);
        self.bar.inc(1);
    }

    /// Clears the bar.
    pub fn finish_counting(&self) {
        self.bar.finish_and_clear();
    }
}

impl Observer for Bar {
    fn start(&self, steps: u64, what: &str) {
        self.bar.set_length(steps);
        self.bar.set_position(0);
        self.bar.set_prefix(what.to_string());
    }

    fn advance(&self, scored: u64, best_power: f64) {
        let total = self.scored.fetch_add(scored, Ordering::Relaxed) + scored;
        let best = {
            let mut b = self.best.lock().unwrap_or_else(|e| e.into_inner());
            if best_power > *b {
                *b = best_power;
            }
            *b
        };
        let secs = self.bar.elapsed().as_secs_f64().max(1e-9);
        self.bar.set_message(format!(
            "{total} sets scored, {:.0}/s, best {:.5} {}",
            total as f64 / secs,
            best * self.per_kt,
            self.unit
        ));
        self.bar.inc(1);
    }

    fn finish(&self) {
        self.bar.finish_and_clear();
    }
}
