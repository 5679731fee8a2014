//! One document model for the results. The terminal report, the self-contained HTML report and
//! the page's summary table are renderings of the same [`Document`], so no shell words a
//! result on its own.
//!
//! The HTML is one file that opens from disk with no script: a Content-Security-Policy of
//! `default-src 'none'` with inline styles and `data:` images only (W3C CSP Level 3), figures
//! as base64 SVG images (RFC 4648), and print rules that fit A4 and US Letter.

use base64::Engine as _;
use serde::Serialize;
use std::fmt::Write;

/// What ringline is for, first in every report (the README's opening sentence).
pub const JOB: &str = "ringline measures how network-burst fronts travel along patterned neuronal cultures recorded with multi-electrode arrays or calcium imaging: it finds the bursts, times each front at every site, and reports its speed and direction along the track with honest uncertainty, with the culture's rhythm, synchrony and responses to stimulation.";

/// The caution every report carries.
pub const CAUTION: &str = "Research analysis software: not for clinical or diagnostic use. Recordings from animals follow your institution's rules.";

/// A report: a title and its sections, in reading order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Document {
    pub title: String,
    pub sections: Vec<Section>,
}

/// One headed part of a report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Section {
    pub heading: String,
    pub blocks: Vec<Block>,
}

/// The pieces a section is made of.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "block", rename_all = "snake_case")]
pub enum Block {
    Paragraph {
        text: String,
    },
    /// Labelled results, one line each ("Speed  median 21.3 mm/s (95% CI ...)").
    Facts {
        facts: Vec<Fact>,
    },
    Table(Table),
    /// A figure as SVG text, with the sentence that says what it shows.
    Figure {
        name: String,
        caption: String,
        svg: String,
    },
    /// A figure that could not be drawn for this recording, and why.
    MissingFigure {
        name: String,
        caption: String,
        reason: String,
    },
    Notices {
        items: Vec<String>,
    },
}

/// Which result a fact states (the page keys its summary rows by it).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FactKey {
    Recording,
    Track,
    Bursts,
    Interburst,
    Fronts,
    Leaders,
    Order,
    Recruitment,
    SiteTiming,
    Speed,
    Drift,
    Direction,
    Initiation,
    Failures,
    Rhythm,
    SitesAlone,
    SiteBursts,
    Synchrony,
    Lags,
    Stimuli,
}

/// One labelled result. `value` is the headline number of the fact (for the page's tests and
/// read-outs), in the unit the text gives.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Fact {
    pub key: FactKey,
    pub label: String,
    pub text: String,
    pub value: Option<f64>,
}

impl Fact {
    pub fn new(key: FactKey, label: &str, text: String, value: Option<f64>) -> Self {
        Fact {
            key,
            label: label.to_string(),
            text,
            value,
        }
    }
}

/// A table of text cells. `collapsed` tables are folded away in the HTML (a `<details>`
/// element, which needs no script) and printed open.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Table {
    pub caption: String,
    pub header: Vec<String>,
    pub rows: Vec<Vec<String>>,
    pub collapsed: bool,
}

/// Width of the label column in the text rendering.
const LABEL_WIDTH: usize = 15;

/// Facts as the terminal shows them: the label padded to 15 characters, then the text.
pub fn facts_text(facts: &[Fact]) -> String {
    let mut out = String::new();
    for f in facts {
        let _ = writeln!(out, "{:<LABEL_WIDTH$}{}", f.label, f.text);
    }
    out
}

/// Escapes text for HTML element content and quoted attributes: the SVG writer's escaping
/// (the five markup characters, and control characters as spaces), which HTML 5 reads alike.
pub fn escape_html(text: &str) -> String {
    super::svg::escape(text)
}

