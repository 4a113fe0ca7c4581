//! SVG plots of responses, fits, Monte Carlo results and the ladder schematic.
//!
//! Every function returns the SVG document as a `String`; nothing here writes files. The charts
//! are drawn with `plotters` on its SVG backend; the schematic is drawn by hand from SVG
//! primitives \[1\].
//!
//! # What is drawn
//! - Transmission: 20·log10|S21| in dB (power ratio; 0 dB = lossless and matched, see
//!   [`crate::network`]), or with [`PlotOptions::linear`] the ratio |S21| itself, labelled
//!   "|V| ratio", with zero at the bottom of the axis. Markers sit at −3, −6 and −60 dB below
//!   the *minimum loss* of the passband (the convention of [`crate::metrics`]): horizontal
//!   dashed lines at those levels, each tagged at one end, and, given a [`Performance`],
//!   vertical dashed lines at its crossings, the −3 dB band shaded, and the bandwidths (and the
//!   −60/−6 dB shape factor) in the tags \[3\]. On the linear axis −60 dB cannot be told from
//!   zero, so only its crossings are drawn.
//! - Return loss: −20·log10|S11| in dB, drawn *upward* (a higher curve is a better match; the
//!   axis says so), with the worst passband value of the [`Performance`] as a dashed line, and
//!   values above [`RETURN_LOSS_CEILING_DB`] (a perfect match is +∞) at the top.
//! - Group delay: −dφ21/dω in µs or ms (ns below 1 µs), whichever keeps the passband values
//!   between 1 and 1000. The axis is scaled to the points within 20 dB of the passband peak,
//!   because the delay far outside the band (near transmission zeros) swings to values that
//!   would flatten the useful part; values beyond the axis are drawn at its edge.
//! - Wide: the far skirts in dB down to [`WIDE_FLOOR_DB`], with the C0 notches and spurious
//!   responses given by the caller marked and labelled.
//! - Fit overlay, Monte Carlo envelope, histogram of a metric with pass limits.
//!
//! # Axes and bad values
//! The frequency axis is either an offset from a centre (in Hz below a 2 kHz span, in kHz below
//! 2 MHz, else in MHz) or absolute in MHz; tick steps are 1, 2 or 5 × 10ᵏ and the labels carry
//! just the decimals that resolve one step, so neighbouring ticks never print alike. A dB value
//! of −∞ (a lossless transmission zero) is drawn at the bottom of the axis and +∞ at the top;
//! NaN values and non-finite frequencies are skipped (the line breaks there). An input with no
//! plottable point, an empty input, or arrays of different lengths give an [`Error`].
//!
//! # Labels
//! Text is drawn at 14 px and more (axis descriptions 16 px, the title 19 px, wrapped to at
//! most three lines). Tags, notes and legends sit on white boxes, each at whichever of a few
//! candidate places inside the plot area covers the fewest plotted points and earlier labels.
//! Text widths are estimated from per-character widths of a wide sans-serif face, since the
//! viewer picks the actual font.
//!
//! # References
//! 1. W3C, *Scalable Vector Graphics (SVG) 1.1 (Second Edition)*, 2011: the `line`, `rect`,
//!    `path`, `circle` and `text` elements the schematic is drawn with.
//! 2. IEC 60617, *Graphical symbols for diagrams*: the resistor (rectangle), capacitor (two
//!    plates) and piezoelectric crystal (plate, electrode block, plate) symbols.
//! 3. G. L. Matthaei, L. Young, E. M. T. Jones, *Microwave Filters, Impedance-Matching
//!    Networks, and Coupling Structures*, 1964: insertion loss, return loss, group delay and
//!    band-edge definitions of band-pass responses.

mod frame;
mod schematic;

#[cfg(test)]
mod tests;

pub use schematic::{schematic_svg, SchematicLabels};

use crate::error::{Error, Result};
use crate::io::MeasuredTrace;
use crate::metrics::Performance;
use crate::network::Sweep;
use crate::units::{format_si, format_si_digits};
use frame::{
    check_len, check_options, draw_runs, finite_range, fmt_num, hline, legend, palette, place_note,
    plotted_f_range, render, runs, shade_x, tick_target, vline, Axis, Chart, Drawn, FreqScale,
    Obstacles, Sample, Spot,
};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

/// Lowest level of the transmission, envelope and wide plots, dB: anything below is drawn at
/// this level (−∞ included).
pub const WIDE_FLOOR_DB: f64 = -120.0;

/// Highest return loss drawn, dB; larger values (a perfect match gives +∞) sit at the top.
pub const RETURN_LOSS_CEILING_DB: f64 = 80.0;

/// Axis description of the transmission in dB.
pub const TRANSMISSION_DB_LABEL: &str = "Transmission |S21| (dB)";
/// Axis description of the transmission as a linear ratio.
pub const TRANSMISSION_LINEAR_LABEL: &str = "Transmission |S21| as |V| ratio (linear)";
/// Axis description of the return loss.
pub const RETURN_LOSS_LABEL: &str = "Return loss −|S11| (dB, up = better)";
/// Axis description of the histogram counts.
pub const COUNT_LABEL: &str = "Count";

