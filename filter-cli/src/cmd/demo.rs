//! `xtal-ladder demo`: the whole job on the built-in measurements.
//!
//! The scenario (all data invented, see [`crate::demo_data`]): a builder has a lot of 36
//! surplus crystals marked 9.8304 MHz, a 50 Ω series through-fixture, and wants a 2.4 kHz
//! (−6 dB) SSB filter of 8 crystals with a 0.1 dB Chebyshev passband. The demo fits every
//! sweep, sets aside crystals with a spurious response, matches the best 8 of the rest,
//! designs the ladder for exactly those crystals with refinement, analyzes it, plots it, and
//! writes the design, the netlist, the Touchstone file and the batch file.
//!
//! # The output directory
//! DIR must not exist, be empty, or be a directory this demo wrote before (it holds the marker
//! file [`MARKER`]). Only the names in [`DEMO_FILES`] (and the marker) are ever written there;
//! other files in DIR are left alone. Anything else is refused with exit code 2.

use super::analyze::{notches_and_spurious, plot_title, sweep_of, write_csv};
use super::fit::{overlay_svg, Fitted};
use super::{family_label, print_json, print_text, require_format, Window};
use crate::demo_data::{EmbeddedSweep, MARKED_HZ, SWEEPS};
use crate::errors::bad_hint;
use crate::files;
use crate::flags::{DemoCmd, Format};
use crate::progress::Progress;
use crate::text;
use anyhow::{Context, Result};
use filter_core::batch::{
    default_tolerance, match_crystals, parse_batch_csv, BatchDefaults, MatchRequest,
};
use filter_core::design::{BandwidthAt, Design, ResponseFamily};
use filter_core::io::spice::{spice_netlist, AcSweep};
use filter_core::io::sweep_csv::parse_sweep_csv;
use filter_core::io::touchstone::{parse_s2p, trace_from_s2p, write_s2p, TouchstoneFormat};
use filter_core::measure::{fit_sweep, FixtureSpec};
use filter_core::metrics::evaluate;
use filter_core::plot::{
    group_delay_svg, return_loss_svg, transmission_svg, wide_svg, FrequencyAxis, PlotOptions,
};
use filter_core::synthesis::LadderSpec;
use serde_json::json;
use std::fs;
use std::path::{Path, PathBuf};

/// The marker file that says a directory was written by this demo.
pub const MARKER: &str = ".xtal-ladder-demo";

/// Every file the demo writes (besides the marker).
pub const DEMO_FILES: [&str; 19] = [
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
    "parts.csv",
    "parts.md",
    "built-design.json",
    "yield.json",
    "envelope.svg",
    "report.html",
];

/// The filter the builder wants.
const ORDER: usize = 8;
const BANDWIDTH_HZ: f64 = 2400.0;
const RIPPLE_DB: f64 = 0.1;
const FIXTURE_OHMS: f64 = 50.0;
/// A crystal whose spurious response comes within this many dB of its main peak is set aside
/// before matching (our threshold: such a response would open a second passband in the
/// filter's stopband).
const STRONG_SPURIOUS_DB: f64 = 20.0;

