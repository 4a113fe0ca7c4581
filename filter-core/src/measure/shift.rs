//! The oscillator frequency-shift method (see the parent module docs for the derivation).

use crate::error::{require_non_negative, require_positive, Error, Result};
use std::f64::consts::PI;

/// Motional parameters from an oscillator frequency shift ([`motional_from_shift`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ShiftResult {
    /// Motional capacitance Cm from the exact lossless relation, F.
    pub cm_f: f64,
    /// Motional inductance `Lm = 1/((2π·fs)²·Cm)`, H.
    pub lm_h: f64,
    /// Series resonance fs, Hz: `f_short` without an oscillator load, solved for with one.
    pub fs_hz: f64,
    /// The first-order figure `Cm ≈ 2·Δf·(C0 + Cs)/f_short` (no oscillator load), F, for
    /// comparison with hand calculations.
    pub cm_first_order_f: f64,
    /// Relative change of the returned Cm per +1 pF error in C0 (e.g. 0.027 = 2.7 % per pF;
    /// a ±0.5 pF uncertainty of C0 moves Cm by ±half of this).
    pub c0_sensitivity_per_pf: f64,
}

/// Cm, Lm and fs from the oscillator frequency-shift method.
///
/// The crystal runs in an oscillator twice: at `f_short_hz` with its series capacitor shorted,
/// and at `f_cap_hz` with `cs_f` in series. `c0_f` is the crystal's measured holder capacitance.
/// `osc_load_f` is the oscillator's own series load capacitance CL, when known (`None`: the
/// oscillator presents no reactance of its own, i.e. runs the crystal at fs).
///
/// # Assumptions
/// - Lossless BVD crystal: the oscillator runs where the total loop reactance is zero. A real
///   crystal's Rm moves both frequencies by a similar, tiny amount (a fraction of fs/Qu²) and is
///   ignored.
/// - A crystal with C0 in series with a capacitance C resonates at `fs·sqrt(1 + Cm/(C0 + C))`
///   (exact for the lossless BVD model, parent module docs).
/// - Without `osc_load_f`: f_short is fs and `Cm = (C0 + Cs)·((f2/f1)² − 1)`, exact.
/// - With CL: `f1 = fs·sqrt(1 + Cm·b)`, `f2 = fs·sqrt(1 + Cm·a)`, a = 1/(C0 + C'),
///   C' = CL·Cs/(CL + Cs), b = 1/(C0 + CL); with r = (f2/f1)², `Cm = (r − 1)/(a − r·b)` and
///   `fs = f1/sqrt(1 + Cm·b)`, exact. Ignoring CL = 100 pF (passing `None`) makes Cm about 7 %
///   low for Cs = 33 pF, C0 = 4 pF.
/// - The spurious modes and the stray capacitance of the switch are not modelled; put the
///   strays into `c0_f` or `cs_f`.
/// - C0 enters directly: with no load, `dCm/Cm = dC0/(C0 + Cs)`, about 1.4 % for ±0.5 pF at
///   Cs = 33 pF, C0 = 4 pF.
///
/// # Errors
/// Non-finite or non-positive frequencies, `f_cap_hz` not above `f_short_hz` (a series
/// capacitor raises the frequency), non-positive Cs or CL, negative C0, or a load so small
/// that the two readings are inconsistent (a − r·b ≤ 0).
pub fn motional_from_shift(
    f_short_hz: f64,
    f_cap_hz: f64,
    cs_f: f64,
    c0_f: f64,
    osc_load_f: Option<f64>,
) -> Result<ShiftResult> {
    require_positive("f_short_hz", f_short_hz)?;
    require_positive("f_cap_hz", f_cap_hz)?;
    require_positive("cs_f", cs_f)?;
    require_non_negative("c0_f", c0_f)?;
    if f_cap_hz <= f_short_hz {
        return Err(Error::invalid(
            "f_cap_hz",
            format!("{f_cap_hz} Hz"),
            &format!(
                "a frequency above f_short_hz = {f_short_hz} Hz (a series capacitor raises \
                 the oscillator frequency; were the two readings swapped?)"
            ),
        ));
    }
    let r = (f_cap_hz / f_short_hz).powi(2);
    let cm_first_order_f = 2.0 * (f_cap_hz - f_short_hz) * (c0_f + cs_f) / f_short_hz;
    let (cm_f, fs_hz) = match osc_load_f {
        None => ((c0_f + cs_f) * (r - 1.0), f_short_hz),
        Some(cl) => {
            require_positive("osc_load_f", cl)?;
            solve_loaded(f_short_hz, r, cs_f, c0_f, cl)?
        }
    };
    // Sensitivity to C0 by a central difference of the same closed form (±0.01 pF: the
    // relation is smooth and nearly linear in C0, truncation error ~1e-8 relative).
    let h = 0.01e-12;
    let cm_at = |c0: f64| -> f64 {
        match osc_load_f {
            None => (c0 + cs_f) * (r - 1.0),
            Some(cl) => solve_loaded(f_short_hz, r, cs_f, c0, cl)
                .map(|v| v.0)
                .unwrap_or(f64::NAN),
        }
    };
    let lo = if c0_f >= h { c0_f - h } else { c0_f };
    let hi = c0_f + h;
    let c0_sensitivity_per_pf = (cm_at(hi) - cm_at(lo)) / (hi - lo) * 1e-12 / cm_f;
    let w = 2.0 * PI * fs_hz;
    let lm_h = 1.0 / (w * w * cm_f);
    if !(cm_f.is_finite() && cm_f > 0.0 && lm_h.is_finite()) {
        return Err(Error::numerical(format!(
            "motional capacitance from the shift came out as {cm_f} F; check the readings"
        )));
    }
    Ok(ShiftResult {
        cm_f,
        lm_h,
        fs_hz,
        cm_first_order_f,
        c0_sensitivity_per_pf,
    })
}