/// How frequencies are shown on the x axis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FrequencyAxis {
    /// Offset from `center_hz`, in Hz, kHz or MHz depending on the plotted span.
    OffsetFrom {
        /// The frequency at offset zero, Hz.
        center_hz: f64,
    },
    /// Absolute frequency in MHz, with the decimals the tick step needs.
    AbsoluteMhz,
}

/// Size, title and axes of a plot.
#[derive(Debug, Clone, PartialEq)]
pub struct PlotOptions {
    /// Image width, px (560 to 16384; the SVG scales, so show it smaller rather than asking
    /// for fewer pixels: the text is drawn at 14 px and more).
    pub width: u32,
    /// Image height, px (360 to 16384).
    pub height: u32,
    /// Title line(s) above the chart, wrapped at word boundaries; empty for none.
    pub title: String,
    /// The frequency axis.
    pub axis: FrequencyAxis,
    /// Transmission as the linear ratio |S21| instead of dB (used by [`transmission_svg`]).
    pub linear: bool,
}

impl Default for PlotOptions {
    /// 800 × 500 px, no title, absolute MHz, dB.
    fn default() -> Self {
        PlotOptions {
            width: 800,
            height: 500,
            title: String::new(),
            axis: FrequencyAxis::AbsoluteMhz,
            linear: false,
        }
    }
}

impl PlotOptions {
    /// The default size with `title` and `axis`.
    pub fn new(title: impl Into<String>, axis: FrequencyAxis) -> Self {
        PlotOptions {
            title: title.into(),
            axis,
            ..PlotOptions::default()
        }
    }
}

/// Ticks that fit the plot height.
fn y_target(opts: &PlotOptions) -> usize {
    tick_target(opts.height.saturating_sub(140), 28.0)
}

/// A dB axis from the data (clamped at [`WIDE_FLOOR_DB`]) up to at least 0 dB, reaching down
/// to `need_floor_db` when given.
fn db_axis(values: &[f64], need_floor_db: Option<f64>, opts: &PlotOptions, desc: &str) -> Axis {
    let (lo, hi) = finite_range(values.iter().copied()).unwrap_or((WIDE_FLOOR_DB, 0.0));
    let top = hi.max(0.0);
    let mut floor = lo.max(WIDE_FLOOR_DB);
    if let Some(need) = need_floor_db.filter(|v| v.is_finite()) {
        floor = floor.min(need.max(WIDE_FLOOR_DB));
    }
    // At least 10 dB of axis, however flat the data.
    floor = floor.min(top - 10.0);
    Axis::nice(floor, top, y_target(opts), desc)
}

/// Formatter for tick labels with the axis decimals.
fn value_labels(axis: &Axis) -> impl Fn(f64) -> String {
    let d = axis.ticks.decimals;
    move |v| fmt_num(v, d)
}

/// [`format_si`] with a true minus sign.
fn si(value: f64, unit: &str) -> String {
    minus(format_si(value, unit))
}

/// `s` with a leading hyphen turned into a minus sign.
fn minus(s: String) -> String {
    match s.strip_prefix('-') {
        Some(rest) => format!("\u{2212}{rest}"),
        None => s,
    }
}

/// A legend entry.
fn item(sample: Sample, text: impl Into<String>) -> (Sample, String) {
    (sample, text.into())
}

/// Spots for a label at height `y` near either end of the plot: above the level when `above`,
/// else below; the right end first.
fn end_spots(chart: &Chart<'_, '_>, y: f64, above: bool) -> [Spot; 2] {
    let x = chart.x_range();
    let (dy, v) = if above {
        (-4, VPos::Bottom)
    } else {
        (4, VPos::Top)
    };
    [
        Spot::new((x.end, y), (-8, dy), HPos::Right, v),
        Spot::new((x.start, y), (8, dy), HPos::Left, v),
    ]
}

/// One marker level below the passband peak.
struct Level {
    below_db: f64,
    color: RGBColor,
    edges: Option<[f64; 2]>,
    width_hz: Option<f64>,
    /// The −60/−6 dB shape factor, carried by the −60 dB level only.
    shape_factor: Option<f64>,
}

impl Level {
    /// "−3 dB", with the bandwidth and (on a second line) the shape factor when known.
    fn tag(&self) -> String {
        let mut t = format!("{} dB", fmt_num(-self.below_db, 0));
        if let Some(w) = self.width_hz.filter(|w| w.is_finite()) {
            t = format!("{t}: BW {}", si(w, "Hz"));
        }
        if let Some(sf) = self.shape_factor.filter(|s| s.is_finite()) {
            t = format!("{t}\nshape factor {}", fmt_num(sf, 2));
        }
        t
    }
}

