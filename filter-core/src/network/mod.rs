//! Small-signal circuit analysis: elements, the ladder fast path, the general nodal solver and
//! frequency sweeps.
//!
//! Two analyses of the same circuits:
//! - [`Ladder`]: a cascade of series and shunt branches between a source resistance and a load
//!   resistance, analysed by multiplying chain (ABCD) matrices: O(n) per frequency, no
//!   allocation in the inner loop. This is what every other module uses.
//! - [`Circuit`]: any netlist of branches between numbered nodes, analysed by a dense complex
//!   nodal solve (nalgebra LU). It is the slow, obvious control the fast path is checked against.
//!
//! # S-parameters
//! Both are referred to the actual source resistance Rs and load resistance RL, which may
//! differ. With the chain matrix [A B; C D] of the two-port,
//!
//! ```text
//! Δ   = A·RL + B + C·Rs·RL + D·Rs
//! S21 = 2·sqrt(Rs·RL) / Δ
//! S11 = (A·RL + B − C·Rs·RL − D·Rs) / Δ
//! S22 = (−A·RL + B − C·Rs·RL + D·Rs) / Δ
//! ```
//!
//! so |S21|² is the fraction of the available source power reaching the load (0 dB = lossless
//! and matched) [1, ch. 2].
//!
//! # Group delay
//! τ = −dφ21/dω. Every element returns its impedance *and* the derivative dZ/dω in closed form;
//! the derivatives are carried through the cascade (forward-mode differentiation), so
//! τ = Im(dΔ/dω / Δ) exactly, with no phase unwrapping and no finite-difference step. The nodal
//! solver does the same with dV/dω = −Y⁻¹·(dY/dω)·V.
//!
//! # References
//! 1. D. M. Pozar, *Microwave Engineering*, 4th ed., 2012, §4.4 (ABCD and S-parameter
//!    conversions for unequal reference impedances follow from its Table 4.2).
//! 2. G. L. Matthaei, L. Young, E. M. T. Jones, *Microwave Filters, Impedance-Matching Networks,
//!    and Coupling Structures*, 1964, ch. 2.

mod grid;
mod ladder;
mod nodal;

pub use grid::{FrequencyGrid, Spacing};
pub use ladder::{Ladder, Stage};
pub use nodal::Circuit;

use crate::crystal::Crystal;
use crate::error::{require_non_negative, require_positive, Result};
use num_complex::Complex64;
use serde::{Deserialize, Serialize};

/// How a reactive part loses energy.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Loss {
    /// An ideal part.
    #[default]
    Lossless,
    /// A finite quality factor Q (constant over frequency): series resistance X/Q.
    Q(f64),
    /// A fixed equivalent series resistance, Ω.
    Esr(f64),
}

/// A two-terminal circuit element.
#[derive(Debug, Clone, PartialEq)]
pub enum Element {
    /// A resistor, Ω (zero is a short).
    Resistor(f64),
    /// A capacitor, F, with its loss.
    Capacitor(f64, Loss),
    /// An inductor, H, with its loss.
    Inductor(f64, Loss),
    /// A quartz crystal (BVD model with spurious modes).
    Crystal(Crystal),
}

/// A branch: an element, or branches in series or in parallel.
#[derive(Debug, Clone, PartialEq)]
pub enum Branch {
    /// A single element.
    Element(Element),
    /// Branches in series.
    Series(Vec<Branch>),
    /// Branches in parallel.
    Parallel(Vec<Branch>),
}

impl Element {
    /// A lossless capacitor, checked.
    ///
    /// # Errors
    /// When `farad` is not finite and positive.
    pub fn capacitor(farad: f64) -> Result<Self> {
        Ok(Element::Capacitor(
            require_positive("capacitance", farad)?,
            Loss::Lossless,
        ))
    }

    /// A lossless inductor, checked.
    ///
    /// # Errors
    /// When `henry` is not finite and positive.
    pub fn inductor(henry: f64) -> Result<Self> {
        Ok(Element::Inductor(
            require_positive("inductance", henry)?,
            Loss::Lossless,
        ))
    }

