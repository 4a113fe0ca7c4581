//! Valid files, damaged the way files get damaged: property tests that mutate real sweep CSV,
//! Touchstone, batch CSV and design JSON files and check that every reader either refuses the
//! result with a clear error or returns values that are all usable.
//!
//! The damage: lines deleted, duplicated or swapped (a bad copy and paste), a cell replaced by
//! a token that instruments and people actually produce (an empty cell, `NaN`, `inf`, `-`, a
//! decimal comma, an overflowing exponent, a unit of the wrong kind, text), the file truncated
//! mid-line, stray characters inserted; for design JSON, numbers set to extremes, fields
//! deleted, lists shortened, values of the wrong type. The fixed-seed runner makes every case
//! reproducible; the shrunk failing input is printed.

use filter_core::batch::{parse_batch_csv, BatchDefaults};
use filter_core::crystal::Crystal;
use filter_core::design::{BandwidthAt, Design, ResponseFamily};
use filter_core::io::sweep_csv::parse_sweep_csv;
use filter_core::io::touchstone::{parse_s2p, trace_from_s21_only, trace_from_s2p};
use filter_core::io::MeasuredTrace;
use filter_core::measure::{fit_sweep, FixtureSpec};
use filter_core::synthesis::{predict, LadderSpec};
use filter_core::Error;
use proptest::prelude::*;
use proptest::test_runner::{Config, RngAlgorithm, TestCaseError, TestRng, TestRunner};
use serde_json::Value;

fn runner(cases: u32) -> TestRunner {
    let config = Config {
        cases,
        failure_persistence: None,
        ..Config::default()
    };
    TestRunner::new_with_rng(config, TestRng::deterministic_rng(RngAlgorithm::ChaCha))
}

fn fail(msg: impl Into<String>) -> TestCaseError {
    TestCaseError::fail(msg.into())
}

/// The damage tokens: what ends up in cells of real files.
const TOKENS: &[&str] = &[
    "",
    " ",
    "NaN",
    "nan",
    "inf",
    "-inf",
    "Infinity",
    "-",
    "--",
    "9,8304",
    "1e999",
    "-1e999",
    "1e-400",
    "0",
    "-0",
    "-1",
    "1e308",
    "4.9e-324",
    "0x1F",
    "1.2.3",
    "15pH",
    "9.8 MHz",
    "9.8MHZ",
    "mhz",
    "\"",
    "\"\"",
    "#",
    "!",
    "\t",
    ";",
    ",",
    "µ",
    "１２",
    "\u{feff}",
    "\u{0}",
    "1e",
    "e5",
    "+",
    ".",
    "R47",
    "4k7k",
    "999999999999999999999999999999",
];

/// One kind of damage; indices are taken modulo the file's size when applied.
#[derive(Debug, Clone)]
enum Damage {
    DeleteLine(usize),
    DuplicateLine(usize),
    SwapLines(usize, usize),
    /// Replace the cell of a line (cells split on `,`, `;`, tab or space) by a token.
    ReplaceCell(usize, usize, usize),
    /// Insert a token at a character position.
    Insert(usize, usize),
    /// Cut the text at a character position.
    Truncate(usize),
    /// Replace the second cell of a line (the level of a sweep row) by a plausible-looking
    /// number, so the file still reads and the damage reaches the fit.
    ReplaceLevel(usize, usize),
}

/// Levels that read as numbers but no crystal in a fixture produces, or only at the edge.
const LEVELS: &[&str] = &[
    "0", "-0", "-200", "40", "-1e6", "1e-300", "-3", "10", "-100.5", "-0.001", "-400", "-60",
];

/// Damage that keeps a sweep readable: levels changed, rows dropped, the end cut off.
fn level_damage() -> impl Strategy<Value = Damage> {
    prop_oneof![
        4 => (0usize..10_000, 0..LEVELS.len()).prop_map(|(l, v)| Damage::ReplaceLevel(l, v)),
        2 => (0usize..10_000).prop_map(Damage::DeleteLine),
        1 => (0usize..10_000).prop_map(Damage::Truncate),
    ]
}

fn damage() -> impl Strategy<Value = Damage> {
    let any_index = 0usize..10_000;
    prop_oneof![
        1 => any_index.clone().prop_map(Damage::DeleteLine),
        1 => any_index.clone().prop_map(Damage::DuplicateLine),
        1 => (any_index.clone(), any_index.clone()).prop_map(|(a, b)| Damage::SwapLines(a, b)),
        4 => (any_index.clone(), 0usize..9, 0..TOKENS.len())
            .prop_map(|(l, c, t)| Damage::ReplaceCell(l, c, t)),
        2 => (any_index.clone(), 0..TOKENS.len()).prop_map(|(p, t)| Damage::Insert(p, t)),
        1 => any_index.prop_map(Damage::Truncate),
    ]
}

