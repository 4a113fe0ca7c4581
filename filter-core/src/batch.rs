//! Batch records of measured crystals, and the choice of matched sets from a batch.
//!
//! # Batch files
//! A CSV text with a header line. `id` and `fs_hz` are required; any of `rm_ohm`, `lm_h`,
//! `cm_f`, `c0_f` may follow, in any order. Cells take plain numbers or engineering notation
//! (`9.0001MHz`, `15m`, `3p5`; see [`crate::units`]). Blank lines and lines starting with `#`
//! are skipped; a cell may be quoted (`"a,b"`, with `""` for a quote). Missing values come
//! from [`BatchDefaults`]: Lm from `lm_h`, or from `cm_f` and fs (`Lm = 1/((2π·fs)²·Cm)`), or
//! from the default; Rm and C0 from their cells or defaults. When a record gives both `lm_h`
//! and `cm_f`, they must agree with `fs_hz` to 1 ppm. [`write_batch_csv`] writes every column
//! with 17 significant digits, so a written file reads back to the same `f64` values
//! (spurious modes are not part of the format).
//!
//! # Matching
//! A crystal ladder filter wants crystals whose series resonances agree to a small fraction of
//! its bandwidth; the tolerance commonly used is 10 % of the bandwidth (common practice,
//! [`default_tolerance`]). [`match_crystals`] first sets aside records that would spoil a set:
//!
//! 1. inconsistent records: fs, Lm or Cm not finite and positive, Rm or C0 not finite or
//!    negative (a record's fs, Lm and Cm agree by construction of [`Crystal`]);
//! 2. Lm inconsistent with the batch: outside 0.5–2× the batch median (another type, an
//!    overtone, or a mis-measured record);
//! 3. fs far from the batch: more than max(100 × the median absolute deviation, 100 ppm of
//!    the median) from the median. 100 ppm is wider than the ±30 ppm tolerance of ordinary
//!    crystals (common practice), so only a crystal of another nominal frequency falls out;
//! 4. Rm more than 2× the batch median (it would load its mesh and add loss).
//!
//! It then chooses the best set of `count` crystals: the smallest fs spread (max − min), ties
//! broken by the smallest Lm spread (max − min), then by the smallest largest Rm, then by the
//! earliest crystals in the input. Sorted by fs, the minimal spread s* is that of the best
//! window of `count` consecutive crystals (any set of spread s has a window starting at its
//! lowest crystal whose spread is at most s). Every optimal set lies inside a window
//! [a, a + s*] starting at some crystal's fs, and within it the same argument applies to Lm;
//! the largest Rm of the best choice there is the count-th smallest Rm. So the search costs
//! O(m log m) for m crystals when few windows tie exactly (and stays exact when many do).
//! Several disjoint sets are taken greedily: the best set, removed, then the best of the rest,
//! while the spread stays within the tolerance.
//!
//! # References
//! 1. A. I. Zverev, *Handbook of Filter Synthesis*, 1967, the chapter on crystal filters
//!    (why the resonators of a ladder must agree in frequency; chapter from memory).

use crate::crystal::Crystal;
use crate::error::{Error, Result};
use crate::units::{parse_non_negative, parse_positive, Quantity};
use std::collections::HashMap;
use std::io::{self, Write};

/// Values used for records that leave a column out or a cell empty.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct BatchDefaults {
    /// Motional inductance, H, when neither `lm_h` nor `cm_f` is given.
    pub lm_h: Option<f64>,
    /// Holder capacitance, F.
    pub c0_f: Option<f64>,
    /// Motional resistance, Ω.
    pub rm_ohm: Option<f64>,
}

/// The columns of a batch file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Column {
    Id,
    Fs,
    Rm,
    Lm,
    Cm,
    C0,
}

impl Column {
    const ALL: [Column; 6] = [
        Column::Id,
        Column::Fs,
        Column::Rm,
        Column::Lm,
        Column::Cm,
        Column::C0,
    ];

    fn name(self) -> &'static str {
        match self {
            Column::Id => "id",
            Column::Fs => "fs_hz",
            Column::Rm => "rm_ohm",
            Column::Lm => "lm_h",
            Column::Cm => "cm_f",
            Column::C0 => "c0_f",
        }
    }
}

/// Split one CSV line into cells, honouring double quotes.
fn split_cells(line: &str, line_no: usize) -> Result<Vec<String>> {
    let mut cells = Vec::new();
    let mut cur = String::new();
    let mut chars = line.chars().peekable();
    let mut quoted = false;
    let mut was_quoted = false;
    while let Some(c) = chars.next() {
        if quoted {
            if c == '"' {
                if chars.peek() == Some(&'"') {
                    cur.push('"');
                    chars.next();
                } else {
                    quoted = false;
                }
            } else {
                cur.push(c);
            }
        } else if c == '"' && cur.trim().is_empty() && !was_quoted {
            cur.clear();
            quoted = true;
            was_quoted = true;
        } else if c == ',' {
            cells.push(if was_quoted {
                std::mem::take(&mut cur)
            } else {
                cur.trim().to_string()
            });
            cur.clear();
            was_quoted = false;
        } else if was_quoted {
            if !c.is_whitespace() {
                return Err(Error::parse(format!(
                    "line {line_no}, column {}: text after a closing quote; expected a comma",
                    cells.len() + 1
                )));
            }
        } else {
            cur.push(c);
        }
    }
    if quoted {
        return Err(Error::parse(format!(
            "line {line_no}, column {}: a quote is not closed; expected a closing \"",
            cells.len() + 1
        )));
    }
    cells.push(if was_quoted {
        cur
    } else {
        cur.trim().to_string()
    });
    Ok(cells)
}

