//! `xtal-ladder match`: matched sets from a batch file; batch-file reading and writing for the
//! other subcommands.

use super::{check_output, print_json, print_text, refuse_zero};
use crate::files;
use crate::flags::{Format, MatchCmd};
use crate::text;
use anyhow::{Context, Result};
use filter_core::batch::{
    default_tolerance, match_crystals, parse_batch_csv, write_batch_csv, BatchDefaults,
    MatchRequest, MatchedSet,
};
use filter_core::Crystal;
use serde_json::{json, Value};
use std::io::Write;
use std::path::Path;

/// Run `match`.
pub fn run(cmd: &MatchCmd, format: Format) -> Result<()> {
    refuse_zero(cmd.count, "--count")?;
    refuse_zero(cmd.sets, "--sets")?;
    if let Some(out) = &cmd.output.output {
        check_output(out, std::slice::from_ref(&cmd.batch))?;
    }
    let defaults = BatchDefaults {
        lm_h: cmd.lm_default.map(f64::from),
        c0_f: cmd.c0_default.map(f64::from),
        rm_ohm: cmd.rm_default.map(f64::from),
    };
    let batch = read_batch(&cmd.batch, &defaults)?;
    let tolerance_hz = cmd
        .tolerance
        .map(f64::from)
        .or_else(|| cmd.bandwidth.map(|b| default_tolerance(b.0)));
    let spec = MatchRequest {
        count: cmd.count,
        sets: cmd.sets,
        tolerance_hz,
    };
    let result = match_crystals(&batch, &spec)
        .with_context(|| format!("match of '{}'", cmd.batch.display()))?;
    if let Some(out) = &cmd.output.output {
        let first: Vec<Crystal> = result
            .sets
            .first()
            .map(|s| {
                s.ids
                    .iter()
                    .filter_map(|id| batch.iter().find(|x| &x.id == id).cloned())
                    .collect()
            })
            .unwrap_or_default();
        files::write_atomic(out, |w| write_batch(&first, w))?;
    }
    match format {
        Format::Json => print_json(&json!({
            "sets": result.sets.iter().map(set_json).collect::<Vec<_>>(),
            "rejected": result
                .rejected
                .iter()
                .map(|r| json!({"id": r.id, "reason": r.reason}))
                .collect::<Vec<_>>(),
            "tolerance_hz": tolerance_hz,
        })),
        Format::Csv => files::write_stdout(|w| {
            writeln!(w, "set,id,fs_hz")?;
            for (k, s) in result.sets.iter().enumerate() {
                for id in &s.ids {
                    let fs = batch
                        .iter()
                        .find(|x| &x.id == id)
                        .map_or(f64::NAN, |x| x.fs_hz());
                    writeln!(w, "{},{id},{}", k + 1, zmij::Buffer::new().format(fs))?;
                }
            }
            Ok(())
        }),
        Format::Text => {
            let mut s = format!(
                "{} crystals in {}; sets of {}{}\n",
                batch.len(),
                cmd.batch.display(),
                cmd.count,
                match tolerance_hz {
                    Some(t) => format!(" within {} of fs spread", text::width(t)),
                    None => String::new(),
                }
            );
            if result.sets.is_empty() {
                s += "no set found: the batch holds too few crystals within the tolerance\n";
            }
            for (k, set) in result.sets.iter().enumerate() {
                s += &format!(
                    "set {}: {}  (fs spread {}, mean fs {})\n",
                    k + 1,
                    set.ids.join(" "),
                    text::width(set.spread_hz),
                    text::freq(set.mean_fs_hz)
                );
            }
            for r in &result.rejected {
                s += &format!("rejected {}: {}\n", r.id, r.reason);
            }
            if let Some(out) = &cmd.output.output {
                s += &format!("first set written to {}\n", out.display());
            }
            print_text(&s)
        }
    }
}

/// One set as JSON: `{"ids": [...], "spread_hz": ..., "mean_fs_hz": ...}`.
pub fn set_json(set: &MatchedSet) -> Value {
    json!({
        "ids": set.ids,
        "spread_hz": set.spread_hz,
        "mean_fs_hz": set.mean_fs_hz,
    })
}

/// Read a batch file, filling missing values from the defaults.
///
/// # Errors
/// I/O (exit 1) or malformed content (exit 2), naming the file.
pub fn read_batch(path: &Path, defaults: &BatchDefaults) -> Result<Vec<Crystal>> {
    let text = files::read_text(path, "batch file")?;
    parse_batch_csv(&text, defaults).with_context(|| format!("batch file '{}'", path.display()))
}

/// Write crystals as a batch CSV (`id,fs_hz,rm_ohm,lm_h,cm_f,c0_f`).
///
/// # Errors
/// I/O errors of `w`.
pub fn write_batch(crystals: &[Crystal], w: &mut dyn Write) -> Result<()> {
    write_batch_csv(crystals, &mut &mut *w).context("batch file")?;
    Ok(())
}

/// Print crystals as a batch CSV on stdout.
///
/// # Errors
/// I/O errors.
pub fn print_batch_csv(crystals: &[Crystal]) -> Result<()> {
    files::write_stdout(|w| write_batch(crystals, w))
}
