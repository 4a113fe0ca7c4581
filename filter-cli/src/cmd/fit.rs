//! `xtal-ladder fit`: crystal parameters fitted to swept S21 measurements.

use super::{check_output, crystal_json, print_json, print_text};
use crate::errors::bad_hint;
use crate::files;
use crate::flags::{FitCmd, Format};
use crate::progress::Progress;
use crate::text;
use anyhow::{Context, Result};
use filter_core::io::sweep_csv::parse_sweep_csv;
use filter_core::io::touchstone::{parse_s2p, trace_from_s21_only, trace_from_s2p};
use filter_core::io::MeasuredTrace;
use filter_core::measure::{fit_sweep, fixture_s21, FitReport, FixtureSpec};
use filter_core::network::db;
use filter_core::plot::{fit_overlay_svg, FrequencyAxis, PlotOptions};
use serde_json::{json, Value};
use std::path::{Path, PathBuf};

/// Fixture resistance when neither the option nor the file gives one, Ω (the usual 50 Ω
/// instrument system).
const DEFAULT_FIXTURE_OHMS: f64 = 50.0;

/// One fitted sweep.
pub struct Fitted {
    /// Where the sweep came from.
    pub path: PathBuf,
    /// The trace as read.
    pub trace: MeasuredTrace,
    /// The fixture the fit assumed.
    pub fixture: FixtureSpec,
    /// The fit.
    pub report: FitReport,
}

/// Run `fit`.
pub fn run(cmd: &FitCmd, format: Format) -> Result<()> {
    for out in [cmd.output.output.as_ref(), cmd.plot.as_ref()]
        .into_iter()
        .flatten()
    {
        check_output(out, &cmd.sweeps)?;
    }
    let ids = ids_of(&cmd.sweeps)?;
    if let Some(plot) = &cmd.plot {
        for id in &ids {
            check_output(&plot_path(plot, id, ids.len()), &cmd.sweeps)?;
        }
    }
    let progress = Progress::new("fitting", cmd.sweeps.len());
    let mut fitted = Vec::with_capacity(cmd.sweeps.len());
    for (i, (path, id)) in cmd.sweeps.iter().zip(&ids).enumerate() {
        progress.step(i, id);
        let trace = read_trace(path)?;
        let r0 = cmd
            .fixture
            .fixture_ohms
            .map(f64::from)
            .or(trace.reference_ohm)
            .unwrap_or(DEFAULT_FIXTURE_OHMS);
        let fixture = FixtureSpec {
            r0_ohm: r0,
            extra_series_ohm: cmd.fixture.extra_series_ohms.0,
        };
        let report = fit_sweep(&trace, &fixture, id)
            .with_context(|| format!("fit of sweep '{}'", path.display()))?;
        fitted.push(Fitted {
            path: path.clone(),
            trace,
            fixture,
            report,
        });
    }
    drop(progress);
    if let Some(plot) = &cmd.plot {
        for (f, id) in fitted.iter().zip(&ids) {
            let svg = overlay_svg(f)?;
            files::write_bytes(&plot_path(plot, id, ids.len()), svg.as_bytes())?;
        }
    }
    let crystals: Vec<_> = fitted.iter().map(|f| f.report.crystal.clone()).collect();
    if let Some(out) = &cmd.output.output {
        files::write_atomic(out, |w| super::matching::write_batch(&crystals, w))?;
    }
    match format {
        Format::Csv => super::matching::print_batch_csv(&crystals),
        Format::Json => {
            let records = fitted.iter().map(record).collect::<Result<Vec<_>>>()?;
            match <[Value; 1]>::try_from(records) {
                Ok([one]) => print_json(&one),
                Err(many) => print_json(&json!({ "crystals": many })),
            }
        }
        Format::Text => {
            let mut s = String::new();
            for f in &fitted {
                s += &describe(f);
            }
            if let Some(out) = &cmd.output.output {
                s += &format!("batch of {} written to {}\n", crystals.len(), out.display());
            }
            if let Some(plot) = &cmd.plot {
                if ids.len() == 1 {
                    s += &format!("fit plot written to {}\n", plot.display());
                } else {
                    s += &format!(
                        "fit plots written to {}\n",
                        plot_path(plot, "ID", 2).display()
                    );
                }
            }
            print_text(&s)
        }
    }
}

