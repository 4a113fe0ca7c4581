//! A self-contained HTML page: inline CSS and inline SVG, no scripts, no external resources,
//! laid out for the screen and for printing on A4 or Letter.
//!
//! [`Page`] collects the blocks in order (header, key figures, sections with tables, figures,
//! paragraphs and lists) and [`Page::finish`] returns the document. Every piece of text goes
//! through [`escape`]; SVG from the plotting library is embedded as it is, without its XML
//! prolog and namespace attribute (inline SVG in HTML needs neither), and scales with the page.

use std::fmt::Write as _;

/// The page's style sheet: a plain single-column layout, tables with thin rules, figures that
/// keep together when printed.
const CSS: &str = r#"
:root { --ink: #1f2933; --muted: #52606d; --rule: #cbd2d9; --band: #f5f7fa; --accent: #0b6e75;
        --accent-soft: #e3f1ef; --warn: #b44d12; }
* { box-sizing: border-box; }
html { background: #fff; }
body { margin: 0 auto; max-width: 1040px; padding: 28px 36px 48px; color: var(--ink);
       font: 15px/1.45 "DejaVu Sans", "Segoe UI", Helvetica, Arial, sans-serif; }
header { border-bottom: 3px solid var(--accent); padding-bottom: 14px; margin-bottom: 18px; }
header h1 { font-size: 26px; margin: 0 0 4px; letter-spacing: 0.2px; }
header .subtitle { font-size: 16px; color: var(--muted); margin: 0 0 10px; }
header dl { display: grid; grid-template-columns: max-content 1fr; gap: 2px 14px; margin: 0;
            font-size: 13px; color: var(--muted); }
header dt { font-weight: 600; }
header dd { margin: 0; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(150px, 1fr)); gap: 10px;
         margin: 0 0 22px; }
.card { border: 1px solid var(--rule); border-left: 4px solid var(--accent); border-radius: 4px;
        padding: 8px 12px; background: var(--band); break-inside: avoid; }
.card .label { font-size: 12px; letter-spacing: 0.3px; color: var(--muted); }
.card .value { font-size: 21px; font-weight: 700; white-space: nowrap; }
.card .note { font-size: 12px; color: var(--muted); }
section { margin: 0 0 26px; }
h2 { font-size: 19px; margin: 0 0 10px; padding-bottom: 4px; border-bottom: 1px solid var(--rule);
     color: var(--accent); break-after: avoid; }
h3 { font-size: 15px; margin: 16px 0 6px; break-after: avoid; }
p { margin: 6px 0 10px; }
.muted { color: var(--muted); font-size: 13px; }
table { border-collapse: collapse; width: 100%; margin: 4px 0 12px; font-size: 13px; }
th, td { padding: 4px 8px; border-bottom: 1px solid var(--rule); text-align: left;
         vertical-align: top; }
th { background: var(--accent-soft); font-weight: 600; border-bottom: 2px solid var(--accent);
     white-space: nowrap; }
tbody tr:nth-child(even) td { background: var(--band); }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.key { font-weight: 600; white-space: nowrap; }
td.bad { color: var(--warn); font-weight: 600; }
tr { break-inside: avoid; }
figure { margin: 8px 0 18px; break-inside: avoid; text-align: center; }
figure svg { width: 100%; max-width: 820px; height: auto; }
figure.wide { position: relative; left: 50%; transform: translateX(-50%);
              width: calc(100vw - 60px); max-width: 1640px; }
figure.wide svg { max-width: 100%; }
td.val { white-space: nowrap; }
figcaption { font-size: 13px; color: var(--muted); margin-top: 2px; }
.pair { display: grid; grid-template-columns: 1fr 1fr; gap: 14px; }
.pair figure svg { max-width: 100%; }
ul { margin: 4px 0 12px; padding-left: 22px; }
li { margin: 2px 0; }
footer { margin-top: 30px; border-top: 1px solid var(--rule); padding-top: 8px; font-size: 12px;
         color: var(--muted); }
@media (max-width: 760px) { .pair { grid-template-columns: 1fr; } body { padding: 16px; } }
@page { size: A4; margin: 14mm 12mm; }
@page landscape { size: A4 landscape; margin: 14mm 12mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 11pt; }
  .pair { grid-template-columns: 1fr 1fr; }
  figure.wide { position: static; transform: none; width: 100%; max-width: none; }
  section.landscape { page: landscape; }
  section { break-inside: auto; }
  h2 { break-before: auto; }
  a { color: inherit; text-decoration: none; }
}
"#;

