//! The `panelready` binary: hands its arguments to the library and exits with its code.
//!
//! A panic anywhere is a bug: it becomes one line on stderr and exit code 3, never a backtrace.

use std::panic;

/// The allocator: the checks allocate and free a column-sized buffer per variable, and the
/// engine many more; the system allocator hands each back to the kernel and faults it in
/// again, which cost about a quarter of the time at 10 million rows.
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

/// Turn transparent huge pages off for this process (Linux). The allocator asks the kernel for
/// huge pages on its large regions, and each first touch of one zeroes 2 MiB at once. On the
/// bench machine (a 2-core virtual machine whose balloon device reports free memory to its
/// host, which must then back such blocks afresh) a 10 M-row `build` took 19.5–22.0 s with
/// 16–20 s of system time with them, 10.0–10.4 s with 2.3–2.8 s without, for about as many
/// bytes zeroed. On a kernel without the setting the call fails and is ignored: the run keeps
/// the kernel's default.
fn small_pages_only() {
    #[cfg(target_os = "linux")]
    let _ = rustix::thread::disable_transparent_huge_pages(true);
}

/// The engine's setting for how many values one task of its Parquet reader decodes.
const DECODE_TARGET: &str = "POLARS_PARQUET_DECODE_TARGET_VALUES_PER_THREAD";

/// Have the engine decode a Parquet row group's columns in parallel. By default one task
/// decodes about 16.7 million values, so a row group of a million rows (pyarrow's default,
/// and each slice the reader takes: `load::contiguous`) is decoded column after column on
/// one core. At about a million values a task, each column of such a row group is a task of
/// its own: reading the 10 M bench panel took 1.07–1.10 s against 1.62–2.37 s in three
/// alternating pairs, the 1 M one (a single row group) 0.12–0.135 s against 0.18–0.20 s in
/// four. Set before any thread starts (the engine reads it when it plans a read); a value the
/// user set is kept, if it is a whole number (the engine would stop on any other with an
/// internal error): else the error to report.
fn decode_columns_in_parallel() -> Result<(), panelready::Error> {
    match std::env::var_os(DECODE_TARGET) {
        None => {
            std::env::set_var(DECODE_TARGET, (1usize << 20).to_string());
            Ok(())
        }
        Some(v) if v.to_str().is_some_and(|v| v.parse::<usize>().is_ok()) => Ok(()),
        Some(value) => Err(panelready::Error::Environment {
            variable: DECODE_TARGET,
            value,
            message: "not a whole number of values",
        }),
    }
}

/// The engine's warnings on stderr, but for its notices of deprecation: they tell the tool's
/// developers that a call will change in a later engine version (a correction's text cast to
/// a time of day or a duration may print one; dates and dates with times are taken apart by
/// expressions, without the cast), which the user can do nothing about.
fn engine_warnings_for_users() {
    use polars::error::{set_warning_function, PolarsWarning};
    fn warn(message: &str, kind: PolarsWarning) {
        if !matches!(kind, PolarsWarning::Deprecation) {
            eprintln!("panelready: engine warning: {}", message.replace('\n', " "));
        }
    }
    set_warning_function(warn);
}

/// The exit code of a run that ended in a panic (an internal error).
const PANIC_EXIT: i32 = 3;

fn main() {
    small_pages_only();
    engine_warnings_for_users();
    if let Err(err) = decode_columns_in_parallel() {
        eprintln!("panelready: error: {err}");
        std::process::exit(err.code());
    }
    panic::set_hook(Box::new(|info| {
        let what = info
            .payload()
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| info.payload().downcast_ref::<String>().cloned())
            .unwrap_or_else(|| "unknown cause".to_string());
        let place = info
            .location()
            .map(|l| format!(" at {}:{}", l.file(), l.line()))
            .unwrap_or_default();
        let line = format!("{what}{place}").replace('\n', " ");
        eprintln!("panelready: internal error (a bug, please report it): {line}");
    }));
    let code = panic::catch_unwind(|| panelready::run(std::env::args_os())).unwrap_or(PANIC_EXIT);
    std::process::exit(code);
}
