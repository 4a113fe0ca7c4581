//! Figures of merit of a band-pass response: loss, ripple, bandwidths, shape factor, return
//! loss and group delay.
//!
//! Conventions (the design record and the command line rely on them):
//! - "−X dB" means X dB below the *minimum* loss of the passband (the peak of |S21|).
//! - `insertion_loss_db` is that minimum loss, positive for a loss.
//! - `ripple_db` is the peak-to-valley variation of |S21| between the outermost transmission
//!   maxima (local maxima of |S21| inside the −3 dB band); 0 for a passband with one maximum.
//! - a bandwidth is the distance between the first crossings of its level on either side of the
//!   peak, walking outward; `center_hz` is the midpoint of the −3 dB crossings.
//! - `return_loss_db` is the smallest return loss (−20·log10|S11|) between the outermost
//!   transmission maxima, or over the −1 dB band for a passband with one maximum.
//! - the shape factor is the −60 dB bandwidth over the −6 dB bandwidth.
//! - group delay is −dφ21/dω (see [`crate::network`]).
//!
//! Two ways in: [`Performance::from_sweep`] reads the figures off a sampled sweep with linear
//! interpolation between points; [`evaluate`] samples an analysable circuit and then refines
//! every crossing and extremum on the circuit itself (bisection and golden-section search), so
//! its figures do not depend on the grid.

use crate::error::{require_positive, Error, ErrorKind, Result};
use crate::network::{db, Analyze, FrequencyGrid, Sweep};
use serde::{Deserialize, Serialize};

/// The predicted (or measured) performance of a band-pass filter.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Performance {
    /// Minimum loss in the passband, dB (positive for a loss).
    pub insertion_loss_db: f64,
    /// Peak-to-valley ripple between the outermost transmission maxima, dB.
    pub ripple_db: f64,
    /// Bandwidth at −3 dB, Hz.
    pub bw_3db_hz: f64,
    /// Bandwidth at −6 dB, Hz.
    pub bw_6db_hz: f64,
    /// Bandwidth at −60 dB, Hz; `None` when the response does not fall 60 dB on both sides
    /// within the analysed range.
    pub bw_60db_hz: Option<f64>,
    /// Shape factor, −60 dB bandwidth over −6 dB bandwidth.
    pub shape_factor_60_6: Option<f64>,
    /// Midpoint of the −3 dB crossings, Hz.
    pub center_hz: f64,
    /// Smallest return loss in the passband, dB (positive).
    pub return_loss_db: f64,
    /// Lower and upper −3 dB crossings, Hz.
    pub edges_3db_hz: [f64; 2],
    /// Lower and upper −6 dB crossings, Hz.
    pub edges_6db_hz: [f64; 2],
    /// Lower and upper −60 dB crossings, Hz, where found.
    pub edges_60db_hz: Option<[f64; 2]>,
    /// Group delay at the centre, s.
    pub group_delay_center_s: f64,
    /// Largest minus smallest group delay over the −3 dB band, s.
    pub group_delay_variation_s: f64,
}

/// Sampled values with an optional way to evaluate between samples.
struct Trace<'a> {
    f: &'a [f64],
    s21_db: Vec<f64>,
    s11_db: Vec<f64>,
    delay: &'a [f64],
    exact: Option<&'a dyn Fn(f64) -> (f64, f64, f64)>,
}

const GOLDEN: f64 = 0.618_033_988_749_894_9;

