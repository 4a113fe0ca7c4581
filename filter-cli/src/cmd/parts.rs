//! `xtal-ladder parts`: the parts list of a design built from standard values, with the
//! as-built response beside the ideal one.
//!
//! The library chooses the values ([`filter_core::as_built::build_from_parts`]: shunt
//! capacitors rounded first, series capacitors re-solved for them, then rounded) and designs
//! the matching networks ([`filter_core::impedance_match`]); this module numbers the parts in
//! signal order and prints them as text, CSV, Markdown or JSON.
//!
//! # Reference designators
//! Capacitors of the ladder are C1, C2, … in signal order (series capacitor of position i,
//! then the shunt capacitor after crystal i); a position without a series capacitor is a wire
//! link W1, W2, …; crystals are Y1 … Yn; the terminations R1 (source) and R2 (load); matching
//! parts follow, input end first, numbering on from the ladder's capacitors (C, L, T).

use super::{check_output, read_design, to_json};
use crate::errors::bad_hint;
use crate::files;
use crate::flags::{FormatArg, MatchArgs, MatchFormArg, PartsCmd, RoundingArgs};
use crate::text;
use anyhow::{Context, Result};
use filter_core::as_built::{build_from_parts, AsBuilt, RoundingOptions};
use filter_core::design::Design;
use filter_core::impedance_match::{
    design_l_network, design_transformer, ElementPosition, LForm, LNetwork, ReactiveElement,
};
use filter_core::metrics::Performance;
use filter_core::parts::{choose, relative_error, Choice, Series};
use filter_core::Crystal;
use serde_json::{json, Value};
use std::io::Write;

/// What kind of physical position a row of the parts list is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// A shunt coupling capacitor.
    Shunt,
    /// A series tuning capacitor (or a wire).
    Series,
    /// A crystal.
    Crystal,
    /// A source or load termination.
    Termination,
    /// A part of a matching network.
    Match,
}

impl Kind {
    /// The name in JSON and CSV.
    pub fn name(self) -> &'static str {
        match self {
            Kind::Shunt => "shunt",
            Kind::Series => "series",
            Kind::Crystal => "crystal",
            Kind::Termination => "termination",
            Kind::Match => "match",
        }
    }
}

/// What goes in a position.
#[derive(Debug, Clone, PartialEq)]
pub enum Chosen {
    /// A standard-value part, or a parallel pair of them.
    Part(Choice),
    /// A value that is not rounded (a crystal's fs, a termination, a wound inductor, a
    /// turns ratio).
    Value(f64),
    /// No part: a wire link.
    Wire,
}

impl Chosen {
    /// The value realized, if any.
    pub fn value(&self) -> Option<f64> {
        match self {
            Chosen::Part(c) => Some(c.value()),
            Chosen::Value(v) => Some(*v),
            Chosen::Wire => None,
        }
    }
}

/// One physical position of the build.
#[derive(Debug, Clone)]
pub struct PartRow {
    /// Reference designator: C3, Y2, R1, L1, W1.
    pub reference: String,
    /// The schematic's name for the position: Cs1, C12, X1, Rs, RL, or "input match".
    pub position: String,
    /// What the position is.
    pub kind: Kind,
    /// What the part is, in words ("capacitor", "crystal x04", "inductor").
    pub part: String,
    /// The design's value (None where the design has no part).
    pub ideal: Option<f64>,
    /// What was chosen.
    pub chosen: Chosen,
    /// The series the chosen value belongs to.
    pub series: Option<Series>,
    /// For a re-tuned series capacitor: the value it was rounded from.
    pub retuned_target: Option<f64>,
    /// SI unit symbol of `ideal` and `chosen`.
    pub unit: &'static str,
    /// The crystal at a crystal position.
    pub crystal: Option<Crystal>,
    /// `input` or `output`, for terminations and matching parts.
    pub end: Option<&'static str>,
    /// A remark for the builder.
    pub note: Option<String>,
}

impl PartRow {
    /// Signed error of the chosen value against the design's, in percent.
    pub fn error_pct(&self) -> Option<f64> {
        if self.kind == Kind::Crystal {
            return None;
        }
        match (self.ideal, self.chosen.value()) {
            (Some(i), Some(c)) if i != 0.0 => Some(100.0 * relative_error(i, c)),
            _ => None,
        }
    }

