//! Quantities in scripts: unit suffixes on numbers (`64.mm`, `20.degC`, `1.2.kPa`),
//! `qty("3 inH2O@60F")`, arithmetic with dimension checks, conversion, comparison and
//! the session's display units.

use rhai::{Dynamic, Map};
use stagna::Quantity;
use stagna::units::unit;

use super::*;
use crate::catalog::Doc;

/// Identifier spellings of units for the number suffixes, with the unit string each
/// stands for (units whose names are not identifiers, or compounds).
pub const SUFFIX_ALIASES: &[(&str, &str)] = &[
    ("inch", "in"),
    ("inH2O_60F", "inH2O@60F"),
    ("inH2O_68F", "inH2O@68F"),
    ("inH2O_4C", "inH2O@4C"),
    ("mmH2O_4C", "mmH2O@4C"),
    ("mmH2O_20C", "mmH2O@20C"),
    ("mmHg_0C", "mmHg@0C"),
    ("inHg_32F", "inHg@32F"),
    ("inHg_60F", "inHg@60F"),
    ("mmHg_60F", "mmHg@60F"),
    ("m_s", "m/s"),
    ("ft_s", "ft/s"),
    ("ft_min", "ft/min"),
    ("m2", "m^2"),
    ("ft2", "ft^2"),
    ("m3", "m^3"),
    ("ft3", "ft^3"),
    ("m3_min", "m^3/min"),
    ("ft3_min", "ft^3/min"),
    ("m3_s", "m^3/s"),
    ("m3_h", "m^3/h"),
    ("L_s", "L/s"),
    ("L_min", "L/min"),
    ("kg_s", "kg/s"),
    ("kg_h", "kg/h"),
    ("lb_h", "lb/h"),
    ("kg_m3", "kg/m^3"),
    ("lb_ft3", "lb/ft^3"),
    ("g_mol", "g/mol"),
    ("kg_kmol", "kg/kmol"),
    ("Pa_s", "Pa*s"),
    ("m_s2", "m/s^2"),
];

pub fn is_ident(s: &str) -> bool {
    let mut c = s.chars();
    matches!(c.next(), Some(ch) if ch.is_ascii_alphabetic() || ch == '_')
        && c.all(|ch| ch.is_ascii_alphanumeric() || ch == '_')
        && !matches!(s, "in" | "fn" | "if" | "do" | "let" | "for" | "const")
}

/// How a unit is written after a number: its name where that is an identifier, else its
/// alias (`2.mmH2O_4C` for mmH2O@4C, `2.inch` for in). None for the pure number "1".
pub fn number_spellings(names: &[&str]) -> Vec<String> {
    let mut v: Vec<String> = Vec::new();
    for n in names {
        let s = if is_ident(n) {
            Some(n.to_string())
        } else {
            SUFFIX_ALIASES.iter().find(|(_, u)| u == n).map(|(a, _)| a.to_string())
        };
        if let Some(s) = s
            && !v.contains(&s)
        {
            v.push(s);
        }
    }
    v
}

/// Every suffix name with the unit string it means.
pub fn suffixes() -> Vec<(String, String)> {
    let mut v: Vec<(String, String)> =
        unit::unit_names().into_iter().filter(|n| is_ident(n)).map(|n| (n.to_string(), n.to_string())).collect();
    v.extend(SUFFIX_ALIASES.iter().map(|(a, u)| (a.to_string(), u.to_string())));
    v.sort();
    v.dedup();
    v
}

fn unit_source(u: &str) -> String {
    let base = u.split(['/', '*', '^', '@']).next().unwrap_or(u);
    unit::UNITS
        .iter()
        .find(|d| d.names.contains(&u) || d.names.contains(&base))
        .map(|d| d.source.to_string())
        .unwrap_or_else(|| "SI (BIPM SI Brochure, 9th ed.); temperature scales by definition".into())
}

fn same_dim(a: &Q, b: &Q, op: &str) -> Res<()> {
    if a.q.dimension != b.q.dimension {
        return Err(rt(format!(
            "cannot {op} {} and {}: different dimensions",
            describe(&Dynamic::from(a.clone())),
            describe(&Dynamic::from(b.clone()))
        )));
    }
    Ok(())
}

