//! The shared frame of every chart: checks, axis scales, tick marks, the palette, and the
//! plotters chart with its title, grid and labels.

use super::{FrequencyAxis, PlotOptions};
use crate::error::{Error, Result};
use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint, Ranged};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::ops::Range;

/// A linear axis with the tick positions chosen here (plotters draws its grid and labels at
/// exactly these values).
#[derive(Debug, Clone)]
pub(super) struct Ticked {
    lo: f64,
    hi: f64,
    ticks: Vec<f64>,
}

impl Ranged for Ticked {
    type FormatOption = DefaultFormatting;
    type ValueType = f64;

    fn map(&self, v: &f64, limit: (i32, i32)) -> i32 {
        let t = (v - self.lo) / (self.hi - self.lo);
        let px = f64::from(limit.0) + f64::from(limit.1 - limit.0) * t;
        // Values are clamped before drawing; this only keeps a stray value representable.
        if px.is_finite() {
            px.round().clamp(-1e6, 1e6) as i32
        } else {
            limit.0
        }
    }

    fn key_points<H: KeyPointHint>(&self, hint: H) -> Vec<f64> {
        if hint.weight().allow_light_points() {
            Vec::new()
        } else {
            self.ticks.clone()
        }
    }

    fn range(&self) -> Range<f64> {
        self.lo..self.hi
    }
}

/// The chart type every plot draws on.
pub(super) type Chart<'a, 'b> = ChartContext<'a, SVGBackend<'b>, Cartesian2d<Ticked, Ticked>>;

/// What drawing on an SVG string can fail with.
pub(super) type DrawError = DrawingAreaErrorKind<std::io::Error>;

/// Result of a drawing step.
pub(super) type Drawn = std::result::Result<(), DrawError>;

/// Smallest and largest accepted image sizes, px.
/// Below these the 14 px text crowds the chart; an SVG scales, so a smaller picture is the
/// same document shown smaller.
const MIN_WIDTH: u32 = 560;
const MIN_HEIGHT: u32 = 360;
const MAX_SIDE: u32 = 16_384;

/// The font family of all text.
pub(super) const FONT: &str = "sans-serif";

/// A plotters text size for a rendered font size of `px` pixels (the SVG backend writes
/// `font-size` as the style size divided by 1.24).
pub(super) fn font_size(px: f64) -> f64 {
    px * 1.24
}

/// A text style of `px` pixels in `color`.
pub(super) fn text(px: f64, color: RGBColor) -> TextStyle<'static> {
    TextStyle {
        font: (FONT, font_size(px)).into_font(),
        color: color.to_backend_color(),
        pos: Pos::new(HPos::Left, VPos::Top),
    }
}

/// A text style anchored at (`h`, `v`).
pub(super) fn text_at(px: f64, color: RGBColor, h: HPos, v: VPos) -> TextStyle<'static> {
    text(px, color).pos(Pos::new(h, v))
}

/// Rendered sizes, px.
pub(super) const TICK_PX: f64 = 14.5;
pub(super) const DESC_PX: f64 = 16.0;
pub(super) const NOTE_PX: f64 = 14.0;
pub(super) const TITLE_PX: f64 = 19.0;

/// The palette: ink on white, a deep teal for the main trace, burnt orange for the second,
/// violet for the third; marker colours are darker than the fills they sit on.
pub(super) mod palette {
    use plotters::style::RGBColor;
    /// Text, axes and frame.
    pub const INK: RGBColor = RGBColor(0x1f, 0x29, 0x33);
    /// Grid lines.
    pub const GRID: RGBColor = RGBColor(0xe3, 0xe7, 0xeb);
    /// Main trace.
    pub const TEAL: RGBColor = RGBColor(0x0b, 0x6e, 0x75);
    /// Dark companion of the main trace.
    pub const DEEP: RGBColor = RGBColor(0x08, 0x3d, 0x44);
    /// Second trace, the −3 dB marker.
    pub const ORANGE: RGBColor = RGBColor(0xc2, 0x4a, 0x0e);
    /// The −6 dB marker, the third trace.
    pub const VIOLET: RGBColor = RGBColor(0x6d, 0x2d, 0xc9);
    /// The −60 dB marker.
    pub const SLATE: RGBColor = RGBColor(0x4b, 0x5a, 0x6b);
    /// Warnings: limits, values outside them, spurious responses.
    pub const RED: RGBColor = RGBColor(0xb4, 0x1c, 0x2c);
    /// Histogram bars inside the limits.
    pub const BAR: RGBColor = RGBColor(0x4a, 0x86, 0x8e);
    /// Passband fill (drawn with transparency).
    pub const FILL: RGBColor = RGBColor(0x2a, 0x9d, 0x8f);
}

// ---------------------------------------------------------------------------------------------
// Checks

