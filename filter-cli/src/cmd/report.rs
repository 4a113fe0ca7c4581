//! `xtal-ladder report`: one self-contained HTML page of a design for the bench.
//!
//! The page gathers what the other subcommands print: the specification, the crystals and
//! where each goes, the schematic, the parts list (`parts`), the response of the ladder as
//! built from the chosen parts (`analyze`), the as-built figures beside the ideal ones and a
//! tolerance-yield summary of the as-built ladder (`yield`). [`crate::report`] writes the HTML.

use super::parts::{comparison, options_text, parts_list, Chosen, Kind, PartsList};
use super::yield_cmd::{
    envelope, failure_rows, histogram, limits, limits_text, percentile_table, run_with_progress,
    score_text, sigma_text, spread_text, tolerance_spec, CENTRE_NOTE,
};
use super::{check_output, family_label, passband_window, print_json, print_text, read_design};
use super::{to_json, Window};
use crate::flags::{Format, LimitArgs, MatchArgs, ReportCmd, RoundingArgs, ToleranceArgs};
use crate::report::{Cell, Page, Table};
use crate::text;
use anyhow::{Context, Result};
use filter_core::design::{BandwidthAt, Design};
use filter_core::parts::Choice;
use filter_core::plot::{
    group_delay_svg, return_loss_svg, schematic_svg, transmission_svg, FrequencyAxis, PlotOptions,
    SchematicLabels,
};
use filter_core::tolerance::{Metric, ToleranceSpec, YieldReport};
use serde_json::json;
use std::path::Path;

/// How many parts the page lists in the sensitivity ranking.
const TOP_PARTS: usize = 8;

/// Size of the plots shown two side by side: the smallest the plotting library draws, so that
/// their text stays readable at half the page width.
const PAIR_SIZE: (u32, u32) = (560, 400);

/// Run `report`.
pub fn run(cmd: &ReportCmd, format: Format) -> Result<()> {
    super::require_format(format, &[Format::Text, Format::Json], "report")?;
    check_output(&cmd.output, std::slice::from_ref(&cmd.design))?;
    let design = read_design(&cmd.design)?;
    let built = build_report(
        &design,
        &cmd.design,
        &cmd.rounding,
        &cmd.matching,
        &cmd.tolerance,
        &cmd.limits,
    )
    .with_context(|| format!("design '{}'", cmd.design.display()))?;
    crate::files::write_bytes(&cmd.output, built.html.as_bytes())?;
    let perf = &built.parts.built.built;
    match format {
        Format::Json => print_json(&json!({
            "output": cmd.output.display().to_string(),
            "as_built": to_json(perf)?,
            "trials": built.yield_run.as_ref().map(|(_, r)| r.trials),
            "yield": built.yield_run.as_ref().map(|(_, r)| r.yield_fraction),
        })),
        _ => {
            let mut s = format!(
                "report written to {}: as built from {} parts, ripple {}, −6 dB bandwidth {}, \
                 loss {}",
                cmd.output.display(),
                built.parts.rows.len(),
                text::db(perf.ripple_db),
                text::width(perf.bw_6db_hz),
                text::db(perf.insertion_loss_db)
            );
            if let Some((_, r)) = &built.yield_run {
                s += &format!(
                    "; yield {} of {} trials",
                    yield_pct(r.yield_fraction),
                    r.trials
                );
            }
            s.push('\n');
            print_text(&s)
        }
    }
}

/// The page and what went into it.
pub struct BuiltReport {
    /// The HTML document.
    pub html: String,
    /// The parts list.
    pub parts: PartsList,
    /// The yield run of the as-built ladder and its settings (None with --trials 0).
    pub yield_run: Option<(ToleranceSpec, YieldReport)>,
}