impl Trace<'_> {
    /// |S21| dB at `f`: exact when a circuit is available, else interpolated.
    fn s21_at(&self, f: f64) -> f64 {
        match self.exact {
            Some(g) => g(f).0,
            None => interp(self.f, &self.s21_db, f),
        }
    }
    fn s11_at(&self, f: f64) -> f64 {
        match self.exact {
            Some(g) => g(f).1,
            None => interp(self.f, &self.s11_db, f),
        }
    }
    fn delay_at(&self, f: f64) -> f64 {
        match self.exact {
            Some(g) => g(f).2,
            None => interp(self.f, self.delay, f),
        }
    }

    /// Frequency where `value(f)` crosses `level` between samples `i` and `i + 1`.
    fn crossing(&self, i: usize, level: f64) -> f64 {
        let (fa, fb) = (self.f[i], self.f[i + 1]);
        let (ya, yb) = (self.s21_db[i], self.s21_db[i + 1]);
        if self.exact.is_none() {
            if (yb - ya).abs() < f64::MIN_POSITIVE {
                return 0.5 * (fa + fb);
            }
            return fa + (level - ya) * (fb - fa) / (yb - ya);
        }
        let (mut lo, mut hi) = (fa, fb);
        let above_lo = ya > level;
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            if (self.s21_at(mid) > level) == above_lo {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    }

    /// Refined extremum of `g` near sample `i` (maximum when `sign` = 1, minimum when −1).
    fn extremum(&self, i: usize, sign: f64, g: &dyn Fn(f64) -> f64, sampled: &[f64]) -> (f64, f64) {
        let n = self.f.len();
        if self.exact.is_none() || i == 0 || i + 1 >= n {
            return (self.f[i], sampled[i]);
        }
        let (mut a, mut b) = (self.f[i - 1], self.f[i + 1]);
        let mut c = b - GOLDEN * (b - a);
        let mut d = a + GOLDEN * (b - a);
        let (mut gc, mut gd) = (sign * g(c), sign * g(d));
        for _ in 0..60 {
            if gc > gd {
                b = d;
                d = c;
                gd = gc;
                c = b - GOLDEN * (b - a);
                gc = sign * g(c);
            } else {
                a = c;
                c = d;
                gc = gd;
                d = a + GOLDEN * (b - a);
                gd = sign * g(d);
            }
        }
        let f = 0.5 * (a + b);
        let v = g(f);
        // Never report a worse value than the sample itself.
        if sign * v >= sign * sampled[i] {
            (f, v)
        } else {
            (self.f[i], sampled[i])
        }
    }
}

fn interp(f: &[f64], y: &[f64], x: f64) -> f64 {
    let i = match f.binary_search_by(|p| p.total_cmp(&x)) {
        Ok(i) => return y[i],
        Err(i) => i,
    };
    if i == 0 {
        return y[0];
    }
    if i >= f.len() {
        return y[f.len() - 1];
    }
    let t = (x - f[i - 1]) / (f[i] - f[i - 1]);
    y[i - 1] + t * (y[i] - y[i - 1])
}

fn local_extrema(y: &[f64], lo: usize, hi: usize, sign: f64) -> Vec<usize> {
    let mut out = Vec::new();
    let mut i = lo.max(1);
    while i < hi.min(y.len() - 1) {
        let (a, b) = (sign * y[i - 1], sign * y[i]);
        if b > a {
            // Walk across a flat top.
            let mut j = i;
            while j + 1 < y.len() && sign * y[j + 1] == b {
                j += 1;
            }
            if j + 1 < y.len() && sign * y[j + 1] < b {
                out.push((i + j) / 2);
            }
            i = j + 1;
        } else {
            i += 1;
        }
    }
    out
}

