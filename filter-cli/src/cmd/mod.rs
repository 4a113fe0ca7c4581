//! The subcommands: each turns its checked flags into library values, calls `filter_core`, and
//! prints or writes the result. Helpers shared by several of them live here.

mod analyze;
mod crystal;
mod demo;
mod design;
mod fit;
mod matching;
mod netlist;
mod parts;
mod report;
mod shift;
mod touchstone;
mod yield_cmd;

use crate::errors::{bad, bad_hint};
use crate::files;
use crate::flags::{Command, CrystalArgs, Format, FormatArg, RangeArgs};
use anyhow::{Context, Result};
use filter_core::design::Design;
use filter_core::Crystal;
use serde_json::Value;
use std::path::{Path, PathBuf};

/// Run one subcommand.
///
/// # Errors
/// Everything that can go wrong, with context; [`crate::errors::classify`] picks the exit code.
pub fn run(command: Command, format: FormatArg) -> Result<()> {
    // Markdown is for the parts list; every other subcommand takes text, json or csv.
    let plain = || {
        format.plain().ok_or_else(|| {
            bad_hint(
                "--format md is only available for 'parts'",
                "use --format text, json or csv",
            )
        })
    };
    match command {
        Command::Crystal(c) => crystal::run(&c, plain()?),
        Command::Fit(c) => fit::run(&c, plain()?),
        Command::Shift(c) => shift::run(&c, plain()?),
        Command::Match(c) => matching::run(&c, plain()?),
        Command::Design(c) => design::run(&c, plain()?),
        Command::Analyze(c) => analyze::run(&c, plain()?),
        Command::Netlist(c) => netlist::run(&c, plain()?),
        Command::Touchstone(c) => touchstone::run(&c, plain()?),
        Command::Demo(c) => demo::run(&c, plain()?),
        Command::Parts(c) => parts::run(&c, format),
        Command::Yield(c) => yield_cmd::run(&c, plain()?),
        Command::Report(c) => report::run(&c, plain()?),
    }
}

/// Refuse a `--format` the subcommand has no use for.
fn require_format(format: Format, allowed: &[Format], subcommand: &str) -> Result<()> {
    if allowed.contains(&format) {
        return Ok(());
    }
    let names: Vec<&str> = allowed.iter().map(|f| f.name()).collect();
    Err(bad_hint(
        format!(
            "--format {} is not available for '{subcommand}'",
            format.name()
        ),
        format!("use --format {}", names.join(" or ")),
    ))
}

/// Print `value` as one pretty JSON object on stdout.
fn print_json(value: &Value) -> Result<()> {
    files::write_stdout(|w| {
        serde_json::to_writer_pretty(&mut *w, value).context("cannot write to stdout")?;
        writeln!(w)?;
        Ok(())
    })
}

/// Print text on stdout.
fn print_text(text: &str) -> Result<()> {
    files::write_stdout(|w| {
        w.write_all(text.as_bytes())?;
        Ok(())
    })
}

/// A serializable value as JSON.
fn to_json<T: serde::Serialize>(value: &T) -> Result<Value> {
    serde_json::to_value(value).context("cannot represent the result as JSON")
}

/// The crystal record as JSON, with `fp_hz` and `qu` always present (`null` when infinite:
/// no C0, or Rm = 0).
fn crystal_json(crystal: &Crystal) -> Result<Value> {
    let mut v = to_json(crystal)?;
    if let Value::Object(map) = &mut v {
        map.entry("fp_hz").or_insert(Value::Null);
        map.entry("qu").or_insert(Value::Null);
    }
    Ok(v)
}

/// The crystal described by `--fs --lm|--cm --rm --c0`, named `id`.
///
/// # Errors
/// A missing flag or a value the crystal model refuses (bad input).
fn crystal_from_args(args: &CrystalArgs, id: &str) -> Result<Crystal> {
    let missing = |flag: &str, what: &str, example: &str| {
        bad_hint(
            format!("the crystal needs {flag} ({what})"),
            format!("e.g. {flag} {example}; give --fs, --lm or --cm, --rm and --c0"),
        )
    };
    let fs = args
        .fs
        .ok_or_else(|| missing("--fs", "series-resonant frequency", "9.8268M"))?;
    let rm = args
        .rm
        .ok_or_else(|| missing("--rm", "motional resistance, 0 if unknown", "10"))?;
    let c0 = args
        .c0
        .ok_or_else(|| missing("--c0", "holder capacitance, 0 to leave it out", "3.9p"))?;
    let crystal = match (args.lm, args.cm) {
        (Some(lm), _) => Crystal::from_fs_lm(id, fs.0, lm.0, rm.0, c0.0),
        (None, Some(cm)) => Crystal::from_fs_cm(id, fs.0, cm.0, rm.0, c0.0),
        (None, None) => {
            return Err(missing(
                "--lm",
                "motional inductance, or --cm for the motional capacitance",
                "17m",
            ))
        }
    };
    crystal.context("crystal")
}

/// Read a design record.
///
/// # Errors
/// I/O (exit 1) or a malformed record (exit 2), naming the file.
fn read_design(path: &Path) -> Result<Design> {
    let text = files::read_text(path, "design")?;
    Design::from_json(&text).with_context(|| format!("design '{}'", path.display()))
}

/// A frequency window: first and last frequency and the number of points.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Window {
    from_hz: f64,
    to_hz: f64,
    points: usize,
}

