//! The Butterworth–Van Dyke (BVD) model of a quartz crystal.
//!
//! A crystal near its fundamental mode is a motional series branch (Rm, Lm, Cm) shunted by the
//! holder and electrode capacitance C0. Spurious and overtone modes are further motional branches
//! in parallel with the main one. Everything is in SI units (Ω, H, F, Hz).
//!
//! Derived quantities:
//! - series resonance `fs = 1 / (2π·sqrt(Lm·Cm))` (of the main branch alone);
//! - parallel (anti-) resonance `fp = fs·sqrt(1 + Cm/C0)` (infinite when C0 = 0);
//! - unloaded quality factor `Qu = 2π·fs·Lm / Rm` (infinite when Rm = 0);
//! - the reactance slope parameter `x = (ω/2)·dX/dω` of the whole crystal at a frequency,
//!   which for a crystal used as a series resonator just above fs equals the motional slope
//!   `ω·Lm` raised by about `(1 + ω·C0·X)²`, X being the crystal's reactance there.
//!
//! # References
//! 1. K. S. Van Dyke, "The piezo-electric resonator and its equivalent network",
//!    Proc. IRE 16, 1928 (the equivalent circuit).
//! 2. G. L. Matthaei, L. Young, E. M. T. Jones, *Microwave Filters, Impedance-Matching Networks,
//!    and Coupling Structures*, 1964, §5.08 (reactance slope parameter).

use crate::error::{require_non_negative, require_positive, Error, Result};
use num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// A value derived from two given ones (Cm from fs and Lm, ...) must itself be usable: finite
/// and above zero, not an overflow or underflow of extreme inputs.
fn check_derived(what: &str, value: f64, a: f64, b: f64) -> Result<()> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(Error::invalid(
            what,
            format!("{value:e} (from {a:e} and {b:e})"),
            "a finite value above zero: values of a real crystal",
        ))
    }
}

/// A motional (series R-L-C) branch: the main mode of a crystal or a spurious mode.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct MotionalBranch {
    /// Motional resistance, Ω.
    pub rm_ohm: f64,
    /// Motional inductance, H.
    pub lm_h: f64,
    /// Motional capacitance, F.
    pub cm_f: f64,
}

impl MotionalBranch {
    /// A branch from its resonant frequency, motional inductance and resistance.
    ///
    /// # Errors
    /// When a value is non-finite, fs or Lm not positive, or Rm negative.
    pub fn from_fs_lm(fs_hz: f64, lm_h: f64, rm_ohm: f64) -> Result<Self> {
        require_positive("fs", fs_hz)?;
        require_positive("Lm", lm_h)?;
        require_non_negative("Rm", rm_ohm)?;
        let w = 2.0 * PI * fs_hz;
        let cm_f = 1.0 / (w * w * lm_h);
        check_derived("Cm = 1/((2π·fs)²·Lm)", cm_f, fs_hz, lm_h)?;
        Ok(MotionalBranch { rm_ohm, lm_h, cm_f })
    }

    /// Series-resonant frequency of the branch, Hz.
    pub fn fs_hz(&self) -> f64 {
        1.0 / (2.0 * PI * (self.lm_h * self.cm_f).sqrt())
    }

    /// Impedance of the branch and its derivative with respect to ω, at angular frequency `w`.
    #[inline]
    pub(crate) fn z_dz(&self, w: f64) -> (Complex64, Complex64) {
        let z = Complex64::new(self.rm_ohm, w * self.lm_h - 1.0 / (w * self.cm_f));
        let dz = Complex64::new(0.0, self.lm_h + 1.0 / (w * w * self.cm_f));
        (z, dz)
    }
}

/// A quartz crystal: BVD main branch, C0, and any number of spurious branches.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(try_from = "CrystalRecord", into = "CrystalRecord")]
pub struct Crystal {
    /// The builder's name for this crystal (a label written on it, a bag position...).
    pub id: String,
    /// The main motional branch.
    pub motional: MotionalBranch,
    /// Shunt (holder) capacitance C0, F. Zero is allowed.
    pub c0_f: f64,
    /// Extra motional branches for spurious or overtone modes, in parallel with the main one.
    pub spurious: Vec<MotionalBranch>,
}

