//! Tables in scripts: polars DataFrames with a declared unit per numeric column;
//! reading (CSV, Parquet, spreadsheets, bundled demo data), queries and writing.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use polars::prelude::{DataFrame, Expr, IntoLazy, JoinArgs, JoinType, NamedFrom, Series, SortMultipleOptions, col};
use rhai::{Array, Dynamic, Map, NativeCallContext};
use stagna::units::dimension::Dimension as D;
use stagna::*;

use super::expressions::{Ex, expr_of, exprs_of, names_of};
use super::*;
use crate::catalog::Doc;

/// A table in scripts: a polars DataFrame and the declared unit of each numeric column.
#[derive(Debug, Clone)]
pub struct Tbl {
    /// The data.
    pub df: DataFrame,
    /// Column name → unit string.
    pub units: BTreeMap<String, String>,
}

/// Result columns renamed in this release (old → new), named in the error when an old
/// name is asked for.
const RENAMED_COLUMNS: &[(&str, &str)] = &[
    ("relative_u_pct", "u_rel_flow_pct"),
    ("coverage_factor", "k"),
    ("expanded_flow_m3_s", "U_flow_m3_s"),
    ("reference_flow_m3_s", "flow_<condition>_m3_s, e.g. flow_0C_101.325kPa_m3_s"),
    ("dry_reference_flow_m3_s", "dry_flow_<condition>_m3_s, e.g. dry_flow_20C_760mmHg_m3_s"),
];

/// A group-by in progress.
#[derive(Debug, Clone)]
pub struct Grouped {
    t: Tbl,
    keys: Vec<String>,
}

/// The bundled demo tables (invented scenarios).
pub const DEMO_TABLES: &[(&str, &str, &str)] = &[
    (
        "pretendbury-ahu2-supply.csv",
        "duct traverse, leisure-centre supply air",
        include_str!("../../../demo-data/pretendbury-ahu2-supply.csv"),
    ),
    ("neverbrook-main.csv", "water main, centreline readings", include_str!("../../../demo-data/neverbrook-main.csv")),
    (
        "nowhere-vale-kiln2-stack.csv",
        "stack traverse, S-type probe, three runs",
        include_str!("../../../demo-data/nowhere-vale-kiln2-stack.csv"),
    ),
    (
        "nowhere-vale-kiln-points.csv",
        "stack traverse, S-type probe, three runs with yaw angles (fictional site)",
        include_str!("../../../demo-data/nowhere-vale-kiln-points.csv"),
    ),
    (
        "nowhere-vale-kiln-runs.csv",
        "the same stack: per-run barometer, static pressure, gas analysis, moisture train",
        include_str!("../../../demo-data/nowhere-vale-kiln-runs.csv"),
    ),
    (
        "gloomwater-cw-logged.csv",
        "cooling-water line, logged Δp samples at 10 equal-area points (fictional plant)",
        include_str!("../../../demo-data/gloomwater-cw-logged.csv"),
    ),
    (
        "nullford-rig-profiles.csv",
        "air rig, profiles at 12 stations after a bend",
        include_str!("../../../demo-data/nullford-rig-profiles.csv"),
    ),
];

pub(super) fn perr(e: polars::error::PolarsError) -> Box<rhai::EvalAltResult> {
    // polars appends its query plan to a missing-column message; the first line says it.
    let text = e.to_string();
    let text = text
        .split("\n\nResolved plan")
        .next()
        .unwrap_or(&text)
        .split("Resolved plan until failure")
        .next()
        .unwrap_or(&text);
    rt(stagna::error::shorten(text.trim(), 600))
}

impl Tbl {
    /// A table with no declared units.
    pub fn new(df: DataFrame) -> Self {
        Tbl { df, units: BTreeMap::new() }
    }

    /// Keeps only the units of columns still present.
    fn retain_units(mut self) -> Self {
        let names: Vec<String> = self.df.get_column_names().iter().map(|s| s.to_string()).collect();
        self.units.retain(|k, _| names.contains(k));
        self
    }

    fn with_frame(&self, df: DataFrame) -> Self {
        Tbl { df, units: self.units.clone() }.retain_units()
    }

