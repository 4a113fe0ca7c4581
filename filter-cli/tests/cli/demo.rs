//! `xtal-ladder demo`: the whole job on the built-in lot.

use super::util::{examples_dir, num, rel, run_in, tempdir};

const FILES: [&str; 13] = [
    "batch.csv",
    "fit-x01.svg",
    "fit-x23.svg",
    "matched.csv",
    "design.json",
    "response.csv",
    "transmission.svg",
    "transmission-linear.svg",
    "return-loss.svg",
    "group-delay.svg",
    "wide.svg",
    "filter.cir",
    "filter.s2p",
];

#[test]
fn whole_job_and_its_artefacts() {
    let dir = tempdir();
    let r = run_in(dir.path(), &["demo", "--out", "out"]);
    let text = r.ok();
    for step in [
        "1. measure",
        "2. match",
        "3. design",
        "4. analyze",
        "5. export",
    ] {
        assert!(text.contains(step), "no {step:?} in:\n{text}");
    }
    let out = dir.path().join("out");
    for f in FILES {
        let meta = std::fs::metadata(out.join(f)).unwrap_or_else(|e| panic!("{f}: {e}"));
        assert!(meta.len() > 0, "{f} is empty");
    }
    let design: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(out.join("design.json")).unwrap_or_else(|e| panic!("{e}")),
    )
    .unwrap_or_else(|e| panic!("{e}"));
    let ids: Vec<&str> = design["crystals"]
        .as_array()
        .unwrap_or_else(|| panic!("{design}"))
        .iter()
        .filter_map(|x| x["id"].as_str())
        .collect();
    assert_eq!(ids.len(), 8);
    for bad in ["x09", "x28", "x23"] {
        assert!(
            !ids.contains(&bad),
            "{bad} (dud or spurious) was used: {ids:?}"
        );
    }
    assert_eq!(design["spec"]["refine"], true);
    assert_eq!(design["spec"]["bandwidth_at"], "6db");
    // Refined on the exact model: the −6 dB bandwidth is the one asked for (the synthesis
    // issue asks 0.1 % of the −3 dB width after refinement; 0.5 % leaves room for the −6 dB
    // reading).
    let bw6 = num(&design["performance"]["bw_6db_hz"], "bw_6db_hz");
    assert!(rel(bw6, 2400.0) < 0.005, "bw_6db {bw6}");
    // The committed examples are what the demo writes.
    for (mine, committed) in [
        ("design.json", "demo-design.json"),
        ("batch.csv", "demo-batch.csv"),
    ] {
        let a = std::fs::read_to_string(out.join(mine)).unwrap_or_else(|e| panic!("{e}"));
        let b = std::fs::read_to_string(examples_dir().join(committed))
            .unwrap_or_else(|e| panic!("{e}"));
        assert!(
            a == b,
            "examples/{committed} is stale: copy it from `xtal-ladder demo`'s {mine}"
        );
    }
    // A second run into the same directory is allowed (it holds the demo's marker).
    run_in(dir.path(), &["demo", "--out", "out", "--format", "json"]).json();
}

#[test]
fn refuses_a_directory_of_other_files() {
    let dir = tempdir();
    let mine = dir.path().join("notes.txt");
    std::fs::write(&mine, "keep me").unwrap_or_else(|e| panic!("{e}"));
    let r = run_in(dir.path(), &["demo", "--out", "."]);
    r.bad_input();
    assert_eq!(
        std::fs::read_to_string(&mine).unwrap_or_default(),
        "keep me"
    );
    assert_eq!(
        std::fs::read_dir(dir.path())
            .map(|d| d.count())
            .unwrap_or(0),
        1
    );
    run_in(dir.path(), &["demo", "--out", "notes.txt"]).bad_input();
}