/// The report's style sheet: readable on screen, and printed on A4 or Letter (the narrower
/// Letter width, 215.9 mm less 2 x 15 mm margins, bounds every figure and table).
const STYLE: &str = "body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;color:#1a1a1a;max-width:62rem;margin:1.5rem auto;padding:0 1rem;line-height:1.45}
h1{font-size:1.5rem;margin-bottom:.25rem}h2{font-size:1.2rem;border-bottom:1px solid #bbb;margin-top:2rem}
p.caution{border-left:4px solid #b35900;padding:.3rem .7rem;background:#fff6ec}
table{border-collapse:collapse;margin:.5rem 0;font-size:.9rem}th,td{border:1px solid #ccc;padding:.15rem .45rem;text-align:left;vertical-align:top}
th{background:#f0f0f0}td.num{text-align:right;font-variant-numeric:tabular-nums}
table.facts th{background:none;font-weight:600;white-space:nowrap}
code,.digest{font-family:ui-monospace,Menlo,Consolas,monospace;font-size:.8rem;word-break:break-all}
figure{margin:1rem 0;break-inside:avoid}figure img{max-width:100%;height:auto;border:1px solid #ddd}
figcaption{font-size:.9rem;color:#333}
ul.notices li{margin:.2rem 0}
@page{margin:15mm}
@media print{body{max-width:none;margin:0;padding:0;font-size:10pt}h2{break-after:avoid}tr{break-inside:avoid}
figure img{max-width:185mm;max-height:120mm}details>summary{list-style:none}details::details-content{content-visibility:visible;display:block}a{color:inherit}}
";

impl Document {
    /// The plain-text rendering (the terminal report): headings underlined, facts in two
    /// columns, tables with aligned columns; figures are named, not drawn.
    pub fn to_text(&self) -> String {
        let mut out = String::new();
        for (i, section) in self.sections.iter().enumerate() {
            if i > 0 {
                out.push('\n');
            }
            if !section.heading.is_empty() {
                let _ = writeln!(out, "{}", section.heading);
            }
            for block in &section.blocks {
                match block {
                    Block::Paragraph { text } => {
                        let _ = writeln!(out, "{text}");
                    }
                    Block::Facts { facts } => out.push_str(&facts_text(facts)),
                    Block::Table(t) => out.push_str(&table_text(t)),
                    Block::Figure { name, caption, .. } => {
                        let _ = writeln!(out, "[figure {name}: {caption}]");
                    }
                    Block::MissingFigure { name, reason, .. } => {
                        let _ = writeln!(out, "[figure {name} not drawn: {reason}]");
                    }
                    Block::Notices { items } => {
                        for n in items {
                            let _ = writeln!(out, "- {n}");
                        }
                    }
                }
            }
        }
        out
    }

    /// The self-contained HTML rendering: no script, no request, every figure inline.
    pub fn to_html(&self) -> String {
        let mut out = String::with_capacity(1 << 16);
        out.push_str("<!doctype html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
        out.push_str("<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:\">\n");
        out.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
        let _ = writeln!(out, "<title>{}</title>", escape_html(&self.title));
        // An empty icon, so a browser opening the file asks for no favicon.
        out.push_str("<link rel=\"icon\" href=\"data:,\">\n");
        let _ = writeln!(out, "<style>\n{STYLE}</style>\n</head>\n<body>");
        let _ = writeln!(out, "<h1>{}</h1>", escape_html(&self.title));
        for section in &self.sections {
            let _ = writeln!(out, "<section>");
            if !section.heading.is_empty() {
                let _ = writeln!(out, "<h2>{}</h2>", escape_html(&section.heading));
            }
            for block in &section.blocks {
                block_html(block, &mut out);
            }
            let _ = writeln!(out, "</section>");
        }
        out.push_str("</body>\n</html>\n");
        out
    }
}

fn block_html(block: &Block, out: &mut String) {
    match block {
        Block::Paragraph { text } => {
            let class = if text == CAUTION {
                " class=\"caution\""
            } else {
                ""
            };
            let _ = writeln!(out, "<p{class}>{}</p>", escape_html(text));
        }
        Block::Facts { facts } => {
            out.push_str("<table class=\"facts\">\n");
            for f in facts {
                let _ = writeln!(
                    out,
                    "<tr><th scope=\"row\">{}</th><td>{}</td></tr>",
                    escape_html(&f.label),
                    escape_html(&f.text)
                );
            }
            out.push_str("</table>\n");
        }
        Block::Table(t) => table_html(t, out),
        Block::Figure { name, caption, svg } => {
            let data = base64::engine::general_purpose::STANDARD.encode(svg.as_bytes());
            let _ = writeln!(
                out,
                "<figure id=\"figure-{}\"><img alt=\"{}\" src=\"data:image/svg+xml;base64,{data}\"><figcaption>{}</figcaption></figure>",
                escape_html(name),
                escape_html(caption),
                escape_html(caption)
            );
        }
        Block::MissingFigure {
            name,
            caption,
            reason,
        } => {
            let _ = writeln!(
                out,
                "<p id=\"figure-{}\"><em>{}</em>: not drawn ({})</p>",
                escape_html(name),
                escape_html(caption),
                escape_html(reason)
            );
        }
        Block::Notices { items } => {
            out.push_str("<ul class=\"notices\">\n");
            for n in items {
                let _ = writeln!(out, "<li>{}</li>", escape_html(n));
            }
            out.push_str("</ul>\n");
        }
    }
}

/// A cell is right-aligned when it reads as a number.
fn is_numeric(cell: &str) -> bool {
    !cell.is_empty() && cell.trim().parse::<f64>().is_ok()
}

fn table_html(t: &Table, out: &mut String) {
    if t.collapsed {
        let _ = writeln!(
            out,
            "<details><summary>{} ({} rows)</summary>",
            escape_html(&t.caption),
            t.rows.len()
        );
        out.push_str("<table>\n");
    } else {
        let _ = writeln!(
            out,
            "<table>\n<caption>{}</caption>",
            escape_html(&t.caption)
        );
    }
    out.push_str("<thead><tr>");
    for h in &t.header {
        let _ = write!(out, "<th scope=\"col\">{}</th>", escape_html(h));
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    for row in &t.rows {
        out.push_str("<tr>");
        for cell in row {
            if is_numeric(cell) {
                let _ = write!(out, "<td class=\"num\">{}</td>", escape_html(cell));
            } else {
                let _ = write!(out, "<td>{}</td>", escape_html(cell));
            }
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody>\n</table>\n");
    if t.collapsed {
        out.push_str("</details>\n");
    }
}

/// A table as aligned text columns (widths in characters, numbers right-aligned).
pub fn table_text(t: &Table) -> String {
    let columns = t.header.len();
    let mut widths: Vec<usize> = t.header.iter().map(|h| h.chars().count()).collect();
    for row in &t.rows {
        for (w, cell) in widths.iter_mut().zip(row) {
            *w = (*w).max(cell.chars().count());
        }
    }
    let mut out = String::new();
    if !t.caption.is_empty() {
        let _ = writeln!(out, "{}", t.caption);
    }
    let line = |cells: &[String], out: &mut String| {
        let mut text = String::new();
        for (i, (cell, w)) in cells.iter().zip(&widths).enumerate().take(columns) {
            if i > 0 {
                text.push_str("  ");
            }
            if is_numeric(cell) {
                let _ = write!(text, "{cell:>w$}");
            } else {
                let _ = write!(text, "{cell:<w$}");
            }
        }
        let _ = writeln!(out, "{}", text.trim_end());
    };
    line(&t.header, &mut out);
    for row in &t.rows {
        line(row, &mut out);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn html_escapes_every_markup_character() {
        // The five characters HTML 5 gives meaning in text and attributes (WHATWG HTML,
        // "Serializing HTML fragments", escaping a string).
        assert_eq!(
            escape_html("<a href=\"x\">'&'</a>"),
            "&lt;a href=&quot;x&quot;&gt;&apos;&amp;&apos;&lt;/a&gt;"
        );
    }

    #[test]
    fn figures_are_base64_data() {
        // RFC 4648 section 10 test vector: "foobar" -> "Zm9vYmFy".
        let doc = Document {
            title: "t".into(),
            sections: vec![Section {
                heading: String::new(),
                blocks: vec![Block::Figure {
                    name: "n".into(),
                    caption: "c".into(),
                    svg: "foobar".into(),
                }],
            }],
        };
        assert!(doc
            .to_html()
            .contains("src=\"data:image/svg+xml;base64,Zm9vYmFy\""));
    }
}