    /// A numeric column as a `Col` in SI.
    pub fn column(&self, name: &str) -> Res<Col> {
        if !self.df.get_column_names().iter().any(|c| c.as_str() == name)
            && let Some((_, new)) = RENAMED_COLUMNS.iter().find(|(old, _)| *old == name)
        {
            return Err(rt(format!(
                "column '{name}' was renamed '{new}' (u_ is a standard uncertainty, U_ an expanded one with its k; \
                 reference flows name their condition)"
            )));
        }
        let raw = lib(stagna::io::table::float_column(&self.df, name))?;
        match self.units.get(name) {
            Some(u) => {
                let unit = lib(Unit::parse(u))?;
                let probe = Quantity::from_unit(0.0, &unit);
                let si: Vec<f64> = raw.iter().map(|&v| Quantity::from_unit(v, &unit).si).collect();
                Ok(Col {
                    name: name.into(),
                    si: std::sync::Arc::new(si),
                    dimension: probe.dimension,
                    absolute_temperature: probe.absolute_temperature,
                    unit: Some(u.as_str().into()),
                })
            }
            None => Ok(Col::new(name, raw, D::NONE, None)),
        }
    }

    /// The table as text (see [`super::table_view`]).
    pub fn show(&self, view: &super::table_view::TableView) -> String {
        super::table_view::text(self, view)
    }

    /// The unit of a column as written in headers.
    pub fn unit_of(&self, name: &str) -> Option<&str> {
        self.units.get(name).map(String::as_str)
    }
}

/// A table read from `path` with the units stored with it (Parquet metadata or CSV
/// sidecar), kept only for numeric columns present and units the parser reads.
fn with_stored_units(mut df: DataFrame, path: &Path) -> Res<Tbl> {
    let stored = lib(stagna::io::table::read_units(path, &mut df))?;
    let mut units = BTreeMap::new();
    for (c, u) in stored {
        if numeric_column(&df, &c).is_ok() && Unit::parse(&u).is_ok() {
            units.insert(c, u);
        }
    }
    Ok(Tbl { df, units })
}

/// Says on the error stream that a declaration replaced a different unit (one stored
/// with the file, or declared earlier); the new declaration wins.
pub(super) fn warn_unit_change(ctx: &NativeCallContext, column: &str, old: &str, new: &str) -> Res<()> {
    let msg = format!(
        "warning: column '{column}': unit {} replaces {} (stored with the file or declared before); the new declaration wins",
        pretty_unit(new),
        pretty_unit(old)
    );
    ctx.call_native_fn::<()>("eprint", (rhai::ImmutableString::from(msg),))
}

/// Where an input file the run may have written itself is read from: a relative path
/// that is not here is looked for in the session's output folder (where saves go).
pub fn in_path(p: &SharedPrefs, path: &str) -> PathBuf {
    let file = PathBuf::from(path);
    if file.is_relative()
        && !file.exists()
        && let Some(dir) = super::prefs(p).output_dir
        && dir.join(&file).exists()
    {
        return dir.join(&file);
    }
    file
}

/// Where an output file goes: relative paths into the session's output folder; never
/// onto a protected (input) file.
pub fn out_path(p: &SharedPrefs, path: &str) -> Res<PathBuf> {
    let prefs = super::prefs(p);
    let mut target = PathBuf::from(path);
    if target.is_relative()
        && let Some(dir) = &prefs.output_dir
    {
        target = dir.join(target);
    }
    writable(&prefs, target)
}

/// An absolute path with `.` and `..` resolved and symbolic links followed as far as
/// the path exists (so that neither `../` nor a link leads out of an allowed folder).
fn resolve(p: &Path) -> PathBuf {
    let abs = if p.is_absolute() {
        p.to_path_buf()
    } else {
        std::env::current_dir().map(|d| d.join(p)).unwrap_or_else(|_| p.to_path_buf())
    };
    let mut out = PathBuf::new();
    for c in abs.components() {
        match c {
            std::path::Component::ParentDir => {
                out.pop();
            }
            std::path::Component::CurDir => {}
            other => out.push(other),
        }
    }
    // Follow links in the longest part that exists; keep the rest as written.
    let mut existing = out.clone();
    let mut rest = Vec::new();
    while !existing.exists() {
        match existing.file_name() {
            Some(n) => rest.push(n.to_os_string()),
            None => break,
        }
        if !existing.pop() {
            break;
        }
    }
    let mut base = std::fs::canonicalize(&existing).unwrap_or(existing);
    for n in rest.into_iter().rev() {
        base.push(n);
    }
    base
}