/// Run `demo`.
pub fn run(cmd: &DemoCmd, format: Format) -> Result<()> {
    require_format(format, &[Format::Text, Format::Json], "demo")?;
    let dir = &cmd.out;
    prepare_dir(dir)?;
    let mut log = String::new();
    let path = |name: &str| dir.join(name);

    // 1. Measure: fit every sweep; the batch file is what `xtal-ladder fit -o` writes, and the
    // rest of the job reads the crystals back from it, as a builder running the steps would.
    let fitted = fit_all(&SWEEPS)?;
    let fitted_crystals: Vec<_> = fitted.iter().map(|f| f.report.crystal.clone()).collect();
    let mut batch_text = Vec::new();
    super::matching::write_batch(&fitted_crystals, &mut batch_text)?;
    files::write_bytes(&path("batch.csv"), &batch_text)?;
    let crystals = parse_batch_csv(
        &String::from_utf8_lossy(&batch_text),
        &BatchDefaults::default(),
    )
    .context("the demo's batch file")?;
    for id in ["x01", "x23"] {
        if let Some(f) = fitted.iter().find(|f| f.report.crystal.id == id) {
            let svg = overlay_svg(f)?;
            files::write_bytes(&path(&format!("fit-{id}.svg")), svg.as_bytes())?;
        }
    }
    let worst_rms = fitted
        .iter()
        .map(|f| f.report.rms_residual_db)
        .fold(0.0, f64::max);
    let mut fs: Vec<f64> = crystals.iter().map(|x| x.fs_hz()).collect();
    fs.sort_by(f64::total_cmp);
    log += &format!(
        "1. measure: fitted {} sweeps of crystals marked {} in a {} fixture \
         (worst rms residual {:.3} dB); fs from {} to {}\n",
        fitted.len(),
        text::freq(MARKED_HZ),
        text::si(FIXTURE_OHMS, "Ω"),
        worst_rms,
        text::freq(fs.first().copied().unwrap_or(f64::NAN)),
        text::freq(fs.last().copied().unwrap_or(f64::NAN)),
    );
    let mut set_aside: Vec<String> = Vec::new();
    let mut weaker = 0;
    for f in &fitted {
        let strong: Vec<_> = f
            .report
            .spurious
            .iter()
            .filter(|s| s.below_peak_db > 0.0 && s.below_peak_db <= STRONG_SPURIOUS_DB)
            .collect();
        if strong.is_empty() {
            weaker += usize::from(!f.report.spurious.is_empty());
            continue;
        }
        for s in strong {
            log += &format!(
                "   {}: spurious response at {} ({} above fs), {:.1} dB below its peak\n",
                f.report.crystal.id,
                text::freq(s.f_hz),
                text::width(s.f_hz - f.report.fs_hz),
                s.below_peak_db
            );
        }
        set_aside.push(f.report.crystal.id.clone());
    }
    log += &format!(
        "   set aside (a spurious response within {STRONG_SPURIOUS_DB} dB of the main peak): {}; \
         {weaker} more crystals show weaker responses and stay in\n",
        if set_aside.is_empty() {
            "none".to_string()
        } else {
            set_aside.join(" ")
        }
    );
    log += "   wrote batch.csv, fit-x01.svg, fit-x23.svg\n";

    // 2. Match the best 8 of the crystals that are not set aside.
    let candidates: Vec<_> = crystals
        .iter()
        .filter(|x| !set_aside.contains(&x.id))
        .cloned()
        .collect();
    let tolerance_hz = default_tolerance(BANDWIDTH_HZ);
    let spec = MatchRequest {
        count: ORDER,
        sets: 1,
        tolerance_hz: Some(tolerance_hz),
    };
    let matched = match_crystals(&candidates, &spec).context("matching")?;
    let Some(set) = matched.sets.first() else {
        return Err(anyhow::anyhow!(
            "matching found no set of {ORDER} crystals in the demo lot"
        ));
    };
    let chosen: Vec<_> = set
        .ids
        .iter()
        .filter_map(|id| crystals.iter().find(|x| &x.id == id).cloned())
        .collect();
    files::write_atomic(&path("matched.csv"), |w| {
        super::matching::write_batch(&chosen, w)
    })?;
    log += &format!(
        "2. match: best {ORDER} within {}: {} (fs spread {}, mean {})\n",
        text::width(tolerance_hz),
        set.ids.join(" "),
        text::width(set.spread_hz),
        text::freq(set.mean_fs_hz)
    );
    for r in &matched.rejected {
        log += &format!("   rejected {}: {}\n", r.id, r.reason);
    }
    log += "   wrote matched.csv\n";

    // 3. Design for exactly these crystals, refined on the exact model.
    let spec = LadderSpec {
        family: ResponseFamily::Chebyshev {
            ripple_db: RIPPLE_DB,
        },
        bandwidth_hz: BANDWIDTH_HZ,
        bandwidth_at: BandwidthAt::Db6,
        predistort: false,
        refine: true,
        crystals: chosen,
    };
    let design = spec.synthesize().context("design")?;
    let json_text = design.to_json();
    files::write_atomic(&path("design.json"), |w| {
        w.write_all(json_text.as_bytes())?;
        writeln!(w)?;
        Ok(())
    })?;
    let p = &design.performance;
    log += &format!(
        "3. design: {}, {} crystals, {} at −6 dB, refined: terminations {} / {}, \
         centre {}; loss {}, ripple {}, return loss {}, −60 dB {}, shape factor {}\n",
        family_label(&design.spec.family),
        design.order(),
        text::width(BANDWIDTH_HZ),
        text::si(design.source_ohm, "Ω"),
        text::si(design.load_ohm, "Ω"),
        text::freq(p.center_hz),
        text::db(p.insertion_loss_db),
        text::db(p.ripple_db),
        text::db(p.return_loss_db),
        text::opt(p.bw_60db_hz, text::width),
        text::opt(p.shape_factor_60_6, |v| text::num(v, 3)),
    );
    for w in &design.warnings {
        log += &format!("   warning: {w}\n");
    }
    log += "   wrote design.json\n";

    // 4. Analyze and plot.
    let analysis = analyze_and_plot(&design, dir)?;
    log += &format!(
        "4. analyze: −3 dB {}, −6 dB {}, group delay {} at the centre\n",
        text::width(analysis.bw_3db_hz),
        text::width(analysis.bw_6db_hz),
        text::si(analysis.group_delay_center_s, "s")
    );
    log += "   wrote response.csv, transmission.svg, transmission-linear.svg, return-loss.svg, \
            group-delay.svg, wide.svg\n";

    // 5. Export.
    export(&design, dir)?;
    log +=
        "5. export: wrote filter.cir (SPICE, runs in ngspice -b) and filter.s2p (Touchstone 1.1)\n";

    // 6. Build: parts from the drawer, the yield of the as-built ladder, the report page.
    log += &build(&design, dir)?;
    write_marker(dir)?;
    log += &format!("all files are in {}\n", dir.display());

    match format {
        Format::Json => print_json(&json!({
            "out": dir.display().to_string(),
            "files": DEMO_FILES,
            "fitted": fitted.len(),
            "set_aside": set_aside,
            "matched": super::matching::set_json(set),
            "rejected": matched.rejected.iter().map(|r| json!({"id": r.id, "reason": r.reason})).collect::<Vec<_>>(),
            "design": super::to_json(&design)?,
        })),
        _ => print_text(&log),
    }
}

