//! Engineering values: text such as `9.000 MHz`, `4k7` or `3p5` in, SI base units out (and back).
//!
//! Inside the library every quantity is a plain `f64` in its SI base unit (Hz, H, F, Ω, s; dB
//! for levels). This module is the edge where people's notation is read and written.
//!
//! # What [`parse_quantity`] accepts
//! A value is a number, an optional SI prefix and an optional unit symbol of the expected
//! [`Quantity`], with optional spaces between the number and the rest:
//!
//! - numbers: `100`, `9.000`, `.5`, `1e-12`, `4.7E3`, with an optional `+` or `-` sign;
//! - SI prefixes, case-sensitive: `f` 10⁻¹⁵, `p` 10⁻¹², `n` 10⁻⁹, `u`/`µ`/`μ` 10⁻⁶ (ASCII u,
//!   micro sign U+00B5, Greek mu U+03BC), `m` 10⁻³, `k` (or `K`) 10³, `M` 10⁶, `G` 10⁹, `T` 10¹².
//!   `m` is milli and `M` is mega (common practice); `meg` in any case is also mega, for SPICE
//!   users (in SPICE itself `m` and `M` are both milli). The all-lowercase `mhz` is refused as
//!   ambiguous (mega or milli?): write `MHz` or `mHz`;
//! - unit symbols: `Hz` (any case), `H`/`h`, `F` (or `f` after a prefix, so a lone `f` is
//!   femto), `Ω` (U+03A9 or the ohm sign U+2126)/`ohm`/`ohms`/`R`, `s`, `dB` (any case).
//!   Dimensionless values take a prefix but no unit; decibels take a unit but no prefix;
//! - the letter-and-digit code of IEC 60062 \[1\], where the multiplier letter stands in the
//!   place of the decimal point: `4k7` = 4.7 k, `3p5` = 3.5 p, `2R2` = 2.2 Ω, `1M5` = 1.5 M,
//!   optionally followed by the unit (`4k7Ω`, `3p5F`). `R` as the decimal point means ohms and
//!   is accepted only for a resistance. The standard also writes values below one with a
//!   leading letter (`R47`, `p68`); those are rejected here, because a value that starts with a
//!   letter is far more often a typing slip: write `0R47` or `0.47` instead.
//!
//! Not accepted: `NaN`, `inf`, values that overflow `f64`, non-zero values that underflow to
//! zero, negative values of physical quantities (frequency, inductance, capacitance,
//! resistance, time), more than one decimal point, unknown suffixes, and units of another kind
//! (`15pH` for a capacitance). Each gives an [`Error`] whose message names the field, quotes the
//! text and says what would be valid.
//!
//! The number is rounded once: the mantissa digits and the combined power of ten (exponent plus
//! prefix) go to the correctly rounded decimal-to-binary conversion of the standard library, so
//! `9.0001M`, `9.0001 MHz`, `9000.1k` and `9000100` give the same `f64`.
//!
//! # Formatting
//! [`format_si`] writes 4 significant digits with the prefix that leaves 1 to 3 digits before the
//! point (`9.000 MHz`, `15.00 mH`); values beyond the prefixes (below 1 f or from 1000 T up) fall
//! back to exponent notation. Decibels never get a prefix. Every finite output parses back with
//! [`parse_quantity`] to within half a unit of the last digit written.
//!
//! # References
//! 1. IEC 60062:2016, *Marking codes for resistors and capacitors*, the letter and digit code.
//! 2. BIPM, *The International System of Units (SI)*, 9th edition, 2019, table 7 (SI prefixes; table number
//!    from memory).

use crate::error::{Error, ErrorKind, Result};
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// The kind of an engineering value, which fixes its unit symbol.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Quantity {
    /// Frequency, Hz.
    Frequency,
    /// Inductance, H.
    Inductance,
    /// Capacitance, F.
    Capacitance,
    /// Resistance, Ω (also written `ohm` or `R`).
    Resistance,
    /// Time, s.
    Time,
    /// A pure number (ratio, count, angle in degrees...): prefixes allowed, no unit.
    Dimensionless,
    /// A level in decibels, dB: unit allowed, no prefix.
    Decibels,
}

const ALL_QUANTITIES: [Quantity; 7] = [
    Quantity::Frequency,
    Quantity::Inductance,
    Quantity::Capacitance,
    Quantity::Resistance,
    Quantity::Time,
    Quantity::Dimensionless,
    Quantity::Decibels,
];

