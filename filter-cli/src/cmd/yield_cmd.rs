//! `xtal-ladder yield`: Monte Carlo tolerance yield of a design
//! ([`filter_core::tolerance::run_yield`]), printed as text or JSON, with the envelope of the
//! responses and a histogram of one figure as SVG.

use super::{check_output, read_design, to_json};
use crate::errors::bad_hint;
use crate::files;
use crate::flags::{Format, LimitArgs, MetricArg, ToleranceArgs, YieldCmd};
use crate::progress::Progress;
use crate::text;
use anyhow::{Context, Result};
use filter_core::design::Design;
use filter_core::plot::{envelope_svg, histogram_svg, FrequencyAxis, PlotOptions};
use filter_core::tolerance::{
    run_yield, CapDistribution, Limits, Metric, Sensitivity, ToleranceSpec, YieldReport,
    MAX_TRIALS, POINTS_RANGE,
};
use serde_json::{json, Value};
use std::io::Write;
use std::sync::atomic::{AtomicUsize, Ordering};

/// How many parts the text lists in the sensitivity ranking.
const TOP_PARTS: usize = 10;

/// Run `yield`.
pub fn run(cmd: &YieldCmd, format: Format) -> Result<()> {
    super::require_format(format, &[Format::Text, Format::Json], "yield")?;
    let ins = std::slice::from_ref(&cmd.design);
    for out in [
        cmd.output.output.as_ref(),
        cmd.plot.as_ref(),
        cmd.histogram.as_ref(),
    ]
    .into_iter()
    .flatten()
    {
        check_output(out, ins)?;
    }
    let design = read_design(&cmd.design)?;
    let spec = tolerance_spec(&cmd.tolerance)?;
    let limits = limits(&design, &cmd.limits);
    let report = run_with_progress(&design, &spec, &limits)
        .with_context(|| format!("design '{}'", cmd.design.display()))?;
    if let Some(path) = &cmd.plot {
        files::write_bytes(path, envelope(&design, &report, &spec, None)?.as_bytes())?;
    }
    if let Some(path) = &cmd.histogram {
        let svg = histogram(&report, metric_of(cmd.histogram_metric), None)?;
        files::write_bytes(path, svg.as_bytes())?;
    }
    let name = cmd.design.display().to_string();
    let fill = |w: &mut dyn Write| -> Result<()> {
        match format {
            Format::Json => {
                serde_json::to_writer_pretty(&mut *w, &yield_json(&name, &spec, &report)?)
                    .context("cannot write the yield report")?;
                writeln!(w)?;
            }
            _ => {
                let mut s = yield_text(&name, &spec, &report);
                for (what, p) in [
                    ("envelope plot", cmd.plot.as_ref()),
                    ("histogram", cmd.histogram.as_ref()),
                ] {
                    if let Some(p) = p {
                        s += &format!("{what} written to {}\n", p.display());
                    }
                }
                w.write_all(s.as_bytes())?;
            }
        }
        Ok(())
    };
    match &cmd.output.output {
        Some(path) => {
            files::write_atomic(path, fill)?;
            if format == Format::Text {
                super::print_text(&format!("yield report written to {}\n", path.display()))?;
            }
            Ok(())
        }
        None => files::write_stdout(fill),
    }
}

