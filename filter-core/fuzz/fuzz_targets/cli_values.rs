//! Command-line values: the `FromStr` newtypes the command line parses its options with
//! (`--fs 9M`, `--c0 3p5`, `--rm 15R`, `--ripple 0.1dB`), their `Display` round trip, and the
//! SPICE value reader.
#![no_main]

use filter_core::io::spice::{format_spice_value, parse_spice_value};
use filter_core::units::{Decibels, Farads, Henries, Hertz, Ohms};
use filter_core_fuzz::{check_error, selector, text};
use libfuzzer_sys::fuzz_target;
use std::fmt::Display;
use std::str::FromStr;

/// Parse, and on success check that `{:.17}` display reads back to the same value.
fn round_trip<T>(s: &str, value: fn(&T) -> f64, negative_ok: bool)
where
    T: FromStr<Err = filter_core::Error> + Display,
{
    match s.parse::<T>() {
        Err(e) => check_error(&e),
        Ok(x) => {
            let v = value(&x);
            assert!(v.is_finite(), "{s:?} -> {v}");
            assert!(negative_ok || v >= 0.0, "{s:?} -> negative {v}");
            let shown = format!("{x:.17}");
            let back: T = shown
                .parse()
                .unwrap_or_else(|e| panic!("{s:?} -> {v} displays as {shown:?}, which fails: {e}"));
            assert_eq!(value(&back), v, "{shown:?}");
        }
    }
}

fuzz_target!(|data: &[u8]| {
    let Some((sel, rest)) = selector(data) else {
        return;
    };
    let Some(s) = text(rest) else { return };
    match sel % 6 {
        0 => round_trip::<Hertz>(s, |x| x.value(), false),
        1 => round_trip::<Henries>(s, |x| x.value(), false),
        2 => round_trip::<Farads>(s, |x| x.value(), false),
        3 => round_trip::<Ohms>(s, |x| x.value(), false),
        4 => round_trip::<Decibels>(s, |x| x.value(), true),
        _ => match parse_spice_value(s) {
            Err(e) => check_error(&e),
            Ok(v) => {
                assert!(v.is_finite(), "spice {s:?} -> {v}");
                let shown = format_spice_value(v);
                let back = parse_spice_value(&shown)
                    .unwrap_or_else(|e| panic!("spice {v} formats as {shown:?}: {e}"));
                // The netlist contract asks for at least 12 significant digits.
                assert!(
                    (back - v).abs() <= 1e-12 * v.abs(),
                    "spice {v} -> {shown:?} -> {back}"
                );
            }
        },
    }
});