/// Escape text for HTML character data and attribute values.
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '&' => out.push_str("&amp;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// SVG ready to inline: from the `<svg` tag on, without the namespace attribute.
pub fn inline_svg(svg: &str) -> String {
    let start = svg.find("<svg").unwrap_or(0);
    let body = svg.get(start..).unwrap_or(svg);
    body.replacen(r#" xmlns="http://www.w3.org/2000/svg""#, "", 1)
}

/// A table cell.
#[derive(Debug, Clone, PartialEq)]
pub struct Cell {
    /// The text.
    pub text: String,
    /// Extra CSS class (`num` for right-aligned numbers, `key`, `bad`).
    pub class: &'static str,
}

impl Cell {
    /// A text cell.
    pub fn text(t: impl Into<String>) -> Self {
        Cell {
            text: t.into(),
            class: "",
        }
    }

    /// A right-aligned number.
    pub fn num(t: impl Into<String>) -> Self {
        Cell {
            text: t.into(),
            class: "num",
        }
    }

    /// A row label.
    pub fn key(t: impl Into<String>) -> Self {
        Cell {
            text: t.into(),
            class: "key",
        }
    }

    /// A value that should not wrap (a part value).
    pub fn value(t: impl Into<String>) -> Self {
        Cell {
            text: t.into(),
            class: "val",
        }
    }

    /// A value that breaks a limit.
    pub fn bad(t: impl Into<String>) -> Self {
        Cell {
            text: t.into(),
            class: "bad",
        }
    }
}

/// A table: a header row and rows of cells; `numeric[k]` right-aligns header cell k.
#[derive(Debug, Clone, Default)]
pub struct Table {
    /// Column headings.
    pub header: Vec<String>,
    /// Which headings sit over numbers.
    pub numeric: Vec<bool>,
    /// The rows.
    pub rows: Vec<Vec<Cell>>,
}

impl Table {
    /// A table with these headings (a heading ending in `#` is numeric; the `#` is dropped);
    /// no headings, no heading row.
    pub fn new(header: &[&str]) -> Self {
        Table {
            header: header
                .iter()
                .map(|h| h.trim_end_matches('#').to_string())
                .collect(),
            numeric: header.iter().map(|h| h.ends_with('#')).collect(),
            rows: Vec::new(),
        }
    }

    /// Append a row.
    pub fn row(&mut self, cells: Vec<Cell>) {
        self.rows.push(cells);
    }
}

/// The page under construction.
#[derive(Debug, Clone)]
pub struct Page {
    title: String,
    body: String,
    in_section: bool,
}

impl Page {
    /// An empty page whose `<title>` is `title`.
    pub fn new(title: &str) -> Self {
        Page {
            title: title.to_string(),
            body: String::new(),
            in_section: false,
        }
    }

    /// The header: a heading, a subtitle and a list of (term, description).
    pub fn header(&mut self, heading: &str, subtitle: &str, meta: &[(&str, String)]) {
        let _ = write!(
            self.body,
            "<header>\n<h1>{}</h1>\n<p class=\"subtitle\">{}</p>\n<dl>\n",
            escape(heading),
            escape(subtitle)
        );
        for (t, d) in meta {
            let _ = writeln!(self.body, "<dt>{}</dt><dd>{}</dd>", escape(t), escape(d));
        }
        self.body.push_str("</dl>\n</header>\n");
    }

    /// A row of key figures: (label, value, note).
    pub fn cards(&mut self, cards: &[(&str, String, String)]) {
        self.body.push_str("<div class=\"cards\">\n");
        for (label, value, note) in cards {
            let _ = writeln!(
                self.body,
                "<div class=\"card\"><div class=\"label\">{}</div><div class=\"value\">{}</div>\
                 <div class=\"note\">{}</div></div>",
                escape(label),
                escape(value),
                escape(note)
            );
        }
        self.body.push_str("</div>\n");
    }

    fn close_section(&mut self) {
        if self.in_section {
            self.body.push_str("</section>\n");
            self.in_section = false;
        }
    }

    /// Start a new section with a heading (closing the previous one).
    pub fn section(&mut self, id: &str, heading: &str) {
        self.open_section(id, heading, "");
    }

    /// Start a new section printed on a landscape page (for a wide schematic).
    pub fn landscape_section(&mut self, id: &str, heading: &str) {
        self.open_section(id, heading, " class=\"landscape\"");
    }

    fn open_section(&mut self, id: &str, heading: &str, class: &str) {
        self.close_section();
        let _ = writeln!(
            self.body,
            "<section id=\"{}\"{class}>\n<h2>{}</h2>",
            escape(id),
            escape(heading)
        );
        self.in_section = true;
    }

    /// A sub-heading inside the current section.
    pub fn subheading(&mut self, text: &str) {
        let _ = writeln!(self.body, "<h3>{}</h3>", escape(text));
    }

    /// A paragraph.
    pub fn paragraph(&mut self, text: &str) {
        let _ = writeln!(self.body, "<p>{}</p>", escape(text));
    }

    /// A paragraph in small grey type.
    pub fn note(&mut self, text: &str) {
        let _ = writeln!(self.body, "<p class=\"muted\">{}</p>", escape(text));
    }

    /// A bulleted list.
    pub fn list(&mut self, items: &[String]) {
        self.body.push_str("<ul>\n");
        for i in items {
            let _ = writeln!(self.body, "<li>{}</li>", escape(i));
        }
        self.body.push_str("</ul>\n");
    }

    /// A table.
    pub fn table(&mut self, t: &Table) {
        self.body.push_str("<table>\n");
        if !t.header.is_empty() {
            self.body.push_str("<thead><tr>");
            for (k, h) in t.header.iter().enumerate() {
                let class = if t.numeric.get(k).copied().unwrap_or(false) {
                    " class=\"num\""
                } else {
                    ""
                };
                let _ = write!(self.body, "<th{class}>{}</th>", escape(h));
            }
            self.body.push_str("</tr></thead>\n");
        }
        self.body.push_str("<tbody>\n");
        for r in &t.rows {
            self.body.push_str("<tr>");
            for c in r {
                if c.class.is_empty() {
                    let _ = write!(self.body, "<td>{}</td>", escape(&c.text));
                } else {
                    let _ = write!(
                        self.body,
                        "<td class=\"{}\">{}</td>",
                        c.class,
                        escape(&c.text)
                    );
                }
            }
            self.body.push_str("</tr>\n");
        }
        self.body.push_str("</tbody>\n</table>\n");
    }

    /// A figure: inline SVG with a caption. `wide` lets it use the full page width.
    pub fn figure(&mut self, svg: &str, caption: &str, wide: bool) {
        let class = if wide { " class=\"wide\"" } else { "" };
        let _ = writeln!(
            self.body,
            "<figure{class}>\n{}\n<figcaption>{}</figcaption>\n</figure>",
            inline_svg(svg),
            escape(caption)
        );
    }

    /// Two figures side by side (stacked on narrow screens).
    pub fn figure_pair(&mut self, a: (&str, &str), b: (&str, &str)) {
        self.body.push_str("<div class=\"pair\">\n");
        for (svg, caption) in [a, b] {
            let _ = writeln!(
                self.body,
                "<figure>\n{}\n<figcaption>{}</figcaption>\n</figure>",
                inline_svg(svg),
                escape(caption)
            );
        }
        self.body.push_str("</div>\n");
    }

    /// The finished document, with `footer` as its last line.
    pub fn finish(mut self, footer: &str) -> String {
        self.close_section();
        format!(
            "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
             <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
             <title>{}</title>\n<style>{CSS}</style>\n</head>\n<body>\n{}<footer>{}</footer>\n\
             </body>\n</html>\n",
            escape(&self.title),
            self.body,
            escape(footer)
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn text_is_escaped_and_svg_is_inlined() {
        let mut p = Page::new("a <b> & \"c\"");
        p.section("s", "x < y");
        p.paragraph("1 & 2");
        let mut t = Table::new(&["name", "value#"]);
        t.row(vec![Cell::key("<r>"), Cell::num("5 %")]);
        p.table(&t);
        p.figure(
            "<?xml version=\"1.0\"?>\n<svg width=\"10\" height=\"10\" viewBox=\"0 0 10 10\" \
             xmlns=\"http://www.w3.org/2000/svg\"><rect/></svg>",
            "fig",
            false,
        );
        let html = p.finish("end");
        assert!(html.starts_with("<!DOCTYPE html>"));
        assert!(html.contains("<title>a &lt;b&gt; &amp; &quot;c&quot;</title>"));
        assert!(html.contains("<h2>x &lt; y</h2>"));
        assert!(html.contains("<td class=\"key\">&lt;r&gt;</td><td class=\"num\">5 %</td>"));
        assert!(html.contains("<th class=\"num\">value</th>"));
        assert!(html.contains("<svg width=\"10\" height=\"10\" viewBox=\"0 0 10 10\"><rect/>"));
        assert!(!html.contains("<?xml") && !html.contains("http"));
        assert_eq!(
            html.matches("<section").count(),
            html.matches("</section>").count()
        );
    }
}
