//! Progress on stderr for the long stages (load, derive, each check family, write): a
//! spinner with the stage's name, shown only when stderr is a terminal and `--quiet` is not
//! set, so logs and pipes stay clean; and, with `--timings`, the wall time of each stage on
//! stderr at the end.

use std::cell::RefCell;
use std::io::IsTerminal;
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressStyle};

/// A stage spinner, or nothing.
pub struct Progress {
    bar: Option<ProgressBar>,
    /// Stages begun so far, when timings were asked for.
    stages: Option<RefCell<Vec<(String, Instant)>>>,
}

impl Progress {
    /// A spinner when stderr is a terminal and `quiet` is false; with `timings`, a table of
    /// each stage's wall time on stderr when the run ends.
    pub fn new(quiet: bool, timings: bool) -> Progress {
        let stages = timings.then(|| RefCell::new(Vec::new()));
        if quiet || !std::io::stderr().is_terminal() {
            return Progress { bar: None, stages };
        }
        let bar = ProgressBar::new_spinner();
        bar.set_style(
            ProgressStyle::with_template("{spinner} {msg} ({elapsed})")
                .unwrap_or_else(|_| ProgressStyle::default_spinner()),
        );
        bar.enable_steady_tick(Duration::from_millis(120));
        Progress {
            bar: Some(bar),
            stages,
        }
    }

    /// Name the stage now running (it ends when the next begins).
    pub fn stage(&self, name: &str) {
        if let Some(bar) = &self.bar {
            bar.set_message(name.to_string());
        }
        if let Some(stages) = &self.stages {
            stages.borrow_mut().push((name.to_string(), Instant::now()));
        }
    }

    /// The wall time of each stage, in order, ending now.
    pub fn timings(&self) -> Vec<(String, Duration)> {
        let Some(stages) = &self.stages else {
            return Vec::new();
        };
        let stages = stages.borrow();
        let end = Instant::now();
        stages
            .iter()
            .enumerate()
            .map(|(i, (name, start))| {
                let next = stages.get(i + 1).map_or(end, |(_, t)| *t);
                (name.clone(), next - *start)
            })
            .collect()
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        if let Some(bar) = &self.bar {
            bar.finish_and_clear();
        }
        let timings = self.timings();
        if !timings.is_empty() {
            let total: Duration = timings.iter().map(|(_, d)| *d).sum();
            let mut text = String::from("panelready: wall time by stage\n");
            for (name, d) in &timings {
                text.push_str(&format!("{:>9.3} s  {name}\n", d.as_secs_f64()));
            }
            text.push_str(&format!("{:>9.3} s  total\n", total.as_secs_f64()));
            eprint!("{text}");
        }
    }
}
