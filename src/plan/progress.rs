//! The plan's progress bar: the shared resampling progress helper counting simulations.
//!
//! Hidden when stderr is not a terminal or with `--quiet`; never affects results.

use crate::resample::progress::{Progress as Bar, Visibility};

/// A progress indicator counting finished simulations.
pub struct Progress {
    bar: Bar,
}

/// A bar for `total` simulations labelled `label`, hidden when `quiet` or when stderr
/// is not a terminal (shown once the work has lasted about a second).
pub fn progress(total: u64, quiet: bool, label: &str) -> Progress {
    Progress { bar: Bar::counting(label, "simulations", total, Visibility::from_quiet(quiet)) }
}

impl Progress {
    /// A progress indicator that shows nothing (library callers, tests).
    pub fn hidden() -> Progress {
        Progress { bar: Bar::counting("", "simulations", 0, Visibility::Hidden) }
    }

    /// `k` more simulations finished.
    pub fn inc(&self, k: u64) {
        self.bar.advance(k);
    }

    /// Removes the bar.
    pub fn finish(&self) {
        self.bar.finish();
    }
}
