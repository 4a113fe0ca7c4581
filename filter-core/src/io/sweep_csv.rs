//! Sweep CSV: a measured S21 trace as a small delimited text table.
//!
//! # Format read by [`parse_sweep_csv`]
//! ```text
//! # crystal 7, 50 ohm fixture          <- lines starting with '#' are ignored
//! frequency_hz,s21_db,s21_deg          <- header row, required
//! 8.9990M,-41.2,88.1
//! 8999100,-40.8,87.9                   <- plain numbers or engineering notation
//! ...
//! ```
//! - The first line that is neither blank nor a `#` comment is the header. Its column names
//!   (any case, optionally in double quotes, any order) are `frequency_hz` and `s21_db`, both
//!   required, and `s21_deg`, optional. Any other column name is an error that names it: an
//!   unknown column is more often a misspelling (`s21_dg` would silently drop the phase, a
//!   `frequency_mhz` column would be read in the wrong unit) than something to skip, so the
//!   file must hold exactly these columns.
//! - The delimiter is the one of `,` `;` or tab that appears in the header; a header containing
//!   more than one of them is ambiguous and rejected. Decimal commas are not accepted.
//! - Cells are read with [`parse_quantity`]: `9000100`, `9.0001M`, `9.0001 MHz`, `9.0001e6` are
//!   the same frequency (which must be positive); `s21_db` may carry `dB`; `s21_deg` is a plain
//!   number of degrees. Spaces around cells and double quotes around a cell are ignored.
//! - Blank lines and lines whose first non-blank character is `#` are ignored anywhere.
//! - Every data row has exactly one cell per header column.
//! - Frequencies strictly increase, and there are at least [`MIN_POINTS`] rows.
//!
//! Every error names the line (1-based, counting every line of the text) and, for a cell, the
//! column number and name.
//!
//! # Format written by [`write_sweep_csv`]
//! The header (`frequency_hz,s21_db` and `,s21_deg` when the trace has phase) and one row per
//! point, comma separated, each number with 17 significant digits in exponent notation
//! (`9.0001000000000000e6`). Seventeen digits identify every `f64` uniquely \[1\], so
//! writing and reading back gives the same values bit for bit (except that −0 reads as 0).
//!
//! # References
//! 1. IEEE 754-2019, *Standard for Floating-Point Arithmetic*, §5.12.2 (clause number from
//!    memory): 17 significant decimal digits suffice to recover any binary64 value.
//! 2. RFC 4180, *Common Format and MIME Type for Comma-Separated Values (CSV) Files*, 2005
//!    (the row and field structure; quoting beyond a whole cell is not supported here).

use super::MeasuredTrace;
use crate::error::{Error, ErrorKind, Result};
use crate::units::{format_si_digits, parse_positive, parse_quantity, Quantity};
use std::io::{self, Write};

/// The fewest points a sweep must have to be read.
pub const MIN_POINTS: usize = 10;

/// The columns a sweep CSV may hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Column {
    Frequency,
    S21Db,
    S21Deg,
}

impl Column {
    fn name(self) -> &'static str {
        match self {
            Column::Frequency => "frequency_hz",
            Column::S21Db => "s21_db",
            Column::S21Deg => "s21_deg",
        }
    }

    fn from_name(name: &str) -> Option<Column> {
        [Column::Frequency, Column::S21Db, Column::S21Deg]
            .into_iter()
            .find(|c| c.name().eq_ignore_ascii_case(name))
    }
}

const EXPECTED_HEADER: &str = "frequency_hz,s21_db and optionally s21_deg";

/// A cell without surrounding spaces and double quotes.
fn clean_cell(cell: &str) -> &str {
    let cell = cell.trim();
    cell.strip_prefix('"')
        .and_then(|c| c.strip_suffix('"'))
        .map_or(cell, str::trim)
}