fn keep_unit(a: &Q, b: &Q) -> Option<std::sync::Arc<str>> {
    a.unit.clone().or_else(|| b.unit.clone())
}

/// `a × k` (or `a / k` when `divide`), refused when the result is not finite.
fn scale(a: &Q, k: f64, divide: bool) -> Res<Q> {
    let mut q = a.q;
    if q.absolute_temperature {
        q.absolute_temperature = false; // a scaled absolute temperature is not a temperature
    }
    q.si = if divide { q.si / k } else { q.si * k };
    if !q.si.is_finite() {
        let op = if divide { "/" } else { "×" };
        return Err(rt(format!(
            "{} {op} {}: the result is not a finite number (a division by zero or an overflow)",
            a.show(&DisplayUnits::si()),
            format_number(k)
        )));
    }
    Ok(Q { q, unit: if a.q.absolute_temperature { None } else { a.unit.clone() } })
}

/// `k / a`, refused when the result is not finite or its dimension out of range.
fn invert(k: f64, a: &Q) -> Res<Q> {
    Ok(Q { q: lib(Quantity::number(k).try_div(a.q))?, unit: None })
}

fn cmp(a: &Q, b: &Q) -> Res<std::cmp::Ordering> {
    same_dim(a, b, "compare")?;
    a.q.try_cmp(&b.q).map_err(rt)?.ok_or_else(|| rt("cannot compare NaN"))
}

/// Registers quantities.
pub fn register(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    r.engine.register_type_with_name::<Q>("Quantity");
    // Bare numbers print to ten significant figures (see `float_text`), in print, in
    // `${...}` and inside arrays and maps alike.
    r.engine.register_fn("to_string", |x: f64| super::float_text(x));
    r.engine.register_fn("to_debug", |x: f64| super::float_text(x));
    r.engine.register_fn("print", |x: f64| super::float_text(x));
    r.engine.register_fn("debug", |x: f64| super::float_text(x));
    r.group("Quantities and units");
    units_and_qty(r);
    display(r, prefs);
    members(r);
    arithmetic(r);
}

/// Unit suffixes on numbers and `qty`.
fn units_and_qty(r: &mut Registrar<'_>) {
    for (name, u) in suffixes() {
        let Ok(one) = Quantity::new(1.0, &u) else { continue };
        let uu: std::sync::Arc<str> = u.as_str().into();
        let (u1, u2) = (uu.clone(), uu.clone());
        r.engine.register_get(&name, move |v: &mut f64| -> Res<Q> {
            Ok(Q { q: lib(Quantity::new(*v, &u1))?, unit: Some(u1.clone()) })
        });
        r.engine.register_get(&name, move |v: &mut i64| -> Res<Q> {
            Ok(Q { q: lib(Quantity::new(*v as f64, &u2))?, unit: Some(u2.clone()) })
        });
        let dim = one.dimension.name().unwrap_or("quantity").to_string();
        let what = if one.absolute_temperature { "absolute temperature".to_string() } else { dim };
        r.unit(
            &name,
            &Doc::new(&format!("NUMBER.{name} -> Quantity"), &format!("A {what} in {}.", pretty_unit(&u)))
                .param("NUMBER", "an integer or decimal literal, a variable or a bracketed expression")
                .returns(&format!("Quantity shown in {}", pretty_unit(&u)))
                .example(&format!("let x = 2.{name};\nprint(x);"))
                .source(&unit_source(&u)),
        );
    }

    r.func(
        "qty",
        &Doc::new("qty(text) -> Quantity", "A quantity from text: a number and any unit the unit parser reads, including compounds and reference conditions.")
            .param("text", "e.g. \"3 inH2O@60F\", \"1.2 kPa\", \"20 °C\", \"850 m3/h\"")
            .returns("Quantity shown in the unit written")
            .example("let dp = qty(\"0.45 inH2O@60F\");\nprint(dp.to(\"Pa\"));")
            .source("unit factors: NIST SP 811 (2008) Appendix B.8; conventional water and mercury columns at the stated temperature"),
        |s: &str| -> Res<Q> {
            let q = lib(Quantity::parse(s))?;
            let unit = s.trim().trim_start_matches(|c: char| c.is_ascii_digit() || "+-.eE".contains(c)).trim();
            Ok(Q { q, unit: if unit.is_empty() { None } else { Some(unit.into()) } })
        },
    );
    r.func("qty", &Doc::new("qty(value, unit) -> Quantity", ""), |v: f64, u: &str| -> Res<Q> {
        lib(Q::with_unit(v, u))
    });
    r.func("qty", &Doc::new("qty(value, unit) -> Quantity", ""), |v: i64, u: &str| -> Res<Q> {
        lib(Q::with_unit(v as f64, u))
    });
}