/// The serialized form of a [`Crystal`] (field names the design record and batch files use).
#[derive(Debug, Clone, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct CrystalRecord {
    id: String,
    fs_hz: f64,
    lm_h: f64,
    cm_f: f64,
    rm_ohm: f64,
    c0_f: f64,
    /// `null` when C0 is 0 (no parallel resonance).
    #[serde(default)]
    fp_hz: Option<f64>,
    /// `null` when Rm is 0 (a lossless crystal).
    #[serde(default)]
    qu: Option<f64>,
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    spurious: Vec<MotionalBranch>,
}

impl TryFrom<CrystalRecord> for Crystal {
    type Error = Error;
    fn try_from(r: CrystalRecord) -> Result<Self> {
        let x = Crystal::from_lm_cm(&r.id, r.lm_h, r.cm_f, r.rm_ohm, r.c0_f)?;
        let fs = x.fs_hz();
        // fs is redundant with Lm and Cm; a record edited by hand must stay consistent.
        // 1 ppm allows for values printed with 12+ significant digits.
        if !(r.fs_hz.is_finite() && ((r.fs_hz - fs) / fs).abs() < 1e-6) {
            return Err(Error::invalid(
                &format!("crystal '{}' fs_hz", r.id),
                r.fs_hz,
                &format!("1/(2π·sqrt(lm_h·cm_f)) = {fs:.3} Hz (edit lm_h or cm_f too)"),
            ));
        }
        let mut x = x;
        for (i, b) in r.spurious.iter().enumerate() {
            require_positive(&format!("crystal '{}' spurious[{i}].lm_h", r.id), b.lm_h)?;
            require_positive(&format!("crystal '{}' spurious[{i}].cm_f", r.id), b.cm_f)?;
            require_non_negative(
                &format!("crystal '{}' spurious[{i}].rm_ohm", r.id),
                b.rm_ohm,
            )?;
        }
        x.spurious = r.spurious;
        Ok(x)
    }
}

impl From<Crystal> for CrystalRecord {
    fn from(x: Crystal) -> Self {
        let fp = x.fp_hz();
        let qu = x.qu();
        CrystalRecord {
            fs_hz: x.fs_hz(),
            lm_h: x.motional.lm_h,
            cm_f: x.motional.cm_f,
            rm_ohm: x.motional.rm_ohm,
            c0_f: x.c0_f,
            fp_hz: fp.is_finite().then_some(fp),
            qu: qu.is_finite().then_some(qu),
            spurious: x.spurious,
            id: x.id,
        }
    }
}

/// # Construction
impl Crystal {
    /// From series-resonant frequency and motional inductance.
    ///
    /// # Errors
    /// Non-finite values, fs or Lm not positive, Rm or C0 negative.
    pub fn from_fs_lm(id: &str, fs_hz: f64, lm_h: f64, rm_ohm: f64, c0_f: f64) -> Result<Self> {
        let motional = MotionalBranch::from_fs_lm(fs_hz, lm_h, rm_ohm)?;
        Self::from_branch(id, motional, c0_f)
    }

    /// From series-resonant frequency and motional capacitance.
    ///
    /// # Errors
    /// Non-finite values, fs or Cm not positive, Rm or C0 negative.
    pub fn from_fs_cm(id: &str, fs_hz: f64, cm_f: f64, rm_ohm: f64, c0_f: f64) -> Result<Self> {
        require_positive("fs", fs_hz)?;
        require_positive("Cm", cm_f)?;
        let w = 2.0 * PI * fs_hz;
        let lm_h = 1.0 / (w * w * cm_f);
        check_derived("Lm = 1/((2π·fs)²·Cm)", lm_h, fs_hz, cm_f)?;
        Self::from_lm_cm(id, lm_h, cm_f, rm_ohm, c0_f)
    }

    /// From motional inductance and capacitance.
    ///
    /// # Errors
    /// Non-finite values, Lm or Cm not positive, Rm or C0 negative.
    pub fn from_lm_cm(id: &str, lm_h: f64, cm_f: f64, rm_ohm: f64, c0_f: f64) -> Result<Self> {
        require_positive("Lm", lm_h)?;
        require_positive("Cm", cm_f)?;
        require_non_negative("Rm", rm_ohm)?;
        Self::from_branch(id, MotionalBranch { rm_ohm, lm_h, cm_f }, c0_f)
    }