    /// Signed error of the chosen value against the re-tuned target, in percent.
    pub fn retune_error_pct(&self) -> Option<f64> {
        match (self.retuned_target, self.chosen.value()) {
            (Some(t), Some(c)) if t != 0.0 => Some(100.0 * relative_error(t, c)),
            _ => None,
        }
    }

    /// The chosen value as people read it: `68 pF`, `100 pF ∥ 4.7 pF`, `wire`, `x04`.
    pub fn value_text(&self) -> String {
        match (&self.chosen, &self.crystal) {
            (_, Some(x)) => x.id.clone(),
            (Chosen::Wire, _) => "wire".to_string(),
            (Chosen::Part(Choice::Single(v)), _) => self.standard(*v),
            (Chosen::Part(Choice::ParallelPair(a, b)), _) => {
                format!("{} ∥ {}", self.standard(*a), self.standard(*b))
            }
            (Chosen::Value(v), _) => value(*v, self.unit),
        }
    }

    /// A standard value with the digits of its series: `100 pF`, `5.6 pF`, `4.87 pF`.
    fn standard(&self, v: f64) -> String {
        let digits = self.series.map_or(4, |s| s.significant_digits() as usize);
        filter_core::units::format_si_digits(v, self.unit, digits)
    }

    /// The design's value as people read it (blank where there is none).
    pub fn ideal_text(&self) -> String {
        match (&self.crystal, self.ideal) {
            (Some(x), _) => format!("fs {}", text::freq(x.fs_hz())),
            (None, Some(v)) => value(v, self.unit),
            (None, None) => String::new(),
        }
    }

    /// The error column: blank for crystals and unrounded values.
    pub fn error_text(&self) -> String {
        match (&self.chosen, self.error_pct()) {
            (Chosen::Part(_), Some(e)) => pct(e),
            (Chosen::Wire, _) if self.ideal.is_some() => "wire".to_string(),
            _ => String::new(),
        }
    }

    /// The note column, with the re-tuned target when there is one.
    pub fn note_text(&self) -> String {
        let mut parts = Vec::new();
        if let (Some(t), Some(e)) = (self.retuned_target, self.retune_error_pct()) {
            parts.push(format!(
                "re-tuned to {} ({} from it)",
                value(t, self.unit),
                pct(e)
            ));
        }
        if let Some(n) = &self.note {
            parts.push(n.clone());
        }
        parts.join("; ")
    }
}

/// A value with its unit in engineering notation, 4 digits (turns ratios as `1:n`).
fn value(v: f64, unit: &str) -> String {
    if unit.is_empty() {
        format!("1:{}", text::num(v, 4))
    } else {
        text::si(v, unit)
    }
}

/// A signed percentage with two decimals: `+1.25 %`, `−3.10 %`.
pub fn pct(e: f64) -> String {
    if e.abs() < 0.005 {
        // What rounds to zero is printed without a sign (no "−0.00 %").
        return "0.00 %".to_string();
    }
    let s = format!("{:+.2} %", e);
    s.replacen('-', "−", 1)
}

/// One end's matching network.
#[derive(Debug, Clone)]
pub struct MatchEnd {
    /// `input` or `output`.
    pub end: &'static str,
    /// The termination the ladder needs at this end, Ω.
    pub termination_ohm: f64,
    /// The network (None: a transformer, or no network needed).
    pub network: Option<LNetwork>,
    /// The network as built from the chosen parts.
    pub built: Option<LNetwork>,
    /// The chosen part of the series element, when it is a capacitor.
    pub series_choice: Option<Choice>,
    /// The chosen part of the shunt element, when it is a capacitor.
    pub shunt_choice: Option<Choice>,
    /// The transformer's turns ratio N_ladder/N_system.
    pub turns_ratio: Option<f64>,
}

/// The matching networks of both ends.
#[derive(Debug, Clone)]
pub struct Matching {
    /// System impedance, Ω.
    pub system_ohm: f64,
    /// The form asked for.
    pub form: MatchFormArg,
    /// Frequency the networks are designed at, Hz.
    pub f_hz: f64,
    /// The series the matching capacitors are rounded to.
    pub series: Series,
    /// Input and output ends (an end whose termination equals the system impedance is left
    /// out).
    pub ends: Vec<MatchEnd>,
}