fn compute(t: &Trace<'_>) -> Result<Performance> {
    let n = t.f.len();
    if n < 5 {
        return Err(Error::invalid(
            "sweep",
            format!("{n} points"),
            "at least 5 points",
        ));
    }
    if t.s21_db.iter().any(|v| v.is_nan()) {
        return Err(Error::numerical("the response holds NaN values"));
    }
    let mut imax = 0;
    for i in 0..n {
        if t.s21_db[i] > t.s21_db[imax] {
            imax = i;
        }
    }
    // Refine the highest maximum first; then the −3 dB band; then every maximum inside it.
    let s21 = |f: f64| t.s21_at(f);
    let (_, mut peak) = t.extremum(imax, 1.0, &s21, &t.s21_db);
    let walk = |level: f64| -> Option<(f64, f64, usize, usize)> {
        let mut i = imax;
        while i > 0 && t.s21_db[i] >= level {
            i -= 1;
        }
        if t.s21_db[i] >= level {
            return None;
        }
        let mut j = imax;
        while j + 1 < n && t.s21_db[j] >= level {
            j += 1;
        }
        if t.s21_db[j] >= level {
            return None;
        }
        Some((t.crossing(i, level), t.crossing(j - 1, level), i, j))
    };
    let (_, _, i3, j3) = walk(peak - 3.0).ok_or_else(|| {
        Error::invalid(
            "sweep range",
            format!("{:.6} to {:.6} MHz", t.f[0] / 1e6, t.f[n - 1] / 1e6),
            "a range that contains the whole −3 dB passband (widen the span)",
        )
    })?;
    let maxima: Vec<(f64, f64)> = local_extrema(&t.s21_db, i3, j3 + 1, 1.0)
        .into_iter()
        .map(|i| t.extremum(i, 1.0, &s21, &t.s21_db))
        .collect();
    for &(_, v) in &maxima {
        peak = peak.max(v);
    }
    let (lo3, hi3, _, _) =
        walk(peak - 3.0).ok_or_else(|| Error::numerical("lost the −3 dB band"))?;
    let (lo6, hi6, _, _) = walk(peak - 6.0).ok_or_else(|| {
        Error::invalid(
            "sweep range",
            format!("{:.6} to {:.6} MHz", t.f[0] / 1e6, t.f[n - 1] / 1e6),
            "a range that contains the whole −6 dB passband (widen the span)",
        )
    })?;
    let e60 = walk(peak - 60.0)
        .map(|(a, b, _, _)| [a, b])
        .or_else(|| skirt_walk(t, imax, peak - 60.0, hi6 - lo6));
    // Ripple between the outermost maxima.
    let (ripple, rl_lo, rl_hi) = if maxima.len() >= 2 {
        let f_first = maxima.iter().map(|m| m.0).fold(f64::INFINITY, f64::min);
        let f_last = maxima.iter().map(|m| m.0).fold(f64::NEG_INFINITY, f64::max);
        let a = t.f.partition_point(|&f| f < f_first);
        let b = t.f.partition_point(|&f| f <= f_last);
        let minima = local_extrema(&t.s21_db, a, b, -1.0);
        let mut valley = f64::INFINITY;
        for i in minima {
            valley = valley.min(t.extremum(i, -1.0, &s21, &t.s21_db).1);
        }
        let top = maxima.iter().map(|m| m.1).fold(f64::NEG_INFINITY, f64::max);
        let ripple = if valley.is_finite() {
            (top - valley).max(0.0)
        } else {
            0.0
        };
        (ripple, f_first, f_last)
    } else {
        let (a, b, _, _) =
            walk(peak - 1.0).ok_or_else(|| Error::numerical("lost the −1 dB band"))?;
        (0.0, a, b)
    };
    // Return loss: the largest |S11| over [rl_lo, rl_hi], refined.
    let a = t.f.partition_point(|&f| f < rl_lo);
    let b = t.f.partition_point(|&f| f <= rl_hi);
    let s11 = |f: f64| t.s11_at(f);
    let mut worst = f64::NEG_INFINITY;
    for &f in &[rl_lo, rl_hi] {
        worst = worst.max(t.s11_at(f));
    }
    if a < b {
        let mut k = a;
        for i in a..b {
            if t.s11_db[i] > t.s11_db[k] {
                k = i;
            }
        }
        worst = worst.max(t.s11_db[k]);
        for i in local_extrema(&t.s11_db, a, b, 1.0) {
            worst = worst.max(t.extremum(i, 1.0, &s11, &t.s11_db).1);
        }
    }
    let center = 0.5 * (lo3 + hi3);
    // Group delay over the −3 dB band.
    let mut dmin = f64::INFINITY;
    let mut dmax = f64::NEG_INFINITY;
    for k in 0..=64 {
        let f = lo3 + (hi3 - lo3) * k as f64 / 64.0;
        let d = t.delay_at(f);
        dmin = dmin.min(d);
        dmax = dmax.max(d);
    }
    let bw6 = hi6 - lo6;
    let bw60 = e60.map(|e| e[1] - e[0]);
    finite(Performance {
        insertion_loss_db: -peak,
        ripple_db: ripple,
        bw_3db_hz: hi3 - lo3,
        bw_6db_hz: bw6,
        bw_60db_hz: bw60,
        shape_factor_60_6: bw60.map(|b| b / bw6),
        center_hz: center,
        return_loss_db: -worst,
        edges_3db_hz: [lo3, hi3],
        edges_6db_hz: [lo6, hi6],
        edges_60db_hz: e60,
        group_delay_center_s: t.delay_at(center),
        group_delay_variation_s: dmax - dmin,
    })
}

