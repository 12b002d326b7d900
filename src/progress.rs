//! Progress on stderr for the long stages (load, derive, each check family, write): a
//! spinner with the stage's name and its time so far, and for the checks that go through the
//! variables a few at a time, a bar with the variables done, the total and the time left.
//! Shown only when stderr is a terminal and `--quiet` is not set, so logs and pipes stay
//! clean; and, with `--timings`, the wall time of each stage on stderr at the end.

use std::io::IsTerminal;
use std::sync::Mutex;
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressStyle};

/// A stage spinner, or nothing.
pub struct Progress {
    bar: Option<ProgressBar>,
    /// Stages begun so far, when timings were asked for.
    stages: Option<Mutex<Vec<(String, Instant)>>>,
}

impl Progress {
    /// A spinner when stderr is a terminal and `quiet` is false; with `timings`, a table of
    /// each stage's wall time on stderr when the run ends.
    pub fn new(quiet: bool, timings: bool) -> Progress {
        let stages = timings.then(|| Mutex::new(Vec::new()));
        if quiet || !std::io::stderr().is_terminal() {
            return Progress { bar: None, stages };
        }
        let bar = ProgressBar::new_spinner();
        bar.set_style(spinner());
        bar.enable_steady_tick(Duration::from_millis(120));
        Progress {
            bar: Some(bar),
            stages,
        }
    }

    /// Name the stage now running (it ends when the next begins).
    pub fn stage(&self, name: &str) {
        if let Some(bar) = &self.bar {
            bar.set_style(spinner());
            bar.set_length(0);
            bar.set_position(0);
            bar.reset_elapsed();
            bar.reset_eta();
            bar.set_message(name.to_string());
        }
        if let Some(stages) = &self.stages {
            if let Ok(mut stages) = stages.lock() {
                stages.push((name.to_string(), Instant::now()));
            }
        }
    }

    /// The running stage goes through `total` items (variables): show a bar from now on.
    pub fn items(&self, total: usize) {
        self.items_of(total, "variables");
    }

    /// The running stage goes through `total` items, each one `unit` (plural): show a bar
    /// from now on.
    pub fn items_of(&self, total: usize, unit: &str) {
        if let Some(bar) = &self.bar {
            bar.set_length(total as u64);
            bar.set_position(0);
            bar.reset_eta();
            bar.set_style(
                ProgressStyle::with_template(&format!(
                    "{{spinner}} {{msg}} [{{bar:24}}] {{pos}}/{{len}} {unit}, {{eta}} left ({{elapsed}})"
                ))
                .map(|s| s.progress_chars("=> "))
                .unwrap_or_else(|_| spinner()),
            );
        }
    }

    /// `n` more items of the running stage are done.
    pub fn done(&self, n: usize) {
        if let Some(bar) = &self.bar {
            bar.inc(n as u64);
        }
    }

    /// The wall time of each stage, in order, ending now.
    pub fn timings(&self) -> Vec<(String, Duration)> {
        let Some(stages) = &self.stages else {
            return Vec::new();
        };
        let Ok(stages) = stages.lock() else {
            return Vec::new();
        };
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

/// The spinner of a stage without a count.
fn spinner() -> ProgressStyle {
    ProgressStyle::with_template("{spinner} {msg} ({elapsed})")
        .unwrap_or_else(|_| ProgressStyle::default_spinner())
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
