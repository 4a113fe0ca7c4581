//! `xtal-ladder match`, on the demo batch.

use super::util::{example, num, run, run_in, tempdir};
use std::collections::HashMap;

/// fs of every crystal of the demo batch, read from the file itself.
fn batch_fs() -> HashMap<String, f64> {
    let text = std::fs::read_to_string(example("demo-batch.csv")).unwrap_or_else(|e| panic!("{e}"));
    text.lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("id,"))
        .map(|l| {
            let c: Vec<&str> = l.split(',').collect();
            (
                c[0].to_string(),
                c[1].parse().unwrap_or_else(|e| panic!("{l}: {e}")),
            )
        })
        .collect()
}

#[test]
fn best_eight_and_the_duds_rejected() {
    let (r, _d) = run(&[
        "match",
        &example("demo-batch.csv"),
        "--count",
        "8",
        "--bandwidth",
        "2.4k",
        "--format",
        "json",
    ]);
    let v = r.json();
    let fs = batch_fs();
    let sets = v["sets"].as_array().unwrap_or_else(|| panic!("{v}"));
    assert_eq!(sets.len(), 1);
    let ids: Vec<&str> = sets[0]["ids"]
        .as_array()
        .unwrap_or_else(|| panic!("{v}"))
        .iter()
        .filter_map(|x| x.as_str())
        .collect();
    assert_eq!(ids.len(), 8);
    let f: Vec<f64> = ids.iter().map(|id| fs[*id]).collect();
    let spread =
        f.iter().copied().fold(f64::MIN, f64::max) - f.iter().copied().fold(f64::MAX, f64::min);
    let mean = f.iter().sum::<f64>() / 8.0;
    // The reported figures are those of the batch file's values (printed with 17 digits).
    assert!((num(&sets[0]["spread_hz"], "spread_hz") - spread).abs() < 1e-6);
    assert!((num(&sets[0]["mean_fs_hz"], "mean_fs_hz") - mean).abs() < 1e-6);
    // Default tolerance: 10 % of the bandwidth.
    assert!(spread <= 240.0, "spread {spread}");
    // The two duds (Rm 3.6 and 5.2 times the median) are rejected with a reason.
    let rejected = v["rejected"].as_array().unwrap_or_else(|| panic!("{v}"));
    for dud in ["x09", "x28"] {
        let r = rejected
            .iter()
            .find(|r| r["id"] == dud)
            .unwrap_or_else(|| panic!("{dud} not rejected: {rejected:?}"));
        assert!(r["reason"].as_str().is_some_and(|s| !s.is_empty()));
        assert!(!ids.contains(&dud));
    }
    // Brute force over the batch: no 8 crystals (duds excluded) have a smaller spread.
    let mut clean: Vec<f64> = fs
        .iter()
        .filter(|(id, _)| !["x09", "x28"].contains(&id.as_str()))
        .map(|(_, f)| *f)
        .collect();
    clean.sort_by(f64::total_cmp);
    let best = clean
        .windows(8)
        .map(|w| w[7] - w[0])
        .fold(f64::MAX, f64::min);
    assert!(spread <= best + 1e-9, "spread {spread}, best window {best}");
}

#[test]
fn disjoint_sets_and_first_set_file() {
    let dir = tempdir();
    let r = run_in(
        dir.path(),
        &[
            "match",
            &example("demo-batch.csv"),
            "--count",
            "4",
            "--sets",
            "3",
            "--tolerance",
            "100",
            "-o",
            "set1.csv",
            "--format",
            "json",
        ],
    );
    let v = r.json();
    let sets = v["sets"].as_array().unwrap_or_else(|| panic!("{v}"));
    assert!(!sets.is_empty() && sets.len() <= 3);
    let mut seen = Vec::new();
    for s in sets {
        assert!(num(&s["spread_hz"], "spread_hz") <= 100.0);
        for id in s["ids"].as_array().unwrap_or_else(|| panic!("{s}")) {
            assert!(!seen.contains(id), "sets are not disjoint: {v}");
            seen.push(id.clone());
        }
    }
    let set1 =
        std::fs::read_to_string(dir.path().join("set1.csv")).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(
        set1.lines().filter(|l| !l.starts_with('#')).count(),
        5,
        "{set1}"
    );
}

#[test]
fn bad_batches_exit_2() {
    let dir = tempdir();
    let p = dir.path();
    std::fs::write(p.join("bad.csv"), "id,fs_hz\nx1,9.8M\nx2,banana\n")
        .unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(p.join("nohead.csv"), "x1,9.8M\n").unwrap_or_else(|e| panic!("{e}"));
    for f in ["bad.csv", "nohead.csv"] {
        run_in(p, &["match", f, "--count", "2"]).bad_input();
    }
    run_in(p, &["match", &example("demo-batch.csv"), "--count", "0"]).bad_input();
    run_in(p, &["match", "missing.csv", "--count", "2"]).io_failure();
}
