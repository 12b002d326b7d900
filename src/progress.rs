//! Progress on stderr for the long stages (load, derive, each check family, write): a
//! spinner with the stage's name, shown only when stderr is a terminal and `--quiet` is not
//! set, so logs and pipes stay clean.

use std::io::IsTerminal;
use std::time::Duration;

use indicatif::{ProgressBar, ProgressStyle};

/// A stage spinner, or nothing.
pub struct Progress {
    bar: Option<ProgressBar>,
}

impl Progress {
    /// A spinner when stderr is a terminal and `quiet` is false.
    pub fn new(quiet: bool) -> Progress {
        if quiet || !std::io::stderr().is_terminal() {
            return Progress { bar: None };
        }
        let bar = ProgressBar::new_spinner();
        bar.set_style(
            ProgressStyle::with_template("{spinner} {msg} ({elapsed})")
                .unwrap_or_else(|_| ProgressStyle::default_spinner()),
        );
        bar.enable_steady_tick(Duration::from_millis(120));
        Progress { bar: Some(bar) }
    }

    /// Name the stage now running.
    pub fn stage(&self, name: &str) {
        if let Some(bar) = &self.bar {
            bar.set_message(name.to_string());
        }
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        if let Some(bar) = &self.bar {
            bar.finish_and_clear();
        }
    }
}