/// Everything the page needs, computed by the library, then the page.
///
/// # Errors
/// Parts that cannot be chosen, a yield run that cannot start, or a plot that cannot be
/// drawn.
pub fn build_report(
    design: &Design,
    path: &Path,
    rounding: &RoundingArgs,
    matching: &MatchArgs,
    tolerance: &ToleranceArgs,
    limit_args: &LimitArgs,
) -> Result<BuiltReport> {
    let parts = parts_list(design, rounding, matching)?;
    let built = &parts.built.design;
    let yield_run = if tolerance.trials == 0 {
        None
    } else {
        let spec = tolerance_spec(tolerance)?;
        let limits = limits(built, limit_args);
        let r = run_with_progress(built, &spec, &limits).context("yield of the as-built ladder")?;
        Some((spec, r))
    };
    let html = page(design, path, &parts, yield_run.as_ref())?;
    Ok(BuiltReport {
        html,
        parts,
        yield_run,
    })
}

/// A yield fraction as a percentage with one decimal.
fn yield_pct(f: f64) -> String {
    format!("{:.1} %", 100.0 * f)
}

/// The bandwidth asked for, as people say it: `2.400 kHz at −6 dB`.
fn bandwidth_text(d: &Design) -> String {
    let at = match d.spec.bandwidth_at {
        BandwidthAt::Db3 => "at −3 dB",
        BandwidthAt::Db6 => "at −6 dB",
        BandwidthAt::Ripple => "between the ripple edges",
    };
    format!("{} {at}", text::width(d.spec.bandwidth_hz))
}

fn yes_no(b: bool) -> String {
    if b { "yes" } else { "no" }.to_string()
}

/// The page itself.
fn page(
    design: &Design,
    path: &Path,
    parts: &PartsList,
    yield_run: Option<&(ToleranceSpec, YieldReport)>,
) -> Result<String> {
    let built = &parts.built.design;
    let ideal = &parts.built.ideal;
    let perf = &parts.built.built;
    let family = family_label(&design.spec.family);
    let heading = format!(
        "Crystal ladder filter: {family}, {} crystals, {}",
        design.order(),
        text::freq(perf.center_hz)
    );
    let mut page = Page::new(&heading);
    let ids: Vec<&str> = design.crystals.iter().map(|x| x.id.as_str()).collect();
    page.header(
        &heading,
        &format!(
            "{} · built from {}",
            bandwidth_text(design),
            options_text(&parts.options)
        ),
        &[
            ("Design", path.display().to_string()),
            ("Crystals", ids.join(", ")),
            (
                "Terminations",
                format!(
                    "{} source, {} load",
                    text::si(built.source_ohm, "Ω"),
                    text::si(built.load_ohm, "Ω")
                ),
            ),
            (
                "Written by",
                format!("xtal-ladder {}", env!("CARGO_PKG_VERSION")),
            ),
        ],
    );
    let mut cards = vec![
        (
            "−6 dB bandwidth",
            text::width(perf.bw_6db_hz),
            format!("ideal {}", text::width(ideal.bw_6db_hz)),
        ),
        (
            "Insertion loss",
            text::db(perf.insertion_loss_db),
            format!("ideal {}", text::db(ideal.insertion_loss_db)),
        ),
        (
            "Ripple",
            text::db(perf.ripple_db),
            format!("ideal {}", text::db(ideal.ripple_db)),
        ),
        (
            "Shape factor 60/6",
            text::opt(perf.shape_factor_60_6, |v| text::num(v, 3)),
            format!(
                "ideal {}",
                text::opt(ideal.shape_factor_60_6, |v| text::num(v, 3))
            ),
        ),
        (
            "Return loss",
            text::db(perf.return_loss_db),
            format!("ideal {}", text::db(ideal.return_loss_db)),
        ),
    ];
    if let Some((_, r)) = yield_run {
        cards.push((
            "Yield",
            yield_pct(r.yield_fraction),
            format!("{} of {} trials", r.passed, r.trials),
        ));
    }
    page.cards(&cards);

    specification(&mut page, design);
    crystals(&mut page, design);

    page.landscape_section("schematic", "Schematic");
    page.figure(&schematic(parts), "The ladder as built: designators as on the schematic (Rs, Cs1, X1, C12, …, RL); the parts list maps them to the reference designators.", true);

    parts_section(&mut page, parts);

    page.section("as-built", "As built beside the ideal design");
    page.paragraph(
        "The figures of the ladder built from exactly the chosen values, analysed on the \
         crystal model, beside those of the ideal design. −X dB is X dB below the minimum \
         passband loss.",
    );
    let mut t = Table::new(&["Figure", "Ideal#", "As built#", "Change#"]);
    for c in comparison(ideal, perf) {
        t.row(vec![
            Cell::key(c.label),
            Cell::num(c.ideal),
            Cell::num(c.built),
            Cell::num(c.delta),
        ]);
    }
    page.table(&t);
    if !parts.notes.is_empty() {
        page.subheading("Notes");
        page.list(&parts.notes);
    }

    plots(&mut page, built)?;

    match yield_run {
        Some((spec, r)) => yield_section(&mut page, built, spec, r)?,
        None => {
            page.section("yield", "Tolerance yield");
            page.note("Not run (--trials 0).");
        }
    }
    Ok(page.finish(&format!(
        "Written by xtal-ladder {} from {}. Values in SI units with engineering prefixes; \
         S-parameters referred to the ladder's own terminations.",
        env!("CARGO_PKG_VERSION"),
        path.display()
    )))
}

