//! `xtal-ladder analyze`: metrics of a design, its response as CSV, and plots.

use super::{
    check_output, family_label, passband_window, print_json, print_text, read_design, wide_window,
    window, Window,
};
use crate::files;
use crate::flags::{AnalyzeCmd, AxisArg, Format};
use crate::text;
use anyhow::{Context, Result};
use filter_core::design::Design;
use filter_core::metrics::{evaluate_sweep, Performance};
use filter_core::network::{db, phase_deg, Analyze, FrequencyGrid, Ladder, Outputs, Sweep};
use filter_core::plot::{
    group_delay_svg, return_loss_svg, transmission_svg, wide_svg, FrequencyAxis, PlotOptions,
};
use serde_json::json;
use std::io::Write;
use std::path::PathBuf;

/// Points of the default analysis.
const DEFAULT_POINTS: usize = 2001;
/// Points of the default wide analysis.
const DEFAULT_WIDE_POINTS: usize = 4001;

/// Repeats of the sweep timed by `--timing` after the first.
const TIMING_REPEATS: usize = 20;

/// The CSV header of `analyze --format csv` (a contract other tools rely on).
pub const CSV_HEADER: &str = "frequency_hz,s21_db,s21_deg,s11_db,group_delay_s";

/// Run `analyze`.
pub fn run(cmd: &AnalyzeCmd, format: Format) -> Result<()> {
    let ins = vec![cmd.design.clone()];
    let outputs: Vec<&PathBuf> = [
        cmd.output.output.as_ref(),
        cmd.plot.as_ref(),
        cmd.return_loss_plot.as_ref(),
        cmd.delay_plot.as_ref(),
    ]
    .into_iter()
    .flatten()
    .collect();
    for out in &outputs {
        check_output(out, &ins)?;
    }
    let design = read_design(&cmd.design)?;
    let ladder = match cmd.match_to {
        None => design.to_ladder(),
        Some(r0) => filter_core::impedance_match::ladder_with_matching(
            &design,
            f64::from(r0),
            match cmd.match_form {
                crate::flags::AnalyzeMatchForm::Lowpass => {
                    filter_core::impedance_match::LForm::LowPass
                }
                crate::flags::AnalyzeMatchForm::Highpass => {
                    filter_core::impedance_match::LForm::HighPass
                }
            },
        ),
    }
    .with_context(|| format!("design '{}'", cmd.design.display()))?;
    let (default, points) = if cmd.wide {
        (wide_window(&design), DEFAULT_WIDE_POINTS)
    } else {
        (passband_window(&design), DEFAULT_POINTS)
    };
    let win = window(&cmd.range, default, points)?;
    let started = std::time::Instant::now();
    let sweep = sweep_of(&ladder, &win)?;
    if cmd.timing {
        let first = started.elapsed().as_secs_f64();
        // Warm: the same sweep again into one reused buffer (as a refinement loop would).
        let grid = FrequencyGrid::linear(win.from_hz, win.to_hz, win.points).context("range")?;
        let mut reused = Sweep::default();
        let mut again: Vec<f64> = (0..TIMING_REPEATS)
            .map(|_| {
                let t = std::time::Instant::now();
                ladder.sweep_outputs_into(&grid, Outputs::NoS22, std::hint::black_box(&mut reused));
                t.elapsed().as_secs_f64()
            })
            .collect();
        again.sort_by(f64::total_cmp);
        eprintln!(
            "analysis: {:.3} ms for {} points (first sweep); {:.3} ms (median of {} repeats)",
            first * 1e3,
            win.points,
            again[TIMING_REPEATS / 2] * 1e3,
            TIMING_REPEATS
        );
    }
    // The figures are refined on the circuit, so they do not depend on the grid. Text, JSON
    // and the plots (titles, markers) need them; a bare table does not. A table of part of the
    // response (say one skirt) has no passband, so CSV output goes on without them.
    let plots = cmd.plot.is_some() || cmd.return_loss_plot.is_some() || cmd.delay_plot.is_some();
    let metrics = if format == Format::Csv && !plots {
        None
    } else {
        let refined = std::time::Instant::now();
        let metrics = evaluate_sweep(&ladder, &sweep).context("analysis window");
        if cmd.timing {
            eprintln!(
                "figures: {:.3} ms (crossings and extrema refined on the circuit)",
                refined.elapsed().as_secs_f64() * 1e3
            );
        }
        match (metrics, format) {
            (Ok(p), _) => Some(p),
            (Err(_), Format::Csv) => None,
            (Err(e), _) => return Err(e),
        }
    };
    let axis = match cmd.axis {
        AxisArg::Offset => FrequencyAxis::OffsetFrom {
            center_hz: metrics.map_or(design.center_hz, |p| p.center_hz),
        },
        AxisArg::Absolute => FrequencyAxis::AbsoluteMhz,
    };
    let title = plot_title(&design, metrics.as_ref());
    if let Some(path) = &cmd.plot {
        let mut opts = PlotOptions::new(title.clone(), axis);
        opts.linear = cmd.linear;
        let svg = if cmd.wide {
            let (notches, spurious) =
                notches_and_spurious(&design, (win.to_hz - win.from_hz) / 50.0);
            wide_svg(&sweep, metrics.as_ref(), &notches, &spurious, &opts)
        } else {
            transmission_svg(&sweep, metrics.as_ref(), &opts)
        }
        .context("transmission plot")?;
        files::write_bytes(path, svg.as_bytes())?;
    }
    if let Some(path) = &cmd.return_loss_plot {
        let opts = PlotOptions::new(title.clone(), axis);
        let svg = return_loss_svg(&sweep, metrics.as_ref(), &opts).context("return-loss plot")?;
        files::write_bytes(path, svg.as_bytes())?;
    }
    if let Some(path) = &cmd.delay_plot {
        let opts = PlotOptions::new(title, axis);
        let svg = group_delay_svg(&sweep, metrics.as_ref(), &opts).context("group-delay plot")?;
        files::write_bytes(path, svg.as_bytes())?;
    }
    if let Some(path) = &cmd.output.output {
        files::write_atomic(path, |w| write_csv(&sweep, w))?;
    }
    match format {
        Format::Csv => {
            if cmd.output.output.is_none() {
                let written = std::time::Instant::now();
                files::write_stdout(|w| write_csv(&sweep, w))?;
                if cmd.timing {
                    eprintln!(
                        "table: {:.3} ms for {} rows",
                        written.elapsed().as_secs_f64() * 1e3,
                        sweep.f_hz.len()
                    );
                }
            }
            Ok(())
        }
        Format::Json => print_json(&json!({
            "design": cmd.design.display().to_string(),
            "center_hz": design.center_hz,
            "from_hz": win.from_hz,
            "to_hz": win.to_hz,
            "points": win.points,
            "performance": super::to_json(&metrics)?,
        })),
        Format::Text => {
            let mut s = format!(
                "analysis of {} from {} to {} ({} points)\n",
                cmd.design.display(),
                text::freq(win.from_hz),
                text::freq(win.to_hz),
                win.points
            );
            if let Some(p) = &metrics {
                s += &super::design::performance_text(p);
            }
            for (what, path) in [
                ("response table", cmd.output.output.as_ref()),
                ("transmission plot", cmd.plot.as_ref()),
                ("return-loss plot", cmd.return_loss_plot.as_ref()),
                ("group-delay plot", cmd.delay_plot.as_ref()),
            ] {
                if let Some(p) = path {
                    s += &format!("{what} written to {}\n", p.display());
                }
            }
            print_text(&s)
        }
    }
}

