//! Touchstone 1.x: `parse_s1p`, `parse_s2p` and `trace_from_s21_only` on arbitrary text;
//! accepted data is finite and increasing, and `write_s2p` of two-port data reads back.
#![no_main]

use filter_core::io::touchstone::{
    parse_s1p, parse_s2p, trace_from_s21_only, trace_from_s2p, write_s2p, TouchstoneFormat,
};
use filter_core_fuzz::{check_error, check_one_port, check_trace, check_two_port, selector, text};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some((sel, rest)) = selector(data) else {
        return;
    };
    let Some(s) = text(rest) else { return };
    match sel % 3 {
        0 => match parse_s1p(s) {
            Err(e) => check_error(&e),
            Ok(d) => check_one_port(&d),
        },
        1 => match trace_from_s21_only(s) {
            Err(e) => check_error(&e),
            Ok(t) => check_trace(&t, true),
        },
        _ => match parse_s2p(s) {
            Err(e) => check_error(&e),
            Ok(d) => {
                check_two_port(&d);
                check_trace(&trace_from_s2p(&d), true);
                let mut out = Vec::new();
                write_s2p(&d, TouchstoneFormat::RealImaginary, "fuzz", &mut out)
                    .expect("accepted two-port data can be written");
                let written = String::from_utf8(out).expect("the writer writes UTF-8");
                let back = parse_s2p(&written)
                    .unwrap_or_else(|e| panic!("written s2p does not read back: {e}"));
                assert_eq!(
                    back.f_hz, d.f_hz,
                    "frequencies written in Hz read back exactly"
                );
                assert_eq!(back.s, d.s, "RI round trip is exact");
            }
        },
    }
});
