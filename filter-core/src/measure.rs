//! Crystal parameters from measurements: swept transmission in a series fixture, the
//! oscillator frequency-shift method, and the −3 dB formulas for readings taken off a screen.
//!
//! # The series through-fixture
//! The crystal sits in series between a source of resistance R0 and a load R0, optionally with a
//! known extra series resistance Rx of the fixture (pads, transformer loss). With the crystal's
//! impedance Z (Butterworth–Van Dyke model \[1\]: Rm + jωLm + 1/(jωCm) shunted by C0), and
//! Rt = 2·R0 + Rx the total resistance around the loop,
//!
//! ```text
//! S21 = 2·R0 / (Rt + Z)            |S21| in dB = 20·log10|S21|
//! ```
//!
//! so 0 dB is a short in place of the crystal. Near series resonance Z ≈ Rm + j·2·Lm·Δω, giving
//! the closed forms used for starting values and by hand ([`by_hand`]):
//!
//! - peak loss IL (positive dB) → `Rm = 2·R0·(10^(IL/20) − 1) − Rx`;
//! - −3 dB bandwidth BW3 → `Lm = (Rm + Rt) / (2π·BW3)`, and `Cm = 1/((2π·fs)²·Lm)`;
//! - the notch (parallel resonance fp ≈ the transmission minimum) →
//!   `C0 = Cm / ((f_notch/f_peak)² − 1)`.
//!
//! ## The transmission peak is not fs
//! Writing c = ω0·C0 and expanding |Rt + Z|² to first order in c, the transmission maximum sits
//! where the motional reactance is X = −c·Rm·(Rm + 2·Rt), i.e. BELOW fs by
//!
//! ```text
//! fs − f_peak ≈ ω0·C0·Rm·(Rm + 2·Rt) / (4π·Lm)     (= ω0·C0·Rm·(Rm + 4·R0)/(4π·Lm) for Rx = 0)
//! ```
//!
//! (about 2.5 Hz for a 9 MHz crystal with Lm = 15 mH, Rm = 10 Ω, C0 = 4 pF in 50 Ω; over 20 Hz
//! at 20 MHz). Matching sets crystals to within a few hertz, so the fit reports fs from the
//! model, never the peak; [`peak_shift_hz`] gives the first-order figure.
//!
//! ## Error of the −3 dB method caused by C0
//! With ε = ω0·C0·(Rt + Rm) and ρ = Rt/(Rt + Rm), carrying the same expansion to second order
//! (our derivation) gives the apparent peak loss and width of the exact model as
//!
//! ```text
//! |Rt + Z|²min = (Rt + Rm)²·(1 − 2·ε²·(1 − ρ)²·(1 + ρ))      BW3 = BW3,true·(1 + (2 − ρ³)·ε²)
//! ```
//!
//! so the −3 dB formulas return `Lm·(1 − (3 − ρ − ρ²)·ε²)`: an error that grows as
//! (ω0·C0·(2·R0 + Rm))². A low-impedance fixture (R0 = 12.5 Ω, common practice among builders)
//! reduces it; [`ByHandEstimate::lm_bias_rel`] states it when C0 is known.
//!
//! ## The least-squares fit ([`fit_sweep`])
//! Starting from the closed forms, a Levenberg–Marquardt refinement \[2\]\[3\] adjusts fs, Lm, Rm,
//! C0 (Cm follows from fs and Lm) and two fixture nuisance terms on the whole trace. The
//! parameters are scaled to be well conditioned: θ = ((fs − fs,0)/BW3,0, ln Lm, ln Rm, ln C0,
//! slope, phase offset).
//!
//! - With phase, the residuals are the real and imaginary parts of the complex S21 error,
//!   each divided by the noise σ of that point (additive instrument noise is circular there).
//! - Without phase, the residuals are in dB, against the level a noisy reading averages to:
//!   E[10·log10|S + n|²] = 10·log10(|S21|²) + (10/ln 10)·E1(|S21|²/Pn) for complex Gaussian
//!   noise of power Pn (E1 the exponential integral \[5\]). Far above the floor this is the
//!   model level; at the floor it is the floor less 2.5 dB (γ·10/ln 10), which is where a dB
//!   trace of pure noise sits. Each residual is divided by the dB scatter expected at its level.
//! - The noise of each point is modelled as σ² = σa² + σr²·|S21|² (an absolute floor and a
//!   relative jitter), estimated from second differences of the trace and re-estimated from the
//!   residuals; σa is never taken below 60 dB under the peak, so points in a deep notch or under
//!   the floor carry little weight.
//! - Fixture nuisance terms: a linear level slope across the sweep, zero at the transmission
//!   peak (the level at the peak is what sets Rm and is taken as calibrated), fitted when the
//!   trace shows one ([`FixtureSlope`]); and with phase a constant phase offset (reference-plane
//!   error). A calibration error δ dB at the peak moves Rm by about −δ·(Rt + Rm)/8.686 Ω; no
//!   fit can separate the two.
//! - The 1σ uncertainties come from the Jacobian at the solution: covariance s²·(JᵀJ)⁻¹ with
//!   s² = χ²/(n − p) \[3\], in the sandwich form (JᵀJ)⁻¹(Σκ·JᵀJ)(JᵀJ)⁻¹ so that the points
//!   deliberately down-weighted by the 60 dB rule (κ = their true over their used variance)
//!   are counted at their true weight. Over 40 noise draws per case the scatter of the
//!   estimates matches the reported σ to within 0.75–1.4.
//! - Secondary resonances (spurious modes) show as bumps of the trace, or as excess over the
//!   fitted response. Each is started as an extra motional branch in parallel with the main
//!   one (R from the level it adds, L from its width) and fitted with the rest (up to three;
//!   further ones, or any whose fit wanders off, are masked out of the fit). They come back in
//!   [`FitReport::spurious`] and as branches of the fitted crystal: a mode left out of the
//!   model would still pull C0, since below its own resonance it adds to the capacitance
//!   across the crystal.
//!
//! ## What a 2001-point sweep at 40 dB SNR gives
//! One-sigma scatter over 40 noise draws (our scenario crystals, 50 Ω fixture, sweep fs −
//! max(0.25·(fp − fs), 5·BW3) to fp + the same; additive complex noise of 1 % of the peak
//! |S21| plus a −80 dB floor; with the phase, then magnitude only):
//!
//! | crystal | fs | Lm, Cm | Rm | C0 |
//! |---|---|---|---|---|
//! | 3 MHz, 100 mH, 50 Ω, 2 pF | 0.11 / 0.15 ppm | 0.19 / 0.23 % | 0.6 / 0.7 % | 3.0 / 5.0 % |
//! | 4.9152 MHz, 60 mH, 25 Ω, 3.5 pF | 0.08 / 0.10 ppm | 0.11 / 0.14 % | 0.7 / 0.9 % | 1.3 / 2.0 % |
//! | 9 MHz, 15 mH, 10 Ω, 4 pF | 0.12 / 0.15 ppm | 0.08 / 0.12 % | 1.0 / 1.4 % | 0.7 / 1.1 % |
//! | 12 MHz, 12 mH, 5 Ω, 5 pF | 0.07 / 0.11 ppm | 0.08 / 0.09 % | 2.0 / 2.3 % | 0.4 / 0.7 % |
//! | 20 MHz, 5 mH, 60 Ω, 7 pF | 0.12 / 0.17 ppm | 0.08 / 0.09 % | 0.15 / 0.19 % | 0.13 / 0.15 % |
//!
//! σ(Rm) is about 0.1–0.15 Ω whatever Rm is (it grows with Rt + Rm), so a low-Rm crystal is
//! better measured in a low-impedance fixture; C0 of a 3 MHz crystal rests on a notch buried
//! 60 dB under the peak. A relative (multiplicative) 1 % noise with the same −80 dB floor
//! gives similar Rm and far better C0 (0.02–0.13 %).
//!
//! # The oscillator frequency-shift method ([`motional_from_shift`])
//! A lossless crystal in series with a capacitor C resonates where the crystal's reactance
//! cancels that of C: `f = fs·sqrt(1 + Cm/(C0 + C))` (solve jωC0 + 1/(jXm) = −jωC for Xm).
//! An oscillator runs the crystal first with its series capacitor shorted (f1), then with Cs in
//! series (f2); with the oscillator's own series load capacitance CL, f1 has C = CL and f2 has
//! C = CL·Cs/(CL + Cs). Two equations in fs and Cm, solved exactly.
//!
//! # References
//! 1. K. S. Van Dyke, "The piezo-electric resonator and its equivalent network", Proc. IRE 16,
//!    1928.
//! 2. K. Levenberg, "A method for the solution of certain non-linear problems in least squares",
//!    Quart. Appl. Math. 2, 1944; D. W. Marquardt, "An algorithm for least-squares estimation of
//!    nonlinear parameters", J. SIAM 11, 1963.
//! 3. W. H. Press, S. A. Teukolsky, W. T. Vetterling, B. P. Flannery, *Numerical Recipes*, 3rd
//!    ed., 2007, §15.4–15.6 (normal equations, Levenberg–Marquardt, confidence limits from the
//!    covariance matrix).
//! 4. A. I. Zverev, *Handbook of Filter Synthesis*, 1967, the chapter on crystal filters (the
//!    crystal's equivalent circuit in filters; chapter from memory).
//! 5. M. Abramowitz, I. A. Stegun, *Handbook of Mathematical Functions*, 1964, ch. 5 (the
//!    exponential integral E1; its series and continued fraction).