    fn from_branch(id: &str, motional: MotionalBranch, c0_f: f64) -> Result<Self> {
        require_non_negative("C0", c0_f)?;
        let fs = motional.fs_hz();
        if !(fs.is_finite() && fs > 0.0) {
            return Err(Error::invalid(
                "fs = 1/(2π·sqrt(Lm·Cm))",
                format!(
                    "{fs:e} Hz (Lm = {:e} H, Cm = {:e} F)",
                    motional.lm_h, motional.cm_f
                ),
                "a finite frequency above zero: Lm and Cm of a real crystal",
            ));
        }
        Ok(Crystal {
            id: id.to_string(),
            motional,
            c0_f,
            spurious: Vec::new(),
        })
    }

    /// Add a spurious mode at `f_hz` with motional inductance `lm_h` and resistance `rm_ohm`.
    ///
    /// # Errors
    /// As [`MotionalBranch::from_fs_lm`].
    pub fn with_spurious(mut self, f_hz: f64, lm_h: f64, rm_ohm: f64) -> Result<Self> {
        self.spurious
            .push(MotionalBranch::from_fs_lm(f_hz, lm_h, rm_ohm)?);
        Ok(self)
    }
}

/// # Derived quantities
impl Crystal {
    /// Motional resistance Rm, Ω.
    pub fn rm_ohm(&self) -> f64 {
        self.motional.rm_ohm
    }
    /// Motional inductance Lm, H.
    pub fn lm_h(&self) -> f64 {
        self.motional.lm_h
    }
    /// Motional capacitance Cm, F.
    pub fn cm_f(&self) -> f64 {
        self.motional.cm_f
    }

    /// Series-resonant frequency of the main motional branch, Hz.
    pub fn fs_hz(&self) -> f64 {
        self.motional.fs_hz()
    }

    /// Parallel-resonant frequency fp = fs·sqrt(1 + Cm/C0), Hz; infinite when C0 = 0.
    pub fn fp_hz(&self) -> f64 {
        if self.c0_f == 0.0 {
            f64::INFINITY
        } else {
            self.fs_hz() * (1.0 + self.motional.cm_f / self.c0_f).sqrt()
        }
    }

    /// Unloaded quality factor Qu = ωs·Lm/Rm; infinite when Rm = 0.
    pub fn qu(&self) -> f64 {
        if self.motional.rm_ohm == 0.0 {
            f64::INFINITY
        } else {
            2.0 * PI * self.fs_hz() * self.motional.lm_h / self.motional.rm_ohm
        }
    }

    /// Complex impedance at `f_hz`.
    pub fn impedance(&self, f_hz: f64) -> Complex64 {
        self.z_dz(2.0 * PI * f_hz).0
    }

    /// Reactance slope parameter x = (ω/2)·dX/dω of the whole crystal (C0 and spurious modes
    /// included) at `f_hz`, Ω. For the bare motional branch this is ω·Lm at resonance.
    pub fn reactance_slope(&self, f_hz: f64) -> f64 {
        let w = 2.0 * PI * f_hz;
        let (_, dz) = self.z_dz(w);
        0.5 * w * dz.im
    }

