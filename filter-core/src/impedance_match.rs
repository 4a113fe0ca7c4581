//! Matching the ladder's terminations to the system impedance: L-networks and ideal transformers.
//!
//! A crystal ladder is designed for end resistances (Rs, RL) set by its couplings, often a few
//! hundred ohms to a few kilohms, while the radio around it runs at a system impedance such as
//! 50 Ω. This module designs the two usual ways to connect them at the centre frequency.
//!
//! # L-network
//! Two reactances, one in series and one in shunt. With R_high the larger and R_low the smaller
//! of the two resistances, the loaded Q and the reactances are [1, ch. 4]
//!
//! ```text
//!     Q  = sqrt(R_high / R_low − 1)
//!     Xs = Q · R_low        (series element, on the low-resistance side)
//!     Xp = R_high / Q       (shunt element, across the high-resistance side)
//! ```
//!
//! The series branch R_low + j·Xs has the parallel equivalent R_low·(1 + Q²) = R_high in
//! parallel with j·R_high/Q, and the shunt element of opposite sign cancels that reactance, so
//! the high side sees exactly R_high and, the network being lossless, the low side sees R_low.
//! The signs give two forms [1, ch. 4]:
//!
//! - [`LForm::LowPass`]: series inductor L = Xs/ω, shunt capacitor C = 1/(ω·Xp); passes DC.
//! - [`LForm::HighPass`]: series capacitor C = 1/(ω·Xs), shunt inductor L = Xp/ω; blocks DC.
//!
//! Seen from the system port, the shunt element comes first when the system impedance is the
//! higher one ([`LNetworkKind::ShuntFirst`]) and last when the termination is higher
//! ([`LNetworkKind::SeriesFirst`], the usual case of a 50 Ω system and a ladder of some hundreds
//! of ohms). The match is exact only at the design frequency; its bandwidth is roughly f/Q, far
//! wider than a crystal filter's passband for the ratios met in practice.
//!
//! Equal resistances need no network (Q = 0, the series element a short and the shunt element
//! an open); [`design_l_network`] reports that as an error whose hint says to connect directly.
//!
//! # Analysis
//! Each network is a cascade of series impedances Z (ABCD matrix [[1, Z], [0, 1]]) and shunt
//! admittances Y ([[1, 0], [Y, 1]]) taken from the system port to the termination port [2, §2.05].
//! Terminated by Z_L at the far end, the near end sees Z_in = (A·Z_L + B) / (C·Z_L + D); the
//! reverse direction of a reciprocal network swaps A and D.
//!
//! # Transformer
//! An ideal transformer with turns ratio n = N_termination / N_system transforms impedances by
//! n²: Z_system_side = Z_termination / n², so n = sqrt(R_termination / R_system) [1, ch. 4].
//! Winding reactance and leakage are left to the builder; a broadband transformer on a ferrite
//! core with enough turns approaches the ideal in the narrow band of a crystal filter.
//!
//! # References
//! 1. C. Bowick, *RF Circuit Design*, Howard W. Sams, 1982, ch. 4 "Impedance Matching"
//!    (the L-network formulas, the low-pass and high-pass forms, and the transformer ratio).
//! 2. G. L. Matthaei, L. Young, E. M. T. Jones, *Microwave Filters, Impedance-Matching Networks,
//!    and Coupling Structures*, 1964, §2.05 (ABCD matrices of series and shunt elements and of
//!    cascades).

use crate::error::{Error, ErrorKind, Result};
use num_complex::Complex64;
use serde::{Deserialize, Serialize};
use std::f64::consts::PI;

/// Which pair of element types an L-network uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum LForm {
    /// Series inductor, shunt capacitor: passes DC, attenuates above the band.
    LowPass,
    /// Series capacitor, shunt inductor: blocks DC, attenuates below the band.
    HighPass,
}

/// The orientation of an L-network, read from the system port towards the termination.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum LNetworkKind {
    /// The shunt element is across the system port: the system impedance is the higher one.
    ShuntFirst,
    /// The series element is at the system port and the shunt element across the termination:
    /// the termination is the higher impedance.
    SeriesFirst,
}

/// An ideal inductor or capacitor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ReactiveElement {
    /// An inductor.
    Inductor {
        /// Inductance, H.
        inductance_h: f64,
    },
    /// A capacitor.
    Capacitor {
        /// Capacitance, F.
        capacitance_f: f64,
    },
}

