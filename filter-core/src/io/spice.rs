//! SPICE netlist writer for a [`Ladder`], ready for `ngspice -b`.
//!
//! # The netlist
//! ```text
//! <title>                              line 1 is always the title in SPICE
//! * comments ...
//! V1 src 0 DC 0 AC 2                   an AC EMF of 2 V (and 0 V DC)
//! RSRC src in <Rs>                     the source resistance
//! ... one group of cards per stage ...  crystals inline as RM/LM/CM/C0 (+ RS/LS/CS spurious)
//! RLOAD out 0 <RL>                     the load resistance, from node `out` to ground
//! .options noopac                      no DC operating point (see below)
//! .ac lin|dec <points> <start> <stop>
//! .control ... print vdb(out) vp(out) ... .endc
//! .end
//! ```
//!
//! **S21 from V(out).** With an EMF E behind Rs, the nodal analysis of [`crate::network`] gives
//! S21 = 2·sqrt(Rs/RL)·V(out)/E [1, §4.3]. The writer uses E = 2 V, so
//!
//! ```text
//! S21 = V(out)·sqrt(Rs/RL),    |S21| (dB) = vdb(out) + 10·log10(Rs/RL)
//! ```
//!
//! and the netlist states both numbers in a comment. For Rs = RL the printed vdb(out) is |S21|.
//!
//! **Numbers.** Every value is written in SPICE suffix notation with the shortest digits that
//! read back to the same `f64` (so 12 significant digits at least, up to 17): `22u`, `4p`,
//! `8.99meg`, `20.847337423567424f`. The suffixes are f p n u m k meg g t (10⁻¹⁵ … 10¹²)
//! [2]; SPICE reads `m` and `M` alike as **milli**, and mega is `meg`. No unit letters are
//! appended (in SPICE `1F` is one femtofarad). [`parse_spice_value`] reads such numbers back.
//!
//! **Elements.** Names follow SPICE (first letter R, C, L, V), upper case, unique: generic parts
//! `R1`, `C1`, `L1`…; crystal k as `RMk LMk CMk` in series with `C0k` across, spurious mode j
//! of crystal k as `RSk_j LSk_j CSk_j`; `RCn`/`RLn` are the loss resistors of `Cn`/`Ln`.
//! Nodes are `src`, `in`, `n1`…, `out` on the signal path, `j1`… inside
//! series branches, `xka`/`xkb` inside crystal k's motional arm.
//!
//! **Losses.** [`Loss::Esr`] is a resistor in series with the part. [`Loss::Q`] is too, but SPICE
//! has no frequency-dependent resistor: the writer uses the ESR X/Q at the sweep centre
//! ([`AcSweep::center_hz`]), and says so in a comment beside the part. Over a crystal filter's
//! sweep, a fraction of a per cent of the centre, the difference is small: for the 8-crystal
//! ladder of the ngspice reference tests with Q = 2000 capacitors, swept 9.004 MHz ± 8 kHz,
//! |S21| moves by at most 2·10⁻⁵ dB.
//!
//! **Shorts and opens.** A zero resistor, a zero Rm or an empty series branch is a short: its two
//! nodes are merged, and any part left with both ends on one node is omitted (with a comment).
//! An empty parallel branch is an open and writes nothing.
//!
//! **The DC operating point.** ngspice solves a DC operating point before an AC analysis.
//! Capacitors leave most nodes of a crystal ladder without a DC path to ground, which makes that
//! matrix singular: ngspice-39 then warns and falls back on gmin and source stepping. The writer
//! adds `.options noopac`, with which ngspice skips the operating point of a linear circuit
//! (only R, L, C and independent sources, as here) [4]; the AC matrix itself is
//! regular, since every capacitor has a finite admittance at a frequency above zero. This leaves
//! the circuit exactly as analysed by [`crate::network`]. Large resistors to ground on the
//! floating nodes were tried and rejected: 1 TΩ moved |S21| of an 8-crystal ladder by up to
//! 9·10⁻⁸ dB, and ngspice-39 still reported a singular matrix for them once the circuit held
//! a resistance of 1 µΩ (apparently its pivot test is relative to the largest matrix entry).
//! A user who wants a transient or DC analysis must add DC paths of their own.
//!
//! **Output.** A `.control` block (ngspice's control language [2]) sets 15 printed digits
//! (`numdgt`), phase in degrees (`units=degrees`) and one table without page breaks (`width`,
//! `nobreak`), runs the `.ac` card, prints frequency, `vdb(out)` (dB) and `vp(out)` (degrees),
//! then quits. So `ngspice -b file.cir` runs the file as it is, with no warning, and prints the
//! table on standard output. The block is ngspice's
//! own; other simulators may ignore or reject it, and need their own output card.
//!
//! # References
//! 1. D. M. Pozar, *Microwave Engineering*, 4th ed., 2012, §4.3 (S-parameters and the
//!    incident-wave normalisation behind S21 = 2·sqrt(Rs/RL)·V(out)/E).
//! 2. H. Vogt, G. Atkinson, P. Nenzi et al., *Ngspice User's Manual*, version 39, 2023: the
//!    sections on numbers and scale factors, `.options` and `.ac`, and the interactive
//!    interpreter (`print`, `set`, the variables `numdgt`, `units`, `width`, `nobreak`).
//! 3. L. W. Nagel, *SPICE2: A Computer Program to Simulate Semiconductor Circuits*, ERL memo
//!    M520, UC Berkeley, 1975 (the netlist format: title line, element cards, `.end`).
//! 4. The ngspice team, ngspice ChangeLog (as shipped in Debian's ngspice 39.3 package):
//!    "new option noopac, don't do op simulation before ac if circuit is linear".

