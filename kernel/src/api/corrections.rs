//! Local-velocity corrections and the probe's conditions of use in scripts (the kinds
//! ISO 3966 names), for the points of a round section.

use polars::prelude::{Column, DataFrame};
use rhai::{Dynamic, Map};
use stagna::section::local_corrections::{
    CorrectionOptions, GRADIENT_EPSILON, LocalCorrections, RoundTraverse, StemBlockage, WallProximity,
    local_corrections,
};
use stagna::units::dimension::Dimension as D;
use stagna::units::quantity::format_sig;
use stagna::*;

use super::fluids::State;
use super::tables::Tbl;
use super::*;
use crate::catalog::Doc;

const EXAMPLE: &str = "let t = table_from(#{y: [20.0, 80.0, 220.0, 380.0, 520.0, 580.0], v: [8.9, 10.6, 11.6, 11.6, 10.6, 8.9], tu: [7.0, 5.5, 4.0, 4.0, 5.5, 7.0]}).units(#{y: \"mm\", v: \"m/s\", tu: \"%\"});\nlet c = local_corrections(t[\"y\"], t[\"v\"], round_section(600.mm), #{head_diameter: 8.mm, turbulence: t[\"tu\"], gradient: true, wall_proximity: true});";

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<LocalCorrections>("LocalCorrections");
    r.group("Local corrections and conditions of use (ISO 3966)");
    let p = prefs.clone();
    r.func(
        "local_corrections",
        &Doc::new(
            "local_corrections(wall_distance, velocity, conduit, options) -> LocalCorrections",
            "Corrections of the velocities a pitot read at the points of a round section, each opt-in and reported per point, and the probe's conditions of use as checks. Options: head_diameter (the probe head's diameter d; needed by the gradient and wall corrections and the checks); turbulence (turbulence intensity per point: a column with its % unit such as sample_stats' turbulence_pct, or one fraction for all points): ū = u/√(1 + Tu²); gradient (true, or ε): the effective centre sits ε·d toward the higher velocity, ε = 0.15 recalled, made as u − ε·d·|du/dy| with du/dy from the neighbouring points (its size in wall turbulence is contested: a 1957 study found it negligible for a round Pitot in a turbulent boundary layer, so make it deliberately); wall_proximity (true, or #{a, b, reach}): Δu/u = a·exp(−b(y/d − 0.5)) within reach·d of a wall, a = 0.015, b = 3.5, reach 2 (recalled); blockage (the stem's diameter, or #{stem_diameter, k}): u·(1 − k·A_b/A) with A_b the stem to the point plus the head, k = 1 an upper bound (derived); state (a FluidState: the probe Reynolds number and Mach checks); line (a column of diameter numbers); head_ratio_limit (d/D, 0.02 recalled); reynolds_limit (200 recalled). Points within 2 d of a wall without the wall correction are named in a warning. Properties: velocity (the corrected column), factor (mean corrected ÷ mean read), checks, passed, warnings; methods table() and budget_term(fraction).",
        )
        .param("wall_distance", "distance of each point from the port-side wall, where the probe enters (length column)")
        .param("velocity", "velocity read at each point (velocity column)")
        .example(&format!("{EXAMPLE}\nprint(c);"))
        .source("ISO 3966 names these corrections and conditions (clause and annex titles read in the contents of the identical BS 1042-2.1:1983; formulas not re-read); turbulence and blockage derived; displacement and wall coefficients MacMillan 1957 (from memory, unverified); Mach ≤ 0.25 from ISO 3966:2020 §1 as published in its abstract"),
        move |y: Dynamic, v: Dynamic, c: Conduit, o: Map| -> Res<LocalCorrections> {
            let r = corrections(&y, &v, &c, &o)?;
            for w in &r.warnings {
                warn_once(&p, &w.message);
            }
            Ok(r)
        },
    );
    r.engine.register_fn("to_string", |c: &mut LocalCorrections| summary(c));
    r.property(
        "LocalCorrections",
        "velocity",
        &Doc::new(
            "corrections.velocity -> Column",
            "The velocities with every correction made (velocity column, in the points' order).",
        )
        .example(&format!("{EXAMPLE}\nprint(c.velocity);"))
        .source("as local_corrections"),
        |c: &mut LocalCorrections| -> Dynamic {
            Dynamic::from(Col::new(
                "velocity_corrected",
                c.points.iter().map(|p| p.corrected).collect(),
                D::VELOCITY,
                None,
            ))
        },
    );
    r.property(
        "LocalCorrections",
        "factor",
        &Doc::new("corrections.factor -> float", "Mean corrected velocity ÷ mean velocity read (arithmetic means over the points): the factor the corrections make on a section mean by the arithmetic rule.")
            .example(&format!("{EXAMPLE}\nprint(sig(c.factor, 5));"))
            .source("as local_corrections"),
        |c: &mut LocalCorrections| -> Dynamic { Dynamic::from(c.factor) },
    );
    r.property(
        "LocalCorrections",
        "checks",
        &Doc::new("corrections.checks -> Array", "The conditions of use, each a MethodCheck with its value, limit, verdict and source (saying when the limit is recalled, not read).")
            .example(&format!("{EXAMPLE}\nfor k in c.checks {{ print(k); }}"))
            .source("as local_corrections"),
        |c: &mut LocalCorrections| -> Dynamic { Dynamic::from(c.checks.iter().cloned().map(Dynamic::from).collect::<rhai::Array>()) },
    );
    r.property(
        "LocalCorrections",
        "passed",
        &Doc::new("corrections.passed -> bool", "Whether every condition of use passed.")
            .example(&format!("{EXAMPLE}\nprint(c.passed);"))
            .source("as local_corrections"),
        |c: &mut LocalCorrections| -> Dynamic { Dynamic::from(c.checks.iter().all(|k| k.pass)) },
    );
    r.property(
        "LocalCorrections",
        "warnings",
        &Doc::new("corrections.warnings -> Array", "Effects present but not corrected, and other notes, as sentences.")
            .example(&format!("{EXAMPLE}\nprint(c.warnings);"))
            .source("as local_corrections"),
        |c: &mut LocalCorrections| -> Dynamic {
            Dynamic::from(c.warnings.iter().map(|w| Dynamic::from(w.message.clone())).collect::<rhai::Array>())
        },
    );
    r.method(
        "LocalCorrections",
        "table",
        &Doc::new("corrections.table() -> Table", "Per point: line, distance from the port-side wall and from the nearer wall, the velocity read, the turbulence intensity used, each correction in % (turbulence, gradient, wall, blockage, total) and the corrected velocity.")
            .example(&format!("{EXAMPLE}\ndisplay(c.table());"))
            .source("as local_corrections"),
        |c: &mut LocalCorrections| -> Res<Tbl> { table(c) },
    );
    let term_doc = "The corrections as a budget term for traverse_budget's terms: #{value (the factor), u_rel, distribution: \"rectangular\", source}, with a half-width of `fraction` × the correction (0.5 when not given: common practice, no source). Put it in terms: #{local_corrections: c.budget_term()} so the budget's value carries the correction.";
    r.method(
        "LocalCorrections",
        "budget_term",
        &Doc::new("corrections.budget_term() -> map", term_doc)
            .example(&format!("{EXAMPLE}\nprint(c.budget_term());"))
            .source("GUM (JCGM 100:2008) §3.2.4 (a correction and its uncertainty); the fraction is common practice, no source"),
        |c: &mut LocalCorrections| -> Res<Map> { term_map(c, 0.5) },
    );
    r.method(
        "LocalCorrections",
        "budget_term",
        &Doc::new("corrections.budget_term(fraction) -> map", term_doc)
            .example(&format!("{EXAMPLE}\nprint(c.budget_term(1.0));"))
            .source("GUM (JCGM 100:2008) §3.2.4 (a correction and its uncertainty); the fraction is the script's"),
        |c: &mut LocalCorrections, f: Dynamic| -> Res<Map> { term_map(c, number(&f, "fraction")?) },
    );
}