    /// A resistor, checked.
    ///
    /// # Errors
    /// When `ohm` is negative or not finite.
    pub fn resistor(ohm: f64) -> Result<Self> {
        Ok(Element::Resistor(require_non_negative("resistance", ohm)?))
    }

    /// Impedance and dZ/dω at angular frequency `w`.
    #[inline]
    pub(crate) fn z_dz(&self, w: f64) -> (Complex64, Complex64) {
        match self {
            Element::Resistor(r) => (Complex64::new(*r, 0.0), Complex64::new(0.0, 0.0)),
            Element::Capacitor(c, loss) => {
                let x = -1.0 / (w * c);
                let dx = 1.0 / (w * w * c);
                match loss {
                    Loss::Lossless => (Complex64::new(0.0, x), Complex64::new(0.0, dx)),
                    Loss::Q(q) => (Complex64::new(-x / q, x), Complex64::new(-dx / q, dx)),
                    Loss::Esr(r) => (Complex64::new(*r, x), Complex64::new(0.0, dx)),
                }
            }
            Element::Inductor(l, loss) => {
                let x = w * l;
                match loss {
                    Loss::Lossless => (Complex64::new(0.0, x), Complex64::new(0.0, *l)),
                    Loss::Q(q) => (Complex64::new(x / q, x), Complex64::new(l / q, *l)),
                    Loss::Esr(r) => (Complex64::new(*r, x), Complex64::new(0.0, *l)),
                }
            }
            Element::Crystal(x) => x.z_dz(w),
        }
    }
}

impl From<Element> for Branch {
    fn from(e: Element) -> Self {
        Branch::Element(e)
    }
}

impl Branch {
    /// Impedance and dZ/dω at angular frequency `w`. No allocation.
    #[inline]
    pub(crate) fn z_dz(&self, w: f64) -> (Complex64, Complex64) {
        match self {
            Branch::Element(e) => e.z_dz(w),
            Branch::Series(parts) => {
                let mut z = Complex64::new(0.0, 0.0);
                let mut dz = Complex64::new(0.0, 0.0);
                for p in parts {
                    let (a, da) = p.z_dz(w);
                    z += a;
                    dz += da;
                }
                (z, dz)
            }
            Branch::Parallel(parts) => {
                let mut y = Complex64::new(0.0, 0.0);
                let mut dy = Complex64::new(0.0, 0.0);
                for p in parts {
                    let (a, da) = p.z_dz(w);
                    if a == Complex64::new(0.0, 0.0) {
                        // A short across the combination.
                        return (a, da);
                    }
                    let ya = a.inv();
                    y += ya;
                    dy -= da * ya * ya;
                }
                let z = y.inv();
                (z, -dy * z * z)
            }
        }
    }

    /// Admittance and dY/dω at angular frequency `w`; direct for a lossless capacitor or
    /// inductor, by inversion otherwise.
    #[inline]
    pub(crate) fn y_dy(&self, w: f64) -> (Complex64, Complex64) {
        match self {
            Branch::Element(Element::Capacitor(c, Loss::Lossless)) => {
                (Complex64::new(0.0, w * c), Complex64::new(0.0, *c))
            }
            _ => {
                let (z, dz) = self.z_dz(w);
                let y = z.inv();
                (y, -dz * y * y)
            }
        }
    }

    /// Impedance at `f_hz`.
    pub fn impedance(&self, f_hz: f64) -> Complex64 {
        self.z_dz(2.0 * std::f64::consts::PI * f_hz).0
    }
}

/// The response of a two-port at one frequency.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Response {
    /// Frequency, Hz.
    pub f_hz: f64,
    /// Transmission, referred to the source and load resistances.
    pub s21: Complex64,
    /// Reflection at the source side, referred to the source resistance.
    pub s11: Complex64,
    /// Reflection at the load side, referred to the load resistance.
    pub s22: Complex64,
    /// Group delay of S21, s.
    pub group_delay_s: f64,
}

/// A swept response, structure-of-arrays, one entry per frequency.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Sweep {
    /// Frequencies, Hz.
    pub f_hz: Vec<f64>,
    /// S21 per frequency.
    pub s21: Vec<Complex64>,
    /// S11 per frequency.
    pub s11: Vec<Complex64>,
    /// S22 per frequency; empty for a sweep made with [`Outputs::NoS22`].
    pub s22: Vec<Complex64>,
    /// Group delay per frequency, s.
    pub group_delay_s: Vec<f64>,
}

