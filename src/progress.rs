//! Progress on stderr for the long stages (load, derive, each check family, write): a
//! spinner with the stage's name and its time so far, and for the checks that go through the
//! variables a few at a time, a bar with the variables done, the total and the time left.
//! Shown only when stderr is a terminal and `--quiet` is not set, so logs and pipes stay
//! clean; and, with `--timings`, a table on stderr at the end: each stage's wall time and, on
//! Linux, the processor time the process spent in it (all threads, and the kernel's part of
//! it) and the resident-memory peak reached by its end.

use std::io::IsTerminal;
use std::sync::Mutex;
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressStyle};

/// A stage spinner, or nothing.
pub struct Progress {
    bar: Option<ProgressBar>,
    /// Stages begun so far, when timings were asked for.
    stages: Option<Mutex<Vec<(String, Mark)>>>,
}

/// Where the run stood when a stage began (or the run ended).
#[derive(Debug, Clone, Copy)]
struct Mark {
    at: Instant,
    usage: Option<Usage>,
}

impl Mark {
    fn now() -> Mark {
        Mark {
            at: Instant::now(),
            usage: Usage::now(),
        }
    }
}

/// The process's processor time so far and its resident-memory peak, as Linux reports them.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Usage {
    /// Seconds on a processor in user mode, every thread.
    user: f64,
    /// Seconds on a processor in the kernel on the process's behalf (page faults, I/O).
    system: f64,
    /// The largest resident set so far, bytes.
    peak: u64,
}

impl Usage {
    /// Read from /proc/self (proc(5): `stat` fields 14 and 15, `utime` and `stime`, in clock
    /// ticks; `status`'s `VmHWM` in kB). None where there is no such file.
    fn now() -> Option<Usage> {
        let stat = std::fs::read_to_string("/proc/self/stat").ok()?;
        let status = std::fs::read_to_string("/proc/self/status").ok()?;
        Usage::parse(&stat, &status)
    }

    /// [`Usage::now`] from the two files' text.
    fn parse(stat: &str, status: &str) -> Option<Usage> {
        // The command name (field 2) is in parentheses and may hold spaces: count the fields
        // after its closing one, which is field 3.
        let after = stat.get(stat.rfind(')')? + 1..)?;
        let field = |n: usize| -> Option<f64> { after.split_whitespace().nth(n - 3)?.parse().ok() };
        let peak_kb: u64 = status
            .lines()
            .find_map(|l| l.strip_prefix("VmHWM:"))?
            .split_whitespace()
            .next()?
            .parse()
            .ok()?;
        Some(Usage {
            user: field(14)? / CLOCK_TICKS,
            system: field(15)? / CLOCK_TICKS,
            peak: peak_kb * 1024,
        })
    }
}

/// Clock ticks per second of /proc's times: the kernel's USER_HZ, 100 on x86, ARM and the
/// other architectures in common use (common practice; asking `sysconf` would need `unsafe`,
/// which the crate forbids; `tests/reference/usage.py` holds the result to getrusage(2)).
const CLOCK_TICKS: f64 = 100.0;

/// One stage's figures in `--timings`.
#[derive(Debug, Clone)]
pub struct StageTime {
    /// The stage.
    pub name: String,
    /// Its wall time.
    pub wall: Duration,
    /// Processor seconds (user, kernel) spent in it, where known.
    pub cpu: Option<(f64, f64)>,
    /// The resident-memory peak by its end, bytes, where known.
    pub peak: Option<u64>,
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
                stages.push((name.to_string(), Mark::now()));
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
                    "{{spinner}} {{msg}} [{{bar:24}}] {{human_pos}}/{{human_len}} {unit}, {{eta}} left ({{elapsed}})"
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