/// The library's tolerance spec from the flags, with each flag checked in the user's units.
///
/// # Errors
/// A value out of range, naming the flag.
pub fn tolerance_spec(t: &ToleranceArgs) -> Result<ToleranceSpec> {
    if t.trials == 0 || t.trials > MAX_TRIALS {
        return Err(bad_hint(
            format!("--trials {} is out of range", t.trials),
            format!("give 1 to {MAX_TRIALS} trials"),
        ));
    }
    for (flag, p) in [("--cap-tol", t.cap_tol), ("--lm-sigma", t.lm_sigma)] {
        if p.0 >= 100.0 {
            return Err(bad_hint(
                format!("{flag} {} % is out of range", text::num(p.0, 4)),
                "give a percentage from 0 up to (not including) 100, e.g. 5",
            ));
        }
    }
    let (lo, hi) = POINTS_RANGE;
    if !(lo..=hi).contains(&t.trial_points) {
        return Err(bad_hint(
            format!("--trial-points {} is out of range", t.trial_points),
            format!("give {lo} to {hi} points"),
        ));
    }
    let spec = ToleranceSpec {
        trials: t.trials,
        cap_tol: t.cap_tol.fraction(),
        cap_distribution: if t.gaussian_caps {
            CapDistribution::Gaussian3Sigma
        } else {
            CapDistribution::Uniform
        },
        fs_sigma_hz: t.fs_sigma.0,
        lm_sigma: t.lm_sigma.fraction(),
        rm_sigma: t.rm_sigma.fraction(),
        seed: t.seed,
        points: t.trial_points,
    };
    if t.fs_sigma.0 < 0.0 {
        return Err(bad_hint(
            format!("--fs-sigma {} is negative", text::width(t.fs_sigma.0)),
            "give a standard deviation of 0 Hz or more, e.g. 20",
        ));
    }
    spec.validate().context("tolerance settings")?;
    Ok(spec)
}

/// The limits: the library's defaults for `design`, with the ones the user gave.
pub fn limits(design: &Design, l: &LimitArgs) -> Limits {
    let mut limits = Limits::default_for(design);
    if let Some(r) = l.max_ripple {
        limits.max_ripple_db = r.0;
    }
    if let Some(b) = l.bw6_tol {
        limits.bw6_tolerance = b.fraction();
    }
    if let Some(m) = l.max_loss {
        limits.max_loss_db = m.0;
    }
    limits
}

/// Run the yield analysis, with a progress bar on stderr when it is a terminal.
///
/// # Errors
/// As [`run_yield`] (limits out of range are named by the library).
pub fn run_with_progress(
    design: &Design,
    spec: &ToleranceSpec,
    limits: &Limits,
) -> Result<YieldReport> {
    let progress = Progress::new("yield", spec.trials);
    let total = spec.trials;
    // Workers report in any order: show a count only when it is the largest yet.
    let shown = AtomicUsize::new(0);
    let tick = move |done: usize| {
        if shown.fetch_max(done, Ordering::Relaxed) < done {
            progress.step(done.saturating_sub(1), &bar(done, total));
        }
    };
    let report = run_yield(design, spec, limits, Some(&tick)).context("yield")?;
    Ok(report)
}

/// A 30-character bar: `[##########....................] trials`.
fn bar(done: usize, total: usize) -> String {
    const WIDTH: usize = 30;
    let filled = (done.min(total) * WIDTH)
        .checked_div(total)
        .unwrap_or(WIDTH);
    format!(
        "[{}{}] trials",
        "#".repeat(filled),
        ".".repeat(WIDTH - filled)
    )
}

/// The library metric of a `--histogram-metric` value.
pub fn metric_of(m: MetricArg) -> Metric {
    match m {
        MetricArg::Loss => Metric::InsertionLoss,
        MetricArg::Ripple => Metric::Ripple,
        MetricArg::Bw3 => Metric::Bandwidth3,
        MetricArg::Bw6 => Metric::Bandwidth6,
        MetricArg::Center => Metric::Center,
        MetricArg::ReturnLoss => Metric::ReturnLoss,
        MetricArg::ShapeFactor => Metric::ShapeFactor,
    }
}

/// A metric as people say it.
pub fn metric_label(m: Metric) -> &'static str {
    match m {
        Metric::InsertionLoss => "insertion loss",
        Metric::Ripple => "ripple",
        Metric::Bandwidth3 => "−3 dB bandwidth",
        Metric::Bandwidth6 => "−6 dB bandwidth",
        Metric::Center => "passband centre",
        Metric::ReturnLoss => "return loss",
        Metric::ShapeFactor => "shape factor 60/6",
    }
}

/// A value of `m` in engineering notation.
pub fn metric_value(m: Metric, v: f64) -> String {
    match m {
        Metric::InsertionLoss | Metric::Ripple | Metric::ReturnLoss => text::db(v),
        Metric::Bandwidth3 | Metric::Bandwidth6 => text::width(v),
        Metric::Center => text::freq(v),
        Metric::ShapeFactor => text::num(v, 3),
    }
}