/// Checks a file the session is about to write (already placed in the output folder):
/// creates its folder and refuses a protected (input) file.
pub fn writable(prefs: &Prefs, target: PathBuf) -> Res<PathBuf> {
    if let Some(roots) = &prefs.write_roots {
        let resolved = resolve(&target);
        if !roots.iter().any(|r| resolved.starts_with(resolve(r))) {
            let allowed: Vec<String> = roots.iter().map(|r| resolve(r).display().to_string()).collect();
            return Err(rt(format!(
                "{}: outside the folders this session may write ({}); write there, or allow the folder with --allow-write DIR",
                target.display(),
                allowed.join(", ")
            )));
        }
    }
    if let Some(parent) = target.parent()
        && !parent.as_os_str().is_empty()
    {
        std::fs::create_dir_all(parent).map_err(|e| rt(format!("{}: cannot create folder: {e}", parent.display())))?;
    }
    let canon = |p: &Path| std::fs::canonicalize(p).ok();
    if let Some(t) = canon(&target) {
        for input in &prefs.protected {
            if canon(input).as_ref() == Some(&t) {
                return Err(rt(format!("{}: refusing to overwrite an input file", target.display())));
            }
        }
    }
    Ok(target)
}

fn demo_csv(p: &SharedPrefs, name: &str) -> Res<DataFrame> {
    let prefs = super::prefs(p);
    let Some((file, _, bundled)) =
        DEMO_TABLES.iter().find(|(f, ..)| f.trim_end_matches(".csv") == name.trim_end_matches(".csv"))
    else {
        let names: Vec<&str> = DEMO_TABLES.iter().map(|(f, ..)| f.trim_end_matches(".csv")).collect();
        return Err(rt(format!("no demo table '{name}'; there are: {}", names.join(", "))));
    };
    if let Some(dir) = prefs.data_dir {
        return lib(stagna::io::table::read_csv(&dir.join(file)));
    }
    use polars_io::SerReader;
    polars_io::prelude::CsvReadOptions::default()
        .with_has_header(true)
        .map_parse_options(|o| o.with_comment_prefix(Some("#")))
        .into_reader_with_file_handle(std::io::Cursor::new(bundled.as_bytes()))
        .finish()
        .map_err(perr)
}

/// Checks that a column exists and holds numbers, without copying it.
pub fn numeric_column(df: &DataFrame, name: &str) -> Res<()> {
    match df.column(name) {
        Ok(c) if c.dtype().is_primitive_numeric() => Ok(()),
        Ok(c) => Err(rt(format!("column '{name}': holds {} values, not numbers", c.dtype()))),
        Err(_) => Err(rt(format!(
            "column '{name}': no such column; the table has: {}",
            df.get_column_names().iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
        ))),
    }
}

fn unit_for_result_column(name: &str) -> Option<&'static str> {
    [
        ("_m3_s", "m^3/s"),
        ("_m3_h", "m^3/h"),
        ("_m_s", "m/s"),
        ("_kg_s", "kg/s"),
        ("_kg_m3", "kg/m^3"),
        ("_pa", "Pa"),
        ("_pct", "%"),
    ]
    .iter()
    .find(|(suffix, _)| name.ends_with(suffix))
    .map(|(_, u)| *u)
}

/// A result table with the units its column-name suffixes declare (`_m_s`, `_m3_s`, ...).
pub fn with_result_units(df: DataFrame, mut units: BTreeMap<String, String>) -> Tbl {
    for c in df.get_column_names() {
        if let Some(u) = unit_for_result_column(c) {
            units.insert(c.to_string(), u.to_string());
        }
    }
    Tbl { df, units }.retain_units()
}

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Tbl>("Table").register_type_with_name::<Grouped>("GroupBy");
    r.group("Tables");
    readers(r, prefs);
    members(r, prefs);
    queries(r, prefs);
    groups_and_joins(r);
    writing(r, prefs);
    writing_partitioned(r, prefs);
}