use crate::crystal::{Crystal, MotionalBranch};
use crate::error::{Error, Result};
use crate::network::{Branch, Element, Ladder, Loss, Stage};
use std::f64::consts::PI;
use std::fmt::Write as _;

/// How the points of an `.ac` sweep are spaced.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AcSpacing {
    /// `.ac lin`: `points` frequencies in all, equally spaced from start to stop.
    Linear,
    /// `.ac dec`: `points` frequencies per decade, equally spaced in log f, from start.
    Decade,
}

/// The `.ac` card of a netlist.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AcSweep {
    /// First frequency, Hz.
    pub start_hz: f64,
    /// Last frequency, Hz.
    pub stop_hz: f64,
    /// Number of points: in all for [`AcSpacing::Linear`], per decade for [`AcSpacing::Decade`].
    pub points: usize,
    /// Point spacing.
    pub spacing: AcSpacing,
}

/// # Construction
impl AcSweep {
    /// `points` frequencies in all from `start_hz` to `stop_hz`, equally spaced.
    ///
    /// # Errors
    /// As [`AcSweep::validate`].
    pub fn linear(start_hz: f64, stop_hz: f64, points: usize) -> Result<Self> {
        let s = AcSweep {
            start_hz,
            stop_hz,
            points,
            spacing: AcSpacing::Linear,
        };
        s.validate()?;
        Ok(s)
    }

    /// `points_per_decade` frequencies per decade from `start_hz` to `stop_hz`.
    ///
    /// # Errors
    /// As [`AcSweep::validate`].
    pub fn decade(start_hz: f64, stop_hz: f64, points_per_decade: usize) -> Result<Self> {
        let s = AcSweep {
            start_hz,
            stop_hz,
            points: points_per_decade,
            spacing: AcSpacing::Decade,
        };
        s.validate()?;
        Ok(s)
    }

    /// Check the card: frequencies finite and positive, stop above start (or equal to it for a
    /// one-point linear sweep), at least one point.
    ///
    /// # Errors
    /// An [`crate::ErrorKind::InvalidValue`] error naming the field.
    pub fn validate(&self) -> Result<()> {
        crate::error::require_positive("ac sweep start frequency", self.start_hz)?;
        crate::error::require_positive("ac sweep stop frequency", self.stop_hz)?;
        if self.points == 0 {
            return Err(Error::invalid("ac sweep points", 0, "at least 1"));
        }
        let one_point = self.spacing == AcSpacing::Linear && self.points == 1;
        let ok = if one_point {
            self.stop_hz >= self.start_hz
        } else {
            self.stop_hz > self.start_hz
        };
        if !ok {
            return Err(Error::invalid(
                "ac sweep stop frequency",
                format!("{} Hz", self.stop_hz),
                &format!("a frequency above the start frequency {} Hz", self.start_hz),
            ));
        }
        Ok(())
    }

    /// The centre of the sweep, Hz: the arithmetic mean of the ends for a linear sweep, the
    /// geometric mean for a decade sweep. Finite-Q losses are written as their ESR here.
    pub fn center_hz(&self) -> f64 {
        match self.spacing {
            AcSpacing::Linear => 0.5 * (self.start_hz + self.stop_hz),
            AcSpacing::Decade => (self.start_hz * self.stop_hz).sqrt(),
        }
    }

    /// The `.ac` card.
    fn card(&self) -> String {
        let kind = match self.spacing {
            AcSpacing::Linear => "lin",
            AcSpacing::Decade => "dec",
        };
        format!(
            ".ac {kind} {} {} {}",
            self.points,
            format_spice_value(self.start_hz),
            format_spice_value(self.stop_hz)
        )
    }
}

/// Write the SPICE netlist of `ladder` with title line `title` and the `.ac` card `ac`.
///
/// Line breaks and other control characters in `title` become spaces (line 1 is the title);
/// an empty title becomes `untitled`, and a title starting with one of `= [ ] ? ( ) & % $ " ! :
/// , ;` (which ngspice-39 warns about) gets a leading `* `.
///
/// # Errors
/// An [`std::io::ErrorKind::InvalidInput`] error wrapping the [`Error`] of [`spice_netlist`]
/// for a bad sweep or part value; otherwise any error of `w`.
pub fn write_spice_netlist(
    ladder: &Ladder,
    title: &str,
    ac: &AcSweep,
    w: &mut impl std::io::Write,
) -> std::io::Result<()> {
    let text = spice_netlist(ladder, title, ac)
        .map_err(|e| std::io::Error::new(std::io::ErrorKind::InvalidInput, e))?;
    w.write_all(text.as_bytes())
}

/// The SPICE netlist of `ladder` as a string (see the module docs for its layout).
///
/// # Errors
/// When the sweep is invalid ([`AcSweep::validate`]), a part value is negative, zero where a
/// positive value is needed (capacitance, inductance, Lm, Cm, Q) or not finite, or the output
/// node is shorted to ground (V(out) would not exist).
pub fn spice_netlist(ladder: &Ladder, title: &str, ac: &AcSweep) -> Result<String> {
    ac.validate()?;
    let mut b = Builder::new(ladder, ac.center_hz());
    for (i, stage) in ladder.stages().iter().enumerate() {
        b.write_stage(i + 1, stage)?;
    }
    b.finish(ladder, title, ac)
}

