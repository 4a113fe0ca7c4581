//! `xtal-ladder analyze`, on the demo design.

use super::util::{example, num, rel, run, run_in, tempdir};

#[test]
fn metrics_agree_with_the_design_record() {
    let design = example("demo-design.json");
    let (r, _d) = run(&["analyze", &design, "--format", "json"]);
    let v = r.json();
    let text = std::fs::read_to_string(&design).unwrap_or_else(|e| panic!("{e}"));
    let d: serde_json::Value = serde_json::from_str(&text).unwrap_or_else(|e| panic!("{e}"));
    let (a, p) = (&v["performance"], &d["performance"]);
    // Both are refined on the circuit (bisection to 60 iterations), so the window the
    // analysis used does not matter beyond the bisection's resolution.
    for f in ["bw_3db_hz", "bw_6db_hz", "center_hz"] {
        assert!(
            rel(num(&a[f], f), num(&p[f], f)) < 1e-9,
            "{f}: {} vs {}",
            a[f],
            p[f]
        );
    }
    for f in ["insertion_loss_db", "ripple_db", "return_loss_db"] {
        assert!(
            (num(&a[f], f) - num(&p[f], f)).abs() < 1e-6,
            "{f}: {} vs {}",
            a[f],
            p[f]
        );
    }
    assert_eq!(v["center_hz"], d["center_hz"]);
}

#[test]
fn csv_columns_and_group_delay() {
    let design = example("demo-design.json");
    let (r, _d) = run(&[
        "analyze", &design, "--center", "9.8283M", "--span", "4k", "--points", "401", "--format",
        "csv",
    ]);
    let out = r.ok();
    let mut lines = out.lines();
    assert_eq!(
        lines.next(),
        Some("frequency_hz,s21_db,s21_deg,s11_db,group_delay_s")
    );
    let rows: Vec<Vec<f64>> = lines
        .map(|l| {
            l.split(',')
                .map(|c| c.parse().unwrap_or_else(|e| panic!("{l}: {e}")))
                .collect()
        })
        .collect();
    assert_eq!(rows.len(), 401);
    assert!(rows.iter().all(|r| r.len() == 5));
    assert!((rows[0][0] - 9.8263e6).abs() < 1e-6 && (rows[400][0] - 9.8303e6).abs() < 1e-6);
    // Group delay = −dφ/dω: compare with a central difference of the printed phase at the
    // middle of the passband (10 Hz steps; the phase moves a few degrees per step there, far
    // from wrapping; the difference is second-order accurate, within 1 % of the delay).
    let i = 200;
    let mut dphi = rows[i + 1][2] - rows[i - 1][2];
    if dphi > 180.0 {
        dphi -= 360.0;
    } else if dphi < -180.0 {
        dphi += 360.0;
    }
    let dw = 2.0 * std::f64::consts::PI * (rows[i + 1][0] - rows[i - 1][0]);
    let tau = -dphi.to_radians() / dw;
    assert!(
        rel(tau, rows[i][4]) < 0.01,
        "finite difference {tau} vs {}",
        rows[i][4]
    );
}

#[test]
fn plots_and_response_file() {
    let dir = tempdir();
    let design = example("demo-design.json");
    let r = run_in(
        dir.path(),
        &[
            "analyze",
            &design,
            "--plot",
            "t.svg",
            "--return-loss-plot",
            "rl.svg",
            "--delay-plot",
            "gd.svg",
            "-o",
            "r.csv",
        ],
    );
    let out = r.ok();
    assert!(out.contains("−3 dB bandwidth"), "{out}");
    for f in ["t.svg", "rl.svg", "gd.svg"] {
        let s = std::fs::read_to_string(dir.path().join(f)).unwrap_or_else(|e| panic!("{f}: {e}"));
        assert!(s.contains("<svg"), "{f}");
    }
    let csv = std::fs::read_to_string(dir.path().join("r.csv")).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(csv.lines().count(), 2002);
    let r = run_in(
        dir.path(),
        &["analyze", &design, "--wide", "--linear", "--plot", "w.svg"],
    );
    r.ok();
}

#[test]
fn bad_designs_exit_2() {
    let dir = tempdir();
    let p = dir.path();
    std::fs::write(p.join("garbage.json"), "{ not json").unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(p.join("other.json"), "{\"schema_version\": 99}")
        .unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(p.join("array.json"), "[1, 2, 3]").unwrap_or_else(|e| panic!("{e}"));
    for f in ["garbage.json", "other.json", "array.json"] {
        run_in(p, &["analyze", f]).bad_input();
    }
    run_in(p, &["analyze", "missing.json"]).io_failure();
    let design = example("demo-design.json");
    // A range that misses the passband cannot give metrics.
    run_in(p, &["analyze", &design, "--from", "9.7M", "--to", "9.71M"]).bad_input();
    run_in(p, &["analyze", &design, "--points", "1"]).bad_input();
    run_in(p, &["analyze", &design, "--from", "9.9M", "--to", "9.8M"]).bad_input();
}

#[test]
fn matching_networks_keep_the_passband() {
    // Lossless L-networks present each termination exactly at the centre, and over a band of
    // 2.4 kHz at 9.8 MHz their reactances barely change: the passband figures move by far
    // less than 0.05 dB / 0.1 %.
    let design = example("demo-design.json");
    let (bare, _d) = run(&["analyze", &design, "--format", "json"]);
    for form in ["lowpass", "highpass"] {
        let (m, _d) = run(&[
            "analyze",
            &design,
            "--match-to",
            "50",
            "--match-form",
            form,
            "--format",
            "json",
        ]);
        let (a, b) = (bare.json(), m.json());
        let la = num(&a["performance"]["insertion_loss_db"], "loss");
        let lb = num(&b["performance"]["insertion_loss_db"], "loss");
        assert!((la - lb).abs() < 0.05, "{form}: {la} vs {lb}");
        let ba = num(&a["performance"]["bw_6db_hz"], "bw6");
        let bb = num(&b["performance"]["bw_6db_hz"], "bw6");
        assert!(rel(bb, ba) < 1e-3, "{form}: {ba} vs {bb}");
    }
}