fn corrections(y: &Dynamic, v: &Dynamic, c: &Conduit, o: &Map) -> Res<LocalCorrections> {
    const WHAT: &str = "local_corrections";
    check_keys(
        o,
        &[
            "head_diameter",
            "turbulence",
            "gradient",
            "wall_proximity",
            "blockage",
            "state",
            "line",
            "head_ratio_limit",
            "reynolds_limit",
        ],
        WHAT,
    )?;
    let y: Col = y.clone().try_cast().ok_or_else(|| rt(format!("{WHAT}: wall_distance must be a length column")))?;
    let v: Col = v.clone().try_cast().ok_or_else(|| rt(format!("{WHAT}: velocity must be a velocity column")))?;
    if y.dimension != D::LENGTH || v.dimension != D::VELOCITY {
        return Err(rt(format!(
            "{WHAT}: wall distance must be a length column and velocity a velocity column (declare their units)"
        )));
    }
    let stagna::Section::Circular { diameter } = c.section else {
        return Err(rt(format!("{WHAT}: a round conduit (the corrections here are for the radii of a round section)")));
    };
    let lines = match field(o, "line") {
        Some(l) => {
            let lc: Col = l.clone().try_cast().ok_or_else(|| rt(format!("{WHAT}: line must be a column")))?;
            lc.si.iter().map(|x| x.max(0.0) as usize).collect()
        }
        None => vec![0; y.si.len()],
    };
    let mut opts = CorrectionOptions {
        head_diameter: field(o, "head_diameter").map(|d| si_of(d, D::LENGTH, "head_diameter")).transpose()?,
        ..Default::default()
    };
    if let Some(t) = field(o, "turbulence") {
        opts.turbulence = Some(match arg_of(t, D::NONE, "turbulence")? {
            Arg::Scalar(x) => vec![x],
            Arg::Column(c) => c.to_vec(),
        });
    }
    opts.gradient = match field(o, "gradient") {
        None => None,
        Some(g) if g.is_bool() => g.as_bool().unwrap_or(false).then_some(GRADIENT_EPSILON),
        Some(g) => Some(number(g, "gradient (ε)")?),
    };
    opts.wall = match field(o, "wall_proximity") {
        None => None,
        Some(w) if w.is_bool() => w.as_bool().unwrap_or(false).then(WallProximity::default),
        Some(w) => {
            let m: Map = w
                .clone()
                .try_cast()
                .ok_or_else(|| rt(format!("{WHAT}: wall_proximity is true or #{{a, b, reach}}")))?;
            check_keys(&m, &["a", "b", "reach"], "local_corrections wall_proximity")?;
            let d = WallProximity::default();
            let get = |k: &str, x: f64| field(&m, k).map_or(Ok(x), |v| number(v, k));
            Some(WallProximity {
                amplitude: get("a", d.amplitude)?,
                decay: get("b", d.decay)?,
                reach: get("reach", d.reach)?,
            })
        }
    };
    opts.blockage = match field(o, "blockage") {
        None => None,
        Some(b) if b.is_map() => {
            let m: Map = b.clone().cast();
            check_keys(&m, &["stem_diameter", "k"], "local_corrections blockage")?;
            let ds = field(&m, "stem_diameter")
                .ok_or_else(|| rt(format!("{WHAT}: blockage needs stem_diameter")))
                .and_then(|d| si_of(d, D::LENGTH, "blockage.stem_diameter"))?;
            let k = field(&m, "k").map_or(Ok(1.0), |k| number(k, "blockage.k"))?;
            Some(StemBlockage { stem_diameter: ds, factor: k })
        }
        Some(b) => Some(StemBlockage { stem_diameter: si_of(b, D::LENGTH, "blockage (stem diameter)")?, factor: 1.0 }),
    };
    if let Some(x) = field(o, "head_ratio_limit") {
        opts.head_ratio_limit = number(x, "head_ratio_limit")?;
    }
    if let Some(x) = field(o, "reynolds_limit") {
        opts.reynolds_limit = number(x, "reynolds_limit")?;
    }
    let state: Option<State> = match field(o, "state") {
        Some(s) => Some(
            s.clone()
                .try_cast()
                .ok_or_else(|| rt(format!("{WHAT}: state must be a FluidState (fluid.state(p, t))")))?,
        ),
        None => None,
    };
    let t = RoundTraverse { diameter: diameter.si(), lines: &lines, from_port_wall: &y.si, velocity: &v.si };
    lib(local_corrections(&t, &opts, state.as_ref().map(|s| &s.s)))
}

