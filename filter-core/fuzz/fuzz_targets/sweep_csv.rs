//! Sweep CSV: `parse_sweep_csv` on arbitrary text; what it accepts is a usable trace, and
//! `write_sweep_csv` of it reads back to the same values.
#![no_main]

use filter_core::io::sweep_csv::{parse_sweep_csv, write_sweep_csv};
use filter_core_fuzz::{check_error, check_trace, text};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some(s) = text(data) else { return };
    match parse_sweep_csv(s) {
        Err(e) => check_error(&e),
        Ok(trace) => {
            check_trace(&trace, false);
            assert!(
                trace.f_hz.iter().all(|f| *f > 0.0),
                "zero frequency accepted"
            );
            let mut out = Vec::new();
            write_sweep_csv(&trace, &mut out).expect("an accepted trace can be written");
            let written = String::from_utf8(out).expect("the writer writes UTF-8");
            let back = parse_sweep_csv(&written)
                .unwrap_or_else(|e| panic!("written sweep does not read back: {e}\n{written}"));
            assert_eq!(back, trace, "sweep CSV round trip");
        }
    }
});