impl Quantity {
    /// The lowercase name used in messages: `"frequency"`, `"capacitance"`...
    pub fn name(self) -> &'static str {
        match self {
            Quantity::Frequency => "frequency",
            Quantity::Inductance => "inductance",
            Quantity::Capacitance => "capacitance",
            Quantity::Resistance => "resistance",
            Quantity::Time => "time",
            Quantity::Dimensionless => "number",
            Quantity::Decibels => "level",
        }
    }

    /// The canonical unit symbol: `"Hz"`, `"H"`, `"F"`, `"Ω"`, `"s"`, `""` or `"dB"`.
    pub fn unit_symbol(self) -> &'static str {
        match self {
            Quantity::Frequency => "Hz",
            Quantity::Inductance => "H",
            Quantity::Capacitance => "F",
            Quantity::Resistance => "Ω",
            Quantity::Time => "s",
            Quantity::Dimensionless => "",
            Quantity::Decibels => "dB",
        }
    }

    /// The name with its article, for messages: `"a capacitance"`, `"an inductance"`.
    fn with_article(self) -> &'static str {
        match self {
            Quantity::Frequency => "a frequency",
            Quantity::Inductance => "an inductance",
            Quantity::Capacitance => "a capacitance",
            Quantity::Resistance => "a resistance",
            Quantity::Time => "a time",
            Quantity::Dimensionless => "a number",
            Quantity::Decibels => "a level",
        }
    }

    /// Whether a negative value is meaningful for this kind (only levels and pure numbers).
    pub fn allows_negative(self) -> bool {
        matches!(self, Quantity::Dimensionless | Quantity::Decibels)
    }

    /// Whether `u` (the text after any prefix) is a unit symbol of this kind.
    fn has_unit(self, u: &str, after_prefix: bool) -> bool {
        match self {
            Quantity::Frequency => u.eq_ignore_ascii_case("hz"),
            Quantity::Inductance => u == "H" || u == "h",
            // A lone `f` is the femto prefix; `pf`, `nf`, `uf` are common spellings of pF...
            Quantity::Capacitance => u == "F" || (after_prefix && u == "f"),
            Quantity::Resistance => {
                u == "\u{03A9}"
                    || u == "\u{2126}"
                    || u == "R"
                    || u.eq_ignore_ascii_case("ohm")
                    || u.eq_ignore_ascii_case("ohms")
            }
            Quantity::Time => u == "s",
            Quantity::Dimensionless => false,
            Quantity::Decibels => u.eq_ignore_ascii_case("db"),
        }
    }

    /// A short phrase of valid examples, for messages.
    fn examples(self) -> &'static str {
        match self {
            Quantity::Frequency => "a frequency such as 9M, 9MHz, 9.000 MHz or 9000000",
            Quantity::Inductance => "an inductance such as 15m, 15mH, 22u or 1e-3",
            Quantity::Capacitance => "a capacitance such as 15p, 15pF, 3p5, 4.7nF or 1e-12",
            Quantity::Resistance => "a resistance such as 50, 50R, 50ohm, 2R2, 4k7 or 1M5",
            Quantity::Time => "a time such as 1.5ms, 22us or 3e-9",
            Quantity::Dimensionless => "a number such as 2.5, 1e-3 or 2.4k",
            Quantity::Decibels => "a level such as -3, -3dB or 0.5 dB",
        }
    }

    /// The prefix that makes the most typical example, e.g. `p` for a capacitance.
    fn typical_prefix(self) -> &'static str {
        match self {
            Quantity::Frequency => "M",
            Quantity::Inductance => "m",
            Quantity::Capacitance => "p",
            Quantity::Time => "u",
            Quantity::Resistance | Quantity::Dimensionless | Quantity::Decibels => "",
        }
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// The power of ten of a one-character SI prefix, or `None`.
fn prefix_exponent(c: char) -> Option<i32> {
    Some(match c {
        'f' => -15,
        'p' => -12,
        'n' => -9,
        'u' | '\u{00B5}' | '\u{03BC}' => -6,
        'm' => -3,
        'k' | 'K' => 3,
        'M' => 6,
        'G' => 9,
        'T' => 12,
        _ => return None,
    })
}

/// The pieces of a plain decimal number: sign, integer digits, fraction digits, exponent.
#[derive(Debug, Clone, Copy)]
struct Number<'a> {
    negative: bool,
    int_digits: &'a str,
    frac_digits: &'a str,
    has_point: bool,
    exponent: Option<i64>,
}

impl Number<'_> {
    fn has_digits(&self) -> bool {
        !self.int_digits.is_empty() || !self.frac_digits.is_empty()
    }

    fn has_nonzero_digit(&self) -> bool {
        self.int_digits
            .bytes()
            .chain(self.frac_digits.bytes())
            .any(|b| b != b'0')
    }

    /// The value times 10^`extra_exp`, rounded once. `None` when it is not finite.
    fn value_scaled(&self, extra_exp: i32) -> Option<f64> {
        // Exponents this large already overflow or underflow f64; clamping keeps the sum exact
        // in i64 and the formatted exponent short.
        let exp = self
            .exponent
            .unwrap_or(0)
            .clamp(-100_000, 100_000)
            .saturating_add(i64::from(extra_exp));
        let int = if self.int_digits.is_empty() {
            "0"
        } else {
            self.int_digits
        };
        let frac = if self.frac_digits.is_empty() {
            "0"
        } else {
            self.frac_digits
        };
        let mut buf = StackBuf::new();
        let v = if buf.push_number(self.negative, int, frac, exp) {
            buf.as_str().parse::<f64>().ok()?
        } else {
            let sign = if self.negative { "-" } else { "" };
            format!("{sign}{int}.{frac}e{exp}").parse::<f64>().ok()?
        };
        v.is_finite().then_some(v)
    }
}

/// A small fixed buffer that keeps short numbers off the heap.
struct StackBuf {
    bytes: [u8; 96],
    len: usize,
}

impl StackBuf {
    fn new() -> Self {
        StackBuf {
            bytes: [0; 96],
            len: 0,
        }
    }

    fn push(&mut self, s: &str) -> bool {
        let end = self.len + s.len();
        match self.bytes.get_mut(self.len..end) {
            Some(dst) => {
                dst.copy_from_slice(s.as_bytes());
                self.len = end;
                true
            }
            None => false,
        }
    }

    /// Write `[-]int.frac e exp`; false when it does not fit.
    fn push_number(&mut self, negative: bool, int: &str, frac: &str, exp: i64) -> bool {
        use std::fmt::Write as _;
        (!negative || self.push("-"))
            && self.push(int)
            && self.push(".")
            && self.push(frac)
            && self.push("e")
            && write!(self, "{exp}").is_ok()
    }

    fn as_str(&self) -> &str {
        // Only whole &str slices were pushed, so this is valid UTF-8.
        std::str::from_utf8(self.bytes.get(..self.len).unwrap_or_default()).unwrap_or_default()
    }
}

impl fmt::Write for StackBuf {
    fn write_str(&mut self, s: &str) -> fmt::Result {
        if self.push(s) {
            Ok(())
        } else {
            Err(fmt::Error)
        }
    }
}

fn take_digits(s: &str) -> (&str, &str) {
    let end = s
        .bytes()
        .position(|b| !b.is_ascii_digit())
        .unwrap_or(s.len());
    s.split_at(end)
}

/// Scan a plain decimal number at the start of `s`; returns it and the rest of the text.
fn scan_number(s: &str) -> (Number<'_>, &str) {
    let (negative, body) = match s.as_bytes().first() {
        Some(b'-') => (true, &s[1..]),
        Some(b'+') => (false, &s[1..]),
        _ => (false, s),
    };
    let (int_digits, rest) = take_digits(body);
    let (has_point, frac_digits, rest) = match rest.strip_prefix('.') {
        Some(after) => {
            let (frac, rest) = take_digits(after);
            (true, frac, rest)
        }
        None => (false, "", rest),
    };
    let mut number = Number {
        negative,
        int_digits,
        frac_digits,
        has_point,
        exponent: None,
    };
    let mut rest = rest;
    if number.has_digits() {
        if let Some(after_e) = rest.strip_prefix(['e', 'E']) {
            let (exp_negative, after_sign) = match after_e.as_bytes().first() {
                Some(b'-') => (true, &after_e[1..]),
                Some(b'+') => (false, &after_e[1..]),
                _ => (false, after_e),
            };
            let (exp_digits, after_exp) = take_digits(after_sign);
            if !exp_digits.is_empty() {
                // Saturate: anything this long overflows or underflows anyway.
                let magnitude = exp_digits.bytes().fold(0i64, |acc, b| {
                    acc.saturating_mul(10).saturating_add(i64::from(b - b'0'))
                });
                number.exponent = Some(if exp_negative { -magnitude } else { magnitude });
                rest = after_exp;
            }
        }
    }
    (number, rest)
}

