//! Regression tests for the inputs the fuzz targets (filter-core/fuzz) crashed on.
//!
//! Each file in `tests/data/bad/fuzz/` is an input that once made a parser or loader panic or
//! return a NaN. The test named after it feeds it through the same path as the fuzz target and
//! asserts the promise: a clear error, or a result whose every number is finite. The file name
//! says the path: `fit_*` (sweep CSV or Touchstone, then the BVD fit), `batch_*` (batch CSV;
//! `batch_defaults_*` with default Lm, C0 and Rm), `design_*` (design JSON, then the
//! predicted performance). The command-line robustness test runs the same files through the
//! binary.

use filter_core::batch::{parse_batch_csv, BatchDefaults};
use filter_core::design::Design;
use filter_core::io::sweep_csv::parse_sweep_csv;
use filter_core::io::touchstone::{parse_s2p, trace_from_s2p};
use filter_core::measure::{fit_sweep, FixtureSpec};
use filter_core::metrics::Performance;
use filter_core::synthesis::predict;
use filter_core::Error;

fn clear(e: &Error) {
    assert!(!e.message().trim().is_empty(), "empty message: {e:?}");
    assert!(!e.message().contains("NaN"), "the message quotes NaN: {e}");
}

fn finite(what: &str, v: f64) {
    assert!(v.is_finite(), "{what} = {v}");
}

fn check_performance(p: &Performance) {
    for (name, v) in [
        ("insertion_loss_db", p.insertion_loss_db),
        ("ripple_db", p.ripple_db),
        ("bw_3db_hz", p.bw_3db_hz),
        ("bw_6db_hz", p.bw_6db_hz),
        ("center_hz", p.center_hz),
        ("return_loss_db", p.return_loss_db),
        ("group_delay_center_s", p.group_delay_center_s),
        ("group_delay_variation_s", p.group_delay_variation_s),
    ] {
        finite(name, v);
    }
    assert!(
        p.edges_3db_hz[0] <= p.edges_3db_hz[1],
        "edges out of order: {p:?}"
    );
}

/// A sweep file through the fit: an error, or a crystal and figures that are all finite.
fn fit(name: &str, text: &str) {
    let trace = if name.ends_with(".s2p") {
        parse_s2p(text).map(|d| trace_from_s2p(&d))
    } else {
        parse_sweep_csv(text)
    };
    let trace = match trace {
        Ok(t) => t,
        Err(e) => return clear(&e),
    };
    let fixture = FixtureSpec {
        r0_ohm: trace.reference_ohm.unwrap_or(50.0),
        extra_series_ohm: 0.0,
    };
    match fit_sweep(&trace, &fixture, "x") {
        Err(e) => clear(&e),
        Ok(r) => {
            let c = &r.crystal;
            for (what, v) in [
                ("fs", c.fs_hz()),
                ("Lm", c.lm_h()),
                ("Cm", c.cm_f()),
                ("Rm", c.rm_ohm()),
                ("C0", c.c0_f),
                ("peak_hz", r.peak_hz),
                ("rms_residual_db", r.rms_residual_db),
                ("noise_floor_db", r.noise_floor_db),
                ("recommended start", r.recommended_sweep.start_hz),
                ("recommended stop", r.recommended_sweep.stop_hz),
            ] {
                finite(what, v);
            }
            let s = r.sigma;
            for v in [s.fs_hz, s.rm_ohm, s.lm_h, s.cm_f, s.c0_f] {
                // An undetermined parameter has an infinite uncertainty, never NaN.
                assert!(!v.is_nan(), "a NaN uncertainty in {s:?}");
            }
            for sp in &r.spurious {
                finite("spurious level", sp.level_db);
            }
            for w in &r.warnings {
                assert!(!w.contains("NaN"), "a warning quotes NaN: {w}");
            }
        }
    }
}

/// A batch file: an error, or crystals whose values are all finite and positive.
fn batch(name: &str, text: &str) {
    let defaults = if name.starts_with("batch_defaults_") {
        BatchDefaults {
            lm_h: Some(15e-3),
            c0_f: Some(4e-12),
            rm_ohm: Some(10.0),
        }
    } else {
        BatchDefaults::default()
    };
    match parse_batch_csv(text, &defaults) {
        Err(e) => clear(&e),
        Ok(crystals) => {
            for c in &crystals {
                for (what, v) in [("fs", c.fs_hz()), ("Lm", c.lm_h()), ("Cm", c.cm_f())] {
                    assert!(v.is_finite() && v > 0.0, "{what} = {v} in {c:?}");
                }
            }
        }
    }
}

/// A design file: an error, or a predicted performance whose figures are all finite.
fn design(text: &str) {
    let d = match Design::from_json(text) {
        Ok(d) => d,
        Err(e) => return clear(&e),
    };
    match predict(&d) {
        Err(e) => clear(&e),
        Ok(p) => check_performance(&p),
    }
}

macro_rules! regression {
    ($test:ident, $file:literal) => {
        #[test]
        fn $test() {
            let text = include_str!(concat!("../data/bad/fuzz/", $file));
            match $file.split('_').next() {
                Some("fit") => fit($file, text),
                Some("batch") => batch($file, text),
                Some("design") => design(text),
                _ => panic!("unknown kind of regression file {}", $file),
            }
        }
    };
}

// A sweep whose first frequency is 9.81 kHz (a thousand times too low) and with a +37.85 dB
// point: the fit ran away (Rm ~ 1e219 Ω) and reported a NaN peak.
regression!(fit_runaway_positive_gain, "fit_runaway_positive_gain.csv");
// One point at -38159 dB: a fitted spurious branch with a NaN level.
regression!(fit_spur_nan_level, "fit_spur_nan_level.csv");
// Levels up to +77 dB: Rm fitted as 0 and its uncertainty 0·∞ = NaN.
regression!(fit_rm_zero_sigma_nan, "fit_rm_zero_sigma_nan.s2p");
// First frequency 981.8 kHz instead of 9.818 MHz: the fit ran away, the peak was NaN.
regression!(
    fit_runaway_low_first_frequency,
    "fit_runaway_low_first_frequency.csv"
);
// A fit so far off that the recommended sweep needed usize::MAX points and `+ 1` overflowed.
regression!(fit_sweep_points_overflow, "fit_sweep_points_overflow.s2p");
// fs ≈ 2.2e167 Hz with the default Lm: Cm = 1/((2π·fs)²·Lm) underflowed to 0 and was accepted.
regression!(
    batch_defaults_cm_underflow,
    "batch_defaults_cm_underflow.csv"
);
// A crystal's Rm edited to 1e300 Ω: the group delay came out NaN in the predicted performance.
regression!(design_rm_1e300_delay_nan, "design_rm_1e300_delay_nan.json");
// Source resistance 1.9e-29 Ω and a 101 F shunt capacitor: 315 dB of loss, and −3 dB edges
// found in the noise in reversed order (a negative bandwidth).
regression!(
    design_source_edges_reversed,
    "design_source_1e-29_edges_reversed.json"
);
