//! `xtal-ladder design`.

use super::util::{example, num, rel, run, run_in, tempdir};
use serde_json::Value;

/// Published k and q for lossless resonators, normalized to the −3 dB bandwidth.
/// Source: A. I. Zverev, Handbook of Filter Synthesis, 1967, k–q tables (transcribed in
/// reference-tables/zverev_kq.csv with its own caveats).
const ZVEREV: &str = include_str!("../../../reference-tables/zverev_kq.csv");

/// (q1, qn, k…) of a table row.
fn zverev(family: &str, ripple: &str, order: usize) -> Vec<f64> {
    for line in ZVEREV.lines().filter(|l| !l.starts_with('#')) {
        let c: Vec<&str> = line.split(',').collect();
        if c.len() > 3 && c[0] == family && c[1] == ripple && c[2] == order.to_string() {
            return c[3..]
                .iter()
                .map(|v| v.parse().unwrap_or_else(|e| panic!("{line}: {e}")))
                .collect();
        }
    }
    panic!("no {family} {ripple} n={order} row in zverev_kq.csv");
}

fn nums(v: &Value, what: &str) -> Vec<f64> {
    v.as_array()
        .unwrap_or_else(|| panic!("{what} is not an array: {v}"))
        .iter()
        .map(|x| num(x, what))
        .collect()
}

#[test]
fn butterworth_single_crystal_matches_the_published_k_and_q() {
    let (r, _d) = run(&[
        "design",
        "--fs",
        "9M",
        "--lm",
        "15m",
        "--rm",
        "0",
        "--c0",
        "0",
        "--order",
        "4",
        "--family",
        "butterworth",
        "--bandwidth",
        "2.4k",
        "--format",
        "json",
    ]);
    let d = r.json();
    let table = zverev("butterworth", "0", 4);
    let q = nums(&d["q"], "q");
    let k = nums(&d["k"], "k");
    // The table has 4 decimals: half a unit in the last place.
    for (got, want) in q.iter().chain(&k).zip(table.iter()) {
        assert!(
            (got - want).abs() < 5e-5 + 1e-9,
            "{got} vs {want} (q {q:?}, k {k:?})"
        );
    }
    assert_eq!(k.len(), 3);
    // Lossless crystals without C0: the analysed −3 dB bandwidth is the one asked for. The
    // design's own tolerance for a slope-parameter design is 2 %; narrowband mapping error at
    // w = 2.7e-4 is far smaller.
    let bw = num(&d["performance"]["bw_3db_hz"], "bw_3db_hz");
    assert!(rel(bw, 2400.0) < 0.01, "bw_3db {bw}");
    assert_eq!(d["crystals"].as_array().map(Vec::len), Some(4));
    assert_eq!(d["crystals"][0]["id"], "x1");
    assert_eq!(d["series_caps_f"].as_array().map(Vec::len), Some(4));
    assert_eq!(d["shunt_caps_f"].as_array().map(Vec::len), Some(3));
    assert!(d["schema_version"].is_u64());
}

#[test]
fn output_file_and_summary() {
    let dir = tempdir();
    let r = run_in(
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
            "6",
            "--family",
            "chebyshev",
            "--ripple",
            "0.1",
            "--bandwidth",
            "2.4k",
            "--bandwidth-at",
            "6db",
            "-o",
            "d.json",
        ],
    );
    let out = r.ok();
    for want in [
        "Chebyshev 0.1 dB",
        "6 crystals",
        "terminations",
        "shunt C",
        "q_min",
        "return loss",
        "design written to d.json",
    ] {
        assert!(out.contains(want), "summary lacks {want:?}:\n{out}");
    }
    let text = std::fs::read_to_string(dir.path().join("d.json")).unwrap_or_else(|e| panic!("{e}"));
    let d: Value = serde_json::from_str(&text).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(d["spec"]["order"], 6);
    assert!(rel(num(&d["spec"]["bandwidth_hz"], "bandwidth_hz"), 2400.0) < 1e-15);
}

#[test]
fn batch_crystals_are_copied_unchanged() {
    let batch = example("demo-batch.csv");
    let ids = "x01,x02,x03,x04";
    let (r, _d) = run(&[
        "design",
        "--crystals",
        &batch,
        "--ids",
        ids,
        "--family",
        "butterworth",
        "--bandwidth",
        "500",
        "--format",
        "json",
    ]);
    let d = r.json();
    let text = std::fs::read_to_string(&batch).unwrap_or_else(|e| panic!("{e}"));
    let rows: Vec<Vec<&str>> = text
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(|l| l.split(',').collect())
        .collect();
    let header = &rows[0];
    let col = |name: &str| {
        header
            .iter()
            .position(|h| *h == name)
            .unwrap_or_else(|| panic!("{name}"))
    };
    for (pos, id) in ids.split(',').enumerate() {
        let row = rows
            .iter()
            .find(|r| r[0] == id)
            .unwrap_or_else(|| panic!("{id} not in batch"));
        let x = &d["crystals"][pos];
        assert_eq!(x["id"], id);
        for field in ["fs_hz", "lm_h", "rm_ohm", "c0_f"] {
            let want: f64 = row[col(field)].parse().unwrap_or_else(|e| panic!("{e}"));
            // Copied unchanged: only the JSON round trip lies between (exact for 17 digits).
            assert!(rel(num(&x[field], field), want) < 1e-12, "{id} {field}");
        }
    }
}

#[test]
fn bad_specs_exit_2() {
    let xtal = ["--fs", "9M", "--lm", "15m", "--rm", "10", "--c0", "4p"];
    let with = |extra: &[&'static str]| -> Vec<&'static str> {
        let mut a = vec!["design"];
        a.extend_from_slice(&xtal);
        a.extend_from_slice(extra);
        a
    };
    for args in [
        with(&["--order", "0", "--bandwidth", "2k"]),
        with(&["--order", "13", "--bandwidth", "2k"]),
        with(&["--order", "4"]),
        with(&["--bandwidth", "2k"]),
        with(&["--order", "4", "--bandwidth", "-2k"]),
        with(&["--order", "4", "--bandwidth", "0"]),
        with(&["--order", "4", "--bandwidth", "40k"]),
        with(&[
            "--order",
            "4",
            "--bandwidth",
            "2k",
            "--family",
            "butterworth",
            "--ripple",
            "0.5",
        ]),
        with(&[
            "--order",
            "4",
            "--bandwidth",
            "2k",
            "--bandwidth-at",
            "ripple",
            "--family",
            "bessel",
        ]),
        with(&["--order", "4", "--bandwidth", "2k", "--ripple", "50"]),
    ] {
        let (r, _d) = run(&args);
        r.bad_input();
    }
    let batch = example("demo-batch.csv");
    let (r, _d) = run(&[
        "design",
        "--crystals",
        &batch,
        "--ids",
        "x01,nope",
        "--bandwidth",
        "2k",
    ]);
    r.bad_input();
    let (r, _d) = run(&[
        "design",
        "--crystals",
        &batch,
        "--ids",
        "x01,x01",
        "--bandwidth",
        "2k",
    ]);
    r.bad_input();
    let (r, _d) = run(&["design", "--crystals", "missing.csv", "--bandwidth", "2k"]);
    r.io_failure();
}