mod by_hand;
mod fit;
mod shift;
#[cfg(test)]
mod synthetic;

pub use by_hand::{by_hand, ByHandEstimate};
pub use fit::{
    fit_sweep, fit_sweep_with, FitOptions, FitReport, FitSigma, FixtureSlope, SpuriousResponse,
    SweepPlan,
};
pub use shift::{motional_from_shift, ShiftResult};

use crate::crystal::Crystal;
use crate::error::{require_non_negative, require_positive, Result};
use num_complex::Complex64;
use std::f64::consts::PI;

/// The series through-fixture a crystal is swept in: source R0 — crystal (+ Rx) — load R0.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FixtureSpec {
    /// Source and load resistance R0, Ω (the reference resistance of the S21 trace).
    pub r0_ohm: f64,
    /// Known extra resistance Rx of the fixture in series with the crystal, Ω.
    pub extra_series_ohm: f64,
}

impl Default for FixtureSpec {
    /// A 50 Ω fixture with no extra series resistance.
    fn default() -> Self {
        FixtureSpec {
            r0_ohm: 50.0,
            extra_series_ohm: 0.0,
        }
    }
}

impl FixtureSpec {
    /// Check the values: R0 finite and positive, Rx finite and not negative.
    ///
    /// # Errors
    /// Names the field and the value when one is out of range.
    pub fn validate(&self) -> Result<()> {
        require_positive("fixture r0_ohm", self.r0_ohm)?;
        require_non_negative("fixture extra_series_ohm", self.extra_series_ohm)?;
        Ok(())
    }

