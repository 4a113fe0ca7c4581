//! Invariant checks shared by the fuzz targets of filter-core.
//!
//! A fuzz target feeds arbitrary bytes to a parser or loader. The parser may refuse them with an
//! [`filter_core::Error`]; it must never panic, and what it accepts must be usable: every
//! number finite, lengths consistent, and a second trip through the matching writer and reader
//! giving the same values. Each `check_*` function asserts those properties (a failed assertion
//! is a crash that libFuzzer records as an artifact).

use filter_core::design::Design;
use filter_core::io::touchstone::{OnePortData, TwoPortData};
use filter_core::io::MeasuredTrace;
use filter_core::metrics::Performance;
use filter_core::Crystal;

/// The input as text, or `None` when it is not UTF-8 (the command line refuses such files
/// before any parser sees them).
pub fn text(data: &[u8]) -> Option<&str> {
    std::str::from_utf8(data).ok()
}

/// Split off the first byte as a selector: `(selector, rest)`.
pub fn selector(data: &[u8]) -> Option<(u8, &[u8])> {
    data.split_first().map(|(&s, rest)| (s, rest))
}

/// An accepted error must say something, on one logical message.
pub fn check_error(e: &filter_core::Error) {
    assert!(!e.message().trim().is_empty(), "empty error message: {e:?}");
}

/// Every value of a measured trace is finite, lengths agree, frequencies strictly increase.
pub fn check_trace(t: &MeasuredTrace, allow_infinite_db: bool) {
    let n = t.f_hz.len();
    assert_eq!(t.s21_db.len(), n, "s21_db length");
    if let Some(p) = &t.s21_deg {
        assert_eq!(p.len(), n, "s21_deg length");
        assert!(p.iter().all(|x| x.is_finite()), "non-finite phase {p:?}");
    }
    assert!(
        t.f_hz.iter().all(|f| f.is_finite() && *f >= 0.0),
        "bad frequency {:?}",
        t.f_hz
    );
    assert!(
        t.f_hz.windows(2).all(|w| w[0] < w[1]),
        "frequencies not increasing"
    );
    for x in &t.s21_db {
        // Touchstone S21 = 0 exactly is −∞ dB by documented choice; NaN never.
        assert!(!x.is_nan(), "NaN level");
        assert!(allow_infinite_db || x.is_finite(), "non-finite level {x}");
    }
    if let Some(r) = t.reference_ohm {
        assert!(r.is_finite() && r > 0.0, "reference {r}");
    }
}

/// A one-port data set: finite, increasing frequencies, positive reference.
pub fn check_one_port(d: &OnePortData) {
    assert_eq!(d.f_hz.len(), d.s.len());
    assert!(d.reference_ohm.is_finite() && d.reference_ohm > 0.0);
    assert!(d.f_hz.iter().all(|f| f.is_finite() && *f >= 0.0));
    assert!(d.f_hz.windows(2).all(|w| w[0] < w[1]));
    assert!(d.s.iter().all(|z| z.re.is_finite() && z.im.is_finite()));
}

/// A two-port data set: finite, increasing frequencies, positive reference.
pub fn check_two_port(d: &TwoPortData) {
    assert_eq!(d.f_hz.len(), d.s.len());
    assert!(d.reference_ohm.is_finite() && d.reference_ohm > 0.0);
    assert!(d.f_hz.iter().all(|f| f.is_finite() && *f >= 0.0));
    assert!(d.f_hz.windows(2).all(|w| w[0] < w[1]));
    assert!(d
        .s
        .iter()
        .flatten()
        .all(|z| z.re.is_finite() && z.im.is_finite()));
}

/// A crystal: every parameter finite and in range; fs finite and positive.
pub fn check_crystal(c: &Crystal) {
    assert!(c.lm_h().is_finite() && c.lm_h() > 0.0, "Lm {c:?}");
    assert!(c.cm_f().is_finite() && c.cm_f() > 0.0, "Cm {c:?}");
    assert!(c.rm_ohm().is_finite() && c.rm_ohm() >= 0.0, "Rm {c:?}");
    assert!(c.c0_f.is_finite() && c.c0_f >= 0.0, "C0 {c:?}");
    // fs = 1/(2π·sqrt(Lm·Cm)) can still overflow or underflow for extreme but finite Lm, Cm;
    // it must never be NaN.
    assert!(!c.fs_hz().is_nan(), "fs NaN {c:?}");
}

/// Every figure of a performance record finite (Options: finite when present).
pub fn check_performance(p: &Performance) {
    let scalars = [
        ("insertion_loss_db", p.insertion_loss_db),
        ("ripple_db", p.ripple_db),
        ("bw_3db_hz", p.bw_3db_hz),
        ("bw_6db_hz", p.bw_6db_hz),
        ("center_hz", p.center_hz),
        ("return_loss_db", p.return_loss_db),
        ("edges_3db_hz[0]", p.edges_3db_hz[0]),
        ("edges_3db_hz[1]", p.edges_3db_hz[1]),
        ("edges_6db_hz[0]", p.edges_6db_hz[0]),
        ("edges_6db_hz[1]", p.edges_6db_hz[1]),
        ("group_delay_center_s", p.group_delay_center_s),
        ("group_delay_variation_s", p.group_delay_variation_s),
    ];
    for (name, v) in scalars {
        assert!(v.is_finite(), "performance {name} = {v} in {p:?}");
    }
    for (name, v) in [
        ("bw_60db_hz", p.bw_60db_hz),
        ("shape_factor_60_6", p.shape_factor_60_6),
    ] {
        if let Some(v) = v {
            assert!(v.is_finite(), "performance {name} = {v} in {p:?}");
        }
    }
    if let Some(e) = p.edges_60db_hz {
        assert!(e.iter().all(|x| x.is_finite()), "edges_60db_hz {e:?}");
    }
    assert!(
        p.bw_3db_hz >= 0.0 && p.bw_6db_hz >= 0.0,
        "negative bandwidth {p:?}"
    );
}

/// Every number of a design record finite, and the record valid.
pub fn check_design(d: &Design) {
    d.validate().expect("a design that was accepted validates");
    for c in &d.crystals {
        check_crystal(c);
    }
    assert!(d.k.iter().all(|x| x.is_finite()), "k {:?}", d.k);
    assert!(d.q.iter().all(|x| x.is_finite()), "q {:?}", d.q);
    assert!(d.g.iter().all(|x| x.is_finite()), "g {:?}", d.g);
    assert!(d.q_min.is_finite(), "q_min {}", d.q_min);
    assert!(d.q0.is_none_or(f64::is_finite), "q0 {:?}", d.q0);
    assert!(
        d.cohn_loss_db.is_none_or(f64::is_finite),
        "cohn {:?}",
        d.cohn_loss_db
    );
    check_performance(&d.performance);
}