/// Display units and conversion.
fn display(r: &mut Registrar<'_>, prefs: &SharedPrefs) {
    fn set(p: &SharedPrefs, f: impl FnOnce(&mut DisplayUnits)) {
        match p.write() {
            Ok(mut g) => f(&mut g.display),
            Err(e) => f(&mut e.into_inner().display),
        }
    }
    fn system_of(s: &str) -> Res<UnitSystem> {
        match s.to_ascii_uppercase().as_str() {
            "SI" => Ok(UnitSystem::Si),
            "US" | "USC" => Ok(UnitSystem::Us),
            _ => Err(rt(format!("display_units: the system is \"SI\" or \"US\", got \"{s}\""))),
        }
    }
    // Every unit is checked before any is kept: a bad one leaves the settings as they were.
    fn chosen(base: &DisplayUnits, units: &rhai::Array) -> Res<DisplayUnits> {
        let mut d = base.clone();
        for u in units {
            let u = u.clone().into_immutable_string().map_err(|t| {
                rt(format!("display_units: each unit is text such as \"m3/h\", got a value of type {t}"))
            })?;
            d.choose(&u).map_err(|e| rt(format!("display_units: {e}")))?;
        }
        Ok(d)
    }
    let doc = Doc::new(
        "display_units(system[, units]) / display_units(units) / display_units() -> Map",
        "Sets how quantities and columns without an explicit unit are shown in this session: the system \"SI\" (Pa, m, m/s, m³/s, kg/s, kg/m³, °C) or \"US\" (inH₂O at 60 °F, ft, ft/s, cfm, lb/h, lb/ft³, °F), and over it a unit per dimension: each unit in the array is used for its own dimension (\"m3/h\" for volume flows, \"ft/min\" for velocities, \"degC\" for temperatures, \"delta_K\" for temperature differences). Given a system, earlier per-dimension choices are dropped; given only units, they are added to the current settings. Values are stored in SI either way; a unit written on a value (`12.m3_h`, `.to(...)`) always wins. Returns the units in use, by dimension.",
    )
    .param("system", "\"SI\" or \"US\"")
    .param("units", "array of unit texts, one per dimension")
    .example("let flow = 5.m_s * 0.4.m2;         // a computed value follows the session\ndisplay_units(\"US\", [\"ft/min\", \"ft3/min\"]);\nprint(flow);                          // 4238 ft³/min\nprint(flow / 0.4.m2);                 // 984.3 ft/min\ndisplay_units(\"SI\", [\"m3/h\"]);\nprint(flow);                          // 7200 m³/h\nprint(display_units());\ndisplay_units(\"SI\");")
    .source("unit factors: NIST SP 811 (2008) Appendix B.8");
    let p = prefs.clone();
    r.func("display_units", &doc, move |s: &str| -> Res<Map> {
        let system = system_of(s)?;
        set(&p, |d| *d = DisplayUnits { system, chosen: Vec::new(), figures: d.figures });
        Ok(in_use(&super::prefs(&p).display))
    });
    let p = prefs.clone();
    r.func("display_units", &doc, move |s: &str, units: rhai::Array| -> Res<Map> {
        let system = system_of(s)?;
        let figures = super::prefs(&p).display.figures;
        let d = chosen(&DisplayUnits { system, chosen: Vec::new(), figures }, &units)?;
        set(&p, |g| *g = d);
        Ok(in_use(&super::prefs(&p).display))
    });
    let p = prefs.clone();
    r.func("display_units", &doc, move |units: rhai::Array| -> Res<Map> {
        let d = chosen(&super::prefs(&p).display, &units)?;
        set(&p, |g| *g = d);
        Ok(in_use(&super::prefs(&p).display))
    });
    let p = prefs.clone();
    r.func("display_units", &doc, move || -> Map { in_use(&super::prefs(&p).display) });

    let doc = Doc::new(
        "display_figures(digits) / display_figures() -> int",
        "Sets the significant figures quantities are shown to in this session (1 to 15; default 4, trailing zeros dropped, so 1.2 kg/m³ stays 1.2). Tables have their own setting (display_table), results with an uncertainty round to it (GUM 7.2.6), and worked steps keep six figures as guard digits. Values keep every digit. Returns the figures in use.",
    )
    .param("digits", "significant figures, 1 to 15")
    .example("let v = 13.23456.m_s;\nprint(v);                 // 13.23 m/s\ndisplay_figures(6);\nprint(v);                 // 13.2346 m/s\ndisplay_figures(4);")
    .source("common practice, no source");
    let p = prefs.clone();
    r.func("display_figures", &doc, move |n: i64| -> Res<i64> {
        if !(1..=15).contains(&n) {
            return Err(rt(format!("display_figures: digits must be 1 to 15, got {n}")));
        }
        set(&p, |d| d.figures = Some(n as u32));
        Ok(n)
    });
    let p = prefs.clone();
    r.func("display_figures", &doc, move || -> i64 { i64::from(super::prefs(&p).display.figures()) });

    let sig_doc = Doc::new("sig(value, digits) -> String", "A number or a quantity as text to the given number of significant figures (1 to 15), in the session's display unit for a quantity: for printing results at a sensible precision, e.g. an uncertainty to two figures (GUM 7.2.6). The value itself keeps every digit.")
        .param("value", "a number or a quantity")
        .param("digits", "significant figures")
        .example("print(sig(13467.71.m3_h, 3));   // 13500 m³/h\nprint(sig(0.0376817, 2));       // 0.038")
        .source("JCGM 100:2008 (GUM) §7.2.6 for uncertainties; common practice for values");
    fn digits_of(n: i64) -> Res<u32> {
        if (1..=15).contains(&n) { Ok(n as u32) } else { Err(rt(format!("sig: digits must be 1 to 15, got {n}"))) }
    }
    let p = prefs.clone();
    r.func("sig", &sig_doc, move |q: Q, n: i64| -> Res<String> {
        Ok(q.show_sig(&super::display_of(&p), digits_of(n)?))
    });
    r.func("sig", &sig_doc, |x: f64, n: i64| -> Res<String> {
        Ok(stagna::units::quantity::format_sig(x, digits_of(n)?))
    });
    r.func("sig", &sig_doc, |x: i64, n: i64| -> Res<String> {
        Ok(stagna::units::quantity::format_sig(x as f64, digits_of(n)?))
    });
    let p = prefs.clone();
    r.engine.register_fn("to_string", move |q: &mut Q| q.show(&super::display_of(&p)));
    let p = prefs.clone();
    r.engine.register_fn("to_debug", move |q: &mut Q| q.show(&super::display_of(&p)));

    r.method(
        "Quantity",
        "to",
        &Doc::new("q.to(unit) -> Quantity", "The same quantity shown in another unit of the same dimension.")
            .param("unit", "any compatible unit, e.g. \"mm\", \"inH2O@60F\", \"m3/h\"")
            .example("let d = 600.mm;\nprint(d.to(\"in\"));")
            .source("unit factors: NIST SP 811 (2008) Appendix B.8"),
        |q: &mut Q, u: &str| -> Res<Q> {
            lib(q.q.value_in(u))?;
            Ok(Q { q: q.q, unit: Some(u.into()) })
        },
    );
    r.method(
        "Quantity",
        "value_in",
        &Doc::new("q.value_in(unit) -> number", "The number of `unit`s in the quantity.")
            .param("unit", "any compatible unit")
            .example("print(1.2.kPa.value_in(\"inH2O@60F\"));")
            .source("unit factors: NIST SP 811 (2008) Appendix B.8"),
        |q: &mut Q, u: &str| -> Res<f64> { lib(q.q.value_in(u)) },
    );
}

