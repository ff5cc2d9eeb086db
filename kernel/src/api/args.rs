//! Argument conversions shared by every script package: numbers, quantities and
//! columns of a given dimension, option maps and text, each refusing a wrong value
//! with a message that names the argument and what to write instead.

use std::sync::Arc;

use rhai::{Array, Dynamic};
use stagna::units::dimension::Dimension;
use stagna::units::dimension::Dimension as D;
use stagna::units::quantity::format_number;
use stagna::{Length, Pressure, Temperature, Warning};

use super::fluids::State;
use super::{Col, DisplayUnits, Q, Res, SharedPrefs, UnitSystem, display_of, preferred_unit, rt};

/// A plain number from an int, a float or a dimensionless quantity.
pub fn number(d: &Dynamic, what: &str) -> Res<f64> {
    if let Ok(f) = d.as_float() {
        return Ok(f);
    }
    if let Ok(i) = d.as_int() {
        return Ok(i as f64);
    }
    if let Some(q) = d.clone().try_cast::<Q>()
        && q.q.dimension == Dimension::NONE
    {
        return Ok(q.q.si);
    }
    Err(rt(format!("{what}: expected a number, got {}", describe(d))))
}

/// A whole number ≥ 0.
pub fn count(d: &Dynamic, what: &str) -> Res<usize> {
    let v = number(d, what)?;
    if v >= 0.0 && v.fract() == 0.0 && v < 1e12 {
        Ok(v as usize)
    } else {
        Err(rt(format!("{what}: expected a whole number ≥ 0, got {}", format_number(v))))
    }
}

/// How a value looks in an error message.
pub fn describe(d: &Dynamic) -> String {
    if let Some(q) = d.clone().try_cast::<Q>() {
        let dim = q.q.dimension.name().unwrap_or("quantity");
        return format!("a {dim} ({})", q.show(&DisplayUnits::si()));
    }
    if let Some(c) = d.clone().try_cast::<Col>() {
        return format!("a column of {} ('{}')", c.dimension.name().unwrap_or("values"), c.name);
    }
    match d.type_name() {
        "i64" | "f64" => format!("the plain number {d} (no unit)"),
        "string" | "ImmutableString" => format!("the text \"{d}\""),
        t => format!("a value of type {}", t.rsplit("::").next().unwrap_or(t)),
    }
}

fn dim_name(d: Dimension) -> String {
    d.name().map(str::to_string).unwrap_or_else(|| stagna::units::quantity::si_symbol(d))
}

/// The SI value of a quantity argument of the given dimension. A plain number is refused
/// (unless the dimension is none), with the literal to write instead.
pub fn si_of(d: &Dynamic, dim: Dimension, what: &str) -> Res<f64> {
    if let Some(q) = d.clone().try_cast::<Q>() {
        if q.q.dimension != dim {
            return Err(rt(format!("{what} must be a {}, got {}", dim_name(dim), describe(d))));
        }
        return Ok(q.q.si);
    }
    if dim == Dimension::NONE {
        return number(d, what);
    }
    if d.is_int() || d.is_float() {
        let example = preferred_unit(dim, true, UnitSystem::Si).unwrap_or("unit");
        return Err(rt(format!(
            "{what} must be a {} with a unit, got the plain number {d}; write e.g. {d}.{} or qty(\"{d} {example}\")",
            dim_name(dim),
            example.replace(['/', '^', '*'], "_")
        )));
    }
    Err(rt(format!("{what} must be a {}, got {}", dim_name(dim), describe(d))))
}

/// A scalar or a whole column, in SI.
#[derive(Debug, Clone)]
pub enum Arg {
    /// One value for every row.
    Scalar(f64),
    /// One value per row.
    Column(Arc<Vec<f64>>),
}

impl Arg {
    /// Value at row i.
    #[inline]
    pub fn at(&self, i: usize) -> f64 {
        match self {
            Arg::Scalar(v) => *v,
            Arg::Column(c) => c[i],
        }
    }
    /// Number of rows, if a column.
    pub fn len(&self) -> Option<usize> {
        match self {
            Arg::Scalar(_) => None,
            Arg::Column(c) => Some(c.len()),
        }
    }
    /// The values as a full column of `n` rows.
    pub fn expand(&self, n: usize) -> Vec<f64> {
        match self {
            Arg::Scalar(v) => vec![*v; n],
            Arg::Column(c) => c.to_vec(),
        }
    }
}

