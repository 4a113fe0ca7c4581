//! Touchstone 1.x S-parameter files: reader for 1- and 2-port files, writer for 2-port files.
//!
//! A Touchstone file \[1\] \[2\] is text: comments, one option line, then network data.
//!
//! # What the reader accepts
//! - **Comments** start with `!` anywhere on a line; the rest of that line is ignored.
//! - **Option line** `# [Hz|kHz|MHz|GHz] [S|Y|Z|G|H] [DB|MA|RI] [R n]`: the `#` first, then the
//!   fields in any order and any case, each at most once. Absent fields (or an absent line)
//!   take the defaults `# GHz S MA R 50`. Only the first option line counts; later ones are
//!   ignored, as the specification says. An option line that first appears after network data
//!   is an error, because the data before it would silently have been read with the defaults.
//!   Only S-parameters are supported: `Y`, `Z`, `G` or `H` data is rejected with the advice to
//!   export S-parameters from the instrument or simulator. The reference resistance `n` must be
//!   a positive number (one value, as in version 1).
//! - **Data formats**, each a pair of numbers per complex parameter: `RI` real and imaginary
//!   parts; `MA` magnitude and angle in degrees; `DB` magnitude in decibels, 20·log10|S|, and
//!   angle in degrees. So `DB -6.0206 53.13` is |S| = 10^(−6.0206/20) ≈ 0.5 at 53.13°.
//! - **Records**: the frequency (in the option line's unit, ≥ 0), then the parameters. A
//!   1-port record is `f S11` (3 numbers). A 2-port record is `f S11 S21 S12 S22` (9 numbers):
//!   for two ports, and only for two ports, the order is N11 N21 N12 N22 (files of three or
//!   more ports list rows, N11 N12 N13 …). Version 1 puts a 2-port record on one line; the
//!   reader also accepts a record wrapped over several lines, counting 9 numbers, provided
//!   every record starts on a new line and a wrapped record does not start with a line of
//!   exactly 3 numbers (that is the layout of a 1-port file, which would otherwise be misread).
//! - **Frequencies** strictly increase (a repeated frequency is ambiguous and rejected).
//! - **Noise parameters** (2-port only): the specification starts the noise block at the
//!   first line whose frequency is not above the last S-parameter frequency. Such a line of 5
//!   numbers (f, NFmin dB, |Γopt|, ∠Γopt, Rn/R) starts the block; the block is checked (5
//!   numbers per line, increasing frequency) and then discarded. Anything else whose frequency
//!   goes down is the error of a decreasing frequency.
//! - Version 2 keywords (`[Version]` and so on) are rejected: save the file as version 1.
//!
//! Numbers are plain reals (`-1.5`, `2.5E-3`); `NaN`, `inf` and values that overflow are errors.
//! Every error names the line (1-based).
//!
//! # What the writer produces
//! [`write_s2p`]: a version 1.1 two-port file with the caller's comment as `!` lines, the
//! option line `# Hz S <RI|MA|DB> R <reference>`, and one record per line with 17 significant
//! digits (so RI data reads back bit for bit).
//!
//! # S21-only files
//! Network analysers that display only the transmission of a two-port fixture often save that
//! one trace as a 1-port file. [`trace_from_s21_only`] reads such a file and interprets its
//! single parameter as S21. Nothing in the file says so; the caller must know it.
//!
//! # References
//! 1. EIA/IBIS Open Forum, *Touchstone® File Format Specification*, revision 1.1, 2002
//!    (rules recalled from memory; no copy is kept in this repository).
//! 2. IBIS Open Forum, *Touchstone® File Format Specification*, version 2.0, 2009, which
//!    restates the version 1 syntax (same caveat).

use super::MeasuredTrace;
use crate::error::{Error, ErrorKind, Result};
use crate::units::{format_si_digits, parse_plain_number};
use num_complex::Complex64;
use std::fmt;
use std::io::{self, Write};

/// How each complex parameter is written in a Touchstone file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum TouchstoneFormat {
    /// `RI`: real part, imaginary part.
    RealImaginary,
    /// `MA`: magnitude, angle in degrees (the default).
    MagnitudeAngle,
    /// `DB`: 20·log10 of the magnitude, angle in degrees.
    DecibelAngle,
}

impl TouchstoneFormat {
    /// The option-line keyword: `RI`, `MA` or `DB`.
    pub fn keyword(self) -> &'static str {
        match self {
            TouchstoneFormat::RealImaginary => "RI",
            TouchstoneFormat::MagnitudeAngle => "MA",
            TouchstoneFormat::DecibelAngle => "DB",
        }
    }

    /// The complex number a pair of file values stands for; `None` when it is not finite.
    fn to_complex(self, a: f64, b: f64) -> Option<Complex64> {
        let z = match self {
            TouchstoneFormat::RealImaginary => Complex64::new(a, b),
            TouchstoneFormat::MagnitudeAngle => Complex64::from_polar(a, b.to_radians()),
            TouchstoneFormat::DecibelAngle => {
                Complex64::from_polar(10f64.powf(a / 20.0), b.to_radians())
            }
        };
        (z.re.is_finite() && z.im.is_finite()).then_some(z)
    }
}

/// One-port network data: S11 (or another single parameter) per frequency.
#[derive(Debug, Clone, PartialEq)]
pub struct OnePortData {
    /// Reference resistance of the option line, Ω.
    pub reference_ohm: f64,
    /// Frequencies, Hz, strictly increasing.
    pub f_hz: Vec<f64>,
    /// The parameter at each frequency.
    pub s: Vec<Complex64>,
}