/// Power ratio in dB of a complex voltage-wave ratio: 20·log10|x|.
#[inline]
pub fn db(x: Complex64) -> f64 {
    10.0 * x.norm_sqr().log10()
}

/// Phase of a complex ratio in degrees, wrapped to (−180°, 180°].
#[inline]
pub fn phase_deg(x: Complex64) -> f64 {
    x.arg().to_degrees()
}

impl Sweep {
    /// An empty sweep with room for `n` points.
    pub fn with_capacity(n: usize) -> Self {
        Sweep {
            f_hz: Vec::with_capacity(n),
            s21: Vec::with_capacity(n),
            s11: Vec::with_capacity(n),
            s22: Vec::with_capacity(n),
            group_delay_s: Vec::with_capacity(n),
        }
    }

    /// Number of points.
    pub fn len(&self) -> usize {
        self.f_hz.len()
    }

    /// True when the sweep holds no points.
    pub fn is_empty(&self) -> bool {
        self.f_hz.is_empty()
    }

    /// Append one response.
    pub fn push(&mut self, r: Response) {
        self.f_hz.push(r.f_hz);
        self.s21.push(r.s21);
        self.s11.push(r.s11);
        self.s22.push(r.s22);
        self.group_delay_s.push(r.group_delay_s);
    }

    /// The response at index `i`, if any.
    pub fn get(&self, i: usize) -> Option<Response> {
        Some(Response {
            f_hz: *self.f_hz.get(i)?,
            s21: *self.s21.get(i)?,
            s11: *self.s11.get(i)?,
            s22: *self.s22.get(i)?,
            group_delay_s: *self.group_delay_s.get(i)?,
        })
    }

    /// |S21| in dB at every point (0 dB = lossless; negative for a loss).
    pub fn s21_db(&self) -> Vec<f64> {
        self.s21.iter().map(|&x| db(x)).collect()
    }

    /// |S11| in dB at every point (return loss is its negative).
    pub fn s11_db(&self) -> Vec<f64> {
        self.s11.iter().map(|&x| db(x)).collect()
    }

    /// Phase of S21 in degrees, wrapped to (−180°, 180°].
    pub fn s21_deg(&self) -> Vec<f64> {
        self.s21.iter().map(|&x| phase_deg(x)).collect()
    }
}

/// What a sweep computes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outputs {
    /// S21, S11, S22 and the group delay.
    All,
    /// All but S22 (the sweep's `s22` stays empty): what a transmission analysis needs (the
    /// response table, the figures of merit and the plots), for less arithmetic and memory.
    NoS22,
}

/// Anything that can be analysed at a frequency.
pub trait Analyze {
    /// The response at `f_hz`.
    fn response(&self, f_hz: f64) -> Response;

    /// The response at every frequency of `grid`.
    fn sweep(&self, grid: &FrequencyGrid) -> Sweep {
        let mut out = Sweep::with_capacity(grid.points());
        for f in grid.iter() {
            out.push(self.response(f));
        }
        out
    }

    /// As [`Analyze::sweep`], into `out`, reusing its allocations where the implementation
    /// can (repeated sweeps of one size then allocate nothing after the first).
    fn sweep_into(&self, grid: &FrequencyGrid, out: &mut Sweep) {
        *out = self.sweep(grid);
    }

    /// As [`Analyze::sweep_into`], computing only `outputs` (with [`Outputs::NoS22`],
    /// `out.s22` is left empty; implementations may skip its arithmetic).
    fn sweep_outputs_into(&self, grid: &FrequencyGrid, outputs: Outputs, out: &mut Sweep) {
        self.sweep_into(grid, out);
        if outputs == Outputs::NoS22 {
            out.s22.clear();
        }
    }

    /// The response at each of the given frequencies.
    fn sweep_at(&self, f_hz: &[f64]) -> Sweep {
        let mut out = Sweep::with_capacity(f_hz.len());
        for &f in f_hz {
            out.push(self.response(f));
        }
        out
    }
}

#[cfg(test)]
mod tests;
