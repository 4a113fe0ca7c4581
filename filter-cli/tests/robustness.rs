//! The real binary against a corpus of bad inputs (`tests/data/bad/` at the workspace root).
//!
//! Every bad input must give exit code 2 with a one-line `error: …` on stderr (at most two
//! `hint: …` lines after it), no panic message or backtrace, nothing unusable on stdout, and
//! must leave every input file byte for byte as it was. A missing file gives exit code 1 in the
//! same shape. The corpus, by directory:
//!
//! - `fit/`: sweep CSV and Touchstone files, run as `fit FILE`;
//! - `batch/`: batch files, run as `match FILE --count 4` and `design --crystals FILE …`;
//! - `design/`: design records, run as `analyze`, `netlist`, `touchstone -o`, `parts`,
//!   `yield` and `report -o`;
//! - `args/`: whole command lines, one argument per line, `{tmp}` standing for a scratch
//!   directory that holds valid copies `x01.csv` (a sweep), `batch.csv` and `design.json`;
//!   these cover bad command-line values and outputs aimed at an input;
//! - `fuzz/`: inputs the fuzz targets once crashed on (see `tests/tests/
//!   robustness_fuzz_regressions.rs`); some are valid enough to succeed, so here any exit code
//!   of 0, 1 or 2 is accepted, in the shape above, with no NaN printed.

use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// A run that has not ended after this long is a hang (a debug build analyses a design in well
/// under a second; this only keeps a hang from blocking the suite).
const HANG: Duration = Duration::from_secs(120);

fn workspace() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("filter-cli sits in the workspace")
        .to_path_buf()
}

fn bad_dir() -> PathBuf {
    workspace().join("tests/data/bad")
}

fn files(sub: &str) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = fs::read_dir(bad_dir().join(sub))
        .unwrap_or_else(|e| panic!("tests/data/bad/{sub}: {e}"))
        .map(|e| e.expect("directory entry").path())
        .filter(|p| p.is_file())
        .collect();
    v.sort();
    v
}

struct Outcome {
    code: Option<i32>,
    stdout: String,
    stderr: String,
}

