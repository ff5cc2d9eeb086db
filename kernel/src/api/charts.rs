//! Charts in scripts: velocity profiles, traverse cross-sections, campaign trends and
//! uncertainty budgets, saved as SVG or PNG and displayed by the kernel.

use rhai::Map;
use stagna::TraverseLayout;
use stagna::io::plot::{Chart, ProfileSeries};

use super::campaigns::Campaign;
use super::tables::{Tbl, out_path};
use super::*;
use crate::catalog::Doc;

/// A plot value: a chart or a traverse cross-section.
#[derive(Debug, Clone)]
pub enum Plot {
    /// A chart.
    Chart(Chart),
    /// A traverse layout drawing.
    Layout(Box<TraverseLayout>),
}

impl Plot {
    /// SVG text.
    pub fn svg(&self) -> stagna::Result<String> {
        match self {
            Plot::Chart(c) => c.to_svg(),
            Plot::Layout(l) => l.to_svg(),
        }
    }
    /// PNG bytes.
    pub fn png(&self) -> stagna::Result<Vec<u8>> {
        match self {
            Plot::Chart(c) => c.to_png(),
            Plot::Layout(l) => l.to_png(),
        }
    }
    /// A one-line description.
    pub fn describe(&self) -> String {
        match self {
            Plot::Chart(Chart::Profile { title, series, .. }) => {
                format!("Plot: velocity profile '{title}', {} series", series.len())
            }
            Plot::Chart(Chart::Trend { title, values, .. }) => {
                format!("Plot: trend '{title}', {} values", values.len())
            }
            Plot::Chart(Chart::Budget { title, shares }) => {
                format!("Plot: uncertainty budget '{title}', {} inputs", shares.len())
            }
            Plot::Layout(l) => format!("Plot: traverse layout, {} points", l.points.len()),
        }
    }
}

fn column_values(t: &Tbl, name: &str, display: &DisplayUnits) -> Res<(Vec<f64>, Option<String>)> {
    let c = t.column(name)?;
    match c.out_unit(display) {
        Some(u) => Ok((lib(c.values_in(&u))?, Some(u))),
        None => Ok((c.si.to_vec(), None)),
    }
}

/// An axis title from a column: the quantity in words (the column name without its
/// unit suffix, underscores as spaces) and the unit it is drawn in.
fn axis_label(name: &str, unit: &Option<String>) -> String {
    const SUFFIXES: [&str; 10] = ["_m3_s", "_m3_h", "_m_s", "_kg_s", "_kg_m3", "_pa", "_pct", "_mm", "_m", "_c"];
    let words = SUFFIXES.iter().find_map(|s| name.strip_suffix(s)).unwrap_or(name).replace('_', " ");
    let words = words.replace(" 20C 760mmHg", " at 20 °C, 760 mmHg").replace(" 0C 101.325kPa", " at 0 °C, 101.325 kPa");
    match unit {
        Some(u) => format!("{words} ({})", pretty_unit(u)),
        None => words,
    }
}

/// Registers charts.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Plot>("Plot");
    r.group("Charts");
    r.engine.register_fn("to_string", |p: &mut Plot| p.describe());
    profile_charts(r, prefs);
    trend_charts_and_output(r, prefs);
}

