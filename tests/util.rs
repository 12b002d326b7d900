//! A small builder that runs the real binary in a temp dir, and the live Python reference.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::OnceLock;

/// A temporary working folder with helpers to write files and run panelready in it.
pub struct Workdir {
    pub dir: tempfile::TempDir,
}

/// What a run printed and returned.
pub struct Run {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

impl Workdir {
    pub fn new() -> Workdir {
        Workdir {
            dir: tempfile::tempdir().expect("temp dir"),
        }
    }

    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    pub fn write(&self, name: &str, text: &str) -> PathBuf {
        let p = self.path(name);
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).unwrap();
        }
        std::fs::write(&p, text).unwrap();
        p
    }

    /// A JSON file the run wrote (a bundle's report.json, say), parsed.
    pub fn json(&self, name: &str) -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(self.path(name)).unwrap()).unwrap()
    }

    /// `audit DATA --rules RULES --format json`, which must succeed, its report parsed.
    pub fn audit_json(&self, data: &str, rules: &str) -> serde_json::Value {
        let r = self.ok(&["audit", data, "--rules", rules, "--format", "json"]);
        serde_json::from_str(&r.stdout).unwrap()
    }

    pub fn run(&self, args: &[&str]) -> Run {
        self.run_with(args, &[])
    }

    /// [`Workdir::run`] with the environment variables `env` set.
    pub fn run_with(&self, args: &[&str], env: &[(&str, &str)]) -> Run {
        let out: Output = Command::new(env!("CARGO_BIN_EXE_panelready"))
            .args(args)
            .current_dir(self.dir.path())
            .env_remove("SOURCE_DATE_EPOCH")
            .envs(env.iter().copied())
            .output()
            .expect("run panelready");
        Run {
            code: out.status.code().unwrap_or(-1),
            stdout: String::from_utf8_lossy(&out.stdout).into(),
            stderr: String::from_utf8_lossy(&out.stderr).into(),
        }
    }

    /// Run and insist on success, showing everything printed when it fails.
    pub fn ok(&self, args: &[&str]) -> Run {
        let r = self.run(args);
        assert_eq!(
            r.code, 0,
            "panelready {args:?} failed\nstdout:\n{}\nstderr:\n{}",
            r.stdout, r.stderr
        );
        r
    }

    /// Run, insist on exit 2 with a one-line error containing `want`, and return it.
    pub fn fails(&self, args: &[&str], want: &str) -> String {
        self.fails_with(args, &[], want)
    }

    /// [`Workdir::fails`] with the environment variables `env` set.
    pub fn fails_with(&self, args: &[&str], env: &[(&str, &str)], want: &str) -> String {
        let r = self.run_with(args, env);
        assert_eq!(
            r.code, 2,
            "expected exit 2 for {args:?}\nstdout:\n{}\nstderr:\n{}",
            r.stdout, r.stderr
        );
        let line = r.stderr.trim_end();
        assert_eq!(line.lines().count(), 1, "error is not one line:\n{line}");
        assert!(line.starts_with("panelready: error: "), "{line}");
        assert!(line.contains(want), "error lacks {want:?}:\n{line}");
        line.to_string()
    }
}

/// The project root.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A Python with the pinned reference libraries: `PANELREADY_PYTHON` if set, otherwise a venv
/// created once under the target folder from tests/reference/requirements.txt. A missing
/// Python is a test failure, not a skip.
pub fn reference_python() -> &'static Path {
    static PYTHON: OnceLock<PathBuf> = OnceLock::new();
    PYTHON.get_or_init(|| {
        if let Some(p) = std::env::var_os("PANELREADY_PYTHON") {
            return PathBuf::from(p);
        }
        let req = root().join("tests/reference/requirements.txt");
        let text = std::fs::read_to_string(&req).expect("requirements.txt");
        let tag: u64 = text.bytes().fold(1469598103934665603u64, |h, b| {
            (h ^ b as u64).wrapping_mul(1099511628211)
        });
        let venv = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(format!("pyref-{tag:016x}"));
        let python = venv.join("bin/python");
        if !python.exists() {
            let status = Command::new("python3")
                .args(["-m", "venv"])
                .arg(&venv)
                .status()
                .expect("python3 is needed for the reference checks");
            assert!(status.success(), "creating the reference venv failed");
            let status = Command::new(&python)
                .args(["-m", "pip", "install", "--quiet", "-r"])
                .arg(&req)
                .status()
                .expect("pip");
            assert!(
                status.success(),
                "installing the pinned reference libraries failed"
            );
        }
        python
    })
}

/// Run a reference script; fail the test with its output unless it exits 0.
pub fn run_reference(script: &str, args: &[&Path]) -> String {
    let out = Command::new(reference_python())
        .arg(root().join("tests/reference").join(script))
        .args(args)
        .output()
        .expect("run reference script");
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.status.success(), "{script} found mismatches:\n{text}");
    text
}

/// The properties' runs: `cases` cases from a fixed seed, so that every run of the tests (CI's
/// too) tries the same cases and a failure can be run again; `PROPTEST_RNG_SEED=N` tries
/// others.
pub fn proptest_config(cases: u32) -> proptest::test_runner::Config {
    use proptest::test_runner::{Config, RngSeed};
    let default = Config::default();
    let rng_seed = match default.rng_seed {
        RngSeed::Random => RngSeed::Fixed(20_261_204),
        chosen => chosen,
    };
    Config {
        cases,
        rng_seed,
        ..default
    }
}
