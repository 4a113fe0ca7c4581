//! `xtal-ladder touchstone`.

use super::util::{example, run_in, tempdir};

/// Data lines of a Touchstone file as numbers.
fn data(text: &str) -> Vec<Vec<f64>> {
    text.lines()
        .map(|l| l.split('!').next().unwrap_or("").trim())
        .filter(|l| !l.is_empty() && !l.starts_with('#'))
        .map(|l| {
            l.split_whitespace()
                .map(|x| x.parse().unwrap_or_else(|e| panic!("{l}: {e}")))
                .collect()
        })
        .collect()
}

#[test]
fn s21_agrees_with_analyze_for_equal_terminations() {
    // An odd-order Butterworth ladder of equal crystals has equal terminations, so the file's
    // single reference resistance is the design's own and S21 must equal analyze's.
    let dir = tempdir();
    run_in(
        dir.path(),
        &[
            "design",
            "--fs",
            "9.8268M",
            "--lm",
            "17m",
            "--rm",
            "10",
            "--c0",
            "3.9p",
            "--order",
            "5",
            "--family",
            "butterworth",
            "--bandwidth",
            "2k",
            "-o",
            "d.json",
        ],
    )
    .ok();
    let d: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("d.json")).unwrap_or_else(|e| panic!("{e}")),
    )
    .unwrap_or_else(|e| panic!("{e}"));
    let (rs, rl) = (
        d["source_ohm"].as_f64().unwrap_or(0.0),
        d["load_ohm"].as_f64().unwrap_or(1.0),
    );
    assert!(((rs - rl) / rs).abs() < 1e-9, "terminations {rs} {rl}");
    let range = ["--center", "9.8285M", "--span", "8k", "--points", "81"];
    let mut args = vec!["touchstone", "d.json", "-o", "f.s2p", "--data-format", "db"];
    args.extend_from_slice(&range);
    run_in(dir.path(), &args).ok();
    let text = std::fs::read_to_string(dir.path().join("f.s2p")).unwrap_or_else(|e| panic!("{e}"));
    let option = text.lines().find(|l| l.starts_with('#')).unwrap_or("");
    assert!(option.starts_with("# Hz S DB R "), "{option}");
    let r0: f64 = option
        .rsplit(' ')
        .next()
        .and_then(|v| v.parse().ok())
        .unwrap_or(0.0);
    assert!(
        ((r0 - rs) / rs).abs() < 1e-12,
        "reference {r0} vs source {rs}"
    );
    let rows = data(&text);
    assert_eq!(rows.len(), 81);
    let mut args = vec!["analyze", "d.json", "--format", "csv"];
    args.extend_from_slice(&range);
    let csv = run_in(dir.path(), &args).ok().to_string();
    for (ts, line) in rows.iter().zip(csv.lines().skip(1)) {
        let a: Vec<f64> = line.split(',').filter_map(|c| c.parse().ok()).collect();
        assert_eq!(ts.len(), 9);
        assert!((ts[0] - a[0]).abs() < 1e-6 * a[0]);
        // 17 significant digits in both files: agreement to rounding.
        assert!((ts[3] - a[1]).abs() < 1e-9, "S21 dB {} vs {}", ts[3], a[1]);
        assert!((ts[1] - a[3]).abs() < 1e-9, "S11 dB {} vs {}", ts[1], a[3]);
        // Reciprocity: S12 = S21.
        assert_eq!((ts[5], ts[6]), (ts[3], ts[4]));
    }
}

#[test]
fn unequal_terminations_are_stated_and_bad_input_exits_2() {
    let dir = tempdir();
    let design = example("demo-design.json");
    let r = run_in(dir.path(), &["touchstone", &design]);
    let out = r.ok();
    assert!(
        out.contains("source") && out.contains("load"),
        "terminations in the header"
    );
    assert!(out.lines().any(|l| l.starts_with("# Hz S MA R ")));
    run_in(dir.path(), &["touchstone", &design, "--reference", "0"]).bad_input();
    run_in(dir.path(), &["touchstone", &design, "--data-format", "xx"]).bad_input();
    std::fs::write(dir.path().join("d.json"), "not json").unwrap_or_else(|e| panic!("{e}"));
    run_in(dir.path(), &["touchstone", "d.json", "-o", "f.s2p"]).bad_input();
    assert!(
        !dir.path().join("f.s2p").exists(),
        "no output after a failure"
    );
}