/// The response on the window's grid: S21, S11 and the group delay (all that the table, the
/// figures and the plots use; S22 is left out).
pub fn sweep_of(ladder: &Ladder, win: &Window) -> Result<Sweep> {
    let grid = FrequencyGrid::linear(win.from_hz, win.to_hz, win.points).context("range")?;
    let mut sweep = Sweep::default();
    ladder.sweep_outputs_into(&grid, Outputs::NoS22, &mut sweep);
    Ok(sweep)
}

/// The C0 notches (parallel resonances) and spurious modes of the crystals, for the wide plot's
/// markers; markers closer than `min_gap_hz` to the previous one are dropped, so that equal
/// crystals give one label, not eight.
pub fn notches_and_spurious(design: &Design, min_gap_hz: f64) -> (Vec<f64>, Vec<f64>) {
    let thin = |mut f: Vec<f64>| {
        f.retain(|x| x.is_finite());
        f.sort_by(f64::total_cmp);
        let mut out: Vec<f64> = Vec::with_capacity(f.len());
        for x in f {
            match out.last() {
                Some(last) if x - last < min_gap_hz => {}
                _ => out.push(x),
            }
        }
        out
    };
    let notches = thin(design.crystals.iter().map(|x| x.fp_hz()).collect());
    let spurious = thin(
        design
            .crystals
            .iter()
            .flat_map(|x| x.spurious.iter().map(|b| b.fs_hz()))
            .collect(),
    );
    (notches, spurious)
}

/// A plot title with the design's key figures.
pub fn plot_title(design: &Design, p: Option<&Performance>) -> String {
    let mut t = format!(
        "{}, {} crystals, centre {}",
        family_label(&design.spec.family),
        design.order(),
        text::freq(p.map_or(design.center_hz, |p| p.center_hz))
    );
    if let Some(p) = p {
        t += &format!(
            ": −6 dB {}, loss {}, ripple {}",
            text::width(p.bw_6db_hz),
            text::db(p.insertion_loss_db),
            text::db(p.ripple_db)
        );
        if let Some(sf) = p.shape_factor_60_6 {
            t += &format!(", shape factor {}", text::num(sf, 3));
        }
    }
    t
}

/// Rows formatted between two writes.
const ROWS_PER_BLOCK: usize = 512;

/// Write the response table: `frequency_hz,s21_db,s21_deg,s11_db,group_delay_s`, shortest
/// round-trip floats, through the caller's writer, in blocks of rows formatted into one reused
/// buffer (so that a long table costs no more memory than a short one).
pub fn write_csv(sweep: &Sweep, w: &mut dyn Write) -> Result<()> {
    w.write_all(CSV_HEADER.as_bytes())?;
    w.write_all(b"\n")?;
    let mut text = Vec::with_capacity(ROWS_PER_BLOCK * 96);
    let mut start = 0;
    while start < sweep.len() {
        let end = (start + ROWS_PER_BLOCK).min(sweep.len());
        text.clear();
        format_rows(sweep, start..end, &mut text);
        w.write_all(&text)?;
        start = end;
    }
    Ok(())
}

/// Append the CSV lines of `rows` to `out`.
fn format_rows(sweep: &Sweep, rows: std::ops::Range<usize>, out: &mut Vec<u8>) {
    let mut buf = zmij::Buffer::new();
    for i in rows {
        let s21 = sweep.s21[i];
        let values = [
            sweep.f_hz[i],
            db(s21),
            phase_deg(s21),
            db(sweep.s11[i]),
            sweep.group_delay_s[i],
        ];
        for (k, v) in values.into_iter().enumerate() {
            if k > 0 {
                out.push(b',');
            }
            out.extend_from_slice(buf.format(v).as_bytes());
        }
        out.push(b'\n');
    }
}
