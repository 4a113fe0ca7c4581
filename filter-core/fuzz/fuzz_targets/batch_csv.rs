//! Batch CSV: `parse_batch_csv` on arbitrary text (with or without defaults, chosen by the
//! first byte); accepted crystals are valid and their ids distinct, `write_batch_csv` reads
//! back to the same crystals, and `match_crystals` on them gives finite sets or an error.
#![no_main]

use filter_core::batch::{
    match_crystals, parse_batch_csv, write_batch_csv, BatchDefaults, MatchRequest,
};
use filter_core_fuzz::{check_crystal, check_error, selector, text};
use libfuzzer_sys::fuzz_target;
use std::collections::HashSet;

/// Relative closeness for values read back from 17 significant digits; fs, Lm and Cm are
/// rebuilt from two of them, which costs a few units in the last place.
fn close(a: f64, b: f64) -> bool {
    a == b || (a - b).abs() <= 1e-14 * a.abs().max(b.abs())
}

fuzz_target!(|data: &[u8]| {
    let Some((sel, rest)) = selector(data) else {
        return;
    };
    let Some(s) = text(rest) else { return };
    let defaults = if sel & 1 == 1 {
        BatchDefaults {
            lm_h: Some(15e-3),
            c0_f: Some(4e-12),
            rm_ohm: Some(10.0),
        }
    } else {
        BatchDefaults::default()
    };
    let crystals = match parse_batch_csv(s, &defaults) {
        Err(e) => return check_error(&e),
        Ok(c) => c,
    };
    assert!(!crystals.is_empty(), "an accepted batch has crystals");
    let mut ids = HashSet::new();
    for c in &crystals {
        check_crystal(c);
        assert!(c.fs_hz().is_finite() && c.fs_hz() > 0.0, "fs {c:?}");
        assert!(ids.insert(c.id.clone()), "duplicate id {:?} accepted", c.id);
    }
    let mut out = Vec::new();
    write_batch_csv(&crystals, &mut out).expect("writing to a Vec cannot fail");
    let written = String::from_utf8(out).expect("the writer writes UTF-8");
    let back = parse_batch_csv(&written, &BatchDefaults::default())
        .unwrap_or_else(|e| panic!("a written batch does not read back: {e}\n{written}"));
    assert_eq!(back.len(), crystals.len());
    for (a, b) in crystals.iter().zip(&back) {
        assert_eq!(a.id, b.id, "id round trip");
        assert!(
            close(a.lm_h(), b.lm_h()) && close(a.cm_f(), b.cm_f()),
            "{a:?} -> {b:?}"
        );
        assert!(
            close(a.rm_ohm(), b.rm_ohm()) && close(a.c0_f, b.c0_f),
            "{a:?} -> {b:?}"
        );
    }
    let count = 1 + usize::from(sel >> 1) % crystals.len().min(12);
    let req = MatchRequest {
        count,
        sets: 1 + usize::from(sel >> 5),
        tolerance_hz: None,
    };
    match match_crystals(&crystals, &req) {
        Err(e) => check_error(&e),
        Ok(m) => {
            for set in &m.sets {
                assert_eq!(set.ids.len(), count);
                assert!(set.ids.iter().all(|i| ids.contains(i)));
                for v in [
                    set.spread_hz,
                    set.mean_fs_hz,
                    set.lm_spread_rel,
                    set.rm_max_ohm,
                ] {
                    assert!(v.is_finite(), "set figure {v} in {set:?}");
                }
            }
            for r in &m.rejected {
                assert!(ids.contains(&r.id) && !r.reason.is_empty());
            }
        }
    }
});