/// What was asked for and what the synthesis chose.
fn specification(page: &mut Page, d: &Design) {
    page.section("spec", "Specification");
    let mut t = Table::new(&[]);
    let k: Vec<String> = d.k.iter().map(|k| text::num(*k, 4)).collect();
    let rows = [
        ("Response", family_label(&d.spec.family)),
        ("Crystals (order)", d.order().to_string()),
        ("Bandwidth asked for", bandwidth_text(d)),
        ("Predistorted for finite Qu", yes_no(d.spec.predistort)),
        ("Refined on the exact model", yes_no(d.spec.refine)),
        ("Mesh-tuning centre", text::freq(d.center_hz)),
        (
            "Terminations (ideal)",
            format!(
                "{} source, {} load",
                text::si(d.source_ohm, "Ω"),
                text::si(d.load_ohm, "Ω")
            ),
        ),
        ("Coupling coefficients k (3 dB)", k.join(", ")),
        (
            "End loaded q (3 dB)",
            format!("{}, {}", text::num(d.q[0], 4), text::num(d.q[1], 4)),
        ),
    ];
    for (a, b) in rows {
        t.row(vec![Cell::key(a), Cell::text(b)]);
    }
    page.table(&t);
    if !d.warnings.is_empty() {
        page.subheading("Cautions from the design");
        page.list(&d.warnings);
    }
}

/// The crystals in signal order.
fn crystals(page: &mut Page, d: &Design) {
    page.section("crystals", "Crystals and where they go");
    let mut t = Table::new(&[
        "Ref", "Position", "Crystal", "fs#", "Lm#", "Cm#", "Rm#", "C0#", "Qu#",
    ]);
    for (i, x) in d.crystals.iter().enumerate() {
        t.row(vec![
            Cell::key(format!("Y{}", i + 1)),
            Cell::text(format!("X{}", i + 1)),
            Cell::text(x.id.clone()),
            Cell::num(text::freq(x.fs_hz())),
            Cell::num(text::si(x.lm_h(), "H")),
            Cell::num(text::si(x.cm_f(), "F")),
            Cell::num(text::si(x.rm_ohm(), "Ω")),
            Cell::num(text::si(x.c0_f, "F")),
            Cell::num(text::finite(x.qu(), |q| text::num(q, 3))),
        ]);
    }
    page.table(&t);
    let fs: Vec<f64> = d.crystals.iter().map(|x| x.fs_hz()).collect();
    let lo = fs.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = fs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let spurious = d.crystals.iter().filter(|x| !x.spurious.is_empty()).count();
    let spurious = match spurious {
        0 => "none has a spurious mode in the model".to_string(),
        1 => "one has a spurious mode in the model".to_string(),
        k => format!("{k} have spurious modes in the model"),
    };
    page.note(&format!(
        "fs from {} to {} (spread {}); {spurious}. Mark each crystal with its id and fit it at \
         the position given.",
        text::freq(lo),
        text::freq(hi),
        text::width(hi - lo),
    ));
}

