//! `xtal-ladder yield`, on the demo design (few trials and points: the debug build is slow).

use super::util::{example, num, run, run_in, tempdir, Run};
use serde_json::Value;
use std::process::Command;

/// Small but real runs: 240 trials (more than one block of work per thread), 301 points.
const QUICK: [&str; 4] = ["--trials", "240", "--trial-points", "301"];

/// Run the binary with RAYON_NUM_THREADS set.
fn run_threads(threads: &str, args: &[&str]) -> Run {
    let dir = tempdir();
    let out = Command::new(env!("CARGO_BIN_EXE_xtal-ladder"))
        .args(args)
        .current_dir(dir.path())
        .env("RAYON_NUM_THREADS", threads)
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

fn yield_args<'a>(design: &'a str, extra: &[&'a str]) -> Vec<&'a str> {
    let mut a = vec!["yield", design, "--format", "json"];
    a.extend_from_slice(&QUICK);
    a.extend_from_slice(extra);
    a
}

#[test]
fn same_seed_same_report_on_one_and_two_threads() {
    let design = example("demo-design.json");
    let args = yield_args(
        &design,
        &["--cap-tol", "5", "--fs-sigma", "20", "--seed", "11"],
    );
    let one = run_threads("1", &args);
    let two = run_threads("2", &args);
    assert_eq!(one.ok(), two.ok());
    let text1 = run_threads("1", &[&args[..2], &args[4..]].concat());
    let text2 = run_threads("2", &[&args[..2], &args[4..]].concat());
    assert_eq!(text1.ok(), text2.ok());
    // Another seed draws other parts.
    let other = yield_args(
        &design,
        &["--cap-tol", "5", "--fs-sigma", "20", "--seed", "12"],
    );
    let three = run_threads("2", &other);
    assert_ne!(one.ok(), three.ok());
}

#[test]
fn report_numbers_are_consistent() {
    let design = example("demo-design.json");
    let (r, _d) = run(&yield_args(
        &design,
        &["--cap-tol", "5", "--fs-sigma", "20"],
    ));
    let v = r.json();
    let trials = num(&v["trials"], "trials");
    let passed = num(&v["passed"], "passed");
    assert_eq!(trials, 240.0);
    assert_eq!(num(&v["yield"], "yield"), passed / trials);
    assert_eq!(v["spec"]["cap_tol"], 0.05);
    assert_eq!(v["spec"]["fs_sigma_hz"], 20.0);
    assert_eq!(v["spec"]["cap_distribution"], "uniform");
    // Default limits: the design's ripple + 1 dB, −6 dB bandwidth ± 5 %, loss + 2 dB.
    let text = std::fs::read_to_string(&design).unwrap_or_else(|e| panic!("{e}"));
    let d: Value = serde_json::from_str(&text).unwrap_or_else(|e| panic!("{e}"));
    let p = &d["performance"];
    let l = &v["limits"];
    assert!((num(&l["max_ripple_db"], "r") - num(&p["ripple_db"], "r") - 1.0).abs() < 1e-12);
    assert!((num(&l["max_loss_db"], "l") - num(&p["insertion_loss_db"], "l") - 2.0).abs() < 1e-12);
    assert_eq!(l["bw6_tolerance"], 0.05);
    // Percentiles are non-decreasing and lie within [min, max].
    let metrics = v["metrics"].as_array().unwrap_or_else(|| panic!("{v}"));
    assert!(metrics.iter().any(|m| m["name"] == "bw_6db_hz"));
    for m in metrics {
        let ps: Vec<f64> = ["p1", "p5", "p25", "p50", "p75", "p95", "p99"]
            .iter()
            .map(|k| num(&m["percentiles"][k], k))
            .collect();
        assert!(ps.windows(2).all(|w| w[0] <= w[1]), "{m}");
        assert!(
            num(&m["min"], "min") <= ps[0] && ps[6] <= num(&m["max"], "max"),
            "{m}"
        );
    }
    // A failing trial counts under every limit it breaks, so the counts cover the failures.
    let f = &v["failures_by_reason"];
    let counted: f64 = [
        "ripple",
        "bw6",
        "loss",
        "out_of_window",
        "non_physical",
        "numerical",
    ]
    .iter()
    .map(|k| num(&f[k], k))
    .sum();
    assert!(counted >= trials - passed, "{f}");
    // The nominal is read off the trials' grid by linear interpolation: its −6 dB bandwidth is
    // within two grid steps of the design's (tolerance module docs). The grid spans
    // 2·max(2·B6, 0.625·B60) with 301 points.
    let b6 = num(&p["bw_6db_hz"], "b6");
    let b60 = num(&p["bw_60db_hz"], "b60");
    let step = 2.0 * (2.0 * b6).max(0.625 * b60) / 300.0;
    let nominal = num(&v["nominal"]["bw_6db_hz"], "nominal b6");
    assert!((nominal - b6).abs() <= 2.0 * step, "{nominal} vs {b6}");
    let s = v["sensitivity"].as_array().unwrap_or_else(|| panic!("{v}"));
    assert!(!s.is_empty());
    let scores: Vec<f64> = s.iter().filter_map(|x| x["score"].as_f64()).collect();
    assert!(
        scores.windows(2).all(|w| w[0] >= w[1]),
        "ranked by score: {scores:?}"
    );
}

#[test]
fn the_limits_given_are_the_limits_applied() {
    let design = example("demo-design.json");
    // Limits nothing can break: every trial passes.
    let loose = yield_args(
        &design,
        &[
            "--max-ripple",
            "100",
            "--bw6-tol",
            "90",
            "--max-loss",
            "100",
            "--cap-tol",
            "1",
        ],
    );
    let (r, _d) = run(&loose);
    let v = r.json();
    assert_eq!(v["yield"], 1.0, "{}", v["failures_by_reason"]);
    assert_eq!(v["limits"]["max_ripple_db"], 100.0);
    assert_eq!(v["limits"]["bw6_tolerance"], 0.9);
    // No lossy filter meets a 0 dB loss limit: every trial fails on loss.
    let (r, _d) = run(&yield_args(&design, &["--max-loss", "0"]));
    let v = r.json();
    assert_eq!(v["yield"], 0.0);
    assert_eq!(v["failures_by_reason"]["loss"], 240);
}

#[test]
fn plots_and_text() {
    let dir = tempdir();
    let design = example("demo-design.json");
    let mut args = vec![
        "yield",
        design.as_str(),
        "--plot",
        "env.svg",
        "--histogram",
        "h.svg",
        "--histogram-metric",
        "ripple",
        "--gaussian-caps",
        "--lm-sigma",
        "2",
    ];
    args.extend_from_slice(&QUICK);
    let r = run_in(dir.path(), &args);
    let out = r.ok();
    assert!(out.contains("trials pass"), "{out}");
    assert!(out.contains("parts that matter most"), "{out}");
    assert!(out.contains("Gaussian"), "{out}");
    for f in ["env.svg", "h.svg"] {
        let s = std::fs::read_to_string(dir.path().join(f)).unwrap_or_else(|e| panic!("{f}: {e}"));
        assert!(s.contains("<svg"), "{f}");
    }
}

#[test]
fn bad_input_exits_2() {
    let dir = tempdir();
    let p = dir.path();
    let design = example("demo-design.json");
    for bad in [
        &["--trials", "0"][..],
        &["--cap-tol", "100"],
        &["--cap-tol", "-1"],
        &["--lm-sigma", "150"],
        &["--fs-sigma", "-5"],
        &["--trial-points", "50"],
        &["--bw6-tol", "0"],
        &["--format", "csv"],
        &["--histogram-metric", "noise"],
    ] {
        let mut a = vec!["yield", design.as_str()];
        a.extend_from_slice(bad);
        run_in(p, &a).bad_input();
    }
    std::fs::write(p.join("garbage.json"), "[]").unwrap_or_else(|e| panic!("{e}"));
    run_in(p, &["yield", "garbage.json"]).bad_input();
    run_in(p, &["yield", "missing.json"]).io_failure();
    run_in(p, &["yield", &design, "--plot", &design]).bad_input();
}

#[test]
fn a_design_of_absurd_values_is_bad_input_for_parts_yield_and_report() {
    // The demo design with one crystal's Rm raised to 1e300 Ω: the record is well formed, but
    // no filter has such a part; the analysis overflows. That is the input's fault: exit 2.
    let dir = tempdir();
    let text = std::fs::read_to_string(example("demo-design.json")).unwrap();
    let mut d: Value = serde_json::from_str(&text).unwrap();
    d["crystals"][0]["rm_ohm"] = Value::from(1e300);
    d["crystals"][0]["qu"] = Value::Null;
    std::fs::write(dir.path().join("absurd.json"), d.to_string()).unwrap();
    for args in [
        &["parts", "absurd.json"][..],
        &[
            "yield",
            "absurd.json",
            "--trials",
            "20",
            "--trial-points",
            "101",
        ][..],
        &["report", "absurd.json", "-o", "r.html"][..],
    ] {
        run_in(dir.path(), args).bad_input();
    }
}
