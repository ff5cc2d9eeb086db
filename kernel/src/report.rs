//! A self-contained HTML report of everything a session showed: printed text, tables
//! (as HTML tables with units), charts (inline SVG), budgets and run sheets, worked steps,
//! warnings, and the cautions of the work. No script, font or style sheet is fetched: the
//! page reads the same offline and prints to PDF from a browser. Layout of our own.

use std::fmt::Write as _;

use crate::session::{Bundle, Event};

/// Most bytes of output a session keeps for its report; later output is left out and the
/// report says so.
const MAX_BYTES: usize = 64 << 20;

/// One thing shown.
#[derive(Debug, Clone, PartialEq)]
pub enum Item {
    /// Printed text.
    Text(String),
    /// A warning or other text to standard error.
    Warning(String),
    /// A value shown in its richer forms.
    Rich(Bundle),
}

/// What a session has shown so far, in order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Record {
    items: Vec<Item>,
    bytes: usize,
    truncated: bool,
}

impl Record {
    /// Keeps an output event (progress and clear-output are not part of a record).
    pub fn push(&mut self, e: &Event) {
        let item = match e {
            Event::Stdout(s) => Item::Text(s.clone()),
            Event::Stderr(s) => Item::Warning(s.clone()),
            Event::Display(b) => Item::Rich(without_png(b)),
            Event::ClearOutput | Event::Progress(_) => return,
        };
        self.add(item);
    }

    /// Keeps a value shown as the result of an input.
    pub fn push_value(&mut self, b: &Bundle) {
        self.add(Item::Rich(without_png(b)));
    }

    fn add(&mut self, item: Item) {
        let size = match &item {
            Item::Text(s) | Item::Warning(s) => s.len(),
            Item::Rich(b) => {
                b.text.len() + b.html.as_ref().map_or(0, String::len) + b.svg.as_ref().map_or(0, String::len)
            }
        };
        if self.bytes + size > MAX_BYTES {
            self.truncated = true;
            return;
        }
        self.bytes += size;
        self.items.push(item);
    }
}

/// PNG copies are for notebooks; the report draws the SVG.
fn without_png(b: &Bundle) -> Bundle {
    Bundle { png: None, ..b.clone() }
}

use crate::api::table_view::esc;

