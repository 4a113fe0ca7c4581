//! Measurement fit: a sweep read from arbitrary text (sweep CSV, two-port Touchstone or an
//! S21-only one-port file, chosen by the first byte) goes to `fit_sweep`; a fit that succeeds
//! gives a valid crystal and finite figures.
#![no_main]

use filter_core::io::sweep_csv::parse_sweep_csv;
use filter_core::io::touchstone::{parse_s2p, trace_from_s21_only, trace_from_s2p};
use filter_core::measure::{fit_sweep, FixtureSpec};
use filter_core_fuzz::{check_crystal, check_error, selector, text};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some((sel, rest)) = selector(data) else {
        return;
    };
    let Some(s) = text(rest) else { return };
    let trace = match sel % 3 {
        0 => parse_sweep_csv(s),
        1 => parse_s2p(s).map(|d| trace_from_s2p(&d)),
        _ => trace_from_s21_only(s),
    };
    let Ok(trace) = trace else { return };
    // The fit is iterative: very long traces only cost time.
    if trace.f_hz.len() > 2000 {
        return;
    }
    let fixture = FixtureSpec {
        r0_ohm: trace.reference_ohm.unwrap_or(50.0),
        extra_series_ohm: 0.0,
    };
    match fit_sweep(&trace, &fixture, "fuzz") {
        Err(e) => check_error(&e),
        Ok(r) => {
            check_crystal(&r.crystal);
            let c = &r.crystal;
            assert!(c.fs_hz().is_finite() && c.fs_hz() > 0.0, "fs {c:?}");
            for (name, v) in [
                ("fs_hz", r.fs_hz),
                ("peak_hz", r.peak_hz),
                ("rms_residual_db", r.rms_residual_db),
                ("fixture_slope_db", r.fixture_slope_db),
                ("phase_offset_deg", r.phase_offset_deg),
                ("noise_floor_db", r.noise_floor_db),
                ("recommended start", r.recommended_sweep.start_hz),
                ("recommended stop", r.recommended_sweep.stop_hz),
            ] {
                assert!(v.is_finite(), "fit {name} = {v}");
            }
            assert!(!r.fp_hz.is_nan(), "fp NaN");
            let sg = r.sigma;
            for (name, v) in [
                ("sigma fs", sg.fs_hz),
                ("sigma rm", sg.rm_ohm),
                ("sigma lm", sg.lm_h),
                ("sigma cm", sg.cm_f),
                ("sigma c0", sg.c0_f),
            ] {
                assert!(!v.is_nan(), "fit {name} is NaN");
            }
            for sp in &r.spurious {
                assert!(sp.f_hz.is_finite() && sp.level_db.is_finite());
                assert!(sp.below_peak_db.is_finite());
            }
        }
    }
});