fn levels(perf: Option<&Performance>) -> [Level; 3] {
    [
        Level {
            below_db: 3.0,
            color: palette::ORANGE,
            edges: perf.map(|p| p.edges_3db_hz),
            width_hz: perf.map(|p| p.bw_3db_hz),
            shape_factor: None,
        },
        Level {
            below_db: 6.0,
            color: palette::VIOLET,
            edges: perf.map(|p| p.edges_6db_hz),
            width_hz: perf.map(|p| p.bw_6db_hz),
            shape_factor: None,
        },
        Level {
            below_db: 60.0,
            color: palette::SLATE,
            edges: perf.and_then(|p| p.edges_60db_hz),
            width_hz: perf.and_then(|p| p.bw_60db_hz),
            shape_factor: perf.and_then(|p| p.shape_factor_60_6),
        },
    ]
}

/// Shade the −3 dB band of `perf`, if any.
fn shade_passband(chart: &mut Chart<'_, '_>, fx: &FreqScale, perf: Option<&Performance>) -> Drawn {
    if let Some(p) = perf {
        let [a, b] = p.edges_3db_hz;
        shade_x(chart, fx.x(a), fx.x(b), palette::FILL)?;
    }
    Ok(())
}

/// |S21| in dB (or as a linear |V| ratio with [`PlotOptions::linear`]) over the sweep, with the
/// passband shaded and markers at −3, −6 and −60 dB below the passband peak, each tagged with
/// its bandwidth from `perf` (see the module docs).
///
/// # Errors
/// An empty sweep, a sweep whose `s21` and `f_hz` differ in length, a sweep with no plottable
/// point, or bad [`PlotOptions`].
pub fn transmission_svg(
    sweep: &Sweep,
    perf: Option<&Performance>,
    opts: &PlotOptions,
) -> Result<String> {
    check_options(opts)?;
    check_len("sweep s21", sweep.s21.len(), sweep.f_hz.len())?;
    let db = sweep.s21_db();
    let (f_lo, f_hi) = plotted_f_range(&sweep.f_hz, &db, "sweep |S21|")?;
    let fx = FreqScale::new(&opts.axis, f_lo, f_hi, opts.width);
    let perf = perf.filter(|p| p.insertion_loss_db.is_finite());
    let peak_db = perf
        .map(|p| -p.insertion_loss_db)
        .or_else(|| finite_range(db.iter().copied()).map(|r| r.1))
        .unwrap_or(0.0);
    let marks = levels(perf);
    let x_axis = Axis::frequency(&fx);
    let xl = |v: f64| fx.tick_label(v);
    // The plotted values and the level of each marker (None: edges only).
    let (values, y, at): (Vec<f64>, Axis, Vec<Option<f64>>) = if opts.linear {
        let mag: Vec<f64> = sweep.s21.iter().map(|z| z.norm()).collect();
        let hi = finite_range(mag.iter().copied())
            .map_or(1.0, |r| r.1)
            .max(1e-12);
        let y = Axis::nice(0.0, hi * 1.04, y_target(opts), TRANSMISSION_LINEAR_LABEL);
        let peak = 10f64.powf(peak_db / 20.0);
        // −60 dB is indistinguishable from zero on a linear axis: its edges only.
        let at = marks
            .iter()
            .map(|m| (m.below_db < 10.0).then(|| peak * 10f64.powf(-m.below_db / 20.0)))
            .collect();
        (mag, y, at)
    } else {
        let need = perf.and_then(|p| p.edges_60db_hz).map(|_| peak_db - 70.0);
        let mut y = db_axis(&db, need, opts, TRANSMISSION_DB_LABEL);
        // Room above the −3 dB line for its tag (about 28 px of the plot height, which is the
        // image height less about 150 px of title and labels): else one more step.
        let span = y.range.1 - y.range.0;
        let room = 28.0 / f64::from(opts.height.saturating_sub(150).max(100));
        if y.range.1 - (peak_db - 3.0) < room * span {
            y.range.1 += y.ticks.step;
            y.ticks = frame::ticks_with_step(y.range.0, y.range.1, y.ticks.step);
        }
        let at = marks.iter().map(|m| Some(peak_db - m.below_db)).collect();
        (db, y, at)
    };
    let yl = value_labels(&y);
    render(opts, &opts.title, &x_axis, &xl, &y, &yl, |chart| {
        shade_passband(chart, &fx, perf)?;
        let mut obstacles = Obstacles::default();
        let shown: Vec<(&Level, Option<f64>)> = marks
            .iter()
            .zip(&at)
            .map(|(m, l)| (m, l.filter(|v| *v >= y.range.0 && *v <= y.range.1)))
            .filter(|(m, l)| l.is_some() || m.edges.is_some())
            .collect();
        for &(m, level) in &shown {
            if let Some(v) = level {
                hline(chart, v, m.color.stroke_width(2))?;
                let x = chart.x_range();
                let line: Vec<(f64, f64)> = (0..=40)
                    .map(|k| (x.start + (x.end - x.start) * f64::from(k) / 40.0, v))
                    .collect();
                obstacles.add_runs(chart, &[line]);
            }
            for f in m.edges.into_iter().flatten().filter(|&f| fx.contains(f)) {
                vline(chart, fx.x(f), m.color.mix(0.9).stroke_width(1))?;
                obstacles.add_vline(chart, fx.x(f));
            }
        }
        let r = runs(
            sweep.f_hz.iter().zip(&values).map(|(&f, &v)| (fx.x(f), v)),
            y.range.0,
            y.range.1,
        );
        draw_runs(chart, &r, palette::TEAL.stroke_width(3))?;
        obstacles.add_runs(chart, &r);
        for &(m, level) in &shown {
            // −3 dB and −60 dB tags above their lines, −6 dB below (it is 3 dB under −3 dB).
            let spots: Vec<Spot> = match level {
                Some(v) => {
                    // The preferred side of the line first, then the other.
                    let above = (m.below_db - 6.0).abs() > 1e-9;
                    let mut s = end_spots(chart, v, above).to_vec();
                    s.extend(end_spots(chart, v, !above));
                    s
                }
                None => {
                    let (xr, yr) = (chart.x_range(), chart.y_range());
                    vec![
                        Spot::new((xr.start, yr.end), (8, 8), HPos::Left, VPos::Top),
                        Spot::new((xr.end, yr.end), (-8, 8), HPos::Right, VPos::Top),
                    ]
                }
            };
            place_note(chart, &spots, &m.tag(), m.color, &mut obstacles)?;
        }
        Ok(())
    })
}

