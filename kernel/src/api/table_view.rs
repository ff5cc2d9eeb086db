//! Tables as an engineer reads them: the unit under each column name, numbers to a set
//! number of significant figures (one number of decimals per column, so the decimal
//! points line up), no data-type rows, and a note of how many rows are not shown and how
//! to see them. The text and HTML forms show the same cells.

use polars::prelude::{AnyValue, Column, DataType};

use super::pretty_unit;
use super::tables::Tbl;

/// How tables are shown (session settings, `display_table`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TableView {
    /// Significant figures of the largest value in each numeric column.
    pub digits: usize,
    /// Most rows shown; longer tables show their first and last rows.
    pub rows: usize,
}

impl Default for TableView {
    fn default() -> Self {
        Self { digits: 4, rows: 20 }
    }
}

/// Rows shown at the end of an elided table.
const TAIL: usize = 5;

/// The cells of one column, formatted, and whether they are right-aligned (numbers).
struct Shown {
    name: String,
    unit: String,
    cells: Vec<String>,
    numeric: bool,
}

/// Which rows are shown: all, or the first and the last few with a gap between.
fn shown_rows(height: usize, view: &TableView) -> (Vec<usize>, Option<usize>) {
    let max = view.rows.max(TAIL + 1);
    if height <= max {
        return ((0..height).collect(), None);
    }
    let head = max - TAIL;
    let rows = (0..head).chain(height - TAIL..height).collect();
    (rows, Some(head))
}

/// Decimals that give `digits` significant figures to the largest magnitude in `values`,
/// or None when scientific notation reads better (very large or very small numbers).
fn decimals(values: &[f64], digits: usize) -> Option<usize> {
    let max = values.iter().filter(|v| v.is_finite()).fold(0.0f64, |m, v| m.max(v.abs()));
    if max == 0.0 {
        return Some(0);
    }
    let mag = max.log10().floor() as i32;
    if !(-4..9).contains(&mag) {
        return None;
    }
    Some((digits as i32 - 1 - mag).max(0) as usize)
}

/// The fewest decimals (up to `max`) that write every value exactly: readings typed as
/// 30.0 and 36.5 print so, not as 30.00 and 36.50.
fn needed_decimals(values: &[f64], max: usize) -> usize {
    let exact = |x: f64, k: usize| {
        let s = 10f64.powi(k as i32);
        ((x * s).round() / s - x).abs() <= 1e-9 * x.abs().max(1.0)
    };
    values.iter().filter(|v| v.is_finite()).map(|&x| (0..=max).find(|&k| exact(x, k)).unwrap_or(max)).max().unwrap_or(0)
}

fn number_cells(values: &[Option<f64>], digits: usize) -> Vec<String> {
    let finite: Vec<f64> = values.iter().flatten().copied().collect();
    let d = decimals(&finite, digits).map(|d| d.min(needed_decimals(&finite, d)));
    values
        .iter()
        .map(|v| match v {
            None => "—".to_string(),
            Some(x) if x.is_nan() => "NaN".to_string(),
            Some(x) if x.is_infinite() => if *x > 0.0 { "∞" } else { "−∞" }.to_string(),
            Some(x) => {
                let s = match d {
                    Some(d) => format!("{x:.d$}"),
                    None => format!("{:.*e}", digits.saturating_sub(1), x),
                };
                // No "-0.0": a value that rounds to zero prints unsigned.
                if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') { s[1..].to_string() } else { s }
            }
        })
        .collect()
}