/// Format `value` as a SPICE number with the shortest digits that read back to the same `f64`,
/// scaled by an engineering suffix (f p n u m k meg g t) when one fits: `22u`, `8.99meg`, `1t`.
/// Zero is `0`; magnitudes outside 10⁻¹⁵ … 10¹⁵ use an exponent (`1.5e-18`).
pub fn format_spice_value(value: f64) -> String {
    if value == 0.0 || !value.is_finite() {
        return format!("{value}");
    }
    let sign = if value < 0.0 { "-" } else { "" };
    // Rust's `{:e}` is the shortest round-trip representation: "2.2e-5", "1e12".
    let s = format!("{:e}", value.abs());
    let Some((mantissa, exp)) = s.split_once('e') else {
        return format!("{value}");
    };
    let Ok(exp) = exp.parse::<i32>() else {
        return format!("{value}");
    };
    let eng = exp.div_euclid(3) * 3;
    let suffix = match eng {
        -15 => "f",
        -12 => "p",
        -9 => "n",
        -6 => "u",
        -3 => "m",
        0 => "",
        3 => "k",
        6 => "meg",
        9 => "g",
        12 => "t",
        _ => return format!("{sign}{mantissa}e{exp}"),
    };
    let digits: Vec<u8> = mantissa.bytes().filter(u8::is_ascii_digit).collect();
    // value = d1.d2d3… × 10^exp; move the point `shift` places right.
    let shift = (exp - eng) as usize;
    let mut out = String::from(sign);
    for k in 0..=shift {
        out.push(char::from(*digits.get(k).unwrap_or(&b'0')));
    }
    if digits.len() > shift + 1 {
        out.push('.');
        out.extend(digits[shift + 1..].iter().map(|&d| char::from(d)));
    }
    out.push_str(suffix);
    out
}

/// Read a SPICE number: a decimal number (optional sign, point and exponent) followed by an
/// optional scale suffix in any case — f p n u m k meg g t, and mil (25.4 µ) — and then any
/// letters, which SPICE ignores (`22uH`, `4.7pF`, `10MEG`). `m` is milli, as in SPICE.
///
/// # Errors
/// A [`crate::ErrorKind::Parse`] error when the text does not start with a finite number.
pub fn parse_spice_value(text: &str) -> Result<f64> {
    let t = text.trim();
    let bad = || {
        Error::parse(format!(
            "spice value: '{t}' is not a number; expected digits with an optional suffix \
             f p n u m k meg g t (e.g. 22u, 4.7p, 8.99meg)"
        ))
    };
    let bytes = t.as_bytes();
    // The numeric part: sign, digits, point, and an exponent only when digits follow it
    // (so "1e" is not read as an exponent, and "1meg" keeps its suffix).
    let mut end = 0;
    if matches!(bytes.first(), Some(b'+' | b'-')) {
        end = 1;
    }
    let mut saw_digit = false;
    while let Some(&c) = bytes.get(end) {
        if c.is_ascii_digit() {
            saw_digit = true;
        } else if c != b'.' {
            break;
        }
        end += 1;
    }
    if !saw_digit {
        return Err(bad());
    }
    let mut number_end = end;
    if matches!(bytes.get(end), Some(b'e' | b'E')) {
        let mut k = end + 1;
        if matches!(bytes.get(k), Some(b'+' | b'-')) {
            k += 1;
        }
        if bytes.get(k).is_some_and(u8::is_ascii_digit) {
            while bytes.get(k).is_some_and(u8::is_ascii_digit) {
                k += 1;
            }
            number_end = k;
        }
    }
    let (number, rest) = t.split_at(number_end);
    let rest = rest.to_ascii_lowercase();
    if !rest.bytes().all(|c| c.is_ascii_alphabetic()) {
        return Err(bad());
    }
    let scale_exp: Option<i32> = if rest.starts_with("meg") {
        Some(6)
    } else if rest.starts_with("mil") {
        None
    } else {
        match rest.bytes().next() {
            None => Some(0),
            Some(b'f') => Some(-15),
            Some(b'p') => Some(-12),
            Some(b'n') => Some(-9),
            Some(b'u') => Some(-6),
            Some(b'm') => Some(-3),
            Some(b'k') => Some(3),
            Some(b'g') => Some(9),
            Some(b't') => Some(12),
            // Other letters are units (e.g. "ohm", "H"): no scale.
            Some(_) => Some(0),
        }
    };
    let v: f64 = match scale_exp {
        // Without an exponent of its own, "<number>e<scale>" is parsed exactly (correctly
        // rounded), with no rounding from a multiplication.
        Some(e) if number_end == end => format!("{number}e{e}").parse().map_err(|_| bad())?,
        Some(e) => number.parse::<f64>().map_err(|_| bad())? * 10f64.powi(e),
        None => number.parse::<f64>().map_err(|_| bad())? * 25.4e-6,
    };
    if v.is_finite() {
        Ok(v)
    } else {
        Err(bad())
    }
}

/// Which reactive part a card is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    Capacitor,
    Inductor,
}