/// Return loss −20·log10|S11| in dB, drawn upward, with the passband shaded and the worst
/// passband return loss of `perf` as a dashed line.
///
/// # Errors
/// As [`transmission_svg`], for `s11`.
pub fn return_loss_svg(
    sweep: &Sweep,
    perf: Option<&Performance>,
    opts: &PlotOptions,
) -> Result<String> {
    check_options(opts)?;
    check_len("sweep s11", sweep.s11.len(), sweep.f_hz.len())?;
    let rl: Vec<f64> = sweep.s11_db().into_iter().map(|v| -v).collect();
    let (f_lo, f_hi) = plotted_f_range(&sweep.f_hz, &rl, "sweep |S11|")?;
    let fx = FreqScale::new(&opts.axis, f_lo, f_hi, opts.width);
    let (lo, hi) = finite_range(rl.iter().copied()).unwrap_or((0.0, 20.0));
    let top = hi.clamp(20.0, RETURN_LOSS_CEILING_DB);
    let bottom = lo.clamp(-20.0, 0.0);
    let y = Axis::nice(bottom, top, y_target(opts), RETURN_LOSS_LABEL);
    let yl = value_labels(&y);
    let x_axis = Axis::frequency(&fx);
    let xl = |v: f64| fx.tick_label(v);
    render(opts, &opts.title, &x_axis, &xl, &y, &yl, |chart| {
        shade_passband(chart, &fx, perf)?;
        let worst = perf.map(|p| p.return_loss_db).filter(|v| v.is_finite());
        let level = worst.map(|v| v.clamp(y.range.0, y.range.1));
        if let Some(l) = level {
            hline(chart, l, palette::ORANGE.stroke_width(2))?;
        }
        let r = runs(
            sweep.f_hz.iter().zip(&rl).map(|(&f, &v)| (fx.x(f), v)),
            y.range.0,
            y.range.1,
        );
        draw_runs(chart, &r, palette::TEAL.stroke_width(3))?;
        if let (Some(w), Some(l)) = (worst, level) {
            let mut obstacles = Obstacles::default();
            obstacles.add_runs(chart, &r);
            let mut spots = end_spots(chart, l, true).to_vec();
            spots.reverse();
            spots.extend(end_spots(chart, l, false));
            let label = format!("worst in passband: {}", si(w, "dB"));
            place_note(chart, &spots, &label, palette::ORANGE, &mut obstacles)?;
        }
        Ok(())
    })
}

/// The unit of a time axis whose largest value is `max_s`: (seconds per unit, symbol).
fn time_unit(max_s: f64) -> (f64, &'static str) {
    if max_s >= 1e-3 {
        (1e-3, "ms")
    } else if max_s >= 1e-6 {
        (1e-6, "µs")
    } else {
        (1e-9, "ns")
    }
}

