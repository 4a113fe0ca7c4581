//! The demo's invented measurements: a lot of 36 surplus crystals marked 9.8304 MHz, each swept
//! in a 50 Ω series through-fixture.
//!
//! Everything here is made up, with spreads chosen to look like a real bag of cheap
//! microprocessor crystals (common practice, not measured data):
//!
//! - marked 9.8304 MHz for a 20 pF parallel load, so the series resonance fs sits about 3.6 kHz
//!   lower; fs spreads by a normal deviation of 60 Hz, truncated at ±150 Hz;
//! - motional inductance Lm about 17.0 mH (normal, 0.5 mH deviation, truncated to 12–20 mH),
//!   so Cm ≈ 15.4 fF and Qu ≈ 100 000 at 10.5 Ω;
//! - motional resistance Rm log-normal about 10.5 Ω (25 % deviation), truncated to 8–25 Ω;
//! - holder capacitance C0 about 3.9 pF (normal, 0.15 pF deviation), truncated to 3–5 pF;
//! - two duds with Rm of 3.6 and 5.2 times the nominal 10.5 Ω, over 3 times the lot's median
//!   (`x09`, `x28`), and one crystal with a strong spurious mode 31.4 kHz above fs, about
//!   7 dB below the main peak (`x23`).
//!
//! Sweeps: the builder took every crystal with the same settings, 9.8168 MHz to 9.8668 MHz
//! (10 kHz below to 40 kHz above the lot's fs, so the peak, the −3 dB points, the C0 notch and
//! the spurious mode are all on screen), 801 points. Crystals `x01`–`x30` were swept with a
//! spectrum analyzer and tracking generator (magnitude only, CSV, levels to 0.01 dB);
//! `x31`–`x36` with a vector network analyzer (Touchstone `.s2p`; `x31`–`x34` RI in Hz,
//! `x35`–`x36` DB/angle in MHz). The disturbances: complex noise of 0.2 % of the peak
//! level, an instrument floor at −85 dB, 0.3 % level jitter, and a residual fixture slope of up
//! to ±0.15 dB across the span (zero at the lot's fs, where the fixture was normalized); the
//! VNA traces also carry a small reference-plane phase error.
//!
//! The generator is deterministic (ChaCha8 from a fixed state), so the files under
//! `examples/` are exactly what [`generate`] returns; a test of the binary checks that.

use filter_core::network::{Analyze, Branch, Element, FrequencyGrid, Ladder, Stage};
use filter_core::Crystal;
use num_complex::Complex64;
use rand::prelude::*;
use rand::rngs::mock::StepRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use std::fmt::Write;

/// Frequency marked on every crystal of the lot, Hz.
pub const MARKED_HZ: f64 = 9.8304e6;
/// Centre of the lot's series resonances, Hz.
pub const LOT_FS_HZ: f64 = 9.8268e6;
/// Number of crystals in the lot.
pub const LOT_SIZE: usize = 36;
/// Fixture resistance R0 at both ends, Ω.
pub const FIXTURE_OHMS: f64 = 50.0;
/// First frequency of every sweep, Hz.
pub const SWEEP_START_HZ: f64 = LOT_FS_HZ - 10e3;
/// Last frequency of every sweep, Hz.
pub const SWEEP_STOP_HZ: f64 = LOT_FS_HZ + 40e3;
/// Points of every sweep.
pub const SWEEP_POINTS: usize = 801;
/// The two crystals with a high motional resistance.
pub const DUDS: [&str; 2] = ["x09", "x28"];
/// The crystal with a strong spurious mode.
pub const SPURIOUS: &str = "x23";
/// Median motional resistance of the lot, Ω.
pub const RM_MEDIAN_OHM: f64 = 10.5;
/// Distance of its spurious mode above fs, Hz.
pub const SPURIOUS_OFFSET_HZ: f64 = 31.4e3;

/// One generated file: its name under `examples/` and its text.
pub struct DemoFile {
    /// Path relative to `examples/`, e.g. `sweeps/x01.csv`.
    pub name: String,
    /// The content.
    pub text: String,
}

/// The generator's random stream: ChaCha8 keyed from a fixed counter sequence, so every run
/// (and every platform) draws the same numbers.
fn stream() -> ChaCha8Rng {
    ChaCha8Rng::from_rng(StepRng::new(0x5843_5441_4C5F_4C41, 0x9E37_79B9_7F4A_7C15))
        .unwrap_or_else(|e| unreachable!("a counter cannot fail: {e}"))
}