/// Parse a plain real number (`-1.5`, `2e-3`, `.5`), the whole of `text`, with no prefix or
/// unit. Rejects `NaN`, `inf` and values that overflow. Used by the file readers.
pub(crate) fn parse_plain_number(text: &str) -> Option<f64> {
    let (number, rest) = scan_number(text);
    if !rest.is_empty() || !number.has_digits() {
        return None;
    }
    number.value_scaled(0)
}

/// How the text after the number scales it, or what is wrong with it.
enum SuffixProblem {
    /// A unit symbol of another kind (the unit text and that kind).
    WrongUnit(String, Quantity),
    /// A prefix on a kind that takes none (decibels).
    PrefixNotAllowed,
    /// A spelling that could mean two things (`mhz`).
    Ambiguous(&'static str),
    /// Anything else.
    Unknown,
}

/// Split off a leading SI prefix: `meg` (any case) or one prefix character.
fn split_prefix(suffix: &str) -> Option<(i32, &str)> {
    if let Some(head) = suffix.get(..3) {
        if head.eq_ignore_ascii_case("meg") {
            return Some((6, &suffix[3..]));
        }
    }
    let c = suffix.chars().next()?;
    prefix_exponent(c).map(|e| (e, &suffix[c.len_utf8()..]))
}

/// The power of ten a suffix (prefix and/or unit) stands for.
fn suffix_exponent(suffix: &str, kind: Quantity) -> std::result::Result<i32, SuffixProblem> {
    if suffix.is_empty() || kind.has_unit(suffix, false) {
        return Ok(0);
    }
    if kind == Quantity::Frequency && suffix == "mhz" {
        return Err(SuffixProblem::Ambiguous(
            "'mhz' could mean megahertz or millihertz; write MHz (mega) or mHz (milli)",
        ));
    }
    if let Some((exp, unit)) = split_prefix(suffix) {
        if unit.is_empty() || kind.has_unit(unit, true) {
            if kind == Quantity::Decibels {
                return Err(SuffixProblem::PrefixNotAllowed);
            }
            return Ok(exp);
        }
    }
    // Not valid: is it a unit of another kind, with or without a prefix?
    let candidates = [Some(suffix), split_prefix(suffix).map(|(_, u)| u)];
    for unit in candidates.into_iter().flatten() {
        if unit.is_empty() {
            continue;
        }
        for other in ALL_QUANTITIES {
            if other != kind && other.has_unit(unit, true) {
                return Err(SuffixProblem::WrongUnit(unit.to_string(), other));
            }
        }
    }
    Err(SuffixProblem::Unknown)
}

fn parse_error(field: &str, text: &str, problem: impl fmt::Display, kind: Quantity) -> Error {
    Error::new(
        ErrorKind::Parse,
        format!("{field} '{text}': {problem}; expected {}", kind.examples()),
    )
}

fn value_error(field: &str, text: &str, problem: impl fmt::Display) -> Error {
    Error::new(
        ErrorKind::InvalidValue,
        format!("{field} '{text}': {problem}"),
    )
}

/// A hint of the valid spelling, built from the user's own number: `15p or 15pF`.
fn spelling_example(kind: Quantity, number_text: &str) -> String {
    let prefix = kind.typical_prefix();
    match kind {
        Quantity::Dimensionless => number_text.to_string(),
        Quantity::Resistance => format!("{number_text}, {number_text}R or {number_text}Ω"),
        _ => format!(
            "{number_text}{prefix} or {number_text}{prefix}{}",
            kind.unit_symbol()
        ),
    }
}

/// Parse an engineering value of `kind` into its SI base unit.
///
/// `field` names the value in messages (`"C12"`, `"capacitance"`, `"--center"`). See the
/// [module documentation](self) for the accepted forms. Negative values are accepted only for
/// [`Quantity::Decibels`] and [`Quantity::Dimensionless`]; a `-0` comes back as `0.0`.
///
/// # Errors
/// [`ErrorKind::Parse`] when the text is not a value of this kind (empty, not a number, `NaN`,
/// unknown suffix, wrong unit); [`ErrorKind::InvalidValue`] when it is a number out of range
/// (overflow, underflow to zero, negative for a physical quantity).
///
/// ```
/// use filter_core::units::{parse_quantity, Quantity};
/// assert_eq!(parse_quantity("C1", "4.7nF", Quantity::Capacitance)?, 4.7e-9);
/// assert_eq!(parse_quantity("R1", "4k7", Quantity::Resistance)?, 4700.0);
/// assert!(parse_quantity("C1", "15pH", Quantity::Capacitance).is_err());
/// # Ok::<(), filter_core::Error>(())
/// ```
pub fn parse_quantity(field: &str, text: &str, kind: Quantity) -> Result<f64> {
    let trimmed = text.trim();
    if trimmed.is_empty() {
        return Err(parse_error(field, text, "empty", kind));
    }
    let (number, rest) = scan_number(trimmed);
    if !number.has_digits() {
        let unsigned = trimmed.trim_start_matches(['+', '-']);
        let lower_is = |w: &str| unsigned.eq_ignore_ascii_case(w);
        if lower_is("nan") || lower_is("inf") || lower_is("infinity") {
            return Err(parse_error(field, text, "not a finite number", kind));
        }
        let mut chars = unsigned.chars();
        let first = chars.next();
        let second = chars.next();
        if let (Some(letter), Some(digit)) = (first, second) {
            if (prefix_exponent(letter).is_some() || letter == 'R') && digit.is_ascii_digit() {
                return Err(Error::new(
                    ErrorKind::Parse,
                    format!(
                        "{field} '{text}': a value must start with a digit; the IEC 60062 form \
                         with a leading letter is not accepted, write 0{unsigned} or a plain \
                         number instead"
                    ),
                ));
            }
        }
        return Err(parse_error(field, text, "not a number", kind));
    }
    let number_text = &trimmed[..trimmed.len() - rest.len()];

    // IEC 60062 letter-and-digit code: digits, a multiplier letter in the place of the decimal
    // point, more digits, then an optional unit.
    let mut iec: Option<(i32, &str, &str)> = None; // (exponent, fraction digits, unit text)
    if let Some(letter) = rest.chars().next() {
        let after_letter = &rest[letter.len_utf8()..];
        let (frac, after_frac) = take_digits(after_letter);
        let letter_exp = if letter == 'R' {
            Some(0)
        } else {
            prefix_exponent(letter)
        };
        if let (Some(exp), false) = (letter_exp, frac.is_empty()) {
            if number.has_point || number.exponent.is_some() || number.int_digits.is_empty() {
                return Err(parse_error(
                    field,
                    text,
                    format_args!(
                        "a decimal point or exponent cannot be combined with an IEC 60062 \
                         letter code"
                    ),
                    kind,
                ));
            }
            if letter == 'R' && kind != Quantity::Resistance {
                return Err(parse_error(
                    field,
                    text,
                    format_args!(
                        "the letter R in the place of the decimal point (IEC 60062) marks a \
                         resistance, not {}",
                        kind.with_article()
                    ),
                    kind,
                ));
            }
            iec = Some((exp, frac, after_frac.trim_start()));
        }
    }

    let (digits, exp) = match iec {
        Some((exp, frac, unit)) => {
            if !(unit.is_empty() || kind.has_unit(unit, true)) {
                let problem = match suffix_exponent(unit, kind) {
                    Err(SuffixProblem::WrongUnit(u, other)) => format!(
                        "unit '{u}' is not {} unit ({} is), use {}",
                        kind.with_article(),
                        other.name(),
                        unit_or_none(kind)
                    ),
                    _ => format!("unknown unit '{unit}' after the letter code"),
                };
                return Err(parse_error(field, text, problem, kind));
            }
            if kind == Quantity::Decibels {
                return Err(parse_error(field, text, "decibels take no prefix", kind));
            }
            (
                Number {
                    frac_digits: frac,
                    has_point: true,
                    ..number
                },
                exp,
            )
        }
        None => {
            let suffix = rest.trim_start();
            if suffix.starts_with('.') {
                return Err(parse_error(
                    field,
                    text,
                    "more than one decimal point",
                    kind,
                ));
            }
            match suffix_exponent(suffix, kind) {
                Ok(exp) => (number, exp),
                Err(SuffixProblem::PrefixNotAllowed) => {
                    return Err(parse_error(
                        field,
                        text,
                        format_args!("decibels take no prefix ('{suffix}')"),
                        kind,
                    ))
                }
                Err(SuffixProblem::WrongUnit(unit, _)) => {
                    let ex = spelling_example(kind, number_text);
                    let problem = match kind {
                        Quantity::Dimensionless => {
                            format!("unit '{unit}' is not allowed on a pure number; e.g. {ex}")
                        }
                        _ => format!(
                            "unit '{unit}' is not {} unit; use {}, e.g. {ex}",
                            kind.with_article(),
                            unit_or_none(kind)
                        ),
                    };
                    return Err(Error::new(
                        ErrorKind::Parse,
                        format!("{field} '{text}': {problem}"),
                    ));
                }
                Err(SuffixProblem::Ambiguous(why)) => {
                    return Err(parse_error(field, text, why, kind))
                }
                Err(SuffixProblem::Unknown) => {
                    let unit_part = match kind {
                        Quantity::Dimensionless => String::from("no unit"),
                        Quantity::Decibels => String::from("no prefix and optionally dB"),
                        _ => format!(
                            "an SI prefix (f p n u µ m k M G T, or meg) and optionally {}",
                            unit_or_none(kind)
                        ),
                    };
                    return Err(Error::new(
                        ErrorKind::Parse,
                        format!(
                            "{field} '{text}': unknown suffix '{suffix}'; expected {unit_part}, \
                             e.g. {}",
                            spelling_example(kind, number_text)
                        ),
                    ));
                }
            }
        }
    };

    let value = digits.value_scaled(exp).ok_or_else(|| {
        value_error(
            field,
            text,
            "too large; expected a finite value below about 1.8e308",
        )
    })?;
    if value == 0.0 && digits.has_nonzero_digit() {
        return Err(value_error(
            field,
            text,
            "too small to represent (underflows to zero); expected zero or a magnitude of at \
             least about 5e-324",
        ));
    }
    if value < 0.0 && !kind.allows_negative() {
        return Err(value_error(
            field,
            text,
            format_args!("negative; {} must be zero or more", kind.with_article()),
        ));
    }
    // Turn -0 into +0.
    Ok(value + 0.0)
}

fn unit_or_none(kind: Quantity) -> String {
    match kind {
        Quantity::Resistance => String::from("Ω, ohm or R"),
        Quantity::Dimensionless => String::from("no unit"),
        Quantity::Frequency => String::from("Hz"),
        _ => kind.unit_symbol().to_string(),
    }
}

/// [`parse_quantity`], then require a value greater than zero.
///
/// # Errors
/// As [`parse_quantity`]; [`ErrorKind::InvalidValue`] for zero or a negative value.
pub fn parse_positive(field: &str, text: &str, kind: Quantity) -> Result<f64> {
    let value = parse_quantity(field, text, kind)?;
    if value > 0.0 {
        Ok(value)
    } else {
        Err(value_error(
            field,
            text,
            format_args!("must be greater than zero; expected {}", kind.examples()),
        ))
    }
}

/// [`parse_quantity`], then require a value of zero or more (also for decibels and numbers).
///
/// # Errors
/// As [`parse_quantity`]; [`ErrorKind::InvalidValue`] for a negative value.
pub fn parse_non_negative(field: &str, text: &str, kind: Quantity) -> Result<f64> {
    let value = parse_quantity(field, text, kind)?;
    if value >= 0.0 {
        Ok(value)
    } else {
        Err(value_error(
            field,
            text,
            format_args!("negative; expected zero or more, e.g. {}", kind.examples()),
        ))
    }
}

fn si_prefix(exp: i32) -> &'static str {
    match exp {
        -15 => "f",
        -12 => "p",
        -9 => "n",
        -6 => "\u{00B5}",
        -3 => "m",
        3 => "k",
        6 => "M",
        9 => "G",
        12 => "T",
        _ => "",
    }
}

