//! The ladder drawn as a schematic from SVG primitives (no plotting library).
//!
//! ```text
//! Rs ─[Cs1]─X1─┬─[Cs2]─X2─┬─ … ─┬─[Csn]─Xn─┬
//!              C12        C23       C(n-1,n)  RL
//!              ⏚          ⏚         ⏚         ⏚
//! ```
//!
//! A generator with its source resistance Rs on the left, then for each position i the series
//! capacitor Cs_i (or a plain wire when there is none) and crystal X_i, a shunt capacitor to
//! ground at the node after every crystal but the last, and the load RL to ground at the end.
//! Each part carries its reference designator and value. Symbols follow IEC 60617 in shape
//! (rectangle resistor, two-plate capacitor, crystal as an electrode block between two plates).

use std::fmt::Write as _;

/// The text beside each part of [`schematic_svg`]. Missing entries are drawn without a value.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct SchematicLabels {
    /// Value of the source resistance, e.g. "200 Ω".
    pub source: String,
    /// Value of the load resistance.
    pub load: String,
    /// Value of each series capacitor in signal order; `None` means no capacitor (a wire).
    pub series: Vec<Option<String>>,
    /// Value or name of each crystal in signal order, e.g. "9.000 MHz" or "X-07".
    pub crystals: Vec<String>,
    /// Value of each shunt capacitor; entry i sits at the node after crystal i + 1.
    pub shunt: Vec<String>,
}

const INK: &str = "#1f2933";
const TEAL: &str = "#0b6e75";
const FILL: &str = "#e3f1ef";
const FONT_PX: f64 = 14.0;
/// Average advance of a character, as a fraction of the font size (a generous estimate for
/// proportional sans-serif text, so labels do not collide).
const CHAR_EM: f64 = 0.62;

const RAIL_Y: f64 = 95.0;
const SHUNT_Y: f64 = 165.0;
const GROUND_Y: f64 = 225.0;
const HEIGHT: f64 = 262.0;

/// Escape text for SVG character data and attribute values.
fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '&' => out.push_str("&amp;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c if c.is_control() => {}
            c => out.push(c),
        }
    }
    out
}

fn text_width(s: &str) -> f64 {
    s.chars().count() as f64 * FONT_PX * CHAR_EM
}

/// An SVG document under construction.
struct Doc {
    body: String,
}

impl Doc {
    fn line(&mut self, x1: f64, y1: f64, x2: f64, y2: f64) {
        let _ = writeln!(
            self.body,
            r#"<line x1="{x1:.1}" y1="{y1:.1}" x2="{x2:.1}" y2="{y2:.1}"/>"#
        );
    }

    fn rect(&mut self, x: f64, y: f64, w: f64, h: f64, fill: &str) {
        let _ = writeln!(
            self.body,
            r#"<rect x="{x:.1}" y="{y:.1}" width="{w:.1}" height="{h:.1}" fill="{fill}"/>"#
        );
    }

    fn dot(&mut self, x: f64, y: f64) {
        let _ = writeln!(
            self.body,
            r#"<circle cx="{x:.1}" cy="{y:.1}" r="3.5" fill="{INK}"/>"#
        );
    }

