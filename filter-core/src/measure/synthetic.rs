//! Synthetic sweeps of known crystals for the tests of this module (test builds only).

use super::{fixture_s21, FixtureSpec};
use crate::crystal::Crystal;
use crate::io::MeasuredTrace;
use num_complex::Complex64;
use rand::prelude::*;
use rand::rngs::mock::StepRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use std::f64::consts::PI;

/// How a synthetic trace is disturbed.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Disturbance {
    /// Additive complex noise, rms as a fraction of the peak |S21| (0.01 = 40 dB below it).
    pub additive_of_peak: f64,
    /// Multiplicative complex noise, rms as a fraction of the local |S21|.
    pub relative: f64,
    /// Additive complex noise floor, rms level in dB (absolute, like the trace).
    pub floor_db: f64,
    /// Linear level slope across the sweep, dB from start to stop, zero at `slope_pivot_hz`.
    pub slope_db: f64,
    /// Frequency where the slope passes through 0 dB.
    pub slope_pivot_hz: f64,
    /// Level offset of the whole trace, dB (a calibration error).
    pub offset_db: f64,
}

impl Disturbance {
    /// No disturbance at all.
    pub fn none() -> Self {
        Disturbance {
            additive_of_peak: 0.0,
            relative: 0.0,
            floor_db: -400.0,
            slope_db: 0.0,
            slope_pivot_hz: 0.0,
            offset_db: 0.0,
        }
    }
    /// 40 dB SNR relative to the peak (additive complex noise of 1 % of the peak |S21|) on
    /// top of an instrument floor at −80 dB.
    pub fn additive_40db() -> Self {
        Disturbance {
            additive_of_peak: 0.01,
            floor_db: -80.0,
            ..Self::none()
        }
    }
    /// 1 % relative jitter (40 dB below the local level) and a −80 dB floor.
    pub fn relative_40db() -> Self {
        Disturbance {
            relative: 0.01,
            floor_db: -80.0,
            ..Self::none()
        }
    }
}

/// A deterministic generator for stream number `k`.
pub(crate) fn rng(k: u64) -> ChaCha8Rng {
    ChaCha8Rng::from_rng(StepRng::new(
        0x9E37_79B9_7F4A_7C15 ^ k,
        0xD1B5_4A32_D192_ED03,
    ))
    .expect("mock generator never fails")
}

/// A sweep covering the peak and the notch with margin: fs − m .. fp + m,
/// m = max(0.25·(fp − fs), 5·BW3).
pub(crate) fn span_for(x: &Crystal, fx: &FixtureSpec) -> (f64, f64) {
    let bw = (fx.loop_resistance_ohm() + x.rm_ohm()) / (2.0 * PI * x.lm_h());
    let m = (0.25 * (x.fp_hz() - x.fs_hz())).max(5.0 * bw);
    (x.fs_hz() - m, x.fp_hz() + m)
}

/// Sweep `x` in `fx` over `n` points from `f0` to `f1`, disturbed by `d` using stream `k`.
pub(crate) fn sweep(
    x: &Crystal,
    fx: &FixtureSpec,
    (f0, f1): (f64, f64),
    n: usize,
    d: &Disturbance,
    k: u64,
    with_phase: bool,
) -> MeasuredTrace {
    let mut g = rng(k);
    let f: Vec<f64> = (0..n)
        .map(|i| f0 + (f1 - f0) * i as f64 / (n - 1) as f64)
        .collect();
    let clean: Vec<Complex64> = f.iter().map(|&fi| fixture_s21(x, fx, fi)).collect();
    let peak = clean.iter().map(|s| s.norm()).fold(0.0, f64::max);
    let floor = 10f64.powf(d.floor_db / 20.0);
    let mut cn = |rms: f64| -> Complex64 {
        let a: f64 = g.sample(StandardNormal);
        let b: f64 = g.sample(StandardNormal);
        Complex64::new(a, b) * (rms / 2f64.sqrt())
    };
    let mut db = Vec::with_capacity(n);
    let mut deg = Vec::with_capacity(n);
    for (fi, s) in f.iter().zip(&clean) {
        let tilt =
            10f64.powf((d.slope_db * (fi - d.slope_pivot_hz) / (f1 - f0) + d.offset_db) / 20.0);
        let s = *s * tilt * (Complex64::new(1.0, 0.0) + cn(d.relative))
            + cn(d.additive_of_peak * peak)
            + cn(floor);
        db.push(20.0 * s.norm().log10());
        deg.push(s.arg().to_degrees());
    }
    MeasuredTrace {
        f_hz: f,
        s21_db: db,
        s21_deg: with_phase.then_some(deg),
        reference_ohm: None,
    }
}