impl ReactiveElement {
    /// The element whose reactance at `w_rad_s` has magnitude `x_ohm` and is inductive
    /// (`inductive = true`) or capacitive.
    fn with_reactance(x_ohm: f64, w_rad_s: f64, inductive: bool) -> Self {
        if inductive {
            ReactiveElement::Inductor {
                inductance_h: x_ohm / w_rad_s,
            }
        } else {
            ReactiveElement::Capacitor {
                capacitance_f: 1.0 / (w_rad_s * x_ohm),
            }
        }
    }

    /// Reactance at `f_hz`, Ω: ωL for an inductor, −1/(ωC) for a capacitor.
    pub fn reactance_ohm(&self, f_hz: f64) -> f64 {
        let w = 2.0 * PI * f_hz;
        match *self {
            ReactiveElement::Inductor { inductance_h } => w * inductance_h,
            ReactiveElement::Capacitor { capacitance_f } => -1.0 / (w * capacitance_f),
        }
    }

    /// Impedance at `f_hz`: j·X.
    pub fn impedance(&self, f_hz: f64) -> Complex64 {
        Complex64::new(0.0, self.reactance_ohm(f_hz))
    }

    /// The element value in its SI unit (H or F).
    pub fn value(&self) -> f64 {
        match *self {
            ReactiveElement::Inductor { inductance_h } => inductance_h,
            ReactiveElement::Capacitor { capacitance_f } => capacitance_f,
        }
    }
}

/// Where a matching element sits in the signal path.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum ElementPosition {
    /// In series with the signal path.
    Series,
    /// From the signal path to ground.
    Shunt,
}

/// One part of a matching network, for parts lists and circuit builders.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct MatchElement {
    /// Series or shunt.
    pub position: ElementPosition,
    /// The part and its value.
    pub element: ReactiveElement,
}

/// A two-element L matching network designed for one frequency.
///
/// Built by [`design_l_network`]; the fields record the design so that it can be printed and
/// stored.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LNetwork {
    /// Orientation from the system port.
    pub kind: LNetworkKind,
    /// Low-pass or high-pass element types.
    pub form: LForm,
    /// The series element.
    pub series: ReactiveElement,
    /// The shunt element.
    pub shunt: ReactiveElement,
    /// Loaded Q of the match, sqrt(R_high/R_low − 1).
    pub q: f64,
    /// The system impedance the network was designed for, Ω.
    pub system_ohm: f64,
    /// The termination resistance the network was designed for, Ω.
    pub termination_ohm: f64,
    /// The design (centre) frequency, Hz.
    pub f_hz: f64,
}

/// A finite, strictly positive value, or an error naming the field with its unit.
fn positive(field: &str, value: f64, unit: &str) -> Result<f64> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        let with_unit = |x: String| {
            if unit.is_empty() {
                x
            } else {
                format!("{x} {unit}")
            }
        };
        Err(Error::invalid(
            field,
            with_unit(value.to_string()),
            &with_unit("a finite value greater than 0".to_string()),
        ))
    }
}

/// A finite impedance with a non-negative real part (a passive one), or an error.
fn passive(field: &str, z: Complex64) -> Result<Complex64> {
    if z.re.is_finite() && z.im.is_finite() && z.re >= 0.0 {
        Ok(z)
    } else {
        Err(Error::invalid(
            field,
            format!("({} {:+} j) Ω", z.re, z.im),
            "a finite impedance with a real part of 0 Ω or more",
        ))
    }
}

/// 2×2 complex matrix product.
fn mul(a: [[Complex64; 2]; 2], b: [[Complex64; 2]; 2]) -> [[Complex64; 2]; 2] {
    [
        [
            a[0][0] * b[0][0] + a[0][1] * b[1][0],
            a[0][0] * b[0][1] + a[0][1] * b[1][1],
        ],
        [
            a[1][0] * b[0][0] + a[1][1] * b[1][0],
            a[1][0] * b[0][1] + a[1][1] * b[1][1],
        ],
    ]
}

/// (A·z + B) / (C·z + D), or a numerical error when it is not finite (a lossless resonance
/// against a purely reactive termination).
fn bilinear(
    num: (Complex64, Complex64),
    den: (Complex64, Complex64),
    z: Complex64,
) -> Result<Complex64> {
    let out = (num.0 * z + num.1) / (den.0 * z + den.1);
    if out.re.is_finite() && out.im.is_finite() {
        Ok(out)
    } else {
        Err(Error::numerical(format!(
            "impedance through the matching network is not finite for a termination of ({} {:+} j) Ω \
             (a lossless resonance)",
            z.re, z.im
        )))
    }
}

