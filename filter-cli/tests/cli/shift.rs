//! `xtal-ladder shift`.

use super::util::{num, rel, run};

/// F2 from a known crystal by the lossless BVD relation f = fs·sqrt(1 + Cm/(C0 + C)), the
/// relation the contract states for the shift method.
fn f_cap(fs: f64, cm: f64, c0: f64, cs: f64) -> f64 {
    fs * (1.0 + cm / (c0 + cs)).sqrt()
}

#[test]
fn recovers_cm_and_lm() {
    let (fs, cm, c0, cs) = (9.8268e6, 18.0e-15, 3.9e-12, 33e-12);
    let f2 = format!("{:.6}", f_cap(fs, cm, c0, cs));
    let (r, _d) = run(&[
        "shift",
        "--f-short",
        "9.8268M",
        "--f-cap",
        &f2,
        "--cap",
        "33p",
        "--c0",
        "3.9p",
        "--format",
        "json",
    ]);
    let v = r.json();
    // F2 printed to 1 µHz: relative error of (F2/F1)² − 1 about 2e-12/3e-4 ≈ 1e-8.
    assert!(rel(num(&v["cm_f"], "cm_f"), cm) < 1e-7, "{v}");
    let lm = 1.0 / ((2.0 * std::f64::consts::PI * fs).powi(2) * cm);
    assert!(rel(num(&v["lm_h"], "lm_h"), lm) < 1e-7, "{v}");
    assert!(rel(num(&v["fs_hz"], "fs_hz"), fs) < 1e-12);
}

#[test]
fn oscillator_load_is_accounted_for() {
    // With the oscillator's own series load CL, F1 runs with C = CL and F2 with CL·CS/(CL+CS).
    let (fs, cm, c0, cs, cl) = (9.8268e6, 18.0e-15, 3.9e-12, 33e-12, 100e-12);
    let f1 = f_cap(fs, cm, c0, cl);
    let f2 = f_cap(fs, cm, c0, cl * cs / (cl + cs));
    let (f1s, f2s) = (format!("{f1:.6}"), format!("{f2:.6}"));
    let (r, _d) = run(&[
        "shift",
        "--f-short",
        &f1s,
        "--f-cap",
        &f2s,
        "--cap",
        "33p",
        "--c0",
        "3.9p",
        "--osc-load",
        "100p",
        "--format",
        "json",
    ]);
    let v = r.json();
    assert!(rel(num(&v["cm_f"], "cm_f"), cm) < 1e-6, "{v}");
    assert!(rel(num(&v["fs_hz"], "fs_hz"), fs) < 1e-9, "{v}");
    // Leaving CL out costs several per cent (the contract: about 7 % at CL = 100 pF).
    let (r, _d) = run(&[
        "shift",
        "--f-short",
        &f1s,
        "--f-cap",
        &f2s,
        "--cap",
        "33p",
        "--c0",
        "3.9p",
        "--format",
        "json",
    ]);
    let err = rel(num(&r.json()["cm_f"], "cm_f"), cm);
    assert!(err > 0.03 && err < 0.12, "ignoring CL: {err}");
}

#[test]
fn swapped_readings_exit_2() {
    let (r, _d) = run(&[
        "shift",
        "--f-short",
        "9.83M",
        "--f-cap",
        "9.82M",
        "--cap",
        "33p",
        "--c0",
        "3.9p",
    ]);
    r.bad_input();
    let (r, _d) = run(&[
        "shift",
        "--f-short",
        "9.83M",
        "--f-cap",
        "9.84M",
        "--cap",
        "33p",
    ]);
    r.bad_input();
}