/// The schematic with the chosen values.
fn schematic(parts: &PartsList) -> String {
    let b = &parts.built;
    let mut labels = SchematicLabels {
        source: text::si(b.source_ohm, "Ω"),
        load: text::si(b.load_ohm, "Ω"),
        ..SchematicLabels::default()
    };
    for r in &parts.rows {
        match r.kind {
            Kind::Series => labels.series.push(match &r.chosen {
                Chosen::Wire => None,
                c => Some(compact(c, r.series)),
            }),
            Kind::Shunt => labels.shunt.push(compact(&r.chosen, r.series)),
            Kind::Crystal => labels.crystals.push(r.value_text()),
            Kind::Termination | Kind::Match => {}
        }
    }
    schematic_svg(b.design.order(), &labels)
}

/// A capacitor as schematics write it, without the unit: `100p`, `100p∥5.6p`.
fn compact(c: &Chosen, series: Option<filter_core::parts::Series>) -> String {
    let digits = series.map_or(4, |s| s.significant_digits() as usize);
    let v = |x: f64| filter_core::units::format_si_digits(x, "", digits);
    match c {
        Chosen::Part(Choice::Single(x)) | Chosen::Value(x) => v(*x),
        Chosen::Part(Choice::ParallelPair(a, b)) => format!("{}∥{}", v(*a), v(*b)),
        Chosen::Wire => String::new(),
    }
}

/// The parts table and the matching networks.
fn parts_section(page: &mut Page, parts: &PartsList) {
    page.section("parts", "Parts list");
    page.paragraph(&format!(
        "{}. Capacitors are C1, C2, … in signal order; Y1 … Yn are the crystals; R1 and R2 \
         the terminations; a parallel pair (∥) is two parts soldered across each other.",
        capitalize(&options_text(&parts.options))
    ));
    let mut t = Table::new(&[
        "Ref", "Position", "Part", "Value", "Series", "Ideal#", "Error#", "Notes",
    ]);
    for r in &parts.rows {
        t.row(vec![
            Cell::key(r.reference.clone()),
            Cell::text(r.position.clone()),
            Cell::text(r.part.clone()),
            Cell::value(r.value_text()),
            Cell::text(r.series.map(|s| s.to_string()).unwrap_or_default()),
            Cell::num(r.ideal_text()),
            Cell::num(r.error_text()),
            Cell::text(r.note_text()),
        ]);
    }
    page.table(&t);
    if let Some(m) = &parts.matching {
        page.note(&format!(
            "Matching networks to a {} system, designed at {}; the response below is that \
             of the ladder between its own terminations, without them.",
            text::si(m.system_ohm, "Ω"),
            text::freq(m.f_hz)
        ));
    }
}