/// An L-network matching `termination_ohm` to `system_ohm` at `f_hz`, in the given form.
///
/// The formulas are those of the module docs [1, ch. 4]. The orientation follows from which
/// resistance is higher.
///
/// # Errors
/// When a resistance or the frequency is not finite and positive, or when the two resistances
/// are equal (no network is needed; the error's hint says so).
///
/// # Example
/// ```
/// use filter_core::impedance_match::{design_l_network, LForm, LNetworkKind};
/// // A 50 Ω system to a 450 Ω ladder termination at 9 MHz: Q = sqrt(450/50 − 1) = 2.83.
/// let net = design_l_network(50.0, 450.0, 9e6, LForm::LowPass)?;
/// assert_eq!(net.kind, LNetworkKind::SeriesFirst);
/// let z = net.input_impedance(450.0, 9e6)?;
/// assert!((z.re - 50.0).abs() < 1e-9 && z.im.abs() < 1e-9);
/// # Ok::<(), filter_core::Error>(())
/// ```
pub fn design_l_network(
    system_ohm: f64,
    termination_ohm: f64,
    f_hz: f64,
    form: LForm,
) -> Result<LNetwork> {
    positive("system_ohm", system_ohm, "Ω")?;
    positive("termination_ohm", termination_ohm, "Ω")?;
    positive("f_hz", f_hz, "Hz")?;
    if system_ohm == termination_ohm {
        return Err(Error::new(
            ErrorKind::InvalidValue,
            format!(
                "termination_ohm: {termination_ohm} Ω equals system_ohm; expected a resistance \
                 different from the system impedance for an l-network"
            ),
        )
        .with_hint("equal resistances need no matching network: connect the ladder directly"));
    }
    let (r_high, r_low) = if system_ohm > termination_ohm {
        (system_ohm, termination_ohm)
    } else {
        (termination_ohm, system_ohm)
    };
    let q = (r_high / r_low - 1.0).sqrt();
    let xs = q * r_low;
    let xp = r_high / q;
    let w = 2.0 * PI * f_hz;
    let (series, shunt) = match form {
        LForm::LowPass => (
            ReactiveElement::with_reactance(xs, w, true),
            ReactiveElement::with_reactance(xp, w, false),
        ),
        LForm::HighPass => (
            ReactiveElement::with_reactance(xs, w, false),
            ReactiveElement::with_reactance(xp, w, true),
        ),
    };
    let net = LNetwork {
        kind: if system_ohm > termination_ohm {
            LNetworkKind::ShuntFirst
        } else {
            LNetworkKind::SeriesFirst
        },
        form,
        series,
        shunt,
        q,
        system_ohm,
        termination_ohm,
        f_hz,
    };
    let values_finite = [series.value(), shunt.value(), q]
        .iter()
        .all(|v| v.is_finite() && *v > 0.0);
    if values_finite {
        Ok(net)
    } else {
        Err(Error::numerical(format!(
            "l-network for {system_ohm} Ω to {termination_ohm} Ω at {f_hz} Hz has element values \
             out of floating-point range"
        )))
    }
}

impl LNetwork {
    /// The parts in signal order from the system port to the termination port.
    ///
    /// `ShuntFirst` gives `[shunt, series]` (the shunt element across the system port);
    /// `SeriesFirst` gives `[series, shunt]` (the shunt element across the termination).
    pub fn elements(&self) -> Vec<MatchElement> {
        let series = MatchElement {
            position: ElementPosition::Series,
            element: self.series,
        };
        let shunt = MatchElement {
            position: ElementPosition::Shunt,
            element: self.shunt,
        };
        match self.kind {
            LNetworkKind::ShuntFirst => vec![shunt, series],
            LNetworkKind::SeriesFirst => vec![series, shunt],
        }
    }

    /// The ABCD (chain) matrix from the system port to the termination port at `f_hz` \[2\].
    ///
    /// # Errors
    /// When `f_hz` is not finite and positive.
    pub fn abcd(&self, f_hz: f64) -> Result<[[Complex64; 2]; 2]> {
        positive("f_hz", f_hz, "Hz")?;
        let one = Complex64::new(1.0, 0.0);
        let zero = Complex64::new(0.0, 0.0);
        let z_series = self.series.impedance(f_hz);
        let y_shunt = 1.0 / self.shunt.impedance(f_hz);
        let series = [[one, z_series], [zero, one]];
        let shunt = [[one, zero], [y_shunt, one]];
        Ok(match self.kind {
            LNetworkKind::ShuntFirst => mul(shunt, series),
            LNetworkKind::SeriesFirst => mul(series, shunt),
        })
    }

