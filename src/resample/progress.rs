//! Progress bars on standard error for resampling work that takes more than about a
//! second (DESIGN.md "Command line").
//!
//! A bar starts hidden and appears only once its work has run for [`SHOW_AFTER`], so
//! quick runs print nothing; it never appears when standard error is not a terminal or
//! with `--quiet`. Engines run concurrently, so every visible bar joins one
//! process-wide [`MultiProgress`] and the bars stack instead of overwriting each other.
//! The bars only draw: they carry no result and never change one.

use indicatif::{MultiProgress, ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::OnceLock;
use std::time::{Duration, Instant};

/// Work shorter than this shows no bar.
pub const SHOW_AFTER: Duration = Duration::from_secs(1);

/// Whether a bar may be drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Visibility {
    /// Drawn after [`SHOW_AFTER`] when standard error is a terminal.
    Auto,
    /// Never drawn (`--quiet`, tests, simulations).
    Hidden,
}

impl Visibility {
    /// `Hidden` when `quiet` (the `--quiet` flag), else `Auto`.
    pub fn from_quiet(quiet: bool) -> Visibility {
        if quiet {
            Visibility::Hidden
        } else {
            Visibility::Auto
        }
    }
}

fn bars() -> &'static MultiProgress {
    static BARS: OnceLock<MultiProgress> = OnceLock::new();
    BARS.get_or_init(|| MultiProgress::with_draw_target(ProgressDrawTarget::stderr()))
}

/// A progress bar over a count of resamples, shared by the threads doing the work.
pub struct Progress {
    bar: Option<ProgressBar>,
    start: Instant,
    shown: AtomicBool,
}

impl Progress {
    /// A bar for `total` resamples labelled `label` (e.g. the engine id).
    pub fn new(label: &str, total: u64, visibility: Visibility) -> Progress {
        Self::counting(label, "resamples", total, visibility)
    }

    /// A bar for `total` units named `unit` (e.g. "simulations") labelled `label`.
    pub fn counting(label: &str, unit: &str, total: u64, visibility: Visibility) -> Progress {
        let enabled = visibility == Visibility::Auto && std::io::stderr().is_terminal();
        let bar = enabled.then(|| {
            let bar = ProgressBar::with_draw_target(Some(total), ProgressDrawTarget::hidden());
            let template = format!("{{prefix:>24}} [{{bar:30}}] {{pos}}/{{len}} {unit}, {{eta}} left");
            if let Ok(style) = ProgressStyle::with_template(&template) {
                bar.set_style(style.progress_chars("=> "));
            }
            bar.set_prefix(label.to_string());
            bar
        });
        Progress { bar, start: Instant::now(), shown: AtomicBool::new(false) }
    }

    /// Records `n` more units done; shows the bar once the work has lasted [`SHOW_AFTER`].
    pub fn advance(&self, n: u64) {
        let Some(bar) = &self.bar else {
            return;
        };
        bar.inc(n);
        if !self.shown.load(Ordering::Relaxed)
            && self.start.elapsed() >= SHOW_AFTER
            && !self.shown.swap(true, Ordering::Relaxed)
        {
            let visible = bars().add(bar.clone());
            visible.tick();
        }
    }

    /// Adds `n` units to the total (a term's resamples were extended).
    pub fn extend(&self, n: u64) {
        if let Some(bar) = &self.bar {
            bar.inc_length(n);
        }
    }

    /// Removes the bar from the terminal.
    pub fn finish(&self) {
        if let Some(bar) = &self.bar {
            bar.finish_and_clear();
            if self.shown.load(Ordering::Relaxed) {
                bars().remove(bar);
            }
        }
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        self.finish();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hidden_bars_draw_nothing_and_accept_work() {
        let p = Progress::new("test", 10, Visibility::Hidden);
        assert!(p.bar.is_none());
        p.advance(5);
        p.extend(10);
        p.finish();
        assert_eq!(Visibility::from_quiet(true), Visibility::Hidden);
        assert_eq!(Visibility::from_quiet(false), Visibility::Auto);
    }
}
