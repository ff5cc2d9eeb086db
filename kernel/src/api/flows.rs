//! Flows in scripts: section-mean velocity, and volume, mass, reference-condition and
//! dry-basis flows.

use rhai::{Dynamic, Map};
use stagna::units::dimension::Dimension as D;
use stagna::*;

use super::fluids::State;
use super::*;
use crate::catalog::Doc;

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<FlowResult>("Flow");
    r.group("Conduits, profiles and flows");
    flows(r, prefs);
    wall_exponent_fn(r);
}

/// Flows from a mean velocity, and the section mean from points.
fn flows(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.func(
        "flow",
        &Doc::new("flow(mean_velocity, conduit, state, options) -> Flow", "Volume and mass flow from a section-mean velocity; options: reference (\"normal\" 0 °C and 101.325 kPa, \"standard\" 15 °C and 101.325 kPa, \"epa\" 20 °C and 760 mmHg, \"us\" 60 °F and 14.696 psi), moisture (B_ws for the dry-basis flow), wall_factor (a number, US EPA Method 2H).")
            .example("let air = humid_air(0.4).state(101.kPa, 22.degC);\nlet f = flow(6.9.m_s, round_section(600.mm), air, #{reference: \"normal\"});\nprint(f);")
            .source("Q = U A; ṁ = ρ Q; ideal-gas correction to the reference condition; US EPA Method 2H for wall factors"),
        |v: Dynamic, c: Conduit, s: State, o: Map| -> Res<FlowResult> {
            let opts = flow_options(&o)?;
            lib(flow(Velocity::m_s(si_of(&v, D::VELOCITY, "mean velocity")?), &c, &s.s, &opts))
        },
    );
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |f: &mut FlowResult| {
        let mut s = format!(
            "Flow: mean velocity {}, Q = {}, ṁ = {}",
            show_q_sig(f.mean_velocity.si(), D::VELOCITY, &p, 4),
            show_q_sig(f.volume_flow.si(), D::VOLUME_FLOW, &p, 4),
            show_q_sig(f.mass_flow.si(), D::MASS_FLOW, &p, 4)
        );
        let at = f.reference.map(|r| r.label()).unwrap_or_default();
        if let Some(q) = f.reference_flow {
            s.push_str(&format!(", Q at {at} = {}", show_q_sig(q.si(), D::VOLUME_FLOW, &p, 4)));
        }
        if let Some(q) = f.dry_reference_flow {
            s.push_str(&format!(", dry Q at {at} = {}", show_q_sig(q.si(), D::VOLUME_FLOW, &p, 4)));
        }
        s
    });
    for (name, summary) in [
        ("volume_flow", "Volume flow at the measuring conditions."),
        ("mass_flow", "Mass flow."),
        ("reference_flow", "Volume flow at the reference condition (wet), or ()."),
        ("dry_reference_flow", "Dry-basis volume flow at the reference condition, or ()."),
    ] {
        r.property(
            "Flow",
            name,
            &Doc::new(&format!("flow.{name} -> Quantity"), summary)
                .example(&format!("let air = dry_air().state(101.kPa, 20.degC);\nprint(flow(5.m_s, round_section(1.m), air, #{{reference: \"normal\", moisture: 0.0}}).{name});"))
                .source("Q = U A; ideal-gas reference correction"),
            move |f: &mut FlowResult| -> Dynamic {
                let (v, dim) = match name {
                    "volume_flow" => (Some(f.volume_flow.si()), D::VOLUME_FLOW),
                    "mass_flow" => (Some(f.mass_flow.si()), D::MASS_FLOW),
                    "reference_flow" => (f.reference_flow.map(|q| q.si()), D::VOLUME_FLOW),
                    _ => (f.dry_reference_flow.map(|q| q.si()), D::VOLUME_FLOW),
                };
                v.map_or(Dynamic::UNIT, |v| Dynamic::from(Q::si(v, dim)))
            },
        );
    }

    r.func(
        "section_mean",
        &Doc::new("section_mean(wall_distance, velocity, conduit, options) -> Quantity", "Mean velocity of a round section from points on one or more diameters: the arithmetic mean (what equal-area and log-linear layouts are for) or numerical integration with a power-law wall region. Options: averaging (\"arithmetic\", a wall exponent m, e.g. 7, or \"wall-fit\": m fitted from the two points nearest the wall on each radius, see wall_exponent), line (a column of diameter numbers, when there are several).")
            .param("wall_distance", "distance of each point from the port-side wall (length column)")
            .param("velocity", "point velocities (velocity column)")
            .example("let t = table_from(#{y: [40.0, 140.0, 460.0, 560.0], v: [10.1, 11.8, 11.7, 10.0]}).units(#{y: \"mm\", v: \"m/s\"});\nprint(section_mean(t[\"y\"], t[\"v\"], round_section(600.mm), #{averaging: 7}));")
            .source("ISO 3966:2008 §9–10 (velocity-area integration)"),
        |y: Col, v: Col, c: Conduit, o: Map| -> Res<Q> {
            check_keys(&o, &["averaging", "line"], "section_mean")?;
            let (lines, positions) = radial_points(&y, &v, &c, &o, "section_mean")?;
            let averaging = match field(&o, "averaging") {
                None => Averaging::Arithmetic,
                Some(a) if a.is_string() => match text(a, "averaging")?.as_str() {
                    "arithmetic" => Averaging::Arithmetic,
                    "wall-fit" => Averaging::Integrate {
                        wall_exponent: lib(stagna::section::integration::wall_exponent(&lines, &positions, &v.si))?.m,
                    },
                    o => return Err(rt(format!("section_mean: averaging is \"arithmetic\", \"wall-fit\" or a wall exponent m, got \"{o}\""))),
                },
                Some(a) => Averaging::Integrate { wall_exponent: number(a, "averaging")? },
            };
            let m = lib(section_mean(&lines, &positions, &v.si, averaging))?;
            Ok(Q { q: m.mean.into(), unit: Some("m/s".into()) })
        },
    );
}