/// A quantity or a column of the given dimension.
pub fn arg_of(d: &Dynamic, dim: Dimension, what: &str) -> Res<Arg> {
    if let Some(c) = d.clone().try_cast::<Col>() {
        if c.dimension != dim {
            return Err(rt(format!("{what} must be a {} column, got {}", dim_name(dim), describe(d))));
        }
        return Ok(Arg::Column(c.si));
    }
    si_of(d, dim, what).map(Arg::Scalar)
}

/// The common row count of several arguments (at least one must be a column).
pub fn rows(args: &[(&Arg, &str)]) -> Res<Option<usize>> {
    let mut n: Option<(usize, &str)> = None;
    for (a, name) in args {
        if let Some(len) = a.len() {
            match n {
                None => n = Some((len, name)),
                Some((m, first)) if m != len => {
                    return Err(rt(format!("columns of different lengths: {first} has {m} rows, {name} has {len}")));
                }
                _ => {}
            }
        }
    }
    Ok(n.map(|(n, _)| n))
}

/// Gets a field of an options map.
pub fn field<'a>(m: &'a rhai::Map, key: &str) -> Option<&'a Dynamic> {
    m.get(key).filter(|d| !d.is_unit())
}

/// Refuses keys an options map does not know, naming the allowed ones.
pub fn check_keys(m: &rhai::Map, allowed: &[&str], what: &str) -> Res<()> {
    for k in m.keys() {
        if !allowed.contains(&k.as_str()) {
            return Err(rt(format!("{what}: unknown option '{k}'; options are: {}", allowed.join(", "))));
        }
    }
    Ok(())
}

/// As [`check_keys`], also accepting deprecated spellings (not advertised).
pub fn check_keys_or_old(m: &rhai::Map, allowed: &[&str], old: &[&str], what: &str) -> Res<()> {
    for k in m.keys() {
        if !allowed.contains(&k.as_str()) && !old.contains(&k.as_str()) {
            return Err(rt(format!("{what}: unknown option '{k}'; options are: {}", allowed.join(", "))));
        }
    }
    Ok(())
}

/// Text of a string argument.
pub fn text(d: &Dynamic, what: &str) -> Res<String> {
    d.clone()
        .into_immutable_string()
        .map(|s| s.to_string())
        .map_err(|_| rt(format!("{what}: expected text, got {}", describe(d))))
}

/// An absolute temperature argument (a temperature difference is refused).
pub fn temperature(d: &Dynamic, what: &str) -> Res<Temperature> {
    if let Some(q) = d.clone().try_cast::<Q>()
        && q.q.dimension == D::TEMPERATURE
        && !q.q.absolute_temperature
    {
        return Err(rt(format!("{what} must be an absolute temperature (e.g. 20.degC), got a temperature difference")));
    }
    Ok(Temperature::kelvin(si_of(d, D::TEMPERATURE, what)?))
}

/// A length argument.
pub fn length(d: &Dynamic, what: &str) -> Res<Length> {
    Ok(Length::m(si_of(d, D::LENGTH, what)?))
}

/// A pressure argument.
pub fn pressure(d: &Dynamic, what: &str) -> Res<Pressure> {
    Ok(Pressure::pa(si_of(d, D::PRESSURE, what)?))
}

/// A fraction from a plain number in [0, 1] or a percentage quantity (45.percent).
pub fn fraction(d: &Dynamic, what: &str) -> Res<f64> {
    let v = number(d, what)?;
    if !(0.0..=1.0).contains(&v) {
        return Err(rt(format!("{what} is a fraction in [0, 1] (or write 45.percent), got {}", format_number(v))));
    }
    Ok(v)
}

/// The density argument of a manometer or probe: a density, a fluid state or a column.
pub fn density_arg(d: &Dynamic, what: &str) -> Res<Arg> {
    if let Some(s) = d.clone().try_cast::<State>() {
        return Ok(Arg::Scalar(s.s.density.si()));
    }
    arg_of(d, D::DENSITY, what)
}

/// Warnings as a script array of messages.
pub fn warnings_of(w: &[Warning]) -> Array {
    w.iter().map(|w| Dynamic::from(w.message.clone())).collect()
}

/// A quantity from its SI value, shown in the session's units.
pub fn show_q(v: f64, dim: D, p: &SharedPrefs) -> String {
    Q::si(v, dim).show(&display_of(p))
}

/// As [`show_q`], to `digits` significant figures.
pub fn show_q_sig(v: f64, dim: D, p: &SharedPrefs, digits: u32) -> String {
    Q::si(v, dim).show_sig(&display_of(p), digits)
}