/// Everything the parts list says.
#[derive(Debug, Clone)]
pub struct PartsList {
    /// One row per physical position, in designator order.
    pub rows: Vec<PartRow>,
    /// The library's as-built result.
    pub built: AsBuilt,
    /// The options used.
    pub options: RoundingOptions,
    /// The matching networks, when asked for.
    pub matching: Option<Matching>,
    /// Notes of the library and of the matching.
    pub notes: Vec<String>,
}

/// The library's rounding options from the flags.
pub fn rounding_options(args: &RoundingArgs) -> RoundingOptions {
    RoundingOptions {
        series: args.series,
        allow_pairs: args.pairs,
        pair_gain: args.pair_gain,
        retune: !args.no_retune,
        round_terminations: args.round_terminations,
    }
}

/// Choose the parts of `design` and number them.
///
/// # Errors
/// A value that cannot be rounded, an as-built ladder without a passband, or a matching
/// network that cannot be designed.
pub fn parts_list(design: &Design, rounding: &RoundingArgs, m: &MatchArgs) -> Result<PartsList> {
    let options = rounding_options(rounding);
    let built = build_from_parts(design, &options).context("choosing parts")?;
    let mut rows = Vec::new();
    let mut next_c = 1;
    let mut next_w = 1;
    let n = design.order();
    let retuned = options.retune;
    for i in 0..n {
        let pos = i + 1;
        let ideal = design.series_caps_f.get(i).copied().flatten();
        let chosen = built.series.get(i).copied().flatten();
        let target = built.series_target_f.get(i).copied().flatten();
        let (reference, chosen) = match chosen {
            Some(c) => {
                let r = format!("C{next_c}");
                next_c += 1;
                (r, Chosen::Part(c))
            }
            None => {
                let r = format!("W{next_w}");
                next_w += 1;
                (r, Chosen::Wire)
            }
        };
        let is_part = matches!(chosen, Chosen::Part(_));
        let note = match (ideal, is_part) {
            (Some(_), false) => Some("no capacitor: a wire after re-tuning".to_string()),
            (None, false) => Some("no capacitor: a wire".to_string()),
            (None, true) => Some("the design has a wire here; re-tuning needs a capacitor".into()),
            (Some(_), true) => None,
        };
        rows.push(PartRow {
            reference,
            position: format!("Cs{pos}"),
            kind: Kind::Series,
            part: if is_part { "capacitor" } else { "wire link" }.to_string(),
            ideal,
            chosen,
            series: is_part.then_some(options.series),
            retuned_target: if retuned && is_part { target } else { None },
            unit: "F",
            crystal: None,
            end: None,
            note,
        });
        if let Some(x) = design.crystals.get(i) {
            rows.push(PartRow {
                reference: format!("Y{pos}"),
                position: format!("X{pos}"),
                kind: Kind::Crystal,
                part: format!("crystal {}", x.id),
                ideal: Some(x.fs_hz()),
                chosen: Chosen::Value(x.fs_hz()),
                series: None,
                retuned_target: None,
                unit: "Hz",
                crystal: Some(x.clone()),
                end: None,
                note: None,
            });
        }
        if let (Some(&ideal), Some(&c)) = (design.shunt_caps_f.get(i), built.shunt.get(i)) {
            rows.push(PartRow {
                reference: format!("C{next_c}"),
                position: shunt_position(pos),
                kind: Kind::Shunt,
                part: "capacitor".to_string(),
                ideal: Some(ideal),
                chosen: Chosen::Part(c),
                series: Some(options.series),
                retuned_target: None,
                unit: "F",
                crystal: None,
                end: None,
                note: None,
            });
            next_c += 1;
        }
    }
    let matching = match m.match_to {
        Some(system) => {
            Some(design_matching(system.0, m.match_form, &built, rounding).context("--match-to")?)
        }
        None => None,
    };
    for (r, end, position, ideal, chosen) in [
        ("R1", "input", "Rs", design.source_ohm, built.source_ohm),
        ("R2", "output", "RL", design.load_ohm, built.load_ohm),
    ] {
        let matched = matching
            .as_ref()
            .is_some_and(|mm| mm.ends.iter().any(|e| e.end == end));
        let note = match (&matching, matched) {
            (Some(mm), true) => Some(format!(
                "no resistor: the {} system through the {end} matching network presents it",
                text::si(mm.system_ohm, "Ω")
            )),
            (Some(_), false) => Some("equals the system impedance: no matching needed".into()),
            (None, _) => Some(format!(
                "the {} impedance the ladder must see",
                if end == "input" { "source" } else { "load" }
            )),
        };
        rows.push(PartRow {
            reference: r.to_string(),
            position: position.to_string(),
            kind: Kind::Termination,
            part: format!(
                "{} termination",
                if end == "input" { "source" } else { "load" }
            ),
            ideal: Some(ideal),
            chosen: if options.round_terminations {
                Chosen::Part(Choice::Single(chosen))
            } else {
                Chosen::Value(chosen)
            },
            series: options.round_terminations.then_some(options.series),
            retuned_target: None,
            unit: "Ω",
            crystal: None,
            end: Some(end),
            note,
        });
    }
    let mut notes = built.notes.clone();
    if let Some(mm) = &matching {
        rows.extend(match_rows(mm, &mut next_c, &mut notes));
    }
    Ok(PartsList {
        rows,
        built,
        options,
        matching,
        notes,
    })
}