/// Two-port S-parameters per frequency.
#[derive(Debug, Clone, PartialEq)]
pub struct TwoPortData {
    /// Reference resistance of the option line, Ω (the same at both ports, as in version 1).
    pub reference_ohm: f64,
    /// Frequencies, Hz, strictly increasing.
    pub f_hz: Vec<f64>,
    /// `[S11, S21, S12, S22]` at each frequency: the file's order for two ports.
    pub s: Vec<[Complex64; 4]>,
}

/// The option line's settings.
#[derive(Debug, Clone, Copy)]
struct Options {
    unit_hz: f64,
    format: TouchstoneFormat,
    reference_ohm: f64,
}

impl Default for Options {
    /// `# GHz S MA R 50`.
    fn default() -> Self {
        Options {
            unit_hz: 1e9,
            format: TouchstoneFormat::MagnitudeAngle,
            reference_ohm: 50.0,
        }
    }
}

fn line_error(line: usize, message: impl fmt::Display) -> Error {
    Error::parse(format!("line {line}: {message}"))
}

/// A token for a message: at most 24 characters, control characters escaped.
fn shown(token: &str) -> String {
    let short: String = token.chars().take(24).collect();
    let more = if token.chars().nth(24).is_some() {
        "…"
    } else {
        ""
    };
    format!("{}{more}", short.escape_debug())
}

/// Parse the fields after `#`.
fn parse_option_line(line: usize, fields: &str) -> Result<Options> {
    let mut opts = Options::default();
    let (mut unit_seen, mut param_seen, mut format_seen, mut r_seen) = (false, false, false, false);
    let mut tokens = fields.split_whitespace();
    let duplicate = |what: &str, token: &str| {
        line_error(
            line,
            format_args!(
                "the option line gives the {what} twice ('{}'); give each field at most once, \
                 e.g. '# MHz S DB R 50'",
                shown(token)
            ),
        )
    };
    while let Some(token) = tokens.next() {
        let unit = [("hz", 1.0), ("khz", 1e3), ("mhz", 1e6), ("ghz", 1e9)]
            .into_iter()
            .find(|(name, _)| token.eq_ignore_ascii_case(name));
        if let Some((_, scale)) = unit {
            if unit_seen {
                return Err(duplicate("frequency unit", token));
            }
            unit_seen = true;
            opts.unit_hz = scale;
            continue;
        }
        let format = [
            ("ri", TouchstoneFormat::RealImaginary),
            ("ma", TouchstoneFormat::MagnitudeAngle),
            ("db", TouchstoneFormat::DecibelAngle),
        ]
        .into_iter()
        .find(|(name, _)| token.eq_ignore_ascii_case(name));
        if let Some((_, format)) = format {
            if format_seen {
                return Err(duplicate("data format", token));
            }
            format_seen = true;
            opts.format = format;
            continue;
        }
        if token.eq_ignore_ascii_case("s") {
            if param_seen {
                return Err(duplicate("parameter type", token));
            }
            param_seen = true;
            continue;
        }
        if ["y", "z", "g", "h"]
            .iter()
            .any(|p| token.eq_ignore_ascii_case(p))
        {
            let name = match token.to_ascii_uppercase().as_str() {
                "Y" => "admittance (Y)",
                "Z" => "impedance (Z)",
                "G" => "hybrid-g (G)",
                _ => "hybrid-h (H)",
            };
            return Err(Error::new(
                ErrorKind::Unsupported,
                format!(
                    "line {line}: {name} parameters are not supported; export S-parameters \
                     instead (option line such as '# Hz S RI R 50')"
                ),
            ));
        }
        if token.eq_ignore_ascii_case("r") {
            if r_seen {
                return Err(duplicate("reference resistance", token));
            }
            r_seen = true;
            let Some(value) = tokens.next() else {
                return Err(line_error(
                    line,
                    "'R' in the option line must be followed by the reference resistance in \
                     ohms, e.g. 'R 50'",
                ));
            };
            match parse_plain_number(value) {
                Some(r) if r > 0.0 => opts.reference_ohm = r,
                _ => {
                    return Err(line_error(
                        line,
                        format_args!(
                            "reference resistance 'R {}' is not valid; expected a positive \
                             number of ohms, e.g. 'R 50'",
                            shown(value)
                        ),
                    ))
                }
            }
            continue;
        }
        return Err(line_error(
            line,
            format_args!(
                "unknown option '{}'; the option line holds a frequency unit (Hz kHz MHz GHz), \
                 the parameter S, a format (DB MA RI) and 'R' with the reference resistance",
                shown(token)
            ),
        ));
    }
    Ok(opts)
}

/// What the data reader is in the middle of.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Block {
    Network,
    Noise { started: usize },
}