/// Velocity profiles with a fitted law.
fn profile_charts(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let p = prefs.clone();
    r.func(
        "profile_chart",
        &Doc::new("profile_chart(table, options) -> Plot", "Velocity profile: position against velocity, one series per value of the `by` column (a diameter, a line or a traverse). Options: x, y (column names), by, title; fit: true draws the least-squares power law u = U_c (1 − |r/R|)^(1/n) when x is r/R; model (a ProfileModel) with centre (a velocity) draws that law.")
            .example("let t = table_from(#{r: [-0.87, -0.5, 0.0, 0.5, 0.87], v: [9.1, 10.6, 11.9, 10.7, 9.0]}).unit(\"v\", \"m/s\");\nlet p = profile_chart(t, #{x: \"r\", y: \"v\", fit: true, title: \"AHU-2 supply\"});\nprint(p);")
            .source("power-law fit: least squares on ln u against ln(y/R) (common practice, no source)"),
        move |t: Tbl, o: Map| -> Res<Plot> {
            check_keys(&o, &["x", "y", "by", "title", "fit", "model", "centre"], "profile_chart")?;
            let display = super::display_of(&p);
            let x = text(field(&o, "x").ok_or_else(|| rt("profile_chart: option x (column) is required"))?, "x")?;
            let y = text(field(&o, "y").ok_or_else(|| rt("profile_chart: option y (column) is required"))?, "y")?;
            let (xs, xu) = column_values(&t, &x, &display)?;
            let (ys, yu) = column_values(&t, &y, &display)?;
            let mut series = Vec::new();
            match field(&o, "by") {
                Some(b) => {
                    let by = text(b, "by")?;
                    let keys = t.df.column(&by).map_err(|e| rt(format!("profile_chart: {e}")))?.cast(&polars::prelude::DataType::String).map_err(|e| rt(e.to_string()))?;
                    let keys = keys.str().map_err(|e| rt(e.to_string()))?.clone();
                    let mut order: Vec<String> = Vec::new();
                    for k in keys.iter() {
                        let k = k.unwrap_or("").to_string();
                        if !order.contains(&k) {
                            order.push(k);
                        }
                    }
                    for k in order {
                        let pts = (0..xs.len()).filter(|&i| keys.get(i).unwrap_or("") == k).map(|i| (xs[i], ys[i])).collect();
                        series.push(ProfileSeries { label: format!("{by} {k}"), points: pts });
                    }
                }
                None => series.push(ProfileSeries { label: y.clone(), points: xs.iter().copied().zip(ys.iter().copied()).collect() }),
            }
            let mut curves = Vec::new();
            let grid: Vec<f64> = (0..=100).map(|i| -1.0 + 2.0 * f64::from(i) / 100.0).collect();
            if field(&o, "fit").map(|d| d.as_bool().unwrap_or(false)).unwrap_or(false) {
                let (yr, u): (Vec<f64>, Vec<f64>) = xs.iter().zip(&ys).map(|(x, v)| (1.0 - x.abs(), *v)).filter(|(a, v)| *a > 0.0 && *v > 0.0).unzip();
                let f = lib(stagna::section::profile_analysis::fit_power_law(&yr, &u))?;
                curves.push(ProfileSeries {
                    label: format!("power-law fit n = {:.2} (R² = {:.3})", f.n, f.r_squared),
                    points: grid.iter().map(|&x| (x, f.centreline * (1.0 - x.abs()).max(0.0).powf(1.0 / f.n))).collect(),
                });
            }
            if let Some(m) = field(&o, "model") {
                let model: stagna::ProfileModel = m.clone().try_cast().ok_or_else(|| rt("profile_chart: model must be a ProfileModel"))?;
                let c = field(&o, "centre").ok_or_else(|| rt("profile_chart: a model needs centre (the centreline velocity)"))?;
                let uc_si = si_of(c, stagna::units::dimension::Dimension::VELOCITY, "centre")?;
                let uc = match &yu {
                    Some(u) => lib(stagna::Quantity { si: uc_si, dimension: stagna::units::dimension::Dimension::VELOCITY, absolute_temperature: false }.value_in(u))?,
                    None => uc_si,
                };
                curves.push(ProfileSeries { label: model.name(), points: grid.iter().map(|&x| (x, uc * model.velocity_ratio(x.abs()))).collect() });
            }
            let title = field(&o, "title").map(|d| text(d, "title")).transpose()?.unwrap_or_else(|| "velocity profile".into());
            Ok(Plot::Chart(Chart::Profile { title, x_label: axis_label(&x, &xu), y_label: axis_label(&y, &yu), series, curves }))
        },
    );
}