fn apply(text: &str, d: &Damage) -> String {
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    let n = lines.len().max(1);
    match *d {
        Damage::DeleteLine(i) => {
            if !lines.is_empty() {
                lines.remove(i % n);
            }
        }
        Damage::DuplicateLine(i) => {
            if let Some(l) = lines.get(i % n).cloned() {
                lines.insert(i % n, l);
            }
        }
        Damage::SwapLines(a, b) => {
            if !lines.is_empty() {
                lines.swap(a % n, b % n);
            }
        }
        Damage::ReplaceCell(l, c, t) => {
            if let Some(line) = lines.get_mut(l % n) {
                let sep = [',', ';', '\t', ' ']
                    .into_iter()
                    .find(|s| line.contains(*s))
                    .unwrap_or(',');
                let mut cells: Vec<String> = line.split(sep).map(str::to_string).collect();
                let k = c % cells.len();
                cells[k] = TOKENS[t].to_string();
                *line = cells.join(&sep.to_string());
            }
        }
        Damage::ReplaceLevel(l, v) => {
            if let Some(line) = lines.get_mut(l % n) {
                if let Some((f, rest)) = line.split_once(',') {
                    let tail = rest.split_once(',').map(|(_, t)| format!(",{t}"));
                    *line = format!("{f},{}{}", LEVELS[v], tail.unwrap_or_default());
                }
            }
        }
        Damage::Insert(p, t) => {
            let chars: Vec<char> = text.chars().collect();
            let at = p % (chars.len() + 1);
            let mut s: String = chars[..at].iter().collect();
            s.push_str(TOKENS[t]);
            s.extend(&chars[at..]);
            return s;
        }
        Damage::Truncate(p) => {
            let chars: Vec<char> = text.chars().collect();
            return chars[..p % (chars.len() + 1)].iter().collect();
        }
    }
    let mut out = lines.join("\n");
    out.push('\n');
    out
}

fn damaged(text: &'static str) -> impl Strategy<Value = (Vec<Damage>, String)> {
    proptest::collection::vec(damage(), 1..5).prop_map(move |ds| {
        let mut t = text.to_string();
        for d in &ds {
            t = apply(&t, d);
        }
        (ds, t)
    })
}

fn clear(e: &Error) -> Result<(), TestCaseError> {
    if e.message().trim().is_empty() {
        return Err(fail(format!("empty error message: {e:?}")));
    }
    Ok(())
}

fn usable_trace(t: &MeasuredTrace, allow_infinite_db: bool) -> Result<(), TestCaseError> {
    let n = t.f_hz.len();
    if t.s21_db.len() != n || t.s21_deg.as_ref().is_some_and(|p| p.len() != n) {
        return Err(fail("column lengths differ"));
    }
    if !t.f_hz.iter().all(|f| f.is_finite() && *f >= 0.0) {
        return Err(fail(format!("a bad frequency in {:?}", t.f_hz)));
    }
    if !t.f_hz.windows(2).all(|w| w[0] < w[1]) {
        return Err(fail("frequencies do not strictly increase"));
    }
    // Touchstone S21 = 0 exactly is −∞ dB by documented choice; NaN never.
    if t.s21_db
        .iter()
        .any(|x| x.is_nan() || (!allow_infinite_db && x.is_infinite()))
    {
        return Err(fail("a non-finite level"));
    }
    if t.s21_deg.iter().flatten().any(|x| !x.is_finite()) {
        return Err(fail("a non-finite phase"));
    }
    Ok(())
}

const SWEEP: &str = include_str!("../../examples/sweeps/x01.csv");
const S2P: &str = include_str!("../../examples/sweeps/x31.s2p");
const S21_ONLY: &str = include_str!("../data/touchstone/s21_only.s1p");

#[test]
fn damaged_sweep_csv_is_refused_or_usable() {
    let mut r = runner(600);
    let outcome = r.run(&damaged(SWEEP), |(_, text)| match parse_sweep_csv(&text) {
        Err(e) => clear(&e),
        Ok(t) => usable_trace(&t, false),
    });
    if let Err(e) = outcome {
        panic!("{e}");
    }
}

#[test]
fn damaged_touchstone_is_refused_or_usable() {
    let mut r = runner(400);
    let outcome = r.run(&damaged(S2P), |(_, text)| match parse_s2p(&text) {
        Err(e) => clear(&e),
        Ok(d) => {
            if d.s
                .iter()
                .flatten()
                .any(|z| !(z.re.is_finite() && z.im.is_finite()))
            {
                return Err(fail("a non-finite S-parameter"));
            }
            usable_trace(&trace_from_s2p(&d), true)
        }
    });
    if let Err(e) = outcome {
        panic!("{e}");
    }
    let mut r = runner(300);
    let outcome = r.run(&damaged(S21_ONLY), |(_, text)| {
        match trace_from_s21_only(&text) {
            Err(e) => clear(&e),
            Ok(t) => usable_trace(&t, true),
        }
    });
    if let Err(e) = outcome {
        panic!("{e}");
    }
}