fn column_cells(t: &Tbl, c: &Column, rows: &[usize], view: &TableView) -> Shown {
    let name = c.name().to_string();
    let unit = t.unit_of(&name).map(|u| format!("[{}]", pretty_unit(u))).unwrap_or_default();
    let dtype = c.dtype();
    if dtype.is_float() {
        let f = c.cast(&DataType::Float64).ok();
        let ca = f.as_ref().and_then(|f| f.f64().ok());
        let values: Vec<Option<f64>> = rows.iter().map(|&i| ca.and_then(|ca| ca.get(i))).collect();
        return Shown { name, unit, cells: number_cells(&values, view.digits), numeric: true };
    }
    let numeric = dtype.is_integer();
    let cells = rows
        .iter()
        .map(|&i| match c.get(i) {
            Ok(AnyValue::Null) | Err(_) => "—".to_string(),
            Ok(AnyValue::String(s)) => s.to_string(),
            Ok(AnyValue::StringOwned(s)) => s.to_string(),
            Ok(v) => v.to_string().trim_matches('"').to_string(),
        })
        .collect();
    Shown { name, unit, cells, numeric }
}

fn columns(t: &Tbl, view: &TableView) -> (Vec<Shown>, Option<usize>) {
    let (rows, gap) = shown_rows(t.df.height(), view);
    (t.df.columns().iter().map(|c| column_cells(t, c, &rows, view)).collect(), gap)
}

/// What a reader is told under an elided table.
fn elided_note(t: &Tbl, view: &TableView) -> Option<String> {
    let h = t.df.height();
    let (rows, _) = shown_rows(h, view);
    (rows.len() < h).then(|| {
        format!(
            "{} of {h} rows not shown: t.head(n) for the first n, t.write(\"file.csv\") for all, \
             display_table(#{{rows: n}}) to show more",
            h - rows.len()
        )
    })
}

fn width(s: &str) -> usize {
    s.chars().count()
}

/// The table as text: a size line, names and units over the columns, the cells.
pub fn text(t: &Tbl, view: &TableView) -> String {
    let (cols, gap) = columns(t, view);
    let (h, w) = (t.df.height(), t.df.width());
    let mut out = format!("{h} row{} × {w} column{}\n", if h == 1 { "" } else { "s" }, if w == 1 { "" } else { "s" });
    if cols.is_empty() {
        return out;
    }
    let widths: Vec<usize> = cols
        .iter()
        .map(|c| c.cells.iter().map(|s| width(s)).chain([width(&c.name), width(&c.unit), 1]).max().unwrap_or(1))
        .collect();
    let pad = |s: &str, w: usize, right: bool| {
        let fill = " ".repeat(w.saturating_sub(width(s)));
        if right { format!("{fill}{s}") } else { format!("{s}{fill}") }
    };
    let line = |cells: Vec<String>| cells.join("  ").trim_end().to_string() + "\n";
    out += &line(cols.iter().zip(&widths).map(|(c, &w)| pad(&c.name, w, c.numeric)).collect());
    if cols.iter().any(|c| !c.unit.is_empty()) {
        out += &line(cols.iter().zip(&widths).map(|(c, &w)| pad(&c.unit, w, c.numeric)).collect());
    }
    out += &line(widths.iter().map(|&w| "─".repeat(w)).collect());
    let n = cols[0].cells.len();
    for r in 0..n {
        if gap == Some(r) {
            out += &line(cols.iter().zip(&widths).map(|(c, &w)| pad("…", w, c.numeric)).collect());
        }
        out += &line(cols.iter().zip(&widths).map(|(c, &w)| pad(&c.cells[r], w, c.numeric)).collect());
    }
    if let Some(note) = elided_note(t, view) {
        out += &note;
        out.push('\n');
    }
    out.trim_end().to_string()
}

/// Text made safe inside HTML elements and attribute values.
pub fn esc(s: &str) -> String {
    s.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;")
}

