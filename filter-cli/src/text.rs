//! Engineering notation for people: thin wrappers over [`filter_core::units`] that fix how
//! many digits each kind of value gets in text output.

use filter_core::units::format_si_digits;

/// An absolute frequency: 9 significant digits (0.1 Hz at 10 MHz), e.g. `11.0558230 MHz`.
pub fn freq(f_hz: f64) -> String {
    format_si_digits(f_hz, "Hz", 9)
}

/// A bandwidth, span or offset: 4 significant digits, e.g. `2.400 kHz`.
pub fn width(f_hz: f64) -> String {
    format_si_digits(f_hz, "Hz", 4)
}

/// A component or model value with its unit: 4 significant digits, e.g. `68.32 pF`.
pub fn si(value: f64, unit: &str) -> String {
    format_si_digits(value, unit, 4)
}

/// A level in dB with two decimals.
pub fn db(value: f64) -> String {
    format!("{value:.2} dB")
}

/// An optional value, or `none` (e.g. a −60 dB bandwidth outside the analysed range).
pub fn opt(value: Option<f64>, f: impl Fn(f64) -> String) -> String {
    value.map(f).unwrap_or_else(|| "not reached".to_string())
}

/// A finite value or `infinite` (Qu of a lossless crystal, fp without C0).
pub fn finite(value: f64, f: impl Fn(f64) -> String) -> String {
    if value.is_finite() {
        f(value)
    } else {
        "infinite".to_string()
    }
}

/// A plain number with `digits` significant digits and no unit (k, q, Qu).
pub fn num(value: f64, digits: usize) -> String {
    if !value.is_finite() {
        return "infinite".to_string();
    }
    if value != 0.0 && (value.abs() >= 1e6 || value.abs() < 1e-3) {
        return format!("{:.*e}", digits.saturating_sub(1), value);
    }
    let mag = if value == 0.0 {
        0
    } else {
        value.abs().log10().floor() as i32
    };
    let decimals = (digits as i32 - 1 - mag).max(0) as usize;
    format!("{value:.decimals$}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn digits_per_kind() {
        assert_eq!(freq(11_055_823.0), "11.0558230 MHz");
        assert_eq!(width(2400.0), "2.400 kHz");
        assert_eq!(si(68.32e-12, "F"), "68.32 pF");
        assert_eq!(num(0.76537, 4), "0.7654");
        assert_eq!(num(95123.4, 4), "95123");
        assert_eq!(finite(f64::INFINITY, |v| num(v, 3)), "infinite");
    }
}