fn normal(mean: f64, sd: f64) -> Normal<f64> {
    // Finite constants: cannot fail.
    Normal::new(mean, sd).unwrap_or_else(|_| unreachable!())
}

/// A draw of `d` inside [lo, hi] (a truncated distribution: draws outside are repeated, so
/// no values pile up at the limits).
fn within(d: &Normal<f64>, rng: &mut ChaCha8Rng, lo: f64, hi: f64) -> f64 {
    loop {
        let v = d.sample(rng);
        if (lo..=hi).contains(&v) {
            return v;
        }
    }
}

/// The lot: the true parameters of all 36 crystals.
pub fn lot() -> Vec<Crystal> {
    let mut rng = stream();
    let fs_d = normal(0.0, 60.0);
    let lm_d = normal(17.0e-3, 0.5e-3);
    let rm_d = normal(RM_MEDIAN_OHM.ln(), 0.25);
    let c0_d = normal(3.9e-12, 0.15e-12);
    let mut out = Vec::with_capacity(LOT_SIZE);
    for i in 1..=LOT_SIZE {
        let id = format!("x{i:02}");
        let fs = LOT_FS_HZ + within(&fs_d, &mut rng, -150.0, 150.0);
        let lm = within(&lm_d, &mut rng, 12e-3, 20e-3);
        let mut rm = within(&rm_d, &mut rng, 8f64.ln(), 25f64.ln()).exp();
        let c0 = within(&c0_d, &mut rng, 3e-12, 5e-12);
        if id == DUDS[0] {
            rm = 3.6 * RM_MEDIAN_OHM;
        } else if id == DUDS[1] {
            rm = 5.2 * RM_MEDIAN_OHM;
        }
        let mut x = Crystal::from_fs_lm(&id, fs, lm, rm, c0)
            .unwrap_or_else(|e| unreachable!("generated crystal {id}: {e}"));
        if id == SPURIOUS {
            x = x
                .with_spurious(fs + SPURIOUS_OFFSET_HZ, 2.8 * lm, 150.0)
                .unwrap_or_else(|e| unreachable!("spurious mode: {e}"));
        }
        out.push(x);
    }
    out
}

/// The crystal in the series fixture as a two-port.
fn fixture(x: &Crystal) -> Ladder {
    let stage = Stage::Series(Branch::Element(Element::Crystal(x.clone())));
    Ladder::new(FIXTURE_OHMS, FIXTURE_OHMS, vec![stage])
        .unwrap_or_else(|e| unreachable!("fixture: {e}"))
}

/// A complex normal deviate with rms magnitude `rms`.
fn cnoise(rng: &mut ChaCha8Rng, rms: f64) -> Complex64 {
    let d = normal(0.0, rms / std::f64::consts::SQRT_2);
    Complex64::new(d.sample(rng), d.sample(rng))
}

/// How a measurement is disturbed.
struct Instrument {
    additive_of_peak: f64,
    floor: f64,
    jitter: f64,
    slope_db: f64,
    phase_offset_deg: f64,
}

/// The measured S-parameters [S11, S21, S12, S22] of crystal `x` at each sweep point.
fn measure(x: &Crystal, rng: &mut ChaCha8Rng, with_phase: bool) -> (Vec<f64>, Vec<[Complex64; 4]>) {
    let grid = FrequencyGrid::linear(SWEEP_START_HZ, SWEEP_STOP_HZ, SWEEP_POINTS)
        .unwrap_or_else(|e| unreachable!("grid: {e}"));
    let sweep = fixture(x).sweep(&grid);
    let peak = sweep.s21.iter().map(|s| s.norm()).fold(0.0, f64::max);
    let inst = Instrument {
        additive_of_peak: 2e-3,
        floor: 10f64.powf(-85.0 / 20.0),
        jitter: 3e-3,
        slope_db: rng.gen_range(-0.15..0.15),
        phase_offset_deg: if with_phase {
            rng.gen_range(-2.0..2.0)
        } else {
            0.0
        },
    };
    let span = SWEEP_STOP_HZ - SWEEP_START_HZ;
    let mut s = Vec::with_capacity(sweep.len());
    for i in 0..sweep.len() {
        // The builder normalized the fixture (a short in place of the crystal) near the
        // lot's fs: the residual slope is zero there.
        let t = (sweep.f_hz[i] - LOT_FS_HZ) / span;
        let gain = Complex64::from_polar(
            10f64.powf(inst.slope_db * t / 20.0),
            inst.phase_offset_deg.to_radians(),
        );
        let disturb = |z: Complex64, rng: &mut ChaCha8Rng| {
            let jitter = Complex64::new(1.0, 0.0) + cnoise(rng, inst.jitter);
            z * gain * jitter + cnoise(rng, inst.additive_of_peak * peak) + cnoise(rng, inst.floor)
        };
        let s21 = disturb(sweep.s21[i], rng);
        let (s11, s22) = if with_phase {
            (disturb(sweep.s11[i], rng), disturb(sweep.s22[i], rng))
        } else {
            (sweep.s11[i], sweep.s22[i])
        };
        // Transmission is reciprocal; the instrument measures S12 separately.
        let s12 = if with_phase {
            disturb(sweep.s21[i], rng)
        } else {
            s21
        };
        s.push([s11, s21, s12, s22]);
    }
    (sweep.f_hz, s)
}