/// Group delay of S21 over the sweep, in µs or ms, with the passband shaded and the centre
/// delay of `perf` marked.
///
/// # Errors
/// As [`transmission_svg`], for `group_delay_s` (and `s21`, which picks the axis scale).
pub fn group_delay_svg(
    sweep: &Sweep,
    perf: Option<&Performance>,
    opts: &PlotOptions,
) -> Result<String> {
    check_options(opts)?;
    check_len(
        "sweep group delay",
        sweep.group_delay_s.len(),
        sweep.f_hz.len(),
    )?;
    check_len("sweep s21", sweep.s21.len(), sweep.f_hz.len())?;
    let tau = &sweep.group_delay_s;
    let (f_lo, f_hi) = plotted_f_range(&sweep.f_hz, tau, "sweep group delay")?;
    let fx = FreqScale::new(&opts.axis, f_lo, f_hi, opts.width);
    let db = sweep.s21_db();
    let peak_db = finite_range(db.iter().copied()).map_or(0.0, |r| r.1);
    // Scale the axis to the points within 20 dB of the peak: the passband and its edges.
    let in_band = finite_range(
        tau.iter()
            .zip(&db)
            .filter(|(_, &d)| d >= peak_db - 20.0)
            .map(|(&t, _)| t),
    );
    let (lo, hi) = in_band
        .or_else(|| finite_range(tau.iter().copied()))
        .unwrap_or((0.0, 1e-6));
    let (unit_s, unit) = time_unit(hi.abs().max(lo.abs()));
    let y = Axis::nice(
        (lo / unit_s).min(0.0),
        (hi / unit_s) * 1.12,
        y_target(opts),
        format!("Group delay ({unit})"),
    );
    let yl = value_labels(&y);
    let x_axis = Axis::frequency(&fx);
    let xl = |v: f64| fx.tick_label(v);
    render(opts, &opts.title, &x_axis, &xl, &y, &yl, |chart| {
        shade_passband(chart, &fx, perf)?;
        let r = runs(
            sweep
                .f_hz
                .iter()
                .zip(tau)
                .map(|(&f, &t)| (fx.x(f), t / unit_s)),
            y.range.0,
            y.range.1,
        );
        draw_runs(chart, &r, palette::VIOLET.stroke_width(3))?;
        let mut items = Vec::new();
        if let Some(p) = perf {
            let (fc, tc) = (p.center_hz, p.group_delay_center_s);
            if fx.contains(fc) && tc.is_finite() {
                let at = (fx.x(fc), (tc / unit_s).clamp(y.range.0, y.range.1));
                chart.draw_series(std::iter::once(Circle::new(
                    at,
                    5,
                    palette::ORANGE.filled(),
                )))?;
                items.push(item(
                    Sample::Dot(palette::ORANGE),
                    format!("at centre: {}", si(tc, "s")),
                ));
            }
            if p.group_delay_variation_s.is_finite() {
                items.push(item(
                    Sample::Band(palette::FILL),
                    format!(
                        "variation over −3 dB band: {}",
                        si(p.group_delay_variation_s, "s")
                    ),
                ));
            }
        }
        let mut obstacles = Obstacles::default();
        obstacles.add_runs(chart, &r);
        legend(chart, &items, &mut obstacles)
    })
}

/// The largest finite sampled level within `half_hz` of `f`, and its frequency; else the
/// sampled level nearest to `f`.
fn local_peak(f_hz: &[f64], db: &[f64], f: f64, half_hz: f64) -> Option<(f64, f64)> {
    let near = f_hz
        .iter()
        .zip(db)
        .filter(|(fi, v)| (*fi - f).abs() <= half_hz && v.is_finite());
    let best = near.fold(None, |acc: Option<(f64, f64)>, (&fi, &v)| match acc {
        Some((_, bv)) if bv >= v => acc,
        _ => Some((fi, v)),
    });
    best.or_else(|| {
        f_hz.iter()
            .zip(db)
            .filter(|(fi, v)| fi.is_finite() && !v.is_nan())
            .min_by(|a, b| (a.0 - f).abs().total_cmp(&(b.0 - f).abs()))
            .map(|(&fi, &v)| (fi, v))
    })
}