/// What was varied, in one line.
pub fn spread_text(spec: &ToleranceSpec) -> String {
    format!(
        "capacitors ±{} {}, crystal fs σ {}, Lm σ {}, Rm σ {}",
        pct_of(spec.cap_tol),
        match spec.cap_distribution {
            CapDistribution::Uniform => "uniform",
            CapDistribution::Gaussian3Sigma => "Gaussian (tolerance = 3σ)",
        },
        text::width(spec.fs_sigma_hz),
        pct_of(spec.lm_sigma),
        pct_of(spec.rm_sigma)
    )
}

/// `5 %` from 0.05, `2.89 %` from 0.02887: three significant digits, trailing zeros dropped.
fn pct_of(fraction: f64) -> String {
    let s = text::num(100.0 * fraction, 3);
    let s = if s.contains('.') && !s.contains('e') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    format!("{s} %")
}

/// The limits, in one line.
pub fn limits_text(r: &YieldReport) -> String {
    let l = &r.limits;
    let b = r.bw6_reference_hz;
    let limit = |v: f64| {
        if v.is_finite() {
            text::db(v)
        } else {
            "no limit".to_string()
        }
    };
    format!(
        "ripple ≤ {}, −6 dB bandwidth {} ± {} ({} to {}), loss ≤ {}",
        limit(l.max_ripple_db),
        text::width(b),
        pct_of(l.bw6_tolerance),
        text::width(b * (1.0 - l.bw6_tolerance)),
        text::width(b * (1.0 + l.bw6_tolerance)),
        limit(l.max_loss_db)
    )
}

/// The table of percentiles: a header (blank, `nominal`, `p1`, `p5`, …) and one row per
/// metric. The centre's percentiles are given as offsets from the nominal centre (its label
/// ends in `±`, see [`CENTRE_NOTE`]), so that the columns stay narrow.
pub fn percentile_table(r: &YieldReport) -> (Vec<String>, Vec<Vec<String>>) {
    let mut header = vec![String::new(), "nominal".to_string()];
    if let Some(d) = r.metrics.first() {
        header.extend(d.percentiles.iter().map(|(p, _)| format!("p{p}")));
    }
    let rows = r
        .metrics
        .iter()
        .map(|d| {
            let nominal = r.nominal.value(d.metric);
            let label = match d.metric {
                Metric::Center => "passband centre ±".to_string(),
                m => metric_label(m).to_string(),
            };
            let mut row = vec![
                label,
                nominal
                    .map(|v| metric_value(d.metric, v))
                    .unwrap_or_default(),
            ];
            row.extend(
                d.percentiles
                    .iter()
                    .map(|(_, v)| match (d.metric, nominal) {
                        (Metric::Center, Some(c)) => signed_width(v - c),
                        (m, _) => metric_value(m, *v),
                    }),
            );
            row
        })
        .collect();
    (header, rows)
}

/// What the `±` of the centre's row means.
pub const CENTRE_NOTE: &str =
    "passband centre ±: the percentiles are offsets from the nominal centre";

/// A signed frequency offset: `+12.30 Hz`, `−4.100 Hz`.
fn signed_width(v: f64) -> String {
    format!(
        "{}{}",
        if v < 0.0 { "−" } else { "+" },
        text::width(v.abs())
    )
}

/// The failure counts as (label, count) pairs.
pub fn failure_rows(r: &YieldReport) -> Vec<(&'static str, usize)> {
    let f = &r.failures_by_reason;
    vec![
        ("ripple above the limit", f.ripple),
        ("−6 dB bandwidth outside its tolerance", f.bw6),
        ("loss above the limit", f.loss),
        ("passband outside the analysis window", f.out_of_window),
        ("non-physical draw", f.non_physical),
        ("analysis failed", f.numerical),
    ]
}

