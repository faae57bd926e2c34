//! Progress on a terminal: a bar on standard error when it is a terminal
//! and `--quiet` is not given; nothing when piped.

use std::io::IsTerminal;

/// A progress indicator that may be invisible.
pub struct Progress {
    bar: Option<indicatif::ProgressBar>,
}

impl Progress {
    /// A bar of `len` steps labelled `message`; hidden when `quiet` or when
    /// standard error is not a terminal.
    pub fn new(len: u64, message: &str, quiet: bool) -> Progress {
        if quiet || !std::io::stderr().is_terminal() {
            return Progress { bar: None };
        }
        let bar = indicatif::ProgressBar::new(len);
        if let Ok(style) =
            indicatif::ProgressStyle::with_template("{msg:>12} [{bar:30}] {pos}/{len} ({elapsed})")
        {
            bar.set_style(style.progress_chars("=> "));
        }
        bar.set_message(message.to_string());
        Progress { bar: Some(bar) }
    }

    /// Advances by `n` steps.
    pub fn inc(&self, n: u64) {
        if let Some(b) = &self.bar {
            b.inc(n);
        }
    }

    /// Replaces the bar's label (e.g. a running count).
    pub fn set_message(&self, message: String) {
        if let Some(b) = &self.bar {
            b.set_message(message);
        }
    }

    /// Removes the bar.
    pub fn finish(&self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}