/// Format `value` (SI base unit) with 4 significant digits and an SI prefix: `9.000 MHz`.
///
/// Zero is `0 F`; non-finite values are `inf F`, `-inf F` and `NaN F`. With an empty unit the
/// prefix follows the number directly (`2.400k`). See [`format_si_digits`].
///
/// ```
/// use filter_core::units::format_si;
/// assert_eq!(format_si(9e6, "Hz"), "9.000 MHz");
/// assert_eq!(format_si(0.015, "H"), "15.00 mH");
/// ```
pub fn format_si(value: f64, unit: &str) -> String {
    format_si_digits(value, unit, 4)
}

/// Format `value` with `digits` significant digits (clamped to 1..=17) and an SI prefix.
///
/// The prefix is chosen after rounding, so 999.96 with 4 digits is `1.000 k`. Values below
/// 1 f or from 1000 T up are written in exponent notation (`1.000e-18 F`). When `unit` is
/// `"dB"` no prefix is used (exponent notation outside 10⁻⁶..10⁹). Trailing zeros are kept:
/// they state the precision.
pub fn format_si_digits(value: f64, unit: &str, digits: usize) -> String {
    let digits = digits.clamp(1, 17);
    let sep = if unit.is_empty() { "" } else { " " };
    if value.is_nan() {
        return format!("NaN{sep}{unit}");
    }
    if value.is_infinite() {
        let sign = if value < 0.0 { "-" } else { "" };
        return format!("{sign}inf{sep}{unit}");
    }
    if value == 0.0 {
        return format!("0{sep}{unit}");
    }
    let sign = if value < 0.0 { "-" } else { "" };
    let sci = format!("{:.*e}", digits - 1, value.abs());
    let (mantissa, exp_text) = sci.split_once('e').unwrap_or((sci.as_str(), "0"));
    let exp: i32 = exp_text.parse().unwrap_or(0);
    let decibels = unit == "dB";
    let group = if decibels { 0 } else { exp.div_euclid(3) * 3 };
    let in_range = if decibels {
        (-6..9).contains(&exp)
    } else {
        (-15..15).contains(&exp)
    };
    if !in_range {
        let mut mantissa = mantissa.to_string();
        // Rounding up can pass f64::MAX (1.7976931348623157e308 at 4 digits is 1.798e308,
        // which reads back as infinity): then round toward zero instead, so that what is
        // written always reads back as a finite number.
        if !format!("{mantissa}e{exp}")
            .parse::<f64>()
            .is_ok_and(f64::is_finite)
        {
            mantissa = format!("{:.*e}", digits - 1, value.abs())
                .split_once('e')
                .map_or(mantissa.clone(), |(m, _)| {
                    let places = m.split_once('.').map_or(0, |(_, f)| f.len());
                    let scale = 10f64.powi(places as i32);
                    let down = (m.parse::<f64>().unwrap_or(0.0) * scale - 1.0) / scale;
                    format!("{down:.places$}")
                });
        }
        return format!("{sign}{mantissa}e{exp}{sep}{unit}");
    }
    let all_digits: String = mantissa.chars().filter(char::is_ascii_digit).collect();
    let int_len = exp - group + 1;
    let number = if int_len <= 0 {
        let zeros = "0".repeat(usize::try_from(-int_len).unwrap_or(0));
        format!("0.{zeros}{all_digits}")
    } else {
        let int_len = usize::try_from(int_len).unwrap_or(1);
        if int_len >= all_digits.len() {
            let zeros = "0".repeat(int_len - all_digits.len());
            format!("{all_digits}{zeros}")
        } else {
            let (int, frac) = all_digits.split_at(int_len);
            format!("{int}.{frac}")
        }
    };
    let prefix = si_prefix(group);
    let sep = if unit.is_empty() && !prefix.is_empty() {
        ""
    } else {
        sep
    };
    format!("{sign}{number}{sep}{prefix}{unit}")
}