/// Make sure DIR may be written: new, empty, or written by this demo before.
fn prepare_dir(dir: &Path) -> Result<()> {
    match fs::metadata(dir) {
        Err(_) => fs::create_dir_all(dir)
            .with_context(|| format!("cannot create directory '{}'", dir.display())),
        Ok(m) if !m.is_dir() => Err(bad_hint(
            format!("--out '{}' exists and is not a directory", dir.display()),
            "give a new directory name",
        )),
        Ok(_) => {
            if dir.join(MARKER).exists() {
                return Ok(());
            }
            let mut entries = fs::read_dir(dir)
                .with_context(|| format!("cannot read directory '{}'", dir.display()))?;
            if entries.next().is_some() {
                return Err(bad_hint(
                    format!(
                        "'{}' already holds files the demo did not write; refusing to write there",
                        dir.display()
                    ),
                    "give --out a new or empty directory",
                ));
            }
            Ok(())
        }
    }
}

fn write_marker(dir: &Path) -> Result<()> {
    let mut text = String::from("written by xtal-ladder demo; it writes only these files:\n");
    for f in DEMO_FILES {
        text += f;
        text.push('\n');
    }
    files::write_bytes(&dir.join(MARKER), text.as_bytes())
}

/// Fit every embedded sweep in the 50 Ω fixture.
fn fit_all(sweeps: &[EmbeddedSweep]) -> Result<Vec<Fitted>> {
    let fixture = FixtureSpec {
        r0_ohm: FIXTURE_OHMS,
        extra_series_ohm: 0.0,
    };
    let progress = Progress::new("fitting", sweeps.len());
    let mut out = Vec::with_capacity(sweeps.len());
    for (i, s) in sweeps.iter().enumerate() {
        let path = PathBuf::from(s.name);
        let id = path
            .file_stem()
            .map(|x| x.to_string_lossy().into_owned())
            .unwrap_or_default();
        progress.step(i, &id);
        let trace = if s.name.ends_with(".s2p") {
            trace_from_s2p(&parse_s2p(s.text).with_context(|| format!("built-in {}", s.name))?)
        } else {
            parse_sweep_csv(s.text).with_context(|| format!("built-in {}", s.name))?
        };
        let report = fit_sweep(&trace, &fixture, &id)
            .with_context(|| format!("fit of built-in {}", s.name))?;
        out.push(Fitted {
            path,
            trace,
            fixture,
            report,
        });
    }
    Ok(out)
}