/// A small batch in the batch-file layout (our own values).
const BATCH: &str = "# our own test batch\n\
id,fs_hz,rm_ohm,lm_h,c0_f\n\
x01,9.826773M,8.35,17.02m,3.76p\n\
x02,9826752.8,10.29,16.83m,4.05p\n\
\"x 03\",9.8266941 MHz,8R8,0.016729,4p0\n\
x04,9826774,9.1,17.1e-3,3.9e-12\n\
x05,9.82671M,11,16.9m,3.8p\n";

#[test]
fn damaged_batch_csv_is_refused_or_usable() {
    let mut r = runner(600);
    let defaults = BatchDefaults {
        lm_h: Some(15e-3),
        c0_f: None,
        rm_ohm: Some(10.0),
    };
    let outcome = r.run(
        &(damaged(BATCH), any::<bool>()),
        |((_, text), with_defaults)| {
            let d = if with_defaults {
                defaults
            } else {
                BatchDefaults::default()
            };
            match parse_batch_csv(&text, &d) {
                Err(e) => clear(&e),
                Ok(crystals) => {
                    let mut ids = std::collections::HashSet::new();
                    for c in &crystals {
                        for v in [c.fs_hz(), c.lm_h(), c.cm_f()] {
                            if !(v.is_finite() && v > 0.0) {
                                return Err(fail(format!("an unusable crystal {c:?}")));
                            }
                        }
                        if !(c.rm_ohm().is_finite() && c.c0_f.is_finite()) {
                            return Err(fail(format!("an unusable crystal {c:?}")));
                        }
                        if !ids.insert(c.id.clone()) {
                            return Err(fail(format!("duplicate id {:?} accepted", c.id)));
                        }
                    }
                    Ok(())
                }
            }
        },
    );
    if let Err(e) = outcome {
        panic!("{e}");
    }
}

/// Every fourth line of the example sweep: a quick trace for the fit (the full one has 800
/// points, which costs more than the damage tests need).
fn short_sweep() -> &'static str {
    static SHORT: std::sync::OnceLock<String> = std::sync::OnceLock::new();
    SHORT.get_or_init(|| {
        let mut out = String::new();
        let mut data = 0;
        for line in SWEEP.lines() {
            let is_data = line.starts_with(|c: char| c.is_ascii_digit());
            if !is_data || data % 4 == 0 {
                out.push_str(line);
                out.push('\n');
            }
            if is_data {
                data += 1;
            }
        }
        out
    })
}

#[test]
fn damaged_sweeps_fit_to_a_finite_crystal_or_an_error() {
    let mut r = runner(150);
    let strategy = proptest::collection::vec(level_damage(), 1..6);
    let outcome = r.run(&strategy, |ds| {
        let mut text = short_sweep().to_string();
        for d in &ds {
            text = apply(&text, d);
        }
        let Ok(trace) = parse_sweep_csv(&text) else {
            return Ok(());
        };
        match fit_sweep(&trace, &FixtureSpec::default(), "x01") {
            Err(e) => clear(&e),
            Ok(rep) => {
                let c = &rep.crystal;
                let figures = [
                    c.fs_hz(),
                    c.lm_h(),
                    c.cm_f(),
                    c.rm_ohm(),
                    c.c0_f,
                    rep.peak_hz,
                    rep.rms_residual_db,
                    rep.recommended_sweep.start_hz,
                    rep.recommended_sweep.stop_hz,
                ];
                if figures.iter().any(|v| !v.is_finite()) {
                    return Err(fail(format!("a non-finite fit figure: {figures:?}")));
                }
                let s = rep.sigma;
                if [s.fs_hz, s.rm_ohm, s.lm_h, s.cm_f, s.c0_f]
                    .iter()
                    .any(|v| v.is_nan())
                {
                    return Err(fail(format!("a NaN uncertainty: {s:?}")));
                }
                Ok(())
            }
        }
    });
    if let Err(e) = outcome {
        panic!("{e}");
    }
}

/// A valid design record to damage: Chebyshev 0.1 dB, order 4, 2.4 kHz at −6 dB, from our own
/// example crystal (9.8304 MHz, 17 mH, 10 Ω, 3.8 pF).
fn design_json() -> &'static Value {
    static DESIGN: std::sync::OnceLock<Value> = std::sync::OnceLock::new();
    DESIGN.get_or_init(|| {
        let x = Crystal::from_fs_lm("x", 9.8304e6, 17e-3, 10.0, 3.8e-12).expect("valid crystal");
        let d = LadderSpec::identical(
            ResponseFamily::Chebyshev { ripple_db: 0.1 },
            4,
            2400.0,
            BandwidthAt::Db6,
            &x,
        )
        .synthesize()
        .expect("an ordinary design");
        serde_json::from_str(&d.to_json()).expect("the record is JSON")
    })
}