const STYLE: &str = "\
body{font-family:'DejaVu Sans',Verdana,sans-serif;margin:2em auto;max-width:62em;padding:0 1em;color:#1a1a1a;line-height:1.35}
header{border-bottom:2px solid #145aa0;margin-bottom:1.2em}
h1{font-size:1.5em;margin:0 0 .3em 0}
.meta{color:#555;font-size:.9em;margin:.2em 0 .8em 0}
pre{font-family:'DejaVu Sans Mono',Menlo,Consolas,monospace;font-size:.82em;background:#f6f7f9;border:1px solid #e1e4e8;padding:.6em .8em;white-space:pre-wrap;overflow-wrap:anywhere}
pre.warning{background:#fff8e6;border-color:#e8c66b}
table.stagna-table{border-collapse:collapse;font-size:.85em;margin:.6em 0}
table.stagna-table th,table.stagna-table td{border:1px solid #d0d4da;padding:.2em .5em}
table.stagna-table th{background:#eef2f7}
.unit{color:#555;font-weight:normal}
table.stagna-steps{border-collapse:collapse;font-size:.9em;margin:.6em 0}
table.stagna-steps th,table.stagna-steps td{border:1px solid #d0d4da;padding:.3em .5em;vertical-align:top;text-align:left}
table.stagna-steps th{background:#eef2f7}
table.stagna-steps td:last-child{min-width:12em}
math{font-size:1.15em}
figure{margin:.8em 0;page-break-inside:avoid}
figure svg{max-width:100%;height:auto}
.caution{border:2px solid #b3261e;background:#fdf0ef;padding:.6em .9em;margin-top:1.5em}
footer{color:#666;font-size:.8em;margin-top:1.5em}
@media print{body{margin:0;max-width:none}pre{white-space:pre-wrap}a{color:inherit}}
";

/// The report as one HTML page.
pub fn html(record: &Record, title: &str, script: Option<&str>) -> String {
    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{}</title>\n<style>\n{STYLE}</style>\n</head>\n<body>\n<header>\n<h1>{}</h1>\n<p class=\"meta\">",
        esc(title),
        esc(title)
    );
    if let Some(s) = script {
        let _ = write!(h, "Procedure: <code>{}</code>. ", esc(s));
    }
    let _ = writeln!(
        h,
        "Written {} (UTC) by Stagna {}. Every number carries its unit; sources are named beside the results they support.</p>\n</header>\n<main>",
        utc_now(),
        env!("CARGO_PKG_VERSION")
    );
    // Consecutive printed lines go in one block.
    let mut text = String::new();
    let flush = |h: &mut String, text: &mut String| {
        if !text.is_empty() {
            let _ = writeln!(h, "<pre>{}</pre>", esc(text.trim_end_matches('\n')));
            text.clear();
        }
    };
    for item in &record.items {
        match item {
            Item::Text(s) => {
                text.push_str(s);
                text.push('\n');
            }
            Item::Warning(s) => {
                flush(&mut h, &mut text);
                let _ = writeln!(h, "<pre class=\"warning\">{}</pre>", esc(s));
            }
            Item::Rich(b) => {
                flush(&mut h, &mut text);
                if let Some(svg) = &b.svg {
                    let _ = writeln!(h, "<figure>{svg}</figure>");
                } else if let Some(html) = &b.html {
                    let _ = writeln!(h, "<div class=\"rich\">{html}</div>");
                } else {
                    let _ = writeln!(h, "<pre>{}</pre>", esc(&b.text));
                }
            }
        }
    }
    flush(&mut h, &mut text);
    if record.truncated {
        let _ = writeln!(h, "<p><b>Output past {} MB was left out of this report.</b></p>", MAX_BYTES >> 20);
    }
    let _ = writeln!(
        h,
        "</main>\n<div class=\"caution\"><b>Caution.</b> {}</div>\n<footer>Print to PDF from the browser for the record. Formulas are MathML, drawn by the browser itself, so the page needs no network.</footer>\n</body>\n</html>",
        esc(crate::demo::CAUTION.trim_start_matches("Caution: ")).replace('\n', " ")
    );
    h
}

/// The time now, UTC, as yyyy-mm-dd hh:mm.
fn utc_now() -> String {
    let secs = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map_or(0, |d| d.as_secs()) as i64;
    let (days, rest) = (secs.div_euclid(86_400), secs.rem_euclid(86_400));
    // Civil date from days since 1970-01-01 (H. Hinnant's algorithm).
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!("{y:04}-{m:02}-{d:02} {:02}:{:02}", rest / 3600, rest % 3600 / 60)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn report_keeps_order_escapes_text_and_carries_the_cautions() {
        let mut r = Record::default();
        r.push(&Event::Stdout("flow <1> & more".into()));
        r.push(&Event::Stdout("second line".into()));
        r.push(&Event::Stderr("warning: careful".into()));
        r.push(&Event::Display(Bundle {
            text: "chart".into(),
            svg: Some("<svg id=\"c\"></svg>".into()),
            ..Default::default()
        }));
        r.push(&Event::Progress(crate::session::ProgressEvent {
            id: 1,
            label: "x".into(),
            done: 1,
            total: 2,
            first: true,
        }));
        let h = html(&r, "Run <A>", Some("demo.rhai"));
        assert!(h.starts_with("<!DOCTYPE html>") && h.contains("<title>Run &lt;A&gt;</title>"));
        assert!(h.contains("<pre>flow &lt;1&gt; &amp; more\nsecond line</pre>"), "{h}");
        let (w, s) = (h.find("careful").unwrap_or(0), h.find("<svg id=\"c\">").unwrap_or(0));
        assert!(w > 0 && s > w, "in order");
        assert!(h.contains("class=\"caution\"") && h.contains("licensed practice"));
        assert!(!h.contains("http://") && !h.contains("https://"), "nothing fetched");
    }

    #[test]
    fn dates_are_civil() {
        assert!(utc_now().starts_with("20"));
    }
}
