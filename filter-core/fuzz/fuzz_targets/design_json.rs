//! Design JSON: `Design::from_json` on arbitrary text; what it accepts turns into a ladder,
//! its predicted performance is finite (or a clear error), and `to_json` reads back.
#![no_main]

use filter_core::design::Design;
use filter_core::synthesis::predict;
use filter_core_fuzz::{check_error, check_performance, text};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some(s) = text(data) else { return };
    let d = match Design::from_json(s) {
        Err(e) => return check_error(&e),
        Ok(d) => d,
    };
    let back = Design::from_json(&d.to_json())
        .unwrap_or_else(|e| panic!("an accepted design does not read back: {e}"));
    // Bit for bit: the workspace reads JSON with serde_json's `float_roundtrip`, so every
    // number written with 17 digits reads back as the same double.
    assert_eq!(back, d, "design JSON round trip");
    // Analysis cost grows with the number of crystals; a record with hundreds of them is
    // refused or slow, not a crash to look for here.
    if d.crystals.len() > 16 {
        return;
    }
    if let Err(e) = d.to_ladder() {
        return check_error(&e);
    }
    match predict(&d) {
        Err(e) => check_error(&e),
        Ok(p) => check_performance(&p),
    }
});