/// Reading tables from files, demo data and script maps.
fn readers(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let read_doc = |fmt: &str, fname: &str| {
        Doc::new(
            &format!("{fname}(path) -> Table"),
            &format!("Reads a {fmt} file into a table (column types inferred). Units written by Stagna come back with it (Parquet metadata, or the CSV's .units.csv sidecar); declare others with .unit()."),
        )
        .param("path", "file path, relative to the working directory")
        .example(&{
            let ext = if fmt == "CSV" { "csv" } else { "parquet" };
            format!("table_from(#{{h: [12.5, 14.0]}}).write(\"readings.{ext}\");\nlet t = {fname}(\"readings.{ext}\");\nprint(t.len);")
        })
        .source("polars readers (Apache Parquet, RFC 4180 CSV)")
    };
    r.func("read_csv", &read_doc("CSV", "read_csv"), |p: &str| -> Res<Tbl> {
        with_stored_units(lib(stagna::io::table::read_csv(Path::new(p)))?, Path::new(p))
    });
    r.func(
        "read_csv",
        &Doc::new("read_csv(path, options) -> Table", "Reads a CSV file laid out otherwise: options separator (one character, e.g. \";\" or \"\\t\") and decimal_comma (true where numbers are written 12,5).")
            .example("table_from(#{h: [12.5, 14.0]}).write(\"readings.csv\");\nlet t = read_csv(\"readings.csv\", #{separator: \",\", decimal_comma: false});\nprint(t.len);")
            .source("polars CSV reader"),
        |p: &str, o: Map| -> Res<Tbl> {
            check_keys(&o, &["separator", "decimal_comma"], "read_csv")?;
            let mut layout = stagna::io::table::CsvLayout::default();
            if let Some(d) = field(&o, "separator") {
                let t = text(d, "separator")?;
                let t = if t == "\\t" { "\t".to_string() } else { t };
                match t.as_bytes() {
                    [b] if b.is_ascii() && *b != b'"' => layout.separator = *b,
                    _ => return Err(rt(format!("read_csv: separator must be one ASCII character such as \";\" or \"\\t\", got \"{t}\""))),
                }
            }
            if let Some(d) = field(&o, "decimal_comma") {
                layout.decimal_comma = d.as_bool().map_err(|_| rt("read_csv: decimal_comma must be true or false"))?;
            }
            if layout.decimal_comma && layout.separator == b',' {
                return Err(rt("read_csv: with decimal commas the fields cannot also be separated by commas; give separator: \";\""));
            }
            with_stored_units(lib(stagna::io::table::read_csv_with(Path::new(p), layout))?, Path::new(p))
        },
    );
    r.func("read_parquet", &read_doc("Parquet", "read_parquet"), |p: &str| -> Res<Tbl> {
        with_stored_units(lib(stagna::io::table::read_parquet(Path::new(p)))?, Path::new(p))
    });
    r.func(
        "read_excel",
        &Doc::new("read_excel(path) -> Table\nread_excel(path, sheet) -> Table", "Reads one sheet of a workbook (xlsx, xlsm, xls, ods): the first sheet unless named. The first non-empty row holds the column names; all-number columns become numbers (empty cells NaN).")
            .param("sheet", "sheet name")
            .example("let t = read_excel(\"site-readings.xlsx\", \"traverse 1\");\nprint(t.unit(\"deflection_mm\", \"mm\")[\"deflection_mm\"]);")
            .source("calamine workbook reader (Office Open XML, ECMA-376; OpenDocument)"),
        |p: &str| -> Res<Tbl> { with_stored_units(lib(stagna::io::table::read_spreadsheet(Path::new(p), None))?, Path::new(p)) },
    );
    r.func("read_excel", &Doc::new("read_excel(path, sheet) -> Table", ""), |p: &str, s: &str| -> Res<Tbl> {
        with_stored_units(lib(stagna::io::table::read_spreadsheet(Path::new(p), Some(s)))?, Path::new(p))
    });
    r.func(
        "read_table",
        &Doc::new(
            "read_table(path) -> Table",
            "Reads a table by the file's extension: .csv, .parquet, .xlsx/.xls/.ods (first sheet).",
        )
        .example("table_from(#{h: [12.5]}).write(\"site.parquet\");\nlet t = read_table(\"site.parquet\");  // in a batch run: read_table(input)\nprint(t.columns);")
        .source("polars readers; calamine"),
        |p: &str| -> Res<Tbl> { with_stored_units(lib(stagna::io::table::read_table(Path::new(p)))?, Path::new(p)) },
    );
    let pp = prefs.clone();
    r.func(
        "demo_table",
        &Doc::new("demo_table(name) -> Table", "One of the bundled demo tables (invented scenarios): \"pretendbury-ahu2-supply\" (a duct traverse), \"neverbrook-main\" (a water main), \"nowhere-vale-kiln2-stack\" (a stack, S-type probe), \"nowhere-vale-kiln-points\" and \"nowhere-vale-kiln-runs\" (a stack test: points with yaw angles, and one row per run) or \"nullford-rig-profiles\" (profiles after a bend).")
            .example("let t = demo_table(\"neverbrook-main\");\nprint(t.len);")
            .source("invented demo data bundled with stagna"),
        move |name: &str| -> Res<Tbl> { Ok(Tbl::new(demo_csv(&pp, name)?)) },
    );
    r.func(
        "table_from",
        &Doc::new("table_from(columns) -> Table", "A table from a map of equal-length arrays (numbers or text).")
            .param("columns", "map name → array, e.g. #{point: [\"A1\", \"A2\"], h: [12.5, 14.0]}")
            .example("let t = table_from(#{point: [\"A1\", \"A2\"], h: [12.5, 14.0]}).unit(\"h\", \"mm\");\nprint(t);")
            .source("common practice, no source"),
        |m: Map| -> Res<Tbl> {
            if m.is_empty() {
                return Err(rt("table_from: no columns; give a map of column names to equal-length arrays, e.g. #{h: [12.5, 14.0]}"));
            }
            let mut cols = Vec::new();
            for (k, v) in &m {
                let a: Array = v.clone().try_cast().ok_or_else(|| rt(format!("table_from: '{k}' must be an array")))?;
                let s = if a.iter().all(|x| x.is_int() || x.is_float()) {
                    let v: Res<Vec<f64>> = a.iter().map(|x| number(x, k)).collect();
                    Series::new(k.as_str().into(), v?)
                } else {
                    Series::new(k.as_str().into(), a.iter().map(|x| x.to_string()).collect::<Vec<_>>())
                };
                cols.push(s.into());
            }
            Ok(Tbl::new(DataFrame::new_infer_height(cols).map_err(perr)?))
        },
    );
}