/// The schematic's name of the shunt capacitor after crystal `pos`: C12, or C9,10.
fn shunt_position(pos: usize) -> String {
    if pos + 1 >= 10 {
        format!("C{pos},{}", pos + 1)
    } else {
        format!("C{pos}{}", pos + 1)
    }
}

/// Design the network of each end for the as-built terminations at the as-built centre; the
/// capacitors of L-networks are rounded like the ladder's, inductors keep their value (they are
/// wound or trimmed on the bench).
fn design_matching(
    system_ohm: f64,
    form: MatchFormArg,
    built: &AsBuilt,
    rounding: &RoundingArgs,
) -> Result<Matching> {
    let f_hz = built.built.center_hz;
    let round = |e: ReactiveElement| -> Result<(ReactiveElement, Option<Choice>)> {
        match e {
            ReactiveElement::Capacitor { capacitance_f } => {
                let c = choose(
                    capacitance_f,
                    rounding.series,
                    rounding.pairs,
                    rounding.pair_gain,
                )
                .context("matching capacitor")?;
                Ok((
                    ReactiveElement::Capacitor {
                        capacitance_f: c.value(),
                    },
                    Some(c),
                ))
            }
            inductor => Ok((inductor, None)),
        }
    };
    let mut ends = Vec::new();
    for (end, termination_ohm) in [("input", built.source_ohm), ("output", built.load_ohm)] {
        if termination_ohm == system_ohm {
            continue;
        }
        let l_form = match form {
            MatchFormArg::Lowpass => Some(LForm::LowPass),
            MatchFormArg::Highpass => Some(LForm::HighPass),
            MatchFormArg::Transformer => None,
        };
        let mut me = MatchEnd {
            end,
            termination_ohm,
            network: None,
            built: None,
            series_choice: None,
            shunt_choice: None,
            turns_ratio: None,
        };
        match l_form {
            Some(f) => {
                let net = design_l_network(system_ohm, termination_ohm, f_hz, f)
                    .with_context(|| format!("{end} matching network"))?;
                let mut b = net;
                (b.series, me.series_choice) = round(net.series)?;
                (b.shunt, me.shunt_choice) = round(net.shunt)?;
                me.network = Some(net);
                me.built = Some(b);
            }
            None => {
                let t = design_transformer(system_ohm, termination_ohm)
                    .with_context(|| format!("{end} transformer"))?;
                me.turns_ratio = Some(t.turns_ratio);
            }
        }
        ends.push(me);
    }
    Ok(Matching {
        system_ohm,
        form,
        f_hz,
        series: rounding.series,
        ends,
    })
}