/// The lines of `text` that carry content, with their 1-based line numbers.
fn content_lines(text: &str) -> impl Iterator<Item = (usize, &str)> {
    let text = text.strip_prefix('\u{FEFF}').unwrap_or(text);
    text.split('\n').enumerate().filter_map(|(i, line)| {
        let line = line.strip_suffix('\r').unwrap_or(line);
        let t = line.trim();
        (!t.is_empty() && !t.starts_with('#')).then_some((i + 1, line))
    })
}

fn line_error(line: usize, message: impl std::fmt::Display) -> Error {
    Error::parse(format!("line {line}: {message}"))
}

/// The header: delimiter and the columns in file order (at most 3).
struct Header {
    delimiter: char,
    columns: [Option<Column>; 3],
    count: usize,
}

impl Header {
    fn columns(&self) -> impl Iterator<Item = Column> + '_ {
        self.columns.iter().take(self.count).flatten().copied()
    }

    fn has(&self, c: Column) -> bool {
        self.columns().any(|x| x == c)
    }

    /// The header as written with commas, for messages.
    fn describe(&self) -> String {
        let names: Vec<&str> = self.columns().map(Column::name).collect();
        names.join(",")
    }
}

fn parse_header(line_no: usize, line: &str) -> Result<Header> {
    let mut present = [',', ';', '\t'].into_iter().filter(|d| line.contains(*d));
    let delimiter = match (present.next(), present.next()) {
        (Some(d), None) => d,
        (None, _) => {
            let cell = clean_cell(line);
            if Column::from_name(cell).is_some() {
                return Err(line_error(
                    line_no,
                    format_args!(
                        "the header has the one column '{cell}'; expected {EXPECTED_HEADER}, \
                         separated by ',' (or ';' or tabs)"
                    ),
                ));
            }
            return Err(missing_header(line_no, line));
        }
        _ => {
            return Err(line_error(
                line_no,
                "the header mixes delimiters (',', ';', tab); use one of them throughout",
            ))
        }
    };
    let mut header = Header {
        delimiter,
        columns: [None; 3],
        count: 0,
    };
    for (i, raw) in line.split(delimiter).enumerate() {
        let name = clean_cell(raw);
        let Some(column) = Column::from_name(name) else {
            if parse_quantity("cell", name, Quantity::Dimensionless).is_ok()
                || parse_quantity("cell", name, Quantity::Frequency).is_ok()
            {
                return Err(missing_header(line_no, line));
            }
            return Err(line_error(
                line_no,
                format_args!(
                    "unknown column '{name}' (column {}); expected {EXPECTED_HEADER}, and no \
                     other columns",
                    i + 1
                ),
            ));
        };
        if header.has(column) {
            return Err(line_error(
                line_no,
                format_args!("column '{}' appears twice in the header", column.name()),
            ));
        }
        match header.columns.get_mut(header.count) {
            Some(slot) => *slot = Some(column),
            None => {
                // Unreachable with three distinct known names, but keep it an error.
                return Err(line_error(line_no, "more than three columns in the header"));
            }
        }
        header.count += 1;
    }
    for required in [Column::Frequency, Column::S21Db] {
        if !header.has(required) {
            return Err(line_error(
                line_no,
                format_args!(
                    "the header has no '{}' column; expected {EXPECTED_HEADER}",
                    required.name()
                ),
            ));
        }
    }
    Ok(header)
}

fn missing_header(line_no: usize, line: &str) -> Error {
    let shown: String = line.chars().take(60).collect();
    line_error(
        line_no,
        format_args!(
            "expected a header row naming the columns, e.g. 'frequency_hz,s21_db,s21_deg', \
             found '{shown}'"
        ),
    )
}