fn run(args: &[String], cwd: &Path) -> Outcome {
    let mut child = Command::new(env!("CARGO_BIN_EXE_xtal-ladder"))
        .args(args)
        .current_dir(cwd)
        .env_remove("RUST_BACKTRACE")
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the binary starts");
    let start = Instant::now();
    loop {
        match child.try_wait().expect("wait") {
            Some(_) => break,
            None if start.elapsed() > HANG => {
                let _ = child.kill();
                break;
            }
            None => std::thread::sleep(Duration::from_millis(5)),
        }
    }
    let out = child.wait_with_output().expect("output");
    Outcome {
        code: out.status.code(),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// What an outcome is allowed to be.
#[derive(Clone, Copy, PartialEq)]
enum Expect {
    /// Exit 2, bad input.
    BadInput,
    /// Exit 1, a file that cannot be read.
    Missing,
    /// Exit 0, 1 or 2 (a fuzz regression input).
    Clean,
}

/// The problems with one outcome; empty when it is as promised.
fn judge(o: &Outcome, expect: Expect) -> Vec<String> {
    let mut problems = Vec::new();
    let code = o.code;
    let ok_code = match expect {
        Expect::BadInput => code == Some(2),
        Expect::Missing => code == Some(1),
        Expect::Clean => matches!(code, Some(0..=2)),
    };
    if !ok_code {
        problems.push(format!("exit code {code:?}"));
    }
    for marker in ["panicked", "RUST_BACKTRACE", "stack backtrace"] {
        if o.stderr.contains(marker) {
            problems.push(format!("stderr has '{marker}'"));
        }
    }
    if o.stdout.contains("NaN") {
        problems.push("stdout has NaN".into());
    }
    if code != Some(0) {
        let lines: Vec<&str> = o.stderr.lines().collect();
        if !lines.first().is_some_and(|l| l.starts_with("error: ")) {
            problems.push("the first stderr line is not 'error: …'".into());
        }
        if lines.len() > 3 || !lines.iter().skip(1).all(|l| l.starts_with("hint: ")) {
            problems.push(format!(
                "stderr is not one error line and at most two hints ({} lines)",
                lines.len()
            ));
        }
        if !o.stdout.trim().is_empty() {
            problems.push("a failed run printed to stdout".into());
        }
    }
    problems
}

/// The scratch directory for `args/` cases, with valid copies of a sweep, a batch file and a
/// design.
fn scratch() -> tempfile::TempDir {
    let dir = tempfile::tempdir().expect("temp dir");
    let ex = workspace().join("examples");
    for (from, to) in [
        ("sweeps/x01.csv", "x01.csv"),
        ("demo-batch.csv", "batch.csv"),
        ("demo-design.json", "design.json"),
    ] {
        fs::copy(ex.join(from), dir.path().join(to)).expect("copy an example");
    }
    dir
}

/// The bytes of every file in `paths`, to compare after a run.
fn snapshot(paths: &[PathBuf]) -> Vec<(PathBuf, Vec<u8>)> {
    paths
        .iter()
        .map(|p| (p.clone(), fs::read(p).expect("read an input")))
        .collect()
}

fn unchanged(before: &[(PathBuf, Vec<u8>)]) -> Vec<String> {
    before
        .iter()
        .filter(|(p, bytes)| fs::read(p).ok().as_ref() != Some(bytes))
        .map(|(p, _)| format!("{} changed", p.display()))
        .collect()
}

fn s(x: &str) -> String {
    x.to_string()
}

fn path(p: &Path) -> String {
    p.to_string_lossy().into_owned()
}

/// The command lines that read `file`, by corpus directory.
fn commands(kind: &str, file: &Path, out_dir: &Path) -> Vec<Vec<String>> {
    let f = path(file);
    match kind {
        "fit" => vec![vec![s("fit"), f]],
        "batch" => vec![
            vec![s("match"), f.clone(), s("--count"), s("4")],
            vec![
                s("design"),
                s("--crystals"),
                f,
                s("--family"),
                s("butterworth"),
                s("--order"),
                s("4"),
                s("--bandwidth"),
                s("2.4k"),
            ],
        ],
        "design" => vec![
            vec![s("analyze"), f.clone()],
            vec![s("netlist"), f.clone()],
            vec![
                s("touchstone"),
                f.clone(),
                s("-o"),
                path(&out_dir.join("out.s2p")),
            ],
            vec![s("parts"), f.clone()],
            vec![s("yield"), f.clone(), s("--trials"), s("20")],
            vec![
                s("report"),
                f,
                s("--trials"),
                s("0"),
                s("-o"),
                path(&out_dir.join("report.html")),
            ],
        ],
        _ => unreachable!(),
    }
}

/// Run one corpus directory; returns the failures.
fn run_dir(kind: &str) -> (usize, Vec<String>) {
    let out = tempfile::tempdir().expect("temp dir");
    let mut failures = Vec::new();
    let corpus = files(kind);
    for file in &corpus {
        for args in commands(kind, file, out.path()) {
            let before = snapshot(std::slice::from_ref(file));
            let o = run(&args, out.path());
            let mut problems = judge(&o, Expect::BadInput);
            problems.extend(unchanged(&before));
            if !problems.is_empty() {
                failures.push(format!(
                    "{args:?}: {}\n  stderr: {}",
                    problems.join("; "),
                    o.stderr.trim()
                ));
            }
        }
    }
    (corpus.len(), failures)
}

fn report(what: &str, failures: &[String]) {
    assert!(
        failures.is_empty(),
        "{} {what} case(s) broke the promise:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

#[test]
fn bad_sweeps_exit_2_with_one_error_line() {
    let (n, failures) = run_dir("fit");
    assert!(n >= 20, "only {n} bad sweeps");
    report("sweep", &failures);
}

#[test]
fn bad_batch_files_exit_2_with_one_error_line() {
    let (n, failures) = run_dir("batch");
    assert!(n >= 10, "only {n} bad batch files");
    report("batch", &failures);
}

#[test]
fn bad_design_files_exit_2_with_one_error_line() {
    let (n, failures) = run_dir("design");
    assert!(n >= 10, "only {n} bad designs");
    report("design", &failures);
}

#[test]
fn bad_command_lines_exit_2_and_leave_inputs_alone() {
    let mut failures = Vec::new();
    let cases = files("args");
    assert!(cases.len() >= 20, "only {} bad command lines", cases.len());
    for case in &cases {
        let dir = scratch();
        let tmp = path(dir.path());
        let text = fs::read_to_string(case).expect("an args file");
        let args: Vec<String> = text
            .lines()
            .filter(|l| !l.is_empty())
            .map(|l| l.replace("{tmp}", &tmp))
            .collect();
        let inputs: Vec<PathBuf> = ["x01.csv", "batch.csv", "design.json"]
            .iter()
            .map(|f| dir.path().join(f))
            .collect();
        let before = snapshot(&inputs);
        let o = run(&args, dir.path());
        let mut problems = judge(&o, Expect::BadInput);
        problems.extend(unchanged(&before));
        // Nothing else appears in the scratch directory either (no half-written output).
        let extra: Vec<String> = fs::read_dir(dir.path())
            .expect("scratch dir")
            .map(|e| e.expect("entry").file_name().to_string_lossy().into_owned())
            .filter(|n| !["x01.csv", "batch.csv", "design.json"].contains(&n.as_str()))
            .collect();
        if !extra.is_empty() {
            problems.push(format!("files left behind: {extra:?}"));
        }
        if !problems.is_empty() {
            failures.push(format!(
                "{}: {args:?}: {}\n  stderr: {}",
                case.display(),
                problems.join("; "),
                o.stderr.trim()
            ));
        }
    }
    report("command-line", &failures);
}

#[test]
fn fuzz_regression_inputs_end_cleanly() {
    let out = tempfile::tempdir().expect("temp dir");
    let mut failures = Vec::new();
    for file in files("fuzz") {
        let name = file
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let kind = match name.split('_').next() {
            Some("fit") => "fit",
            Some("batch") => "batch",
            Some("design") => "design",
            _ => panic!("unknown kind of fuzz regression file {name}"),
        };
        for args in commands(kind, &file, out.path()) {
            let before = snapshot(std::slice::from_ref(&file));
            let o = run(&args, out.path());
            let mut problems = judge(&o, Expect::Clean);
            problems.extend(unchanged(&before));
            if !problems.is_empty() {
                failures.push(format!(
                    "{args:?}: {}\n  stderr: {}",
                    problems.join("; "),
                    o.stderr.trim()
                ));
            }
        }
    }
    report("fuzz regression", &failures);
}

#[test]
fn missing_files_exit_1_with_one_error_line() {
    let dir = tempfile::tempdir().expect("temp dir");
    let gone = path(&dir.path().join("no-such-file"));
    let cases: Vec<Vec<String>> = vec![
        vec![s("fit"), gone.clone()],
        vec![s("match"), gone.clone(), s("--count"), s("4")],
        vec![
            s("design"),
            s("--crystals"),
            gone.clone(),
            s("--family"),
            s("butterworth"),
            s("--order"),
            s("4"),
            s("--bandwidth"),
            s("2.4k"),
        ],
        vec![s("analyze"), gone.clone()],
        vec![s("netlist"), gone.clone()],
        vec![
            s("touchstone"),
            gone.clone(),
            s("-o"),
            path(&dir.path().join("o.s2p")),
        ],
        vec![s("parts"), gone.clone()],
        vec![s("yield"), gone],
    ];
    let mut failures = Vec::new();
    for args in cases {
        let o = run(&args, dir.path());
        let problems = judge(&o, Expect::Missing);
        if !problems.is_empty() {
            failures.push(format!(
                "{args:?}: {}\n  stderr: {}",
                problems.join("; "),
                o.stderr.trim()
            ));
        }
    }
    report("missing-file", &failures);
}

#[test]
fn the_corpus_has_at_least_forty_bad_inputs() {
    let n: usize = ["fit", "batch", "design", "args", "fuzz"]
        .iter()
        .map(|d| files(d).len())
        .sum();
    assert!(n >= 40, "the bad-input corpus has only {n} files");
}