/// JSON pointers to every value in `v`.
fn pointers(v: &Value, at: String, out: &mut Vec<String>) {
    match v {
        Value::Array(items) => {
            for (i, x) in items.iter().enumerate() {
                pointers(x, format!("{at}/{i}"), out);
            }
        }
        Value::Object(map) => {
            for (k, x) in map {
                pointers(x, format!("{at}/{k}"), out);
            }
        }
        _ => {}
    }
    out.push(at);
}

/// One hand edit of a design record.
#[derive(Debug, Clone)]
enum Edit {
    /// Replace the value at a pointer by one of the extreme values.
    Set(usize, usize),
    /// Multiply a number by 10^k.
    Scale(usize, i32),
    /// Remove the value (a key from its object, an entry from its list).
    Remove(usize),
}

const EXTREMES: &[&str] = &[
    "0",
    "-1",
    "1e-300",
    "1e300",
    "1.7976931348623157e308",
    "5e-324",
    "null",
    "\"9.8304 MHz\"",
    "[]",
    "{}",
    "true",
    "1e15",
    "18446744073709551616",
];

fn edit() -> impl Strategy<Value = Edit> {
    prop_oneof![
        (0usize..10_000, 0..EXTREMES.len()).prop_map(|(p, v)| Edit::Set(p, v)),
        (0usize..10_000, -30i32..30).prop_map(|(p, k)| Edit::Scale(p, k)),
        (0usize..10_000).prop_map(Edit::Remove),
    ]
}

fn apply_edit(v: &mut Value, e: &Edit) {
    let mut ps = Vec::new();
    pointers(v, String::new(), &mut ps);
    ps.retain(|p| !p.is_empty());
    let pick = |i: usize| ps[i % ps.len()].clone();
    match *e {
        Edit::Set(i, x) => {
            if let Some(slot) = v.pointer_mut(&pick(i)) {
                *slot = serde_json::from_str(EXTREMES[x]).expect("the extremes are JSON");
            }
        }
        Edit::Scale(i, k) => {
            if let Some(slot) = v.pointer_mut(&pick(i)) {
                if let Some(n) = slot
                    .as_f64()
                    .and_then(|x| serde_json::Number::from_f64(x * 10f64.powi(k)))
                {
                    *slot = Value::Number(n);
                }
            }
        }
        Edit::Remove(i) => {
            let p = pick(i);
            let (parent, last) = p.rsplit_once('/').unwrap_or(("", p.as_str()));
            match v.pointer_mut(parent) {
                Some(Value::Object(m)) => {
                    m.remove(last);
                }
                Some(Value::Array(a)) => {
                    if let Ok(k) = last.parse::<usize>() {
                        if k < a.len() {
                            a.remove(k);
                        }
                    }
                }
                _ => {}
            }
        }
    }
}

#[test]
fn hand_edited_designs_are_refused_or_predict_finite_figures() {
    let mut r = runner(150);
    let outcome = r.run(&proptest::collection::vec(edit(), 1..4), |edits| {
        let mut v = design_json().clone();
        for e in &edits {
            apply_edit(&mut v, e);
        }
        let d = match Design::from_json(&v.to_string()) {
            Err(e) => return clear(&e),
            Ok(d) => d,
        };
        match predict(&d) {
            Err(e) => clear(&e),
            Ok(p) => {
                let figures = [
                    p.insertion_loss_db,
                    p.ripple_db,
                    p.bw_3db_hz,
                    p.bw_6db_hz,
                    p.center_hz,
                    p.return_loss_db,
                    p.group_delay_center_s,
                    p.group_delay_variation_s,
                ];
                if figures.iter().any(|x| !x.is_finite()) || p.bw_3db_hz < 0.0 {
                    return Err(fail(format!("unusable prediction {p:?}")));
                }
                Ok(())
            }
        }
    });
    if let Err(e) = outcome {
        panic!("{e}");
    }
}

/// The undamaged files are read: the damage tests start from valid input.
#[test]
fn the_undamaged_files_are_valid() {
    parse_sweep_csv(SWEEP).expect("example sweep");
    parse_sweep_csv(short_sweep()).expect("short sweep");
    parse_s2p(S2P).expect("example s2p");
    trace_from_s21_only(S21_ONLY).expect("s21-only file");
    parse_batch_csv(BATCH, &BatchDefaults::default()).expect("batch");
    Design::from_json(&design_json().to_string()).expect("design");
}