/// The far skirts: |S21| in dB down to [`WIDE_FLOOR_DB`], with each C0 notch (`notches_hz`) and
/// spurious response (`spurious_hz`) on the plotted range marked and labelled. A spurious
/// response is marked at the highest sampled level within 1 % of the plotted span of its
/// frequency (the circuit pulls the peak a little off the crystal's own mode), labelled with
/// the given frequency and that peak level. Frequencies off the plotted range are left out.
///
/// # Errors
/// As [`transmission_svg`].
pub fn wide_svg(
    sweep: &Sweep,
    perf: Option<&Performance>,
    notches_hz: &[f64],
    spurious_hz: &[f64],
    opts: &PlotOptions,
) -> Result<String> {
    check_options(opts)?;
    check_len("sweep s21", sweep.s21.len(), sweep.f_hz.len())?;
    let db = sweep.s21_db();
    let (f_lo, f_hi) = plotted_f_range(&sweep.f_hz, &db, "sweep |S21|")?;
    let fx = FreqScale::new(&opts.axis, f_lo, f_hi, opts.width);
    let y = db_axis(&db, Some(WIDE_FLOOR_DB), opts, TRANSMISSION_DB_LABEL);
    let yl = value_labels(&y);
    let x_axis = Axis::frequency(&fx);
    let xl = |v: f64| fx.tick_label(v);
    let window_hz = 0.01 * (f_hi - f_lo);
    render(opts, &opts.title, &x_axis, &xl, &y, &yl, |chart| {
        shade_passband(chart, &fx, perf)?;
        let mut obstacles = Obstacles::default();
        let notches: Vec<f64> = notches_hz
            .iter()
            .copied()
            .filter(|&f| fx.contains(f))
            .collect();
        for &f in &notches {
            vline(chart, fx.x(f), palette::VIOLET.stroke_width(2))?;
            obstacles.add_vline(chart, fx.x(f));
        }
        let r = runs(
            sweep.f_hz.iter().zip(&db).map(|(&f, &v)| (fx.x(f), v)),
            y.range.0,
            y.range.1,
        );
        draw_runs(chart, &r, palette::TEAL.stroke_width(3))?;
        obstacles.add_runs(chart, &r);
        let mut items = vec![item(Sample::Line(palette::TEAL, 3, false), "|S21|")];
        if !notches.is_empty() {
            items.push(item(Sample::Line(palette::VIOLET, 2, true), "C0 notch"));
        }
        let top = chart.y_range().end;
        for &f in &notches {
            let x = fx.x(f);
            let spots: Vec<Spot> = (0..6)
                .flat_map(|row| {
                    let dy = 8 + 19 * row;
                    [
                        Spot::new((x, top), (6, dy), HPos::Left, VPos::Top),
                        Spot::new((x, top), (-6, dy), HPos::Right, VPos::Top),
                    ]
                })
                .collect();
            let label = format!("C0 notch {}", fx.describe(f));
            place_note(chart, &spots, &label, palette::VIOLET, &mut obstacles)?;
        }
        let spurs: Vec<f64> = spurious_hz
            .iter()
            .copied()
            .filter(|&f| fx.contains(f))
            .collect();
        if !spurs.is_empty() {
            items.push(item(Sample::Triangle(palette::RED), "spurious response"));
        }
        for &f in &spurs {
            let Some((fp, level)) = local_peak(&sweep.f_hz, &db, f, window_hz) else {
                continue;
            };
            let at = (fx.x(fp), level.clamp(y.range.0, y.range.1));
            chart.draw_series(std::iter::once(TriangleMarker::new(
                at,
                7,
                palette::RED.filled(),
            )))?;
            // Two short lines fit beside the marker more often than one long one.
            let level_text = if level.is_finite() && level >= y.range.0 {
                format!("\npeak {}", si(level, "dB"))
            } else if level < y.range.0 {
                format!("\nbelow {}", si(y.range.0, "dB"))
            } else {
                String::new()
            };
            let label = format!("spurious {}{level_text}", fx.describe(f));
            let spots: Vec<Spot> = [0, 22, -22, 44, -44, 66, -66, 88, 110]
                .into_iter()
                .flat_map(|dy| {
                    [
                        Spot::new(at, (12, dy), HPos::Left, VPos::Center),
                        Spot::new(at, (-12, dy), HPos::Right, VPos::Center),
                    ]
                })
                .chain([Spot::new(at, (0, -14), HPos::Center, VPos::Bottom)])
                .collect();
            place_note(chart, &spots, &label, palette::RED, &mut obstacles)?;
        }
        legend(chart, &items, &mut obstacles)
    })
}

/// Measured |S21| (points and a thin line) against the fitted model (thick line), with a
/// legend; the rms residual over the points where both are finite is appended to the title.
///
/// # Errors
/// An empty trace, `s21_db` or `fitted_db` of another length than `f_hz`, no plottable point,
/// or bad [`PlotOptions`].
pub fn fit_overlay_svg(
    measured: &MeasuredTrace,
    fitted_db: &[f64],
    opts: &PlotOptions,
) -> Result<String> {
    check_options(opts)?;
    let n = measured.f_hz.len();
    check_len("measured s21_db", measured.s21_db.len(), n)?;
    check_len("fitted_db", fitted_db.len(), n)?;
    let (f_lo, f_hi) = plotted_f_range(&measured.f_hz, &measured.s21_db, "measured |S21|")?;
    let fx = FreqScale::new(&opts.axis, f_lo, f_hi, opts.width);
    let mut sum = 0.0;
    let mut count = 0usize;
    for (m, f) in measured.s21_db.iter().zip(fitted_db) {
        let r = m - f;
        if r.is_finite() {
            sum += r * r;
            count += 1;
        }
    }
    let rms = (count > 0).then(|| format_si_digits((sum / count as f64).sqrt(), "dB", 3));
    let title = match rms {
        Some(r) if opts.title.is_empty() => format!("residual rms {r}"),
        Some(r) => format!("{} · residual rms {r}", opts.title),
        None => opts.title.clone(),
    };
    let all: Vec<f64> = measured.s21_db.iter().chain(fitted_db).copied().collect();
    let (lo, hi) = finite_range(all.iter().copied()).unwrap_or((WIDE_FLOOR_DB, 0.0));
    let lo = lo.max(WIDE_FLOOR_DB);
    let y = Axis::nice(
        lo.min(hi - 10.0),
        hi + 0.04 * (hi - lo).max(10.0),
        y_target(opts),
        TRANSMISSION_DB_LABEL,
    );
    let yl = value_labels(&y);
    let x_axis = Axis::frequency(&fx);
    let xl = |v: f64| fx.tick_label(v);
    render(opts, &title, &x_axis, &xl, &y, &yl, |chart| {
        let pts = measured
            .f_hz
            .iter()
            .zip(&measured.s21_db)
            .map(|(&f, &v)| (fx.x(f), v));
        let r = runs(pts, y.range.0, y.range.1);
        draw_runs(chart, &r, palette::SLATE.stroke_width(1))?;
        let measured_sample = if n <= 400 {
            let dots = r
                .iter()
                .flatten()
                .map(|&p| Circle::new(p, 3, palette::SLATE.filled()));
            chart.draw_series(dots)?;
            Sample::Dot(palette::SLATE)
        } else {
            Sample::Line(palette::SLATE, 1, false)
        };
        let rf = runs(
            measured
                .f_hz
                .iter()
                .zip(fitted_db)
                .map(|(&f, &v)| (fx.x(f), v)),
            y.range.0,
            y.range.1,
        );
        draw_runs(chart, &rf, palette::ORANGE.stroke_width(2))?;
        let items = [
            item(measured_sample, "measured"),
            item(Sample::Line(palette::ORANGE, 2, false), "fitted model"),
        ];
        let mut obstacles = Obstacles::default();
        obstacles.add_runs(chart, &r);
        obstacles.add_runs(chart, &rf);
        legend(chart, &items, &mut obstacles)
    })
}