/// Read the network data of a 1-port (`N` = 3) or 2-port (`N` = 9) file, calling `emit` with
/// each record (frequency in Hz and the raw values) and returning the options.
fn read_records<const N: usize>(
    text: &str,
    mut emit: impl FnMut(f64, &[f64; N], TouchstoneFormat, usize) -> Result<()>,
) -> Result<Options> {
    let ports = if N == 9 { 2 } else { 1 };
    let record_shape = if N == 9 {
        "a 2-port record is the frequency and S11 S21 S12 S22 as pairs: 9 numbers"
    } else {
        "a 1-port record is the frequency and one parameter as a pair: 3 numbers (a line of 9 \
         is the layout of a 2-port file)"
    };
    let mut options = Options::default();
    let mut option_line_seen = false;
    let mut data_seen = false;
    let mut block = Block::Network;
    let mut record = [0.0f64; N];
    let mut filled = 0usize;
    let mut record_line = 0usize;
    let mut record_first = "";
    let mut previous: Option<(f64, usize)> = None;
    let mut last_line = 0usize;

    for (index, raw_line) in text.split('\n').enumerate() {
        let line = index + 1;
        last_line = line;
        let content = raw_line.split('!').next().unwrap_or("").trim();
        if content.is_empty() {
            continue;
        }
        if let Some(fields) = content.strip_prefix('#') {
            if !option_line_seen {
                if data_seen {
                    return Err(line_error(
                        line,
                        "the option line comes after network data; it must come before the \
                         first data line",
                    ));
                }
                options = parse_option_line(line, fields)?;
                option_line_seen = true;
            }
            continue;
        }
        if content.starts_with('[') {
            let keyword = content.split(']').next().unwrap_or(content);
            return Err(Error::new(
                ErrorKind::Unsupported,
                format!(
                    "line {line}: '{}]' is a Touchstone 2.0 keyword; only version 1 files are \
                     read, so save the data as a version 1 .s{ports}p file",
                    shown(keyword)
                ),
            ));
        }
        let opts = options;
        data_seen = true;
        let count = content.split_whitespace().count();
        let starts_record = filled == 0;

        if starts_record {
            // A noise line, or the start of the noise block?
            let first = content.split_whitespace().next().unwrap_or("");
            let first_f = parse_plain_number(first).map(|f| f * opts.unit_hz);
            let goes_down = matches!((first_f, previous), (Some(f), Some((p, _))) if f <= p);
            let noise_start = N == 9 && count == 5 && goes_down && block == Block::Network;
            if noise_start {
                block = Block::Noise { started: line };
            }
            if let Block::Noise { started } = block {
                read_noise_line(line, content, count, started, opts.unit_hz, &mut previous)?;
                continue;
            }
            if N == 9 && count == 3 {
                return Err(line_error(
                    line,
                    format_args!(
                        "3 numbers, the layout of a 1-port file; {record_shape}, on one line \
                         (or wrapped over several)"
                    ),
                ));
            }
            record_line = line;
            record_first = content.split_whitespace().next().unwrap_or("");
        }
        if filled + count > N {
            let what = if starts_record {
                format!("{count} numbers on the line")
            } else {
                format!(
                    "{count} more numbers would make {} for the record that starts on line \
                     {record_line}",
                    filled + count
                )
            };
            return Err(line_error(
                line,
                format_args!("{what}; {record_shape} (each record starts on a new line)"),
            ));
        }
        for (k, token) in content.split_whitespace().enumerate() {
            let Some(value) = parse_plain_number(token) else {
                return Err(line_error(
                    line,
                    format_args!(
                        "'{}' (number {} of the line) is not a number; expected a real number \
                         such as 0.5 or -1.25E-3",
                        shown(token),
                        k + 1
                    ),
                ));
            };
            if let Some(slot) = record.get_mut(filled) {
                *slot = value;
            }
            filled += 1;
        }
        if filled == N {
            filled = 0;
            let f_hz = record[0] * opts.unit_hz;
            if !(f_hz.is_finite() && f_hz >= 0.0) {
                return Err(line_error(
                    record_line,
                    format_args!(
                        "frequency {} (in the option line's unit) is not valid; expected a finite \
                         value of zero or more",
                        shown(record_first)
                    ),
                ));
            }
            if let Some((prev, prev_line)) = previous {
                if f_hz <= prev {
                    return Err(line_error(
                        record_line,
                        format_args!(
                            "frequency {} is not above {} on line {prev_line}; frequencies \
                             must strictly increase",
                            format_si_digits(f_hz, "Hz", 10),
                            format_si_digits(prev, "Hz", 10)
                        ),
                    ));
                }
            }
            previous = Some((f_hz, record_line));
            emit(f_hz, &record, opts.format, record_line)?;
        }
    }
    if filled > 0 {
        return Err(line_error(
            record_line,
            format_args!(
                "the record that starts here has {filled} of {N} numbers when the file ends; \
                 {record_shape}"
            ),
        ));
    }
    if previous.is_none() {
        return Err(line_error(
            last_line.max(1),
            format_args!(
                "end of file without network data; expected an option line such as \
                 '# Hz S RI R 50' and one line per frequency ({record_shape})"
            ),
        ));
    }
    Ok(options)
}

/// Check one line of the 2-port noise block; its values are not kept.
fn read_noise_line(
    line: usize,
    content: &str,
    count: usize,
    started: usize,
    unit_hz: f64,
    previous: &mut Option<(f64, usize)>,
) -> Result<()> {
    if count != 5 {
        return Err(line_error(
            line,
            format_args!(
                "{count} numbers in the noise parameter block that starts on line {started} \
                 (where the frequency went down); a noise line holds 5 numbers: frequency, \
                 NFmin, |Γopt|, ∠Γopt, Rn"
            ),
        ));
    }
    let mut first = None;
    for (k, token) in content.split_whitespace().enumerate() {
        let Some(value) = parse_plain_number(token) else {
            return Err(line_error(
                line,
                format_args!(
                    "'{}' (number {} of the noise line) is not a number",
                    shown(token),
                    k + 1
                ),
            ));
        };
        first.get_or_insert(value);
    }
    let f_hz = first.unwrap_or(f64::NAN) * unit_hz;
    if !(f_hz.is_finite() && f_hz >= 0.0) {
        return Err(line_error(
            line,
            "noise frequency is not a finite value of zero or more",
        ));
    }
    if line != started {
        if let Some((prev, prev_line)) = *previous {
            if f_hz <= prev {
                return Err(line_error(
                    line,
                    format_args!(
                        "noise frequency {} is not above {} on line {prev_line}; frequencies \
                         must strictly increase",
                        format_si_digits(f_hz, "Hz", 10),
                        format_si_digits(prev, "Hz", 10)
                    ),
                ));
            }
        }
    }
    *previous = Some((f_hz, line));
    Ok(())
}

