//! The page every report folder shares (`simulate`, `sweep`, `merge` and `design` with
//! `--report DIR`): one self-contained `report.html` (styles inline, figures inline as
//! SVG, no script, no network, no reference to any other file, every piece of text
//! escaped, a print style sheet for A4) beside each figure as SVG and PNG.
//!
//! A [`Page`] is written as it goes: the HTML built so far goes to the file before each
//! figure, and each figure is drawn once into its own `.svg` file and, at the same time,
//! inline into the page, then once more as its `.png`, band by band. So a report holds
//! one figure's drawing data and a band of pixels at a time, never the figures together.
//!
//! The blocks every report uses live here once: the header, tables, label–value lists,
//! the caution box, figures with their captions and the provenance list.

use crate::report::figures::{escape, FigureError, FigureMeta, Plot};
use crate::report::ReportError;
use std::fmt::Write as _;
use std::io::Write;
use std::path::{Path, PathBuf};

/// Name of the HTML file in a report folder.
pub const HTML_FILE: &str = "report.html";

/// The house style of every report page (screen and print).
const STYLE: &str = "
:root { --ink: #242c33; --muted: #5f6a73; --rule: #c9d1d7; --pale: #f3f5f6; --teal: #175a73;
  --crimson: #8c1c2e; }
* { box-sizing: border-box; }
body { font-family: 'DejaVu Sans', 'Helvetica Neue', Arial, sans-serif; color: var(--ink);
  margin: 0 auto; max-width: 1160px; padding: 24px 28px 48px; line-height: 1.45;
  font-size: 15px; background: #fff; }
header { border-bottom: 3px solid var(--teal); margin-bottom: 18px; padding-bottom: 10px; }
h1 { font-size: 26px; margin: 0 0 4px; }
h2 { font-size: 20px; margin: 30px 0 10px; border-bottom: 1px solid var(--rule);
  padding-bottom: 4px; }
h3 { font-size: 16px; margin: 18px 0 6px; }
.sub { color: var(--muted); margin: 2px 0; }
ol.findings { padding-left: 0; list-style: none; counter-reset: f; }
ol.findings li { counter-increment: f; margin: 0 0 10px; padding: 8px 12px 8px 14px;
  border-left: 5px solid var(--rule); background: var(--pale); }
ol.findings li::before { content: counter(f) '. '; font-weight: bold; }
ol.findings li.critical { border-left: 5px solid var(--crimson); }
ol.findings li.warning { border-left: 5px dashed var(--crimson); }
ol.findings li.note { border-left: 5px solid var(--teal); }
.sev { font-weight: bold; text-transform: uppercase; font-size: 12px; letter-spacing: 0.05em;
  margin-right: 6px; }
.advice { display: block; margin-top: 4px; }
.lead { border-left: 5px solid var(--teal); background: var(--pale); padding: 10px 14px;
  margin: 10px 0 14px; }
.lead p { margin: 0 0 8px; }
.lead p:last-child { margin-bottom: 0; }
.lead p:first-child { font-size: 16.5px; font-weight: 600; }
pre.keys { background: var(--pale); padding: 8px 12px; font-size: 13px; margin: 6px 0 12px;
  white-space: pre-wrap; }
.caution { border: 2px solid var(--ink); padding: 10px 14px; margin: 16px 0;
  font-weight: 500; }
.caution p { margin: 0 0 6px; }
.caution p:last-child { margin-bottom: 0; }
figure { margin: 18px 0 26px; break-inside: avoid; page-break-inside: avoid; }
figure svg { width: 100%; height: auto; display: block; border: 1px solid var(--rule); }
figcaption { color: var(--muted); font-size: 13.5px; margin-top: 6px; }
.files { color: var(--muted); font-size: 12.5px; }
.aside { color: var(--muted); font-size: 13.5px; }
.scroll { overflow-x: auto; }
table { border-collapse: collapse; margin: 8px 0 16px; font-size: 13.5px; }
th, td { border-bottom: 1px solid var(--rule); padding: 4px 10px 4px 0; text-align: right;
  vertical-align: top; }
th { border-bottom: 2px solid var(--ink); font-weight: 600; }
th.l, td.l { text-align: left; padding-left: 6px; }
tr.mark td { font-weight: 600; }
dl.kv { display: grid; grid-template-columns: 230px 1fr; gap: 3px 14px; margin: 8px 0 14px; }
dl.kv dt { color: var(--muted); }
dl.kv dd { margin: 0; }
code { font-family: 'DejaVu Sans Mono', monospace; font-size: 13px; }
@page { size: A4; margin: 15mm 13mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10pt; }
  h2 { break-after: avoid; page-break-after: avoid; }
  h3 { break-after: avoid; }
  table, dl.kv, ol.findings li, .lead, .caution { break-inside: avoid; page-break-inside: avoid; }
  ol.findings li, .lead { background: none; }
  figure svg { border: none; }
  .figures { break-before: page; }
  .scroll { overflow: visible; }
  table { font-size: 8.5pt; }
}
";

/// A report page being written to `report.html` in a folder, with its figures beside it.
pub struct Page<'w> {
    out: &'w mut dyn Write,
    dir: &'w Path,
    /// HTML built and not yet written (flushed before each figure and at the end).
    h: String,
    files: Vec<PathBuf>,
}

