//! A one-line progress display on stderr, drawn only when stderr is a terminal.

use std::io::{IsTerminal, Write};
use std::sync::Mutex;
use std::time::{Duration, Instant};

/// Redraws at most every 100 ms so a fast search is not slowed by the terminal.
const REDRAW: Duration = Duration::from_millis(100);

pub struct Progress {
    enabled: bool,
    last: Mutex<Option<Instant>>,
}

impl Progress {
    pub fn new() -> Progress {
        Progress {
            enabled: std::io::stderr().is_terminal() && crate::verbosity() > 0,
            last: Mutex::new(None),
        }
    }

    /// Shows the state of the search proving `label`.
    pub fn boxes(&self, label: &str, boxes: usize, open: usize) {
        if !self.enabled {
            return;
        }
        let mut last = self.last.lock().unwrap_or_else(|e| e.into_inner());
        if last.is_some_and(|t| t.elapsed() < REDRAW) {
            return;
        }
        *last = Some(Instant::now());
        let mut short: String = label.chars().take(48).collect();
        if label.chars().count() > 48 {
            short.push('…');
        }
        let mut err = std::io::stderr().lock();
        let _ = write!(
            err,
            "\r\x1b[2K  proving {short}: {boxes} boxes, {open} open"
        );
        let _ = err.flush();
    }

    /// Clears the line.
    pub fn finish(&self) {
        if self.enabled && self.last.lock().map(|l| l.is_some()).unwrap_or(false) {
            let _ = write!(std::io::stderr(), "\r\x1b[2K");
        }
    }
}