/// Showing a table, declaring units, columns and size.
fn members(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |t: &mut Tbl| t.show(&super::prefs(&p).table));
    let p = prefs.clone();
    r.engine.register_fn("to_debug", move |t: &mut Tbl| t.show(&super::prefs(&p).table));
    let p = prefs.clone();
    r.func(
        "display_table",
        &Doc::new("display_table(options) -> Map", "Sets how tables are shown in this session: digits, the significant figures of the largest value in each numeric column (one number of decimals per column; 1 to 15, default 4), and rows, the most rows shown before a long table shows only its first and last rows (default 20). Returns the settings; display_table() only reads them. Stored values keep every digit.")
            .param("options", "map: digits, rows")
            .example("let t = table_from(#{v: [1.23456, 12.3456]}).units(#{v: \"m/s\"});\ndisplay_table(#{digits: 6});\nprint(t);\ndisplay_table(#{digits: 4, rows: 20});")
            .source("common practice, no source"),
        move |o: Map| -> Res<Map> {
            check_keys(&o, &["digits", "rows"], "display_table")?;
            let mut v = super::prefs(&p).table;
            if let Some(d) = field(&o, "digits") {
                let d = count(d, "digits")?;
                if !(1..=15).contains(&d) {
                    return Err(rt(format!("display_table: digits must be 1 to 15, got {d}")));
                }
                v.digits = d;
            }
            if let Some(r) = field(&o, "rows") {
                let r = count(r, "rows")?;
                if r < 6 {
                    return Err(rt(format!("display_table: rows must be 6 or more, got {r}")));
                }
                v.rows = r;
            }
            match p.write() {
                Ok(mut g) => g.table = v,
                Err(e) => e.into_inner().table = v,
            }
            Ok(view_map(&v))
        },
    );
    let p = prefs.clone();
    r.func(
        "display_table",
        &Doc::new(
            "display_table() -> Map",
            "How tables are shown in this session: digits and rows (see display_table(options)).",
        )
        .example("print(display_table());")
        .source("common practice, no source"),
        move || -> Map { view_map(&super::prefs(&p).table) },
    );
    r.method(
        "Table",
        "unit",
        &Doc::new("t.unit(column, unit) -> Table", "Declares the unit of a numeric column (values stay as read). Domain functions and t[column] then know its dimension.")
            .param("unit", "any unit the parser reads: \"mm\", \"degC\", \"hPa\", \"inH2O@60F\"")
            .example("let t = table_from(#{h: [12.5]}).unit(\"h\", \"mm\");\nprint(t[\"h\"].to(\"in\"));")
            .source("unit factors: NIST SP 811 (2008) Appendix B.8"),
        |ctx: NativeCallContext, t: &mut Tbl, c: &str, u: &str| -> Res<Tbl> {
            numeric_column(&t.df, c)?;
            lib(Unit::parse(u))?;
            let mut out = t.clone();
            if let Some(old) = out.units.insert(c.to_string(), u.to_string()).filter(|o| o != u) {
                warn_unit_change(&ctx, c, &old, u)?;
            }
            Ok(out)
        },
    );
    r.method(
        "Table",
        "units",
        &Doc::new("t.units(map) -> Table", "Declares several column units at once.")
            .example("let t = demo_table(\"neverbrook-main\").units(#{hg_deflection_mm: \"mm\", water_temp_c: \"degC\"});\nprint(t[\"water_temp_c\"].mean());")
            .source("unit factors: NIST SP 811 (2008) Appendix B.8"),
        |ctx: NativeCallContext, t: &mut Tbl, m: Map| -> Res<Tbl> {
            let mut out = t.clone();
            for (c, u) in &m {
                numeric_column(&t.df, c)?;
                let u = text(u, c)?;
                lib(Unit::parse(&u))?;
                if let Some(old) = out.units.insert(c.to_string(), u.clone()).filter(|o| *o != u) {
                    warn_unit_change(&ctx, c, &old, &u)?;
                }
            }
            Ok(out)
        },
    );
    r.engine.register_indexer_get(|t: &mut Tbl, c: &str| t.column(c));
    let pt = prefs.clone();
    r.method(
        "Table",
        "texts",
        &Doc::new("t.texts(column) -> array", "A column's values as text, one string per row (labels, sources, ids); numbers are written as polars writes them. Bounded by the session's array limit.")
            .example("print(demo_table(\"neverbrook-main\").head(3).texts(\"time\"));")
            .source("common practice, no source"),
        move |t: &mut Tbl, c: &str| -> Res<Array> {
            let max = super::prefs(&pt).max_array;
            if t.df.height() > max {
                return Err(rt(format!("texts(\"{c}\"): {} rows is past the session's array limit of {max} (--max-array); take .head(n) first", t.df.height())));
            }
            Ok(lib(stagna::io::table::text_column(&t.df, c))?.into_iter().map(Dynamic::from).collect())
        },
    );
    r.property(
        "Table",
        "len",
        &Doc::new(
            "t.len -> integer",
            "Number of rows (how many: `.len` on tables, columns, layouts and arrays alike).",
        )
        .example("print(demo_table(\"neverbrook-main\").len);")
        .source("common practice, no source"),
        |t: &mut Tbl| t.df.height() as i64,
    );
    let p = prefs.clone();
    r.property(
        "Table",
        "height",
        &Doc::new("t.height -> integer", "Deprecated spelling of t.len (number of rows); works for this release, with a warning.")
            .example("print(demo_table(\"neverbrook-main\").len);")
            .source("common practice, no source"),
        move |t: &mut Tbl| {
            super::warn_once(&p, "table.height is deprecated and will be removed in the next release; write table.len (the number of rows)");
            t.df.height() as i64
        },
    );
    r.property(
        "Table",
        "columns",
        &Doc::new("t.columns -> array", "Column names.")
            .example("print(demo_table(\"neverbrook-main\").columns);")
            .source("common practice, no source"),
        |t: &mut Tbl| t.df.get_column_names().iter().map(|s| Dynamic::from(s.to_string())).collect::<Array>(),
    );
}