/// `p` when every figure is finite. Circuits with values far outside any real filter (an Rm of
/// 1e300 Ω, say) overflow the analysis; that must be an error, not a NaN in a report.
fn finite(p: Performance) -> Result<Performance> {
    let figures = [
        ("insertion_loss_db", p.insertion_loss_db),
        ("ripple_db", p.ripple_db),
        ("bw_3db_hz", p.bw_3db_hz),
        ("bw_6db_hz", p.bw_6db_hz),
        ("bw_60db_hz", p.bw_60db_hz.unwrap_or(0.0)),
        ("shape_factor_60_6", p.shape_factor_60_6.unwrap_or(0.0)),
        ("center_hz", p.center_hz),
        ("return_loss_db", p.return_loss_db),
        ("group_delay_center_s", p.group_delay_center_s),
        ("group_delay_variation_s", p.group_delay_variation_s),
    ];
    // Crossings found in numerical noise (a circuit that passes nothing, loss of hundreds of
    // dB) can come out in the wrong order; a band's edges must be ordered.
    let ordered = p.edges_3db_hz[0] <= p.edges_3db_hz[1]
        && p.edges_6db_hz[0] <= p.edges_3db_hz[0]
        && p.edges_3db_hz[1] <= p.edges_6db_hz[1];
    match figures.iter().find(|(_, v)| !v.is_finite()) {
        None if ordered => Ok(p),
        None => Err(Error::new(
            ErrorKind::InvalidValue,
            format!(
                "the analysis finds no usable passband for this circuit (−3 dB edges at {:.1} \
                 and {:.1} Hz, −6 dB edges at {:.1} and {:.1} Hz, loss {:.1} dB); expected \
                 component values of a real filter",
                p.edges_3db_hz[0],
                p.edges_3db_hz[1],
                p.edges_6db_hz[0],
                p.edges_6db_hz[1],
                p.insertion_loss_db
            ),
        )),
        Some((name, v)) => Err(Error::new(
            ErrorKind::InvalidValue,
            format!(
                "the analysis of this circuit overflows: {name} is not a finite number ({}); \
                 expected component values of a real filter (look for an Rm, Lm, Cm, C0 or \
                 capacitor far out of range)",
                if v.is_nan() { "undefined" } else { "infinite" }
            ),
        )),
    }
}

/// The crossings of `level` on both sides of the peak when the sampled range does not reach
/// them: with a circuit to evaluate, walk outward past the grid's ends in steps of a fortieth of
/// the −6 dB bandwidth (fine enough not to step over the C0 notch's skirt) for up to 400
/// bandwidths, then bisect.
fn skirt_walk(t: &Trace<'_>, imax: usize, level: f64, bw6: f64) -> Option<[f64; 2]> {
    t.exact?;
    let n = t.f.len();
    let step = bw6 / 40.0;
    let side = |dir: f64| -> Option<f64> {
        // Start from the last grid point on this side that is still above the level.
        let mut i = imax;
        if dir < 0.0 {
            while i > 0 && t.s21_db[i] >= level {
                i -= 1;
            }
            if t.s21_db[i] < level {
                return Some(t.crossing(i, level));
            }
        } else {
            while i + 1 < n && t.s21_db[i] >= level {
                i += 1;
            }
            if t.s21_db[i] < level {
                return Some(t.crossing(i - 1, level));
            }
        }
        let mut f = t.f[i];
        for _ in 0..16_000 {
            let g = f + dir * step;
            if g <= 0.0 {
                return None;
            }
            if t.s21_at(g) < level {
                let (mut a, mut b) = (f, g);
                for _ in 0..60 {
                    let m = 0.5 * (a + b);
                    if t.s21_at(m) >= level {
                        a = m;
                    } else {
                        b = m;
                    }
                }
                return Some(0.5 * (a + b));
            }
            f = g;
        }
        None
    };
    Some([side(-1.0)?, side(1.0)?])
}

impl Performance {
    /// Read the figures off a sampled sweep (linear interpolation between points).
    ///
    /// # Errors
    /// When the sweep has fewer than 5 points, holds NaN, or does not contain the −3 dB and
    /// −6 dB passband.
    pub fn from_sweep(s: &Sweep) -> Result<Self> {
        let t = Trace {
            f: &s.f_hz,
            s21_db: s.s21_db(),
            s11_db: s.s11_db(),
            delay: &s.group_delay_s,
            exact: None,
        };
        compute(&t)
    }
}

