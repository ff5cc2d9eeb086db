//! Reports: everything a session has shown, written as one self-contained HTML page.

use super::*;
use crate::catalog::Doc;

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.group("Reports");
    let doc = Doc::new(
        "write_report(path[, title])",
        "Writes everything this session has shown so far (printed text, tables with units, charts as inline SVG, budgets with their sources, run sheets with their checks, worked steps, warnings) as one self-contained HTML page with the cautions of the work: no network needed to read it, printable to PDF from a browser. In a batch run relative paths go to the output folder; `stagna run --report FILE` writes the same at the end of a run.",
    )
    .param("path", "an .html file")
    .param("title", "the report's title (default: \"Stagna report\")")
    .example("print(`flow: ${sig(3.741.m3_s, 4)}`);\nwrite_report(\"example-report.html\", \"Pretendbury AHU-2 supply, check traverse\");")
    .source("HTML (WHATWG Living Standard); layout of our own");
    let p = prefs.clone();
    r.func("write_report", &doc, move |path: &str| -> Res<()> { write(&p, path, "Stagna report") });
    let p = prefs.clone();
    r.func("write_report", &doc, move |path: &str, title: &str| -> Res<()> { write(&p, path, title) });
}

fn write(p: &SharedPrefs, path: &str, title: &str) -> Res<()> {
    if !path.to_ascii_lowercase().ends_with(".html") && !path.to_ascii_lowercase().ends_with(".htm") {
        return Err(rt(format!("write_report: {path}: a report is written as .html")));
    }
    let target = super::tables::out_path(p, path)?;
    let rec = super::prefs(p).record;
    // Rendered under the lock: the record (up to 64 MB) is not copied.
    let html = match rec.lock() {
        Ok(g) => crate::report::html(&g, title, None),
        Err(e) => crate::report::html(&e.into_inner(), title, None),
    };
    lib(stagna::io::table::write_atomically(&target, |f| std::io::Write::write_all(f, html.as_bytes())))
}