/// New columns, filters, selections, sorting.
fn queries(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.method(
        "Table",
        "with_column",
        &Doc::new("t.with_column(name, value) -> Table", "The table with a new (or replaced) column: a Column from a domain function (written in its display unit, which is declared) or a column expression.")
            .param("value", "Column (e.g. gauge.dp(t[\"h\"], ...)) or Expr (e.g. col(\"a\") * 2)")
            .example("let t = table_from(#{h: [10.0, 20.0]}).unit(\"h\", \"mm\");\nlet t2 = t.with_column(\"dp\", u_tube(gauge_water()).dp(t[\"h\"], 20.degC, 1.2.kg_m3));\nprint(t2);")
            .source("common practice, no source"),
        {
            let p = prefs.clone();
            move |t: &mut Tbl, name: &str, v: Dynamic| -> Res<Tbl> {
                let mut out = t.clone();
                if let Some(c) = v.clone().try_cast::<Col>() {
                    if c.si.len() != t.df.height() {
                        return Err(rt(format!("t.with_column: column has {} rows, the table {}", c.si.len(), t.df.height())));
                    }
                    let unit = c.out_unit(&super::display_of(&p));
                    let values = match &unit {
                        Some(u) => lib(c.values_in(u))?,
                        None => c.si.to_vec(),
                    };
                    out.df.with_column(Series::new(name.into(), values).into()).map_err(perr)?;
                    match unit {
                        Some(u) => out.units.insert(name.to_string(), u),
                        None => out.units.remove(name),
                    };
                    return Ok(out);
                }
                let e = expr_of(&v, "t.with_column")?;
                let df = t.df.clone().lazy().with_column(e.alias(name)).collect().map_err(perr)?;
                out.df = df;
                out.units.remove(name);
                Ok(out)
            }
        },
    );
    r.method(
        "Table",
        "filter",
        &Doc::new("t.filter(condition) -> Table", "Rows where the condition holds.")
            .example("let t = table_from(#{h: [10.0, -1.0, 20.0]});\nprint(t.filter(col(\"h\") >= 0));")
            .source("polars lazy filter"),
        |t: &mut Tbl, e: Ex| -> Res<Tbl> { Ok(t.with_frame(t.df.clone().lazy().filter(e.0).collect().map_err(perr)?)) },
    );
    r.method(
        "Table",
        "select",
        &Doc::new("t.select(columns) -> Table", "Only the given columns or expressions (an array, or one).")
            .example("print(demo_table(\"neverbrook-main\").select([\"time\", \"water_temp_c\"]));")
            .source("polars lazy select"),
        |t: &mut Tbl, d: Dynamic| -> Res<Tbl> {
            Ok(t.with_frame(t.df.clone().lazy().select(exprs_of(&d, "select")?).collect().map_err(perr)?))
        },
    );
    r.method(
        "Table",
        "sort",
        &Doc::new("t.sort(column) -> Table\nt.sort(column, descending) -> Table", "Rows sorted by a column (stable).")
            .example("print(table_from(#{a: [3, 1, 2]}).sort(\"a\", true));")
            .source("polars sort"),
        |t: &mut Tbl, c: &str| -> Res<Tbl> {
            Ok(t.with_frame(
                t.df.clone()
                    .lazy()
                    .sort([c], SortMultipleOptions::default().with_maintain_order(true))
                    .collect()
                    .map_err(perr)?,
            ))
        },
    );
    r.method(
        "Table",
        "sort",
        &Doc::new("t.sort(column, descending) -> Table", ""),
        |t: &mut Tbl, c: &str, desc: bool| -> Res<Tbl> {
            let o = SortMultipleOptions::default().with_order_descending(desc).with_maintain_order(true);
            Ok(t.with_frame(t.df.clone().lazy().sort([c], o).collect().map_err(perr)?))
        },
    );
    r.method(
        "Table",
        "head",
        &Doc::new("t.head(n) -> Table", "The first n rows.")
            .example("print(demo_table(\"pretendbury-ahu2-supply\").head(3));")
            .source("common practice, no source"),
        |t: &mut Tbl, n: i64| -> Res<Tbl> {
            if n < 0 {
                return Err(rt(format!("head: the number of rows must be 0 or more, got {n}")));
            }
            Ok(t.with_frame(t.df.head(Some(n as usize))))
        },
    );
}