impl<'w> Page<'w> {
    /// Starts a page: the document head with the style sheet, and the header with the
    /// title and one line under it per `subtitles` entry.
    pub fn begin(
        out: &'w mut dyn Write,
        dir: &'w Path,
        title: &str,
        subtitles: &[String],
    ) -> Page<'w> {
        let mut h = String::with_capacity(16 * 1024);
        let _ = write!(
            h,
            "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
             <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
             <title>{}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n<header>\n\
             <h1>{}</h1>\n",
            escape(title),
            escape(title)
        );
        for s in subtitles {
            let _ = writeln!(h, "<p class=\"sub\">{}</p>", escape(s));
        }
        h.push_str("</header>\n");
        Page {
            out,
            dir,
            h,
            files: Vec::new(),
        }
    }

    /// The HTML being built, to append a section to.
    pub fn html(&mut self) -> &mut String {
        &mut self.h
    }

    /// Writes what is built so far to the file.
    fn flush(&mut self) -> Result<(), ReportError> {
        self.out.write_all(self.h.as_bytes())?;
        self.h.clear();
        Ok(())
    }

    /// Draws one figure: `NAME.svg` and `NAME.png` in the folder and the figure inline,
    /// with its title and caption. Returns what it plotted.
    pub fn figure(
        &mut self,
        plot: Result<Plot<'_>, FigureError>,
    ) -> Result<FigureMeta, ReportError> {
        let plot = plot?;
        let _ = write!(
            self.h,
            "<figure id=\"fig-{}\">\n<h3>{}</h3>\n",
            escape(&plot.name),
            escape(&plot.title)
        );
        self.flush()?;
        let (meta, paths) = plot.write_files(self.dir, Some(&mut *self.out))?;
        self.files.extend(paths);
        let _ = write!(
            self.h,
            "\n<figcaption>{} <span class=\"files\">(also {}.svg and {}.png in this folder)\
             </span></figcaption>\n</figure>\n",
            escape(&plot.caption),
            escape(&plot.name),
            escape(&plot.name)
        );
        Ok(meta)
    }

    /// Ends the page and returns the files written (the figures', then the page's own).
    pub fn finish(mut self, html_path: PathBuf) -> Result<Vec<PathBuf>, ReportError> {
        self.h.push_str("</body>\n</html>\n");
        self.flush()?;
        self.out.flush()?;
        self.files.push(html_path);
        Ok(self.files)
    }
}