fn pair(format: TouchstoneFormat, a: f64, b: f64, line: usize, which: &str) -> Result<Complex64> {
    format.to_complex(a, b).ok_or_else(|| {
        line_error(
            line,
            format_args!(
                "{which} = ({a}, {b}) in {} format is not a finite complex number",
                format.keyword()
            ),
        )
    })
}

/// Read a 1-port Touchstone file (`.s1p`).
///
/// # Errors
/// [`ErrorKind::Parse`] with the line number for any violation of the rules in the
/// [module documentation](self); [`ErrorKind::Unsupported`] for Y/Z/G/H parameters and
/// version 2 keywords.
pub fn parse_s1p(text: &str) -> Result<OnePortData> {
    let mut f_hz = Vec::new();
    let mut s = Vec::new();
    let opts = read_records::<3>(text, |f, v, format, line| {
        s.push(pair(format, v[1], v[2], line, "S11")?);
        f_hz.push(f);
        Ok(())
    })?;
    Ok(OnePortData {
        reference_ohm: opts.reference_ohm,
        f_hz,
        s,
    })
}

/// Read a 2-port Touchstone file (`.s2p`); noise parameters, if any, are checked and dropped.
///
/// # Errors
/// As [`parse_s1p`].
///
/// ```
/// use filter_core::io::touchstone::parse_s2p;
/// let data = parse_s2p("# MHz S RI R 50\n9.0 0.1 0 0.9 0 0.9 0 0.1 0\n")?;
/// assert_eq!(data.f_hz, [9e6]);
/// assert_eq!(data.s[0][1].re, 0.9); // S21
/// # Ok::<(), filter_core::Error>(())
/// ```
pub fn parse_s2p(text: &str) -> Result<TwoPortData> {
    let mut f_hz = Vec::new();
    let mut s = Vec::new();
    let opts = read_records::<9>(text, |f, v, format, line| {
        s.push([
            pair(format, v[1], v[2], line, "S11")?,
            pair(format, v[3], v[4], line, "S21")?,
            pair(format, v[5], v[6], line, "S12")?,
            pair(format, v[7], v[8], line, "S22")?,
        ]);
        f_hz.push(f);
        Ok(())
    })?;
    Ok(TwoPortData {
        reference_ohm: opts.reference_ohm,
        f_hz,
        s,
    })
}

fn to_db_deg(z: Complex64) -> (f64, f64) {
    (20.0 * z.norm().log10(), z.arg().to_degrees())
}

/// The S21 trace of two-port data, the way a crystal sweep arrives at [`crate::measure`].
///
/// `s21_db` is 20·log10|S21| (−∞ where S21 is exactly zero), `s21_deg` the angle of S21 in
/// degrees in (−180, 180] whatever the file's angles were, and `reference_ohm` the file's
/// reference resistance (50 Ω when the option line gives none: the specification's default).
pub fn trace_from_s2p(data: &TwoPortData) -> MeasuredTrace {
    let (s21_db, s21_deg) = data.s.iter().map(|s| to_db_deg(s[1])).unzip();
    MeasuredTrace {
        f_hz: data.f_hz.clone(),
        s21_db,
        s21_deg: Some(s21_deg),
        reference_ohm: Some(data.reference_ohm),
    }
}

/// Read a 1-port-layout file that holds only the S21 trace of a two-port fixture.
///
/// Accepted: exactly what [`parse_s1p`] accepts (option line, comments, one frequency and one
/// complex number per record in the option line's format). The single parameter, which the
/// file itself calls S11, is taken to be S21: only the caller knows that the instrument saved
/// the transmission trace. The result is built as in [`trace_from_s2p`].
///
/// # Errors
/// As [`parse_s1p`]; a 2-port file gives the error of a line with 9 numbers.
pub fn trace_from_s21_only(text: &str) -> Result<MeasuredTrace> {
    let data = parse_s1p(text)?;
    let (s21_db, s21_deg) = data.s.iter().map(|&z| to_db_deg(z)).unzip();
    Ok(MeasuredTrace {
        f_hz: data.f_hz,
        s21_db,
        s21_deg: Some(s21_deg),
        reference_ohm: Some(data.reference_ohm),
    })
}

fn invalid_input(message: String) -> io::Error {
    io::Error::new(io::ErrorKind::InvalidInput, message)
}

/// Write two-port data as a Touchstone 1.1 `.s2p` file.
///
/// Layout: each line of `comment` as a `!` line (none when `comment` is empty), a column
/// legend comment, the option line `# Hz S <RI|MA|DB> R <reference>`, then one line per
/// frequency: the frequency in Hz and S11 S21 S12 S22 as pairs in `format`, each number with
/// 17 significant digits. [`parse_s2p`] reads RI output back bit for bit; MA and DB go through
/// polar conversion and come back within a few units in the last place.
///
/// # Errors
/// [`io::ErrorKind::InvalidInput`], before anything is written, when the data could not be
/// read back: lengths differ, a value is not finite, the reference is not positive, the
/// frequencies are negative or not strictly increasing, or (DB format) a parameter is exactly
/// zero. Otherwise any error of `w`.
pub fn write_s2p(
    data: &TwoPortData,
    format: TouchstoneFormat,
    comment: &str,
    w: &mut impl Write,
) -> io::Result<()> {
    check_writable(data, format)?;
    for line in comment.lines() {
        if line.is_empty() {
            w.write_all(b"!\n")?;
        } else {
            writeln!(w, "! {line}")?;
        }
    }
    let legend = match format {
        TouchstoneFormat::RealImaginary => "re im",
        TouchstoneFormat::MagnitudeAngle => "mag deg",
        TouchstoneFormat::DecibelAngle => "dB deg",
    };
    writeln!(w, "! frequency_hz, then S11 S21 S12 S22, each as {legend}",)?;
    writeln!(
        w,
        "# Hz S {} R {:.16e}",
        format.keyword(),
        data.reference_ohm
    )?;
    for (f, s) in data.f_hz.iter().zip(&data.s) {
        write!(w, "{f:.16e}")?;
        for z in s {
            let (a, b) = match format {
                TouchstoneFormat::RealImaginary => (z.re, z.im),
                TouchstoneFormat::MagnitudeAngle => (z.norm(), z.arg().to_degrees()),
                TouchstoneFormat::DecibelAngle => to_db_deg(*z),
            };
            write!(w, " {a:.16e} {b:.16e}")?;
        }
        w.write_all(b"\n")?;
    }
    Ok(())
}