/// Grouping with aggregates, and joins.
fn groups_and_joins(r: &mut Registrar<'_>) {
    r.method(
        "Table",
        "group_by",
        &Doc::new("t.group_by(keys) -> GroupBy", "Groups rows by one or more key columns (first-seen order kept); follow with .agg([...]).")
            .example("let t = table_from(#{tr: [\"a\", \"a\", \"b\"], v: [1.0, 2.0, 4.0]});\nprint(t.group_by(\"tr\").agg([col(\"v\").mean(), col(\"v\").count().alias(\"n\")]));")
            .source("polars group_by (stable)"),
        |t: &mut Tbl, d: Dynamic| -> Res<Grouped> { Ok(Grouped { t: t.clone(), keys: names_of(&d, "group_by")? }) },
    );
    r.method(
        "GroupBy",
        "agg",
        &Doc::new("groups.agg(expressions) -> Table", "One row per group with the aggregates (mean, sum, min, max, std, count, first, last, median).")
            .example("let t = table_from(#{tr: [\"a\", \"a\", \"b\"], v: [1.0, 2.0, 4.0]});\nprint(t.group_by(\"tr\").agg([col(\"v\").max()]));")
            .source("polars group_by"),
        |g: &mut Grouped, d: Dynamic| -> Res<Tbl> {
            let keys: Vec<Expr> = g.keys.iter().map(|k| col(k.as_str())).collect();
            let df = g.t.df.clone().lazy().group_by_stable(keys).agg(exprs_of(&d, "agg")?).collect().map_err(perr)?;
            Ok(g.t.with_frame(df))
        },
    );
    r.method(
        "Table",
        "join",
        &Doc::new("t.join(other, on, how) -> Table", "Joins two tables on key column(s); how is \"inner\" or \"left\".")
            .example("let a = table_from(#{tr: [\"a\", \"b\"], d: [600.0, 800.0]});\nlet b = table_from(#{tr: [\"a\", \"a\"], h: [1.0, 2.0]});\nprint(b.join(a, \"tr\", \"left\"));")
            .source("polars join"),
        |t: &mut Tbl, o: Tbl, on: Dynamic, how: &str| -> Res<Tbl> {
            let keys: Vec<Expr> = names_of(&on, "join keys")?.iter().map(|k| col(k.as_str())).collect();
            let jt = match how {
                "inner" => JoinType::Inner,
                "left" => JoinType::Left,
                _ => return Err(rt(format!("join: how is \"inner\" or \"left\", got \"{how}\""))),
            };
            let df = t.df.clone().lazy().join(o.df.clone().lazy(), keys.clone(), keys, JoinArgs::new(jt)).collect().map_err(perr)?;
            let mut units = o.units.clone();
            units.extend(t.units.clone());
            Ok(Tbl { df, units }.retain_units())
        },
    );
}

