//! Usage errors, help and the overwrite rule, common to every subcommand.

use super::util::{run, run_in, tempdir};

#[test]
fn no_subcommand_unknown_flag_and_unknown_subcommand_exit_2() {
    let (r, _d) = run(&[]);
    r.bad_input();
    let (r, _d) = run(&["crystal", "--frequency", "9M"]);
    r.bad_input();
    let (r, _d) = run(&["yield"]);
    r.bad_input();
    let (r, _d) = run(&["--format", "xml", "crystal"]);
    r.bad_input();
}

#[test]
fn help_for_every_subcommand_has_an_example() {
    for sub in [
        "crystal",
        "fit",
        "shift",
        "match",
        "design",
        "analyze",
        "netlist",
        "touchstone",
        "demo",
    ] {
        let (r, _d) = run(&[sub, "--help"]);
        let out = r.ok();
        assert!(
            out.contains("Example:"),
            "{sub} --help has no example:\n{out}"
        );
        assert!(out.contains(&format!("xtal-ladder {sub}")), "{sub}:\n{out}");
    }
    let (r, _d) = run(&["--help"]);
    assert!(r.ok().contains("Exit codes"));
}

#[test]
fn format_not_available_exits_2() {
    let (r, _d) = run(&[
        "shift",
        "--f-short",
        "9M",
        "--f-cap",
        "9.001M",
        "--cap",
        "33p",
        "--c0",
        "4p",
        "--format",
        "csv",
    ]);
    r.bad_input();
}

#[test]
fn output_never_replaces_an_input() {
    let dir = tempdir();
    let sweep = dir.path().join("x01.csv");
    let original = std::fs::read_to_string(super::util::examples_dir().join("sweeps/x01.csv"))
        .unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(&sweep, &original).unwrap_or_else(|e| panic!("{e}"));
    for out in ["x01.csv", "./x01.csv"] {
        let r = run_in(dir.path(), &["fit", "x01.csv", "-o", out]);
        r.bad_input();
        let now = std::fs::read_to_string(&sweep).unwrap_or_else(|e| panic!("{e}"));
        assert!(now == original, "input changed by -o {out}");
    }
}