/// Read a batch file (see the module docs).
///
/// # Errors
/// A missing or unknown header column (named, with the valid ones), a duplicate column, a
/// record with the wrong number of cells, a cell that is not a value of its kind, a needed
/// value missing with no default (naming line and column), Lm and Cm that disagree with fs,
/// an empty or duplicate id (naming both lines), or a file without records.
pub fn parse_batch_csv(text: &str, defaults: &BatchDefaults) -> Result<Vec<Crystal>> {
    if let Some(v) = defaults.lm_h {
        crate::error::require_positive("default lm_h", v)?;
    }
    if let Some(v) = defaults.c0_f {
        crate::error::require_non_negative("default c0_f", v)?;
    }
    if let Some(v) = defaults.rm_ohm {
        crate::error::require_non_negative("default rm_ohm", v)?;
    }
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut lines = text
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l))
        .filter(|(_, l)| !l.trim().is_empty() && !l.trim_start().starts_with('#'));
    let Some((header_no, header)) = lines.next() else {
        return Err(Error::parse(
            "batch file is empty; expected a header line such as 'id,fs_hz,lm_h,rm_ohm,c0_f'",
        ));
    };
    let names = split_cells(header, header_no)?;
    let valid = Column::ALL.map(Column::name).join(", ");
    let mut columns: Vec<Column> = Vec::with_capacity(names.len());
    for (j, name) in names.iter().enumerate() {
        let Some(col) = Column::ALL
            .into_iter()
            .find(|c| c.name().eq_ignore_ascii_case(name))
        else {
            return Err(Error::parse(format!(
                "line {header_no}, column {}: unknown column '{name}'; expected one of {valid}",
                j + 1
            )));
        };
        if columns.contains(&col) {
            return Err(Error::parse(format!(
                "line {header_no}, column {}: column '{}' appears twice",
                j + 1,
                col.name()
            )));
        }
        columns.push(col);
    }
    for required in [Column::Id, Column::Fs] {
        if !columns.contains(&required) {
            return Err(Error::parse(format!(
                "line {header_no}: the header has no '{}' column; it needs id and fs_hz, and \
                 any of rm_ohm, lm_h, cm_f, c0_f",
                required.name()
            )));
        }
    }
    let position = |c: Column| columns.iter().position(|&x| x == c);

    let mut out: Vec<Crystal> = Vec::new();
    let mut seen: Vec<(String, usize)> = Vec::new();
    for (line_no, line) in lines {
        let cells = split_cells(line, line_no)?;
        if cells.len() != columns.len() {
            return Err(Error::parse(format!(
                "line {line_no}: {} cells; expected {} as in the header ({})",
                cells.len(),
                columns.len(),
                names.join(",")
            )));
        }
        let cell = |c: Column| -> Option<(usize, &str)> {
            position(c)
                .map(|j| (j + 1, cells[j].as_str()))
                .filter(|(_, t)| !t.trim().is_empty())
        };
        let where_ = |j: usize, c: Column| format!("line {line_no}, column {j} ({})", c.name());
        let missing = |c: Column, what: &str| -> Error {
            let place = match position(c) {
                Some(j) => format!("{} is empty", where_(j + 1, c)),
                None => format!("line {line_no}: there is no {} column", c.name()),
            };
            Error::parse(format!("{place} and {what}"))
        };
        let value = |c: Column, kind: Quantity, positive: bool| -> Result<Option<f64>> {
            match cell(c) {
                None => Ok(None),
                Some((j, t)) => {
                    let field = where_(j, c);
                    if positive {
                        parse_positive(&field, t, kind).map(Some)
                    } else {
                        parse_non_negative(&field, t, kind).map(Some)
                    }
                }
            }
        };
        let id = match cell(Column::Id) {
            Some((_, t)) => t.to_string(),
            None => return Err(missing(Column::Id, "every crystal needs an id")),
        };
        if let Some((_, first)) = seen.iter().find(|(s, _)| *s == id) {
            return Err(Error::invalid(
                &format!("line {line_no}, id"),
                format!("'{id}'"),
                &format!("an id not used before (it is already used on line {first})"),
            ));
        }
        let fs = value(Column::Fs, Quantity::Frequency, true)?
            .ok_or_else(|| missing(Column::Fs, "every crystal needs its series resonance"))?;
        let lm = value(Column::Lm, Quantity::Inductance, true)?;
        let cm = value(Column::Cm, Quantity::Capacitance, true)?;
        let lm_default = match (lm, cm) {
            (None, None) => Some(defaults.lm_h.ok_or_else(|| {
                let place = match (position(Column::Lm), position(Column::Cm)) {
                    (Some(j), _) => format!("{} is empty", where_(j + 1, Column::Lm)),
                    (None, Some(j)) => format!("{} is empty", where_(j + 1, Column::Cm)),
                    (None, None) => format!("line {line_no}: there is no lm_h or cm_f column"),
                };
                Error::parse(format!(
                    "{place} and no default lm_h was given; give lm_h or cm_f, or a default \
                     motional inductance"
                ))
            })?),
            _ => None,
        };
        let rm = match value(Column::Rm, Quantity::Resistance, false)? {
            Some(v) => v,
            None => defaults
                .rm_ohm
                .ok_or_else(|| missing(Column::Rm, "no default rm_ohm was given"))?,
        };
        let c0 = match value(Column::C0, Quantity::Capacitance, false)? {
            Some(v) => v,
            None => defaults
                .c0_f
                .ok_or_else(|| missing(Column::C0, "no default c0_f was given"))?,
        };
        let context = |e: Error| e.context(format!("line {line_no} ('{id}')"));
        let crystal = match (lm, cm) {
            (Some(l), Some(c)) => {
                let x = Crystal::from_lm_cm(&id, l, c, rm, c0).map_err(context)?;
                let implied = x.fs_hz();
                if ((fs - implied) / implied).abs() > 1e-6 {
                    return Err(Error::invalid(
                        &format!("line {line_no}, fs_hz"),
                        format!("{fs} Hz"),
                        &format!(
                            "1/(2π·sqrt(lm_h·cm_f)) = {implied:.3} Hz within 1 ppm (or leave \
                             cm_f empty to compute it from fs and Lm)"
                        ),
                    ));
                }
                x
            }
            (Some(l), None) => Crystal::from_fs_lm(&id, fs, l, rm, c0).map_err(context)?,
            (None, Some(c)) => Crystal::from_fs_cm(&id, fs, c, rm, c0).map_err(context)?,
            (None, None) => {
                let l = lm_default.unwrap_or_default();
                Crystal::from_fs_lm(&id, fs, l, rm, c0).map_err(context)?
            }
        };
        seen.push((id, line_no));
        out.push(crystal);
    }
    if out.is_empty() {
        return Err(Error::parse(format!(
            "the batch file has a header (line {header_no}) but no crystals"
        )));
    }
    Ok(out)
}