    /// Text anchored at `anchor` ("start", "middle", "end"), baseline at `y`.
    fn text(&mut self, x: f64, y: f64, anchor: &str, bold: bool, color: &str, s: &str) {
        if s.is_empty() {
            return;
        }
        let weight = if bold { r#" font-weight="bold""# } else { "" };
        let _ = writeln!(
            self.body,
            r#"<text x="{x:.1}" y="{y:.1}" text-anchor="{anchor}" fill="{color}" stroke="none"{weight}>{}</text>"#,
            escape(s)
        );
    }

    /// Designator above value, centred on `x`, the value's baseline at `y`.
    fn label_above(&mut self, x: f64, y: f64, designator: &str, value: &str) {
        self.text(x, y - FONT_PX * 1.25, "middle", true, INK, designator);
        self.text(x, y, "middle", false, TEAL, value);
    }

    /// Designator and value stacked left-aligned at `x`, centred on `y`.
    fn label_beside(&mut self, x: f64, y: f64, designator: &str, value: &str) {
        self.text(x, y - 2.0, "start", true, INK, designator);
        self.text(x, y + FONT_PX + 1.0, "start", false, TEAL, value);
    }

    /// A ground symbol hanging from (`x`, `y`).
    fn ground(&mut self, x: f64, y: f64) {
        self.line(x, y, x, y + 8.0);
        for (k, half) in [12.0, 8.0, 4.0].iter().enumerate() {
            let yy = y + 8.0 + 5.0 * k as f64;
            self.line(x - half, yy, x + half, yy);
        }
    }

    /// A horizontal resistor centred on `x` on the rail.
    fn resistor_h(&mut self, x: f64, y: f64) {
        self.line(x - 30.0, y, x - 22.0, y);
        self.rect(x - 22.0, y - 8.0, 44.0, 16.0, "white");
        self.line(x + 22.0, y, x + 30.0, y);
    }

    /// A vertical resistor from (`x`, `y0`) down to (`x`, `y1`).
    fn resistor_v(&mut self, x: f64, y0: f64, y1: f64) {
        let mid = 0.5 * (y0 + y1);
        self.line(x, y0, x, mid - 22.0);
        self.rect(x - 8.0, mid - 22.0, 16.0, 44.0, "white");
        self.line(x, mid + 22.0, x, y1);
    }

    /// A series capacitor centred on `x`, between wires from `x0` to `x1`.
    fn capacitor_h(&mut self, x0: f64, x: f64, x1: f64, y: f64) {
        self.line(x0, y, x - 4.0, y);
        self.line(x - 4.0, y - 15.0, x - 4.0, y + 15.0);
        self.line(x + 4.0, y - 15.0, x + 4.0, y + 15.0);
        self.line(x + 4.0, y, x1, y);
    }

    /// A shunt capacitor at `x`, plates centred on `y`, wires from `y0` to `y1`.
    fn capacitor_v(&mut self, x: f64, y0: f64, y: f64, y1: f64) {
        self.line(x, y0, x, y - 4.0);
        self.line(x - 15.0, y - 4.0, x + 15.0, y - 4.0);
        self.line(x - 15.0, y + 4.0, x + 15.0, y + 4.0);
        self.line(x, y + 4.0, x, y1);
    }

    /// A crystal centred on `x`, between wires from `x0` to `x1`.
    fn crystal(&mut self, x0: f64, x: f64, x1: f64, y: f64) {
        self.line(x0, y, x - 12.0, y);
        self.line(x - 12.0, y - 16.0, x - 12.0, y + 16.0);
        self.rect(x - 7.0, y - 13.0, 14.0, 26.0, FILL);
        self.line(x + 12.0, y - 16.0, x + 12.0, y + 16.0);
        self.line(x + 12.0, y, x1, y);
    }

    /// A generator (circle with a sine) centred on (`x`, `y`).
    fn generator(&mut self, x: f64, y: f64) {
        let _ = writeln!(
            self.body,
            r#"<circle cx="{x:.1}" cy="{y:.1}" r="16" fill="white"/>"#
        );
        let _ = writeln!(
            self.body,
            r#"<path d="M {:.1} {y:.1} q 4.5 -10 9 0 t 9 0" fill="none"/>"#,
            x - 9.0
        );
    }
}

/// The designator of the shunt capacitor between positions `i` and `i + 1`: "C12", or
/// "C9,10" once an index has two digits.
fn shunt_designator(i: usize) -> String {
    if i + 1 >= 10 {
        format!("C{i},{}", i + 1)
    } else {
        format!("C{i}{}", i + 1)
    }
}

/// The ladder of `n_crystals` crystals as an SVG schematic: Rs, then per position the series
/// capacitor (or a wire, see [`SchematicLabels::series`]) and the crystal, a shunt capacitor to
/// ground at each inner node, and RL to ground. Each part is labelled with its reference
/// designator (Rs, Cs1, X1, C12, …, RL) and the value from `labels`; missing labels leave the
/// value blank. The width grows with `n_crystals` and the label lengths.
pub fn schematic_svg(n_crystals: usize, labels: &SchematicLabels) -> String {
    let mut d = Doc {
        body: String::new(),
    };
    let value = |v: Option<&String>| v.map_or("", |s| s.as_str()).to_string();
    // Generator and source resistance.
    let gx = 40.0;
    d.generator(gx, SHUNT_Y);
    d.line(gx, RAIL_Y, gx, SHUNT_Y - 16.0);
    d.line(gx, SHUNT_Y + 16.0, gx, GROUND_Y);
    d.ground(gx, GROUND_Y);
    let rs_w = (text_width(&labels.source) + 16.0).max(80.0);
    let rs_x = gx + 10.0 + rs_w / 2.0;
    d.line(gx, RAIL_Y, rs_x - 30.0, RAIL_Y);
    d.resistor_h(rs_x, RAIL_Y);
    d.label_above(rs_x, RAIL_Y - 22.0, "Rs", &labels.source);
    let mut x = rs_x + 30.0;
    let mut next_node = 0.0f64;
    for i in 1..=n_crystals {
        // Series capacitor (or wire).
        let cs = labels.series.get(i - 1).cloned().flatten();
        let cs_w = cs
            .as_deref()
            .map_or(40.0, |v| (text_width(v) + 16.0).max(70.0));
        let cx = x + cs_w / 2.0;
        match cs.as_deref() {
            Some(v) => {
                d.capacitor_h(x, cx, x + cs_w, RAIL_Y);
                d.label_above(cx, RAIL_Y - 24.0, &format!("Cs{i}"), v);
            }
            None => d.line(x, RAIL_Y, x + cs_w, RAIL_Y),
        }
        x += cs_w;
        // Crystal.
        let xl = value(labels.crystals.get(i - 1));
        let x_w = (text_width(&xl) + 16.0).max(80.0);
        let xx = x + x_w / 2.0;
        d.crystal(x, xx, x + x_w, RAIL_Y);
        d.label_above(xx, RAIL_Y - 24.0, &format!("X{i}"), &xl);
        x += x_w;
        // The node after the crystal: a shunt capacitor except after the last.
        if i < n_crystals {
            let sl = value(labels.shunt.get(i - 1));
            let des = shunt_designator(i);
            let node = (x + 10.0).max(next_node);
            d.line(x, RAIL_Y, node, RAIL_Y);
            d.dot(node, RAIL_Y);
            d.capacitor_v(node, RAIL_Y, SHUNT_Y, GROUND_Y);
            d.ground(node, GROUND_Y);
            d.label_beside(node + 22.0, SHUNT_Y - 6.0, &des, &sl);
            // The next node keeps clear of this label.
            next_node = node + 22.0 + text_width(&sl).max(text_width(&des)) + 24.0;
            d.line(node, RAIL_Y, node + 10.0, RAIL_Y);
            x = node + 10.0;
        }
    }
    // Load resistance to ground.
    let node = (x + 30.0).max(next_node);
    d.line(x, RAIL_Y, node, RAIL_Y);
    x = node;
    d.dot(x, RAIL_Y);
    d.resistor_v(x, RAIL_Y, GROUND_Y);
    d.ground(x, GROUND_Y);
    d.label_beside(x + 16.0, SHUNT_Y - 6.0, "RL", &labels.load);
    let width = x + 24.0 + text_width(&labels.load).max(text_width("RL")) + 16.0;
    let mut out = String::new();
    let _ = writeln!(
        out,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w:.0}" height="{h:.0}" viewBox="0 0 {w:.0} {h:.0}">"#,
        w = width.ceil(),
        h = HEIGHT
    );
    let _ = writeln!(
        out,
        r#"<rect x="0" y="0" width="{:.0}" height="{HEIGHT:.0}" fill="white"/>"#,
        width.ceil()
    );
    let _ = writeln!(
        out,
        r#"<g stroke="{INK}" stroke-width="2" stroke-linecap="round" font-family="sans-serif" font-size="{FONT_PX}">"#
    );
    out.push_str(&d.body);
    out.push_str("</g>\n</svg>\n");
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shunt_designators_stay_unambiguous_past_nine() {
        assert_eq!(shunt_designator(1), "C12");
        assert_eq!(shunt_designator(8), "C89");
        assert_eq!(shunt_designator(9), "C9,10");
        assert_eq!(shunt_designator(10), "C10,11");
    }

    #[test]
    fn text_is_escaped() {
        assert_eq!(escape("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
    }
}
