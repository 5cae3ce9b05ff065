//! The plan's progress bar on stderr, behind one small type so that it can later be
//! pointed at the shared progress helper of `resample` without touching the simulation
//! loop.
//!
//! Hidden when stderr is not a terminal or with `--quiet`; never affects results.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;

/// A progress indicator counting finished simulations.
pub struct Progress {
    bar: ProgressBar,
}

/// A bar for `total` simulations labelled `label`, hidden when `quiet` or when stderr
/// is not a terminal.
pub fn progress(total: u64, quiet: bool, label: &str) -> Progress {
    if quiet || !std::io::stderr().is_terminal() {
        return Progress { bar: ProgressBar::hidden() };
    }
    let bar = ProgressBar::with_draw_target(Some(total), ProgressDrawTarget::stderr());
    if let Ok(style) =
        ProgressStyle::with_template("{msg} [{bar:30}] {pos}/{len} simulations, {elapsed} (about {eta} left)")
    {
        bar.set_style(style.progress_chars("=> "));
    }
    bar.set_message(label.to_string());
    Progress { bar }
}

impl Progress {
    /// A progress indicator that shows nothing (library callers, tests).
    pub fn hidden() -> Progress {
        Progress { bar: ProgressBar::hidden() }
    }

    /// `k` more simulations finished.
    pub fn inc(&self, k: u64) {
        self.bar.inc(k);
    }

    /// Removes the bar.
    pub fn finish(&self) {
        self.bar.finish_and_clear();
    }
}