/// The rows of the matching parts, input end first, each end in signal order; the impedance
/// each system port sees through the chosen parts goes to `notes`.
fn match_rows(m: &Matching, next_c: &mut usize, notes: &mut Vec<String>) -> Vec<PartRow> {
    let mut rows = Vec::new();
    let mut next_l = 1;
    let mut next_t = 1;
    for e in &m.ends {
        let position = format!("{} match", e.end);
        let row = |reference: String, part: String, ideal: f64, chosen: Chosen, unit| PartRow {
            reference,
            position: position.clone(),
            kind: Kind::Match,
            part,
            ideal: Some(ideal),
            series: matches!(chosen, Chosen::Part(_)).then_some(m.series),
            chosen,
            retuned_target: None,
            unit,
            crystal: None,
            end: Some(e.end),
            note: None,
        };
        if let Some(n) = e.turns_ratio {
            let mut r = row(
                format!("T{next_t}"),
                "transformer".to_string(),
                n,
                Chosen::Value(n),
                "",
            );
            r.note = Some(format!(
                "turns ratio system:ladder, {} to {}",
                text::si(m.system_ohm, "Ω"),
                text::si(e.termination_ohm, "Ω")
            ));
            rows.push(r);
            next_t += 1;
            continue;
        }
        let (Some(net), Some(built)) = (&e.network, &e.built) else {
            continue;
        };
        // elements() runs from the system port to the ladder: reverse it at the output end.
        let mut elements = net.elements();
        if e.end == "output" {
            elements.reverse();
        }
        for el in elements {
            let (place, choice) = match el.position {
                ElementPosition::Series => ("in series", e.series_choice),
                ElementPosition::Shunt => ("to ground", e.shunt_choice),
            };
            let r = match (el.element, choice) {
                (ReactiveElement::Capacitor { capacitance_f }, Some(c)) => {
                    let reference = format!("C{next_c}");
                    *next_c += 1;
                    row(
                        reference,
                        format!("capacitor {place}"),
                        capacitance_f,
                        Chosen::Part(c),
                        "F",
                    )
                }
                (ReactiveElement::Capacitor { capacitance_f }, None) => {
                    let reference = format!("C{next_c}");
                    *next_c += 1;
                    row(
                        reference,
                        format!("capacitor {place}"),
                        capacitance_f,
                        Chosen::Value(capacitance_f),
                        "F",
                    )
                }
                (ReactiveElement::Inductor { inductance_h }, _) => {
                    let reference = format!("L{next_l}");
                    next_l += 1;
                    let mut r = row(
                        reference,
                        format!("inductor {place}"),
                        inductance_h,
                        Chosen::Value(inductance_h),
                        "H",
                    );
                    r.note = Some("wind or trim to value".to_string());
                    r
                }
            };
            rows.push(r);
        }
        match built.input_impedance(e.termination_ohm, m.f_hz) {
            Ok(z) => notes.push(format!(
                "{} end: through the chosen matching parts the {} system sees {} at {}",
                e.end,
                text::si(m.system_ohm, "Ω"),
                complex_text(z.re, z.im),
                text::freq(m.f_hz)
            )),
            Err(err) => notes.push(format!("{} end: {err}", e.end)),
        }
    }
    rows
}

/// `49.87 − j1.204 Ω`.
fn complex_text(re: f64, im: f64) -> String {
    let sign = if im < 0.0 { "−" } else { "+" };
    format!("{} {sign} j{}", text::num(re, 4), text::si(im.abs(), "Ω"))
}

/// Run `parts`.
pub fn run(cmd: &PartsCmd, format: FormatArg) -> Result<()> {
    let ins = std::slice::from_ref(&cmd.design);
    for out in [cmd.output.output.as_ref(), cmd.as_built.as_ref()]
        .into_iter()
        .flatten()
    {
        check_output(out, ins)?;
    }
    if cmd.output.output.is_some() && cmd.output.output == cmd.as_built {
        return Err(bad_hint(
            "-o and --as-built name the same file",
            "give the parts list and the as-built design different names",
        ));
    }
    let design = read_design(&cmd.design)?;
    let list = parts_list(&design, &cmd.rounding, &cmd.matching)
        .with_context(|| format!("design '{}'", cmd.design.display()))?;
    if let Some(path) = &cmd.as_built {
        let text = list.built.design.to_json();
        files::write_atomic(path, |w| {
            w.write_all(text.as_bytes())?;
            writeln!(w)?;
            Ok(())
        })?;
    }
    let title = format!("parts for {}", cmd.design.display());
    let fill = |w: &mut dyn Write| -> Result<()> {
        match format {
            FormatArg::Json => {
                serde_json::to_writer_pretty(&mut *w, &parts_json(&list)?)
                    .context("cannot write the parts list")?;
                writeln!(w)?;
            }
            FormatArg::Csv => write_csv(&list, w)?,
            FormatArg::Md => w.write_all(markdown(&list, &title).as_bytes())?,
            FormatArg::Text => w.write_all(text_list(&list, &title).as_bytes())?,
        }
        Ok(())
    };
    match &cmd.output.output {
        Some(path) => {
            files::write_atomic(path, fill)?;
            if format != FormatArg::Json {
                let mut s = format!(
                    "parts list ({} parts) written to {}\n",
                    list.rows.len(),
                    path.display()
                );
                if let Some(p) = &cmd.as_built {
                    s += &format!("as-built design written to {}\n", p.display());
                }
                super::print_text(&s)?;
            }
            Ok(())
        }
        None => files::write_stdout(fill),
    }
}

