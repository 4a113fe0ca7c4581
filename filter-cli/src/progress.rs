//! Progress lines on stderr, shown only when stderr is a terminal (never in pipes, logs or
//! tests), so that redirected output stays clean.

use std::io::{IsTerminal, Write};

/// A counter for a long loop, redrawn on one stderr line.
pub struct Progress {
    label: &'static str,
    total: usize,
    enabled: bool,
}

impl Progress {
    /// A counter of `total` steps; silent unless stderr is a terminal and there is more than
    /// one step.
    pub fn new(label: &'static str, total: usize) -> Self {
        Progress {
            label,
            total,
            enabled: total > 1 && std::io::stderr().is_terminal(),
        }
    }

    /// Show that step `i` (0-based) of the total, named `what`, is under way.
    pub fn step(&self, i: usize, what: &str) {
        if self.enabled {
            let mut e = std::io::stderr().lock();
            let _ = write!(e, "\r\x1b[K{} {}/{} {what}", self.label, i + 1, self.total);
            let _ = e.flush();
        }
    }

    /// Clear the line.
    pub fn finish(&self) {
        if self.enabled {
            let mut e = std::io::stderr().lock();
            let _ = write!(e, "\r\x1b[K");
            let _ = e.flush();
        }
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        self.finish();
    }
}