    /// Total loop resistance Rt = 2·R0 + Rx, Ω.
    pub fn loop_resistance_ohm(&self) -> f64 {
        2.0 * self.r0_ohm + self.extra_series_ohm
    }
}

/// S21 of `crystal` (spurious modes included) in the series fixture at `f_hz`:
/// `2·R0 / (2·R0 + Rx + Z)`.
pub fn fixture_s21(crystal: &Crystal, fixture: &FixtureSpec, f_hz: f64) -> Complex64 {
    let z = crystal.impedance(f_hz);
    Complex64::new(2.0 * fixture.r0_ohm, 0.0) / (z + fixture.loop_resistance_ohm())
}

/// First-order distance fs − f_peak from the transmission peak up to the series resonance, Hz:
/// `ω0·C0·Rm·(Rm + 2·Rt)/(4π·Lm)` (see the module docs). Positive: the peak is below fs.
pub fn peak_shift_hz(crystal: &Crystal, fixture: &FixtureSpec) -> f64 {
    let w0 = 2.0 * PI * crystal.fs_hz();
    let rm = crystal.rm_ohm();
    let rt = fixture.loop_resistance_ohm();
    w0 * crystal.c0_f * rm * (rm + 2.0 * rt) / (4.0 * PI * crystal.lm_h())
}

/// Formatting of frequencies in messages: MHz with 1 Hz resolution, or kHz/Hz for spans.
pub(crate) fn fmt_hz(f_hz: f64) -> String {
    let a = f_hz.abs();
    if a >= 1e6 {
        format!("{:.6} MHz", f_hz / 1e6)
    } else if a >= 1e3 {
        format!("{:.3} kHz", f_hz / 1e3)
    } else {
        format!("{f_hz:.1} Hz")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Transmission peak of the exact model, by golden-section search on |S21|.
    pub(crate) fn exact_peak_hz(x: &Crystal, fx: &FixtureSpec) -> f64 {
        let bw = fx.loop_resistance_ohm() / (2.0 * PI * x.lm_h());
        let (mut a, mut b) = (x.fs_hz() - bw, x.fs_hz() + bw);
        let g = (5f64.sqrt() - 1.0) / 2.0;
        for _ in 0..200 {
            let c = b - g * (b - a);
            let d = a + g * (b - a);
            if fixture_s21(x, fx, c).norm() > fixture_s21(x, fx, d).norm() {
                b = d;
            } else {
                a = c;
            }
        }
        0.5 * (a + b)
    }

    #[test]
    fn peak_shift_formula_matches_exact_model() {
        // Two crystals from the module docs: a few hertz at 9 MHz, over 20 Hz at 20 MHz.
        let fx = FixtureSpec::default();
        for (f, lm, rm, c0, lo, hi) in [
            (9e6, 15e-3, 10.0, 4e-12, 1.0, 5.0),
            (20e6, 8e-3, 30.0, 7e-12, 20.0, 200.0),
        ] {
            let x = Crystal::from_fs_lm("x", f, lm, rm, c0).unwrap();
            let exact = x.fs_hz() - exact_peak_hz(&x, &fx);
            let first = peak_shift_hz(&x, &fx);
            assert!(exact > lo && exact < hi, "{f}: shift {exact} Hz");
            // First-order in ε = ω0·C0·(Rt + Rm) ≤ 0.13 here; relative error O(ε²) ≲ 2 %,
            // plus the golden-section resolution (≪ 1 mHz).
            assert!(
                ((first - exact) / exact).abs() < 0.03,
                "{f}: first-order {first} Hz, exact {exact} Hz"
            );
        }
    }

    #[test]
    fn fixture_validation() {
        assert!(FixtureSpec::default().validate().is_ok());
        let bad = FixtureSpec {
            r0_ohm: 0.0,
            extra_series_ohm: 0.0,
        };
        let e = bad.validate().unwrap_err();
        assert!(e.message().contains("r0_ohm"), "{}", e.message());
        let bad = FixtureSpec {
            r0_ohm: 50.0,
            extra_series_ohm: -1.0,
        };
        assert!(bad.validate().is_err());
    }
}