/// One line of the element section: an element card or a comment.
#[derive(Debug, Clone)]
enum Line {
    Comment(String),
    Card {
        name: String,
        a: usize,
        b: usize,
        value: f64,
    },
}

/// Collects cards with integer node ids; names and merges them at the end.
struct Builder {
    /// Node names by id; 0 is ground.
    names: Vec<String>,
    /// Node ids on the signal path: main[0] is the ladder input, main[last] the output.
    main: Vec<usize>,
    lines: Vec<Line>,
    /// Pairs of nodes joined by a short.
    shorts: Vec<(usize, usize)>,
    center_hz: f64,
    series_done: usize,
    n_r: usize,
    n_c: usize,
    n_l: usize,
    n_x: usize,
    n_j: usize,
}

/// A union-find over node ids.
struct Sets(Vec<usize>);

impl Sets {
    fn new(n: usize) -> Self {
        Sets((0..n).collect())
    }
    fn find(&mut self, mut i: usize) -> usize {
        while self.0[i] != i {
            self.0[i] = self.0[self.0[i]];
            i = self.0[i];
        }
        i
    }
    /// Join two sets; the smaller id becomes the representative.
    fn union(&mut self, a: usize, b: usize) {
        let (ra, rb) = (self.find(a), self.find(b));
        let (lo, hi) = if ra < rb { (ra, rb) } else { (rb, ra) };
        self.0[hi] = lo;
    }
}

fn check_positive(what: &str, v: f64) -> Result<f64> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(Error::invalid(
            what,
            format!("{v:e}"),
            "a finite value greater than zero",
        ))
    }
}

fn check_non_negative(what: &str, v: f64) -> Result<f64> {
    if v.is_finite() && v >= 0.0 {
        Ok(v)
    } else {
        Err(Error::invalid(
            what,
            format!("{v:e}"),
            "a finite value of zero or more",
        ))
    }
}

/// The title line: one line, never empty, and not starting with a character that ngspice-39
/// warns about and replaces (`= [ ] ? ( ) & % $ " ! : , ;`); such a title gets a leading `* `.
fn title_line(title: &str) -> String {
    let t = one_line(title);
    match t.chars().next() {
        None => "untitled".to_string(),
        Some(c) if "=[]?()&%$\"!:,;".contains(c) => format!("* {t}"),
        Some(_) => t,
    }
}

/// True when `br` is a short circuit at every frequency (a zero resistor, an empty series
/// branch, series parts that are all shorts, or a parallel branch with a short among its parts).
fn is_short(br: &Branch) -> bool {
    match br {
        Branch::Element(Element::Resistor(r)) => *r == 0.0,
        Branch::Element(_) => false,
        Branch::Series(parts) => parts.iter().all(is_short),
        Branch::Parallel(parts) => parts.iter().any(is_short),
    }
}

/// One-line text for a comment: control characters become spaces.
fn one_line(s: &str) -> String {
    s.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect::<String>()
        .trim()
        .to_string()
}

impl Builder {
    fn new(ladder: &Ladder, center_hz: f64) -> Self {
        let series = ladder
            .stages()
            .iter()
            .filter(|s| matches!(s, Stage::Series(_)))
            .count();
        let mut names = vec!["0".to_string(), "src".to_string()];
        let mut main = Vec::with_capacity(series + 1);
        for k in 0..=series {
            main.push(names.len());
            names.push(if k == series {
                "out".to_string()
            } else if k == 0 {
                "in".to_string()
            } else {
                format!("n{k}")
            });
        }
        Builder {
            names,
            main,
            lines: Vec::new(),
            shorts: Vec::new(),
            center_hz,
            series_done: 0,
            n_r: 0,
            n_c: 0,
            n_l: 0,
            n_x: 0,
            n_j: 0,
        }
    }

    fn node(&mut self, name: String) -> usize {
        self.names.push(name);
        self.names.len() - 1
    }

    fn card(&mut self, name: String, a: usize, b: usize, value: f64) {
        self.lines.push(Line::Card { name, a, b, value });
    }

    fn comment(&mut self, text: String) {
        self.lines.push(Line::Comment(text));
    }

    fn write_stage(&mut self, index: usize, stage: &Stage) -> Result<()> {
        // The signal-path node this stage starts from: one per series stage so far.
        let done = self.series_done;
        let (a, b, br, what) = match stage {
            Stage::Series(br) => {
                self.series_done += 1;
                (self.main[done], self.main[done + 1], br, "series")
            }
            Stage::Shunt(br) => (self.main[done], 0, br, "shunt"),
        };
        let where_ = if what == "series" {
            format!("from {} to {}", self.names[a], self.names[b])
        } else {
            format!("from {} to ground", self.names[a])
        };
        self.comment(format!("stage {index}: {what} branch {where_}"));
        self.write_branch(br, a, b, &format!("stage {index}"))
    }