/// Flow per traverse with uncertainty bars, the layout drawing, SVG text and saving.
fn trend_charts_and_output(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let p = prefs.clone();
    r.func(
        "trend_chart",
        &Doc::new("trend_chart(campaign, options) -> Plot", "A campaign's flow (or another column of its traverses table) per traverse, with ±U bars (expanded uncertainty, labelled with its coverage factor and probability under the chart) when the reduction had an uncertainty spec. Options: y (column, default volume_flow_m3_s), title, from_zero (start the value axis at zero; default false).")
            .example("// after let c = reduce_campaign(t, spec):\n// trend_chart(c, #{title: \"AHU-2 supply\"}).save(\"trend.svg\");\nprint(\"see reduce_campaign\");")
            .source("common practice, no source"),
        move |c: Campaign, o: Map| -> Res<Plot> {
            check_keys(&o, &["y", "title", "from_zero"], "trend_chart")?;
            let from_zero = match field(&o, "from_zero") {
                None => false,
                Some(d) => d.as_bool().map_err(|_| rt("trend_chart: from_zero must be true or false"))?,
            };
            let display = super::display_of(&p);
            let df = &c.res.traverses;
            let y = field(&o, "y").map(|d| text(d, "y")).transpose()?.unwrap_or_else(|| "volume_flow_m3_s".into());
            let tbl = super::tables::with_result_units(df.clone(), Default::default());
            let (values, yu) = column_values(&tbl, &y, &display)?;
            // Error bars in the same unit as the plotted flows.
            let errors = match (&yu, df.column("U_flow_m3_s").is_ok() && y.ends_with("flow_m3_s")) {
                (Some(u), true) => Some(lib(tbl.column("U_flow_m3_s")?.values_in(u))?),
                _ => None,
            };
            let key = df.get_column_names()[0].to_string();
            let labels: Vec<String> = df
                .column(&key)
                .and_then(|s| s.cast(&polars::prelude::DataType::String))
                .map_err(|e| rt(e.to_string()))?
                .str()
                .map_err(|e| rt(e.to_string()))?
                .iter()
                .map(|s| s.unwrap_or("").to_string())
                .collect();
            let title = field(&o, "title").map(|d| text(d, "title")).transpose()?.unwrap_or_else(|| "flow per traverse".into());
            // What the bars are: ±U with the coverage factor(s) of the traverses.
            let error_label = match (&errors, df.column("k")) {
                (Some(_), Ok(k)) => {
                    let ks: Vec<f64> = k.f64().map_err(|e| rt(e.to_string()))?.into_no_null_iter().filter(|v| v.is_finite()).collect();
                    let (lo, hi) = ks.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| (a.min(v), b.max(v)));
                    let k = if ks.is_empty() {
                        "k as reduced".to_string()
                    } else if hi - lo < 0.005 {
                        format!("k = {lo:.2}")
                    } else {
                        format!("k = {lo:.2} to {hi:.2}")
                    };
                    let coverage = c.coverage.map(|p| format!(", {} % coverage", stagna::units::quantity::format_number(p * 100.0))).unwrap_or_default();
                    Some(format!("±U, expanded uncertainty of each traverse's flow ({k}{coverage}, GUM)"))
                }
                _ => None,
            };
            Ok(Plot::Chart(Chart::Trend { title, y_label: axis_label(&y, &yu), labels, values, errors, error_label, from_zero }))
        },
    );
    r.method(
        "Layout",
        "chart",
        &Doc::new("layout.chart() -> Plot", "The cross-section with its traverse lines, ports and numbered points.")
            .example("let p = traverse_layout(round_section(1.2.m), #{points: 8, diameters: 2}).chart();\nprint(p);")
            .source("positions as in traverse_layout"),
        |l: &mut TraverseLayout| Plot::Layout(Box::new(l.clone())),
    );
    r.method(
        "Plot",
        "svg",
        &Doc::new("plot.svg() -> string", "The plot as SVG text.")
            .example("print(traverse_layout(round_section(1.m), #{points: 4}).chart().svg().len() > 0);")
            .source("SVG 1.1 (W3C)"),
        |p: &mut Plot| -> Res<String> { lib(p.svg()) },
    );
    let pp = prefs.clone();
    r.method(
        "Plot",
        "save",
        &Doc::new("plot.save(path)", "Writes the plot as .svg or .png (by extension) through a temporary file and a rename; in a batch run relative paths go to the output folder.")
            .example("traverse_layout(round_section(1.m), #{points: 4}).chart().save(\"example-layout.svg\");")
            .source("SVG 1.1 (W3C); PNG (ISO/IEC 15948)"),
        move |p: &mut Plot, path: &str| -> Res<()> {
            let target = out_path(&pp, path)?;
            let ext = target.extension().and_then(|e| e.to_str()).unwrap_or("").to_ascii_lowercase();
            let bytes = match ext.as_str() {
                "svg" => lib(p.svg())?.into_bytes(),
                "png" => lib(p.png())?,
                _ => return Err(rt(format!("{path}: a plot is saved as .svg or .png"))),
            };
            lib(stagna::io::table::write_atomically(&target, |f| std::io::Write::write_all(f, &bytes)))
        },
    );
}
