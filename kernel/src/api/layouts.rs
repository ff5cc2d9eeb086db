//! Traverse layouts in scripts: point positions, insertion depths, field sheets and
//! the US EPA Method 1 point counts.

use std::collections::BTreeMap;

use polars::prelude::{DataFrame, NamedFrom, Series};
use rhai::{Dynamic, Map};
use stagna::*;

use super::tables::{Tbl, perr};
use super::*;
use crate::catalog::Doc;

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<TraverseLayout>("Layout");
    r.group("Traverse layouts");
    layouts(r, prefs);
    points_table(r);
    annulus(r, prefs);
}

/// Layouts of round and rectangular sections and what they give.
fn layouts(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.func(
        "traverse_layout",
        &Doc::new("traverse_layout(conduit, options) -> Layout", "Traverse point positions and insertion depths. Round conduits: rule (\"equal-area\", \"log-linear\", \"log-chebyshev\"), points (per diameter, even), diameters (1–8), port_length. Rectangular: rule (\"equal-area\" or \"log-chebyshev\"), columns and rows (or total for the US EPA matrix), port_length.")
            .example("let l = traverse_layout(round_section(600.mm), #{rule: \"log-linear\", points: 10, diameters: 2, port_length: 80.mm});\nprint(l.field_sheet());")
            .source("ISO 3966:2008 §9 (log-linear, log-Chebyshev); US EPA Method 1 (equal-area, wall distances)"),
        |c: Conduit, o: Map| -> Res<TraverseLayout> {
            check_keys(&o, &["rule", "points", "diameters", "columns", "rows", "total", "port_length"], "traverse_layout")?;
            let rule = layout_rule(&field(&o, "rule").map(|d| text(d, "rule")).transpose()?.unwrap_or_else(|| "equal-area".into()))?;
            let port = match field(&o, "port_length") {
                Some(d) => length(d, "port_length")?,
                None => Length::m(0.0),
            };
            if c.is_circular() {
                let points = field(&o, "points").map(|d| count(d, "points")).transpose()?.unwrap_or(10);
                let lines = field(&o, "diameters").map(|d| count(d, "diameters")).transpose()?.unwrap_or(2);
                lib(TraverseLayout::circular(&c, rule, points, lines, port))
            } else if let Some(t) = field(&o, "total") {
                lib(TraverseLayout::rectangular_epa(&c, count(t, "total")?, port))
            } else if rule == LayoutRule::LogChebyshev && field(&o, "columns").is_none() {
                lib(TraverseLayout::rectangular_log_chebyshev(&c, port))
            } else {
                let cols = field(&o, "columns").map(|d| count(d, "columns")).transpose()?.unwrap_or(4);
                let rws = field(&o, "rows").map(|d| count(d, "rows")).transpose()?.unwrap_or(4);
                lib(TraverseLayout::rectangular(&c, rule, cols, rws, port))
            }
        },
    );
    r.engine.register_fn("to_string", |l: &mut TraverseLayout| {
        let mut s = format!("Layout: {}, {} line(s) × {} points on {}", l.rule, l.lines, l.per_line, l.conduit);
        for w in &l.warnings {
            s.push_str(&format!("\n  warning: {}", w.message));
        }
        s
    });
    r.method(
        "Layout",
        "field_sheet",
        &Doc::new("layout.field_sheet() -> string", "The field sheet: one line per point with its label, wall distance and insertion depth (port length added).")
            .example("print(traverse_layout(round_section(1.2.m), #{points: 8}).field_sheet());")
            .source("US EPA Method 1 Table 1-1 / ISO 3966 §9 positions"),
        |l: &mut TraverseLayout| l.field_table(),
    );
    r.property(
        "Layout",
        "warnings",
        &Doc::new("layout.warnings -> array", "Remarks (points moved away from the wall, ...).")
            .example("print(traverse_layout(round_section(250.mm), #{points: 12}).warnings);")
            .source("US EPA Method 1 §11.3"),
        |l: &mut TraverseLayout| warnings_of(&l.warnings),
    );
    r.property(
        "Layout",
        "len",
        &Doc::new(
            "layout.len -> integer",
            "Number of points (how many: `.len` on tables, columns, layouts and arrays alike).",
        )
        .example("print(traverse_layout(round_section(1.m), #{points: 8, diameters: 2}).len);")
        .source("common practice, no source"),
        |l: &mut TraverseLayout| l.points.len() as i64,
    );
    let p = prefs.clone();
    r.property(
        "Layout",
        "count",
        &Doc::new("layout.count -> integer", "Deprecated spelling of layout.len (number of points); works for this release, with a warning.")
            .example("print(traverse_layout(round_section(1.m), #{points: 8, diameters: 2}).len);")
            .source("common practice, no source"),
        move |l: &mut TraverseLayout| {
            super::warn_once(&p, "layout.count is deprecated and will be removed in the next release; write layout.len (the number of points)");
            l.points.len() as i64
        },
    );
    r.func(
        "epa_min_points",
        &Doc::new("epa_min_points(conduit, straight_upstream_D, straight_downstream_D) -> integer", "Minimum number of traverse points by US EPA Method 1 §11.2 for a site with the given straight lengths, in diameters: before the ports (from the nearest disturbance upstream, what the method calls the distance downstream of a disturbance) and after them (to the nearest disturbance downstream).")
            .example("print(epa_min_points(round_section(1.5.m), 6.0, 1.5));")
            .source("US EPA Method 1 (40 CFR 60 App. A-1) §11.2, Figure 1-1 (breakpoints from memory)"),
        |c: Conduit, down: Dynamic, up: Dynamic| -> Res<i64> {
            let m = lib(stagna::section::layout::epa_method1_points(
                &c,
                number(&down, "downstream diameters")?,
                number(&up, "upstream diameters")?,
                stagna::section::layout::TraversePurpose::Velocity,
            ))?;
            Ok(m.minimum as i64)
        },
    );
}

