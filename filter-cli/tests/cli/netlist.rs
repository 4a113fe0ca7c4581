//! `xtal-ladder netlist`, and the netlist run in ngspice against `analyze`.

use super::util::{example, run, run_in, tempdir};
use std::process::Command;

#[test]
fn netlist_shape() {
    let (r, _d) = run(&["netlist", &example("demo-design.json")]);
    let out = r.ok();
    let first = out.lines().next().unwrap_or("");
    assert!(
        first.starts_with("xtal-ladder crystal ladder:"),
        "title line first: {first}"
    );
    assert!(first.is_ascii());
    assert!(out.lines().any(|l| l.starts_with(".ac lin ")), "{out}");
    assert!(out.lines().any(|l| l.starts_with("RLOAD out 0 ")), "{out}");
    assert!(
        out.lines()
            .any(|l| l.starts_with("V1 ") && l.contains(" AC ")),
        "{out}"
    );
    assert!(out.trim_end().ends_with(".end"));
}

/// Rows (frequency, vdb, vp) of ngspice's printed table.
fn ngspice_table(stdout: &str) -> Vec<[f64; 3]> {
    stdout
        .lines()
        .filter_map(|l| {
            let c: Vec<&str> = l.split_whitespace().collect();
            if c.len() != 4 || c[0].parse::<usize>().is_err() {
                return None;
            }
            let v: Vec<f64> = c[1..].iter().filter_map(|x| x.parse().ok()).collect();
            (v.len() == 3).then(|| [v[0], v[1], v[2]])
        })
        .collect()
}

/// The netlist runs in ngspice as it is and agrees with `analyze` within 0.02 dB wherever
/// S21 is above −60 dB. Skipped (with a note) when ngspice is not installed.
#[test]
fn ngspice_agrees_with_analyze() {
    if Command::new("ngspice").arg("--version").output().is_err() {
        eprintln!("ngspice not found: netlist cross-check skipped");
        return;
    }
    let dir = tempdir();
    let design = example("demo-design.json");
    let text = std::fs::read_to_string(&design).unwrap_or_else(|e| panic!("{e}"));
    let d: serde_json::Value = serde_json::from_str(&text).unwrap_or_else(|e| panic!("{e}"));
    let rs = d["source_ohm"].as_f64().unwrap_or(f64::NAN);
    let rl = d["load_ohm"].as_f64().unwrap_or(f64::NAN);
    let f0 = d["performance"]["center_hz"].as_f64().unwrap_or(f64::NAN);
    let (from, to) = (format!("{}", f0 - 5000.0), format!("{}", f0 + 5000.0));
    let range = [
        "--from",
        from.as_str(),
        "--to",
        to.as_str(),
        "--points",
        "201",
    ];
    let mut args = vec!["netlist", design.as_str(), "-o", "f.cir"];
    args.extend_from_slice(&range);
    run_in(dir.path(), &args).ok();
    let out = Command::new("ngspice")
        .args(["-b", "f.cir"])
        .current_dir(dir.path())
        .output()
        .unwrap_or_else(|e| panic!("ngspice: {e}"));
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "ngspice failed:\n{stdout}\n{stderr}");
    assert!(
        !stderr.to_lowercase().contains("warning") && !stdout.to_lowercase().contains("warning"),
        "ngspice warned:\n{stdout}\n{stderr}"
    );
    let table = ngspice_table(&stdout);
    assert_eq!(table.len(), 201, "{stdout}");
    let mut args = vec!["analyze", design.as_str(), "--format", "csv"];
    args.extend_from_slice(&range);
    let csv = run_in(dir.path(), &args).ok().to_string();
    let rows: Vec<Vec<f64>> = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').filter_map(|c| c.parse().ok()).collect())
        .collect();
    assert_eq!(rows.len(), 201);
    // S21 = V(out)·sqrt(Rs/RL) for the 2 V EMF of the netlist.
    let offset_db = 10.0 * (rs / rl).log10();
    let mut compared = 0;
    for (ng, ours) in table.iter().zip(&rows) {
        assert!(
            (ng[0] - ours[0]).abs() < 1e-6 * ours[0],
            "frequency {} vs {}",
            ng[0],
            ours[0]
        );
        if ours[1] > -60.0 {
            let diff = ng[1] + offset_db - ours[1];
            assert!(
                diff.abs() < 0.02,
                "at {} Hz: ngspice {} dB, analyze {} dB",
                ours[0],
                ng[1] + offset_db,
                ours[1]
            );
            compared += 1;
        }
    }
    assert!(compared > 50, "only {compared} points above −60 dB");
}

#[test]
fn bad_input_exits_2() {
    let dir = tempdir();
    std::fs::write(dir.path().join("x.json"), "{}").unwrap_or_else(|e| panic!("{e}"));
    run_in(dir.path(), &["netlist", "x.json"]).bad_input();
    run_in(dir.path(), &["netlist", "x.json", "-o", "x.json"]).bad_input();
    run_in(
        dir.path(),
        &["netlist", &example("demo-design.json"), "--format", "json"],
    )
    .bad_input();
}