/// Exact lossless solution with oscillator load `cl`: returns (Cm, fs).
fn solve_loaded(f1: f64, r: f64, cs: f64, c0: f64, cl: f64) -> Result<(f64, f64)> {
    let c_series = cl * cs / (cl + cs);
    let a = 1.0 / (c0 + c_series);
    let b = 1.0 / (c0 + cl);
    let den = a - r * b;
    if den <= 0.0 || !den.is_finite() {
        return Err(Error::invalid(
            "osc_load_f",
            format!("{cl} F"),
            "a load for which the shift (f2/f1)² is below (C0 + CL)/(C0 + CL·Cs/(CL + Cs)); \
             the readings and capacitances are inconsistent",
        ));
    }
    let cm = (r - 1.0) / den;
    let fs = f1 / (1.0 + cm * b).sqrt();
    Ok((cm, fs))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::crystal::Crystal;

    /// Zero-reactance frequency of the lossless `x` in series with capacitance `c`, between fs
    /// and fp, found by bisection on Im(Z + 1/(jωC)) of the full impedance (independent of the
    /// closed form under test).
    fn series_resonance_with(x: &Crystal, c: f64) -> f64 {
        let g = |f: f64| x.impedance(f).im - 1.0 / (2.0 * PI * f * c);
        let (mut a, mut b) = (x.fs_hz() * (1.0 + 1e-9), x.fp_hz() * (1.0 - 1e-9));
        assert!(g(a) < 0.0 && g(b) > 0.0);
        for _ in 0..200 {
            let m = 0.5 * (a + b);
            if g(m) < 0.0 {
                a = m;
            } else {
                b = m;
            }
        }
        0.5 * (a + b)
    }

    fn lossless() -> Crystal {
        Crystal::from_fs_lm("x", 9e6, 15e-3, 0.0, 4e-12).unwrap()
    }

    #[test]
    fn exact_without_oscillator_load() {
        let x = lossless();
        let f2 = series_resonance_with(&x, 33e-12);
        let r = motional_from_shift(x.fs_hz(), f2, 33e-12, 4e-12, None).unwrap();
        // Bisection to 1e-15 relative in frequency; Cm from (f2/f1)² − 1 ≈ 1e-3 loses three
        // digits: 1e-9 relative is a safe bound.
        assert!((r.cm_f / x.cm_f() - 1.0).abs() < 1e-9, "{:?}", r);
        assert!((r.lm_h / x.lm_h() - 1.0).abs() < 1e-9);
        // First-order figure: Δf/f ≈ 1.3e-4 here, so it errs by about that much.
        assert!((r.cm_first_order_f / x.cm_f() - 1.0).abs() < 1e-3);
    }

    #[test]
    fn exact_with_oscillator_load_and_cost_of_ignoring_it() {
        let x = lossless();
        let cl = 100e-12;
        let cs = 33e-12;
        let f1 = series_resonance_with(&x, cl);
        let f2 = series_resonance_with(&x, cl * cs / (cl + cs));
        let r = motional_from_shift(f1, f2, cs, 4e-12, Some(cl)).unwrap();
        assert!((r.cm_f / x.cm_f() - 1.0).abs() < 1e-9, "{:?}", r);
        assert!((r.fs_hz / x.fs_hz() - 1.0).abs() < 1e-12);
        let naive = motional_from_shift(f1, f2, cs, 4e-12, None).unwrap();
        let err = naive.cm_f / x.cm_f() - 1.0;
        // First-order prediction (C0 + Cs)·(1/(C0 + C') − 1/(C0 + CL)) − 1 = −7.1 %.
        let c_ser = cl * cs / (cl + cs);
        let pred = (4e-12 + cs) * (1.0 / (4e-12 + c_ser) - 1.0 / (4e-12 + cl)) - 1.0;
        assert!(err < -0.06 && err > -0.08, "ignoring CL: {err}");
        // The prediction drops O(Cm/C) terms, Cm/C ~ 1e-3.
        assert!((err - pred).abs() < 2e-3, "{err} vs {pred}");
    }

    #[test]
    fn c0_error_of_half_a_picofarad() {
        let x = lossless();
        let f2 = series_resonance_with(&x, 33e-12);
        let r = motional_from_shift(x.fs_hz(), f2, 33e-12, 4e-12, None).unwrap();
        let hi = motional_from_shift(x.fs_hz(), f2, 33e-12, 4.5e-12, None).unwrap();
        let actual = hi.cm_f / r.cm_f - 1.0;
        // dCm/Cm = dC0/(C0 + Cs) = 0.5/37 = 1.35 %, "about 1.4 %".
        assert!((actual - 0.5 / 37.0).abs() < 1e-9, "{actual}");
        assert!((0.5 * r.c0_sensitivity_per_pf - actual).abs() < 1e-6);
        let loaded = motional_from_shift(9e6, 9.001e6, 33e-12, 4e-12, Some(100e-12)).unwrap();
        assert!(loaded.c0_sensitivity_per_pf > 0.0);
    }

    #[test]
    fn bad_readings_are_errors() {
        let e = motional_from_shift(9.001e6, 9e6, 33e-12, 4e-12, None).unwrap_err();
        assert!(e.message().contains("f_cap_hz"), "{}", e.message());
        assert!(motional_from_shift(9e6, 9.001e6, 0.0, 4e-12, None).is_err());
        assert!(motional_from_shift(9e6, 9.001e6, 33e-12, -1e-12, None).is_err());
        assert!(motional_from_shift(f64::NAN, 9.001e6, 33e-12, 4e-12, None).is_err());
        assert!(motional_from_shift(9e6, 9.001e6, 33e-12, 4e-12, Some(0.0)).is_err());
        // A shift far too large for the stated load: a − r·b ≤ 0.
        assert!(motional_from_shift(9e6, 12e6, 33e-12, 4e-12, Some(1e-12)).is_err());
    }
}