/// A Monte Carlo envelope: the band between `min_db` and `max_db` shaded, `nominal_db` drawn
/// over it, all against `f_hz`.
///
/// # Errors
/// Empty input, arrays of different lengths, no plottable point, or bad [`PlotOptions`].
pub fn envelope_svg(
    f_hz: &[f64],
    min_db: &[f64],
    max_db: &[f64],
    nominal_db: &[f64],
    opts: &PlotOptions,
) -> Result<String> {
    check_options(opts)?;
    let n = f_hz.len();
    check_len("envelope min_db", min_db.len(), n)?;
    check_len("envelope max_db", max_db.len(), n)?;
    check_len("envelope nominal_db", nominal_db.len(), n)?;
    let all: Vec<f64> = min_db
        .iter()
        .chain(max_db)
        .chain(nominal_db)
        .copied()
        .collect();
    // A point is plottable when any of its three values is.
    let any: Vec<f64> = min_db
        .iter()
        .zip(max_db)
        .zip(nominal_db)
        .map(|((a, b), c)| {
            if a.is_nan() && b.is_nan() && c.is_nan() {
                f64::NAN
            } else {
                0.0
            }
        })
        .collect();
    let (f_lo, f_hi) = plotted_f_range(f_hz, &any, "envelope")?;
    let fx = FreqScale::new(&opts.axis, f_lo, f_hi, opts.width);
    let y = db_axis(&all, None, opts, TRANSMISSION_DB_LABEL);
    let yl = value_labels(&y);
    let x_axis = Axis::frequency(&fx);
    let xl = |v: f64| fx.tick_label(v);
    render(opts, &opts.title, &x_axis, &xl, &y, &yl, |chart| {
        // The band: runs where both bounds are known, lower edge forward, upper edge back.
        let (ylo, yhi) = (y.range.0, y.range.1);
        let mut band: Vec<(f64, f64, f64)> = Vec::new();
        let mut bands: Vec<Vec<(f64, f64, f64)>> = Vec::new();
        for ((&f, &a), &b) in f_hz.iter().zip(min_db).zip(max_db) {
            if f.is_finite() && !a.is_nan() && !b.is_nan() {
                band.push((fx.x(f), a.clamp(ylo, yhi), b.clamp(ylo, yhi)));
            } else if !band.is_empty() {
                bands.push(std::mem::take(&mut band));
            }
        }
        if !band.is_empty() {
            bands.push(band);
        }
        let fill = palette::FILL.mix(0.35).filled();
        for b in &bands {
            let poly: Vec<(f64, f64)> = b
                .iter()
                .map(|p| (p.0, p.1))
                .chain(b.iter().rev().map(|p| (p.0, p.2)))
                .collect();
            chart.draw_series(std::iter::once(Polygon::new(poly, fill)))?;
        }
        let mut obstacles = Obstacles::default();
        for bound in [min_db, max_db] {
            let r = runs(
                f_hz.iter().zip(bound).map(|(&f, &v)| (fx.x(f), v)),
                ylo,
                yhi,
            );
            draw_runs(chart, &r, palette::TEAL.stroke_width(1))?;
            obstacles.add_runs(chart, &r);
        }
        let r = runs(
            f_hz.iter().zip(nominal_db).map(|(&f, &v)| (fx.x(f), v)),
            ylo,
            yhi,
        );
        draw_runs(chart, &r, palette::DEEP.stroke_width(2))?;
        obstacles.add_runs(chart, &r);
        let items = [
            item(Sample::Band(palette::FILL), "Monte Carlo min to max"),
            item(Sample::Line(palette::DEEP, 2, false), "nominal"),
        ];
        legend(chart, &items, &mut obstacles)
    })
}

/// Largest number of histogram bins accepted.
pub const MAX_BINS: usize = 10_000;

/// A limit as the user gave it: the shortest decimal that reads back as the same value.
fn fmt_limit(v: f64) -> String {
    minus(format!("{v}"))
}