/// One σ of a part in its unit: `20.00 Hz` for fs, `2.9 %` for the others.
pub fn sigma_text(s: &Sensitivity) -> String {
    if s.part.ends_with(" fs") {
        text::width(s.sigma)
    } else {
        pct_of(s.sigma)
    }
}

/// The score of a part: the share of the limit's margin one σ uses.
pub fn score_text(s: &Sensitivity) -> String {
    if s.score.is_finite() {
        format!(
            "{} of the {} margin",
            text::num(s.score, 3),
            metric_label(s.metric)
        )
    } else {
        "moves the passband out of the window".to_string()
    }
}

/// The yield report as text.
pub fn yield_text(name: &str, spec: &ToleranceSpec, r: &YieldReport) -> String {
    let mut s = format!(
        "yield of {name}: {} of {} trials pass ({})\n",
        r.passed,
        r.trials,
        pct_of(r.yield_fraction)
    );
    s += &format!("  varied: {}\n", spread_text(spec));
    s += &format!("  limits: {}\n", limits_text(r));
    s += &format!(
        "  seed {}, {} analysis points per trial\n\n",
        spec.seed, spec.points
    );
    let (header, rows) = percentile_table(r);
    s += &columns(&header, &rows);
    s += &format!("  ({CENTRE_NOTE})\n");
    s += "\nfailures by reason (a trial that breaks two limits counts under both):\n";
    for (label, n) in failure_rows(r) {
        s += &format!("  {label:<40} {n}\n");
    }
    s += &format!(
        "\nparts that matter most (the share of a limit's margin that 1σ of the part uses; \
         top {} of {}):\n",
        TOP_PARTS.min(r.sensitivity.len()),
        r.sensitivity.len()
    );
    let rows: Vec<Vec<String>> = r
        .sensitivity
        .iter()
        .take(TOP_PARTS)
        .enumerate()
        .map(|(k, p)| {
            vec![
                format!("{}.", k + 1),
                p.part.clone(),
                format!("1σ = {}", sigma_text(p)),
                score_text(p),
                format!(
                    "(ripple +{}, −6 dB bandwidth ±{}, loss +{})",
                    text::db(p.ripple_db),
                    text::width(p.bw6_hz),
                    text::db(p.loss_db)
                ),
            ]
        })
        .collect();
    s += &columns(&[], &rows);
    s
}

/// Text columns padded to the widest cell (in characters); an empty header prints none.
fn columns(header: &[String], rows: &[Vec<String>]) -> String {
    let mut widths: Vec<usize> = header.iter().map(|h| h.chars().count()).collect();
    for r in rows {
        for (k, c) in r.iter().enumerate() {
            let n = c.chars().count();
            match widths.get_mut(k) {
                Some(w) => *w = (*w).max(n),
                None => widths.push(n),
            }
        }
    }
    let line = |cells: &[String]| {
        let mut s = String::from(" ");
        for (k, c) in cells.iter().enumerate() {
            let w = widths.get(k).copied().unwrap_or(0);
            s.push(' ');
            s.push_str(c);
            s.push_str(&" ".repeat(w.saturating_sub(c.chars().count())));
        }
        s.trim_end().to_string() + "\n"
    };
    let mut out = String::new();
    if !header.is_empty() {
        out += &line(header);
    }
    for r in rows {
        out += &line(r);
    }
    out
}

/// The yield report as JSON (without the per-trial samples and the envelope arrays).
pub fn yield_json(name: &str, spec: &ToleranceSpec, r: &YieldReport) -> Result<Value> {
    let metrics: Vec<Value> = r
        .metrics
        .iter()
        .map(|d| {
            let p: serde_json::Map<String, Value> = d
                .percentiles
                .iter()
                .map(|(p, v)| (format!("p{p}"), json!(v)))
                .collect();
            json!({
                "name": d.name,
                "unit": d.unit,
                "count": d.count,
                "nominal": r.nominal.value(d.metric),
                "mean": d.mean,
                "min": d.min,
                "max": d.max,
                "percentiles": p,
            })
        })
        .collect();
    Ok(json!({
        "design": name,
        "trials": r.trials,
        "passed": r.passed,
        "yield": r.yield_fraction,
        "spec": to_json(spec)?,
        "limits": to_json(&r.limits)?,
        "bw6_reference_hz": r.bw6_reference_hz,
        "nominal": to_json(&r.nominal)?,
        "metrics": metrics,
        "failures_by_reason": to_json(&r.failures_by_reason)?,
        "sensitivity": to_json(&r.sensitivity)?,
    }))
}