/// Response table and the five plots; returns the analysed performance.
fn analyze_and_plot(design: &Design, dir: &Path) -> Result<filter_core::metrics::Performance> {
    let ladder = design.to_ladder().context("design")?;
    let (lo, hi) = super::passband_window(design);
    let win = Window {
        from_hz: lo,
        to_hz: hi,
        points: 2001,
    };
    let sweep = sweep_of(&ladder, &win)?;
    let perf = evaluate(&ladder, lo, hi, win.points).context("analysis")?;
    files::write_atomic(&dir.join("response.csv"), |w| write_csv(&sweep, w))?;
    let title = plot_title(design, Some(&perf));
    let axis = FrequencyAxis::OffsetFrom {
        center_hz: perf.center_hz,
    };
    let opts = PlotOptions::new(title.clone(), axis);
    let svg = transmission_svg(&sweep, Some(&perf), &opts).context("plot")?;
    files::write_bytes(&dir.join("transmission.svg"), svg.as_bytes())?;
    let mut lin = opts.clone();
    lin.linear = true;
    let svg = transmission_svg(&sweep, Some(&perf), &lin).context("plot")?;
    files::write_bytes(&dir.join("transmission-linear.svg"), svg.as_bytes())?;
    let svg = return_loss_svg(&sweep, Some(&perf), &opts).context("plot")?;
    files::write_bytes(&dir.join("return-loss.svg"), svg.as_bytes())?;
    let svg = group_delay_svg(&sweep, Some(&perf), &opts).context("plot")?;
    files::write_bytes(&dir.join("group-delay.svg"), svg.as_bytes())?;
    let (wlo, whi) = super::wide_window(design);
    let wide = sweep_of(
        &ladder,
        &Window {
            from_hz: wlo,
            to_hz: whi,
            points: 4001,
        },
    )?;
    let (notches, spurious) = notches_and_spurious(design, (whi - wlo) / 50.0);
    let svg = wide_svg(&wide, Some(&perf), &notches, &spurious, &opts).context("plot")?;
    files::write_bytes(&dir.join("wide.svg"), svg.as_bytes())?;
    Ok(perf)
}

/// The netlist and the Touchstone file.
fn export(design: &Design, dir: &Path) -> Result<()> {
    let ladder = design.to_ladder().context("design")?;
    let (lo, hi) = super::passband_window(design);
    let ac = AcSweep::linear(lo, hi, 1001).context("netlist")?;
    let netlist =
        spice_netlist(&ladder, &super::netlist::spice_title(design), &ac).context("netlist")?;
    files::write_bytes(&dir.join("filter.cir"), netlist.as_bytes())?;
    let (data, comment) = super::touchstone::two_port(design, lo, hi, 2001, design.source_ohm)?;
    files::write_atomic(&dir.join("filter.s2p"), |w| {
        write_s2p(
            &data,
            TouchstoneFormat::MagnitudeAngle,
            &comment,
            &mut &mut *w,
        )
        .context("touchstone")?;
        Ok(())
    })
}

