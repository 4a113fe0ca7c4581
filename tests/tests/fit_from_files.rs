//! Crystal parameters recovered from synthetic sweeps written as files (CSV and Touchstone in
//! each data format), read back through the parsers and fitted: the measurement path end to
//! end. The crystals are our own test scenario (3–20 MHz); the noise is seeded.

use filter_core::crystal::Crystal;
use filter_core::io::sweep_csv::{parse_sweep_csv, write_sweep_csv};
use filter_core::io::touchstone::{
    parse_s2p, trace_from_s2p, write_s2p, TouchstoneFormat, TwoPortData,
};
use filter_core::io::MeasuredTrace;
use filter_core::measure::{fit_sweep, fixture_s21, FixtureSpec};
use num_complex::Complex64;

/// A tiny deterministic generator (xorshift), so this test needs no RNG crate. Noise: ±1 % of
/// the local |S21| per component (about 40 dB SNR) plus a floor near −80 dB.
struct Noise(u64);
impl Noise {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    }
}

fn sweep(x: &Crystal, noise: &mut Noise) -> TwoPortData {
    let fixture = FixtureSpec::default();
    let (fs, fp) = (x.fs_hz(), x.fp_hz());
    let (lo, hi) = (fs - 0.4 * (fp - fs), fp + 0.4 * (fp - fs));
    let n = 2001;
    let mut f_hz = Vec::with_capacity(n);
    let mut s = Vec::with_capacity(n);
    for i in 0..n {
        let f = lo + (hi - lo) * i as f64 / (n - 1) as f64;
        let h = fixture_s21(x, &fixture, f);
        let h = h
            + Complex64::new(noise.next(), noise.next()) * (0.01 * h.norm())
            + Complex64::new(noise.next(), noise.next()) * 1e-4;
        let refl = Complex64::new(1.0, 0.0) - h; // a series element: S11 = 1 − S21
        f_hz.push(f);
        s.push([refl, h, h, refl]);
    }
    TwoPortData {
        reference_ohm: 50.0,
        f_hz,
        s,
    }
}

fn check(x: &Crystal, got: &Crystal, what: &str) {
    let rel = |a: f64, b: f64| (a / b - 1.0).abs();
    // Tolerances of the measurement task: Lm and Cm 1 %, Rm 3 %, C0 5 %, fs 2 ppm.
    assert!(
        rel(got.lm_h(), x.lm_h()) < 0.01,
        "{what}: Lm {} vs {}",
        got.lm_h(),
        x.lm_h()
    );
    assert!(rel(got.cm_f(), x.cm_f()) < 0.01, "{what}: Cm");
    assert!(
        rel(got.rm_ohm(), x.rm_ohm()) < 0.03,
        "{what}: Rm {} vs {}",
        got.rm_ohm(),
        x.rm_ohm()
    );
    assert!(
        rel(got.c0_f, x.c0_f) < 0.05,
        "{what}: C0 {} vs {}",
        got.c0_f,
        x.c0_f
    );
    assert!(
        rel(got.fs_hz(), x.fs_hz()) < 2e-6,
        "{what}: fs {} vs {}",
        got.fs_hz(),
        x.fs_hz()
    );
}

#[test]
fn fit_recovers_crystals_from_touchstone_in_every_format_and_from_csv() {
    // Rm of 25 Ω and more: the 3 % Rm bound holds at this noise level (see measure's docs for
    // the σ(Rm) ≈ 0.1–0.15 Ω floor that makes lower Rm need a lower-impedance fixture).
    let crystals = [
        Crystal::from_fs_lm("a", 3.579545e6, 95e-3, 40.0, 3.5e-12).unwrap(),
        Crystal::from_fs_lm("b", 9.8304e6, 17e-3, 25.0, 4.0e-12).unwrap(),
        Crystal::from_fs_lm("c", 20e6, 8e-3, 30.0, 5.5e-12).unwrap(),
    ];
    let mut noise = Noise(0x9e37_79b9_7f4a_7c15);
    for x in &crystals {
        let data = sweep(x, &mut noise);
        for format in [
            TouchstoneFormat::RealImaginary,
            TouchstoneFormat::MagnitudeAngle,
            TouchstoneFormat::DecibelAngle,
        ] {
            let mut text = Vec::new();
            write_s2p(&data, format, "synthetic crystal sweep", &mut text).unwrap();
            let parsed = parse_s2p(std::str::from_utf8(&text).unwrap()).unwrap();
            let trace = trace_from_s2p(&parsed);
            let r = fit_sweep(&trace, &FixtureSpec::default(), &x.id).unwrap();
            check(x, &r.crystal, &format!("{} {:?}", x.id, format));
        }
        // The same trace as a magnitude-only CSV, as a spectrum analyzer saves it.
        let t = trace_from_s2p(&data);
        let mag = MeasuredTrace { s21_deg: None, ..t };
        let mut text = Vec::new();
        write_sweep_csv(&mag, &mut text).unwrap();
        let back = parse_sweep_csv(std::str::from_utf8(&text).unwrap()).unwrap();
        let r = fit_sweep(&back, &FixtureSpec::default(), &x.id).unwrap();
        check(x, &r.crystal, &format!("{} csv", x.id));
        assert!(!r.poor_fit && r.rms_residual_db < 0.5);
    }
}