/// The crystal id of each sweep: its file name without the extension.
///
/// # Errors
/// A path without a file name, or two sweeps with the same id (bad input).
pub fn ids_of(paths: &[PathBuf]) -> Result<Vec<String>> {
    let mut ids: Vec<String> = Vec::with_capacity(paths.len());
    for p in paths {
        let Some(stem) = p.file_stem().map(|s| s.to_string_lossy().into_owned()) else {
            return Err(bad_hint(
                format!("sweep '{}' has no file name", p.display()),
                "give sweep files such as x01.csv or x01.s2p",
            ));
        };
        if ids.contains(&stem) {
            return Err(bad_hint(
                format!(
                    "two sweeps give the crystal id '{stem}' (the id is the file name without \
                     its extension)"
                ),
                "rename one of them, or fit them in separate runs",
            ));
        }
        ids.push(stem);
    }
    Ok(ids)
}

/// The plot file of sweep `id`: `plot` itself for a single sweep, else `stem-id.svg`.
fn plot_path(plot: &Path, id: &str, count: usize) -> PathBuf {
    if count <= 1 {
        return plot.to_path_buf();
    }
    let stem = plot
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "fit".into());
    let ext = plot
        .extension()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "svg".into());
    plot.with_file_name(format!("{stem}-{id}.{ext}"))
}

/// Read a sweep: Touchstone by extension (`.s2p`, or `.s1p` holding the S21 trace), else CSV.
///
/// # Errors
/// I/O (exit 1) or malformed content (exit 2), naming the file.
pub fn read_trace(path: &Path) -> Result<MeasuredTrace> {
    let text = files::read_text(path, "sweep")?;
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase())
        .unwrap_or_default();
    let ctx = || format!("sweep '{}'", path.display());
    match ext.as_str() {
        "s2p" => Ok(trace_from_s2p(&parse_s2p(&text).with_context(ctx)?)),
        "s1p" => trace_from_s21_only(&text).with_context(ctx),
        _ => parse_sweep_csv(&text).with_context(ctx),
    }
}

/// The fitted model's |S21| in dB at the trace's frequencies, in the same fixture.
pub fn fitted_db(f: &Fitted) -> Vec<f64> {
    f.trace
        .f_hz
        .iter()
        .map(|&hz| db(fixture_s21(&f.report.crystal, &f.fixture, hz)))
        .collect()
}

/// The overlay of measured and fitted traces.
///
/// # Errors
/// A trace the plot cannot draw.
pub fn overlay_svg(f: &Fitted) -> Result<String> {
    let r = &f.report;
    let title = format!(
        "Crystal {}: fs {}, Rm {}, Lm {}, C0 {}",
        r.crystal.id,
        text::freq(r.fs_hz),
        text::si(r.crystal.rm_ohm(), "Ω"),
        text::si(r.crystal.lm_h(), "H"),
        text::si(r.crystal.c0_f, "F"),
    );
    let opts = PlotOptions::new(title, FrequencyAxis::OffsetFrom { center_hz: r.fs_hz });
    fit_overlay_svg(&f.trace, &fitted_db(f), &opts).context("fit plot")
}

