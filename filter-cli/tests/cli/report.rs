//! `xtal-ladder report`, and the build files of `xtal-ladder demo`.

use super::util::{example, num, run_in, tempdir};
use serde_json::Value;

/// Checks that a page stands alone: no scripts, no links, no fetched resources.
fn assert_self_contained(html: &str) {
    assert!(html.starts_with("<!DOCTYPE html>"), "not an HTML document");
    assert!(html.trim_end().ends_with("</html>"));
    for needle in [
        "http:", "https:", "<script", "<link", " src=", "url(", "@import", "<iframe",
    ] {
        assert!(!html.contains(needle), "the page holds {needle:?}");
    }
    assert_eq!(
        html.matches("<svg").count(),
        html.matches("</svg>").count(),
        "unbalanced svg"
    );
    assert_eq!(
        html.matches("<section").count(),
        html.matches("</section>").count()
    );
    assert_eq!(
        html.matches("<table").count(),
        html.matches("</table>").count()
    );
}

/// Text as the page escapes it.
fn escaped(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
        .replace('\'', "&#39;")
}

#[test]
fn one_self_contained_page_with_parts_plots_and_yield() {
    let dir = tempdir();
    let p = dir.path();
    let design = example("demo-design.json");
    let common = ["--pairs", "--match-to", "50"];
    let tol = [
        "--trials",
        "240",
        "--trial-points",
        "301",
        "--fs-sigma",
        "15",
        "--seed",
        "3",
    ];
    let mut args = vec![
        "report",
        design.as_str(),
        "-o",
        "r.html",
        "--format",
        "json",
    ];
    args.extend_from_slice(&common);
    args.extend_from_slice(&tol);
    let v = run_in(p, &args).json();
    let html = std::fs::read_to_string(p.join("r.html")).unwrap_or_else(|e| panic!("{e}"));
    assert_self_contained(&html);
    // The schematic, transmission, return loss, group delay, envelope and histogram.
    assert_eq!(html.matches("<svg").count(), 6);
    for section in [
        "id=\"spec\"",
        "id=\"crystals\"",
        "id=\"schematic\"",
        "id=\"parts\"",
        "id=\"as-built\"",
        "id=\"response\"",
        "id=\"yield\"",
    ] {
        assert!(html.contains(section), "no {section}");
    }
    // Every part of the parts list, with its value, is on the page.
    let mut pargs = vec![
        "parts",
        design.as_str(),
        "--format",
        "json",
        "--as-built",
        "b.json",
    ];
    pargs.extend_from_slice(&common);
    let parts = run_in(p, &pargs).json();
    let list = parts["parts"]
        .as_array()
        .unwrap_or_else(|| panic!("{parts}"));
    for part in list {
        for field in ["ref", "value"] {
            let s = part[field].as_str().unwrap_or_else(|| panic!("{part}"));
            assert!(html.contains(&escaped(s)), "{s} is not on the page");
        }
    }
    // The crystals and where they go.
    let text = std::fs::read_to_string(&design).unwrap_or_else(|e| panic!("{e}"));
    let d: Value = serde_json::from_str(&text).unwrap_or_else(|e| panic!("{e}"));
    for (i, x) in d["crystals"].as_array().into_iter().flatten().enumerate() {
        let id = x["id"].as_str().unwrap_or_default();
        assert!(html.contains(&format!(
            "<td class=\"key\">Y{}</td><td>X{}</td><td>{id}</td>",
            i + 1,
            i + 1
        )));
    }
    // The page's as-built figures are those of `parts`, and its yield is that of `yield` on
    // the as-built design with the same settings.
    assert_eq!(v["as_built"], parts["as_built"]);
    let mut yargs = vec!["yield", "b.json", "--format", "json"];
    yargs.extend_from_slice(&tol);
    let y = run_in(p, &yargs).json();
    assert_eq!(v["yield"], y["yield"]);
    assert_eq!(v["trials"], 240);
    let pct = format!("{:.1} %", 100.0 * num(&y["yield"], "yield"));
    assert!(html.contains(&pct), "yield {pct} not on the page");
}

#[test]
fn without_yield_and_text_summary() {
    let dir = tempdir();
    let p = dir.path();
    let design = example("demo-design.json");
    let r = run_in(p, &["report", &design, "-o", "r.html", "--trials", "0"]);
    assert!(r.ok().contains("report written to r.html"), "{}", r.stdout);
    let html = std::fs::read_to_string(p.join("r.html")).unwrap_or_else(|e| panic!("{e}"));
    assert_self_contained(&html);
    assert_eq!(html.matches("<svg").count(), 4);
    assert!(html.contains("Not run"));
}

#[test]
fn bad_input_exits_2() {
    let dir = tempdir();
    let p = dir.path();
    let design = example("demo-design.json");
    run_in(p, &["report", &design]).bad_input();
    run_in(p, &["report", &design, "-o", &design]).bad_input();
    run_in(p, &["report", &design, "-o", "r.html", "--format", "csv"]).bad_input();
    run_in(p, &["report", &design, "-o", "r.html", "--series", "E7"]).bad_input();
    run_in(p, &["report", &design, "-o", "r.html", "--cap-tol", "120"]).bad_input();
    std::fs::write(p.join("garbage.json"), "{}").unwrap_or_else(|e| panic!("{e}"));
    run_in(p, &["report", "garbage.json", "-o", "r.html"]).bad_input();
    assert!(!p.join("r.html").exists(), "a failed run wrote its output");
}

#[test]
fn demo_writes_the_build_files() {
    let dir = tempdir();
    run_in(dir.path(), &["demo", "--out", "out"]).ok();
    let out = dir.path().join("out");
    let read =
        |f: &str| std::fs::read_to_string(out.join(f)).unwrap_or_else(|e| panic!("{f}: {e}"));
    let csv = read("parts.csv");
    assert!(csv.starts_with("ref,position,kind,"), "{csv}");
    assert!(read("parts.md").contains("| Ref | Position |"));
    let y: Value = serde_json::from_str(&read("yield.json")).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(y["trials"], 2000);
    assert!(read("envelope.svg").contains("<svg"));
    assert_self_contained(&read("report.html"));
    // The as-built design is a design record the other subcommands read.
    run_in(&out, &["analyze", "built-design.json", "--format", "json"]).json();
}