/// What a quantity gives.
fn members(r: &mut Registrar<'_>) {
    r.property(
        "Quantity",
        "si",
        &Doc::new("q.si -> number", "The value in coherent SI units (Pa, m, m/s, K, ...).")
            .example("print(20.degC.si);")
            .source("SI (BIPM SI Brochure, 9th ed.)"),
        |q: &mut Q| q.q.si,
    );
    r.property(
        "Quantity",
        "value",
        &Doc::new("q.value -> number", "The number shown, in the quantity's display unit (SI if it has none).")
            .example("print(64.mm.value);")
            .source("common practice, no source"),
        |q: &mut Q| q.unit.as_deref().and_then(|u| q.q.value_in(u).ok()).unwrap_or(q.q.si),
    );
    r.property(
        "Quantity",
        "unit",
        &Doc::new("q.unit -> string", "The display unit (empty when it follows the session).")
            .example("print(64.mm.unit);")
            .source("common practice, no source"),
        |q: &mut Q| q.unit.as_deref().unwrap_or("").to_string(),
    );
    r.property(
        "Quantity",
        "dimension",
        &Doc::new("q.dimension -> string", "The dimension's name (pressure, length, velocity, ...).")
            .example("print(3.m_s.dimension);")
            .source("ISO 80000-1 quantity dimensions"),
        |q: &mut Q| {
            q.q.dimension
                .name()
                .map(str::to_string)
                .unwrap_or_else(|| stagna::units::quantity::si_symbol(q.q.dimension))
        },
    );
    r.method(
        "Quantity",
        "sqrt",
        &Doc::new("q.sqrt() -> Quantity", "Square root; the dimension's exponents must be even.")
            .example("print((4.m2).sqrt());")
            .source("ISO 80000-1"),
        |q: &mut Q| -> Res<Q> { Ok(Q { q: lib(q.q.sqrt())?, unit: None }) },
    );
    r.method(
        "Quantity",
        "abs",
        &Doc::new("q.abs() -> Quantity", "Magnitude (for differences and signed velocities).")
            .example("print((-3.Pa).abs());")
            .source("common practice, no source"),
        |q: &mut Q| -> Res<Q> {
            if q.q.absolute_temperature {
                return Err(rt("abs of an absolute temperature"));
            }
            let mut out = q.clone();
            out.q.si = out.q.si.abs();
            Ok(out)
        },
    );
}