/// The line number and radial position of each point of a round section, from the points'
/// distances from the port-side wall (and an optional `line` column in `o`).
fn radial_points(y: &Col, v: &Col, c: &Conduit, o: &Map, what: &str) -> Res<(Vec<usize>, Vec<stagna::Position>)> {
    if y.dimension != D::LENGTH || v.dimension != D::VELOCITY {
        return Err(rt(format!(
            "{what}: wall distance must be a length column and velocity a velocity column (declare their units)"
        )));
    }
    let stagna::Section::Circular { diameter } = c.section else {
        return Err(rt(format!("{what}: a round conduit (rectangular sections: use reduce_campaign)")));
    };
    let d = diameter.si();
    let positions =
        y.si.iter().map(|s| stagna::Position::Radial { r_over_r: 2.0 * s / d - 1.0, angle_deg: 0.0 }).collect();
    let lines = match field(o, "line") {
        Some(l) => {
            let lc: Col = l.clone().try_cast().ok_or_else(|| rt(format!("{what}: line must be a column")))?;
            lc.si.iter().map(|x| x.max(0.0) as usize).collect()
        }
        None => vec![0; y.si.len()],
    };
    Ok((lines, positions))
}

/// Registers `wall_exponent` (called from `register`).
fn wall_exponent_fn(r: &mut Registrar<'_>) {
    r.func(
        "wall_exponent",
        &Doc::new("wall_exponent(wall_distance, velocity, conduit, options) -> map", "The wall-region exponent m of u ∝ y^(1/m) from measured points of a round section: on each radius the two points nearest the wall give m = ln(y_a/y_b) / ln(u_a/u_b); #{m (their mean), per_radius: [#{line, side, m}]}. Option: line (a column of diameter numbers). An m outside 4 … 20, or a velocity that does not rise away from the wall, is an error naming the radius.")
            .example("let t = table_from(#{y: [15.4, 67.8, 532.2, 584.6], v: [9.49, 11.72, 11.72, 9.49]}).units(#{y: \"mm\", v: \"m/s\"});\nprint(wall_exponent(t[\"y\"], t[\"v\"], round_section(600.mm), #{}));")
            .source("the power law's own ratio (derived); ISO 3966 has an annex on determining m near the wall (its formulas not re-read here)"),
        |y: Col, v: Col, c: Conduit, o: Map| -> Res<Map> {
            check_keys(&o, &["line"], "wall_exponent")?;
            let (lines, positions) = radial_points(&y, &v, &c, &o, "wall_exponent")?;
            let w = lib(stagna::section::integration::wall_exponent(&lines, &positions, &v.si))?;
            let mut m = Map::new();
            m.insert("m".into(), Dynamic::from(w.m));
            let per: rhai::Array = w
                .per_radius
                .iter()
                .map(|(l, side, m)| {
                    let mut e = Map::new();
                    e.insert("line".into(), Dynamic::from(*l as i64));
                    e.insert("side".into(), Dynamic::from(if *side { "port side" } else { "far side" }.to_string()));
                    e.insert("m".into(), Dynamic::from(*m));
                    Dynamic::from(e)
                })
                .collect();
            m.insert("per_radius".into(), Dynamic::from(per));
            Ok(m)
        },
    );
}

/// Flow options from a script map.
pub fn flow_options(o: &Map) -> Res<FlowOptions> {
    check_keys(o, &["reference", "moisture", "wall_factor"], "flow options")?;
    let reference = field(o, "reference").map(|d| text(d, "reference")).transpose()?;
    let reference = reference
        .map(|s| match s.to_ascii_lowercase().as_str() {
            "standard" | "iso" => lib(ReferenceCondition::parse("iso_15c")),
            "us" => lib(ReferenceCondition::parse("us_60f")),
            other => lib(ReferenceCondition::parse(other)),
        })
        .transpose()?;
    let moisture = field(o, "moisture").map(|d| fraction(d, "moisture")).transpose()?;
    let wall_factor = field(o, "wall_factor")
        .map(|d| number(d, "wall_factor").map(stagna::section::flow::WallFactor::Measured))
        .transpose()?;
    Ok(FlowOptions { reference, moisture, wall_factor })
}
