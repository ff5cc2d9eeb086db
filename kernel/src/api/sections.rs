//! Measuring sections in scripts: round and rectangular conduits, area, hydraulic
//! diameter, Reynolds number and friction factor.

use rhai::{Array, Dynamic};
use stagna::units::dimension::Dimension as D;
use stagna::*;

use super::fluids::State;
use super::*;
use crate::catalog::Doc;

/// Registers the package.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Conduit>("Conduit");
    r.group("Conduits, profiles and flows");
    conduits(r, prefs);
}

/// Round and rectangular conduits and what they give.
fn conduits(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.func(
        "round_section",
        &Doc::new(
            "round_section(diameter) -> Conduit",
            "A circular section (duct, pipe, main or stack); pass an array of measured diameters to use their mean.",
        )
        .param("diameter", "inside diameter, or an array of diameters measured across different angles")
        .example("let d = round_section([600.mm, 602.mm, 599.mm]);\nprint(d.area);")
        .source("A = πD²/4"),
        |d: Dynamic| -> Res<Conduit> {
            if let Some(a) = d.clone().try_cast::<Array>() {
                let ds: Res<Vec<Length>> = a.iter().map(|x| length(x, "diameter")).collect();
                return lib(Conduit::circular_from_diameters(&ds?));
            }
            lib(Conduit::circular(length(&d, "diameter")?))
        },
    );
    r.func(
        "rect_section",
        &Doc::new(
            "rect_section(width, height) -> Conduit",
            "A rectangular section; the width is the side with the ports.",
        )
        .example("print(rect_section(1200.mm, 800.mm).hydraulic_diameter);")
        .source("A = W H; D_h = 4A/P"),
        |w: Dynamic, h: Dynamic| -> Res<Conduit> {
            lib(Conduit::rectangular(length(&w, "width")?, length(&h, "height")?))
        },
    );
    // Deprecated spellings (the sections are pipes and mains as much as ducts).
    let p = prefs.clone();
    r.func(
        "round_duct",
        &Doc::new("round_duct(diameter) -> Conduit", "Deprecated spelling of round_section(diameter); works for this release, with a warning.")
            .example("print(round_section(600.mm).area);")
            .source("A = πD²/4"),
        move |d: Dynamic| -> Res<Conduit> {
            super::warn_once(&p, "round_duct is deprecated and will be removed in the next release; write round_section (any round conduit: duct, pipe, main, stack)");
            if let Some(a) = d.clone().try_cast::<Array>() {
                let ds: Res<Vec<Length>> = a.iter().map(|x| length(x, "diameter")).collect();
                return lib(Conduit::circular_from_diameters(&ds?));
            }
            lib(Conduit::circular(length(&d, "diameter")?))
        },
    );
    let p = prefs.clone();
    r.func(
        "rect_duct",
        &Doc::new(
            "rect_duct(width, height) -> Conduit",
            "Deprecated spelling of rect_section(width, height); works for this release, with a warning.",
        )
        .example("print(rect_section(1200.mm, 800.mm).area);")
        .source("A = W H"),
        move |w: Dynamic, h: Dynamic| -> Res<Conduit> {
            super::warn_once(&p, "rect_duct is deprecated and will be removed in the next release; write rect_section");
            lib(Conduit::rectangular(length(&w, "width")?, length(&h, "height")?))
        },
    );
    r.method(
        "Conduit",
        "roughness",
        &Doc::new(
            "conduit.roughness(epsilon) -> Conduit",
            "The conduit with an equivalent sand-grain roughness (for friction and profile models).",
        )
        .example("print(round_section(400.mm).roughness(0.05.mm));")
        .source("equivalent roughness: Moody 1944 tables (values are the user's)"),
        |c: &mut Conduit, eps: Dynamic| -> Res<Conduit> { lib(c.clone().with_roughness(length(&eps, "roughness")?)) },
    );
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |c: &mut Conduit| {
        // The area once, in the session's display unit for areas.
        let text = c.to_string();
        let head = text.split(", A = ").next().unwrap_or(&text);
        format!("Conduit: {head}, A = {}", show_q_sig(c.area().si(), D::AREA, &p, 4))
    });
    r.property(
        "Conduit",
        "area",
        &Doc::new("conduit.area -> Quantity", "Cross-section area.")
            .example("print(round_section(600.mm).area);")
            .source("geometry"),
        |c: &mut Conduit| Q::si(c.area().si(), D::AREA),
    );
    r.property(
        "Conduit",
        "hydraulic_diameter",
        &Doc::new("conduit.hydraulic_diameter -> Quantity", "4A/P (the diameter itself for a circle).")
            .example("print(rect_section(1.m, 0.5.m).hydraulic_diameter);")
            .source("D_h = 4A/P"),
        |c: &mut Conduit| Q { q: c.hydraulic_diameter().into(), unit: Some("mm".into()) },
    );
    r.method(
        "Conduit",
        "reynolds",
        &Doc::new("conduit.reynolds(velocity, state) -> number", "Reynolds number ρVD_h/μ of a mean velocity.")
            .example("print(round_section(400.mm).reynolds(1.5.m_s, water().state(300.kPa, 12.degC)));")
            .source("Re = ρ V D_h / μ"),
        |c: &mut Conduit, v: Dynamic, s: State| -> Res<f64> {
            lib(c.reynolds(Velocity::m_s(si_of(&v, D::VELOCITY, "velocity")?), &s.s))
        },
    );
    r.method(
        "Conduit",
        "friction_factor",
        &Doc::new(
            "conduit.friction_factor(reynolds) -> number",
            "Darcy friction factor by the Colebrook equation (solved exactly), 64/Re when laminar.",
        )
        .example("print(round_section(400.mm).roughness(0.05.mm).friction_factor(5e5));")
        .source("Colebrook, J. ICE 11 (1939) 133–156"),
        |c: &mut Conduit, re: Dynamic| -> Res<f64> {
            Ok(lib(c.friction_factor(number(&re, "Reynolds number")?, FrictionModel::Colebrook))?.f)
        },
    );
}