/// Analyse `net` from `f_lo_hz` to `f_hi_hz` on `points` points and refine every figure on the
/// circuit itself.
///
/// # Errors
/// As [`Performance::from_sweep`], plus a bad range.
pub fn evaluate(
    net: &impl Analyze,
    f_lo_hz: f64,
    f_hi_hz: f64,
    points: usize,
) -> Result<Performance> {
    require_positive("lower analysis frequency", f_lo_hz)?;
    let grid = FrequencyGrid::linear(f_lo_hz, f_hi_hz, points.max(5))?;
    evaluate_sweep(net, &net.sweep(&grid))
}

/// As [`evaluate`], for a sweep of `net` the caller already has (any grid in increasing
/// frequency): the sampled values locate the figures, the circuit refines them.
///
/// # Errors
/// As [`Performance::from_sweep`].
pub fn evaluate_sweep(net: &impl Analyze, s: &Sweep) -> Result<Performance> {
    let exact = |f: f64| {
        let r = net.response(f);
        (db(r.s21), db(r.s11), r.group_delay_s)
    };
    let t = Trace {
        f: &s.f_hz,
        s21_db: s.s21_db(),
        s11_db: s.s11_db(),
        delay: &s.group_delay_s,
        exact: Some(&exact),
    };
    compute(&t)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::{Branch, Element, Ladder, Loss, Stage};
    use approx::assert_relative_eq;
    use std::f64::consts::PI;

    /// A series RLC between 50 Ω ends: |S21|² = (2R0/Rt)² / (1 + (X/Rt)²), closed form.
    #[test]
    fn single_resonator_bandwidths_are_closed_form() {
        let (l, c, r) = (15e-3, 1.0 / ((2.0 * PI * 9e6f64).powi(2) * 15e-3), 10.0);
        let b = Branch::Series(vec![
            Branch::Element(Element::Inductor(l, Loss::Lossless)),
            Branch::Element(Element::Capacitor(c, Loss::Lossless)),
            Branch::Element(Element::Resistor(r)),
        ]);
        let lad = Ladder::new(50.0, 50.0, vec![Stage::Series(b)]).unwrap();
        let p = evaluate(&lad, 9e6 - 40e3, 9e6 + 40e3, 801).unwrap();
        let rt = 110.0;
        // −X dB points: reactance = ±Rt·sqrt(10^(X/10) − 1); for a series RLC the two roots of
        // ωL − 1/(ωC) = ±a are exactly a/L apart in ω. (−3.000 dB is not quite half power.)
        let width = |x_db: f64| rt * (10f64.powf(x_db / 10.0) - 1.0).sqrt() / (2.0 * PI * l);
        assert_relative_eq!(p.bw_3db_hz, width(3.0), max_relative = 1e-9);
        assert_relative_eq!(p.bw_6db_hz, width(6.0), max_relative = 1e-9);
        assert_relative_eq!(
            p.insertion_loss_db,
            -20.0 * (100.0f64 / 110.0).log10(),
            epsilon = 1e-9
        );
        assert_eq!(p.ripple_db, 0.0);
        // −60 dB lies far outside the sampled ±40 kHz: found by the skirt search.
        match p.bw_60db_hz {
            Some(b) => assert_relative_eq!(b, width(60.0), max_relative = 1e-6),
            None => panic!("the skirt search did not reach −60 dB"),
        }
        // Centre: geometric mean of the edges; the midpoint is within a hair of 9 MHz.
        assert_relative_eq!(p.center_hz, 9e6, max_relative = 1e-7);
        // Sampled reading agrees with the refined one to the grid's interpolation error.
        let s = lad.sweep(&FrequencyGrid::linear(9e6 - 40e3, 9e6 + 40e3, 8001).unwrap());
        let q = Performance::from_sweep(&s).unwrap();
        assert_relative_eq!(q.bw_3db_hz, p.bw_3db_hz, max_relative = 1e-3);
    }

    #[test]
    fn sweep_missing_the_passband_is_an_error() {
        let lad = Ladder::new(
            50.0,
            50.0,
            vec![Stage::Series(Branch::Element(Element::Resistor(1.0)))],
        )
        .unwrap();
        let e = evaluate(&lad, 1e6, 2e6, 101).unwrap_err();
        assert!(e.message().contains("sweep range"), "{e}");
    }
}