/// Check the image size and axis of `opts`.
pub(super) fn check_options(opts: &PlotOptions) -> Result<()> {
    if !(MIN_WIDTH..=MAX_SIDE).contains(&opts.width) {
        return Err(Error::invalid(
            "plot width",
            format!("{} px", opts.width),
            &format!("{MIN_WIDTH} to {MAX_SIDE} px"),
        ));
    }
    if !(MIN_HEIGHT..=MAX_SIDE).contains(&opts.height) {
        return Err(Error::invalid(
            "plot height",
            format!("{} px", opts.height),
            &format!("{MIN_HEIGHT} to {MAX_SIDE} px"),
        ));
    }
    if let FrequencyAxis::OffsetFrom { center_hz } = opts.axis {
        if !(center_hz.is_finite() && center_hz > 0.0) {
            return Err(Error::invalid(
                "frequency axis centre",
                format!("{center_hz} Hz"),
                "a finite frequency greater than zero",
            ));
        }
    }
    Ok(())
}

/// Check that `len` values of `what` go with `n` frequencies, and that there is at least one.
pub(super) fn check_len(what: &str, len: usize, n: usize) -> Result<()> {
    if n == 0 {
        return Err(Error::invalid(
            "sweep",
            "0 points",
            "at least one frequency point to plot",
        ));
    }
    if len != n {
        return Err(Error::invalid(
            what,
            format!("{len} values for {n} frequencies"),
            "one value per frequency",
        ));
    }
    Ok(())
}

/// Smallest and largest of the finite values of `v`, if any.
pub(super) fn finite_range(v: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for x in v {
        if x.is_finite() {
            lo = lo.min(x);
            hi = hi.max(x);
        }
    }
    (lo <= hi).then_some((lo, hi))
}

/// Range of the frequencies that carry a plottable value (finite frequency, `y` not NaN).
///
/// # Errors
/// When no point is plottable.
pub(super) fn plotted_f_range(f_hz: &[f64], y: &[f64], what: &str) -> Result<(f64, f64)> {
    let usable = f_hz
        .iter()
        .zip(y)
        .filter(|(_, v)| !v.is_nan())
        .map(|(f, _)| *f);
    finite_range(usable).ok_or_else(|| {
        Error::numerical(format!(
            "{what}: nothing to plot; every point has a NaN value or a non-finite frequency"
        ))
    })
}

// ---------------------------------------------------------------------------------------------
// Ticks

/// Tick positions of one axis and the decimals their labels need.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Ticks {
    /// Positions, in axis units.
    pub values: Vec<f64>,
    /// Distance between ticks.
    pub step: f64,
    /// Decimals that resolve `step`.
    pub decimals: usize,
}

/// The smallest of 1, 2, 5 × 10ᵏ that is at least `span / target`.
pub(super) fn nice_step(span: f64, target: usize) -> f64 {
    let raw = span / target.max(1) as f64;
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let mag = 10f64.powf(raw.log10().floor());
    for m in [1.0, 2.0, 5.0] {
        if m * mag >= raw * (1.0 - 1e-9) {
            return m * mag;
        }
    }
    10.0 * mag
}

/// Decimals that resolve a step of 1, 2 or 5 × 10ᵏ.
pub(super) fn decimals_for(step: f64) -> usize {
    if !(step.is_finite() && step > 0.0) || step >= 1.0 {
        return 0;
    }
    // A step just below a power of ten still needs only that power's decimals.
    let d = (-step.log10() - 1e-9).ceil();
    d.clamp(0.0, 15.0) as usize
}

/// Ticks at multiples of `step` inside [`lo`, `hi`].
pub(super) fn ticks_with_step(lo: f64, hi: f64, step: f64) -> Ticks {
    let k0 = (lo / step - 1e-9).ceil();
    let k1 = (hi / step + 1e-9).floor();
    let mut values = Vec::new();
    if k0.is_finite() && k1.is_finite() && k1 >= k0 && k1 - k0 <= 200.0 {
        let mut k = k0;
        while k <= k1 {
            let v = k * step;
            values.push(if v.abs() < step * 1e-9 { 0.0 } else { v });
            k += 1.0;
        }
    }
    Ticks {
        values,
        step,
        decimals: decimals_for(step),
    }
}

/// About `target` ticks inside [`lo`, `hi`].
pub(super) fn ticks(lo: f64, hi: f64, target: usize) -> Ticks {
    ticks_with_step(lo, hi, nice_step(hi - lo, target))
}

/// [`lo`, `hi`] widened to whole steps of about `target` ticks, and its ticks.
pub(super) fn nice_range(lo: f64, hi: f64, target: usize) -> (f64, f64, Ticks) {
    let step = nice_step(hi - lo, target);
    // A bound within a hair of a whole step stays on it.
    let a = (lo / step + 1e-9).floor() * step;
    let b = (hi / step - 1e-9).ceil() * step;
    (a, b, ticks_with_step(a, b, step))
}

/// A range that plotters can map: finite, with `hi > lo` by a visible margin.
pub(super) fn widen(lo: f64, hi: f64) -> (f64, f64) {
    let (lo, hi) = if lo.is_finite() && hi.is_finite() {
        (lo.min(hi), lo.max(hi))
    } else {
        (0.0, 1.0)
    };
    let scale = lo.abs().max(hi.abs());
    if hi - lo > scale * 1e-12 && hi - lo > 1e-300 {
        return (lo, hi);
    }
    let half = if scale > 0.0 { scale * 1e-3 } else { 0.5 };
    (lo - half, hi + half)
}