/// The tolerances of the demo's yield run: E24 capacitors are ±5 % parts; the crystals' fs
/// moves by some 10 Hz between the fixture and the finished filter (drive level, temperature,
/// soldering: our assumption for the scenario); 2000 trials keep the demo quick.
const YIELD_TRIALS: usize = 2000;
const YIELD_CAP_TOL_PCT: f64 = 5.0;
const YIELD_FS_SIGMA_HZ: f64 = 10.0;
/// The builder's system impedance (the radio's IF strip).
const SYSTEM_OHMS: f64 = 50.0;

/// Parts list, as-built design, yield report with its envelope, and the report page.
fn build(design: &Design, dir: &Path) -> Result<String> {
    use crate::flags::{LimitArgs, MatchArgs, MatchFormArg, Percent, RoundingArgs, ToleranceArgs};
    use filter_core::parts::{Series, DEFAULT_PAIR_GAIN};
    use filter_core::units::{Hertz, Ohms};
    let rounding = RoundingArgs {
        series: Series::E24,
        pairs: true,
        pair_gain: DEFAULT_PAIR_GAIN,
        no_retune: false,
        round_terminations: false,
    };
    let matching = MatchArgs {
        match_to: Some(Ohms(SYSTEM_OHMS)),
        match_form: MatchFormArg::Lowpass,
    };
    let tolerance = ToleranceArgs {
        trials: YIELD_TRIALS,
        cap_tol: Percent(YIELD_CAP_TOL_PCT),
        gaussian_caps: false,
        fs_sigma: Hertz(YIELD_FS_SIGMA_HZ),
        lm_sigma: Percent(0.0),
        rm_sigma: Percent(0.0),
        seed: 0,
        trial_points: 1001,
    };
    let limits = LimitArgs {
        max_ripple: None,
        bw6_tol: None,
        max_loss: None,
    };
    let report = super::report::build_report(
        design,
        Path::new("design.json"),
        &rounding,
        &matching,
        &tolerance,
        &limits,
    )?;
    let parts = &report.parts;
    files::write_atomic(&dir.join("parts.csv"), |w| {
        super::parts::write_csv(parts, w)
    })?;
    let md = super::parts::markdown(parts, "parts for design.json");
    files::write_bytes(&dir.join("parts.md"), md.as_bytes())?;
    let built_json = parts.built.design.to_json();
    files::write_atomic(&dir.join("built-design.json"), |w| {
        w.write_all(built_json.as_bytes())?;
        writeln!(w)?;
        Ok(())
    })?;
    let p = &parts.built.built;
    let mut log = format!(
        "6. build: {} positions from {}, matched to {}: as built ripple {}, \
         −6 dB {}, loss {}, return loss {}\n",
        parts.rows.len(),
        super::parts::options_text(&parts.options),
        text::si(SYSTEM_OHMS, "Ω"),
        text::db(p.ripple_db),
        text::width(p.bw_6db_hz),
        text::db(p.insertion_loss_db),
        text::db(p.return_loss_db),
    );
    if let Some((spec, r)) = &report.yield_run {
        let v = super::yield_cmd::yield_json("built-design.json", spec, r)?;
        files::write_atomic(&dir.join("yield.json"), |w| {
            serde_json::to_writer_pretty(&mut *w, &v).context("yield.json")?;
            writeln!(w)?;
            Ok(())
        })?;
        let svg = super::yield_cmd::envelope(&parts.built.design, r, spec, None)?;
        files::write_bytes(&dir.join("envelope.svg"), svg.as_bytes())?;
        log += &format!(
            "   yield: {} of {} trials pass ({}) with {}\n",
            r.passed,
            r.trials,
            text::num(100.0 * r.yield_fraction, 3) + " %",
            super::yield_cmd::spread_text(spec)
        );
    }
    files::write_bytes(&dir.join("report.html"), report.html.as_bytes())?;
    log +=
        "   wrote parts.csv, parts.md, built-design.json, yield.json, envelope.svg, report.html\n";
    Ok(log)
}