/// The options as one line: `E24, parallel pairs allowed, series capacitors re-tuned`.
pub fn options_text(o: &RoundingOptions) -> String {
    let mut s = format!(
        "{}, {}, {}",
        o.series,
        if o.allow_pairs {
            format!(
                "parallel pairs allowed (gain {})",
                text::num(o.pair_gain, 3)
            )
        } else {
            "single values".to_string()
        },
        if o.retune {
            "series capacitors re-tuned after rounding the shunt capacitors"
        } else {
            "every capacitor rounded on its own"
        }
    );
    if o.round_terminations {
        s += ", terminations rounded";
    }
    s
}

/// One line of the comparison of the ideal and the as-built figures.
#[derive(Debug, Clone)]
pub struct ComparisonRow {
    /// The figure: `ripple`.
    pub label: &'static str,
    /// The JSON name: `ripple_db`.
    pub field: &'static str,
    /// Ideal value, as text.
    pub ideal: String,
    /// As-built value, as text.
    pub built: String,
    /// The change, as text.
    pub delta: String,
    /// The change, as a number (None when either side has no value).
    pub delta_value: Option<f64>,
}

/// One figure of the comparison: label, JSON name, how to read it off a [`Performance`], how
/// to show a value and how to show a change.
type Figure = (
    &'static str,
    &'static str,
    fn(&Performance) -> Option<f64>,
    fn(f64) -> String,
    fn(f64) -> String,
);

/// The figures of the ideal and the as-built ladder side by side.
pub fn comparison(ideal: &Performance, built: &Performance) -> Vec<ComparisonRow> {
    let rows: [Figure; 10] = [
        (
            "insertion loss",
            "insertion_loss_db",
            |p| Some(p.insertion_loss_db),
            text::db,
            signed_db,
        ),
        (
            "ripple",
            "ripple_db",
            |p| Some(p.ripple_db),
            text::db,
            signed_db,
        ),
        (
            "−3 dB bandwidth",
            "bw_3db_hz",
            |p| Some(p.bw_3db_hz),
            text::width,
            signed_hz,
        ),
        (
            "−6 dB bandwidth",
            "bw_6db_hz",
            |p| Some(p.bw_6db_hz),
            text::width,
            signed_hz,
        ),
        (
            "−60 dB bandwidth",
            "bw_60db_hz",
            |p| p.bw_60db_hz,
            text::width,
            signed_hz,
        ),
        (
            "shape factor 60/6",
            "shape_factor_60_6",
            |p| p.shape_factor_60_6,
            |v| text::num(v, 3),
            |v| signed(text::num(v.abs(), 3), v),
        ),
        (
            "passband centre",
            "center_hz",
            |p| Some(p.center_hz),
            text::freq,
            signed_hz,
        ),
        (
            "return loss",
            "return_loss_db",
            |p| Some(p.return_loss_db),
            text::db,
            signed_db,
        ),
        (
            "group delay at centre",
            "group_delay_center_s",
            |p| Some(p.group_delay_center_s),
            |v| text::si(v, "s"),
            |v| signed(text::si(v.abs(), "s"), v),
        ),
        (
            "group delay variation",
            "group_delay_variation_s",
            |p| Some(p.group_delay_variation_s),
            |v| text::si(v, "s"),
            |v| signed(text::si(v.abs(), "s"), v),
        ),
    ];
    rows.iter()
        .map(|(label, field, get, show, show_delta)| {
            let (a, b) = (get(ideal), get(built));
            let delta_value = match (a, b) {
                (Some(a), Some(b)) => Some(b - a),
                _ => None,
            };
            ComparisonRow {
                label,
                field,
                ideal: text::opt(a, show),
                built: text::opt(b, show),
                delta: delta_value.map(show_delta).unwrap_or_default(),
                delta_value,
            }
        })
        .collect()
}

fn signed(magnitude: String, v: f64) -> String {
    format!("{}{magnitude}", if v < 0.0 { "−" } else { "+" })
}

fn signed_db(v: f64) -> String {
    signed(format!("{:.2} dB", v.abs()), v)
}