    fn write_branch(&mut self, br: &Branch, a: usize, b: usize, path: &str) -> Result<()> {
        match br {
            Branch::Element(e) => self.write_element(e, a, b, path),
            Branch::Series(parts) => {
                if parts.is_empty() {
                    self.shorts.push((a, b));
                    return Ok(());
                }
                let mut from = a;
                for (i, p) in parts.iter().enumerate() {
                    let to = if i + 1 == parts.len() {
                        b
                    } else {
                        self.n_j += 1;
                        let n = self.n_j;
                        self.node(format!("j{n}"))
                    };
                    self.write_branch(p, from, to, &format!("{path} series part {}", i + 1))?;
                    from = to;
                }
                Ok(())
            }
            Branch::Parallel(parts) => {
                if parts.is_empty() {
                    self.comment(format!(
                        "{path}: empty parallel branch (an open): nothing written"
                    ));
                }
                if parts.iter().any(is_short) {
                    // Parts across a short carry no current; writing them would only leave
                    // loops (of inductors, possibly) that SPICE's DC solution cannot take.
                    self.comment(format!(
                        "{path}: a parallel part is a short: the branch is written as a short"
                    ));
                    self.shorts.push((a, b));
                    return Ok(());
                }
                for (i, p) in parts.iter().enumerate() {
                    self.write_branch(p, a, b, &format!("{path} parallel part {}", i + 1))?;
                }
                Ok(())
            }
        }
    }

    /// The loss resistance of a reactive part of reactance magnitude `x_at_center`.
    fn loss_ohm(&self, loss: &Loss, x_at_center: f64, path: &str) -> Result<(f64, Option<f64>)> {
        match *loss {
            Loss::Lossless => Ok((0.0, None)),
            Loss::Esr(r) => Ok((check_non_negative(&format!("{path}: esr (ohm)"), r)?, None)),
            Loss::Q(q) => {
                let q = check_positive(&format!("{path}: q"), q)?;
                Ok((x_at_center / q, Some(q)))
            }
        }
    }

    fn write_reactive(
        &mut self,
        kind: Kind,
        value: f64,
        loss: &Loss,
        a: usize,
        b: usize,
        path: &str,
    ) -> Result<()> {
        let w = 2.0 * PI * self.center_hz;
        let (letter, x, what) = match kind {
            Kind::Capacitor => ("C", 1.0 / (w * value), "capacitance (F)"),
            _ => ("L", w * value, "inductance (H)"),
        };
        check_positive(&format!("{path}: {what}"), value)?;
        let (r, q) = self.loss_ohm(loss, x, path)?;
        let n = match kind {
            Kind::Capacitor => {
                self.n_c += 1;
                self.n_c
            }
            _ => {
                self.n_l += 1;
                self.n_l
            }
        };
        let name = format!("{letter}{n}");
        if r > 0.0 {
            if let Some(q) = q {
                self.comment(format!(
                    "R{name}: ESR of {name} for Q = {q} at {} Hz, the sweep centre \
                     (SPICE has no frequency-dependent resistor; the Q holds there only)",
                    self.center_hz
                ));
            }
            self.n_j += 1;
            let jn = self.n_j;
            let j = self.node(format!("j{jn}"));
            self.card(name.clone(), a, j, value);
            self.card(format!("R{name}"), j, b, r);
        } else {
            self.card(name, a, b, value);
        }
        Ok(())
    }

    fn write_element(&mut self, e: &Element, a: usize, b: usize, path: &str) -> Result<()> {
        match e {
            Element::Resistor(r) => {
                let r = check_non_negative(&format!("{path}: resistance (ohm)"), *r)?;
                if r == 0.0 {
                    self.shorts.push((a, b));
                } else {
                    self.n_r += 1;
                    let n = self.n_r;
                    self.card(format!("R{n}"), a, b, r);
                }
                Ok(())
            }
            Element::Capacitor(c, loss) => {
                self.write_reactive(Kind::Capacitor, *c, loss, a, b, path)
            }
            Element::Inductor(l, loss) => self.write_reactive(Kind::Inductor, *l, loss, a, b, path),
            Element::Crystal(x) => self.write_crystal(x, a, b, path),
        }
    }

    fn write_motional(
        &mut self,
        m: &MotionalBranch,
        names: [String; 3],
        nodes: [String; 2],
        a: usize,
        b: usize,
        path: &str,
    ) -> Result<()> {
        let rm = check_non_negative(&format!("{path}: rm (ohm)"), m.rm_ohm)?;
        let lm = check_positive(&format!("{path}: lm (H)"), m.lm_h)?;
        let cm = check_positive(&format!("{path}: cm (F)"), m.cm_f)?;
        let [rn, ln, cn] = names;
        let [na, nb] = nodes;
        let xa = self.node(na);
        let xb = self.node(nb);
        if rm == 0.0 {
            self.shorts.push((a, xa));
        } else {
            self.card(rn, a, xa, rm);
        }
        self.card(ln, xa, xb, lm);
        self.card(cn, xb, b, cm);
        Ok(())
    }

    fn write_crystal(&mut self, x: &Crystal, a: usize, b: usize, path: &str) -> Result<()> {
        self.n_x += 1;
        let k = self.n_x;
        let path = format!("{path} crystal '{}'", one_line(&x.id));
        self.comment(format!(
            "crystal {k} '{}': fs = {:.3} Hz; Lm {}, Cm {}, Rm {}, C0 {} (H, F, ohm); {} spurious mode(s)",
            one_line(&x.id),
            x.fs_hz(),
            format_spice_value(x.motional.lm_h),
            format_spice_value(x.motional.cm_f),
            format_spice_value(x.motional.rm_ohm),
            format_spice_value(x.c0_f),
            x.spurious.len()
        ));
        self.write_motional(
            &x.motional,
            [format!("RM{k}"), format!("LM{k}"), format!("CM{k}")],
            [format!("x{k}a"), format!("x{k}b")],
            a,
            b,
            &path,
        )?;
        let c0 = check_non_negative(&format!("{path}: c0 (F)"), x.c0_f)?;
        if c0 > 0.0 {
            self.card(format!("C0{k}"), a, b, c0);
        }
        for (j, s) in x.spurious.iter().enumerate() {
            let j = j + 1;
            self.write_motional(
                s,
                [
                    format!("RS{k}_{j}"),
                    format!("LS{k}_{j}"),
                    format!("CS{k}_{j}"),
                ],
                [format!("x{k}s{j}a"), format!("x{k}s{j}b")],
                a,
                b,
                &format!("{path} spurious mode {j}"),
            )?;
        }
        Ok(())
    }