/// Transmission, return loss and group delay of the as-built ladder.
fn plots(page: &mut Page, built: &Design) -> Result<()> {
    page.section("response", "Response as built");
    let ladder = built.to_ladder().context("as-built design")?;
    let (from_hz, to_hz) = passband_window(built);
    let win = Window {
        from_hz,
        to_hz,
        points: 2001,
    };
    let sweep = super::analyze::sweep_of(&ladder, &win)?;
    let perf = &built.performance;
    let axis = FrequencyAxis::OffsetFrom {
        center_hz: perf.center_hz,
    };
    let title = super::analyze::plot_title(built, Some(perf));
    let opts = PlotOptions::new(title, axis);
    let t = transmission_svg(&sweep, Some(perf), &opts).context("transmission plot")?;
    page.figure(
        &t,
        "Transmission of the ladder built from the chosen parts, with the −3, −6 and −60 dB \
         points.",
        false,
    );
    let small = PlotOptions {
        width: PAIR_SIZE.0,
        height: PAIR_SIZE.1,
        ..PlotOptions::new(String::new(), axis)
    };
    let rl = return_loss_svg(&sweep, Some(perf), &small).context("return-loss plot")?;
    let gd = group_delay_svg(&sweep, Some(perf), &small).context("group-delay plot")?;
    page.figure_pair(
        (&rl, "Return loss at the source end."),
        (&gd, "Group delay."),
    );
    Ok(())
}

/// The yield summary.
fn yield_section(
    page: &mut Page,
    built: &Design,
    spec: &ToleranceSpec,
    r: &YieldReport,
) -> Result<()> {
    page.section("yield", "Tolerance yield of the as-built ladder");
    page.paragraph(&format!(
        "{} of {} Monte Carlo trials meet every limit: a yield of {}.",
        r.passed,
        r.trials,
        yield_pct(r.yield_fraction)
    ));
    page.list(&[
        format!("Varied: {}.", spread_text(spec)),
        format!("Limits: {}.", limits_text(r)),
        format!(
            "Seed {}, {} analysis points per trial; the same seed gives the same result.",
            spec.seed, spec.points
        ),
    ]);
    let env = envelope(built, r, spec, Some(PAIR_SIZE))?;
    let hist = histogram(r, Metric::Bandwidth6, Some(PAIR_SIZE))?;
    page.figure_pair(
        (
            &env,
            "Envelope: the lowest and highest transmission of all trials.",
        ),
        (&hist, "−6 dB bandwidth of the trials, with its limits."),
    );
    page.subheading("Spread of each figure");
    let (header, rows) = percentile_table(r);
    let h: Vec<String> = header
        .iter()
        .enumerate()
        .map(|(k, h)| {
            if k == 0 {
                "Figure".to_string()
            } else {
                format!("{h}#")
            }
        })
        .collect();
    let h: Vec<&str> = h.iter().map(String::as_str).collect();
    let mut t = Table::new(&h);
    for row in rows {
        t.row(
            row.into_iter()
                .enumerate()
                .map(|(k, c)| if k == 0 { Cell::key(c) } else { Cell::num(c) })
                .collect(),
        );
    }
    page.table(&t);
    page.note(&format!("{}.", capitalize(CENTRE_NOTE)));
    page.subheading("Failures by reason");
    let mut t = Table::new(&["Reason", "Trials#"]);
    for (label, n) in failure_rows(r) {
        t.row(vec![
            Cell::text(label),
            if n > 0 {
                Cell::bad(n.to_string())
            } else {
                Cell::num(n.to_string())
            },
        ]);
    }
    page.table(&t);
    page.subheading("Parts that matter most");
    page.note(
        "Each part moved by one standard deviation of its own spread, everything else \
         nominal; the score is the share of a limit's margin that this uses.",
    );
    let mut t = Table::new(&[
        "#",
        "Part",
        "1σ#",
        "Score",
        "Ripple#",
        "−6 dB bandwidth#",
        "Loss#",
    ]);
    for (k, p) in r.sensitivity.iter().take(TOP_PARTS).enumerate() {
        t.row(vec![
            Cell::text((k + 1).to_string()),
            Cell::key(p.part.clone()),
            Cell::num(sigma_text(p)),
            Cell::text(score_text(p)),
            Cell::num(format!("+{}", text::db(p.ripple_db))),
            Cell::num(format!("±{}", text::width(p.bw6_hz))),
            Cell::num(format!("+{}", text::db(p.loss_db))),
        ]);
    }
    page.table(&t);
    Ok(())
}

fn capitalize(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().collect::<String>() + c.as_str(),
        None => String::new(),
    }
}