    /// Impedance and its derivative with respect to ω at angular frequency `w` (rad/s).
    ///
    /// Written so that it stays finite at the exact series resonance of a lossless crystal.
    #[inline]
    pub(crate) fn z_dz(&self, w: f64) -> (Complex64, Complex64) {
        let (zm, dzm) = self.motional.z_dz(w);
        // Main branch with C0 across: Z = zm / (1 + jωC0·zm), and
        // dZ/dω = (dzm − jC0·zm²) / (1 + jωC0·zm)²: one reciprocal for both.
        let jc0 = Complex64::new(0.0, self.c0_f);
        let inv = (Complex64::new(1.0, 0.0) + jc0 * w * zm).inv();
        let mut z = zm * inv;
        let mut dz = (dzm - jc0 * zm * zm) * inv * inv;
        // Spurious branches in parallel: Z' = Z / (1 + Z·Σy), y = 1/zs.
        if !self.spurious.is_empty() {
            let mut y = Complex64::new(0.0, 0.0);
            let mut dy = Complex64::new(0.0, 0.0);
            for b in &self.spurious {
                let (zs, dzs) = b.z_dz(w);
                let ys = zs.inv();
                y += ys;
                dy -= dzs * ys * ys;
            }
            let d = Complex64::new(1.0, 0.0) + z * y;
            let dd = dz * y + z * dy;
            let zn = z / d;
            dz = (dz * d - z * dd) / (d * d);
            z = zn;
        }
        (z, dz)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn xtal() -> Crystal {
        Crystal::from_fs_lm("a", 9e6, 15e-3, 10.0, 4e-12).unwrap()
    }

    #[test]
    fn constructors_agree() {
        let a = xtal();
        let b = Crystal::from_fs_cm("a", 9e6, a.cm_f(), 10.0, 4e-12).unwrap();
        let c = Crystal::from_lm_cm("a", a.lm_h(), a.cm_f(), 10.0, 4e-12).unwrap();
        assert_relative_eq!(b.lm_h(), a.lm_h(), max_relative = 1e-12);
        assert_relative_eq!(c.fs_hz(), 9e6, max_relative = 1e-12);
    }

    #[test]
    fn fp_formula_and_zero_c0() {
        let a = xtal();
        let fp = a.fp_hz();
        // The lossless impedance is infinite (admittance zero) at fp.
        let lossless = Crystal::from_fs_lm("b", 9e6, 15e-3, 0.0, 4e-12).unwrap();
        let y = 1.0 / lossless.impedance(fp).norm();
        assert!(y < 1e-9, "admittance at fp {y}");
        let no_c0 = Crystal::from_fs_lm("c", 9e6, 15e-3, 1.0, 0.0).unwrap();
        assert!(no_c0.fp_hz().is_infinite());
        assert_relative_eq!(no_c0.impedance(9e6).re, 1.0, max_relative = 1e-9);
    }

    #[test]
    fn slope_of_bare_branch_is_w_lm() {
        let a = Crystal::from_fs_lm("a", 9e6, 15e-3, 0.0, 0.0).unwrap();
        assert_relative_eq!(
            a.reactance_slope(9e6),
            2.0 * PI * 9e6 * 15e-3,
            max_relative = 1e-12
        );
    }

    #[test]
    fn slope_with_c0_is_raised_by_the_c0_factor() {
        // x ≈ x_m·(1 + ω·C0·X)² near fs (first-order statement, see module docs).
        let a = Crystal::from_fs_lm("a", 9e6, 15e-3, 0.0, 4e-12).unwrap();
        let f = 9e6 + 1500.0;
        let w = 2.0 * PI * f;
        let x = a.impedance(f).im;
        let bare = Crystal::from_fs_lm("a", 9e6, 15e-3, 0.0, 0.0).unwrap();
        let ratio = a.reactance_slope(f) / bare.reactance_slope(f);
        assert_relative_eq!(ratio, (1.0 + w * 4e-12 * x).powi(2), max_relative = 1e-3);
    }

    #[test]
    fn derivative_matches_finite_difference() {
        let a = xtal().with_spurious(9.05e6, 40e-3, 60.0).unwrap();
        let w = 2.0 * PI * 9.0007e6;
        let h = w * 1e-9;
        let num = (a.z_dz(w + h).0 - a.z_dz(w - h).0) / (2.0 * h);
        let (_, dz) = a.z_dz(w);
        assert_relative_eq!(dz.re, num.re, max_relative = 1e-5, epsilon = 1e-12);
        assert_relative_eq!(dz.im, num.im, max_relative = 1e-5);
    }

    #[test]
    fn json_round_trip_and_inconsistent_fs() {
        let a = xtal();
        let s = serde_json::to_string(&a).unwrap();
        let b: Crystal = serde_json::from_str(&s).unwrap();
        assert_relative_eq!(b.fs_hz(), a.fs_hz(), max_relative = 1e-14);
        let bad = s.replace("\"fs_hz\":9000000", "\"fs_hz\":9100000");
        assert!(serde_json::from_str::<Crystal>(&bad).is_err());
    }

    #[test]
    fn bad_values_are_errors() {
        assert!(Crystal::from_fs_lm("a", -9e6, 15e-3, 10.0, 4e-12).is_err());
        assert!(Crystal::from_fs_lm("a", 9e6, f64::NAN, 10.0, 4e-12).is_err());
        assert!(Crystal::from_fs_lm("a", 9e6, 15e-3, -1.0, 4e-12).is_err());
        assert!(Crystal::from_fs_lm("a", 9e6, 15e-3, 1.0, -4e-12).is_err());
    }
}