    /// Each stage's figures, in order, the last ending now.
    pub fn timings(&self) -> Vec<StageTime> {
        let Some(stages) = &self.stages else {
            return Vec::new();
        };
        let Ok(stages) = stages.lock() else {
            return Vec::new();
        };
        let end = Mark::now();
        stages
            .iter()
            .enumerate()
            .map(|(i, (name, start))| {
                let next = stages.get(i + 1).map_or(end, |(_, m)| *m);
                let (cpu, peak) = match (start.usage, next.usage) {
                    (Some(a), Some(b)) => (
                        Some(((b.user - a.user).max(0.0), (b.system - a.system).max(0.0))),
                        Some(b.peak),
                    ),
                    _ => (None, None),
                };
                StageTime {
                    name: name.clone(),
                    wall: next.at - start.at,
                    cpu,
                    peak,
                }
            })
            .collect()
    }
}

/// The `--timings` table: a line per stage and a total.
fn table(timings: &[StageTime]) -> String {
    let secs = |x: Option<f64>| x.map_or_else(|| "-".to_string(), |x| format!("{x:.2}"));
    let mib = |x: Option<u64>| x.map_or_else(|| "-".to_string(), |x| format!("{}", x >> 20));
    let mut text = String::from(
        "panelready: time by stage\n      wall s  processor s  kernel s  peak MiB  stage\n",
    );
    let line = |wall: f64, cpu: Option<(f64, f64)>, peak: Option<u64>, name: &str| {
        format!(
            "{wall:>11.3}  {:>11}  {:>8}  {:>8}  {name}\n",
            secs(cpu.map(|(u, k)| u + k)),
            secs(cpu.map(|(_, k)| k)),
            mib(peak),
        )
    };
    for t in timings {
        text.push_str(&line(t.wall.as_secs_f64(), t.cpu, t.peak, &t.name));
    }
    let wall: Duration = timings.iter().map(|t| t.wall).sum();
    let cpu = timings
        .iter()
        .map(|t| t.cpu)
        .try_fold((0.0, 0.0), |(u, k), c| c.map(|(cu, ck)| (u + cu, k + ck)));
    let peak = timings.last().and_then(|t| t.peak);
    text.push_str(&line(wall.as_secs_f64(), cpu, peak, "total"));
    text
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
            eprint!("{}", table(&timings));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The fields as proc(5) lays them out: a command name that holds a space and a closing
    /// parenthesis does not shift them; times in clock ticks, the peak in kB.
    #[test]
    fn usage_is_read_past_the_command_name() {
        let stat = "4242 (pan el) (x)) R 1 4242 4242 0 -1 4194304 5000 0 12 0 250 75 3 1 20 0 \
                    3 0 100 123456789 2048 18446744073709551615";
        let status =
            "Name:\tpanelready\nVmPeak:\t 999999 kB\nVmHWM:\t    2048 kB\nVmRSS:\t 1024 kB\n";
        let u = Usage::parse(stat, status).expect("parsed");
        assert_eq!(
            u,
            Usage {
                user: 2.5,
                system: 0.75,
                peak: 2 << 20
            }
        );
        assert_eq!(Usage::parse("4242 (x) R 1 2", status), None);
        assert_eq!(Usage::parse(stat, "Name:\tx\n"), None);
    }

    /// The table: a line per stage, the total adding the stages' times and taking the last
    /// peak; "-" where the figures are unknown.
    #[test]
    fn the_table_adds_the_stages() {
        let stage = |name: &str, ms: u64, cpu: Option<(f64, f64)>, peak: Option<u64>| StageTime {
            name: name.into(),
            wall: Duration::from_millis(ms),
            cpu,
            peak,
        };
        let text = table(&[
            stage("reading", 1500, Some((2.0, 0.5)), Some(300 << 20)),
            stage("writing", 250, Some((0.25, 0.0)), Some(400 << 20)),
        ]);
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(
            lines[2].split_whitespace().collect::<Vec<_>>(),
            ["1.500", "2.50", "0.50", "300", "reading"]
        );
        assert_eq!(
            lines[4].split_whitespace().collect::<Vec<_>>(),
            ["1.750", "2.75", "0.50", "400", "total"]
        );
        let unknown = table(&[stage("reading", 10, None, None)]);
        assert_eq!(
            unknown
                .lines()
                .nth(2)
                .unwrap()
                .split_whitespace()
                .collect::<Vec<_>>(),
            ["0.010", "-", "-", "-", "reading"]
        );
    }
}
