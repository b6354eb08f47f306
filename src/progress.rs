//! Progress bars on standard error for work that can take more than a couple of seconds
//! (simulations, light-cone regions, sums over many terms, batches).
//!
//! Why a module of its own, below everything: the long loops sit in `simulate` and `bounds`,
//! which do no I/O and must not know about terminals. They only count finished pieces on a
//! [`Task`]; whether anything is drawn is decided once by the binary ([`enable`]): only when
//! standard error is a terminal and the command's output is not `--json`. Nothing is drawn
//! during the first [`DELAY`] of a task, so quick work shows no bar at all. The counts never
//! reach any output file: certificates and `--json` are unaffected.

use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

static ENABLED: AtomicBool = AtomicBool::new(false);
/// Set while an outer task (a batch) owns the terminal line: inner tasks then draw nothing.
static OUTER: AtomicBool = AtomicBool::new(false);

/// How long a task runs before its bar appears.
pub const DELAY: Duration = Duration::from_millis(1500);

/// Allows bars to be drawn (the binary calls this once, after checking standard error).
pub fn enable(on: bool) {
    ENABLED.store(on, Ordering::Relaxed);
}

/// Whether bars may be drawn.
pub fn enabled() -> bool {
    ENABLED.load(Ordering::Relaxed)
}

/// One piece of long work: `total` pieces, counted as they finish (from any thread).
pub struct Task {
    bar: Option<ProgressBar>,
    started: Instant,
    shown: AtomicBool,
    outer: bool,
}

impl Task {
    /// Starts a task named `label`; draws nothing unless [`enable`]d and until [`DELAY`].
    pub fn start(label: &str, total: u64) -> Task {
        Self::new(
            label,
            total,
            enabled() && !OUTER.load(Ordering::Relaxed),
            false,
        )
    }

    /// Starts a task that holds the terminal line until dropped (a batch of runs): tasks
    /// started meanwhile, in any thread, draw nothing.
    pub fn start_outer(label: &str, total: u64) -> Task {
        let on = enabled();
        if on {
            OUTER.store(true, Ordering::Relaxed);
        }
        Self::new(label, total, on, on)
    }

    fn new(label: &str, total: u64, on: bool, outer: bool) -> Task {
        let bar = on.then(|| {
            let bar = ProgressBar::with_draw_target(Some(total), ProgressDrawTarget::hidden());
            let style = ProgressStyle::with_template(
                "{msg} [{bar:30}] {pos}/{len} ({elapsed}, about {eta} left)",
            )
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .progress_chars("=> ");
            bar.set_style(style);
            bar.set_message(label.to_string());
            bar
        });
        Task {
            bar,
            started: Instant::now(),
            shown: AtomicBool::new(false),
            outer,
        }
    }

    /// Counts `n` finished pieces.
    pub fn inc(&self, n: u64) {
        if let Some(bar) = &self.bar {
            bar.inc(n);
            if !self.shown.load(Ordering::Relaxed) && self.started.elapsed() >= DELAY {
                self.shown.store(true, Ordering::Relaxed);
                bar.set_draw_target(ProgressDrawTarget::stderr());
            }
        }
    }
}

impl Drop for Task {
    fn drop(&mut self) {
        if let Some(bar) = &self.bar {
            bar.finish_and_clear();
        }
        if self.outer {
            OUTER.store(false, Ordering::Relaxed);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_task_draws_nothing_unless_enabled() {
        // Not enabled (the default, and always under `cargo test`): no bar exists at all.
        let t = Task::start("work", 10);
        t.inc(3);
        assert!(t.bar.is_none());
    }
}