/// The range the user asked for, or `default` (with `default_points`) when none was given.
///
/// # Errors
/// A range that is empty or reaches 0 Hz, or fewer than 2 points (bad input).
fn window(range: &RangeArgs, default: (f64, f64), default_points: usize) -> Result<Window> {
    let (from_hz, to_hz) = match (range.center, range.span, range.from, range.to) {
        (Some(c), Some(s), _, _) => {
            if s.0 <= 0.0 || s.0 / 2.0 >= c.0 {
                return Err(bad_hint(
                    format!(
                        "--span {} does not fit around --center {}",
                        crate::text::width(s.0),
                        crate::text::freq(c.0)
                    ),
                    "the span must be positive and less than twice the centre frequency",
                ));
            }
            (c.0 - s.0 / 2.0, c.0 + s.0 / 2.0)
        }
        (_, _, Some(a), Some(b)) => {
            if !(a.0 > 0.0 && b.0 > a.0) {
                return Err(bad_hint(
                    format!(
                        "--from {} and --to {} are not an increasing range",
                        crate::text::freq(a.0),
                        crate::text::freq(b.0)
                    ),
                    "give --to above --from, both above 0 Hz",
                ));
            }
            (a.0, b.0)
        }
        _ => default,
    };
    let points = range.points.unwrap_or(default_points);
    if !(2..=10_000_000).contains(&points) {
        return Err(bad_hint(
            format!("--points {points} is out of range"),
            "give 2 to 10000000 points",
        ));
    }
    Ok(Window {
        from_hz,
        to_hz,
        points,
    })
}

/// The default analysis window of a design: its passband and skirts, centred on the analysed
/// passband centre, wide enough to show the −60 dB points.
fn passband_window(design: &Design) -> (f64, f64) {
    let p = &design.performance;
    let centre = if p.center_hz.is_finite() && p.center_hz > 0.0 {
        p.center_hz
    } else {
        design.center_hz
    };
    let half = match p.bw_60db_hz {
        Some(b60) if b60.is_finite() && b60 > 0.0 => b60.max(2.5 * p.bw_3db_hz),
        _ => 2.5 * p.bw_3db_hz.max(design.spec.bandwidth_hz),
    };
    let half = if half.is_finite() && half > 0.0 {
        half
    } else {
        0.01 * centre
    };
    ((centre - half).max(centre * 0.5), centre + half)
}

/// The wide window: below the passband by several bandwidths, above it past the C0 notch of
/// every crystal and past every spurious mode.
fn wide_window(design: &Design) -> (f64, f64) {
    let (lo, hi) = passband_window(design);
    let centre = 0.5 * (lo + hi);
    let mut top = hi;
    for x in &design.crystals {
        let fp = x.fp_hz();
        if fp.is_finite() {
            top = top.max(x.fs_hz() + 2.0 * (fp - x.fs_hz()));
        }
        for s in &x.spurious {
            top = top.max(s.fs_hz() + (hi - centre));
        }
    }
    let below = (top - centre).min(centre * 0.5);
    (centre - below * 0.6, top)
}

/// Paths given as inputs, for the overwrite check.
fn inputs<'a>(paths: impl IntoIterator<Item = &'a PathBuf>) -> Vec<PathBuf> {
    paths.into_iter().cloned().collect()
}

/// Refuse `output` when it is an input, or report that nothing would be written.
fn check_output(output: &Path, inputs: &[PathBuf]) -> Result<()> {
    files::check_not_input(output, inputs)
}

/// The family of a design as people say it: `Chebyshev 0.1 dB`.
fn family_label(family: &filter_core::design::ResponseFamily) -> String {
    use filter_core::design::ResponseFamily as F;
    match family {
        F::Butterworth => "Butterworth".to_string(),
        F::Chebyshev { ripple_db } => format!("Chebyshev {ripple_db} dB"),
        F::Bessel => "Bessel".to_string(),
        F::Gaussian => "Gaussian".to_string(),
        F::Legendre => "Legendre".to_string(),
        F::EqualC => "equal-C".to_string(),
        F::Poles { re, .. } => format!("all-pole ({} poles)", re.len()),
    }
}

/// Refuse a value that makes no sense here.
fn refuse_zero(count: usize, flag: &str) -> Result<()> {
    if count == 0 {
        return Err(bad(format!("{flag} 0 is not valid; give 1 or more")));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crystal_json_has_null_for_infinite_values() {
        let x = Crystal::from_fs_lm("a", 9e6, 15e-3, 0.0, 0.0).unwrap();
        let v = crystal_json(&x).unwrap();
        assert_eq!(v["fp_hz"], Value::Null);
        assert_eq!(v["qu"], Value::Null);
        assert_eq!(v["id"], "a");
    }

    #[test]
    fn windows_from_flags() {
        let r = RangeArgs {
            center: Some("9M".parse().unwrap()),
            span: Some("10k".parse().unwrap()),
            from: None,
            to: None,
            points: None,
        };
        let w = window(&r, (1.0, 2.0), 101).unwrap();
        assert_eq!((w.from_hz, w.to_hz, w.points), (8.995e6, 9.005e6, 101));
        let r = RangeArgs {
            center: Some("9M".parse().unwrap()),
            span: Some("20M".parse().unwrap()),
            from: None,
            to: None,
            points: None,
        };
        assert!(window(&r, (1.0, 2.0), 101).is_err());
    }
}