/// Read a sweep CSV (see the [module documentation](self) for the format).
///
/// The result has `reference_ohm: None` (the format does not state it) and `s21_deg` when the
/// file has that column.
///
/// # Errors
/// [`ErrorKind::Parse`] with the line number (and column for a cell) for a missing or bad
/// header, a row with the wrong number of cells, a cell that is not a valid number (including
/// `NaN`), or a frequency that does not increase; [`ErrorKind::InvalidValue`] for fewer than
/// [`MIN_POINTS`] rows, and from [`parse_quantity`] for out-of-range cells (with line and
/// column prepended).
///
/// ```
/// use filter_core::io::sweep_csv::parse_sweep_csv;
/// let mut text = String::from("frequency_hz,s21_db\n");
/// for i in 0..10 {
///     text += &format!("{}M,-{}\n", 9.0 + 0.001 * i as f64, 40 - i);
/// }
/// let trace = parse_sweep_csv(&text)?;
/// assert_eq!(trace.f_hz[0], 9e6);
/// assert_eq!(trace.s21_db[9], -31.0);
/// # Ok::<(), filter_core::Error>(())
/// ```
pub fn parse_sweep_csv(text: &str) -> Result<MeasuredTrace> {
    let mut lines = content_lines(text);
    let Some((header_line, header_text)) = lines.next() else {
        return Err(Error::parse(
            "line 1: the sweep is empty; expected a header row 'frequency_hz,s21_db,s21_deg' \
             and at least 10 rows of data",
        ));
    };
    let header = parse_header(header_line, header_text)?;
    let with_phase = header.has(Column::S21Deg);
    let mut f_hz = Vec::new();
    let mut s21_db = Vec::new();
    let mut s21_deg = Vec::new();
    let mut previous: Option<(f64, usize)> = None;
    for (line_no, line) in lines {
        let mut cells = line.split(header.delimiter);
        let (mut f, mut db, mut deg) = (f64::NAN, f64::NAN, f64::NAN);
        for (index, column) in header.columns().enumerate() {
            let Some(raw) = cells.next() else {
                return Err(wrong_count(line_no, index, &header));
            };
            let cell = clean_cell(raw);
            let parsed = match column {
                Column::Frequency => parse_positive(column.name(), cell, Quantity::Frequency),
                Column::S21Db => parse_quantity(column.name(), cell, Quantity::Decibels),
                Column::S21Deg => parse_quantity(column.name(), cell, Quantity::Dimensionless),
            };
            let value = parsed.map_err(|e| {
                let e = e.context(format_args!("line {line_no}, column {}", index + 1));
                if header.delimiter == ';' && cell.contains(',') {
                    e.with_hint("decimal commas are not accepted; write 9000100.5, not 9000100,5")
                } else {
                    e
                }
            })?;
            match column {
                Column::Frequency => f = value,
                Column::S21Db => db = value,
                Column::S21Deg => deg = value,
            }
        }
        let extra = cells.count();
        if extra > 0 {
            return Err(wrong_count(line_no, header.count + extra, &header));
        }
        if let Some((prev_f, prev_line)) = previous {
            if f <= prev_f {
                return Err(line_error(
                    line_no,
                    format_args!(
                        "frequency_hz {} is not above {} on line {prev_line}; frequencies must \
                         strictly increase",
                        format_si_digits(f, "Hz", 10),
                        format_si_digits(prev_f, "Hz", 10)
                    ),
                ));
            }
        }
        previous = Some((f, line_no));
        f_hz.push(f);
        s21_db.push(db);
        if with_phase {
            s21_deg.push(deg);
        }
    }
    if f_hz.len() < MIN_POINTS {
        return Err(Error::new(
            ErrorKind::InvalidValue,
            format!(
                "the sweep has {} data rows; at least {MIN_POINTS} are needed",
                f_hz.len()
            ),
        ));
    }
    Ok(MeasuredTrace {
        f_hz,
        s21_db,
        s21_deg: with_phase.then_some(s21_deg),
        reference_ohm: None,
    })
}

fn wrong_count(line_no: usize, found: usize, header: &Header) -> Error {
    line_error(
        line_no,
        format_args!(
            "{found} cells, expected {} ({})",
            header.count,
            header.describe()
        ),
    )
}

fn invalid_input(message: String) -> io::Error {
    io::Error::new(io::ErrorKind::InvalidInput, message)
}