/// The table as HTML: the same cells as the text form, units in the header.
pub fn html(t: &Tbl, view: &TableView) -> String {
    let (cols, gap) = columns(t, view);
    let mut s = String::from("<table class=\"stagna-table\">\n<thead><tr>");
    for c in &cols {
        let unit =
            if c.unit.is_empty() { String::new() } else { format!("<br><span class=\"unit\">{}</span>", esc(&c.unit)) };
        let align = if c.numeric { " style=\"text-align:right\"" } else { "" };
        s += &format!("<th{align}>{}{unit}</th>", esc(&c.name));
    }
    s += "</tr></thead>\n<tbody>\n";
    let n = cols.first().map_or(0, |c| c.cells.len());
    for r in 0..n {
        if gap == Some(r) {
            s += &format!("<tr><td colspan=\"{}\">…</td></tr>\n", cols.len());
        }
        s += "<tr>";
        for c in &cols {
            let align = if c.numeric { " style=\"text-align:right\"" } else { "" };
            s += &format!("<td{align}>{}</td>", esc(&c.cells[r]));
        }
        s += "</tr>\n";
    }
    s += "</tbody></table>\n";
    s += &format!("<p>{} rows × {} columns", t.df.height(), t.df.width());
    if let Some(note) = elided_note(t, view) {
        s += &format!("; {}", esc(&note));
    }
    s += "</p>\n";
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use polars::prelude::{DataFrame, NamedFrom, Series};

    fn tbl(df: DataFrame, units: &[(&str, &str)]) -> Tbl {
        Tbl { df, units: units.iter().map(|(a, b)| (a.to_string(), b.to_string())).collect() }
    }

    #[test]
    fn units_under_names_figures_per_column_and_no_type_rows() {
        let df = DataFrame::new_infer_height(vec![
            Series::new("point".into(), [1i64, 2, 3]).into(),
            Series::new("dp".into(), [83.828235, 101.99102, 111.771041]).into(),
            Series::new("velocity".into(), [11.760202, 12.971396, -0.00001]).into(),
            Series::new("site".into(), ["a", "b", "c"]).into(),
        ])
        .unwrap();
        let s = text(&tbl(df, &[("dp", "Pa"), ("velocity", "m/s")]), &TableView::default());
        let lines: Vec<&str> = s.lines().collect();
        assert_eq!(lines[0], "3 rows × 4 columns");
        assert_eq!(lines[1], "point     dp  velocity  site");
        assert_eq!(lines[2], "        [Pa]     [m/s]");
        // Rounding by hand (common practice, no source): 4 significant figures of each
        // column's largest value, 111.771041 → 111.8 (one decimal), so 83.828235 → 83.8;
        // 12.971396 → 12.97 (two decimals), so 11.760202 → 11.76 and −0.00001 → 0.00.
        assert_eq!(lines[4], "    1   83.8     11.76  a");
        assert_eq!(lines[6], "    3  111.8      0.00  c", "no -0.00");
        assert!(!s.contains("f64") && !s.contains("---"), "{s}");
    }

    #[test]
    fn long_tables_say_how_many_rows_are_not_shown() {
        let df = DataFrame::new_infer_height(vec![
            Series::new("x".into(), (0..100).map(f64::from).collect::<Vec<_>>()).into(),
        ])
        .unwrap();
        let t = tbl(df, &[]);
        // 100 rows shown as the first 5 and the last 5 (rows: 10, TAIL = 5): 90 hidden.
        let s = text(&t, &TableView { digits: 3, rows: 10 });
        assert!(s.contains("90 of 100 rows not shown"), "{s}");
        assert!(s.contains("\n  …\n") || s.contains("…"), "{s}");
        assert!(
            s.lines().any(|l| l.trim() == "99")
                && s.lines().any(|l| l.trim() == "4")
                && !s.lines().any(|l| l.trim() == "5")
        );
        // HTML: one header row, 10 data rows and one gap row.
        let h = html(&t, &TableView { digits: 3, rows: 10 });
        assert!(h.contains("90 of 100 rows not shown") && h.matches("<tr>").count() == 12, "{h}");
        // Very large and very small magnitudes in scientific notation: 8.224e9 at 4 figures
        // is Rust's `{:.3e}` of the value (common practice, no source).
        let df = DataFrame::new_infer_height(vec![Series::new("re".into(), [8.224e9, 1.0e9]).into()]).unwrap();
        assert!(text(&tbl(df, &[]), &TableView::default()).contains("8.224e9"));
    }
}