fn table(c: &LocalCorrections) -> Res<Tbl> {
    let pct = |f: fn(&stagna::section::local_corrections::PointCorrection) -> f64| -> Vec<f64> {
        c.points.iter().map(|p| 100.0 * f(p)).collect()
    };
    let cols = vec![
        Column::new("line".into(), c.points.iter().map(|p| p.line as i64).collect::<Vec<_>>()),
        Column::new("from_port_wall".into(), c.points.iter().map(|p| p.from_port_wall * 1000.0).collect::<Vec<_>>()),
        Column::new("from_wall".into(), c.points.iter().map(|p| p.from_wall * 1000.0).collect::<Vec<_>>()),
        Column::new("velocity_read".into(), c.points.iter().map(|p| p.read).collect::<Vec<_>>()),
        Column::new("turbulence_intensity_pct".into(), pct(|p| p.turbulence_intensity)),
        Column::new("turbulence_pct".into(), pct(|p| p.turbulence)),
        Column::new("gradient_pct".into(), pct(|p| p.gradient)),
        Column::new("wall_pct".into(), pct(|p| p.wall)),
        Column::new("blockage_pct".into(), pct(|p| p.blockage)),
        Column::new("total_pct".into(), pct(|p| p.total())),
        Column::new("velocity_corrected".into(), c.points.iter().map(|p| p.corrected).collect::<Vec<_>>()),
    ];
    let mut t = Tbl::new(DataFrame::new_infer_height(cols).map_err(rt)?);
    for (k, u) in [
        ("from_port_wall", "mm"),
        ("from_wall", "mm"),
        ("velocity_read", "m/s"),
        ("turbulence_intensity_pct", "%"),
        ("turbulence_pct", "%"),
        ("gradient_pct", "%"),
        ("wall_pct", "%"),
        ("blockage_pct", "%"),
        ("total_pct", "%"),
        ("velocity_corrected", "m/s"),
    ] {
        t.units.insert(k.into(), u.into());
    }
    Ok(t)
}

