//! Running the binary and reading what it printed.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

/// What one run of the binary produced.
#[derive(Debug)]
pub struct Run {
    /// The exit code (-1 when killed by a signal).
    pub code: i32,
    /// Standard output.
    pub stdout: String,
    /// Standard error.
    pub stderr: String,
    /// The command line, for messages.
    pub args: Vec<String>,
}

impl Run {
    /// Require exit code 0 and return stdout.
    pub fn ok(&self) -> &str {
        assert_eq!(
            self.code, 0,
            "{:?} failed with {}:\n--- stdout\n{}\n--- stderr\n{}",
            self.args, self.code, self.stdout, self.stderr
        );
        &self.stdout
    }

    /// Require success and parse stdout as one JSON value.
    pub fn json(&self) -> Value {
        let out = self.ok();
        match serde_json::from_str(out) {
            Ok(v) => v,
            Err(e) => panic!("{:?}: stdout is not JSON ({e}):\n{out}", self.args),
        }
    }

    /// Require a bad-input failure: exit code 2, a first stderr line `error: …`, at most two
    /// further lines (hints), nothing on stdout, and no panic message.
    pub fn bad_input(&self) -> &str {
        self.failure(2)
    }

    /// Require an I/O failure (exit code 1) in the same shape.
    pub fn io_failure(&self) -> &str {
        self.failure(1)
    }

    fn failure(&self, code: i32) -> &str {
        assert_eq!(
            self.code, code,
            "{:?} should exit {code}:\n--- stdout\n{}\n--- stderr\n{}",
            self.args, self.stdout, self.stderr
        );
        let lines: Vec<&str> = self.stderr.lines().collect();
        assert!(
            lines.first().is_some_and(|l| l.starts_with("error: ")),
            "{:?}: first stderr line is not 'error: …':\n{}",
            self.args,
            self.stderr
        );
        assert!(
            lines.len() <= 3,
            "{:?}: more than one error line and two hints:\n{}",
            self.args,
            self.stderr
        );
        for l in &lines[1..] {
            assert!(
                l.starts_with("hint: "),
                "{:?}: stray stderr line {l:?}",
                self.args
            );
        }
        assert!(
            !self.stderr.contains("panicked") && !self.stderr.contains("RUST_BACKTRACE"),
            "{:?}: panic:\n{}",
            self.args,
            self.stderr
        );
        assert!(
            self.stdout.is_empty(),
            "{:?}: stdout on failure:\n{}",
            self.args,
            self.stdout
        );
        lines[0]
    }
}

/// Run `xtal-ladder args…` in `dir`.
pub fn run_in(dir: &Path, args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_xtal-ladder"))
        .args(args)
        .current_dir(dir)
        .env_remove("RUST_BACKTRACE")
        .output()
        .unwrap_or_else(|e| panic!("cannot run xtal-ladder: {e}"));
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
        args: args.iter().map(|s| s.to_string()).collect(),
    }
}

/// Run in a fresh temporary directory, returned with the run so files can be inspected.
pub fn run(args: &[&str]) -> (Run, tempfile::TempDir) {
    let dir = tempdir();
    let r = run_in(dir.path(), args);
    (r, dir)
}

/// A fresh temporary directory.
pub fn tempdir() -> tempfile::TempDir {
    tempfile::tempdir().unwrap_or_else(|e| panic!("tempdir: {e}"))
}

/// A file of the workspace's `examples/` folder, as an absolute path string.
pub fn example(name: &str) -> String {
    examples_dir().join(name).display().to_string()
}

/// The workspace's `examples/` folder.
pub fn examples_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../examples")
}

/// A number from a JSON value, with a clear failure.
pub fn num(v: &Value, what: &str) -> f64 {
    v.as_f64()
        .unwrap_or_else(|| panic!("{what} is not a number: {v}"))
}

/// Relative difference |a − b| / |b|.
pub fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

/// The true parameters of the demo lot (examples/demo-crystals-true.csv):
/// (id, fs_hz, rm_ohm, lm_h, cm_f, c0_f).
pub fn true_lot() -> Vec<(String, [f64; 5])> {
    let text = std::fs::read_to_string(examples_dir().join("demo-crystals-true.csv"))
        .unwrap_or_else(|e| panic!("demo-crystals-true.csv: {e}"));
    text.lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("id,"))
        .map(|l| {
            let c: Vec<&str> = l.split(',').collect();
            let v = |i: usize| -> f64 { c[i].parse().unwrap_or_else(|e| panic!("{l}: {e}")) };
            (c[0].to_string(), [v(1), v(2), v(3), v(4), v(5)])
        })
        .collect()
}