/// Writing a table (units in a sidecar for CSV).
fn writing(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let pp = prefs.clone();
    r.method(
        "Table",
        "write",
        &Doc::new("t.write(path)", "Writes the table as CSV, Parquet or an Excel workbook (by extension: .csv, .parquet, .xlsx) through a temporary file and a rename; in a batch run relative paths go to the output folder, and input files are never overwritten. Units go into the Parquet file's metadata, the workbook's header row (`name [unit]`), or a `<path>.units.csv` beside CSV output, and come back when the file is read.")
            .example("table_from(#{a: [1.0]}).write(\"example-out.csv\");")
            .source("polars writers"),
        move |t: &mut Tbl, path: &str| -> Res<()> {
            let target = out_path(&pp, path)?;
            if !t.units.is_empty() && target.extension().is_some_and(|e| e.eq_ignore_ascii_case("csv")) {
                // A CSV's units sidecar is a file the run writes like any other: same checks.
                writable(&super::prefs(&pp), stagna::io::table::units_sidecar(&target))?;
            }
            lib(stagna::io::table::write_table_with_units(&t.df, &target, &t.units))?;
            Ok(())
        },
    );
}

/// Writing a table as hive-partitioned Parquet.
fn writing_partitioned(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let pp = prefs.clone();
    r.method(
        "Table",
        "write_partitioned",
        &Doc::new("t.write_partitioned(folder, #{by, name}) -> array", "Writes the table as hive-partitioned Parquet: one file folder/<col>=<value>/…/<name>.parquet per combination of the `by` columns' values (those columns live in the folder names, as DuckDB's read_parquet(..., hive_partitioning = true) and polars' scan_parquet(..., hive_partitioning=True) expect), units in each file's metadata, each written through a temporary file and a rename. name defaults to \"part\"; in a batch run over many files give name: input_name so that files from different inputs (or concurrent shards) never collide. Values and names must be letters, digits, '.', '-' or '_'. Returns the paths written.")
            .param("folder", "the dataset's root folder (in a batch run, relative to the output folder)")
            .param("options", "map: by (array of column names), name")
            .example("table_from(#{site: [\"north\", \"south\"], flow_m3_s: [1.2, 3.4]}).write_partitioned(\"example-fleet\", #{by: [\"site\"]});")
            .source("the hive partition layout read by DuckDB and polars (their documentation)"),
        move |t: &mut Tbl, folder: &str, o: Map| -> Res<Array> {
            check_keys(&o, &["by", "name"], "write_partitioned")?;
            let by: Vec<String> = match field(&o, "by") {
                Some(d) => d
                    .clone()
                    .try_cast::<Array>()
                    .ok_or_else(|| rt("write_partitioned: by is an array of column names"))?
                    .iter()
                    .map(|c| text(c, "by"))
                    .collect::<Res<_>>()?,
                None => return Err(rt("write_partitioned: by (the columns to partition by) is required")),
            };
            let name = field(&o, "name").map(|d| text(d, "name")).transpose()?.unwrap_or_else(|| "part".into());
            let root = out_path(&pp, folder)?;
            let files = lib(stagna::io::table::write_hive_partitioned(&t.df, &root, &by, &name, &t.units))?;
            Ok(files.iter().map(|p| Dynamic::from(p.display().to_string())).collect())
        },
    );
}

fn view_map(v: &super::table_view::TableView) -> Map {
    let mut m = Map::new();
    m.insert("digits".into(), Dynamic::from(v.digits as i64));
    m.insert("rows".into(), Dynamic::from(v.rows as i64));
    m
}