fn check_writable(data: &TwoPortData, format: TouchstoneFormat) -> io::Result<()> {
    if data.f_hz.len() != data.s.len() {
        return Err(invalid_input(format!(
            "touchstone: {} frequencies but {} sets of S-parameters",
            data.f_hz.len(),
            data.s.len()
        )));
    }
    if !(data.reference_ohm.is_finite() && data.reference_ohm > 0.0) {
        return Err(invalid_input(format!(
            "touchstone: reference resistance {} is not valid; expected a positive number of ohms",
            data.reference_ohm
        )));
    }
    let names = ["S11", "S21", "S12", "S22"];
    let mut previous = None;
    for (i, (f, s)) in data.f_hz.iter().zip(&data.s).enumerate() {
        if !(f.is_finite() && *f >= 0.0) || previous.is_some_and(|p| *f <= p) {
            return Err(invalid_input(format!(
                "touchstone: frequency {f} Hz of point {} is not valid; expected finite values \
                 of zero or more, strictly increasing",
                i + 1
            )));
        }
        previous = Some(*f);
        for (z, name) in s.iter().zip(names) {
            if !(z.re.is_finite() && z.im.is_finite()) {
                return Err(invalid_input(format!(
                    "touchstone: {name} of point {} is {z}; only finite values can be written",
                    i + 1
                )));
            }
            if format == TouchstoneFormat::DecibelAngle && z.norm() == 0.0 {
                return Err(invalid_input(format!(
                    "touchstone: {name} of point {} is zero, which has no value in dB; write \
                     RI or MA instead",
                    i + 1
                )));
            }
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use proptest::test_runner::{Config, RngAlgorithm, TestRng, TestRunner};

    macro_rules! data {
        ($name:literal) => {
            include_str!(concat!("../../../tests/data/touchstone/", $name))
        };
    }

    fn runner(cases: u32) -> TestRunner {
        let config = Config {
            cases,
            failure_persistence: None,
            ..Config::default()
        };
        TestRunner::new_with_rng(config, TestRng::deterministic_rng(RngAlgorithm::ChaCha))
    }

    fn c(re: f64, im: f64) -> Complex64 {
        Complex64::new(re, im)
    }

    fn s2p(text: &str) -> TwoPortData {
        match parse_s2p(text) {
            Ok(d) => d,
            Err(e) => panic!("should parse: {e}"),
        }
    }

    fn s2p_err(text: &str) -> Error {
        match parse_s2p(text) {
            Ok(d) => panic!("should be rejected, read {} records", d.f_hz.len()),
            Err(e) => e,
        }
    }

    /// The network of format_*.s2p, from the RI values written in format_ri.s2p.
    fn reference_network() -> Vec<[Complex64; 4]> {
        vec![
            [c(0.3, 0.4), c(0.0, 0.1), c(-1.0, 0.0), c(0.0, -0.01)],
            [c(0.6, -0.8), c(0.5, 0.0), c(0.5, 0.0), c(-0.3, -0.4)],
        ]
    }

    fn assert_close(a: &[[Complex64; 4]], b: &[[Complex64; 4]], tol: f64) {
        assert_eq!(a.len(), b.len());
        for (ra, rb) in a.iter().zip(b) {
            for (x, y) in ra.iter().zip(rb) {
                assert!((x - y).norm() <= tol, "{x} vs {y}");
            }
        }
    }

    #[test]
    fn ri_ma_and_db_files_of_one_network_agree() {
        // Source: Touchstone File Format Specification rev. 1.1, option line: RI is real and
        // imaginary part, MA magnitude and angle in degrees, DB 20·log10 of the magnitude
        // and angle in degrees (recalled from memory).
        let ri = s2p(data!("format_ri.s2p"));
        assert_eq!(ri.f_hz, [9e6, 9.001e6]);
        assert_eq!(ri.reference_ohm, 50.0);
        assert_eq!(ri.s, reference_network()); // RI: the numbers as written, exactly
                                               // Polar to rectangular costs a few ulp in cos/sin/powf and the 16-digit angles in the
                                               // files are rounded to about 1e-16 relative; 1e-12 keeps a wide margin while any wrong
                                               // convention (radians, 10·log10, swapped pair) would be off by more than 1e-3.
        for name in ["format_ma", "format_db"] {
            let text = if name == "format_ma" {
                data!("format_ma.s2p")
            } else {
                data!("format_db.s2p")
            };
            let d = s2p(text);
            assert_eq!(d.f_hz, ri.f_hz, "{name}");
            assert_close(&d.s, &ri.s, 1e-12);
        }
    }

    #[test]
    fn option_line_fields_in_any_order_and_case() {
        let d = s2p(data!("option_any_order.s2p"));
        assert_eq!(d.reference_ohm, 75.0);
        assert_eq!(d.f_hz, [9e6, 9.0005e6]); // kHz
                                             // DB: -20 dB at 0° is 0.1; -1 dB at -90° is -j·10^(-1/20).
        let m1 = 10f64.powf(-1.0 / 20.0);
        // Tolerance: a few ulp of powf/cos/sin on values up to 1.
        assert!((d.s[0][0] - c(0.1, 0.0)).norm() < 1e-15);
        assert!((d.s[0][1] - c(0.0, -m1)).norm() < 1e-15);
        assert!((d.s[0][3] - c(-0.1, 0.0)).norm() < 1e-15);
    }

    #[test]
    fn absent_option_line_means_ghz_s_ma_r50() {
        let d = s2p(data!("option_absent.s2p"));
        assert_eq!(d.reference_ohm, 50.0);
        assert_eq!(d.f_hz, [0.009 * 1e9, 0.0091 * 1e9]); // GHz
        let ma = Complex64::from_polar(0.5, 10f64.to_radians()); // MA
        assert_eq!(d.s[0][0], ma);
        let p = s2p(data!("option_partial.s2p"));
        assert_eq!(p.f_hz, [9e6, 9.1e6]);
        assert_eq!(p.reference_ohm, 50.0);
        assert_eq!(p.s, d.s); // same MA values as option_absent.s2p
        assert_eq!(s2p("#\n1 1 0 0 0 0 0 1 0\n").f_hz, [1e9]);
    }

    #[test]
    fn only_the_first_option_line_counts() {
        let d = s2p(data!("option_second_ignored.s2p"));
        assert_eq!(d.f_hz, [9e6, 9.0001e6]); // Hz, not GHz
        assert_eq!(d.reference_ohm, 50.0);
        assert_eq!(d.s[1][0], c(0.2, 0.1)); // RI, not DB
    }

    #[test]
    fn comments_start_anywhere() {
        let d = s2p(data!("comments_anywhere.s2p"));
        assert_eq!(d.f_hz, [9e6, 9.1e6]);
        assert_eq!(d.reference_ohm, 50.0);
        assert_eq!(d.s[1][3], c(0.2, 0.1));
    }

    #[test]
    fn two_port_order_is_11_21_12_22() {
        // Source: Touchstone File Format Specification rev. 1.1: for 2-port files the data
        // order is N11 N21 N12 N22 (recalled from memory).
        let d = s2p(data!("port_order.s2p"));
        assert_eq!(d.f_hz, [1000.0, 2000.0]);
        assert_eq!(
            d.s[0],
            [
                c(0.11, -0.11),
                c(0.21, -0.21),
                c(0.12, -0.12),
                c(0.22, -0.22)
            ]
        );
        assert_eq!(d.s[1][1], c(0.021, -0.021));
        let t = trace_from_s2p(&d);
        assert_eq!(t.s21_db[0], 20.0 * c(0.21, -0.21).norm().log10());
    }

    #[test]
    fn wrapped_records_are_counted_by_numbers() {
        let d = s2p(data!("wrapped_records.s2p"));
        assert_eq!(d.f_hz, [9e6, 9.1e6, 9.2e6]);
        assert_eq!(d.s[0], [c(0.1, 0.2), c(0.3, 0.4), c(0.3, 0.4), c(0.1, 0.2)]);
        assert_eq!(d.s[1][3], c(0.2, 0.1));
        assert_eq!(d.s[2][0], c(0.5, 0.6));
    }

    #[test]
    fn noise_block_is_recognised_and_dropped() {
        let d = s2p(data!("noise_block.s2p"));
        assert_eq!(d.f_hz, [1e9, 2e9, 3e9]);
        assert_eq!(d.s[2][1], Complex64::from_polar(2.0, 90f64.to_radians()));
        let e = s2p_err(data!("bad_noise_count.s2p"));
        assert!(
            e.message().starts_with(
                "line 6: 4 numbers in the noise parameter block that starts on line 5"
            ),
            "{e}"
        );
        // A noise block is a 2-port feature: in a 1-port file the same line is a plain error.
        let e = parse_s1p("# GHz S MA\n2 0.5 0\n1 0.5 0\n").unwrap_err();
        assert!(
            e.message()
                .starts_with("line 3: frequency 1.000000000 GHz is not above"),
            "{e}"
        );
    }

    #[test]
    fn s21_only_file_becomes_a_trace() {
        let t = trace_from_s21_only(data!("s21_only.s1p")).unwrap();
        assert_eq!(t.f_hz.len(), 11);
        assert_eq!(t.f_hz[0], 8.999e6);
        assert_eq!(t.f_hz[10], 9.001e6);
        assert_eq!(t.reference_ohm, Some(50.0));
        // dB → |S| → dB and degrees → complex → degrees lose a few ulp; 1e-12 dB and 1e-12°
        // are far below any instrument's resolution and far above that rounding.
        let want_db = [
            -40.5, -38.25, -35.0, -30.5, -12.75, -3.5, -9.0, -22.0, -29.5, -34.0, -37.0,
        ];
        let want_deg = [
            88.5, 86.0, 80.25, 60.0, 20.5, -0.25, -30.0, -65.5, -80.0, -86.5, -88.0,
        ];
        let deg = t.s21_deg.unwrap();
        for i in 0..11 {
            assert!((t.s21_db[i] - want_db[i]).abs() < 1e-12, "{i}");
            assert!((deg[i] - want_deg[i]).abs() < 1e-12, "{i}");
        }
        // The same file as a plain 1-port.
        let d = parse_s1p(data!("s21_only.s1p")).unwrap();
        assert_eq!(d.s.len(), 11);
        // A 2-port file is not mistaken for S21-only data, nor the reverse.
        let e = trace_from_s21_only(data!("format_ri.s2p")).unwrap_err();
        assert!(
            e.message()
                .starts_with("line 6: 9 numbers on the line; a 1-port record"),
            "{e}"
        );
        let e = s2p_err(data!("s21_only.s1p"));
        assert!(
            e.message()
                .starts_with("line 4: 3 numbers, the layout of a 1-port file"),
            "{e}"
        );
    }

    #[test]
    fn trace_from_s2p_takes_s21() {
        let d = s2p(data!("format_db.s2p"));
        let t = trace_from_s2p(&d);
        assert_eq!(t.reference_ohm, Some(50.0));
        assert_eq!(t.f_hz, d.f_hz);
        // Tolerance: dB → magnitude → dB round trip, a few ulp.
        assert!((t.s21_db[0] - -20.0).abs() < 1e-12);
        assert!((t.s21_db[1] - -6.020599913279624).abs() < 1e-12);
        let deg = t.s21_deg.unwrap();
        assert!((deg[0] - 90.0).abs() < 1e-12);
        assert!(deg[1].abs() < 1e-12);
    }

    #[test]
    fn bad_files_give_the_line() {
        let cases: &[(&str, ErrorKind, &str)] = &[
            (
                data!("bad_value_count.s2p"),
                ErrorKind::Parse,
                "line 4: 10 numbers on the line",
            ),
            (
                data!("bad_truncated.s2p"),
                ErrorKind::Parse,
                "line 5: the record that starts here has 7 of 9 numbers",
            ),
            (
                data!("bad_garbage_number.s2p"),
                ErrorKind::Parse,
                "line 5: 'O.4' (number 5 of the line) is not a number",
            ),
            (
                data!("bad_parameter_z.s2p"),
                ErrorKind::Unsupported,
                "line 2: impedance (Z) parameters are not supported; export S-parameters",
            ),
            (
                data!("bad_decreasing_frequency.s2p"),
                ErrorKind::Parse,
                "line 6: frequency 9.200000000 MHz is not above 9.300000000 MHz on line 5",
            ),
            (
                data!("bad_repeated_frequency.s2p"),
                ErrorKind::Parse,
                "line 4: frequency 9.000000000 MHz is not above 9.000000000 MHz on line 3",
            ),
            (
                data!("bad_empty.s2p"),
                ErrorKind::Parse,
                "line 1: end of file without network data",
            ),
            (
                data!("bad_comments_only.s2p"),
                ErrorKind::Parse,
                "line 4: end of file without network data",
            ),
            (
                data!("bad_version2.s2p"),
                ErrorKind::Unsupported,
                "line 2: '[Version]' is a Touchstone 2.0 keyword",
            ),
            (
                data!("bad_option_after_data.s2p"),
                ErrorKind::Parse,
                "line 4: the option line comes after network data",
            ),
            (
                data!("bad_reference.s2p"),
                ErrorKind::Parse,
                "line 2: reference resistance 'R 0' is not valid",
            ),
            (
                data!("bad_unknown_option.s2p"),
                ErrorKind::Parse,
                "line 2: unknown option 'Q'",
            ),
        ];
        for (text, kind, want) in cases {
            let e = s2p_err(text);
            assert_eq!(e.kind(), *kind, "{e}");
            assert!(e.message().starts_with(want), "want '{want}', got '{e}'");
        }
    }

    #[test]
    fn binary_junk_is_an_error_with_a_line() {
        let bytes = include_bytes!("../../../tests/data/touchstone/bad_binary.s2p");
        let text = String::from_utf8_lossy(bytes);
        let e = s2p_err(&text);
        assert_eq!(e.kind(), ErrorKind::Parse);
        assert!(e.message().starts_with("line 2: "), "{e}");
    }

    #[test]
    fn every_other_parameter_type_is_refused() {
        for (p, name) in [
            ("Y", "admittance"),
            ("z", "impedance"),
            ("G", "hybrid-g"),
            ("h", "hybrid-h"),
        ] {
            let e = s2p_err(&format!("# MHz {p} RI R 50\n9 1 0 0 0 0 0 1 0\n"));
            assert_eq!(e.kind(), ErrorKind::Unsupported);
            assert!(e.message().contains(name) && e.message().contains("export S-parameters"));
        }
    }

    #[test]
    fn option_line_field_errors() {
        let cases = [
            ("# MHz GHz\n", "the frequency unit twice"),
            ("# RI DB\n", "the data format twice"),
            ("# S S\n", "the parameter type twice"),
            ("# R 50 R 75\n", "the reference resistance twice"),
            ("# MHz R\n", "must be followed by the reference resistance"),
            ("# R -50\n", "reference resistance 'R -50'"),
            ("# R NaN\n", "reference resistance 'R NaN'"),
            ("# R50\n", "unknown option 'R50'"),
        ];
        for (text, want) in cases {
            let e = s2p_err(text);
            assert!(e.message().starts_with("line 1: "), "{e}");
            assert!(e.message().contains(want), "want '{want}', got '{e}'");
        }
    }

    #[test]
    fn numbers_that_are_not_finite_are_refused() {
        let e = s2p_err("# MHz S RI\n9 NaN 0 0 0 0 0 0 0\n");
        assert!(e.message().starts_with("line 2: 'NaN'"), "{e}");
        let e = s2p_err("# MHz S RI\n9 inf 0 0 0 0 0 0 0\n");
        assert!(e.message().starts_with("line 2: 'inf'"), "{e}");
        let e = s2p_err("# MHz S DB\n9 1e300 0 0 0 0 0 0 0\n");
        assert!(e.message().starts_with("line 2: S11 = "), "{e}");
        let e = s2p_err("# GHz S RI\n1e300 0 0 0 0 0 0 0 0\n");
        assert!(e.message().starts_with("line 2: frequency 1e300"), "{e}");
        let e = s2p_err("# GHz S RI\n-1 0 0 0 0 0 0 0 0\n");
        assert!(e.message().starts_with("line 2: frequency -1"), "{e}");
        let e = s2p_err("# GHz S RI\n1 0 0 0 0 0 0 0 0\n2 0 0 0 0 0\n");
        assert!(
            e.message()
                .starts_with("line 3: the record that starts here has 6 of 9"),
            "{e}"
        );
        let e = s2p_err("# GHz S RI\n1 0 0 0 0\n 0 0 0 0 0\n");
        assert!(
            e.message()
                .starts_with("line 3: 5 more numbers would make 10"),
            "{e}"
        );
    }

    fn network(n: usize) -> TwoPortData {
        let f_hz = (0..n).map(|i| 8.99e6 + 123.456_789 * i as f64).collect();
        let s = (0..n)
            .map(|i| {
                let x = i as f64;
                [
                    Complex64::from_polar(0.9 / (1.0 + x), x),
                    Complex64::from_polar(1e-3 + x / (1.0 + x), -2.0 * x),
                    Complex64::new(-1e-7 * x, 0.3),
                    Complex64::new(0.25, -x.sqrt() / 7.0),
                ]
            })
            .collect();
        TwoPortData {
            reference_ohm: 12.5,
            f_hz,
            s,
        }
    }

    #[test]
    fn write_then_parse_round_trips() {
        let d = network(50);
        for format in [
            TouchstoneFormat::RealImaginary,
            TouchstoneFormat::MagnitudeAngle,
            TouchstoneFormat::DecibelAngle,
        ] {
            let mut out = Vec::new();
            write_s2p(&d, format, "crystal 7\n\nfixture 50 ohm", &mut out).unwrap();
            let text = String::from_utf8(out).unwrap();
            assert!(
                text.starts_with("! crystal 7\n!\n! fixture 50 ohm\n"),
                "{text}"
            );
            let option = format!("# Hz S {} R 1.2500000000000000e1\n", format.keyword());
            assert!(text.contains(&option), "{text}");
            let back = s2p(&text);
            assert_eq!(back.f_hz, d.f_hz); // 17 digits: exact
            assert_eq!(back.reference_ohm, d.reference_ohm);
            if format == TouchstoneFormat::RealImaginary {
                assert_eq!(back.s, d.s); // exact
            } else {
                // Polar conversion both ways: a few ulp on magnitudes up to 1.
                assert_close(&back.s, &d.s, 1e-14);
            }
        }
    }

    #[test]
    fn writer_refuses_data_it_could_not_read_back() {
        let mut out = Vec::new();
        let mut d = network(3);
        d.s[1][2] = c(f64::NAN, 0.0);
        assert!(write_s2p(&d, TouchstoneFormat::RealImaginary, "", &mut out).is_err());
        let mut d = network(3);
        d.f_hz[2] = d.f_hz[1];
        assert!(write_s2p(&d, TouchstoneFormat::RealImaginary, "", &mut out).is_err());
        let mut d = network(3);
        d.reference_ohm = 0.0;
        assert!(write_s2p(&d, TouchstoneFormat::RealImaginary, "", &mut out).is_err());
        let mut d = network(3);
        d.s.pop();
        assert!(write_s2p(&d, TouchstoneFormat::RealImaginary, "", &mut out).is_err());
        let mut d = network(3);
        d.s[0][3] = c(0.0, 0.0);
        let e = write_s2p(&d, TouchstoneFormat::DecibelAngle, "", &mut out).unwrap_err();
        assert!(e.to_string().contains("S22 of point 1 is zero"), "{e}");
        assert!(out.is_empty());
        write_s2p(&d, TouchstoneFormat::MagnitudeAngle, "", &mut out).unwrap();
    }

    fn check(text: &str) -> std::result::Result<(), TestCaseError> {
        for result in [
            parse_s2p(text).map(|d| (d.f_hz, d.s.len())),
            parse_s1p(text).map(|d| (d.f_hz, d.s.len())),
        ] {
            match result {
                Ok((f, n)) => {
                    prop_assert_eq!(f.len(), n);
                    prop_assert!(!f.is_empty());
                    prop_assert!(f.windows(2).all(|w| w[0] < w[1]));
                }
                Err(e) => prop_assert!(e.message().starts_with("line "), "{}", e),
            }
        }
        let _ = trace_from_s21_only(text);
        Ok(())
    }

    #[test]
    fn arbitrary_text_never_panics() {
        runner(2000).run(&any::<String>(), |s| check(&s)).unwrap();
        let bytes = prop::collection::vec(any::<u8>(), 0..400);
        runner(1000)
            .run(&bytes, |b| check(&String::from_utf8_lossy(&b)))
            .unwrap();
        let near = "[0-9 .eE+\\-#!\n\\[\\]RrSsMmHhZzGgKkAaDdIi]{0,200}";
        runner(3000).run(&near, |s| check(&s)).unwrap();
    }

    #[test]
    fn mutated_valid_files_never_panic() {
        let files = [
            data!("format_ri.s2p"),
            data!("format_db.s2p"),
            data!("noise_block.s2p"),
            data!("wrapped_records.s2p"),
            data!("option_any_order.s2p"),
            data!("s21_only.s1p"),
        ];
        let chars = [
            ' ', '\n', '\t', '!', '#', '[', '.', '-', 'e', 'E', '0', '1', '9', 'R', 'S', 'Z', 'M',
            'x', '\u{0}', 'µ',
        ];
        let edit = (any::<u16>(), 0u8..3, prop::sample::select(chars.to_vec()));
        let strategy = (0..files.len(), prop::collection::vec(edit, 1..8));
        runner(4000)
            .run(&strategy, |(which, edits)| {
                let mut text: Vec<char> = files[which].chars().collect();
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
                check(&text.into_iter().collect::<String>())
            })
            .unwrap();
    }
}