/// `v` with `decimals` decimals and a true minus sign; never "−0".
pub(super) fn fmt_num(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    if s.trim_start_matches('-')
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        return s.trim_start_matches('-').to_string();
    }
    match s.strip_prefix('-') {
        Some(rest) => format!("\u{2212}{rest}"),
        None => s,
    }
}

/// Number of ticks that fit `px` pixels at about `per_tick` pixels each (at least 3).
pub(super) fn tick_target(px: u32, per_tick: f64) -> usize {
    ((f64::from(px) / per_tick).floor() as usize).clamp(3, 14)
}

// ---------------------------------------------------------------------------------------------
// Frequency axis

/// How frequencies map to the x axis.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct FreqScale {
    origin_hz: f64,
    hz_per_unit: f64,
    unit: &'static str,
    offset: bool,
    /// The axis description, e.g. "Frequency offset from 9.000 MHz (kHz)".
    pub desc: String,
    /// Ticks over the plotted range.
    pub ticks: Ticks,
    /// Plotted range, in axis units.
    pub range: (f64, f64),
}

impl FreqScale {
    /// The scale for frequencies from `f_lo_hz` to `f_hi_hz` on a plot `width` px wide.
    pub fn new(axis: &FrequencyAxis, f_lo_hz: f64, f_hi_hz: f64, width: u32) -> Self {
        let span = (f_hi_hz - f_lo_hz).abs();
        let (origin_hz, hz_per_unit, unit, offset) = match *axis {
            FrequencyAxis::OffsetFrom { center_hz } => {
                let (div, unit) = if span < 2e3 {
                    (1.0, "Hz")
                } else if span < 2e6 {
                    (1e3, "kHz")
                } else {
                    (1e6, "MHz")
                };
                (center_hz, div, unit, true)
            }
            FrequencyAxis::AbsoluteMhz => (0.0, 1e6, "MHz", false),
        };
        let range = widen(
            (f_lo_hz - origin_hz) / hz_per_unit,
            (f_hi_hz - origin_hz) / hz_per_unit,
        );
        // Labels of absolute frequencies are long: fewer of them.
        let per_tick = if offset { 80.0 } else { 95.0 };
        let ticks = ticks(range.0, range.1, tick_target(width, per_tick));
        let desc = if offset {
            format!(
                "Frequency offset from {} ({unit})",
                format_center(origin_hz, ticks.step * hz_per_unit)
            )
        } else {
            format!("Frequency ({unit})")
        };
        FreqScale {
            origin_hz,
            hz_per_unit,
            unit,
            offset,
            desc,
            ticks,
            range,
        }
    }

    /// Axis position of `f_hz`.
    pub fn x(&self, f_hz: f64) -> f64 {
        (f_hz - self.origin_hz) / self.hz_per_unit
    }

    /// True when `f_hz` lies on the plotted range.
    pub fn contains(&self, f_hz: f64) -> bool {
        let x = self.x(f_hz);
        x.is_finite() && x >= self.range.0 && x <= self.range.1
    }

    /// A tick label.
    pub fn tick_label(&self, x: f64) -> String {
        let s = fmt_num(x, self.ticks.decimals);
        if self.offset && x > 0.0 && s != "0" {
            format!("+{s}")
        } else {
            s
        }
    }

    /// `f_hz` in axis units with its unit, two decimals finer than the ticks (a thousandth of
    /// the span or better): "+1.250 kHz".
    pub fn describe(&self, f_hz: f64) -> String {
        let x = self.x(f_hz);
        let s = fmt_num(x, self.ticks.decimals + 2);
        let sign = if self.offset && x > 0.0 { "+" } else { "" };
        format!("{sign}{s} {}", self.unit)
    }
}

/// The centre frequency with the fewest digits (at least 4) that put it within a hundredth of
/// a tick step of the true value.
fn format_center(center_hz: f64, step_hz: f64) -> String {
    for digits in 4..=12 {
        let text = format!("{:.*e}", digits - 1, center_hz);
        let back: f64 = text.parse().unwrap_or(f64::NAN);
        if (back - center_hz).abs() <= step_hz * 0.01 {
            return crate::units::format_si_digits(center_hz, "Hz", digits);
        }
    }
    crate::units::format_si_digits(center_hz, "Hz", 12)
}

// ---------------------------------------------------------------------------------------------
// Series helpers