    /// Impedance seen at the system port when the termination port is loaded by `z_termination`.
    ///
    /// # Errors
    /// When `f_hz` is not finite and positive, `z_termination` is not finite or has a negative
    /// real part, or the result is not finite (a purely reactive load resonating with the
    /// network).
    pub fn impedance_at_system_port(
        &self,
        z_termination: Complex64,
        f_hz: f64,
    ) -> Result<Complex64> {
        passive("z_termination", z_termination)?;
        let [[a, b], [c, d]] = self.abcd(f_hz)?;
        bilinear((a, b), (c, d), z_termination)
    }

    /// Impedance seen at the termination port when the system port is loaded by `z_system`
    /// (the reverse direction: for a reciprocal network, A and D swap).
    ///
    /// # Errors
    /// As for [`LNetwork::impedance_at_system_port`], for `z_system`.
    pub fn impedance_at_termination_port(
        &self,
        z_system: Complex64,
        f_hz: f64,
    ) -> Result<Complex64> {
        passive("z_system", z_system)?;
        let [[a, b], [c, d]] = self.abcd(f_hz)?;
        bilinear((d, b), (c, a), z_system)
    }

    /// Impedance seen at the system port when the termination port is loaded by the resistance
    /// `load_ohm`. At the design frequency with `load_ohm = termination_ohm` it is `system_ohm`.
    ///
    /// # Errors
    /// When `load_ohm` is negative or not finite, or `f_hz` is not finite and positive.
    pub fn input_impedance(&self, load_ohm: f64, f_hz: f64) -> Result<Complex64> {
        self.impedance_at_system_port(resistance("load_ohm", load_ohm)?, f_hz)
    }

    /// Impedance seen at the termination port when the system port is driven from the
    /// resistance `source_ohm`. At the design frequency with `source_ohm = system_ohm` it is
    /// `termination_ohm`: the ladder sees the end resistance it was designed for.
    ///
    /// # Errors
    /// When `source_ohm` is negative or not finite, or `f_hz` is not finite and positive.
    pub fn output_impedance(&self, source_ohm: f64, f_hz: f64) -> Result<Complex64> {
        self.impedance_at_termination_port(resistance("source_ohm", source_ohm)?, f_hz)
    }
}

/// A resistance as a complex impedance, or an error when it is negative or not finite.
fn resistance(field: &str, r_ohm: f64) -> Result<Complex64> {
    if r_ohm.is_finite() && r_ohm >= 0.0 {
        Ok(Complex64::new(r_ohm, 0.0))
    } else {
        Err(Error::invalid(
            field,
            format!("{r_ohm} Ω"),
            "a finite resistance of 0 Ω or more",
        ))
    }
}

/// An ideal impedance-matching transformer.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Transformer {
    /// Turns ratio n = N_termination / N_system; impedances at the termination side are n² times
    /// those at the system side. Must be finite and positive ([`design_transformer`] ensures it).
    pub turns_ratio: f64,
}

/// The ideal transformer matching `termination_ohm` to `system_ohm`: n = sqrt(R_term / R_sys)
/// [1, ch. 4].
///
/// Equal resistances give n = 1 (an isolating transformer), which is allowed.
///
/// # Errors
/// When a resistance is not finite and positive.
///
/// # Example
/// ```
/// use filter_core::impedance_match::design_transformer;
/// let t = design_transformer(50.0, 800.0)?; // 1:4 turns, 1:16 impedance
/// assert!((t.turns_ratio - 4.0).abs() < 1e-15);
/// # Ok::<(), filter_core::Error>(())
/// ```
pub fn design_transformer(system_ohm: f64, termination_ohm: f64) -> Result<Transformer> {
    positive("system_ohm", system_ohm, "Ω")?;
    positive("termination_ohm", termination_ohm, "Ω")?;
    let turns_ratio = (termination_ohm / system_ohm).sqrt();
    positive("turns_ratio", turns_ratio, "")?;
    Ok(Transformer { turns_ratio })
}

