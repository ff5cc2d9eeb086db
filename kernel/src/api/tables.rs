//! Tables (polars DataFrames with declared column units), column expressions, whole
//! columns, and campaign reductions in scripts.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use polars::prelude::{
    DataFrame, DataType, Expr, IntoLazy, JoinArgs, JoinType, NamedFrom, RoundMode, Series, SortMultipleOptions, col,
    lit,
};
use rhai::{Array, Dynamic, Map};
use stagna::campaign::{CampaignColumns, CampaignResult, CampaignSpec, CampaignUncertainty, RectangularColumns};
use stagna::dimension::Dimension as D;
use stagna::flow_uncertainty::MethodTerm;
use stagna::{Averaging, Fluid, Manometer, Pressure, Probe, Quantity, TraverseLayout, Unit};

use super::domain::flow_options;
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

/// A column expression (polars), built in scripts and run by polars over the table.
#[derive(Debug, Clone)]
pub struct Ex(pub Expr);

/// A group-by in progress.
#[derive(Debug, Clone)]
pub struct Grouped {
    t: Tbl,
    keys: Vec<String>,
}

/// A campaign reduction's result.
#[derive(Debug, Clone)]
pub struct Campaign {
    /// The library result.
    pub res: CampaignResult,
}

/// The bundled demo tables (invented scenarios).
pub const DEMO_TABLES: &[(&str, &str, &str)] = &[
    (
        "larkfield-ahu2-supply.csv",
        "duct traverse, leisure-centre supply air",
        include_str!("../../../demo-data/larkfield-ahu2-supply.csv"),
    ),
    (
        "hollin-brook-main.csv",
        "water main, centreline readings",
        include_str!("../../../demo-data/hollin-brook-main.csv"),
    ),
    (
        "ashby-kiln-stack.csv",
        "stack traverse, S-type probe, three runs",
        include_str!("../../../demo-data/ashby-kiln-stack.csv"),
    ),
    (
        "tamworth-rig-profiles.csv",
        "air rig, profiles at 12 stations after a bend",
        include_str!("../../../demo-data/tamworth-rig-profiles.csv"),
    ),
];