/// Runs of consecutive plottable points: NaN (in x or y) breaks a run, ±∞ in y is clamped to
/// the axis, and every y is clamped to [`y_lo`, `y_hi`].
pub(super) fn runs(
    points: impl IntoIterator<Item = (f64, f64)>,
    y_lo: f64,
    y_hi: f64,
) -> Vec<Vec<(f64, f64)>> {
    let mut out: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut cur: Vec<(f64, f64)> = Vec::new();
    for (x, y) in points {
        if !x.is_finite() || y.is_nan() {
            if !cur.is_empty() {
                out.push(std::mem::take(&mut cur));
            }
            continue;
        }
        cur.push((x, y.clamp(y_lo, y_hi)));
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}

/// Draw `runs` as lines of `style`.
pub(super) fn draw_runs(
    chart: &mut Chart<'_, '_>,
    runs: &[Vec<(f64, f64)>],
    style: ShapeStyle,
) -> Drawn {
    for run in runs {
        chart.draw_series(LineSeries::new(run.iter().copied(), style))?;
    }
    Ok(())
}

/// A dashed horizontal line across the plot at `y`.
pub(super) fn hline(chart: &mut Chart<'_, '_>, y: f64, style: ShapeStyle) -> Drawn {
    let x = chart.x_range();
    chart.draw_series(DashedLineSeries::new(
        [(x.start, y), (x.end, y)],
        9,
        6,
        style,
    ))?;
    Ok(())
}

/// A dashed vertical line over the whole plot height at `x`.
pub(super) fn vline(chart: &mut Chart<'_, '_>, x: f64, style: ShapeStyle) -> Drawn {
    let y = chart.y_range();
    chart.draw_series(DashedLineSeries::new(
        [(x, y.start), (x, y.end)],
        9,
        6,
        style,
    ))?;
    Ok(())
}

/// A translucent band over the full plot height from `x0` to `x1`.
pub(super) fn shade_x(chart: &mut Chart<'_, '_>, x0: f64, x1: f64, color: RGBColor) -> Drawn {
    let y = chart.y_range();
    let x = chart.x_range();
    let (a, b) = (x0.min(x1).max(x.start), x0.max(x1).min(x.end));
    if a.is_finite() && b.is_finite() && b > a {
        chart.draw_series(std::iter::once(Rectangle::new(
            [(a, y.start), (b, y.end)],
            color.mix(0.13).filled(),
        )))?;
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// The frame

/// One axis of a frame.
pub(super) struct Axis {
    /// Plotted range.
    pub range: (f64, f64),
    /// Ticks.
    pub ticks: Ticks,
    /// Description with unit.
    pub desc: String,
}

impl Axis {
    /// An axis on `range` with about `target` ticks, the range widened to whole ticks.
    pub fn nice(lo: f64, hi: f64, target: usize, desc: impl Into<String>) -> Self {
        let (lo, hi) = widen(lo, hi);
        let (a, b, ticks) = nice_range(lo, hi, target);
        Axis {
            range: (a, b),
            ticks,
            desc: desc.into(),
        }
    }

    /// An axis on exactly `range` with ticks inside it.
    pub fn exact(lo: f64, hi: f64, target: usize, desc: impl Into<String>) -> Self {
        let (lo, hi) = widen(lo, hi);
        Axis {
            range: (lo, hi),
            ticks: ticks(lo, hi, target),
            desc: desc.into(),
        }
    }

    /// The plotters coordinate of this axis.
    fn ticked(&self) -> Ticked {
        Ticked {
            lo: self.range.0,
            hi: self.range.1,
            ticks: self.ticks.values.clone(),
        }
    }

    /// The x axis of a frequency scale.
    pub fn frequency(scale: &FreqScale) -> Self {
        Axis {
            range: scale.range,
            ticks: scale.ticks.clone(),
            desc: scale.desc.clone(),
        }
    }
}

/// Break `title` into lines that fit `width_px` at `px` font size (about 0.55 em per
/// character), of about equal length, preferring breaks after a comma, colon or semicolon.
///
/// A number keeps its neighbours: a short word after a number ("0.91 dB") and a number after a
/// short word ("SF 1.84", "C0 4.05 pF") are never split across lines.
fn wrap_title(title: &str, width_px: f64, px: f64) -> Vec<String> {
    let max_chars = ((width_px / (px * 0.55)).floor() as usize).max(10);
    let mut lines: Vec<String> = Vec::new();
    for para in title.lines() {
        let mut words: Vec<String> = Vec::new();
        for w in para.split(' ').filter(|w| !w.is_empty()) {
            let first_digit = w.chars().next().is_some_and(|c| c.is_ascii_digit());
            let glue = words.last().is_some_and(|prev| {
                let prev_number = prev.chars().last().is_some_and(|c| c.is_ascii_digit());
                let prev_short = prev.chars().count() <= 3 && !prev.ends_with([',', ':', ';']);
                (prev_number && !first_digit && w.chars().count() <= 4)
                    || (prev_short && first_digit)
            });
            match words.last_mut() {
                Some(prev) if glue => {
                    prev.push(' ');
                    prev.push_str(w);
                }
                _ => words.push(w.to_string()),
            }
        }
        let total = words.iter().map(|w| w.chars().count() + 1).sum::<usize>();
        let n_lines = total.div_ceil(max_chars).max(1);
        let target = total.div_ceil(n_lines);
        let mut line = String::new();
        for word in &words {
            let len = line.chars().count();
            let needed = len + usize::from(len > 0) + word.chars().count();
            let at_clause = n_lines > 1 && line.ends_with([',', ':', ';']) && len * 5 >= target * 4;
            if len > 0 && (needed > max_chars || at_clause || (needed > target + 8)) {
                lines.push(std::mem::take(&mut line));
            }
            if !line.is_empty() {
                line.push(' ');
            }
            line.push_str(word);
        }
        if !line.is_empty() {
            lines.push(line);
        }
    }
    if lines.len() > 3 {
        lines.truncate(3);
        if let Some(last) = lines.last_mut() {
            last.push_str(" …");
        }
    }
    lines
}

/// Render a frame with `title`, axes `x` and `y` (with their tick label formatters), then hand
/// the chart to `draw`.
pub(super) fn render(
    opts: &PlotOptions,
    title: &str,
    x: &Axis,
    x_label: &dyn Fn(f64) -> String,
    y: &Axis,
    y_label: &dyn Fn(f64) -> String,
    draw: impl FnOnce(&mut Chart<'_, '_>) -> Drawn,
) -> Result<String> {
    let mut buf = String::new();
    draw_frame(&mut buf, opts, title, x, x_label, y, y_label, draw)
        .map_err(|e| Error::numerical(format!("svg rendering failed: {e}")))?;
    Ok(buf)
}

#[allow(clippy::too_many_arguments)]
fn draw_frame(
    buf: &mut String,
    opts: &PlotOptions,
    title: &str,
    x: &Axis,
    x_label: &dyn Fn(f64) -> String,
    y: &Axis,
    y_label: &dyn Fn(f64) -> String,
    draw: impl FnOnce(&mut Chart<'_, '_>) -> Drawn,
) -> Drawn {
    let root = SVGBackend::with_string(buf, (opts.width, opts.height)).into_drawing_area();
    root.fill(&WHITE)?;
    let lines = wrap_title(title, f64::from(opts.width) - 40.0, TITLE_PX);
    let line_h = (TITLE_PX * 1.3).round() as i32;
    let title_h = if lines.is_empty() {
        8
    } else {
        line_h * lines.len() as i32 + 12
    };
    let (top, body) = root.split_vertically(title_h);
    let style = text_at(TITLE_PX, palette::INK, HPos::Center, VPos::Top);
    let cx = (opts.width / 2) as i32;
    for (i, line) in lines.iter().enumerate() {
        top.draw_text(line, &style, (cx, 8 + line_h * i as i32))?;
    }
    // Room for the y tick labels: about 0.6 em per character.
    let y_chars = y
        .ticks
        .values
        .iter()
        .map(|&v| y_label(v).chars().count())
        .max()
        .unwrap_or(3);
    let y_area = (y_chars as f64 * TICK_PX * 0.62 + DESC_PX * 1.4 + 22.0).round() as u32;
    let x_area = (TICK_PX * 1.4 + DESC_PX * 1.4 + 18.0).round() as u32;
    let mut chart = ChartBuilder::on(&body)
        .margin_top(6)
        .margin_right(28)
        .margin_left(6)
        .margin_bottom(4)
        .x_label_area_size(x_area)
        .y_label_area_size(y_area)
        .build_cartesian_2d(x.ticked(), y.ticked())?;
    let xf = |v: &f64| x_label(*v);
    let yf = |v: &f64| y_label(*v);
    chart
        .configure_mesh()
        .bold_line_style(palette::GRID.stroke_width(1))
        .light_line_style(TRANSPARENT)
        .axis_style(palette::INK.stroke_width(1))
        .label_style(text(TICK_PX, palette::INK))
        .axis_desc_style(text(DESC_PX, palette::INK))
        .x_desc(x.desc.as_str())
        .y_desc(y.desc.as_str())
        .x_label_formatter(&xf)
        .y_label_formatter(&yf)
        .draw()?;
    draw(&mut chart)?;
    // Frame the plot area on all four sides.
    let (xr, yr) = (chart.x_range(), chart.y_range());
    chart.draw_series(std::iter::once(Rectangle::new(
        [(xr.start, yr.start), (xr.end, yr.end)],
        palette::INK.stroke_width(1),
    )))?;
    root.present()?;
    Ok(())
}

/// What a legend entry shows beside its text.
#[derive(Debug, Clone, Copy)]
pub(super) enum Sample {
    /// A line of the colour and width; dashed or solid.
    Line(RGBColor, u32, bool),
    /// A translucent band.
    Band(RGBColor),
    /// A filled dot.
    Dot(RGBColor),
    /// A filled triangle.
    Triangle(RGBColor),
}

/// Width of `s` in px at `px` font size, from per-character widths (in em) of a wide
/// sans-serif face, plus 5 %: generous for the narrower faces a browser may pick, so boxes
/// sized by it hold the text.
pub(super) fn text_width(s: &str, px: f64) -> f64 {
    let em: f64 = s
        .chars()
        .map(|c| match c {
            ' ' => 0.32,
            '.' | ',' | ':' | ';' | '|' | '\'' | 'i' | 'j' | 'l' => 0.30,
            '(' | ')' | 'f' | 'r' | 't' => 0.42,
            'm' | 'W' => 1.0,
            'M' | 'w' | '%' => 0.86,
            '0'..='9' => 0.64,
            'A'..='Z' | 'Ω' | '−' | '+' => 0.74,
            'a'..='z' | 'µ' | 'σ' => 0.62,
            _ => 0.7,
        })
        .sum();
    1.05 * em * px
}

/// Pixel position of data point `p`, relative to the plot area's top left.
fn area_px(chart: &Chart<'_, '_>, p: (f64, f64)) -> (i32, i32) {
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    let (x, y) = chart.backend_coord(&p);
    (x - xr.start, y - yr.start)
}

/// Pixel rectangle (left, top, right, bottom) relative to the plot area.
pub(super) type PxRect = (i32, i32, i32, i32);

/// What labels and legends keep clear of: pixel points of the plotted data and of the labels
/// already placed, relative to the plot area.
#[derive(Debug, Default)]
pub(super) struct Obstacles {
    pts: Vec<(i32, i32)>,
}

impl Obstacles {
    /// Add the points of `runs`, and the midpoints of their segments.
    pub fn add_runs(&mut self, chart: &Chart<'_, '_>, runs: &[Vec<(f64, f64)>]) {
        for run in runs {
            let mut prev: Option<(f64, f64)> = None;
            for &p in run {
                if let Some(q) = prev {
                    self.pts
                        .push(area_px(chart, ((p.0 + q.0) / 2.0, (p.1 + q.1) / 2.0)));
                }
                self.pts.push(area_px(chart, p));
                prev = Some(p);
            }
        }
    }

    /// Add a vertical line at data `x` over the whole plot height.
    pub fn add_vline(&mut self, chart: &Chart<'_, '_>, x: f64) {
        let yr = chart.y_range();
        let run: Vec<(f64, f64)> = (0..=40)
            .map(|k| (x, yr.start + (yr.end - yr.start) * f64::from(k) / 40.0))
            .collect();
        self.add_runs(chart, &[run]);
    }

    /// Add a filled rectangle (a placed label or legend) as a grid of points.
    pub fn add_rect(&mut self, r: PxRect) {
        let (x0, y0, x1, y1) = r;
        let mut y = y0;
        while y <= y1 {
            let mut x = x0;
            while x <= x1 {
                self.pts.push((x, y));
                x += 6;
            }
            y += 6;
        }
    }

    /// Number of points inside `r` (grown by 3 px), with a prohibitive count when `r` leaves
    /// the plot area of size `w` × `h`.
    fn cost(&self, r: PxRect, (w, h): (i32, i32)) -> usize {
        let (x0, y0, x1, y1) = r;
        if x0 < 0 || y0 < 0 || x1 > w || y1 > h {
            return usize::MAX / 2;
        }
        self.pts
            .iter()
            .filter(|&&(x, y)| x >= x0 - 3 && x <= x1 + 3 && y >= y0 - 3 && y <= y1 + 3)
            .count()
    }
}

/// The shift that brings `r` inside a `w` × `h` area (as far as it fits).
fn push_inside(r: PxRect, (w, h): (i32, i32)) -> (i32, i32) {
    let shift = |lo: i32, hi: i32, size: i32| {
        if lo < 0 {
            -lo
        } else if hi > size {
            (size - hi).max(-lo)
        } else {
            0
        }
    };
    (shift(r.0, r.2, w), shift(r.1, r.3, h))
}

/// Where a label may go: at data point `at`, shifted by `offset` px, with `anchor`.
#[derive(Clone, Copy)]
pub(super) struct Spot {
    /// Data point.
    pub at: (f64, f64),
    /// Shift, px (right and down).
    pub offset: (i32, i32),
    /// Which point of the text sits at the shifted position.
    pub anchor: (HPos, VPos),
}

impl Spot {
    /// A spot with no shift.
    pub fn new(at: (f64, f64), offset: (i32, i32), h: HPos, v: VPos) -> Self {
        Spot {
            at,
            offset,
            anchor: (h, v),
        }
    }
}

/// The anchor pixel and the box of `label` at `spot`.
fn note_geometry(chart: &Chart<'_, '_>, spot: &Spot, label: &str) -> ((i32, i32), PxRect) {
    let (ax, ay) = area_px(chart, spot.at);
    let (ax, ay) = (ax + spot.offset.0, ay + spot.offset.1);
    let w = label
        .lines()
        .map(|l| text_width(l, NOTE_PX))
        .fold(0.0, f64::max)
        .ceil() as i32;
    let n = label.lines().count().max(1) as i32;
    let hgt = (NOTE_PX * 1.25).ceil() as i32 * n;
    let x0 = match spot.anchor.0 {
        HPos::Left => ax - 3,
        HPos::Right => ax - w - 3,
        HPos::Center => ax - w / 2 - 3,
    };
    let y0 = match spot.anchor.1 {
        VPos::Top => ay - 2,
        VPos::Bottom => ay - hgt - 1,
        VPos::Center => ay - hgt / 2 - 1,
    };
    ((ax, ay), (x0, y0, x0 + w + 6, y0 + hgt + 3))
}

/// Draw `label` (one or more lines) in `color` on a white box, so that lines under it do not
/// hide it, at whichever of `spots` covers the fewest obstacles while staying inside the plot
/// area (the first on a tie), and add its box to `obstacles`.
pub(super) fn place_note(
    chart: &Chart<'_, '_>,
    spots: &[Spot],
    label: &str,
    color: RGBColor,
    obstacles: &mut Obstacles,
) -> Drawn {
    let area = chart.plotting_area().strip_coord_spec();
    let (w, h) = area.dim_in_pixel();
    let size = (w as i32, h as i32);
    let mut best: Option<(usize, (i32, i32), PxRect, &Spot)> = None;
    for spot in spots {
        let (anchor, rect) = note_geometry(chart, spot, label);
        // A box that would leave the plot area is pushed back in, at a cost per pixel moved.
        let (dx, dy) = push_inside(rect, size);
        let rect = (rect.0 + dx, rect.1 + dy, rect.2 + dx, rect.3 + dy);
        let anchor = (anchor.0 + dx, anchor.1 + dy);
        let moved =
            usize::try_from(dx.unsigned_abs() + dy.unsigned_abs()).unwrap_or(usize::MAX / 4);
        let c = obstacles
            .cost(rect, size)
            .saturating_add(moved.saturating_mul(4));
        let better = match &best {
            Some(b) => c < b.0,
            None => true,
        };
        if better {
            best = Some((c, anchor, rect, spot));
        }
    }
    let Some((_, (ax, _), rect, spot)) = best else {
        return Ok(());
    };
    area.draw(&Rectangle::new(
        [(rect.0, rect.1), (rect.2, rect.3)],
        WHITE.mix(0.85).filled(),
    ))?;
    // Lines from the top of the box down, aligned as the anchor says.
    let line_h = (NOTE_PX * 1.25).ceil() as i32;
    for (i, line) in label.lines().enumerate() {
        let y = rect.1 + 3 + line_h * i as i32;
        area.draw(&Text::new(
            line.to_string(),
            (ax, y),
            text_at(NOTE_PX, color, spot.anchor.0, VPos::Top),
        ))?;
    }
    obstacles.add_rect(rect);
    Ok(())
}

/// A legend box of `items`, put in the corner of the plot area (upper left, upper right, lower
/// left, lower right, in that order of preference) that covers the fewest obstacles.
pub(super) fn legend(
    chart: &Chart<'_, '_>,
    items: &[(Sample, String)],
    obstacles: &mut Obstacles,
) -> Drawn {
    if items.is_empty() {
        return Ok(());
    }
    let area = chart.plotting_area().strip_coord_spec();
    let (w, h) = area.dim_in_pixel();
    let (w, h) = (w as i32, h as i32);
    let row = (NOTE_PX * 1.45).round() as i32;
    let sample_w = 26;
    let pad = 8;
    let text_w = items
        .iter()
        .map(|(_, t)| text_width(t, NOTE_PX))
        .fold(0.0, f64::max)
        .ceil() as i32;
    let box_w = pad * 3 + sample_w + text_w;
    let box_h = pad * 2 + row * items.len() as i32 - 4;
    let margin = 10;
    let right = (w - margin - box_w).max(0);
    let bottom = (h - margin - box_h).max(0);
    let corners = [
        (margin, margin),
        (right, margin),
        (margin, bottom),
        (right, bottom),
    ];
    let rect = |(x0, y0): (i32, i32)| (x0, y0, x0 + box_w, y0 + box_h);
    let mut best = corners[0];
    let mut best_n = obstacles.cost(rect(best), (w, h));
    for &c in &corners[1..] {
        let n = obstacles.cost(rect(c), (w, h));
        if n < best_n {
            best = c;
            best_n = n;
        }
    }
    let (x0, y0) = best;
    obstacles.add_rect(rect(best));
    let outline = [(x0, y0), (x0 + box_w, y0 + box_h)];
    area.draw(&Rectangle::new(outline, WHITE.mix(0.92).filled()))?;
    area.draw(&Rectangle::new(
        outline,
        palette::SLATE.mix(0.8).stroke_width(1),
    ))?;
    for (i, (sample, label)) in items.iter().enumerate() {
        let cy = y0 + pad + row * i as i32 + row / 2 - 2;
        let sx = x0 + pad;
        match *sample {
            Sample::Line(c, width, dashed) => {
                let style = c.stroke_width(width);
                if dashed {
                    area.draw(&PathElement::new(vec![(sx, cy), (sx + 9, cy)], style))?;
                    area.draw(&PathElement::new(
                        vec![(sx + 16, cy), (sx + sample_w, cy)],
                        style,
                    ))?;
                } else {
                    area.draw(&PathElement::new(
                        vec![(sx, cy), (sx + sample_w, cy)],
                        style,
                    ))?;
                }
            }
            Sample::Band(c) => area.draw(&Rectangle::new(
                [(sx, cy - 6), (sx + sample_w, cy + 6)],
                c.mix(0.35).filled(),
            ))?,
            Sample::Dot(c) => area.draw(&Circle::new((sx + sample_w / 2, cy), 4, c.filled()))?,
            Sample::Triangle(c) => {
                area.draw(&TriangleMarker::new((sx + sample_w / 2, cy), 7, c.filled()))?
            }
        }
        area.draw(&Text::new(
            label.clone(),
            (sx + sample_w + pad, cy),
            text_at(NOTE_PX, palette::INK, HPos::Left, VPos::Center),
        ))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn steps_are_one_two_five() {
        assert_eq!(nice_step(120.0, 12), 10.0);
        assert_eq!(nice_step(10.0, 8), 2.0);
        assert_eq!(nice_step(0.003, 6), 0.0005);
        assert_eq!(decimals_for(0.0005), 4);
        assert_eq!(decimals_for(0.1), 1);
        assert_eq!(decimals_for(0.2), 1);
        assert_eq!(decimals_for(10.0), 0);
    }

    #[test]
    fn ticks_are_multiples_inside_the_range() {
        let t = ticks(-5.3, 5.3, 10);
        assert_eq!(t.step, 2.0);
        assert_eq!(t.values, vec![-4.0, -2.0, 0.0, 2.0, 4.0]);
    }

    #[test]
    fn numbers_use_a_true_minus_and_no_negative_zero() {
        assert_eq!(fmt_num(-3.0, 0), "\u{2212}3");
        assert_eq!(fmt_num(-0.0001, 2), "0.00");
        assert_eq!(fmt_num(2.5, 1), "2.5");
    }

    #[test]
    fn offset_axis_picks_its_unit_by_span() {
        let a = FrequencyAxis::OffsetFrom { center_hz: 9e6 };
        let s = FreqScale::new(&a, 9e6 - 5e3, 9e6 + 5e3, 800);
        assert_eq!(s.desc, "Frequency offset from 9.000 MHz (kHz)");
        let s = FreqScale::new(&a, 9e6 - 400.0, 9e6 + 400.0, 800);
        assert!(s.desc.ends_with("(Hz)"), "{}", s.desc);
        // A centre that is not round keeps the digits its ticks resolve: 20 kHz over about 10
        // ticks is a 2 kHz step, so the centre must be printed to within 20 Hz. 8.9988 MHz is
        // 35 Hz off; 8.99876 MHz (6 digits) is 5 Hz off.
        let a = FrequencyAxis::OffsetFrom {
            center_hz: 8_998_765.0,
        };
        let s = FreqScale::new(&a, 8_990_000.0, 9_010_000.0, 800);
        assert_eq!(s.ticks.step, 2.0, "a 2 kHz step");
        assert!(s.desc.contains("8.99876 MHz"), "{}", s.desc);
    }

    #[test]
    fn absolute_axis_resolves_its_span() {
        let s = FreqScale::new(&FrequencyAxis::AbsoluteMhz, 8.995e6, 9.005e6, 800);
        assert_eq!(s.desc, "Frequency (MHz)");
        // 10 kHz over about 8 ticks: 1 or 2 kHz steps, 3 decimals of MHz.
        assert_eq!(s.ticks.decimals, 3);
        let labels: Vec<String> = s.ticks.values.iter().map(|&v| s.tick_label(v)).collect();
        let mut unique = labels.clone();
        unique.dedup();
        assert_eq!(unique, labels, "every tick label is distinct");
    }

    #[test]
    fn runs_break_at_nan_and_clamp_infinities() {
        let r = runs(
            [
                (0.0, 1.0),
                (1.0, f64::NEG_INFINITY),
                (2.0, f64::NAN),
                (3.0, 5.0),
                (f64::NAN, 1.0),
                (4.0, f64::INFINITY),
            ],
            -10.0,
            2.0,
        );
        assert_eq!(
            r,
            vec![
                vec![(0.0, 1.0), (1.0, -10.0)],
                vec![(3.0, 2.0)],
                vec![(4.0, 2.0)]
            ]
        );
    }

    #[test]
    fn short_titles_stay_on_one_line() {
        let l = wrap_title(
            "NaN every 97th point, a zero at the centre, no perf",
            760.0,
            19.0,
        );
        assert_eq!(l.len(), 1, "{l:?}");
    }

    #[test]
    fn long_titles_break_after_a_clause_and_keep_numbers_with_units() {
        let t = "8-crystal ladder at 9 MHz: BW(−6 dB) 2023 Hz, IL 3.15 dB, ripple 0.91 dB, SF 1.84";
        let l = wrap_title(t, 760.0, 19.0);
        assert_eq!(l.len(), 2, "{l:?}");
        assert!(l[0].ends_with(','), "{l:?}");
        for line in &l {
            assert!(
                !line.starts_with("dB") && !line.starts_with("1.84"),
                "{l:?}"
            );
        }
    }

    #[test]
    fn titles_wrap_at_words() {
        let l = wrap_title("one two three four five six", 70.0, 10.0);
        assert!(l.len() > 1);
        assert!(l.iter().all(|s| !s.starts_with(' ')));
    }
}