fn signed_hz(v: f64) -> String {
    signed(text::width(v.abs()), v)
}

/// Columns of a text table, padded to the widest cell (counted in characters).
fn table(header: &[&str], rows: &[Vec<String>]) -> String {
    let mut widths: Vec<usize> = header.iter().map(|h| h.chars().count()).collect();
    for r in rows {
        for (k, c) in r.iter().enumerate() {
            if let Some(w) = widths.get_mut(k) {
                *w = (*w).max(c.chars().count());
            }
        }
    }
    let line = |cells: Vec<&str>| {
        let mut s = String::from(" ");
        for (k, c) in cells.iter().enumerate() {
            let w = widths.get(k).copied().unwrap_or(0);
            s.push(' ');
            s.push_str(c);
            if k + 1 < cells.len() {
                s.push_str(&" ".repeat(w.saturating_sub(c.chars().count()) + 1));
            }
        }
        s.trim_end().to_string() + "\n"
    };
    let mut out = line(header.to_vec());
    for r in rows {
        out += &line(r.iter().map(String::as_str).collect());
    }
    out
}

/// The cells of one row for text and Markdown.
fn cells(r: &PartRow) -> Vec<String> {
    vec![
        r.reference.clone(),
        r.position.clone(),
        r.part.clone(),
        r.value_text(),
        r.series.map(|s| s.to_string()).unwrap_or_default(),
        r.ideal_text(),
        r.error_text(),
        r.note_text(),
    ]
}

const HEADER: [&str; 8] = [
    "ref", "position", "part", "value", "series", "ideal", "error", "notes",
];

/// The parts list as text.
pub fn text_list(list: &PartsList, title: &str) -> String {
    let mut s = format!("{title}: {}\n\n", options_text(&list.options));
    let rows: Vec<Vec<String>> = list.rows.iter().map(cells).collect();
    s += &table(&HEADER, &rows);
    s += "\nas built beside the ideal design:\n";
    let cmp: Vec<Vec<String>> = comparison(&list.built.ideal, &list.built.built)
        .into_iter()
        .map(|c| vec![c.label.to_string(), c.ideal, c.built, c.delta])
        .collect();
    s += &table(&["", "ideal", "as built", "change"], &cmp);
    if !list.notes.is_empty() {
        s += "\nnotes:\n";
        for n in &list.notes {
            s += &format!("  {n}\n");
        }
    }
    s
}

/// Escape a Markdown table cell.
fn md_cell(s: &str) -> String {
    s.replace('|', "\\|")
}

/// The parts list as Markdown: a heading, the parts table, the comparison table and notes.
pub fn markdown(list: &PartsList, title: &str) -> String {
    let mut s = format!(
        "# {}\n\n{}.\n\n",
        md_cell(title),
        options_text(&list.options)
    );
    let row = |cells: Vec<String>| {
        let c: Vec<String> = cells.iter().map(|c| md_cell(c)).collect();
        format!("| {} |\n", c.join(" | "))
    };
    s += &row(HEADER.iter().map(|h| capitalize(h)).collect());
    s += &format!("|{}\n", "---|".repeat(HEADER.len()));
    for r in &list.rows {
        s += &row(cells(r));
    }
    s += "\n## As built beside the ideal design\n\n";
    s += &row(vec![
        "Figure".into(),
        "Ideal".into(),
        "As built".into(),
        "Change".into(),
    ]);
    s += "|---|---:|---:|---:|\n";
    for c in comparison(&list.built.ideal, &list.built.built) {
        s += &row(vec![c.label.to_string(), c.ideal, c.built, c.delta]);
    }
    if !list.notes.is_empty() {
        s += "\n## Notes\n\n";
        for n in &list.notes {
            s += &format!("- {}\n", n);
        }
    }
    s
}

fn capitalize(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().collect::<String>() + c.as_str(),
        None => String::new(),
    }
}

/// A CSV field, quoted when it holds a comma, a quote or a newline.
fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// The CSV header of `parts --format csv`.
pub const CSV_HEADER: &str = "ref,position,kind,end,part,value,chosen,chosen_trim,unit,series,\
ideal,error_pct,retuned_target,crystal_id,note";