/// Quote a CSV cell when it needs it.
fn csv_cell(s: &str) -> String {
    let needs =
        s.contains([',', '"', '\n', '\r']) || s.trim() != s || s.starts_with('#') || s.is_empty();
    if needs {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// Write crystals as a batch file: header `id,fs_hz,rm_ohm,lm_h,cm_f,c0_f`, numbers with 17
/// significant digits (they read back to the same `f64`). Spurious modes are not written.
///
/// # Errors
/// Errors of the writer.
pub fn write_batch_csv(crystals: &[Crystal], w: &mut impl Write) -> io::Result<()> {
    writeln!(w, "id,fs_hz,rm_ohm,lm_h,cm_f,c0_f")?;
    for x in crystals {
        writeln!(
            w,
            "{},{:.16e},{:.16e},{:.16e},{:.16e},{:.16e}",
            csv_cell(&x.id),
            x.fs_hz(),
            x.rm_ohm(),
            x.lm_h(),
            x.cm_f(),
            x.c0_f
        )?;
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// Matching

/// What to choose from a batch.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MatchRequest {
    /// Crystals per set (the filter's order).
    pub count: usize,
    /// Largest number of disjoint sets wanted.
    pub sets: usize,
    /// Largest acceptable fs spread of a set, Hz; `None`: unlimited. See
    /// [`default_tolerance`].
    pub tolerance_hz: Option<f64>,
}

impl MatchRequest {
    /// One set of `count` crystals, any spread.
    pub fn new(count: usize) -> Self {
        MatchRequest {
            count,
            sets: 1,
            tolerance_hz: None,
        }
    }
}

/// The usual fs tolerance of a matched set for a filter of bandwidth `bandwidth_hz`: 10 % of
/// it (common practice). A negative or non-finite bandwidth gives NaN, which
/// [`match_crystals`] refuses.
pub fn default_tolerance(bandwidth_hz: f64) -> f64 {
    if bandwidth_hz.is_finite() && bandwidth_hz > 0.0 {
        0.1 * bandwidth_hz
    } else {
        f64::NAN
    }
}

/// One matched set.
#[derive(Debug, Clone, PartialEq)]
pub struct MatchedSet {
    /// The crystals' ids, in order of fs.
    pub ids: Vec<String>,
    /// fs spread (max − min), Hz.
    pub spread_hz: f64,
    /// Mean fs, Hz.
    pub mean_fs_hz: f64,
    /// Lm spread relative to the mean Lm, (max − min)/mean.
    pub lm_spread_rel: f64,
    /// Largest Rm in the set, Ω.
    pub rm_max_ohm: f64,
}

/// A crystal set aside before matching, and why.
#[derive(Debug, Clone, PartialEq)]
pub struct Rejected {
    /// Its id.
    pub id: String,
    /// Why, with the values compared.
    pub reason: String,
}

/// The result of [`match_crystals`].
#[derive(Debug, Clone, PartialEq)]
pub struct MatchResult {
    /// The sets, best first.
    pub sets: Vec<MatchedSet>,
    /// Crystals set aside before matching.
    pub rejected: Vec<Rejected>,
}

/// Choose up to `req.sets` disjoint sets of `req.count` crystals (see the module docs).
///
/// # Errors
/// `count` or `sets` zero, a negative or non-finite tolerance, duplicate ids, fewer usable
/// crystals than `count` (the message says how many were set aside), or a best set whose
/// spread already exceeds the tolerance.
pub fn match_crystals(crystals: &[Crystal], req: &MatchRequest) -> Result<MatchResult> {
    if req.count == 0 {
        return Err(Error::invalid("count", 0, "at least 1 crystal per set"));
    }
    if req.sets == 0 {
        return Err(Error::invalid("sets", 0, "at least 1 set"));
    }
    if let Some(t) = req.tolerance_hz {
        if !(t.is_finite() && t >= 0.0) {
            return Err(Error::invalid(
                "tolerance_hz",
                t,
                "a finite spread of 0 Hz or more (or none for unlimited)",
            ));
        }
    }
    let mut first: HashMap<&str, usize> = HashMap::with_capacity(crystals.len());
    for (i, x) in crystals.iter().enumerate() {
        if let Some(j) = first.insert(x.id.as_str(), i) {
            return Err(Error::invalid(
                "crystal id",
                format!("'{}'", x.id),
                &format!(
                    "ids that differ (crystals {} and {} share it)",
                    j + 1,
                    i + 1
                ),
            ));
        }
    }
    let (accepted, rejected) = screen(crystals);
    if accepted.len() < req.count {
        return Err(Error::unrealizable(format!(
            "a set needs {} crystals but only {} of the {} are usable ({} set aside)",
            req.count,
            accepted.len(),
            crystals.len(),
            rejected.len()
        ))
        .with_hint("measure more crystals, or build a filter of lower order"));
    }
    let mut pool: Vec<Item> = accepted
        .iter()
        .map(|&i| Item::of(i, &crystals[i]))
        .collect();
    let mut sets = Vec::new();
    while sets.len() < req.sets && pool.len() >= req.count {
        let Some(best) = best_set(&pool, req.count) else {
            break;
        };
        let members: Vec<Item> = best.iter().map(|&k| pool[k]).collect();
        let fs_spread = spread(&members, |x| x.fs);
        if let Some(t) = req.tolerance_hz {
            if fs_spread > t {
                if sets.is_empty() {
                    return Err(Error::unrealizable(format!(
                        "the closest {} crystals span {fs_spread:.1} Hz in fs, more than \
                         the tolerance of {t:.1} Hz",
                        req.count
                    ))
                    .with_hint("measure more crystals, or accept a wider tolerance"));
                }
                break;
            }
        }
        let mut by_fs = members.clone();
        by_fs.sort_by(|a, b| a.fs.total_cmp(&b.fs).then(a.index.cmp(&b.index)));
        let mean_lm = members.iter().map(|x| x.lm).sum::<f64>() / members.len() as f64;
        sets.push(MatchedSet {
            ids: by_fs.iter().map(|x| crystals[x.index].id.clone()).collect(),
            spread_hz: fs_spread,
            mean_fs_hz: members.iter().map(|x| x.fs).sum::<f64>() / members.len() as f64,
            lm_spread_rel: spread(&members, |x| x.lm) / mean_lm,
            rm_max_ohm: members
                .iter()
                .map(|x| x.rm)
                .fold(f64::NEG_INFINITY, f64::max),
        });
        let chosen: Vec<usize> = best;
        pool = pool
            .into_iter()
            .enumerate()
            .filter(|(k, _)| !chosen.contains(k))
            .map(|(_, x)| x)
            .collect();
    }
    Ok(MatchResult { sets, rejected })
}

/// Median of the values (sorted copy); NaN for none.
fn median_of(mut v: Vec<f64>) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

/// Split the batch into usable crystals (indices) and rejected ones (module docs, steps 1–4).
fn screen(crystals: &[Crystal]) -> (Vec<usize>, Vec<Rejected>) {
    let mut rejected = Vec::new();
    let mut reject = |i: usize, reason: String| {
        rejected.push((
            i,
            Rejected {
                id: crystals[i].id.clone(),
                reason,
            },
        ));
    };
    // 1. Inconsistent records.
    let mut ok: Vec<usize> = Vec::new();
    for (i, x) in crystals.iter().enumerate() {
        let m = &x.motional;
        let pos = |v: f64| v.is_finite() && v > 0.0;
        let non_neg = |v: f64| v.is_finite() && v >= 0.0;
        if pos(m.lm_h) && pos(m.cm_f) && pos(x.fs_hz()) && non_neg(m.rm_ohm) && non_neg(x.c0_f) {
            ok.push(i);
        } else {
            reject(
                i,
                format!(
                    "record inconsistent: lm_h {}, cm_f {}, rm_ohm {}, c0_f {} (Lm and Cm must \
                     be finite and positive, Rm and C0 finite and not negative)",
                    m.lm_h, m.cm_f, m.rm_ohm, x.c0_f
                ),
            );
        }
    }
    // 2. Lm inconsistent with the batch.
    let lm_med = median_of(ok.iter().map(|&i| crystals[i].lm_h()).collect());
    ok.retain(|&i| {
        let lm = crystals[i].lm_h();
        let keep = lm >= 0.5 * lm_med && lm <= 2.0 * lm_med;
        if !keep {
            reject(
                i,
                format!(
                    "lm_h {:.3} mH is not within 0.5–2× the batch median {:.3} mH (another type \
                     or an overtone, or a mis-measured record)",
                    lm * 1e3,
                    lm_med * 1e3
                ),
            );
        }
        keep
    });
    // 3. fs far from the batch.
    let fs_med = median_of(ok.iter().map(|&i| crystals[i].fs_hz()).collect());
    let mad = median_of(
        ok.iter()
            .map(|&i| (crystals[i].fs_hz() - fs_med).abs())
            .collect(),
    );
    let limit = (100.0 * mad).max(1e-4 * fs_med);
    ok.retain(|&i| {
        let fs = crystals[i].fs_hz();
        let keep = (fs - fs_med).abs() <= limit;
        if !keep {
            reject(
                i,
                format!(
                    "fs {:.1} Hz is {:.1} Hz from the batch median {:.1} Hz (limit {:.1} Hz: \
                     100× the median absolute deviation, at least 100 ppm)",
                    fs,
                    (fs - fs_med).abs(),
                    fs_med,
                    limit
                ),
            );
        }
        keep
    });
    // 4. High Rm.
    let rm_med = median_of(ok.iter().map(|&i| crystals[i].rm_ohm()).collect());
    if rm_med > 0.0 {
        ok.retain(|&i| {
            let rm = crystals[i].rm_ohm();
            let keep = rm <= 2.0 * rm_med;
            if !keep {
                reject(
                    i,
                    format!("rm_ohm {rm:.2} Ω is more than 2× the batch median {rm_med:.2} Ω"),
                );
            }
            keep
        });
    }
    rejected.sort_by_key(|(i, _)| *i);
    (ok, rejected.into_iter().map(|(_, r)| r).collect())
}

/// The numbers matching looks at, with the crystal's input position.
#[derive(Debug, Clone, Copy)]
struct Item {
    index: usize,
    fs: f64,
    lm: f64,
    rm: f64,
}

impl Item {
    fn of(index: usize, x: &Crystal) -> Item {
        Item {
            index,
            fs: x.fs_hz(),
            lm: x.lm_h(),
            rm: x.rm_ohm(),
        }
    }
}

/// max − min of `key` over `items`.
fn spread(items: &[Item], key: impl Fn(&Item) -> f64) -> f64 {
    let (lo, hi) = items
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
            (a.min(key(x)), b.max(key(x)))
        });
    hi - lo
}

/// The ranking of a set: fs spread, Lm spread, largest Rm, then the input positions.
type Rank = (f64, f64, f64, Vec<usize>);

fn better(a: &Rank, b: &Rank) -> bool {
    a.0.total_cmp(&b.0)
        .then(a.1.total_cmp(&b.1))
        .then(a.2.total_cmp(&b.2))
        .then(a.3.cmp(&b.3))
        .is_lt()
}

/// Best set of `c` items from `pool` (positions in `pool`), by [`Rank`]; `None` if too few.
fn best_set(pool: &[Item], c: usize) -> Option<Vec<usize>> {
    let m = pool.len();
    if c == 0 || m < c {
        return None;
    }
    let mut by_fs: Vec<usize> = (0..m).collect();
    by_fs.sort_by(|&a, &b| pool[a].fs.total_cmp(&pool[b].fs).then(a.cmp(&b)));
    let fs = |k: usize| pool[by_fs[k]].fs;
    // Minimal fs spread over windows of c consecutive crystals.
    let s_star = (0..=m - c)
        .map(|i| fs(i + c - 1) - fs(i))
        .fold(f64::INFINITY, f64::min);
    let mut best: Option<Rank> = None;
    let mut best_members: Vec<usize> = Vec::new();
    let mut i = 0;
    while i + c <= m {
        // Windows start at the first of equal fs values.
        if i > 0 && fs(i) == fs(i - 1) {
            i += 1;
            continue;
        }
        let a = fs(i);
        let mut j = i;
        while j < m && fs(j) - a <= s_star {
            j += 1;
        }
        if j - i >= c {
            let window: Vec<usize> = by_fs[i..j].to_vec();
            best_in_window(pool, &window, c, s_star, &mut best, &mut best_members);
        }
        i += 1;
    }
    best.map(|_| best_members)
}

/// Best choice of `c` from `window` (all within the minimal fs spread): minimal Lm spread,
/// then the count-th smallest Rm, then the earliest input positions; update `best`.
fn best_in_window(
    pool: &[Item],
    window: &[usize],
    c: usize,
    s_star: f64,
    best: &mut Option<Rank>,
    best_members: &mut Vec<usize>,
) {
    let mut by_lm = window.to_vec();
    by_lm.sort_by(|&a, &b| pool[a].lm.total_cmp(&pool[b].lm).then(a.cmp(&b)));
    let n = by_lm.len();
    let lm = |k: usize| pool[by_lm[k]].lm;
    let t_star = (0..=n - c)
        .map(|i| lm(i + c - 1) - lm(i))
        .fold(f64::INFINITY, f64::min);
    if let Some(b) = best.as_ref() {
        if s_star > b.0 || (s_star == b.0 && t_star > b.1) {
            return;
        }
    }
    let mut i = 0;
    while i + c <= n {
        if i > 0 && lm(i) == lm(i - 1) {
            i += 1;
            continue;
        }
        let l = lm(i);
        let mut j = i;
        while j < n && lm(j) - l <= t_star {
            j += 1;
        }
        if j - i >= c {
            let q: Vec<usize> = by_lm[i..j].to_vec();
            let mut rms: Vec<f64> = q.iter().map(|&k| pool[k].rm).collect();
            rms.sort_by(f64::total_cmp);
            let r = rms[c - 1];
            let mut chosen: Vec<usize> = q.into_iter().filter(|&k| pool[k].rm <= r).collect();
            chosen.sort_by_key(|&k| pool[k].index);
            chosen.truncate(c);
            let mut positions: Vec<usize> = chosen.iter().map(|&k| pool[k].index).collect();
            positions.sort_unstable();
            let rank: Rank = (s_star, t_star, r, positions);
            let improves = match best.as_ref() {
                None => true,
                Some(b) => better(&rank, b),
            };
            if improves {
                *best = Some(rank);
                *best_members = chosen;
            }
        }
        i += 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::prelude::*;
    use rand::rngs::mock::StepRng;
    use rand_chacha::ChaCha8Rng;

    fn rng(k: u64) -> ChaCha8Rng {
        ChaCha8Rng::from_rng(StepRng::new(
            0x2545_F491_4F6C_DD1D ^ k,
            0x9E37_79B9_7F4A_7C15,
        ))
        .expect("mock generator never fails")
    }

    fn xtal(id: &str, fs: f64, lm: f64, rm: f64) -> Crystal {
        Crystal::from_fs_lm(id, fs, lm, rm, 4e-12).unwrap()
    }

    // --- batch files ---------------------------------------------------------------------

    #[test]
    fn reads_any_column_order_notation_and_defaults() {
        let text = "\u{feff}# our bag of 9 MHz crystals\n\
                    fs_hz, c0_f ,id,lm_h\n\
                    9.000125MHz,3p9,A1,15.2m\n\
                    \n\
                    9000200,,\"B, 2\",\n\
                    8999.95k,4.1pF,C3,0.0149\n";
        let d = BatchDefaults {
            lm_h: Some(15e-3),
            c0_f: Some(4e-12),
            rm_ohm: Some(12.0),
        };
        let b = parse_batch_csv(text, &d).unwrap();
        assert_eq!(b.len(), 3);
        assert_eq!(b[0].id, "A1");
        assert!((b[0].fs_hz() - 9_000_125.0).abs() < 1e-6);
        assert!((b[0].lm_h() - 15.2e-3).abs() < 1e-15);
        assert!((b[0].c0_f - 3.9e-12).abs() < 1e-24);
        assert_eq!(b[0].rm_ohm(), 12.0);
        assert_eq!(b[1].id, "B, 2");
        assert_eq!(b[1].lm_h(), 15e-3);
        assert_eq!(b[1].c0_f, 4e-12);
        assert!((b[2].fs_hz() - 8_999_950.0).abs() < 1e-6);
    }

    #[test]
    fn cm_alone_gives_lm_from_fs() {
        let b = parse_batch_csv(
            "id,fs_hz,cm_f,rm_ohm,c0_f\nx,9MHz,20.84f,10,4p\n",
            &BatchDefaults::default(),
        )
        .unwrap();
        let w = 2.0 * std::f64::consts::PI * 9e6;
        assert!((b[0].lm_h() * w * w * 20.84e-15 - 1.0).abs() < 1e-12);
    }

    #[test]
    fn missing_values_name_line_and_column() {
        let none = BatchDefaults::default();
        let e = parse_batch_csv("id,fs_hz,lm_h,rm_ohm,c0_f\na,9e6,,10,4p\n", &none).unwrap_err();
        assert!(
            e.message().contains("line 2, column 3 (lm_h)"),
            "{}",
            e.message()
        );
        assert!(e.message().contains("no default lm_h"), "{}", e.message());
        let e = parse_batch_csv("id,fs_hz,lm_h,c0_f\na,9e6,15m,4p\n", &none).unwrap_err();
        assert!(e.message().contains("no rm_ohm column"), "{}", e.message());
        let e = parse_batch_csv("id,fs_hz,lm_h,rm_ohm\n\na,9e6,15m,10\n", &none).unwrap_err();
        assert!(e.message().contains("line 3"), "{}", e.message());
        assert!(e.message().contains("c0_f"), "{}", e.message());
        let e = parse_batch_csv("id,fs_hz\na,9e6\n", &none).unwrap_err();
        assert!(e.message().contains("lm_h or cm_f"), "{}", e.message());
        let e = parse_batch_csv("id,fs_hz,rm_ohm\na,,1\n", &none).unwrap_err();
        assert!(
            e.message().contains("line 2, column 2 (fs_hz) is empty"),
            "{}",
            e.message()
        );
    }

    #[test]
    fn bad_files_are_clear_errors() {
        let d = BatchDefaults {
            lm_h: Some(15e-3),
            c0_f: Some(4e-12),
            rm_ohm: Some(10.0),
        };
        let check = |text: &str, want: &str| {
            let e = parse_batch_csv(text, &d).unwrap_err();
            assert!(e.message().contains(want), "{text:?}: {}", e.message());
        };
        check("", "empty");
        check("id,fs_hz\n", "no crystals");
        check("id,fs_hz,lm_mh\na,9e6,15\n", "unknown column 'lm_mh'");
        check("id,fs_hz,fs_hz\na,9e6,9e6\n", "appears twice");
        check("id,lm_h\na,15m\n", "no 'fs_hz' column");
        check("id,fs_hz\na,9e6,3\n", "3 cells; expected 2");
        check(
            "id,fs_hz\na,9e6\nb,9e6\na,9.1e6\n",
            "already used on line 2",
        );
        check("id,fs_hz\na,nine\n", "line 2, column 2 (fs_hz)");
        check("id,fs_hz\na,-9e6\n", "line 2, column 2 (fs_hz)");
        check("id,fs_hz\n\"a,9e6\n", "not closed");
        check("id,fs_hz\n,9e6\n", "needs an id");
        check("id,fs_hz,lm_h,cm_f\na,9.1e6,15m,20.84f\n", "within 1 ppm");
        let bad = BatchDefaults {
            lm_h: Some(-1.0),
            ..d
        };
        assert!(parse_batch_csv("id,fs_hz\na,9e6\n", &bad).is_err());
    }

    #[test]
    fn written_files_read_back_exactly() {
        let mut g = rng(3);
        let mut xs: Vec<Crystal> = (0..50)
            .map(|i| {
                Crystal::from_fs_lm(
                    &format!("x{i}"),
                    9e6 + g.gen_range(-500.0..500.0),
                    g.gen_range(10e-3..20e-3),
                    g.gen_range(5.0..30.0),
                    g.gen_range(2e-12..6e-12),
                )
                .unwrap()
            })
            .collect();
        xs[0].id = "comma, \"quoted\"".into();
        xs[1].id = " padded ".into();
        xs[2].id = "#hash".into();
        let mut buf = Vec::new();
        write_batch_csv(&xs, &mut buf).unwrap();
        let text = String::from_utf8(buf).unwrap();
        assert!(text.starts_with("id,fs_hz,rm_ohm,lm_h,cm_f,c0_f\n"));
        let back = parse_batch_csv(&text, &BatchDefaults::default()).unwrap();
        assert_eq!(back.len(), xs.len());
        for (a, b) in xs.iter().zip(&back) {
            assert_eq!(a.id, b.id);
            // 17 significant digits round-trip an f64 exactly.
            assert_eq!(a.lm_h(), b.lm_h());
            assert_eq!(a.cm_f(), b.cm_f());
            assert_eq!(a.rm_ohm(), b.rm_ohm());
            assert_eq!(a.c0_f, b.c0_f);
        }
    }

    #[test]
    fn arbitrary_text_never_panics() {
        let mut g = rng(21);
        let alphabet: Vec<char> = "id,fs_hz,rm_ohm,lm_h,cm_f,c0_f\n\r\"#, 9.0e6kMmpfµΩ-+ é"
            .chars()
            .collect();
        let d = BatchDefaults {
            lm_h: Some(15e-3),
            c0_f: Some(4e-12),
            rm_ohm: Some(10.0),
        };
        for _ in 0..2000 {
            let len = g.gen_range(0..80);
            let mut text = String::from("id,fs_hz,");
            for _ in 0..len {
                text.push(alphabet[g.gen_range(0..alphabet.len())]);
            }
            let _ = parse_batch_csv(&text, &d);
        }
    }

    // --- matching ------------------------------------------------------------------------

    /// The rank of a set of pool items, computed the obvious way.
    fn rank_of(items: &[Item]) -> Rank {
        let mut pos: Vec<usize> = items.iter().map(|x| x.index).collect();
        pos.sort_unstable();
        (
            spread(items, |x| x.fs),
            spread(items, |x| x.lm),
            items.iter().map(|x| x.rm).fold(f64::NEG_INFINITY, f64::max),
            pos,
        )
    }

    /// Every subset of size `c` of `0..m`.
    fn subsets(m: usize, c: usize) -> Vec<Vec<usize>> {
        let mut out = Vec::new();
        let mut cur = Vec::new();
        fn go(s: usize, m: usize, c: usize, cur: &mut Vec<usize>, out: &mut Vec<Vec<usize>>) {
            if cur.len() == c {
                out.push(cur.clone());
                return;
            }
            for i in s..m {
                cur.push(i);
                go(i + 1, m, c, cur, out);
                cur.pop();
            }
        }
        go(0, m, c, &mut cur, &mut out);
        out
    }

    /// Greedy disjoint sets by exhaustive search: the slow, obvious control.
    fn brute_force(crystals: &[Crystal], req: &MatchRequest) -> Vec<(Vec<String>, f64)> {
        let (accepted, _) = screen(crystals);
        let mut pool: Vec<Item> = accepted
            .iter()
            .map(|&i| Item::of(i, &crystals[i]))
            .collect();
        let mut out = Vec::new();
        while out.len() < req.sets && pool.len() >= req.count {
            let best = subsets(pool.len(), req.count)
                .into_iter()
                .map(|s| {
                    let items: Vec<Item> = s.iter().map(|&k| pool[k]).collect();
                    (rank_of(&items), s)
                })
                .reduce(|a, b| if better(&b.0, &a.0) { b } else { a })
                .unwrap();
            if req.tolerance_hz.is_some_and(|t| best.0 .0 > t) {
                break;
            }
            let mut members: Vec<Item> = best.1.iter().map(|&k| pool[k]).collect();
            members.sort_by(|a, b| a.fs.total_cmp(&b.fs).then(a.index.cmp(&b.index)));
            out.push((
                members
                    .iter()
                    .map(|x| crystals[x.index].id.clone())
                    .collect(),
                best.0 .0,
            ));
            pool = pool
                .into_iter()
                .enumerate()
                .filter(|(k, _)| !best.1.contains(k))
                .map(|(_, x)| x)
                .collect();
        }
        out
    }

    #[test]
    fn sliding_window_equals_brute_force_with_ties() {
        let mut g = rng(7);
        let mut compared = 0;
        let mut tied_cases = 0;
        for case in 0..200 {
            let m = g.gen_range(1..=12);
            // Coarse grids make many exact ties in fs, Lm and Rm.
            let xs: Vec<Crystal> = (0..m)
                .map(|i| {
                    xtal(
                        &format!("c{case}-{i}"),
                        9e6 + g.gen_range(0..6) as f64,
                        15e-3 * (1.0 + 0.01 * g.gen_range(0..3) as f64),
                        10.0 + g.gen_range(0..3) as f64,
                    )
                })
                .collect();
            let count = g.gen_range(1..=m);
            let req = MatchRequest {
                count,
                sets: g.gen_range(1..=3),
                tolerance_hz: if g.gen_bool(0.5) {
                    Some(g.gen_range(0..4) as f64)
                } else {
                    None
                },
            };
            let slow = brute_force(&xs, &req);
            // Count cases whose best set is not unique before the input-order rule.
            let (acc, _) = screen(&xs);
            let pool: Vec<Item> = acc.iter().map(|&i| Item::of(i, &xs[i])).collect();
            if pool.len() >= count {
                let ranks: Vec<Rank> = subsets(pool.len(), count)
                    .iter()
                    .map(|s| rank_of(&s.iter().map(|&k| pool[k]).collect::<Vec<_>>()))
                    .collect();
                let top = ranks
                    .iter()
                    .reduce(|a, b| if better(b, a) { b } else { a })
                    .unwrap();
                let tied = ranks
                    .iter()
                    .filter(|r| (r.0, r.1, r.2) == (top.0, top.1, top.2))
                    .count();
                if tied > 1 {
                    tied_cases += 1;
                }
            }
            match match_crystals(&xs, &req) {
                Ok(fast) => {
                    let got: Vec<(Vec<String>, f64)> = fast
                        .sets
                        .iter()
                        .map(|s| (s.ids.clone(), s.spread_hz))
                        .collect();
                    assert_eq!(got, slow, "case {case}: {req:?}");
                    compared += 1;
                }
                // The only refusal here: even the best set is beyond the tolerance.
                Err(e) => {
                    assert!(slow.is_empty(), "case {case}: {}", e.message());
                    assert!(e.message().contains("tolerance"), "{}", e.message());
                }
            }
        }
        assert!(compared > 100, "only {compared} cases compared");
        // Many exact ties survive even though a Crystal recomputes fs from Lm·Cm.
        assert!(tied_cases > 30, "only {tied_cases} cases with tied optima");
    }

    #[test]
    fn window_search_equals_brute_force_on_exact_ties() {
        // Small integers: nearly every pool has many optimal sets before the last rule.
        let mut g = rng(9);
        let mut tied_cases = 0;
        for case in 0..200 {
            let m = g.gen_range(1..=12);
            let pool: Vec<Item> = (0..m)
                .map(|index| Item {
                    index,
                    fs: g.gen_range(0..3) as f64,
                    lm: g.gen_range(0..2) as f64,
                    rm: g.gen_range(0..2) as f64,
                })
                .collect();
            let c = g.gen_range(1..=m);
            let ranks: Vec<(Rank, Vec<usize>)> = subsets(m, c)
                .into_iter()
                .map(|s| (rank_of(&s.iter().map(|&k| pool[k]).collect::<Vec<_>>()), s))
                .collect();
            let top = ranks
                .iter()
                .reduce(|a, b| if better(&b.0, &a.0) { b } else { a })
                .unwrap();
            let tied = ranks
                .iter()
                .filter(|r| (r.0 .0, r.0 .1, r.0 .2) == (top.0 .0, top.0 .1, top.0 .2))
                .count();
            if tied > 1 {
                tied_cases += 1;
            }
            let mut fast = best_set(&pool, c).unwrap();
            fast.sort_unstable();
            assert_eq!(fast, top.1, "case {case}: m {m}, c {c}");
        }
        assert!(tied_cases > 50, "only {tied_cases} cases with tied optima");
    }

    #[test]
    fn ties_break_by_lm_then_rm_then_input_order() {
        // Exact values (a Crystal recomputes fs from Lm·Cm, which would blur the ties).
        let item = |index, fs, lm, rm| Item { index, fs, lm, rm };
        let pool = vec![
            item(0, 0.0, 15.0, 10.0),
            item(1, 10.0, 15.6, 10.0),
            item(2, 100.0, 15.0, 20.0),
            item(3, 110.0, 15.5, 20.0),
            item(4, 200.0, 15.0, 11.0),
            item(5, 210.0, 15.5, 11.0),
            item(6, 300.0, 15.0, 11.0),
            item(7, 310.0, 15.5, 11.0),
        ];
        // Spreads all 10; Lm spread 0.6 for (0, 1), 0.5 for the rest; Rm 20 for (2, 3), 11
        // for (4, 5) and (6, 7); the earlier of those wins.
        assert_eq!(best_set(&pool, 2).unwrap(), vec![4, 5]);
        // A window with more crystals than needed: the c smallest Rm within the best Lm span.
        let pool = vec![
            item(0, 0.0, 15.0, 12.0),
            item(1, 0.0, 15.0, 9.0),
            item(2, 0.0, 15.0, 10.0),
            item(3, 5.0, 15.0, 8.0),
        ];
        let mut got = best_set(&pool, 2).unwrap();
        got.sort_unstable();
        assert_eq!(got, vec![1, 2]);
    }

    /// A clean batch: 40 crystals within ±150 Hz, Lm ±5 %, Rm 8–15 Ω.
    fn clean_batch() -> Vec<Crystal> {
        let mut g = rng(11);
        (0..40)
            .map(|i| {
                xtal(
                    &format!("k{i:02}"),
                    9e6 + g.gen_range(-150.0..150.0),
                    15e-3 * g.gen_range(0.95..1.05),
                    g.gen_range(8.0..15.0),
                )
            })
            .collect()
    }

    #[test]
    fn clean_batch_rejects_nothing_and_sets_are_disjoint() {
        let xs = clean_batch();
        let req = MatchRequest {
            count: 6,
            sets: 4,
            tolerance_hz: None,
        };
        let r = match_crystals(&xs, &req).unwrap();
        assert!(r.rejected.is_empty(), "{:?}", r.rejected);
        assert_eq!(r.sets.len(), 4);
        let mut all: Vec<&String> = r.sets.iter().flat_map(|s| &s.ids).collect();
        all.sort();
        all.dedup();
        assert_eq!(all.len(), 24);
        // Greedy: each set is no better than the one before.
        for w in r.sets.windows(2) {
            assert!(w[0].spread_hz <= w[1].spread_hz);
        }
        for s in &r.sets {
            assert_eq!(s.ids.len(), 6);
            let fs: Vec<f64> = s
                .ids
                .iter()
                .map(|id| xs.iter().find(|x| &x.id == id).unwrap().fs_hz())
                .collect();
            assert!(fs.windows(2).all(|w| w[0] <= w[1]), "ids in fs order");
            let mean = fs.iter().sum::<f64>() / 6.0;
            assert!((s.mean_fs_hz - mean).abs() < 1e-6);
        }
    }

    #[test]
    fn two_high_rm_crystals_are_rejected_with_the_median() {
        let mut xs = clean_batch();
        xs.push(xtal("hot1", 9e6 + 3.0, 15e-3, 40.0));
        xs.push(xtal("hot2", 9e6 + 5.0, 15e-3, 55.5));
        let r = match_crystals(&xs, &MatchRequest::new(4)).unwrap();
        let ids: Vec<&str> = r.rejected.iter().map(|x| x.id.as_str()).collect();
        assert_eq!(ids, vec!["hot1", "hot2"]);
        let median = median_of(xs.iter().map(|x| x.rm_ohm()).collect());
        for (rej, rm) in r.rejected.iter().zip([40.0, 55.5]) {
            assert!(rej.reason.contains(&format!("{rm:.2} Ω")), "{}", rej.reason);
            assert!(
                rej.reason.contains(&format!("{median:.2} Ω")),
                "{}",
                rej.reason
            );
            assert!(rej.reason.contains("median"), "{}", rej.reason);
        }
        assert!(!r.sets[0].ids.iter().any(|id| id.starts_with("hot")));
    }

    #[test]
    fn outliers_of_every_kind_are_set_aside() {
        let mut xs = clean_batch();
        xs.push(xtal("far", 9.05e6, 15e-3, 10.0));
        xs.push(xtal("overtone", 9e6, 45e-3, 10.0));
        let mut broken = xtal("broken", 9e6, 15e-3, 10.0);
        broken.motional.cm_f = f64::NAN;
        xs.push(broken);
        let r = match_crystals(&xs, &MatchRequest::new(4)).unwrap();
        let find = |id: &str| {
            r.rejected
                .iter()
                .find(|x| x.id == id)
                .unwrap()
                .reason
                .clone()
        };
        assert!(
            find("far").contains("from the batch median"),
            "{}",
            find("far")
        );
        assert!(find("overtone").contains("lm_h"), "{}", find("overtone"));
        assert!(
            find("broken").contains("inconsistent"),
            "{}",
            find("broken")
        );
        assert_eq!(r.rejected.len(), 3);
    }

    #[test]
    fn requests_that_cannot_be_met_are_clear_errors() {
        let xs = clean_batch();
        let e = match_crystals(&xs[..5], &MatchRequest::new(6)).unwrap_err();
        assert!(
            e.message().contains("needs 6 crystals but only 5"),
            "{}",
            e.message()
        );
        let req = MatchRequest {
            count: 8,
            sets: 1,
            tolerance_hz: Some(0.5),
        };
        let e = match_crystals(&xs, &req).unwrap_err();
        assert!(
            e.message().contains("tolerance of 0.5 Hz"),
            "{}",
            e.message()
        );
        assert!(match_crystals(&xs, &MatchRequest::new(0)).is_err());
        let bad = MatchRequest {
            tolerance_hz: Some(default_tolerance(-1.0)),
            ..MatchRequest::new(2)
        };
        assert!(match_crystals(&xs, &bad).is_err());
        let mut dup = xs.clone();
        dup[3].id = dup[0].id.clone();
        let e = match_crystals(&dup, &MatchRequest::new(2)).unwrap_err();
        assert!(e.message().contains("crystals 1 and 4"), "{}", e.message());
    }

    #[test]
    fn tolerance_stops_the_greedy_sets() {
        // Two tight groups and stragglers; a 2.4 kHz SSB filter allows 240 Hz.
        assert_eq!(default_tolerance(2400.0), 240.0);
        let mut xs = Vec::new();
        for i in 0..4 {
            xs.push(xtal(&format!("a{i}"), 9e6 + 10.0 * i as f64, 15e-3, 10.0));
            xs.push(xtal(
                &format!("b{i}"),
                9e6 + 500.0 + 20.0 * i as f64,
                15e-3,
                10.0,
            ));
            xs.push(xtal(
                &format!("s{i}"),
                9e6 - 1000.0 - 300.0 * i as f64,
                15e-3,
                10.0,
            ));
        }
        let req = MatchRequest {
            count: 4,
            sets: 5,
            tolerance_hz: Some(default_tolerance(2400.0)),
        };
        let r = match_crystals(&xs, &req).unwrap();
        assert_eq!(r.sets.len(), 2);
        assert_eq!(r.sets[0].ids, vec!["a0", "a1", "a2", "a3"]);
        assert_eq!(r.sets[1].ids, vec!["b0", "b1", "b2", "b3"]);
    }

    /// Manual timing check in release builds (`cargo test --release -- --ignored`); prints the
    /// time, asserts only the result.
    #[test]
    #[ignore]
    fn time_matching_ten_thousand() {
        let mut g = rng(5);
        let xs: Vec<Crystal> = (0..10_000)
            .map(|i| {
                xtal(
                    &format!("m{i}"),
                    9e6 + g.gen_range(-300.0..300.0),
                    15e-3 * g.gen_range(0.95..1.05),
                    g.gen_range(8.0..15.0),
                )
            })
            .collect();
        let req = MatchRequest {
            count: 8,
            sets: 10,
            tolerance_hz: None,
        };
        let t = std::time::Instant::now();
        let r = match_crystals(&xs, &req).unwrap();
        println!(
            "matching 10,000 crystals into 10 sets of 8: {:?}",
            t.elapsed()
        );
        assert_eq!(r.sets.len(), 10);
    }
}
