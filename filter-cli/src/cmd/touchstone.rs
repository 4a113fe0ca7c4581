//! `xtal-ladder touchstone`: the predicted two-port of a design as a Touchstone 1.1 file.

use super::{check_output, passband_window, read_design, require_format, window};
use crate::files;
use crate::flags::{DataFormatArg, Format, TouchstoneCmd};
use anyhow::{Context, Result};
use filter_core::design::Design;
use filter_core::io::touchstone::{write_s2p, TouchstoneFormat, TwoPortData};
use filter_core::network::{Analyze, FrequencyGrid, Ladder};
use std::io::Write;

/// Points of the default file.
const DEFAULT_POINTS: usize = 2001;

/// Run `touchstone`.
pub fn run(cmd: &TouchstoneCmd, format: Format) -> Result<()> {
    require_format(
        format,
        &[Format::Text],
        "touchstone (the file is Touchstone text)",
    )?;
    if let Some(out) = &cmd.output.output {
        check_output(out, std::slice::from_ref(&cmd.design))?;
    }
    let design = read_design(&cmd.design)?;
    let data_format = match cmd.data_format {
        DataFormatArg::Ri => TouchstoneFormat::RealImaginary,
        DataFormatArg::Ma => TouchstoneFormat::MagnitudeAngle,
        DataFormatArg::Db => TouchstoneFormat::DecibelAngle,
    };
    let win = window(&cmd.range, passband_window(&design), DEFAULT_POINTS)?;
    let reference = cmd.reference.map_or(design.source_ohm, f64::from);
    let (data, comment) = two_port(&design, win.from_hz, win.to_hz, win.points, reference)?;
    let fill = |w: &mut dyn Write| -> Result<()> {
        write_s2p(&data, data_format, &comment, &mut &mut *w).context("touchstone")?;
        Ok(())
    };
    match &cmd.output.output {
        Some(path) => files::write_atomic(path, fill),
        None => files::write_stdout(fill),
    }
}

/// The design's S-parameters referred to `reference_ohm` at both ports, with a comment that
/// states the design's own terminations.
///
/// The circuit is analysed between `reference_ohm` terminations, which gives S11, S21 and S22
/// referred to that resistance; S12 = S21 because the ladder is passive and reciprocal.
pub fn two_port(
    design: &Design,
    from_hz: f64,
    to_hz: f64,
    points: usize,
    reference_ohm: f64,
) -> Result<(TwoPortData, String)> {
    let ladder = design.to_ladder().context("design")?;
    let referred = Ladder::new(reference_ohm, reference_ohm, ladder.stages().to_vec())
        .context("--reference")?;
    let grid = FrequencyGrid::linear(from_hz, to_hz, points).context("range")?;
    let sweep = referred.sweep(&grid);
    let s = sweep
        .s11
        .iter()
        .zip(&sweep.s21)
        .zip(&sweep.s22)
        .map(|((s11, s21), s22)| [*s11, *s21, *s21, *s22])
        .collect();
    let data = TwoPortData {
        reference_ohm,
        f_hz: sweep.f_hz.clone(),
        s,
    };
    let comment = format!(
        "{}\nTouchstone 1.1, S-parameters referred to {} ohm at both ports.\n\
         The design's terminations: source {} ohm (port 1), load {} ohm (port 2).",
        super::netlist::spice_title(design),
        reference_ohm,
        design.source_ohm,
        design.load_ohm
    );
    Ok((data, comment))
}