macro_rules! quantity_newtype {
    ($(#[$doc:meta])* $name:ident, $kind:expr) => {
        $(#[$doc])*
        ///
        /// Parses with [`parse_quantity`] (`FromStr`) and displays with [`format_si_digits`]:
        /// 4 significant digits, or the precision given (`{:.6}` gives 6 digits).
        #[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize, Deserialize)]
        #[serde(transparent)]
        pub struct $name(pub f64);

        impl $name {
            /// The value in the SI base unit.
            pub fn value(self) -> f64 {
                self.0
            }
        }

        impl FromStr for $name {
            type Err = Error;
            fn from_str(s: &str) -> Result<Self> {
                parse_quantity($kind.name(), s, $kind).map($name)
            }
        }

        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                let digits = f.precision().unwrap_or(4);
                f.write_str(&format_si_digits(self.0, $kind.unit_symbol(), digits))
            }
        }

        impl From<$name> for f64 {
            fn from(v: $name) -> f64 {
                v.0
            }
        }
    };
}

quantity_newtype!(
    /// A frequency in hertz.
    Hertz,
    Quantity::Frequency
);
quantity_newtype!(
    /// An inductance in henries.
    Henries,
    Quantity::Inductance
);
quantity_newtype!(
    /// A capacitance in farads.
    Farads,
    Quantity::Capacitance
);
quantity_newtype!(
    /// A resistance in ohms.
    Ohms,
    Quantity::Resistance
);
quantity_newtype!(
    /// A time in seconds.
    Seconds,
    Quantity::Time
);
quantity_newtype!(
    /// A level in decibels (may be negative).
    Decibels,
    Quantity::Decibels
);

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use proptest::test_runner::{Config, RngAlgorithm, TestRng, TestRunner};

    /// A property-test runner with a fixed seed and no failure files.
    fn runner(cases: u32) -> TestRunner {
        let config = Config {
            cases,
            failure_persistence: None,
            ..Config::default()
        };
        TestRunner::new_with_rng(config, TestRng::deterministic_rng(RngAlgorithm::ChaCha))
    }

    fn q(text: &str, kind: Quantity) -> f64 {
        match parse_quantity("value", text, kind) {
            Ok(v) => v,
            Err(e) => panic!("'{text}' should parse: {e}"),
        }
    }

    fn err(text: &str, kind: Quantity) -> Error {
        match parse_quantity("value", text, kind) {
            Ok(v) => panic!("'{text}' should be rejected, got {v}"),
            Err(e) => e,
        }
    }

    // Exact equality below is deliberate: the parser rounds the decimal value once, as Rust's
    // float literals do, so `9.000 MHz` must give exactly the f64 nearest 9e6.

    #[test]
    fn plain_and_prefixed_frequencies() {
        use Quantity::Frequency as F;
        for text in [
            "9M",
            "9MHz",
            "9.000 MHz",
            "9 MHz",
            "9000000",
            "9e6",
            "9E+6",
            "9000k",
        ] {
            assert_eq!(q(text, F), 9e6, "{text}");
        }
        assert_eq!(q("2.4k", F), 2400.0);
        assert_eq!(q("2.4kHz", F), 2400.0);
        assert_eq!(q("9.0001M", F), q("9000100", F));
        assert_eq!(q("9.0001M", F), 9_000_100.0);
        assert_eq!(q("10.7 MHZ", F), 10.7e6);
        assert_eq!(q("1GHz", F), 1e9);
        assert_eq!(q("15mHz", F), 15e-3);
    }

    #[test]
    fn milli_versus_mega() {
        // Common practice: lowercase m is milli, uppercase M is mega; SPICE's meg is mega.
        assert_eq!(q("15m", Quantity::Inductance), 15e-3);
        assert_eq!(q("15mH", Quantity::Inductance), 15e-3);
        assert_eq!(q("15M", Quantity::Resistance), 15e6);
        for text in ["1meg", "1MEG", "1Meg", "1megohm", "1 MEGHz"] {
            let kind = if text.ends_with("Hz") {
                Quantity::Frequency
            } else {
                Quantity::Resistance
            };
            assert_eq!(q(text, kind), 1e6, "{text}");
        }
    }

    #[test]
    fn prefixes_and_units_of_every_kind() {
        assert_eq!(q("3.5p", Quantity::Capacitance), 3.5e-12);
        assert_eq!(q("3.5pF", Quantity::Capacitance), 3.5e-12);
        assert_eq!(q("3.5pf", Quantity::Capacitance), 3.5e-12);
        assert_eq!(q("4.7nF", Quantity::Capacitance), 4.7e-9);
        assert_eq!(q("1e-12", Quantity::Capacitance), 1e-12);
        assert_eq!(q("2f", Quantity::Capacitance), 2e-15); // a lone f is femto
        assert_eq!(q("1F", Quantity::Capacitance), 1.0);
        // ASCII u, micro sign U+00B5 and Greek small mu U+03BC.
        for text in [
            "22u",
            "22\u{00B5}",
            "22\u{03BC}",
            "22uH",
            "22\u{00B5}H",
            "22 \u{03BC}H",
        ] {
            assert_eq!(q(text, Quantity::Inductance), 22e-6, "{text}");
        }
        assert_eq!(q("100", Quantity::Resistance), 100.0);
        for text in [
            "50R",
            "50ohm",
            "50 ohms",
            "50Ohm",
            "50\u{03A9}",
            "50\u{2126}",
            "50 Ω",
        ] {
            assert_eq!(q(text, Quantity::Resistance), 50.0, "{text}");
        }
        assert_eq!(q("4.7kΩ", Quantity::Resistance), 4700.0);
        assert_eq!(q("4.7K", Quantity::Resistance), 4700.0);
        assert_eq!(q("1.5ms", Quantity::Time), 1.5e-3);
        assert_eq!(q("3ns", Quantity::Time), 3e-9);
        assert_eq!(q("2s", Quantity::Time), 2.0);
        assert_eq!(q("-3dB", Quantity::Decibels), -3.0);
        assert_eq!(q("-0.5 DB", Quantity::Decibels), -0.5);
        assert_eq!(q("-3", Quantity::Decibels), -3.0);
        assert_eq!(q("-2.5k", Quantity::Dimensionless), -2500.0);
        assert_eq!(q("+.5", Quantity::Dimensionless), 0.5);
        assert_eq!(q("5.", Quantity::Dimensionless), 5.0);
        assert_eq!(q("  7  ", Quantity::Dimensionless), 7.0);
    }

    #[test]
    fn iec_60062_letter_as_decimal_point() {
        // Source: IEC 60062:2016, Marking codes for resistors and capacitors, letter and digit
        // code: the multiplier letter (R, k, M, G, T for resistors; p, n, µ, m for capacitors)
        // stands in the place of the decimal point. The example codes are from memory of the
        // standard's tables.
        assert_eq!(q("4k7", Quantity::Resistance), 4700.0);
        assert_eq!(q("4K7", Quantity::Resistance), 4700.0);
        assert_eq!(q("2R2", Quantity::Resistance), 2.2);
        assert_eq!(q("1M5", Quantity::Resistance), 1.5e6);
        assert_eq!(q("6G8", Quantity::Resistance), 6.8e9);
        assert_eq!(q("4k7Ω", Quantity::Resistance), 4700.0);
        assert_eq!(q("4k7 ohm", Quantity::Resistance), 4700.0);
        assert_eq!(q("3p5", Quantity::Capacitance), 3.5e-12);
        assert_eq!(q("3p5F", Quantity::Capacitance), 3.5e-12);
        assert_eq!(q("4n7", Quantity::Capacitance), 4.7e-9);
        assert_eq!(q("2u2", Quantity::Capacitance), 2.2e-6);
        assert_eq!(q("2\u{00B5}2", Quantity::Capacitance), 2.2e-6);
        assert_eq!(q("6m8", Quantity::Inductance), 6.8e-3);
        assert_eq!(q("10k75", Quantity::Resistance), 10750.0);
        assert_eq!(q("0R47", Quantity::Resistance), 0.47);
        assert_eq!(q("10M7", Quantity::Frequency), 10.7e6);
        // The letter form and the decimal form give the same f64.
        assert_eq!(
            q("4k7", Quantity::Resistance),
            q("4.7k", Quantity::Resistance)
        );
        assert_eq!(
            q("3p5", Quantity::Capacitance),
            q("3.5pF", Quantity::Capacitance)
        );
    }

    #[test]
    fn errors_name_the_field_quote_the_text_and_say_what_is_valid() {
        let e = parse_quantity("capacitance", "15pH", Quantity::Capacitance).unwrap_err();
        assert_eq!(e.kind(), ErrorKind::Parse);
        assert_eq!(
            e.message(),
            "capacitance '15pH': unit 'H' is not a capacitance unit; use F, e.g. 15p or 15pF"
        );
        let e = parse_quantity("C12", "1.2.3", Quantity::Capacitance).unwrap_err();
        assert!(e
            .message()
            .starts_with("C12 '1.2.3': more than one decimal point"));
        assert!(e.message().contains("15pF"), "{}", e.message());
    }

    #[test]
    fn every_garbage_class_is_rejected() {
        use ErrorKind::{InvalidValue, Parse};
        let cases: &[(&str, Quantity, ErrorKind, &str)] = &[
            (
                "1.2.3",
                Quantity::Capacitance,
                Parse,
                "more than one decimal point",
            ),
            ("k5", Quantity::Resistance, Parse, "must start with a digit"),
            (
                "R47",
                Quantity::Resistance,
                Parse,
                "must start with a digit",
            ),
            ("", Quantity::Frequency, Parse, "empty"),
            ("   ", Quantity::Frequency, Parse, "empty"),
            ("NaN", Quantity::Frequency, Parse, "not a finite number"),
            ("nan", Quantity::Dimensionless, Parse, "not a finite number"),
            ("inf", Quantity::Frequency, Parse, "not a finite number"),
            (
                "-Infinity",
                Quantity::Decibels,
                Parse,
                "not a finite number",
            ),
            ("-1", Quantity::Capacitance, InvalidValue, "negative"),
            ("-9MHz", Quantity::Frequency, InvalidValue, "negative"),
            ("-1", Quantity::Time, InvalidValue, "negative"),
            (
                "15pH",
                Quantity::Capacitance,
                Parse,
                "unit 'H' is not a capacitance unit",
            ),
            (
                "50R",
                Quantity::Capacitance,
                Parse,
                "unit 'R' is not a capacitance unit",
            ),
            (
                "9MHz",
                Quantity::Inductance,
                Parse,
                "unit 'Hz' is not an inductance unit",
            ),
            (
                "5Hz",
                Quantity::Dimensionless,
                Parse,
                "not allowed on a pure number",
            ),
            ("2R2", Quantity::Capacitance, Parse, "marks a resistance"),
            ("3mdB", Quantity::Decibels, Parse, "decibels take no prefix"),
            ("3k", Quantity::Decibels, Parse, "decibels take no prefix"),
            (
                "9mhz",
                Quantity::Frequency,
                Parse,
                "megahertz or millihertz",
            ),
            ("15x", Quantity::Capacitance, Parse, "unknown suffix 'x'"),
            ("1e", Quantity::Dimensionless, Parse, "unknown suffix 'e'"),
            ("4.7k7", Quantity::Resistance, Parse, "cannot be combined"),
            ("4k7H", Quantity::Resistance, Parse, "not a resistance unit"),
            ("abc", Quantity::Frequency, Parse, "not a number"),
            ("-", Quantity::Decibels, Parse, "not a number"),
            ("1e400", Quantity::Dimensionless, InvalidValue, "too large"),
            ("1e300T", Quantity::Frequency, InvalidValue, "too large"),
            ("1e-400", Quantity::Capacitance, InvalidValue, "too small"),
            (
                "1e99999999999999999999999",
                Quantity::Time,
                InvalidValue,
                "too large",
            ),
        ];
        for &(text, kind, want_kind, want_text) in cases {
            let e = err(text, kind);
            assert_eq!(e.kind(), want_kind, "'{text}': {e}");
            assert!(e.message().contains(want_text), "'{text}': {e}");
            assert!(e.message().starts_with(&format!("value '{text}': ")), "{e}");
        }
    }

    #[test]
    fn sign_rules_of_the_helpers() {
        assert_eq!(parse_positive("f", "9M", Quantity::Frequency), Ok(9e6));
        let e = parse_positive("f", "0", Quantity::Frequency).unwrap_err();
        assert_eq!(e.kind(), ErrorKind::InvalidValue);
        assert!(e.message().contains("greater than zero"), "{e}");
        assert_eq!(parse_non_negative("Rm", "0", Quantity::Resistance), Ok(0.0));
        let e = parse_non_negative("loss", "-3dB", Quantity::Decibels).unwrap_err();
        assert_eq!(e.kind(), ErrorKind::InvalidValue);
        assert!(parse_positive("k", "-1", Quantity::Dimensionless).is_err());
        // -0 is zero, with a positive sign.
        let z = q("-0", Quantity::Capacitance);
        assert!(z == 0.0 && z.is_sign_positive());
    }

    #[test]
    fn format_examples() {
        assert_eq!(format_si(9e6, "Hz"), "9.000 MHz");
        assert_eq!(format_si(2400.0, "Hz"), "2.400 kHz");
        assert_eq!(format_si(15e-3, "H"), "15.00 mH");
        assert_eq!(format_si(3.5e-12, "F"), "3.500 pF");
        assert_eq!(format_si(22e-6, "H"), "22.00 \u{00B5}H");
        assert_eq!(format_si(470.0, "Ω"), "470.0 Ω");
        assert_eq!(format_si(1.0, "s"), "1.000 s");
        assert_eq!(format_si(0.0, "F"), "0 F");
        assert_eq!(format_si(-0.0, "F"), "0 F");
        assert_eq!(format_si(f64::INFINITY, "Hz"), "inf Hz");
        assert_eq!(format_si(f64::NEG_INFINITY, "Hz"), "-inf Hz");
        assert_eq!(format_si(f64::NAN, "F"), "NaN F");
        assert_eq!(format_si(2400.0, ""), "2.400k");
        assert_eq!(format_si(3.0, ""), "3.000");
        // Rounding that carries into the next prefix.
        assert_eq!(format_si(999.96, "Hz"), "1.000 kHz");
        assert_eq!(format_si(999.94, "Hz"), "999.9 Hz");
        assert_eq!(format_si(-3.5, "dB"), "-3.500 dB");
        assert_eq!(format_si(0.001, "dB"), "0.001000 dB");
        assert_eq!(format_si(-1234.5, "dB"), "-1234 dB");
        assert_eq!(format_si(1e-18, "F"), "1.000e-18 F");
        assert_eq!(format_si(2e15, "Hz"), "2.000e15 Hz");
        assert_eq!(format_si(999.9e12, "Hz"), "999.9 THz");
        assert_eq!(format_si(1e-15, "F"), "1.000 fF");
        assert_eq!(format_si_digits(9.0001e6, "Hz", 6), "9.00010 MHz");
        assert_eq!(format_si_digits(16e-3, "H", 1), "20 mH");
        // 0.015 is stored as 0.01499999…, so one digit rounds it down, not half-up.
        assert_eq!(format_si_digits(15e-3, "H", 1), "10 mH");
        assert_eq!(format_si_digits(1.0 / 3.0, "F", 0), "300 mF"); // digits clamp to 1
        assert_eq!(
            format_si_digits(1.0 / 3.0, "F", 40),
            "333.33333333333331 mF"
        );
    }

    #[test]
    fn newtypes_parse_and_display() {
        let f: Hertz = "10.7MHz".parse().unwrap();
        assert_eq!(f, Hertz(10.7e6));
        assert_eq!(f.to_string(), "10.70 MHz");
        assert_eq!(format!("{f:.6}"), "10.7000 MHz");
        let c: Farads = "3p5".parse().unwrap();
        assert_eq!(f64::from(c), 3.5e-12);
        assert_eq!("4k7".parse::<Ohms>().unwrap().value(), 4700.0);
        assert_eq!("15mH".parse::<Henries>().unwrap().to_string(), "15.00 mH");
        assert_eq!("-3".parse::<Decibels>().unwrap().to_string(), "-3.000 dB");
        assert_eq!("2us".parse::<Seconds>().unwrap(), Seconds(2e-6));
        let e = "15pH".parse::<Farads>().unwrap_err();
        assert!(e.message().starts_with("capacitance '15pH'"), "{e}");
        assert_eq!(serde_json::to_string(&Hertz(9e6)).unwrap(), "9000000.0");
    }

    #[test]
    fn format_then_parse_round_trips_to_the_digits_written() {
        let kinds = [
            (Quantity::Frequency, "Hz"),
            (Quantity::Inductance, "H"),
            (Quantity::Capacitance, "F"),
            (Quantity::Resistance, "Ω"),
            (Quantity::Time, "s"),
            (Quantity::Dimensionless, ""),
        ];
        let strategy = (0..kinds.len(), -18.0f64..18.0, 1.0f64..10.0);
        runner(4000)
            .run(&strategy, |(k, exp, mantissa)| {
                let (kind, unit) = kinds[k];
                let x = mantissa * 10f64.powf(exp.floor());
                for digits in [4i32, 6] {
                    let text = format_si_digits(x, unit, digits as usize);
                    let back = parse_quantity("x", &text, kind)
                        .map_err(|e| TestCaseError::fail(format!("{text}: {e}")))?;
                    // Rounding to `digits` significant digits moves the value by at most half a
                    // unit in the last digit: 0.5·10^(1-digits) relative to a leading digit of
                    // 1; a hair more allows for the binary rounding of the result.
                    let bound = 0.5 * 10f64.powi(1 - digits) * (1.0 + 1e-12);
                    prop_assert!(((back - x) / x).abs() <= bound, "{x} -> {text} -> {back}");
                }
                // With 17 digits the round trip is exact.
                let text = format_si_digits(x, unit, 17);
                let back = parse_quantity("x", &text, kind)
                    .map_err(|e| TestCaseError::fail(format!("{text}: {e}")))?;
                prop_assert_eq!(back, x, "{}", text);
                Ok(())
            })
            .unwrap();
    }

    #[test]
    fn values_next_to_the_largest_double_read_back_finite() {
        // Rounded up at 4 digits, f64::MAX would print as 1.798e308: more than any double.
        for x in [f64::MAX, -f64::MAX, 0.9999 * f64::MAX, 1.7975e308] {
            for digits in [1, 4, 6, 17] {
                let text = format_si_digits(x, "", digits);
                let back = parse_quantity("x", &text, Quantity::Dimensionless)
                    .unwrap_or_else(|e| panic!("{text}: {e}"));
                assert!(back.is_finite(), "{x:e} -> {text}");
                let unit = 10f64.powi(308 - digits as i32 + 1);
                assert!(
                    (back - x).abs() <= unit * 1.000_001,
                    "{x:e} -> {text} -> {back:e}"
                );
            }
        }
    }

    #[test]
    fn decibels_round_trip() {
        let strategy = -200.0f64..200.0;
        runner(2000)
            .run(&strategy, |x| {
                let text = format_si_digits(x, "dB", 17);
                let back = parse_quantity("x", &text, Quantity::Decibels)
                    .map_err(|e| TestCaseError::fail(format!("{text}: {e}")))?;
                prop_assert_eq!(back, x, "{}", text);
                Ok(())
            })
            .unwrap();
    }

    #[test]
    fn mutated_valid_values_never_panic() {
        let valid = [
            "9.000 MHz",
            "4k7",
            "3p5F",
            "22µH",
            "1e-12",
            "-3dB",
            "50Ω",
            "1meg",
            "2R2",
            "15mH",
        ];
        let chars = [
            '.', '-', '+', 'e', 'k', 'M', 'm', 'R', 'µ', 'Ω', ' ', '0', '9', 'H', 'z',
        ];
        let edit = (any::<u8>(), 0u8..3, prop::sample::select(chars.to_vec()));
        let strategy = (
            0..valid.len(),
            0..ALL_QUANTITIES.len(),
            prop::collection::vec(edit, 1..4),
        );
        runner(5000)
            .run(&strategy, |(which, k, edits)| {
                let mut text: Vec<char> = valid[which].chars().collect();
                for (pos, op, ch) in edits {
                    let at = usize::from(pos) % (text.len() + 1);
                    match op {
                        0 if at < text.len() => {
                            text.remove(at);
                        }
                        1 if at < text.len() => text[at] = ch,
                        _ => text.insert(at, ch),
                    }
                }
                let text: String = text.into_iter().collect();
                let kind = ALL_QUANTITIES[k];
                match parse_quantity("x", &text, kind) {
                    Ok(v) => prop_assert!(v.is_finite() && (kind.allows_negative() || v >= 0.0)),
                    Err(e) => prop_assert!(e.message().starts_with("x '"), "{}", e),
                }
                Ok(())
            })
            .unwrap();
    }

    #[test]
    fn arbitrary_text_never_panics() {
        let kinds = ALL_QUANTITIES;
        let any_text = (0..kinds.len(), any::<String>());
        let check = |(k, text): (usize, String)| {
            let kind = kinds[k];
            if let Ok(v) = parse_quantity("x", &text, kind) {
                prop_assert!(v.is_finite());
                prop_assert!(kind.allows_negative() || v >= 0.0);
            }
            let _ = parse_positive("x", &text, kind);
            let _ = parse_non_negative("x", &text, kind);
            let _ = parse_plain_number(&text);
            Ok(())
        };
        runner(3000).run(&any_text, check).unwrap();
        // Text made of the characters the grammar uses reaches the deeper branches.
        let near_valid = (
            0..kinds.len(),
            "[0-9.eE+\\- kKmMuµμnpfGTRrΩhHzFsdBgo]{0,10}",
        );
        runner(20_000).run(&near_valid, check).unwrap();
    }
}