/// Arithmetic and comparison with dimension checks.
fn arithmetic(r: &mut Registrar<'_>) {
    // Arithmetic with dimension checks.
    let e = &mut *r.engine;
    e.register_fn("+", |a: Q, b: Q| -> Res<Q> {
        same_dim(&a, &b, "add")?;
        let u = keep_unit(&a, &b);
        Ok(Q { q: lib(a.q.try_add(b.q))?, unit: u })
    });
    e.register_fn("-", |a: Q, b: Q| -> Res<Q> {
        same_dim(&a, &b, "subtract")?;
        let q = lib(a.q.try_sub(b.q))?;
        let u = if q.absolute_temperature == a.q.absolute_temperature { keep_unit(&a, &b) } else { None };
        Ok(Q { q, unit: u })
    });
    e.register_fn("-", |a: Q| -> Res<Q> {
        if a.q.absolute_temperature {
            return Err(rt("cannot negate an absolute temperature"));
        }
        Ok(Q { q: -a.q, unit: a.unit })
    });
    e.register_fn("*", |a: Q, b: Q| -> Res<Q> {
        if a.q.absolute_temperature || b.q.absolute_temperature {
            return Err(rt("cannot multiply an absolute temperature; use .si for kelvins"));
        }
        Ok(Q { q: lib(a.q.try_mul(b.q))?, unit: None })
    });
    e.register_fn("/", |a: Q, b: Q| -> Res<Q> {
        if a.q.absolute_temperature || b.q.absolute_temperature {
            return Err(rt("cannot divide an absolute temperature; use .si for kelvins"));
        }
        Ok(Q { q: lib(a.q.try_div(b.q))?, unit: None })
    });
    e.register_fn("*", |a: Q, k: f64| scale(&a, k, false));
    e.register_fn("*", |a: Q, k: i64| scale(&a, k as f64, false));
    e.register_fn("*", |k: f64, a: Q| scale(&a, k, false));
    e.register_fn("*", |k: i64, a: Q| scale(&a, k as f64, false));
    e.register_fn("/", |a: Q, k: f64| scale(&a, k, true));
    e.register_fn("/", |a: Q, k: i64| scale(&a, k as f64, true));
    e.register_fn("/", |k: f64, a: Q| invert(k, &a));
    e.register_fn("/", |k: i64, a: Q| invert(k as f64, &a));
    e.register_fn("**", |a: Q, n: i64| -> Res<Q> {
        if !(-8..=8).contains(&n) {
            return Err(rt(format!("{} ** {n}: quantity powers go from -8 to 8", a.show(&DisplayUnits::si()))));
        }
        if a.q.absolute_temperature {
            return Err(rt("cannot raise an absolute temperature to a power; use .si for kelvins"));
        }
        Ok(Q { q: lib(a.q.try_powi(n as i32))?, unit: None })
    });
    e.register_fn("==", |a: Q, b: Q| cmp(&a, &b).map(|o| o.is_eq()));
    e.register_fn("!=", |a: Q, b: Q| cmp(&a, &b).map(|o| o.is_ne()));
    e.register_fn("<", |a: Q, b: Q| cmp(&a, &b).map(|o| o.is_lt()));
    e.register_fn("<=", |a: Q, b: Q| cmp(&a, &b).map(|o| o.is_le()));
    e.register_fn(">", |a: Q, b: Q| cmp(&a, &b).map(|o| o.is_gt()));
    e.register_fn(">=", |a: Q, b: Q| cmp(&a, &b).map(|o| o.is_ge()));
    // A plain number beside a quantity, on either side, integer or not: the same clear
    // message (an integer used to fall through to the engine's "no function +").
    fn plain(op: &str, n: String, a: &Q) -> Res<Q> {
        let verb = if op == "+" { "add" } else { "subtract" };
        Err(rt(format!(
            "cannot {verb} a plain number ({n}) and {}; give the number a unit, e.g. {n}.{}",
            describe(&Dynamic::from(a.clone())),
            a.unit
                .as_deref()
                .map(|u| u.replace(['/', '^', '*', '@'], "_"))
                .or_else(|| preferred_unit(a.q.dimension, a.q.absolute_temperature, UnitSystem::Si)
                    .map(|u| u.replace(['/', '^', '*', '@'], "_")))
                .unwrap_or_else(|| "m".into())
        )))
    }
    for op in ["+", "-"] {
        e.register_fn(op, move |a: Q, b: f64| plain(op, format_number(b), &a));
        e.register_fn(op, move |a: Q, b: i64| plain(op, b.to_string(), &a));
        e.register_fn(op, move |b: f64, a: Q| plain(op, format_number(b), &a));
        e.register_fn(op, move |b: i64, a: Q| plain(op, b.to_string(), &a));
    }
}