fn term_map(c: &LocalCorrections, fraction: f64) -> Res<Map> {
    let t = lib(c.budget_term(fraction))?;
    let mut m = Map::new();
    m.insert("value".into(), Dynamic::from(t.value));
    m.insert("u_rel".into(), Dynamic::from(t.relative_u));
    m.insert("distribution".into(), Dynamic::from("rectangular".to_string()));
    m.insert("source".into(), Dynamic::from(t.source));
    Ok(m)
}

fn summary(c: &LocalCorrections) -> String {
    let mut s = format!("Local corrections over {} points: mean factor {}", c.points.len(), format_sig(c.factor, 5));
    let (lo, hi) =
        c.points.iter().map(|p| p.total()).fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| (a.min(x), b.max(x)));
    s.push_str(&format!(" (per point {} % to {} %)", format_sig(100.0 * lo, 2), format_sig(100.0 * hi, 2)));
    if c.applied.is_empty() {
        s.push_str("\n  no correction asked for (options turbulence, gradient, wall_proximity, blockage)");
    }
    for (name, source) in &c.applied {
        s.push_str(&format!("\n  {name}: {source}"));
    }
    for k in &c.checks {
        s.push_str(&format!("\n  {k}"));
    }
    for w in &c.warnings {
        s.push_str(&format!("\n  note: {}", w.message));
    }
    s
}