fn db(z: Complex64) -> f64 {
    20.0 * z.norm().log10()
}

fn header(x: &Crystal, how: &str) -> String {
    format!(
        "crystal {} of a lot of {LOT_SIZE} marked {:.4} MHz (surplus, HC-49/U)\n\
         series through-fixture, {FIXTURE_OHMS:.0} ohm source and load, {how}\n\
         invented data for the xtal-ladder demo",
        x.id,
        MARKED_HZ / 1e6
    )
}

fn csv_file(x: &Crystal, f: &[f64], s: &[[Complex64; 4]]) -> String {
    let mut t = String::new();
    for line in header(x, "spectrum analyzer with tracking generator").lines() {
        let _ = writeln!(t, "# {line}");
    }
    t.push_str("frequency_hz,s21_db\n");
    for (f, s) in f.iter().zip(s) {
        let _ = writeln!(t, "{f:.1},{:.2}", db(s[1]));
    }
    t
}

fn s2p_file(x: &Crystal, f: &[f64], s: &[[Complex64; 4]], decibels: bool) -> String {
    let mut t = String::new();
    for line in header(x, "vector network analyzer").lines() {
        let _ = writeln!(t, "! {line}");
    }
    if decibels {
        t.push_str("# MHz S DB R 50\n");
        for (f, s) in f.iter().zip(s) {
            let _ = write!(t, "{:.7}", f / 1e6);
            for z in s {
                let _ = write!(t, " {:.3} {:.2}", db(*z), z.arg().to_degrees());
            }
            t.push('\n');
        }
    } else {
        t.push_str("# HZ S RI R 50\n");
        for (f, s) in f.iter().zip(s) {
            let _ = write!(t, "{f:.1}");
            for z in s {
                let _ = write!(t, " {:.6e} {:.6e}", z.re, z.im);
            }
            t.push('\n');
        }
    }
    t
}

/// The true parameters of the lot, for tests of the fit (not a batch file: it lists the
/// spurious modes too).
fn truth_file(lot: &[Crystal]) -> String {
    let mut t = String::from(
        "# the invented parameters the demo sweeps were made from (examples/sweeps)\n\
         id,fs_hz,rm_ohm,lm_h,cm_f,c0_f,spurious_hz,spurious_rm_ohm,spurious_lm_h\n",
    );
    for x in lot {
        let (sf, sr, sl) = match x.spurious.first() {
            Some(b) => (
                format!("{:.3}", b.fs_hz()),
                format!("{}", b.rm_ohm),
                format!("{:e}", b.lm_h),
            ),
            None => (String::new(), String::new(), String::new()),
        };
        let _ = writeln!(
            t,
            "{},{:.3},{:.4},{:.6e},{:.6e},{:.5e},{sf},{sr},{sl}",
            x.id,
            x.fs_hz(),
            x.rm_ohm(),
            x.lm_h(),
            x.cm_f(),
            x.c0_f
        );
    }
    t
}

/// Every generated file, in a fixed order.
pub fn generate() -> Vec<DemoFile> {
    let lot = lot();
    // A second stream for the measurements, so the lot does not depend on the sweeps.
    let mut rng = stream();
    rng.set_stream(1);
    let mut files = Vec::with_capacity(LOT_SIZE + 1);
    for (i, x) in lot.iter().enumerate() {
        let n = i + 1;
        let vna = n > 30;
        let (f, s) = measure(x, &mut rng, vna);
        let (name, text) = if !vna {
            (format!("sweeps/{}.csv", x.id), csv_file(x, &f, &s))
        } else {
            (format!("sweeps/{}.s2p", x.id), s2p_file(x, &f, &s, n > 34))
        };
        files.push(DemoFile { name, text });
    }
    files.push(DemoFile {
        name: "demo-crystals-true.csv".to_string(),
        text: truth_file(&lot),
    });
    files
}