/// Plot options: the default size with `title`, or `compact` = (width, height) without a title
/// (for a page that captions its figures).
fn plot_options(title: String, axis: FrequencyAxis, compact: Option<(u32, u32)>) -> PlotOptions {
    match compact {
        None => PlotOptions::new(title, axis),
        Some((width, height)) => PlotOptions {
            width,
            height,
            ..PlotOptions::new(String::new(), axis)
        },
    }
}

/// The envelope of the responses as SVG (`compact`: see [`plot_options`]).
///
/// # Errors
/// A plot the library cannot draw.
pub fn envelope(
    design: &Design,
    r: &YieldReport,
    spec: &ToleranceSpec,
    compact: Option<(u32, u32)>,
) -> Result<String> {
    let e = &r.envelope;
    let title = format!(
        "Monte Carlo envelope of {} trials ({}): yield {}",
        r.trials,
        spread_text(spec),
        pct_of(r.yield_fraction)
    );
    let opts = plot_options(
        title,
        FrequencyAxis::OffsetFrom {
            center_hz: design.performance.center_hz,
        },
        compact,
    );
    envelope_svg(&e.f_hz, &e.min_db, &e.max_db, &e.nominal_db, &opts).context("envelope plot")
}

/// A histogram of `metric` over the trials, with its pass limits, as SVG (`compact`: see
/// [`plot_options`]).
///
/// # Errors
/// No trial has the metric, or a plot the library cannot draw.
pub fn histogram(r: &YieldReport, metric: Metric, compact: Option<(u32, u32)>) -> Result<String> {
    let values = r.values(metric);
    if values.is_empty() {
        return Err(bad_hint(
            format!("no trial has a {} to plot", metric_label(metric)),
            "choose another --histogram-metric",
        ));
    }
    let l = &r.limits;
    let b = r.bw6_reference_hz;
    // The limits are drawn and printed in the legend as given: rounded to 0.01 dB and 0.1 Hz
    // (far below a bin's width) so that the legend reads `2384.4`, not `2384.356370772`.
    let round = |v: f64, step: f64| (v / step).round() * step;
    let limit = match metric {
        Metric::Ripple => Some((f64::NEG_INFINITY, round(l.max_ripple_db, 0.01))),
        Metric::InsertionLoss => Some((f64::NEG_INFINITY, round(l.max_loss_db, 0.01))),
        Metric::Bandwidth6 => Some((
            round(b * (1.0 - l.bw6_tolerance), 0.1),
            round(b * (1.0 + l.bw6_tolerance), 0.1),
        )),
        _ => None,
    };
    let unit = match metric.unit() {
        "" => String::new(),
        u => format!(" ({u})"),
    };
    let x_label = format!("{}{unit}", capitalize(metric_label(metric)));
    // About √n bins, between 10 and 60: enough to show the shape without empty bins.
    let bins = ((values.len() as f64).sqrt().round() as usize).clamp(10, 60);
    let title = format!(
        "{} over {} trials: yield {}",
        capitalize(metric_label(metric)),
        values.len(),
        pct_of(r.yield_fraction)
    );
    let opts = plot_options(title, FrequencyAxis::AbsoluteMhz, compact);
    histogram_svg(&values, bins, &x_label, limit, &opts).context("histogram")
}

fn capitalize(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().collect::<String>() + c.as_str(),
        None => String::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn progress_bar_fills() {
        assert_eq!(bar(0, 10), format!("[{}] trials", ".".repeat(30)));
        assert_eq!(
            bar(5, 10),
            format!("[{}{}] trials", "#".repeat(15), ".".repeat(15))
        );
        assert_eq!(bar(12, 10), format!("[{}] trials", "#".repeat(30)));
    }
}