/// The units in use, by dimension name (temperatures as `temperature` and
/// `temperature difference`).
fn in_use(d: &DisplayUnits) -> Map {
    use stagna::units::dimension::Dimension as D;
    let mut m = Map::new();
    m.insert("system".into(), Dynamic::from(if d.system == UnitSystem::Us { "US" } else { "SI" }));
    let dims = [
        D::PRESSURE,
        D::LENGTH,
        D::AREA,
        D::VELOCITY,
        D::VOLUME_FLOW,
        D::MASS_FLOW,
        D::DENSITY,
        D::DYNAMIC_VISCOSITY,
        D::ACCELERATION,
        D::MOLAR_MASS,
    ];
    for dim in dims.into_iter().chain(d.chosen.iter().map(|c| c.0)) {
        if dim == D::TEMPERATURE {
            continue;
        }
        if let (Some(name), Some(u)) = (dim.name(), d.unit_for(dim, false)) {
            m.insert(name.replace(' ', "_").into(), Dynamic::from(pretty_unit(u)));
        }
    }
    if let Some(u) = d.unit_for(D::TEMPERATURE, true) {
        m.insert("temperature".into(), Dynamic::from(pretty_unit(u)));
    }
    if let Some(u) = d.unit_for(D::TEMPERATURE, false) {
        m.insert("temperature_difference".into(), Dynamic::from(pretty_unit(u)));
    }
    m
}