fn perr(e: polars::error::PolarsError) -> Box<rhai::EvalAltResult> {
    rt(e.to_string())
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
        let raw = lib(stagna::table::float_column(&self.df, name))?;
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

    /// The table as text: a units line and the polars rendering.
    pub fn show(&self) -> String {
        let mut s = String::new();
        if !self.units.is_empty() {
            let u: Vec<String> = self.units.iter().map(|(k, v)| format!("{k} [{}]", pretty_unit(v))).collect();
            s.push_str(&format!("units: {}\n", u.join(", ")));
        }
        s.push_str(&format!("{}", self.df));
        s
    }

    /// The unit of a column as written in headers.
    pub fn unit_of(&self, name: &str) -> Option<&str> {
        self.units.get(name).map(String::as_str)
    }
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

fn expr_of(d: &Dynamic, what: &str) -> Res<Expr> {
    if let Some(e) = d.clone().try_cast::<Ex>() {
        return Ok(e.0);
    }
    if let Ok(s) = d.clone().into_immutable_string() {
        return Ok(col(s.as_str()));
    }
    if let Ok(f) = d.as_float() {
        return Ok(lit(f));
    }
    if let Ok(i) = d.as_int() {
        return Ok(lit(i));
    }
    Err(rt(format!("{what}: expected a column expression (col(\"name\")) or a column name, got {}", describe(d))))
}

fn exprs_of(d: &Dynamic, what: &str) -> Res<Vec<Expr>> {
    match d.clone().try_cast::<Array>() {
        Some(a) => a.iter().map(|x| expr_of(x, what)).collect(),
        None => Ok(vec![expr_of(d, what)?]),
    }
}

fn names_of(d: &Dynamic, what: &str) -> Res<Vec<String>> {
    match d.clone().try_cast::<Array>() {
        Some(a) => a.iter().map(|x| text(x, what)).collect(),
        None => Ok(vec![text(d, what)?]),
    }
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
        return lib(stagna::table::read_csv(&dir.join(file)));
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
fn numeric_column(df: &DataFrame, name: &str) -> Res<()> {
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
    [("_m3_s", "m^3/s"), ("_m_s", "m/s"), ("_kg_s", "kg/s"), ("_kg_m3", "kg/m^3"), ("_pa", "Pa"), ("_pct", "%")]
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

/// Builds a campaign spec from a script map and the table's declared units.
fn campaign_spec(t: &Tbl, o: &Map) -> Res<CampaignSpec> {
    check_keys(
        o,
        &[
            "fluid",
            "static_pressure",
            "manometer",
            "probe",
            "columns",
            "averaging",
            "min_points",
            "reference",
            "moisture",
            "wall_factor",
            "uncertainty",
        ],
        "campaign",
    )?;
    let need = |k: &str| field(o, k).ok_or_else(|| rt(format!("campaign: option '{k}' is required")));
    let fluid: Fluid = need("fluid")?
        .clone()
        .try_cast()
        .ok_or_else(|| rt("campaign: 'fluid' must be a Fluid (e.g. humid_air(0.45))"))?;
    let manometer: Manometer = need("manometer")?
        .clone()
        .try_cast()
        .ok_or_else(|| rt("campaign: 'manometer' must be a Manometer (e.g. u_tube(mercury()))"))?;
    let probe: Probe = need("probe")?
        .clone()
        .try_cast()
        .ok_or_else(|| rt("campaign: 'probe' must be a Probe (e.g. pitot_static(0.99))"))?;
    let static_pressure = Pressure::pa(si_of(need("static_pressure")?, D::PRESSURE, "campaign: static_pressure")?);
    let cols: Map =
        need("columns")?.clone().try_cast().ok_or_else(|| rt("campaign: 'columns' must be a map of column names"))?;
    check_keys(
        &cols,
        &[
            "traverse",
            "deflection",
            "fluid_temperature",
            "size",
            "position",
            "line",
            "gauge_temperature",
            "height",
            "across",
        ],
        "campaign columns",
    )?;
    let with_unit = |key: &str, dim: D| -> Res<Option<(String, Unit)>> {
        let Some(d) = field(&cols, key) else { return Ok(None) };
        let name = text(d, key)?;
        if t.df.column(&name).is_err() {
            return Err(rt(format!(
                "campaign: column '{name}' (for {key}) is not in the table; it has: {}",
                t.df.get_column_names().iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
            )));
        }
        let u = t.unit_of(&name).ok_or_else(|| {
            rt(format!(
                "campaign: column '{name}' (for {key}) has no unit; declare it with t.unit(\"{name}\", \"...\")"
            ))
        })?;
        let unit = lib(Unit::parse(u))?;
        if Quantity::from_unit(1.0, &unit).dimension != dim {
            return Err(rt(format!(
                "campaign: column '{name}' (for {key}) is in {u}, which is not a {}",
                dim.name().unwrap_or("quantity")
            )));
        }
        Ok(Some((name, unit)))
    };
    let req = |key: &str, dim: D| -> Res<(String, Unit)> {
        with_unit(key, dim)?.ok_or_else(|| rt(format!("campaign: columns.{key} is required")))
    };
    let rectangular = match (with_unit("height", D::LENGTH)?, with_unit("across", D::LENGTH)?) {
        (Some(height), Some(across)) => Some(RectangularColumns { height, across }),
        (None, None) => None,
        _ => return Err(rt("campaign: a rectangular conduit needs both columns.height and columns.across")),
    };
    let columns = CampaignColumns {
        traverse: text(
            field(&cols, "traverse").ok_or_else(|| rt("campaign: columns.traverse is required"))?,
            "traverse",
        )?,
        deflection: req("deflection", D::LENGTH)?,
        fluid_temperature: req("fluid_temperature", D::TEMPERATURE)?,
        size: req("size", D::LENGTH)?,
        rectangular,
        position: with_unit("position", D::LENGTH)?,
        line: field(&cols, "line").map(|d| text(d, "line")).transpose()?,
        gauge_temperature: with_unit("gauge_temperature", D::TEMPERATURE)?,
    };
    let averaging = match field(o, "averaging") {
        None => Averaging::Arithmetic,
        Some(d) if d.is_string() && text(d, "averaging")? == "arithmetic" => Averaging::Arithmetic,
        Some(d) => {
            Averaging::Integrate { wall_exponent: number(d, "averaging (\"arithmetic\" or a wall exponent m)")? }
        }
    };
    let min_points = field(o, "min_points").map(|d| count(d, "min_points")).transpose()?.unwrap_or(4);
    let mut fo = Map::new();
    for k in ["reference", "moisture", "wall_factor"] {
        if let Some(v) = field(o, k) {
            fo.insert(k.into(), v.clone());
        }
    }
    let flow = flow_options(&fo)?;
    let uncertainty = match field(o, "uncertainty") {
        None => None,
        Some(d) => {
            let u: Map = d.clone().try_cast().ok_or_else(|| rt("campaign: 'uncertainty' must be a map"))?;
            check_keys(
                &u,
                &["coefficient", "density", "diameter", "dp_rel", "dp_abs", "coverage", "rule"],
                "campaign uncertainty",
            )?;
            let rel = |k: &str, default: f64| -> Res<f64> {
                field(&u, k).map(|d| number(d, k)).transpose().map(|v| v.unwrap_or(default))
            };
            let rule = match field(&u, "rule") {
                Some(d) => match text(d, "rule")?.as_str() {
                    "log-linear" => stagna::LayoutRule::LogLinear,
                    "log-chebyshev" => stagna::LayoutRule::LogChebyshev,
                    _ => stagna::LayoutRule::EqualArea,
                },
                None => stagna::LayoutRule::EqualArea,
            };
            Some(CampaignUncertainty {
                coefficient_rel: rel("coefficient", 0.005)?,
                density_rel: rel("density", 0.002)?,
                diameter_rel: rel("diameter", 0.002)?,
                dp_rel: rel("dp_rel", 0.005)?,
                dp_abs_pa: field(&u, "dp_abs").map(|d| si_of(d, D::PRESSURE, "dp_abs")).transpose()?.unwrap_or(0.5),
                terms: MethodTerm::typical(rule),
                coverage: rel("coverage", 0.95)?,
            })
        }
    };
    Ok(CampaignSpec { columns, fluid, static_pressure, manometer, probe, averaging, min_points, flow, uncertainty })
}

macro_rules! expr_binops {
    ($e:expr, $( $op:literal => $f:expr ),* $(,)?) => {{
        $(
            $e.register_fn($op, |a: Ex, b: Ex| Ex($f(a.0, b.0)));
            $e.register_fn($op, |a: Ex, b: f64| Ex($f(a.0, lit(b))));
            $e.register_fn($op, |a: Ex, b: i64| Ex($f(a.0, lit(b))));
            $e.register_fn($op, |a: f64, b: Ex| Ex($f(lit(a), b.0)));
            $e.register_fn($op, |a: i64, b: Ex| Ex($f(lit(a), b.0)));
        )*
    }};
}

fn col_binop(a: &Col, b: &Col, op: char) -> Res<Col> {
    if a.si.len() != b.si.len() {
        return Err(rt(format!(
            "columns '{}' ({} rows) and '{}' ({} rows) differ in length",
            a.name,
            a.si.len(),
            b.name,
            b.si.len()
        )));
    }
    let (qa, qb) = (
        Quantity { si: 1.0, dimension: a.dimension, absolute_temperature: a.absolute_temperature },
        Quantity { si: 1.0, dimension: b.dimension, absolute_temperature: b.absolute_temperature },
    );
    let (dim, abs_t) = match op {
        '+' => {
            let q = lib(qa.try_add(qb))?;
            (q.dimension, q.absolute_temperature)
        }
        '-' => {
            let q = lib(qa.try_sub(qb))?;
            (q.dimension, q.absolute_temperature)
        }
        '*' => ((qa * qb).dimension, false),
        _ => ((qa / qb).dimension, false),
    };
    let v: Vec<f64> =
        a.si.iter()
            .zip(b.si.iter())
            .map(|(x, y)| match op {
                '+' => x + y,
                '-' => x - y,
                '*' => x * y,
                _ => x / y,
            })
            .collect();
    let unit = if matches!(op, '+' | '-') && abs_t == a.absolute_temperature { a.unit.clone() } else { None };
    Ok(Col { name: a.name.clone(), si: std::sync::Arc::new(v), dimension: dim, absolute_temperature: abs_t, unit })
}

fn col_scale(a: &Col, k: f64, q: Option<&Q>, divide: bool, q_first: bool) -> Res<Col> {
    let (dim, kk) = match q {
        Some(q) => {
            if q.q.absolute_temperature || a.absolute_temperature {
                return Err(rt("cannot multiply or divide absolute temperatures; use differences or .si"));
            }
            let unit = Quantity { si: 1.0, dimension: a.dimension, absolute_temperature: false };
            let d = if divide {
                if q_first { (q.q / unit).dimension } else { (unit / q.q).dimension }
            } else {
                (unit * q.q).dimension
            };
            (d, q.q.si)
        }
        None => {
            if a.absolute_temperature {
                return Err(rt("cannot scale an absolute temperature column"));
            }
            (a.dimension, k)
        }
    };
    let v: Vec<f64> =
        a.si.iter()
            .map(|x| match (divide, q_first) {
                (false, _) => x * kk,
                (true, false) => x / kk,
                (true, true) => kk / x,
            })
            .collect();
    let unit = if q.is_none() && !divide || q.is_none() && !q_first { a.unit.clone() } else { None };
    Ok(Col { name: a.name.clone(), si: std::sync::Arc::new(v), dimension: dim, absolute_temperature: false, unit })
}

fn col_stat(c: &Col, f: impl Fn(&[f64]) -> f64) -> Q {
    let v = f(&c.si);
    let q = Quantity { si: v, dimension: c.dimension, absolute_temperature: c.absolute_temperature };
    Q { q, unit: c.unit.clone() }
}

/// Registers tables, expressions, columns and campaigns.
#[allow(clippy::too_many_lines)]
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine
        .register_type_with_name::<Tbl>("Table")
        .register_type_with_name::<Ex>("Expr")
        .register_type_with_name::<Col>("Column")
        .register_type_with_name::<Grouped>("GroupBy")
        .register_type_with_name::<Campaign>("Campaign");
    r.group("Tables");

    let read_doc = |fmt: &str, fname: &str| {
        Doc::new(
            &format!("{fname}(path) -> Table"),
            &format!("Reads a {fmt} file into a table (column types inferred). Declare units with .unit()."),
        )
        .param("path", "file path, relative to the working directory")
        .example(&{
            let ext = if fmt == "CSV" { "csv" } else { "parquet" };
            format!("table_from(#{{h: [12.5, 14.0]}}).write(\"readings.{ext}\");\nlet t = {fname}(\"readings.{ext}\");\nprint(t.height);")
        })
        .source("polars readers (Apache Parquet, RFC 4180 CSV)")
    };
    r.func("read_csv", &read_doc("CSV", "read_csv"), |p: &str| -> Res<Tbl> {
        Ok(Tbl::new(lib(stagna::table::read_csv(Path::new(p)))?))
    });
    r.func("read_parquet", &read_doc("Parquet", "read_parquet"), |p: &str| -> Res<Tbl> {
        Ok(Tbl::new(lib(stagna::table::read_parquet(Path::new(p)))?))
    });
    r.func(
        "read_excel",
        &Doc::new("read_excel(path) -> Table\nread_excel(path, sheet) -> Table", "Reads one sheet of a workbook (xlsx, xlsm, xls, ods): the first sheet unless named. The first non-empty row holds the column names; all-number columns become numbers (empty cells NaN).")
            .param("sheet", "sheet name")
            .example("let t = read_excel(\"site-readings.xlsx\", \"traverse 1\");\nprint(t.unit(\"deflection_mm\", \"mm\")[\"deflection_mm\"]);")
            .source("calamine workbook reader (Office Open XML, ECMA-376; OpenDocument)"),
        |p: &str| -> Res<Tbl> { Ok(Tbl::new(lib(stagna::table::read_spreadsheet(Path::new(p), None))?)) },
    );
    r.func("read_excel", &Doc::new("read_excel(path, sheet) -> Table", ""), |p: &str, s: &str| -> Res<Tbl> {
        Ok(Tbl::new(lib(stagna::table::read_spreadsheet(Path::new(p), Some(s)))?))
    });
    r.func(
        "read_table",
        &Doc::new(
            "read_table(path) -> Table",
            "Reads a table by the file's extension: .csv, .parquet, .xlsx/.xls/.ods (first sheet).",
        )
        .example("table_from(#{h: [12.5]}).write(\"site.parquet\");\nlet t = read_table(\"site.parquet\");  // in a batch run: read_table(input)\nprint(t.columns);")
        .source("polars readers; calamine"),
        |p: &str| -> Res<Tbl> { Ok(Tbl::new(lib(stagna::table::read_table(Path::new(p)))?)) },
    );
    let pp = prefs.clone();
    r.func(
        "demo_table",
        &Doc::new("demo_table(name) -> Table", "One of the bundled demo tables (invented scenarios): \"larkfield-ahu2-supply\" (a duct traverse), \"hollin-brook-main\" (a water main), \"ashby-kiln-stack\" (a stack, S-type probe) or \"tamworth-rig-profiles\" (profiles after a bend).")
            .example("let t = demo_table(\"hollin-brook-main\");\nprint(t.height);")
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
    r.engine.register_fn("to_string", |t: &mut Tbl| t.show());
    r.engine.register_fn("to_debug", |t: &mut Tbl| t.show());
    r.method(
        "Table",
        "unit",
        &Doc::new("t.unit(column, unit) -> Table", "Declares the unit of a numeric column (values stay as read). Domain functions and t[column] then know its dimension.")
            .param("unit", "any unit the parser reads: \"mm\", \"degC\", \"hPa\", \"inH2O@60F\"")
            .example("let t = table_from(#{h: [12.5]}).unit(\"h\", \"mm\");\nprint(t[\"h\"].to(\"in\"));")
            .source("unit factors: NIST SP 811 (2008) Appendix B.8"),
        |t: &mut Tbl, c: &str, u: &str| -> Res<Tbl> {
            numeric_column(&t.df, c)?;
            lib(Unit::parse(u))?;
            let mut out = t.clone();
            out.units.insert(c.to_string(), u.to_string());
            Ok(out)
        },
    );
    r.method(
        "Table",
        "units",
        &Doc::new("t.units(map) -> Table", "Declares several column units at once.")
            .example("let t = demo_table(\"hollin-brook-main\").units(#{hg_deflection_mm: \"mm\", water_temp_c: \"degC\"});\nprint(t[\"water_temp_c\"].mean());")
            .source("unit factors: NIST SP 811 (2008) Appendix B.8"),
        |t: &mut Tbl, m: Map| -> Res<Tbl> {
            let mut out = t.clone();
            for (c, u) in &m {
                numeric_column(&t.df, c)?;
                let u = text(u, c)?;
                lib(Unit::parse(&u))?;
                out.units.insert(c.to_string(), u);
            }
            Ok(out)
        },
    );
    r.engine.register_indexer_get(|t: &mut Tbl, c: &str| t.column(c));
    r.property(
        "Table",
        "height",
        &Doc::new("t.height -> integer", "Number of rows.")
            .example("print(demo_table(\"hollin-brook-main\").height);")
            .source("common practice, no source"),
        |t: &mut Tbl| t.df.height() as i64,
    );
    r.property(
        "Table",
        "columns",
        &Doc::new("t.columns -> array", "Column names.")
            .example("print(demo_table(\"hollin-brook-main\").columns);")
            .source("common practice, no source"),
        |t: &mut Tbl| t.df.get_column_names().iter().map(|s| Dynamic::from(s.to_string())).collect::<Array>(),
    );
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
                    let unit = c.out_unit(super::prefs(&p).system);
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
            .example("print(demo_table(\"hollin-brook-main\").select([\"time\", \"water_temp_c\"]));")
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
            .example("print(demo_table(\"larkfield-ahu2-supply\").head(3));")
            .source("common practice, no source"),
        |t: &mut Tbl, n: i64| t.with_frame(t.df.head(Some(n.max(0) as usize))),
    );
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
    let pp = prefs.clone();
    r.method(
        "Table",
        "write",
        &Doc::new("t.write(path)", "Writes the table as CSV or Parquet (by extension) through a temporary file and a rename; in a batch run relative paths go to the output folder, and input files are never overwritten. Units go into a `<path>.units.csv` beside CSV output.")
            .example("table_from(#{a: [1.0]}).write(\"example-out.csv\");")
            .source("polars writers"),
        move |t: &mut Tbl, path: &str| -> Res<()> {
            let target = out_path(&pp, path)?;
            lib(stagna::table::write_table(&t.df, &target))?;
            if !t.units.is_empty() {
                let units = DataFrame::new_infer_height(vec![
                    Series::new("column".into(), t.units.keys().cloned().collect::<Vec<_>>()).into(),
                    Series::new("unit".into(), t.units.values().cloned().collect::<Vec<_>>()).into(),
                ])
                .map_err(perr)?;
                let mut up = target.clone().into_os_string();
                up.push(".units.csv");
                lib(stagna::table::write_csv(&units, Path::new(&up)))?;
            }
            Ok(())
        },
    );

    // ------------------------------------------------------------ expressions
    r.group("Column expressions");
    r.func(
        "col",
        &Doc::new("col(name) -> Expr", "A column expression: combine with + − × ÷, comparisons, & and |, and methods (sqrt, abs, mean, ...); run by polars over the table.")
            .example("let t = table_from(#{a: [1.0, 4.0, 9.0]});\nprint(t.with_column(\"r\", col(\"a\").sqrt() * 2));")
            .source("polars expressions"),
        |n: &str| Ex(col(n)),
    );
    r.func(
        "lit",
        &Doc::new("lit(value) -> Expr", "A constant as an expression.")
            .example("print(table_from(#{a: [1.0]}).with_column(\"k\", lit(2.5)));")
            .source("polars expressions"),
        |d: Dynamic| -> Res<Ex> { Ok(Ex(expr_of(&d, "lit")?)) },
    );
    let e = &mut *r.engine;
    expr_binops!(e,
        "+" => |a: Expr, b: Expr| a + b,
        "-" => |a: Expr, b: Expr| a - b,
        "*" => |a: Expr, b: Expr| a * b,
        "/" => |a: Expr, b: Expr| a / b,
        ">" => |a: Expr, b: Expr| a.gt(b),
        ">=" => |a: Expr, b: Expr| a.gt_eq(b),
        "<" => |a: Expr, b: Expr| a.lt(b),
        "<=" => |a: Expr, b: Expr| a.lt_eq(b),
        "==" => |a: Expr, b: Expr| a.eq(b),
        "!=" => |a: Expr, b: Expr| a.neq(b),
    );
    e.register_fn("&", |a: Ex, b: Ex| Ex(a.0.and(b.0)));
    e.register_fn("|", |a: Ex, b: Ex| Ex(a.0.or(b.0)));
    e.register_fn("-", |a: Ex| Ex(lit(0.0) - a.0));
    e.register_fn("==", |a: Ex, b: &str| Ex(a.0.eq(lit(b.to_string()))));
    e.register_fn("!=", |a: Ex, b: &str| Ex(a.0.neq(lit(b.to_string()))));
    e.register_fn("to_string", |a: &mut Ex| format!("Expr: {}", a.0));
    type ExprFn = fn(Expr) -> Expr;
    let simple: [(&str, &str, ExprFn); 13] = [
        ("sqrt", "Square root of each value.", |x| x.sqrt()),
        ("abs", "Absolute value of each value.", |x| x.abs()),
        ("exp", "e to the power of each value.", |x| x.exp()),
        ("ln", "Natural logarithm of each value.", |x| x.log(lit(std::f64::consts::E))),
        ("mean", "Mean (an aggregate).", |x| x.mean()),
        ("sum", "Sum (an aggregate).", |x| x.sum()),
        ("min", "Minimum (an aggregate).", |x| x.min()),
        ("max", "Maximum (an aggregate).", |x| x.max()),
        ("std", "Sample standard deviation, n − 1 (an aggregate).", |x| x.std(1)),
        ("median", "Median (an aggregate).", |x| x.median()),
        ("count", "Number of non-null values (an aggregate).", |x| x.count()),
        ("first", "First value (an aggregate).", |x| x.first()),
        ("last", "Last value (an aggregate).", |x| x.last()),
    ];
    for (name, summary, f) in simple {
        r.method(
            "Expr",
            name,
            &Doc::new(&format!("expr.{name}() -> Expr"), summary)
                .example(&format!("let t = table_from(#{{g: [\"a\", \"a\"], v: [4.0, 9.0]}});\nprint(t.group_by(\"g\").agg([col(\"v\").{name}()]));"))
                .source("polars expressions"),
            move |x: &mut Ex| Ex(f(x.0.clone())),
        );
    }
    r.method(
        "Expr",
        "alias",
        &Doc::new("expr.alias(name) -> Expr", "Names the result column.")
            .example("print(table_from(#{a: [1.0]}).select([(col(\"a\") * 2).alias(\"b\")]));")
            .source("polars expressions"),
        |x: &mut Ex, n: &str| Ex(x.0.clone().alias(n)),
    );
    r.method(
        "Expr",
        "pow",
        &Doc::new("expr.pow(exponent) -> Expr", "Each value to a power.")
            .example("print(table_from(#{a: [2.0]}).with_column(\"c\", col(\"a\").pow(3)));")
            .source("polars expressions"),
        |x: &mut Ex, p: Dynamic| -> Res<Ex> { Ok(Ex(x.0.clone().pow(expr_of(&p, "pow")?))) },
    );
    r.method(
        "Expr",
        "round",
        &Doc::new("expr.round(decimals) -> Expr", "Rounded to a number of decimals (half to even).")
            .example("print(table_from(#{a: [2.345]}).with_column(\"r\", col(\"a\").round(2)));")
            .source("polars expressions"),
        |x: &mut Ex, d: i64| Ex(x.0.clone().round(d.clamp(0, 15) as u32, RoundMode::HalfToEven)),
    );
    r.method(
        "Expr",
        "not",
        &Doc::new("expr.not() -> Expr", "Logical negation of a condition.")
            .example("print(table_from(#{a: [1.0, 2.0]}).filter((col(\"a\") > 1).not()));")
            .source("polars expressions"),
        |x: &mut Ex| Ex(x.0.clone().not()),
    );
    r.method(
        "Expr",
        "float",
        &Doc::new("expr.float() -> Expr", "Cast to 64-bit float.")
            .example("print(table_from(#{a: [1, 2]}).with_column(\"a\", col(\"a\").float()));")
            .source("polars expressions"),
        |x: &mut Ex| Ex(x.0.clone().cast(DataType::Float64)),
    );

    // ----------------------------------------------------------------- columns
    r.group("Columns");
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |c: &mut Col| c.show(super::prefs(&p).system));
    let p = prefs.clone();
    r.engine.register_fn("to_debug", move |c: &mut Col| c.show(super::prefs(&p).system));
    let e = &mut *r.engine;
    for op in ['+', '-', '*', '/'] {
        let s = op.to_string();
        e.register_fn(s.as_str(), move |a: Col, b: Col| col_binop(&a, &b, op));
        if op == '*' || op == '/' {
            let div = op == '/';
            e.register_fn(s.as_str(), move |a: Col, k: f64| col_scale(&a, k, None, div, false));
            e.register_fn(s.as_str(), move |a: Col, k: i64| col_scale(&a, k as f64, None, div, false));
            e.register_fn(s.as_str(), move |a: Col, q: Q| col_scale(&a, 1.0, Some(&q), div, false));
            e.register_fn(s.as_str(), move |k: f64, a: Col| col_scale(&a, k, None, div, true));
            e.register_fn(s.as_str(), move |q: Q, a: Col| col_scale(&a, 1.0, Some(&q), div, true));
        } else {
            e.register_fn(s.as_str(), move |a: Col, q: Q| -> Res<Col> {
                let n = a.si.len();
                let b = Col {
                    name: a.name.clone(),
                    si: std::sync::Arc::new(vec![q.q.si; n]),
                    dimension: q.q.dimension,
                    absolute_temperature: q.q.absolute_temperature,
                    unit: q.unit.clone(),
                };
                col_binop(&a, &b, op)
            });
        }
    }
    r.method(
        "Column",
        "to",
        &Doc::new("column.to(unit) -> Column", "The same column shown (and written) in another compatible unit.")
            .example("let t = table_from(#{h: [12.5, 14.0]}).unit(\"h\", \"mm\");\nprint(t[\"h\"].to(\"in\"));")
            .source("unit factors: NIST SP 811 (2008) Appendix B.8"),
        |c: &mut Col, u: &str| -> Res<Col> {
            lib(c.values_in(u))?;
            let mut out = c.clone();
            out.unit = Some(u.into());
            Ok(out)
        },
    );
    r.method(
        "Column",
        "values",
        &Doc::new(
            "column.values() -> array",
            "The values as numbers in the column's display unit (for small columns; domain work stays in columns).",
        )
        .example("print(table_from(#{h: [1.0, 2.0]}).unit(\"h\", \"mm\")[\"h\"].values());")
        .source("common practice, no source"),
        {
            let p = prefs.clone();
            move |c: &mut Col| -> Res<Array> {
                let v = match c.out_unit(super::prefs(&p).system) {
                    Some(u) => lib(c.values_in(&u))?,
                    None => c.si.to_vec(),
                };
                Ok(v.into_iter().map(Dynamic::from).collect())
            }
        },
    );
    r.method(
        "Column",
        "at",
        &Doc::new(
            "column.at(row) -> Quantity",
            "One value (rows counted from 0) as a quantity, for worked steps of a single reading.",
        )
        .example("let t = table_from(#{h: [41.5, 42.0]}).unit(\"h\", \"mm\");\nprint(t[\"h\"].at(0));")
        .source("common practice, no source"),
        |c: &mut Col, i: i64| -> Res<Q> {
            let v = *c
                .si
                .get(usize::try_from(i).unwrap_or(usize::MAX))
                .ok_or_else(|| rt(format!("row {i} of a column of {} rows", c.si.len())))?;
            Ok(Q {
                q: Quantity { si: v, dimension: c.dimension, absolute_temperature: c.absolute_temperature },
                unit: c.unit.clone(),
            })
        },
    );
    r.property(
        "Column",
        "len",
        &Doc::new("column.len -> integer", "Number of rows.")
            .example("print(table_from(#{h: [1.0, 2.0]})[\"h\"].len);")
            .source("common practice, no source"),
        |c: &mut Col| c.si.len() as i64,
    );
    type Stat = fn(&[f64]) -> f64;
    let stats: [(&str, &str, Stat); 5] = [
        ("mean", "Arithmetic mean, as a quantity.", |v| v.iter().sum::<f64>() / v.len() as f64),
        ("sum", "Sum, as a quantity (e.g. the flows of several branches).", |v| v.iter().sum::<f64>()),
        ("min", "Smallest value, as a quantity.", |v| v.iter().copied().fold(f64::INFINITY, f64::min)),
        ("max", "Largest value, as a quantity.", |v| v.iter().copied().fold(f64::NEG_INFINITY, f64::max)),
        ("std", "Sample standard deviation (n − 1), as a quantity.", |v| {
            let n = v.len() as f64;
            let m = v.iter().sum::<f64>() / n;
            (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt()
        }),
    ];
    for (name, summary, f) in stats {
        r.method(
            "Column",
            name,
            &Doc::new(&format!("column.{name}() -> Quantity"), summary)
                .example(&format!(
                    "let t = table_from(#{{v: [1.0, 2.0, 4.0]}}).unit(\"v\", \"m/s\");\nprint(t[\"v\"].{name}());"
                ))
                .source("common practice, no source"),
            move |c: &mut Col| -> Res<Q> {
                if c.si.is_empty() {
                    return Err(rt(format!("{name} of an empty column")));
                }
                let mut q = col_stat(c, f);
                if name == "std" || name == "sum" {
                    q.q.absolute_temperature = false;
                    if c.absolute_temperature {
                        q.unit = None;
                    }
                }
                Ok(q)
            },
        );
    }
    r.method(
        "Column",
        "sqrt_mean",
        &Doc::new("column.sqrt_mean(unit) -> number", "Mean of the square roots of the values expressed in `unit` (the average √Δp of US EPA Method 2, with Δp in mm H₂O or in. H₂O). Negative values are refused with their row.")
            .example("let t = table_from(#{dp: [100.0, 121.0]}).unit(\"dp\", \"Pa\");\nprint(t[\"dp\"].sqrt_mean(\"mmH2O\"));")
            .source("US EPA Method 2 (40 CFR 60 App. A-1) Eq. 2-7"),
        |c: &mut Col, unit: &str| -> Res<f64> { lib(stagna::epa::mean_sqrt_dp(&lib(c.values_in(unit))?)) },
    );
    r.method(
        "Table",
        "distinct",
        &Doc::new(
            "t.distinct(column) -> array",
            "The distinct values of a column as text, in first-seen order (e.g. the traverses of a campaign).",
        )
        .example("print(table_from(#{tr: [\"a\", \"a\", \"b\"]}).distinct(\"tr\"));")
        .source("common practice, no source"),
        |t: &mut Tbl, c: &str| -> Res<Array> {
            let s =
                t.df.column(c)
                    .map_err(|_| rt(format!("column '{c}': no such column")))?
                    .cast(&DataType::String)
                    .map_err(perr)?;
            let ca = s.str().map_err(perr)?;
            let mut seen: Vec<String> = Vec::new();
            for v in ca.iter() {
                let v = v.unwrap_or("").to_string();
                if !seen.contains(&v) {
                    seen.push(v);
                }
            }
            Ok(seen.into_iter().map(Dynamic::from).collect())
        },
    );

    // --------------------------------------------------------------- campaigns
    r.group("Campaign reductions");
    r.func(
        "reduce_campaign",
        &Doc::new("reduce_campaign(table, spec) -> Campaign", "Reduces every traverse in a table of readings in one pass in Rust: Δp, density and velocity per point, section mean, flows and (optionally) a GUM uncertainty per traverse. Column units come from the table's declared units. Traverses that fail are listed with the reason; the rest are reduced.")
            .param("spec", "map: fluid, static_pressure, manometer, probe, columns #{traverse, deflection, fluid_temperature, size, position?, line?, gauge_temperature?, height?, across?}, averaging (\"arithmetic\" or a wall exponent m), min_points, reference, moisture, wall_factor, uncertainty #{coefficient, density, diameter, dp_rel, dp_abs, coverage, rule}")
            .returns("Campaign (.traverses table, .failures)")
            .example("let t = table_from(#{tr: [\"T1\",\"T1\",\"T1\",\"T1\"], h: [20.0, 30.0, 30.0, 20.0], t: [20.0, 20.0, 20.0, 20.0], d: [500.0, 500.0, 500.0, 500.0], y: [33.5, 125.0, 375.0, 466.5]})\n    .units(#{h: \"mm\", t: \"degC\", d: \"mm\", y: \"mm\"});\nlet spec = #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0),\n    columns: #{traverse: \"tr\", deflection: \"h\", fluid_temperature: \"t\", size: \"d\", position: \"y\"}};\nprint(reduce_campaign(t, spec).traverses);")
            .source("velocity-area method, ISO 3966:2008 §9–10; point physics as in Manometer.dp and Probe.velocity"),
        |t: Tbl, o: Map| -> Res<Campaign> {
            let spec = campaign_spec(&t, &o)?;
            Ok(Campaign { res: lib(stagna::campaign::reduce_campaign(&t.df, &spec))? })
        },
    );
    r.func(
        "point_velocities",
        &Doc::new("point_velocities(table, spec) -> Table", "The table with dp_pa, density_kg_m3 and velocity_m_s per row, computed in Rust with the same spec as reduce_campaign (stops at the first bad row, naming it).")
            .example("let t = table_from(#{tr: [\"T1\",\"T1\"], h: [20.0, 30.0], t: [20.0, 20.0], d: [500.0, 500.0]}).units(#{h: \"mm\", t: \"degC\", d: \"mm\"});\nlet spec = #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0), columns: #{traverse: \"tr\", deflection: \"h\", fluid_temperature: \"t\", size: \"d\"}};\nprint(point_velocities(t, spec));")
            .source("as Manometer.dp and Probe.velocity"),
        |t: Tbl, o: Map| -> Res<Tbl> {
            let spec = campaign_spec(&t, &o)?;
            let df = lib(stagna::campaign::point_velocities(&t.df, &spec))?;
            Ok(with_result_units(df, t.units.clone()))
        },
    );
    r.engine.register_fn("to_string", |c: &mut Campaign| {
        let mut s =
            format!("Campaign: {} traverse(s) reduced, {} failed", c.res.traverses.height(), c.res.failures.len());
        for f in &c.res.failures {
            s.push_str(&format!("\n  traverse {}: {}", f.traverse, f.message));
        }
        s
    });
    r.property(
        "Campaign",
        "traverses",
        &Doc::new("campaign.traverses -> Table", "One row per reduced traverse: points, mean velocity, volume and mass flow, mean density, max velocity, flatness, reversed points; reference flows and uncertainty columns when asked. Units are declared.")
            .example("// see reduce_campaign\nprint(\"see reduce_campaign\");")
            .source("velocity-area method"),
        |c: &mut Campaign| with_result_units(c.res.traverses.clone(), BTreeMap::new()),
    );
    r.property(
        "Campaign",
        "failures",
        &Doc::new("campaign.failures -> array", "Traverses that could not be reduced: maps #{traverse, message}.")
            .example("// see reduce_campaign\nprint(\"see reduce_campaign\");")
            .source("common practice, no source"),
        |c: &mut Campaign| {
            c.res
                .failures
                .iter()
                .map(|f| {
                    let mut m = Map::new();
                    m.insert("traverse".into(), Dynamic::from(f.traverse.clone()));
                    m.insert("message".into(), Dynamic::from(f.message.clone()));
                    Dynamic::from(m)
                })
                .collect::<Array>()
        },
    );

    r.group("Traverse layouts");
    r.method(
        "Layout",
        "points",
        &Doc::new(
            "layout.points() -> Table",
            "The layout as a table: line, point, wall distance and insertion depth (mm), normalised position.",
        )
        .example(
            "print(traverse_layout(round_duct(800.mm), #{points: 6, diameters: 2, port_length: 100.mm}).points());",
        )
        .source("US EPA Method 1 Table 1-1 / ISO 3966 §9 positions"),
        |l: &mut TraverseLayout| -> Res<Tbl> { layout_table(l) },
    );
}

fn layout_table(l: &TraverseLayout) -> Res<Tbl> {
    use stagna::layout::Position;
    let n = l.points.len();
    let (mut line, mut label, mut wall, mut ins, mut a, mut b) = (
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
        Vec::with_capacity(n),
    );
    for p in &l.points {
        line.push(p.line as i64 + 1);
        label.push(p.label());
        wall.push(p.wall_distance.si() * 1e3);
        ins.push(p.insertion.si() * 1e3);
        match p.position {
            Position::Radial { r_over_r, angle_deg } => {
                a.push(r_over_r);
                b.push(angle_deg);
            }
            Position::Grid { x_over_w, y_over_h } => {
                a.push(x_over_w);
                b.push(y_over_h);
            }
        }
    }
    let (na, nb) = if l.conduit.is_circular() { ("r_over_R", "angle_deg") } else { ("x_over_W", "y_over_H") };
    let df = DataFrame::new_infer_height(vec![
        Series::new("line".into(), line).into(),
        Series::new("point".into(), label).into(),
        Series::new("wall_distance".into(), wall).into(),
        Series::new("insertion".into(), ins).into(),
        Series::new(na.into(), a).into(),
        Series::new(nb.into(), b).into(),
    ])
    .map_err(perr)?;
    let mut units = BTreeMap::new();
    units.insert("wall_distance".to_string(), "mm".to_string());
    units.insert("insertion".to_string(), "mm".to_string());
    Ok(Tbl { df, units })
}