/// Equal-area points in an annulus.
fn annulus(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    let p = prefs.clone();
    r.func(
        "annulus_points",
        &Doc::new("annulus_points(outer_diameter, inner_diameter, points) -> Table", "Equal-area measuring points on one radius of an annulus (between a casing and a hub, e.g. upstream of an axial fan): the annulus split into `points` rings of equal area, each point on the radius that halves its ring, r_k = √(r_i² + (2k − 1)/(2n)(r_o² − r_i²)). Columns: point (from the hub out), radius_mm, from_outer_wall_mm, from_inner_wall_mm. Derived; a full circle (inner 0) gives the usual equal-area rule. Fewer than 4 points per radius draws a warning: ISO 5802 asks for at least 4 points on each of at least 6 radii in an annulus upstream of an axial fan (its own positions are log-linear; those were not read here, so this layout is the equal-area one).")
            .example("print(annulus_points(800.mm, 300.mm, 4));")
            .source("the equal-area rule with the hub's area taken away (derived); ISO 5802:2001 for the minimum of 4 points on each of 6 radii (read); its annulus positions not re-read"),
        move |outer: Dynamic, inner: Dynamic, n: i64| -> Res<Tbl> {
            if (1..section::layout::ISO5802_ANNULUS_MIN_POINTS as i64).contains(&n) {
                warn_once(&p, &format!("annulus_points: {n} points per radius; ISO 5802:2001 asks for at least {} on each of at least {} radii in an annulus upstream of an axial fan", section::layout::ISO5802_ANNULUS_MIN_POINTS, section::layout::ISO5802_ANNULUS_MIN_RADII));
            }
            let ro = si_of(&outer, units::dimension::Dimension::LENGTH, "outer diameter")?;
            let ri = si_of(&inner, units::dimension::Dimension::LENGTH, "inner diameter")?;
            let radii = lib(section::layout::annulus_equal_area_radii(Length::m(ro), Length::m(ri), n.max(0) as usize))?;
            let mm = |f: &dyn Fn(f64) -> f64| radii.iter().map(|r| 1000.0 * f(*r)).collect::<Vec<f64>>();
            let df = DataFrame::new_infer_height(vec![
                Series::new("point".into(), (1..=radii.len() as i64).collect::<Vec<_>>()).into(),
                Series::new("radius_mm".into(), mm(&|r| r)).into(),
                Series::new("from_outer_wall_mm".into(), mm(&|r| ro / 2.0 - r)).into(),
                Series::new("from_inner_wall_mm".into(), mm(&|r| r - ri / 2.0)).into(),
            ])
            .map_err(perr)?;
            let units: BTreeMap<String, String> =
                ["radius_mm", "from_outer_wall_mm", "from_inner_wall_mm"].iter().map(|c| (c.to_string(), "mm".to_string())).collect();
            Ok(Tbl { df, units })
        },
    );
}

/// A layout as a table.
fn points_table(r: &mut Registrar<'_>) {
    r.method(
        "Layout",
        "points",
        &Doc::new(
            "layout.points() -> Table",
            "The layout as a table: line, point, wall distance and insertion depth (mm), normalised position.",
        )
        .example(
            "print(traverse_layout(round_section(800.mm), #{points: 6, diameters: 2, port_length: 100.mm}).points());",
        )
        .source("US EPA Method 1 Table 1-1 / ISO 3966 §9 positions"),
        |l: &mut TraverseLayout| -> Res<Tbl> { layout_table(l) },
    );
}

fn layout_rule(s: &str) -> Res<LayoutRule> {
    match s.to_ascii_lowercase().replace(['_', ' '], "-").as_str() {
        "equal-area" | "centroid" => Ok(LayoutRule::EqualArea),
        "log-linear" => Ok(LayoutRule::LogLinear),
        "log-chebyshev" | "log-tchebycheff" => Ok(LayoutRule::LogChebyshev),
        _ => Err(rt(format!("layout rule: \"equal-area\", \"log-linear\" or \"log-chebyshev\", got \"{s}\""))),
    }
}

fn layout_table(l: &TraverseLayout) -> Res<Tbl> {
    use stagna::section::layout::Position;
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
