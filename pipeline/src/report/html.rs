//! The pieces every report page is made of: escaping, the page shell with its one inline
//! style sheet, tables, and inline SVG. Pages are plain HTML5 with no script, no external
//! file and no web font, so they open from the file system on any machine and can be
//! copied with the output folder.

use std::fmt::Write as _;

/// The style sheet of every page, inline. Colours follow the plots (`plot::INK`,
/// `plot::SERIES`); wide tables scroll inside their own box so that the page itself never
/// scrolls sideways on a phone.
const STYLE: &str = "
:root { --ink: #262a33; --muted: #5f6673; --rule: #d5d9df; --teal: #1f6e68; --brick: #a3472f; --paper: #fbfaf7; }
* { box-sizing: border-box; }
body { margin: 0; background: var(--paper); color: var(--ink);
  font: 15px/1.45 system-ui, -apple-system, 'Segoe UI', sans-serif; }
main { max-width: 1080px; margin: 0 auto; padding: 14px 16px 40px; }
header { border-bottom: 3px solid var(--teal); margin-bottom: 18px; padding-bottom: 8px; }
h1 { font-size: 1.45em; margin: 0.2em 0; overflow-wrap: anywhere; }
h2 { font-size: 1.15em; margin: 1.6em 0 0.5em; color: var(--teal); }
h3 { font-size: 1em; margin: 1em 0 0.3em; overflow-wrap: anywhere; }
p, li { overflow-wrap: anywhere; }
.meta { color: var(--muted); font-size: 0.9em; }
.summary { font-size: 1.1em; font-weight: 600; }
.scroll { overflow-x: auto; max-width: 100%; }
table { border-collapse: collapse; font-size: 0.88em; font-variant-numeric: tabular-nums; }
th, td { padding: 3px 9px; border-bottom: 1px solid var(--rule); text-align: right; white-space: nowrap; }
th { font-weight: 600; border-bottom: 2px solid var(--ink); }
td.text, th.text { text-align: left; }
tr.failed td { background: #f6e6e1; }
.badge { display: inline-block; padding: 0 7px; border-radius: 8px; font-size: 0.85em; color: #fff; }
.ok { background: var(--teal); } .failed { background: var(--brick); } .skipped { background: var(--muted); }
.problem { border-left: 4px solid var(--brick); background: #fff; margin: 8px 0; padding: 4px 10px; }
pre { white-space: pre-wrap; overflow-wrap: anywhere; font-size: 0.85em; margin: 4px 0; }
figure { margin: 10px 0; background: #fff; border: 1px solid var(--rule); padding: 4px; }
figure svg { display: block; width: 100%; height: auto; }
figcaption { color: var(--muted); font-size: 0.85em; padding: 2px 6px; }
a { color: var(--teal); }
";

/// Text with `&`, `<`, `>`, `"` and `'` escaped, for element content and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// A whole page: the shell around `body` (already HTML), titled `title` (text).
pub fn page(title: &str, body: &str) -> String {
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>{}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n<main>\n{body}</main>\n</body>\n</html>\n",
        escape(title)
    )
}

/// One cell of a table: its HTML and whether it is text (left-aligned) or a number.
pub enum Cell {
    /// Left-aligned; the string is HTML (escape text first).
    Text(String),
    /// Right-aligned; the string is HTML.
    Number(String),
}

impl Cell {
    /// A text cell from plain text (escaped here).
    pub fn text(s: &str) -> Cell {
        Cell::Text(escape(s))
    }
}

/// A table in a box that scrolls sideways on narrow screens; `row_class` gives each row's
/// class (empty for none).
pub fn table(headers: &[&str], rows: &[(String, Vec<Cell>)]) -> String {
    let mut out = String::from("<div class=\"scroll\"><table>\n<thead><tr>");
    let text_column: Vec<bool> = (0..headers.len())
        .map(|j| rows.first().is_some_and(|(_, r)| matches!(r.get(j), Some(Cell::Text(_)))))
        .collect();
    for (j, h) in headers.iter().enumerate() {
        let class = if text_column[j] { " class=\"text\"" } else { "" };
        let _ = write!(out, "<th{class}>{}</th>", escape(h));
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    for (class, cells) in rows {
        if class.is_empty() {
            out.push_str("<tr>");
        } else {
            let _ = write!(out, "<tr class=\"{}\">", escape(class));
        }
        for cell in cells {
            match cell {
                Cell::Text(h) => {
                    let _ = write!(out, "<td class=\"text\">{h}</td>");
                }
                Cell::Number(h) => {
                    let _ = write!(out, "<td>{h}</td>");
                }
            }
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody></table></div>\n");
    out
}

/// An SVG drawn by `plot` (its bytes), inline in a figure with its caption (text). The XML
/// prologue, if any, is dropped: inside HTML the `<svg>` element stands alone.
pub fn figure(svg: &[u8], caption: &str) -> String {
    let svg = String::from_utf8_lossy(svg);
    let start = svg.find("<svg").unwrap_or(0);
    format!(
        "<figure role=\"img\" aria-label=\"{0}\">\n{1}\n<figcaption>{0}</figcaption>\n</figure>\n",
        escape(caption),
        svg[start..].trim_end()
    )
}

/// A coloured badge: `kind` is `ok`, `failed` or `skipped` (its colour), `label` its text.
pub fn badge(kind: &str, label: &str) -> String {
    format!("<span class=\"badge {}\">{}</span>", escape(kind), escape(label))
}

/// A number with `digits` significant digits in plain notation, or an empty cell.
pub fn number(value: Option<f64>, digits: usize) -> String {
    match value {
        Some(v) if v.is_finite() => crate::plot::tick_label_digits(v, digits),
        _ => String::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_covers_markup_and_quotes() {
        // (text, escaped)
        let cases = [
            ("plain D01", "plain D01"),
            ("<script>", "&lt;script&gt;"),
            ("a & b", "a &amp; b"),
            ("\"x\" 'y'", "&quot;x&quot; &#39;y&#39;"),
        ];
        for (text, escaped) in cases {
            assert_eq!(escape(text), escaped);
        }
    }

    #[test]
    fn a_table_aligns_text_left_and_numbers_right() {
        let rows = vec![(String::from("failed"), vec![Cell::text("0101"), Cell::Number("1.5".into())])];
        let html = table(&["run", "charge (µC)"], &rows);
        assert!(html.contains("<th class=\"text\">run</th><th>charge (µC)</th>"), "{html}");
        assert!(html.contains("<tr class=\"failed\"><td class=\"text\">0101</td><td>1.5</td></tr>"), "{html}");
    }

    #[test]
    fn a_figure_drops_the_xml_prologue() {
        let html = figure(b"<?xml version=\"1.0\"?>\n<svg viewBox=\"0 0 1 1\"></svg>\n", "a <b> plot");
        assert!(html.contains("\n<svg viewBox"), "{html}");
        assert!(!html.contains("<?xml"), "{html}");
        assert!(html.contains("aria-label=\"a &lt;b&gt; plot\""), "{html}");
    }
}