/// The parts list as CSV: one row per position, numbers in SI units (shortest round trip),
/// `value` in engineering notation; `chosen_trim` is the second part of a parallel pair.
pub fn write_csv(list: &PartsList, w: &mut dyn Write) -> Result<()> {
    let mut buf = zmij::Buffer::new();
    let mut num = |v: Option<f64>| v.map(|v| buf.format(v).to_string()).unwrap_or_default();
    writeln!(w, "{CSV_HEADER}")?;
    for r in &list.rows {
        let (first, trim) = match &r.chosen {
            Chosen::Part(Choice::Single(v)) | Chosen::Value(v) => (Some(*v), None),
            Chosen::Part(Choice::ParallelPair(a, b)) => (Some(*a), Some(*b)),
            Chosen::Wire => (None, None),
        };
        let fields = [
            r.reference.clone(),
            r.position.clone(),
            r.kind.name().to_string(),
            r.end.unwrap_or("").to_string(),
            r.part.clone(),
            r.value_text(),
            num(first),
            num(trim),
            r.unit.to_string(),
            r.series.map(|s| s.to_string()).unwrap_or_default(),
            num(r.ideal),
            num(r.error_pct()),
            num(r.retuned_target),
            r.crystal.as_ref().map(|x| x.id.clone()).unwrap_or_default(),
            r.note_text(),
        ];
        let line: Vec<String> = fields.iter().map(|f| csv_field(f)).collect();
        writeln!(w, "{}", line.join(","))?;
    }
    Ok(())
}

/// One row as JSON.
fn row_json(r: &PartRow) -> Result<Value> {
    let chosen = match &r.chosen {
        Chosen::Part(Choice::Single(v)) | Chosen::Value(v) => json!(v),
        Chosen::Part(Choice::ParallelPair(a, b)) => json!([a, b]),
        Chosen::Wire => Value::Null,
    };
    let mut v = json!({
        "ref": r.reference,
        "position": r.position,
        "kind": r.kind.name(),
        "part": r.part,
        "value": r.value_text(),
        "ideal": r.ideal,
        "chosen": chosen,
        "series": r.series.map(|s| s.to_string()),
        "unit": r.unit,
        "error_pct": r.error_pct(),
    });
    if let Value::Object(map) = &mut v {
        if let Some(t) = r.retuned_target {
            map.insert("retuned_target".into(), json!(t));
        }
        if let Some(e) = r.end {
            map.insert("end".into(), json!(e));
        }
        if matches!(r.chosen, Chosen::Wire) {
            map.insert("wire".into(), json!(true));
        }
        if let Some(x) = &r.crystal {
            map.insert("crystal_id".into(), json!(x.id));
            map.insert("crystal".into(), super::crystal_json(x)?);
        }
        if let Some(n) = &r.note {
            map.insert("note".into(), json!(n));
        }
    }
    Ok(v)
}

/// The matching networks as JSON.
fn matching_json(m: &Matching) -> Result<Value> {
    let ends: Vec<Value> = m
        .ends
        .iter()
        .map(|e| {
            Ok(json!({
                "end": e.end,
                "termination_ohm": e.termination_ohm,
                "network": e.network.as_ref().map(to_json).transpose()?,
                "as_built": e.built.as_ref().map(to_json).transpose()?,
                "turns_ratio": e.turns_ratio,
            }))
        })
        .collect::<Result<_>>()?;
    Ok(json!({
        "system_ohm": m.system_ohm,
        "form": match m.form {
            MatchFormArg::Lowpass => "lowpass",
            MatchFormArg::Highpass => "highpass",
            MatchFormArg::Transformer => "transformer",
        },
        "f_hz": m.f_hz,
        "ends": ends,
    }))
}

/// The whole list as one JSON object.
pub fn parts_json(list: &PartsList) -> Result<Value> {
    let o = &list.options;
    let delta: serde_json::Map<String, Value> = comparison(&list.built.ideal, &list.built.built)
        .into_iter()
        .map(|c| (c.field.to_string(), json!(c.delta_value)))
        .collect();
    Ok(json!({
        "options": {
            "series": o.series.to_string(),
            "pairs": o.allow_pairs,
            "pair_gain": o.pair_gain,
            "retune": o.retune,
            "round_terminations": o.round_terminations,
        },
        "parts": list.rows.iter().map(row_json).collect::<Result<Vec<_>>>()?,
        "as_built": to_json(&list.built.built)?,
        "ideal": to_json(&list.built.ideal)?,
        "delta": delta,
        "matching": list.matching.as_ref().map(matching_json).transpose()?,
        "notes": list.notes,
    }))
}