/// Write `trace` as a sweep CSV that [`parse_sweep_csv`] reads back exactly.
///
/// Columns `frequency_hz,s21_db`, plus `s21_deg` when the trace has phase; comma separated;
/// 17 significant digits. `reference_ohm` is not written (the format has no place for it).
/// The writer does not check the reader's other rules (increasing frequency, at least
/// [`MIN_POINTS`] rows).
///
/// # Errors
/// [`io::ErrorKind::InvalidInput`] (before anything is written) when the columns differ in
/// length or hold a non-finite value, which the format cannot represent; otherwise any error
/// of `w`.
pub fn write_sweep_csv(trace: &MeasuredTrace, w: &mut impl Write) -> io::Result<()> {
    let n = trace.f_hz.len();
    if trace.s21_db.len() != n {
        return Err(invalid_input(format!(
            "sweep csv: {n} frequencies but {} s21_db values",
            trace.s21_db.len()
        )));
    }
    let phase = trace.s21_deg.as_deref();
    if let Some(p) = phase {
        if p.len() != n {
            return Err(invalid_input(format!(
                "sweep csv: {n} frequencies but {} s21_deg values",
                p.len()
            )));
        }
    }
    let columns = [
        ("frequency_hz", Some(trace.f_hz.as_slice())),
        ("s21_db", Some(trace.s21_db.as_slice())),
        ("s21_deg", phase),
    ];
    for (name, values) in columns {
        if let Some(i) = values.and_then(|v| v.iter().position(|x| !x.is_finite())) {
            return Err(invalid_input(format!(
                "sweep csv: {name} of point {} is {}; only finite values can be written",
                i + 1,
                values.and_then(|v| v.get(i)).copied().unwrap_or(f64::NAN)
            )));
        }
    }
    w.write_all(if phase.is_some() {
        b"frequency_hz,s21_db,s21_deg\n"
    } else {
        b"frequency_hz,s21_db\n"
    })?;
    for (i, (f, db)) in trace.f_hz.iter().zip(&trace.s21_db).enumerate() {
        write!(w, "{f:.16e},{db:.16e}")?;
        if let Some(deg) = phase.and_then(|p| p.get(i)) {
            write!(w, ",{deg:.16e}")?;
        }
        w.write_all(b"\n")?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use proptest::test_runner::{Config, RngAlgorithm, TestRng, TestRunner};

    const VALID_ANY_ORDER: &str = include_str!("../../../tests/data/sweeps/valid_any_order.csv");
    const VALID_SEMICOLON: &str = include_str!("../../../tests/data/sweeps/valid_semicolon.csv");
    const VALID_TAB: &str = include_str!("../../../tests/data/sweeps/valid_tab_no_phase.tsv");

    fn runner(cases: u32) -> TestRunner {
        let config = Config {
            cases,
            failure_persistence: None,
            ..Config::default()
        };
        TestRunner::new_with_rng(config, TestRng::deterministic_rng(RngAlgorithm::ChaCha))
    }

    fn parse_err(text: &str) -> Error {
        match parse_sweep_csv(text) {
            Ok(t) => panic!("should be rejected, read {} points", t.f_hz.len()),
            Err(e) => e,
        }
    }

    #[test]
    fn reads_any_column_order_comments_and_engineering_notation() {
        let t = parse_sweep_csv(VALID_ANY_ORDER).unwrap();
        // Exact: each cell is one decimal number rounded once to f64.
        let f = [
            8_999_000.0,
            8_999_200.0,
            8_999_400.0,
            8_999_600.0,
            8_999_800.0,
            9_000_000.0,
            9_000_200.0,
            9_000_400.0,
            9_000_600.0,
            9_000_800.0,
            9_001_000.0,
            9_001_200.0,
        ];
        assert_eq!(t.f_hz, f);
        assert_eq!(t.s21_db[0], -40.5);
        assert_eq!(t.s21_db[3], -30.5);
        assert_eq!(t.s21_db[5], -3.5);
        assert_eq!(t.s21_db[11], -39.5);
        let deg = t.s21_deg.unwrap();
        assert_eq!(deg.len(), 12);
        assert_eq!(deg[0], 88.5);
        assert_eq!(deg[5], -0.25);
        assert_eq!(t.reference_ohm, None);
    }

    #[test]
    fn reads_semicolon_and_tab_delimiters() {
        let t = parse_sweep_csv(VALID_SEMICOLON).unwrap();
        assert_eq!(t.f_hz.len(), 11);
        assert_eq!(t.f_hz[10], 9_001_000.0);
        assert_eq!(t.s21_db[1], -37.5);
        assert_eq!(t.s21_deg.as_ref().map(|d| d[10]), Some(-50.0));
        let t = parse_sweep_csv(VALID_TAB).unwrap();
        assert_eq!(t.f_hz.len(), 11);
        assert_eq!(t.f_hz[3], 10_700_300.0);
        assert_eq!(t.s21_db[3], -23.25);
        assert_eq!(t.s21_deg, None);
    }

    #[test]
    fn bad_files_name_the_line_and_column() {
        let cases: &[(&str, &str)] = &[
            (
                include_str!("../../../tests/data/sweeps/bad_decreasing.csv"),
                "line 7: frequency_hz 9.000300000 MHz is not above 9.000400000 MHz on line 6",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_nan.csv"),
                "line 5, column 2: s21_db 'NaN': not a finite number",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_garbage.csv"),
                "line 7, column 3: s21_deg '4x5': unknown suffix 'x5'",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_negative_frequency.csv"),
                "line 6, column 1: frequency_hz '-9000400': negative",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_cell_count.csv"),
                "line 4: 2 cells, expected 3 (frequency_hz,s21_db,s21_deg)",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_unknown_column.csv"),
                "line 1: unknown column 's21_dg' (column 3)",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_duplicate_column.csv"),
                "line 1: column 'frequency_hz' appears twice",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_no_header.csv"),
                "line 1: expected a header row",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_mixed_delimiters.csv"),
                "line 1: the header mixes delimiters",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_decimal_comma.csv"),
                "line 4, column 2: s21_db '-38,5'",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_too_few.csv"),
                "the sweep has 7 data rows; at least 10 are needed",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_empty.csv"),
                "line 1: the sweep is empty",
            ),
            (
                include_str!("../../../tests/data/sweeps/bad_only_comments.csv"),
                "line 1: the sweep is empty",
            ),
        ];
        for (text, want) in cases {
            let e = parse_err(text);
            assert!(e.message().starts_with(want), "want '{want}', got '{e}'");
        }
        let e = parse_err(include_str!(
            "../../../tests/data/sweeps/bad_decimal_comma.csv"
        ));
        assert!(e.hint().is_some_and(|h| h.contains("decimal commas")));
        assert_eq!(
            parse_err(include_str!("../../../tests/data/sweeps/bad_too_few.csv")).kind(),
            ErrorKind::InvalidValue
        );
    }

    #[test]
    fn a_header_of_one_known_column_says_what_is_missing() {
        let e = parse_err("frequency_hz\n9000000\n");
        assert!(e.message().contains("one column 'frequency_hz'"), "{e}");
        let e = parse_err("frequency_hz,s21_deg\n9000000,1\n");
        assert!(e.message().contains("no 's21_db' column"), "{e}");
    }

    fn trace(n: usize, phase: bool) -> MeasuredTrace {
        let f_hz: Vec<f64> = (0..n).map(|i| 9e6 + 37.123_456_789 * i as f64).collect();
        let s21_db: Vec<f64> = (0..n).map(|i| -40.0 + (i as f64).sqrt() / 3.0).collect();
        let s21_deg = phase.then(|| (0..n).map(|i| 90.0 - 1.0 / (1.0 + i as f64)).collect());
        MeasuredTrace {
            f_hz,
            s21_db,
            s21_deg,
            reference_ohm: None,
        }
    }

    #[test]
    fn write_then_read_is_exact() {
        for phase in [false, true] {
            let t = trace(200, phase);
            let mut out = Vec::new();
            write_sweep_csv(&t, &mut out).unwrap();
            let text = String::from_utf8(out).unwrap();
            // Bitwise equality: 17 significant digits recover every f64.
            assert_eq!(parse_sweep_csv(&text).unwrap(), t);
        }
        // Values at the edges of f64 survive too.
        let mut t = trace(10, true);
        t.s21_db[0] = f64::MIN_POSITIVE;
        t.s21_db[1] = -f64::MAX;
        t.f_hz[9] = 1e300;
        t.s21_deg.as_mut().unwrap()[2] = 5e-324;
        let mut out = Vec::new();
        write_sweep_csv(&t, &mut out).unwrap();
        assert_eq!(
            parse_sweep_csv(std::str::from_utf8(&out).unwrap()).unwrap(),
            t
        );
    }

    #[test]
    fn writer_refuses_what_the_format_cannot_hold() {
        let mut t = trace(12, true);
        t.s21_db[4] = f64::NAN;
        let mut out = Vec::new();
        let e = write_sweep_csv(&t, &mut out).unwrap_err();
        assert_eq!(e.kind(), io::ErrorKind::InvalidInput);
        assert!(e.to_string().contains("s21_db of point 5 is NaN"), "{e}");
        assert!(out.is_empty());
        let mut t = trace(12, true);
        t.s21_deg.as_mut().unwrap().pop();
        assert!(write_sweep_csv(&t, &mut Vec::new()).is_err());
        let mut t = trace(12, false);
        t.s21_db.pop();
        assert!(write_sweep_csv(&t, &mut Vec::new()).is_err());
    }

    fn check_invariants(text: &str) -> std::result::Result<(), TestCaseError> {
        if let Ok(t) = parse_sweep_csv(text) {
            prop_assert!(t.f_hz.len() >= MIN_POINTS);
            prop_assert_eq!(t.f_hz.len(), t.s21_db.len());
            if let Some(d) = &t.s21_deg {
                prop_assert_eq!(d.len(), t.f_hz.len());
                prop_assert!(d.iter().all(|x| x.is_finite()));
            }
            prop_assert!(t.f_hz.windows(2).all(|w| w[0] < w[1]));
            prop_assert!(t.f_hz.iter().all(|f| f.is_finite() && *f > 0.0));
            prop_assert!(t.s21_db.iter().all(|x| x.is_finite()));
        }
        Ok(())
    }

    #[test]
    fn arbitrary_text_never_panics() {
        runner(2000)
            .run(&any::<String>(), |s| check_invariants(&s))
            .unwrap();
        let header_then_junk = "[a-z_0-9,;\t\"#\n .eEMk-]{0,200}"
            .prop_map(|s| format!("frequency_hz,s21_db,s21_deg\n{s}"));
        runner(2000)
            .run(&header_then_junk, |s| check_invariants(&s))
            .unwrap();
    }

    #[test]
    fn mutated_valid_files_never_panic() {
        let files = [VALID_ANY_ORDER, VALID_SEMICOLON, VALID_TAB];
        let edit = (
            any::<u16>(),
            0u8..3,
            prop::sample::select(
                &[
                    ',', ';', '\t', '\n', '\r', '#', '.', '-', 'e', 'M', 'k', '0', '9', '"', ' ',
                    'µ', 'x',
                ][..],
            ),
        );
        let strategy = (0..files.len(), prop::collection::vec(edit, 1..8));
        runner(3000)
            .run(&strategy, |(which, edits)| {
                let mut chars: Vec<char> = files[which].chars().collect();
                for (pos, op, c) in edits {
                    let at = usize::from(pos) % (chars.len() + 1);
                    match op {
                        0 if at < chars.len() => {
                            chars.remove(at);
                        }
                        1 if at < chars.len() => chars[at] = c,
                        _ => chars.insert(at, c),
                    }
                }
                let text: String = chars.into_iter().collect();
                check_invariants(&text)
            })
            .unwrap();
    }
}