/// A histogram of `values` (in the unit named by `x_label`) in `bins` equal bins over their
/// range, with pass limits `(low, high)` as vertical lines; an infinite limit means "no limit
/// on that side". Bars whose centre falls outside the limits are drawn in red, and the legend
/// gives the limits and the count within them (inclusive). Non-finite values are left out.
///
/// # Errors
/// `bins` of 0 or above [`MAX_BINS`], no finite value, NaN limits or limits with low above
/// high, or bad [`PlotOptions`].
pub fn histogram_svg(
    values: &[f64],
    bins: usize,
    x_label: &str,
    limit: Option<(f64, f64)>,
    opts: &PlotOptions,
) -> Result<String> {
    check_options(opts)?;
    if bins == 0 || bins > MAX_BINS {
        return Err(Error::invalid(
            "histogram bins",
            bins,
            &format!("1 to {MAX_BINS}"),
        ));
    }
    if let Some((a, b)) = limit {
        if a.is_nan() || b.is_nan() || a > b {
            return Err(Error::invalid(
                "histogram limits",
                format!("({a}, {b})"),
                "a low limit not above the high limit (±inf for none)",
            ));
        }
    }
    let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    let (vmin, vmax) = finite_range(finite.iter().copied()).ok_or_else(|| {
        Error::invalid(
            "histogram values",
            format!("{} values, none finite", values.len()),
            "at least one finite value",
        )
    })?;
    let (vmin, vmax) = frame::widen(vmin, vmax);
    let width = (vmax - vmin) / bins as f64;
    let mut counts = vec![0usize; bins];
    for &v in &finite {
        let k = (((v - vmin) / width).floor().max(0.0) as usize).min(bins - 1);
        if let Some(c) = counts.get_mut(k) {
            *c += 1;
        }
    }
    let (lim_lo, lim_hi) = limit.unwrap_or((f64::NEG_INFINITY, f64::INFINITY));
    let inside = finite
        .iter()
        .filter(|&&v| v >= lim_lo && v <= lim_hi)
        .count();
    // x range: the data and the finite limits, with a margin.
    let (mut a, mut b) = (vmin, vmax);
    for l in [lim_lo, lim_hi].into_iter().filter(|l| l.is_finite()) {
        a = a.min(l);
        b = b.max(l);
    }
    let pad = (b - a) * 0.06;
    let x = Axis::exact(a - pad, b + pad, tick_target(opts.width, 90.0), x_label);
    let xl = value_labels(&x);
    let mut items = Vec::new();
    for (l, name) in [(lim_lo, "low limit"), (lim_hi, "high limit")] {
        if l.is_finite() {
            items.push(item(
                Sample::Line(palette::RED, 2, true),
                format!("{name} {}", fmt_limit(l)),
            ));
        }
    }
    if limit.is_some() {
        let share = 100.0 * inside as f64 / finite.len() as f64;
        items.push(item(
            Sample::Band(palette::BAR),
            format!(
                "within limits: {inside} of {} ({} %)",
                finite.len(),
                fmt_num(share, 1)
            ),
        ));
        if inside < finite.len() {
            items.push(item(Sample::Band(palette::RED), "outside limits"));
        }
    }
    // Head room above the tallest bar for the legend.
    let cmax = counts.iter().copied().max().unwrap_or(0).max(1) as f64;
    let head = 1.15 + 0.08 * items.len() as f64;
    let mut y = Axis::nice(0.0, cmax * head, y_target(opts), COUNT_LABEL);
    if y.ticks.step < 1.0 {
        // Counts are whole numbers.
        y.ticks = frame::ticks_with_step(y.range.0, y.range.1, 1.0);
    }
    let yl = value_labels(&y);
    render(opts, &opts.title, &x, &xl, &y, &yl, |chart| {
        let inside_of = |mid: f64| mid >= lim_lo && mid <= lim_hi;
        let bars = counts.iter().enumerate().map(|(k, &c)| {
            let x0 = vmin + width * k as f64;
            let color = if inside_of(x0 + 0.5 * width) {
                palette::BAR
            } else {
                palette::RED
            };
            Rectangle::new(
                [(x0, 0.0), (x0 + width, c as f64)],
                color.mix(0.85).filled(),
            )
        });
        chart.draw_series(bars)?;
        // Thin white separators between bars.
        let outlines = counts
            .iter()
            .enumerate()
            .filter(|(_, &c)| c > 0)
            .map(|(k, &c)| {
                let x0 = vmin + width * k as f64;
                Rectangle::new([(x0, 0.0), (x0 + width, c as f64)], WHITE.stroke_width(1))
            });
        chart.draw_series(outlines)?;
        let mut obstacles = Obstacles::default();
        for l in [lim_lo, lim_hi].into_iter().filter(|l| l.is_finite()) {
            vline(chart, l, palette::RED.stroke_width(2))?;
        }
        // The bars, as columns of points, for the legend to keep clear of.
        let bar_pts: Vec<Vec<(f64, f64)>> = counts
            .iter()
            .enumerate()
            .map(|(k, &c)| {
                let xm = vmin + width * (k as f64 + 0.5);
                (0..=6)
                    .map(|j| (xm, c as f64 * f64::from(j) / 6.0))
                    .collect()
            })
            .collect();
        obstacles.add_runs(chart, &bar_pts);
        legend(chart, &items, &mut obstacles)
    })
}
