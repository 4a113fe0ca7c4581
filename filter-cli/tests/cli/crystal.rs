//! `xtal-ladder crystal`.

use super::util::{num, rel, run};
use std::f64::consts::PI;

#[test]
fn record_with_derived_values() {
    let (r, _d) = run(&[
        "crystal", "--fs", "9.8268M", "--lm", "14.6mH", "--rm", "14", "--c0", "3.9p", "--id",
        "x07", "--format", "json",
    ]);
    let v = r.json();
    assert_eq!(v["id"], "x07");
    let fs = num(&v["fs_hz"], "fs_hz");
    // The parser rounds 9.8268M once, exactly as the literal 9.8268e6.
    assert!(rel(fs, 9.8268e6) < 1e-12, "{fs}");
    // Butterworth–Van Dyke closed forms: Cm = 1/((2π fs)² Lm), fp = fs·sqrt(1 + Cm/C0),
    // Qu = 2π fs Lm / Rm. The record round-trips with 17 digits; 1e-12 allows for the
    // derivation order.
    let cm = 1.0 / ((2.0 * PI * 9.8268e6f64).powi(2) * 14.6e-3);
    assert!(rel(num(&v["cm_f"], "cm_f"), cm) < 1e-12);
    let fp = 9.8268e6 * (1.0 + cm / 3.9e-12).sqrt();
    assert!(rel(num(&v["fp_hz"], "fp_hz"), fp) < 1e-12);
    let qu = 2.0 * PI * 9.8268e6 * 14.6e-3 / 14.0;
    assert!(rel(num(&v["qu"], "qu"), qu) < 1e-12);
}

#[test]
fn cm_instead_of_lm_and_infinite_values_as_null() {
    let (r, _d) = run(&[
        "crystal", "--fs", "10M", "--cm", "20f", "--rm", "0", "--c0", "0", "--format", "json",
    ]);
    let v = r.json();
    let lm = 1.0 / ((2.0 * PI * 10e6f64).powi(2) * 20e-15);
    assert!(rel(num(&v["lm_h"], "lm_h"), lm) < 1e-12);
    assert!(
        v["qu"].is_null(),
        "Rm = 0: Qu is infinite, written as null: {v}"
    );
    assert!(
        v["fp_hz"].is_null(),
        "C0 = 0: fp is infinite, written as null: {v}"
    );
}

#[test]
fn text_and_csv() {
    let (r, _d) = run(&[
        "crystal", "--fs", "9.8268M", "--lm", "14.6m", "--rm", "14", "--c0", "3.9p",
    ]);
    let out = r.ok();
    assert!(out.contains("9.82680000 MHz"), "{out}");
    assert!(out.contains("14.60 mH"), "{out}");
    let (r, _d) = run(&[
        "crystal", "--fs", "9.8268M", "--lm", "14.6m", "--rm", "14", "--c0", "3.9p", "--format",
        "csv",
    ]);
    let out = r.ok();
    assert_eq!(out.lines().next(), Some("id,fs_hz,rm_ohm,lm_h,cm_f,c0_f"));
    assert_eq!(out.lines().count(), 2, "{out}");
}

#[test]
fn bad_values_exit_2() {
    for args in [
        &[
            "crystal", "--fs", "abc", "--lm", "14m", "--rm", "14", "--c0", "4p",
        ][..],
        &[
            "crystal", "--fs", "0", "--lm", "14m", "--rm", "14", "--c0", "4p",
        ],
        &["crystal", "--fs", "9M", "--lm", "14m", "--c0", "4p"],
        &["crystal", "--fs", "9M", "--rm", "14", "--c0", "4p"],
        &[
            "crystal", "--fs", "9M", "--lm", "14m", "--cm", "20f", "--rm", "1", "--c0", "4p",
        ],
        &[
            "crystal", "--fs", "9M", "--lm", "14pF", "--rm", "1", "--c0", "4p",
        ],
        &[
            "crystal", "--fs", "9M", "--lm", "NaN", "--rm", "1", "--c0", "4p",
        ],
    ] {
        let (r, _d) = run(args);
        r.bad_input();
    }
}