/// Writes a report folder: creates `dir` if needed, opens [`HTML_FILE`] in it, starts
/// the page and lets `body` fill it. Returns the files written.
pub fn write_report_dir(
    dir: &Path,
    title: &str,
    subtitles: &[String],
    body: impl FnOnce(&mut Page<'_>) -> Result<(), ReportError>,
) -> Result<Vec<PathBuf>, ReportError> {
    std::fs::create_dir_all(dir)?;
    let path = dir.join(HTML_FILE);
    let mut out = std::io::BufWriter::new(std::fs::File::create(&path)?);
    let mut page = Page::begin(&mut out, dir, title, subtitles);
    body(&mut page)?;
    page.finish(path)
}

/// Opens a section with its heading.
pub fn section(h: &mut String, id: &str, heading: &str) {
    let _ = writeln!(
        h,
        "<section id=\"{}\">\n<h2>{}</h2>",
        escape(id),
        escape(heading)
    );
}

/// Closes a section.
pub fn end_section(h: &mut String) {
    h.push_str("</section>\n");
}

/// Appends a paragraph of text, with an optional class.
pub fn para(h: &mut String, class: Option<&str>, text: &str) {
    match class {
        Some(c) => {
            let _ = writeln!(h, "<p class=\"{}\">{}</p>", escape(c), escape(text));
        }
        None => {
            let _ = writeln!(h, "<p>{}</p>", escape(text));
        }
    }
}

/// Appends a table: header cells and rows; `align` one letter per column (`l` left, any
/// other letter right). Rows whose index is in `marked` are set in bold. A table wider
/// than the page scrolls on screen.
pub fn table(h: &mut String, headers: &[&str], align: &str, rows: &[Vec<String>]) {
    table_marked(h, headers, align, rows, &[]);
}

/// [`table`] with some rows set in bold.
pub fn table_marked(
    h: &mut String,
    headers: &[&str],
    align: &str,
    rows: &[Vec<String>],
    marked: &[usize],
) {
    let cls = |i: usize| {
        if align.as_bytes().get(i) == Some(&b'l') {
            " class=\"l\""
        } else {
            ""
        }
    };
    h.push_str("<div class=\"scroll\"><table>\n<thead><tr>");
    for (i, c) in headers.iter().enumerate() {
        // A dotted key may break after each dot, underscore or slash.
        let _ = write!(
            h,
            "<th{}>{}</th>",
            cls(i),
            escape(c)
                .replace('.', ".\u{200b}")
                .replace('_', "_\u{200b}")
                .replace('/', "/\u{200b}")
        );
    }
    h.push_str("</tr></thead>\n<tbody>\n");
    for (n, r) in rows.iter().enumerate() {
        if marked.contains(&n) {
            h.push_str("<tr class=\"mark\">");
        } else {
            h.push_str("<tr>");
        }
        for (i, c) in r.iter().enumerate() {
            let _ = write!(h, "<td{}>{}</td>", cls(i), escape(&bind_units(c)));
        }
        h.push_str("</tr>\n");
    }
    h.push_str("</tbody>\n</table></div>\n");
}

/// The text with each space between a digit and a word or `%` made a no-break space, so
/// that a number stays on one line with its unit or quadrant (`0.95 lag`, `12 %`).
pub fn bind_units(text: &str) -> String {
    let chars: Vec<char> = text.chars().collect();
    let mut out = String::with_capacity(text.len() + 8);
    for (i, &c) in chars.iter().enumerate() {
        let joins = c == ' '
            && i > 0
            && chars[i - 1].is_ascii_digit()
            && chars
                .get(i + 1)
                .is_some_and(|n| n.is_alphabetic() || *n == '%');
        out.push(if joins { '\u{a0}' } else { c });
    }
    out
}

/// Appends a list of label and value pairs.
pub fn pairs(h: &mut String, items: &[(&str, String)]) {
    h.push_str("<dl class=\"kv\">\n");
    for (k, v) in items {
        let _ = writeln!(h, "<dt>{}</dt><dd>{}</dd>", escape(k), escape(v));
    }
    h.push_str("</dl>\n");
}

/// Appends the caution box: one paragraph per text.
pub fn caution(h: &mut String, texts: &[&str]) {
    h.push_str("<div class=\"caution\">\n");
    for t in texts {
        let _ = writeln!(h, "<p>{}</p>", escape(t));
    }
    h.push_str("</div>\n");
}

/// Appends the provenance section: what made the report, as label and value pairs.
pub fn provenance(h: &mut String, items: &[(&str, String)]) {
    section(h, "provenance", "Provenance");
    pairs(h, items);
    end_section(h);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_keep_their_units() {
        assert_eq!(
            bind_units("0.95 lag at 12 % and 3 steps, 40 5"),
            "0.95\u{a0}lag at 12\u{a0}% and 3\u{a0}steps, 40 5"
        );
    }

    #[test]
    fn blocks_escape_every_text() {
        let mut h = String::new();
        table(&mut h, &["a<b"], "l", &[vec!["x & \"y\"".to_string()]]);
        pairs(&mut h, &[("k>", "v'".to_string())]);
        caution(&mut h, &["<careful>"]);
        para(&mut h, Some("aside"), "1 < 2");
        assert!(h.contains("<th class=\"l\">a&lt;b</th>"));
        assert!(h.contains("<td class=\"l\">x &amp; &quot;y&quot;</td>"));
        assert!(h.contains("<dt>k&gt;</dt><dd>v&#39;</dd>"));
        assert!(h.contains("<p>&lt;careful&gt;</p>"));
        assert!(h.contains("<p class=\"aside\">1 &lt; 2</p>"));
    }
}