/// The JSON record of one fit: the crystal record with uncertainties and fit figures.
pub fn record(f: &Fitted) -> Result<Value> {
    let r = &f.report;
    let mut v = crystal_json(&r.crystal)?;
    if let Value::Object(map) = &mut v {
        map.insert(
            "sigma".into(),
            json!({
                "fs_hz": r.sigma.fs_hz,
                "rm_ohm": r.sigma.rm_ohm,
                "lm_h": r.sigma.lm_h,
                "cm_f": r.sigma.cm_f,
                "c0_f": r.sigma.c0_f,
            }),
        );
        map.insert("rms_residual_db".into(), json!(r.rms_residual_db));
        map.insert("poor_fit".into(), json!(r.poor_fit));
        map.insert("peak_hz".into(), json!(r.peak_hz));
        map.insert("used_phase".into(), json!(r.used_phase));
        map.insert("c0_held".into(), json!(r.c0_held));
        map.insert("fixture_ohms".into(), json!(f.fixture.r0_ohm));
        map.insert("fixture_slope_db".into(), json!(r.fixture_slope_db));
        map.insert("noise_floor_db".into(), json!(r.noise_floor_db));
        let spurious: Vec<Value> = r
            .spurious
            .iter()
            .map(|s| {
                json!({
                    "f_hz": s.f_hz,
                    "level_db": s.level_db,
                    "below_peak_db": s.below_peak_db,
                })
            })
            .collect();
        map.insert("spurious".into(), Value::Array(spurious));
        map.insert("warnings".into(), json!(r.warnings));
        map.insert(
            "recommended_sweep".into(),
            json!({
                "start_hz": r.recommended_sweep.start_hz,
                "stop_hz": r.recommended_sweep.stop_hz,
                "points": r.recommended_sweep.points,
            }),
        );
        map.insert("source".into(), json!(f.path.display().to_string()));
    }
    Ok(v)
}

/// A fit as readable text.
pub fn describe(f: &Fitted) -> String {
    let r = &f.report;
    let x = &r.crystal;
    let sig = &r.sigma;
    let mut s = format!(
        "crystal {} from {} ({}, {} fixture)\n",
        x.id,
        f.path.display(),
        if r.used_phase {
            "magnitude and phase"
        } else {
            "magnitude only"
        },
        text::si(f.fixture.r0_ohm, "Ω")
    );
    s += &format!(
        "  fs  {} ± {:.2} Hz   (transmission peak at {})\n",
        text::freq(r.fs_hz),
        sig.fs_hz,
        text::freq(r.peak_hz)
    );
    s += &format!("  fp  {}\n", text::finite(r.fp_hz, text::freq));
    s += &format!(
        "  Lm  {} ± {}\n",
        text::si(x.lm_h(), "H"),
        pct(sig.lm_h, x.lm_h())
    );
    s += &format!(
        "  Cm  {} ± {}\n",
        text::si(x.cm_f(), "F"),
        pct(sig.cm_f, x.cm_f())
    );
    s += &format!(
        "  Rm  {} ± {}\n",
        text::si(x.rm_ohm(), "Ω"),
        pct(sig.rm_ohm, x.rm_ohm())
    );
    s += &format!(
        "  C0  {}{}\n",
        text::si(x.c0_f, "F"),
        if r.c0_held {
            " (held, not fitted)".to_string()
        } else {
            format!(" ± {}", pct(sig.c0_f, x.c0_f))
        }
    );
    s += &format!("  Qu  {}\n", text::finite(x.qu(), |q| format!("{q:.0}")));
    s += &format!(
        "  rms residual {:.3} dB{}\n",
        r.rms_residual_db,
        if r.poor_fit { " (poor fit)" } else { "" }
    );
    for sp in &r.spurious {
        s += &format!(
            "  spurious response at {} ({}, {:.1} dB below the peak)\n",
            text::freq(sp.f_hz),
            text::db(sp.level_db),
            sp.below_peak_db
        );
    }
    for w in &r.warnings {
        s += &format!("  warning: {}\n", crate::errors::one_line(w));
    }
    s
}

/// A 1-sigma uncertainty as a percentage of the value.
fn pct(sigma: f64, value: f64) -> String {
    if value == 0.0 {
        return text::num(sigma, 3);
    }
    format!("{:.2} %", 100.0 * (sigma / value).abs())
}