impl Transformer {
    /// Impedance seen at the system side when the termination side is loaded by
    /// `z_termination`: z_termination / n².
    ///
    /// # Errors
    /// When `z_termination` is not finite or has a negative real part.
    pub fn impedance_at_system_port(&self, z_termination: Complex64) -> Result<Complex64> {
        passive("z_termination", z_termination)?;
        Ok(z_termination / (self.turns_ratio * self.turns_ratio))
    }

    /// Impedance seen at the termination side when the system side is loaded by `z_system`:
    /// n²·z_system.
    ///
    /// # Errors
    /// When `z_system` is not finite or has a negative real part.
    pub fn impedance_at_termination_port(&self, z_system: Complex64) -> Result<Complex64> {
        passive("z_system", z_system)?;
        Ok(z_system * (self.turns_ratio * self.turns_ratio))
    }

    /// Resistance seen at the system side when the termination side is loaded by `load_ohm`.
    ///
    /// # Errors
    /// When `load_ohm` is negative or not finite.
    pub fn input_impedance(&self, load_ohm: f64) -> Result<f64> {
        Ok(self
            .impedance_at_system_port(resistance("load_ohm", load_ohm)?)?
            .re)
    }

    /// Resistance seen at the termination side when the system side is driven from
    /// `source_ohm`.
    ///
    /// # Errors
    /// When `source_ohm` is negative or not finite.
    pub fn output_impedance(&self, source_ohm: f64) -> Result<f64> {
        Ok(self
            .impedance_at_termination_port(resistance("source_ohm", source_ohm)?)?
            .re)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Resistance pairs (system, termination) covering both orientations, ratios from 1.02 to
    /// 100, and the ladder range of a few hundred ohms to kilohms.
    const CASES: [(f64, f64); 10] = [
        (50.0, 51.0),
        (50.0, 200.0),
        (50.0, 450.0),
        (50.0, 1000.0),
        (50.0, 5000.0),
        (75.0, 2200.0),
        (50.0, 12.5),
        (1000.0, 50.0),
        (200.0, 50.0),
        (5000.0, 50.0),
    ];
    const FREQUENCIES_HZ: [f64; 3] = [4e6, 9e6, 20e6];
    const FORMS: [LForm; 2] = [LForm::LowPass, LForm::HighPass];

    /// |z − r| / r for a target resistance r.
    fn mismatch(z: Complex64, r: f64) -> f64 {
        (z - Complex64::new(r, 0.0)).norm() / r
    }

    #[test]
    fn match_is_exact_at_the_centre_in_both_directions() {
        // The L-network match is exact in real arithmetic; 1e-9 leaves room only for f64
        // rounding through a Q of up to 10 (a few ulps times Q²).
        for (rs, rt) in CASES {
            for f in FREQUENCIES_HZ {
                for form in FORMS {
                    let net = design_l_network(rs, rt, f, form).unwrap();
                    let zin = net.input_impedance(rt, f).unwrap();
                    assert!(mismatch(zin, rs) < 1e-9, "{rs}->{rt} {form:?} {f}: {zin}");
                    let zout = net.output_impedance(rs, f).unwrap();
                    assert!(mismatch(zout, rt) < 1e-9, "{rs}<-{rt} {form:?} {f}: {zout}");
                }
            }
        }
    }

    #[test]
    fn orientation_follows_the_higher_resistance() {
        for (rs, rt) in CASES {
            for form in FORMS {
                let net = design_l_network(rs, rt, 9e6, form).unwrap();
                let expected = if rs > rt {
                    LNetworkKind::ShuntFirst
                } else {
                    LNetworkKind::SeriesFirst
                };
                assert_eq!(net.kind, expected);
                let (hi, lo) = (rs.max(rt), rs.min(rt));
                assert_relative_eq!(net.q, (hi / lo - 1.0).sqrt(), max_relative = 1e-15);
                // |Xs| = Q·R_low and |Xp| = R_high/Q, the formulas of [1, ch. 4].
                // Tolerance: one division and one multiplication by 2πf each (a few ulps).
                assert_relative_eq!(
                    net.series.reactance_ohm(9e6).abs(),
                    net.q * lo,
                    max_relative = 1e-14
                );
                assert_relative_eq!(
                    net.shunt.reactance_ohm(9e6).abs(),
                    hi / net.q,
                    max_relative = 1e-14
                );
            }
        }
    }

    #[test]
    fn bowick_worked_example() {
        // Source: C. Bowick, RF Circuit Design, 1982, ch. 4, example 4-1 (from memory): match a
        // 100 Ω source to a 1000 Ω load at 100 MHz with a DC path: Q = 3, Xs = 300 Ω,
        // Xp = 333 Ω, series L = 477 nH, shunt C = 4.8 pF.
        let net = design_l_network(100.0, 1000.0, 100e6, LForm::LowPass).unwrap();
        assert_eq!(net.kind, LNetworkKind::SeriesFirst);
        assert_relative_eq!(net.q, 3.0, max_relative = 1e-15);
        let ReactiveElement::Inductor { inductance_h } = net.series else {
            panic!("series element of the low-pass form must be an inductor");
        };
        let ReactiveElement::Capacitor { capacitance_f } = net.shunt else {
            panic!("shunt element of the low-pass form must be a capacitor");
        };
        // Tolerances: the book prints 3 digits for L (±0.5 nH of 477, 1.05e-3) and 2 for C
        // (±0.05 pF of 4.8, 1.05e-2).
        assert_relative_eq!(inductance_h, 477e-9, max_relative = 1.05e-3);
        assert_relative_eq!(capacitance_f, 4.8e-12, max_relative = 1.05e-2);
    }

    #[test]
    fn element_types_follow_the_form() {
        for (rs, rt) in CASES {
            let lp = design_l_network(rs, rt, 9e6, LForm::LowPass).unwrap();
            assert!(matches!(lp.series, ReactiveElement::Inductor { .. }));
            assert!(matches!(lp.shunt, ReactiveElement::Capacitor { .. }));
            let hp = design_l_network(rs, rt, 9e6, LForm::HighPass).unwrap();
            assert!(matches!(hp.series, ReactiveElement::Capacitor { .. }));
            assert!(matches!(hp.shunt, ReactiveElement::Inductor { .. }));
            // Same |X| at the centre in both forms.
            assert_relative_eq!(
                lp.series.reactance_ohm(9e6),
                -hp.series.reactance_ohm(9e6),
                max_relative = 1e-14
            );
        }
    }

    #[test]
    fn low_pass_passes_dc_and_high_pass_blocks_it() {
        // Far below the centre (f/1e6) the low-pass form's series L is nearly a short and the
        // shunt C nearly open, so the termination shows through; the high-pass form's series C
        // is nearly open (SeriesFirst) or its shunt L nearly a short (ShuntFirst).
        let f_low = 9.0;
        let lp = design_l_network(50.0, 450.0, 9e6, LForm::LowPass).unwrap();
        assert!(mismatch(lp.input_impedance(450.0, f_low).unwrap(), 450.0) < 1e-5);
        let hp = design_l_network(50.0, 450.0, 9e6, LForm::HighPass).unwrap();
        assert!(hp.input_impedance(450.0, f_low).unwrap().norm() > 1e6);
        let hp = design_l_network(450.0, 50.0, 9e6, LForm::HighPass).unwrap();
        assert!(hp.input_impedance(50.0, f_low).unwrap().norm() < 1e-3);
    }

    /// Slow, direct control: series and parallel combinations in the circuit's own order.
    fn direct_system_side(net: &LNetwork, zl: Complex64, f: f64) -> Complex64 {
        let zs = net.series.impedance(f);
        let zp = net.shunt.impedance(f);
        let par = |a: Complex64, b: Complex64| a * b / (a + b);
        match net.kind {
            LNetworkKind::ShuntFirst => par(zp, zs + zl),
            LNetworkKind::SeriesFirst => zs + par(zp, zl),
        }
    }

    fn direct_termination_side(net: &LNetwork, zsys: Complex64, f: f64) -> Complex64 {
        let zs = net.series.impedance(f);
        let zp = net.shunt.impedance(f);
        let par = |a: Complex64, b: Complex64| a * b / (a + b);
        match net.kind {
            LNetworkKind::ShuntFirst => zs + par(zp, zsys),
            LNetworkKind::SeriesFirst => par(zp, zs + zsys),
        }
    }

    #[test]
    fn abcd_cascade_agrees_with_direct_combination_off_centre() {
        // Tolerance: two different orders of a handful of complex operations, ~1e-15 each,
        // amplified by at most Q² ≈ 100 near resonance.
        let loads = [
            Complex64::new(450.0, 0.0),
            Complex64::new(30.0, -80.0),
            Complex64::new(1e3, 250.0),
        ];
        for (rs, rt) in CASES {
            for form in FORMS {
                let net = design_l_network(rs, rt, 9e6, form).unwrap();
                for f in [3e6, 8.9e6, 9e6, 9.1e6, 27e6] {
                    for zl in loads {
                        let fast = net.impedance_at_system_port(zl, f).unwrap();
                        let slow = direct_system_side(&net, zl, f);
                        assert!((fast - slow).norm() <= 1e-12 * slow.norm(), "{fast} {slow}");
                        let fast = net.impedance_at_termination_port(zl, f).unwrap();
                        let slow = direct_termination_side(&net, zl, f);
                        assert!((fast - slow).norm() <= 1e-12 * slow.norm(), "{fast} {slow}");
                    }
                }
            }
        }
    }

    #[test]
    fn network_is_reciprocal_and_lossless() {
        // A lossless reciprocal two-port of reactances has det(ABCD) = 1, A and D real, B and C
        // imaginary. Tolerance: rounding of products of values up to ~Q².
        for (rs, rt) in CASES {
            for form in FORMS {
                let net = design_l_network(rs, rt, 9e6, form).unwrap();
                let [[a, b], [c, d]] = net.abcd(8e6).unwrap();
                assert!((a * d - b * c - 1.0).norm() < 1e-12);
                assert!(a.im.abs() < 1e-12 && d.im.abs() < 1e-12);
                assert!(b.re.abs() < 1e-12 * b.norm() && c.re.abs() < 1e-12 * c.norm());
            }
        }
    }

    #[test]
    fn elements_are_listed_in_signal_order() {
        let up = design_l_network(50.0, 450.0, 9e6, LForm::LowPass).unwrap();
        let e = up.elements();
        assert_eq!(e.len(), 2);
        assert_eq!(e[0].position, ElementPosition::Series);
        assert_eq!(e[0].element, up.series);
        assert_eq!(e[1].position, ElementPosition::Shunt);
        assert_eq!(e[1].element, up.shunt);
        let down = design_l_network(450.0, 50.0, 9e6, LForm::HighPass).unwrap();
        let e = down.elements();
        assert_eq!(e[0].position, ElementPosition::Shunt);
        assert_eq!(e[0].element, down.shunt);
        assert_eq!(e[1].position, ElementPosition::Series);
        assert_eq!(e[1].element, down.series);
    }

    #[test]
    fn bad_inputs_are_errors() {
        let bad = [0.0, -50.0, f64::NAN, f64::INFINITY];
        for v in bad {
            let err = design_l_network(v, 450.0, 9e6, LForm::LowPass).unwrap_err();
            assert_eq!(err.kind(), ErrorKind::InvalidValue);
            assert!(err.message().starts_with("system_ohm:"), "{err}");
            let err = design_l_network(50.0, v, 9e6, LForm::LowPass).unwrap_err();
            assert!(err.message().starts_with("termination_ohm:"), "{err}");
            let err = design_l_network(50.0, 450.0, v, LForm::HighPass).unwrap_err();
            assert!(err.message().starts_with("f_hz:"), "{err}");
            assert!(design_transformer(v, 450.0).is_err());
            assert!(design_transformer(50.0, v).is_err());
        }
        let net = design_l_network(50.0, 450.0, 9e6, LForm::LowPass).unwrap();
        for f in [0.0, -9e6, f64::NAN] {
            let err = net.input_impedance(450.0, f).unwrap_err();
            assert!(err.message().starts_with("f_hz:"), "{err}");
        }
        for r in [-1.0, f64::NAN, f64::INFINITY] {
            assert!(net.input_impedance(r, 9e6).is_err());
            assert!(net.output_impedance(r, 9e6).is_err());
        }
        let z = Complex64::new(-1.0, 3.0);
        assert!(net.impedance_at_system_port(z, 9e6).is_err());
        let t = design_transformer(50.0, 450.0).unwrap();
        assert!(t.input_impedance(-1.0).is_err());
        assert!(t.impedance_at_termination_port(z).is_err());
    }

    #[test]
    fn equal_resistances_need_no_network() {
        let err = design_l_network(50.0, 50.0, 9e6, LForm::LowPass).unwrap_err();
        assert_eq!(err.kind(), ErrorKind::InvalidValue);
        assert!(err.message().starts_with("termination_ohm:"), "{err}");
        assert!(err.hint().is_some_and(|h| h.contains("connect")));
        // A transformer of 1:1 is still a valid part.
        let t = design_transformer(50.0, 50.0).unwrap();
        assert_eq!(t.turns_ratio, 1.0);
    }

    #[test]
    fn reactive_termination_at_resonance_is_a_numerical_error_not_a_panic() {
        // The shunt element of a SeriesFirst network against a load of the opposite reactance
        // is a parallel resonance: infinite impedance.
        let net = design_l_network(50.0, 450.0, 9e6, LForm::LowPass).unwrap();
        let zl = -net.shunt.impedance(9e6);
        let err = net.impedance_at_system_port(zl, 9e6).unwrap_err();
        assert_eq!(err.kind(), ErrorKind::Numerical);
        assert!(err.message().contains("not finite"), "{err}");
    }

    #[test]
    fn transformer_transforms_by_the_square_of_the_turns_ratio() {
        for (rs, rt) in CASES {
            let t = design_transformer(rs, rt).unwrap();
            assert_relative_eq!(t.turns_ratio * t.turns_ratio, rt / rs, max_relative = 1e-15);
            // Tolerance: a square root, a square and a division (a few ulps).
            assert_relative_eq!(t.input_impedance(rt).unwrap(), rs, max_relative = 1e-14);
            assert_relative_eq!(t.output_impedance(rs).unwrap(), rt, max_relative = 1e-14);
        }
        // Hand-worked: 50 Ω to 800 Ω is 1:4 turns.
        assert_relative_eq!(
            design_transformer(50.0, 800.0).unwrap().turns_ratio,
            4.0,
            max_relative = 1e-15
        );
    }
}

/// The design's ladder between two `system_ohm` ends, with an L-network of `form` at each end
/// matching the system impedance to that end's termination at the design centre. An end whose
/// termination already equals the system impedance is connected directly.
///
/// # Errors
/// A bad system impedance or design record.
pub fn ladder_with_matching(
    design: &crate::design::Design,
    system_ohm: f64,
    form: LForm,
) -> Result<crate::network::Ladder> {
    use crate::network::{Branch, Element, Ladder, Loss, Stage};
    positive("system_ohm", system_ohm, "Ω")?;
    let inner = design.to_ladder()?;
    let to_stage = |m: &MatchElement| {
        let e = match m.element {
            ReactiveElement::Inductor { inductance_h } => {
                Element::Inductor(inductance_h, Loss::Lossless)
            }
            ReactiveElement::Capacitor { capacitance_f } => {
                Element::Capacitor(capacitance_f, Loss::Lossless)
            }
        };
        match m.position {
            ElementPosition::Series => Stage::Series(Branch::Element(e)),
            ElementPosition::Shunt => Stage::Shunt(Branch::Element(e)),
        }
    };
    let network = |termination: f64| -> Result<Vec<MatchElement>> {
        if (termination / system_ohm - 1.0).abs() < 1e-12 {
            Ok(Vec::new())
        } else {
            Ok(design_l_network(system_ohm, termination, design.center_hz, form)?.elements())
        }
    };
    let mut stages: Vec<Stage> = network(design.source_ohm)?.iter().map(to_stage).collect();
    stages.extend(inner.stages().iter().cloned());
    // The load side's network is listed from its system port: reverse it for signal order.
    stages.extend(network(design.load_ohm)?.iter().rev().map(to_stage));
    Ladder::new(system_ohm, system_ohm, stages)
}

#[cfg(test)]
mod ladder_tests {
    use super::*;
    use crate::crystal::Crystal;
    use crate::design::{BandwidthAt, ResponseFamily};
    use crate::network::{db, Analyze};
    use crate::synthesis::LadderSpec;

    #[test]
    fn matched_ladder_keeps_the_passband_at_50_ohm() {
        // Lossless L-networks at the centre present each termination exactly, so at the
        // centre the matched filter transmits like the bare one between its own terminations.
        let x = Crystal::from_fs_lm("Y", 9e6, 15e-3, 10.0, 4e-12).unwrap();
        let d = LadderSpec::identical(ResponseFamily::Butterworth, 4, 2400.0, BandwidthAt::Db3, &x)
            .synthesize()
            .unwrap();
        for form in [LForm::LowPass, LForm::HighPass] {
            let m = ladder_with_matching(&d, 50.0, form).unwrap();
            let bare = d.to_ladder().unwrap();
            let f = d.center_hz;
            let (a, b) = (db(m.response(f).s21), db(bare.response(f).s21));
            assert!((a - b).abs() < 1e-9, "{form:?}: {a} vs {b} dB");
            assert_eq!(m.source_ohm(), 50.0);
        }
    }
}