    fn finish(self, ladder: &Ladder, title: &str, ac: &AcSweep) -> Result<String> {
        let n = self.names.len();
        let out = *self.main.last().unwrap_or(&0);
        let input = *self.main.first().unwrap_or(&0);
        // Merge shorted nodes.
        let mut sets = Sets::new(n);
        for &(a, b) in &self.shorts {
            sets.union(a, b);
        }
        if sets.find(out) == sets.find(0) {
            return Err(Error::invalid(
                "ladder",
                "output shorted to ground",
                "a ladder whose output node is not shorted to ground",
            ));
        }
        let out_rep = sets.find(out);
        let rep: Vec<usize> = (0..n).map(|i| sets.find(i)).collect();
        let name = |i: usize| -> &str {
            let r = rep[i];
            if r == out_rep {
                "out"
            } else {
                &self.names[r]
            }
        };
        let (rs, rl) = (ladder.source_ohm(), ladder.load_ohm());
        let offset_db = 10.0 * (rs / rl).log10();
        let mut t = String::new();
        let _ = writeln!(t, "{}", title_line(title));
        let _ = writeln!(
            t,
            "* SPICE netlist of a ladder filter, written by filter-core; run it with ngspice -b."
        );
        let _ = writeln!(t, "* V1 is an AC EMF of 2 V behind RSRC = Rs; RLOAD = RL is the load from node out to ground.");
        let _ = writeln!(
            t,
            "* S21 = V(out)*sqrt(Rs/RL) = V(out)*{}, so |S21| (dB) = vdb(out) + 10*log10(Rs/RL) = vdb(out) {} {} dB.",
            (rs / rl).sqrt(),
            if offset_db < 0.0 { '-' } else { '+' },
            offset_db.abs()
        );
        let _ = writeln!(t, "* Numbers use SPICE suffixes f p n u m k meg g t (m is milli, meg is mega), no unit letters.");
        let _ = writeln!(t, "V1 src 0 DC 0 AC 2");
        let _ = writeln!(t, "RSRC src {} {}", name(input), format_spice_value(rs));
        for l in &self.lines {
            match l {
                Line::Comment(c) => {
                    let _ = writeln!(t, "* {c}");
                }
                Line::Card {
                    name: el,
                    a,
                    b,
                    value,
                } => {
                    if rep[*a] == rep[*b] {
                        let _ = writeln!(
                            t,
                            "* {el}: both ends on node {} (shorted out), omitted",
                            name(*a)
                        );
                    } else {
                        let _ = writeln!(
                            t,
                            "{el} {} {} {}",
                            name(*a),
                            name(*b),
                            format_spice_value(*value)
                        );
                    }
                }
            }
        }
        let _ = writeln!(t, "RLOAD out 0 {}", format_spice_value(rl));
        let _ = writeln!(
            t,
            "* No DC operating point: capacitors leave nodes without a DC path (linear circuit)."
        );
        let _ = writeln!(t, ".options noopac");
        let _ = writeln!(t, "{}", ac.card());
        let _ = writeln!(
            t,
            "* Output: the control block prints frequency (Hz), vdb(out) (dB) and vp(out) (degrees) with 15 digits."
        );
        let _ = writeln!(t, ".control");
        let _ = writeln!(t, "set numdgt=15");
        let _ = writeln!(t, "set units=degrees");
        let _ = writeln!(t, "set width=200");
        let _ = writeln!(t, "set nobreak");
        let _ = writeln!(t, "run");
        let _ = writeln!(t, "print vdb(out) vp(out)");
        let _ = writeln!(t, "quit");
        let _ = writeln!(t, ".endc");
        let _ = writeln!(t, ".end");
        Ok(t)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::{Branch, Element, Loss, Stage};

    fn cap(c: f64) -> Branch {
        Branch::Element(Element::Capacitor(c, Loss::Lossless))
    }

    fn crystal_ladder() -> Ladder {
        let x1 = Crystal::from_fs_lm("A1", 9.000_123e6, 15.3e-3, 12.5, 3.9e-12)
            .unwrap()
            .with_spurious(9.021e6, 40e-3, 80.0)
            .unwrap();
        let x2 = Crystal::from_fs_lm("A2", 8.999_987e6, 14.7e-3, 0.0, 4.1e-12).unwrap();
        Ladder::new(
            180.0,
            270.0,
            vec![
                Stage::Series(Branch::Series(vec![
                    Branch::Element(Element::Capacitor(330e-12, Loss::Q(1000.0))),
                    Branch::Element(Element::Crystal(x1)),
                ])),
                Stage::Shunt(cap(120e-12)),
                Stage::Series(Branch::Element(Element::Crystal(x2))),
            ],
        )
        .unwrap()
    }

    fn card_values(text: &str) -> Vec<(String, f64)> {
        text.lines()
            .skip(1)
            .filter(|l| l.starts_with(['R', 'C', 'L']))
            .map(|l| {
                let f: Vec<&str> = l.split_whitespace().collect();
                (f[0].to_string(), parse_spice_value(f[3]).unwrap())
            })
            .collect()
    }

    #[test]
    fn netlist_has_title_cards_and_end() {
        let ac = AcSweep::linear(8.99e6, 9.01e6, 201).unwrap();
        let t = spice_netlist(&crystal_ladder(), "two-crystal test\nsecond line", &ac).unwrap();
        let first = t.lines().next().unwrap();
        assert_eq!(first, "two-crystal test second line");
        // ngspice-39 warns about a title starting with '(' and others, and rewrites it.
        let t = spice_netlist(&crystal_ladder(), "(a) test", &ac).unwrap();
        assert!(t.starts_with("* (a) test\n"));
        let t = spice_netlist(&crystal_ladder(), " \n", &ac).unwrap();
        assert!(t.starts_with("untitled\n"));
        assert!(t.contains("\n.ac lin 201 8.99meg 9.01meg\n"), "{t}");
        assert!(t.contains("\nRLOAD out 0 270\n"));
        assert!(t.contains("\nRSRC src in 180\n"));
        assert!(t.contains("\nV1 src 0 DC 0 AC 2\n"));
        assert!(t.ends_with(".endc\n.end\n"));
        // Element names are unique (SPICE names are case-insensitive).
        let mut names: Vec<String> = t
            .lines()
            .skip(1)
            .filter(|l| !l.starts_with(['*', '.']) && !l.is_empty())
            .filter(|l| {
                !matches!(*l, "run" | "quit") && !l.starts_with("set ") && !l.starts_with("print ")
            })
            .map(|l| l.split_whitespace().next().unwrap().to_ascii_uppercase())
            .collect();
        let n = names.len();
        names.sort();
        names.dedup();
        assert_eq!(names.len(), n, "{t}");
        // The spurious branch, C0s and the Q's ESR are there; the zero Rm of crystal 2 is a short.
        for card in ["RS1_1 ", "LS1_1 ", "CS1_1 ", "C01 ", "C02 ", "RC1 ", "LM2 "] {
            assert!(t.contains(&format!("\n{card}")), "{card} missing in\n{t}");
        }
        assert!(!t.contains("\nRM2 "));
    }

    #[test]
    fn values_read_back_to_twelve_digits() {
        let ladder = crystal_ladder();
        let ac = AcSweep::linear(8.99e6, 9.01e6, 201).unwrap();
        let t = spice_netlist(&ladder, "t", &ac).unwrap();
        let v = card_values(&t);
        let get = |n: &str| v.iter().find(|(k, _)| k == n).map(|x| x.1).unwrap();
        let Stage::Series(Branch::Series(parts)) = &ladder.stages()[0] else {
            unreachable!()
        };
        let Branch::Element(Element::Crystal(x1)) = &parts[1] else {
            unreachable!()
        };
        for (name, want) in [
            ("LM1", x1.motional.lm_h),
            ("CM1", x1.motional.cm_f),
            ("RM1", x1.motional.rm_ohm),
            ("C01", x1.c0_f),
            ("LS1_1", x1.spurious[0].lm_h),
            ("CS1_1", x1.spurious[0].cm_f),
            ("C1", 330e-12),
            ("RSRC", 180.0),
        ] {
            let got = get(name);
            assert!(
                ((got - want) / want).abs() < 1e-12,
                "{name}: {got} vs {want}"
            );
        }
        // ESR of 330 pF at Q = 1000 at the 9 MHz centre: X/Q = 1/(2π·9e6·330e-12)/1000.
        let esr = 1.0 / (2.0 * PI * 9e6 * 330e-12) / 1000.0;
        assert!(((get("RC1") - esr) / esr).abs() < 1e-12);
    }

    #[test]
    fn format_and_parse_round_trip() {
        for (v, s) in [
            (22e-6, "22u"),
            (22e-12, "22p"),
            (4e-12, "4p"),
            (8.99e6, "8.99meg"),
            (1e12, "1t"),
            (15e-3, "15m"),
            (180.0, "180"),
            (4700.0, "4.7k"),
            (2.5e9, "2.5g"),
            (123.456e-15, "123.456f"),
            (1.5e-18, "1.5e-18"),
            (0.0, "0"),
        ] {
            assert_eq!(format_spice_value(v), s);
            assert_eq!(parse_spice_value(s).unwrap(), v, "{s}");
        }
        // Shortest round trip, so every f64 comes back bit for bit.
        let mut x = 1.234_567_890_123_456_7e-16;
        while x < 1e16 {
            let s = format_spice_value(x);
            assert_eq!(parse_spice_value(&s).unwrap(), x, "{s}");
            x *= 7.389_056_098_930_65;
        }
    }

    #[test]
    fn parse_follows_spice_rules() {
        // Source: Ngspice User's Manual, version 39, 2023, section on scale factors (M is milli).
        assert_eq!(parse_spice_value("1M").unwrap(), 1e-3);
        assert_eq!(parse_spice_value("1MEG").unwrap(), 1e6);
        assert_eq!(parse_spice_value("10Meg").unwrap(), 10e6);
        assert_eq!(parse_spice_value("4.7pF").unwrap(), 4.7e-12);
        assert_eq!(parse_spice_value("22uH").unwrap(), 22e-6);
        assert_eq!(parse_spice_value("50ohm").unwrap(), 50.0);
        assert_eq!(parse_spice_value("1e3k").unwrap(), 1e6);
        assert_eq!(parse_spice_value("2.5E-3").unwrap(), 2.5e-3);
        assert!((parse_spice_value("1mil").unwrap() - 25.4e-6).abs() < 1e-20);
        assert_eq!(parse_spice_value("-3.3n").unwrap(), -3.3e-9);
        for bad in ["", "pF", "abc", "1.2.3x", "1e999", "1k5", "nan", "inf"] {
            assert!(parse_spice_value(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn no_operating_point_and_no_extra_parts() {
        // Capacitor-isolated nodes are left as they are; ngspice skips the DC solution.
        let ac = AcSweep::linear(8.99e6, 9.01e6, 11).unwrap();
        let t = spice_netlist(&crystal_ladder(), "t", &ac).unwrap();
        assert!(
            t.contains("\n.options noopac\n.ac lin 11 8.99meg 9.01meg\n"),
            "{t}"
        );
        // Two crystals (4 + 3 cards with the spurious mode, less RM2 = 0), C1 and its ESR,
        // the shunt capacitor, RSRC and RLOAD: nothing else.
        let cards = t
            .lines()
            .skip(1)
            .filter(|l| l.starts_with(['R', 'C', 'L']))
            .count();
        assert_eq!(cards, 7 + 3 + 2 + 1 + 2, "{t}");
    }

    #[test]
    fn shorts_merge_nodes_and_opens_write_nothing() {
        let ac = AcSweep::decade(1e6, 1e8, 10).unwrap();
        let l = Ladder::new(
            50.0,
            75.0,
            vec![
                Stage::Series(Branch::Parallel(vec![
                    Branch::Element(Element::Inductor(1e-6, Loss::Esr(0.5))),
                    Branch::Element(Element::Resistor(0.0)),
                ])),
                Stage::Shunt(Branch::Parallel(vec![])),
                Stage::Series(Branch::Series(vec![])),
            ],
        )
        .unwrap();
        let t = spice_netlist(&l, "t", &ac).unwrap();
        assert!(t.contains("\n.ac dec 10 1meg 100meg\n"));
        // Everything is shorted: the input node is the output node.
        assert!(t.contains("\nRSRC src out 50\n"), "{t}");
        assert!(
            t.contains("stage 1: a parallel part is a short: the branch is written as a short"),
            "{t}"
        );
        assert!(!t.contains("\nL1 "), "{t}");
        // A part whose two ends are merged by a short elsewhere is omitted, with a comment.
        let l = Ladder::new(
            50.0,
            75.0,
            vec![
                Stage::Series(Branch::Series(vec![])),
                Stage::Series(Branch::Element(Element::Capacitor(1e-9, Loss::Lossless))),
            ],
        )
        .unwrap();
        let t = spice_netlist(&l, "t", &ac).unwrap();
        assert!(t.contains("\nC1 in out 1n\n"), "{t}");
        // Output shorted to ground is an error, not a netlist without node out.
        let grounded = Ladder::new(
            50.0,
            50.0,
            vec![
                Stage::Series(cap(1e-9)),
                Stage::Shunt(Branch::Element(Element::Resistor(0.0))),
            ],
        )
        .unwrap();
        let e = spice_netlist(&grounded, "t", &ac).unwrap_err();
        assert!(e.message().contains("output"), "{e}");
    }

    #[test]
    fn bad_values_are_errors_not_panics() {
        let ac = AcSweep::linear(1e6, 2e6, 11).unwrap();
        let bad = Ladder::new(50.0, 50.0, vec![Stage::Series(cap(-1e-12))]).unwrap();
        let e = spice_netlist(&bad, "t", &ac).unwrap_err();
        assert!(
            e.message()
                .contains("stage 1: capacitance (F): -1e-12 is not valid"),
            "{e}"
        );
        let bad_q = Ladder::new(
            50.0,
            50.0,
            vec![Stage::Series(Branch::Element(Element::Capacitor(
                1e-12,
                Loss::Q(0.0),
            )))],
        )
        .unwrap();
        assert!(spice_netlist(&bad_q, "t", &ac).is_err());
        assert!(AcSweep::linear(2e6, 1e6, 11).is_err());
        assert!(AcSweep::linear(1e6, 2e6, 0).is_err());
        assert!(AcSweep::decade(1e6, 1e6, 10).is_err());
        assert!(AcSweep::linear(1e6, 1e6, 1).is_ok());
        let bad_ac = AcSweep {
            start_hz: f64::NAN,
            ..ac
        };
        let ok = Ladder::new(50.0, 50.0, vec![Stage::Series(cap(1e-12))]).unwrap();
        let mut sink = Vec::new();
        let e = write_spice_netlist(&ok, "t", &bad_ac, &mut sink).unwrap_err();
        assert_eq!(e.kind(), std::io::ErrorKind::InvalidInput);
        assert!(sink.is_empty());
        write_spice_netlist(&ok, "t", &ac, &mut sink).unwrap();
        assert!(String::from_utf8(sink).unwrap().starts_with("t\n"));
    }
}
