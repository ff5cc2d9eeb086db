//! Units of measurement: a table of named units with their SI factors and
//! sources, and a parser for compound unit strings.
//!
//! # Syntax
//! A unit string is a product of unit names joined by `*`, `·` or `/`, each
//! optionally raised to an integer power with `^` (`kg/m^3`, `Pa*s`,
//! `m^3/h`). A name may also carry a trailing power digit (`m3/h`, `ft2`).
//! Liquid-column units name their reference condition after `@`
//! (`inH2O@60F`, `mmH2O@4C`, `inHg@32F`); without `@` they are the
//! conventional units (water 1000 kg/m³, mercury 13 595.1 kg/m³, with g_n).
//! Temperature names on their own (`degC`, `°F`, `K`) are absolute
//! temperatures; `delta_degC`, `delta_degF`, `delta_K` are differences. Inside
//! a compound unit only `K` and `degR` are allowed, as thermodynamic
//! temperature.
//!
//! # References
//! - NIST SP 811 (2008), *Guide for the Use of the International System of
//!   Units*, Appendix B.8 (factors listed alphabetically) and B.9 (by kind).
//! - SI Brochure, 9th ed. (2019), prefixes and non-SI units accepted for use.
//! - ISO 80000-4:2019, conventional millimetre of mercury.

use crate::error::{Error, Result};
use crate::units::dimension::Dimension;
use crate::{constants::STANDARD_GRAVITY, constants::ZERO_CELSIUS};

/// How a unit relates to SI: `si = value * factor + offset`.
#[derive(Debug, Clone, PartialEq)]
pub struct Unit {
    /// The unit as the user spelled it (kept for display).
    pub symbol: String,
    /// Multiply a value in this unit by `factor` (then add `offset`) to get SI.
    pub factor: f64,
    /// Additive offset to SI (non-zero only for °C and °F absolute temperatures).
    pub offset: f64,
    /// Dimension of the unit.
    pub dimension: Dimension,
    /// True when the unit measures absolute temperature (K, °C, °F, °R alone).
    pub absolute_temperature: bool,
}

/// One named unit in the table.
#[derive(Debug, Clone, Copy)]
pub struct UnitDef {
    /// Accepted spellings; the first is the canonical one.
    pub names: &'static [&'static str],
    /// SI value of one unit.
    pub factor: f64,
    /// Dimension.
    pub dimension: Dimension,
    /// What it is, in words.
    pub description: &'static str,
    /// Definition or source of the factor.
    pub source: &'static str,
}

const INCH: f64 = 0.0254; // exact, international inch (1959); NIST SP 811 B.8
const FOOT: f64 = 0.3048; // exact, international foot (1959); NIST SP 811 B.8
const POUND: f64 = 0.453_592_37; // exact, avoirdupois pound (1959); NIST SP 811 B.8
const US_GALLON: f64 = 3.785_411_784e-3; // exact, 231 in³; NIST SP 811 B.8
/// Density of water at 20 °C and 101 325 Pa, kg/m³, by Tanaka et al. (2001),
/// Metrologia 38, 301, eq. 1 (SMOW, air-free); used only to define the
/// 68 °F / 20 °C water-column units, which NIST SP 811 does not list.
pub(crate) const WATER_20C_TANAKA: f64 = 998.206_7;

use Dimension as D;

/// The unit table. Factors are exact by definition unless the source says otherwise.
#[rustfmt::skip]
pub const UNITS: &[UnitDef] = &[
    // pressure
    UnitDef { names: &["Pa"], factor: 1.0, dimension: D::PRESSURE, description: "pascal", source: "SI" },
    UnitDef { names: &["kPa"], factor: 1e3, dimension: D::PRESSURE, description: "kilopascal", source: "SI prefix" },
    UnitDef { names: &["hPa"], factor: 1e2, dimension: D::PRESSURE, description: "hectopascal", source: "SI prefix" },
    UnitDef { names: &["MPa"], factor: 1e6, dimension: D::PRESSURE, description: "megapascal", source: "SI prefix" },
    UnitDef { names: &["mbar"], factor: 1e2, dimension: D::PRESSURE, description: "millibar", source: "NIST SP 811 B.8: 1 bar = 1e5 Pa" },
    UnitDef { names: &["bar"], factor: 1e5, dimension: D::PRESSURE, description: "bar", source: "NIST SP 811 B.8" },
    UnitDef { names: &["atm"], factor: 101_325.0, dimension: D::PRESSURE, description: "standard atmosphere", source: "NIST SP 811 B.8 (exact)" },
    UnitDef { names: &["psi"], factor: POUND * STANDARD_GRAVITY / (INCH * INCH), dimension: D::PRESSURE, description: "pound-force per square inch", source: "NIST SP 811 B.8 (6.894 757 E+03 Pa); exact from lb, g_n, in" },
    UnitDef { names: &["torr", "Torr"], factor: 101_325.0 / 760.0, dimension: D::PRESSURE, description: "torr (1/760 atm)", source: "NIST SP 811 B.8" },
    UnitDef { names: &["mmH2O"], factor: 1e-3 * 1000.0 * STANDARD_GRAVITY, dimension: D::PRESSURE, description: "millimetre of water, conventional (1000 kg/m³, g_n)", source: "NIST SP 811 B.8 (9.806 65 Pa)" },
    UnitDef { names: &["inH2O"], factor: INCH * 1000.0 * STANDARD_GRAVITY, dimension: D::PRESSURE, description: "inch of water, conventional (1000 kg/m³, g_n)", source: "NIST SP 811 B.8 (2.490 889 E+02 Pa)" },
    UnitDef { names: &["mmH2O@4C", "mmH2O@39.2F"], factor: 9.806_38, dimension: D::PRESSURE, description: "millimetre of water at 4 °C", source: "NIST SP 811 B.8: centimeter of water (4 °C) = 98.0638 Pa" },
    UnitDef { names: &["inH2O@39.2F", "inH2O@4C"], factor: 249.082, dimension: D::PRESSURE, description: "inch of water at 39.2 °F", source: "NIST SP 811 B.8 (2.490 82 E+02 Pa)" },
    UnitDef { names: &["inH2O@60F"], factor: 248.84, dimension: D::PRESSURE, description: "inch of water at 60 °F", source: "NIST SP 811 B.8 (2.4884 E+02 Pa)" },
    UnitDef { names: &["inH2O@68F", "inH2O@20C"], factor: INCH * WATER_20C_TANAKA * STANDARD_GRAVITY, dimension: D::PRESSURE, description: "inch of water at 68 °F (20 °C)", source: "derived: water density at 20 °C by Tanaka et al. 2001 (998.2067 kg/m³) × g_n × 1 in" },
    UnitDef { names: &["mmH2O@20C", "mmH2O@68F"], factor: 1e-3 * WATER_20C_TANAKA * STANDARD_GRAVITY, dimension: D::PRESSURE, description: "millimetre of water at 20 °C", source: "derived: water density at 20 °C by Tanaka et al. 2001 (998.2067 kg/m³) × g_n × 1 mm" },
    UnitDef { names: &["mmHg"], factor: 133.322_387_415, dimension: D::PRESSURE, description: "millimetre of mercury, conventional (13 595.1 kg/m³, g_n)", source: "ISO 80000-4:2019; NIST SP 811 B.8 (1.333 224 E+02 Pa)" },
    UnitDef { names: &["mmHg@0C", "mmHg@32F"], factor: 133.322, dimension: D::PRESSURE, description: "millimetre of mercury at 0 °C", source: "NIST SP 811 B.8: centimeter of mercury (0 °C) = 1.333 22 E+03 Pa" },
    UnitDef { names: &["inHg"], factor: 3_386.389, dimension: D::PRESSURE, description: "inch of mercury, conventional", source: "NIST SP 811 B.8 (3.386 389 E+03 Pa)" },
    UnitDef { names: &["inHg@32F", "inHg@0C"], factor: 3_386.38, dimension: D::PRESSURE, description: "inch of mercury at 32 °F", source: "NIST SP 811 B.8 (3.386 38 E+03 Pa)" },
    UnitDef { names: &["mmHg@60F"], factor: 3_376.85 / 25.4, dimension: D::PRESSURE, description: "millimetre of mercury at 60 °F", source: "derived: NIST SP 811 B.8 inch of mercury (60 °F) / 25.4" },
    UnitDef { names: &["inHg@60F"], factor: 3_376.85, dimension: D::PRESSURE, description: "inch of mercury at 60 °F", source: "NIST SP 811 B.8 (3.376 85 E+03 Pa)" },
    // length
    UnitDef { names: &["m"], factor: 1.0, dimension: D::LENGTH, description: "metre", source: "SI" },
    UnitDef { names: &["cm"], factor: 1e-2, dimension: D::LENGTH, description: "centimetre", source: "SI prefix" },
    UnitDef { names: &["mm"], factor: 1e-3, dimension: D::LENGTH, description: "millimetre", source: "SI prefix" },
    UnitDef { names: &["km"], factor: 1e3, dimension: D::LENGTH, description: "kilometre", source: "SI prefix" },
    UnitDef { names: &["in"], factor: INCH, dimension: D::LENGTH, description: "inch", source: "NIST SP 811 B.8 (exact)" },
    UnitDef { names: &["ft"], factor: FOOT, dimension: D::LENGTH, description: "foot", source: "NIST SP 811 B.8 (exact)" },
    // volume
    UnitDef { names: &["L", "l"], factor: 1e-3, dimension: D::VOLUME, description: "litre", source: "SI Brochure Table 8" },
    UnitDef { names: &["gal"], factor: US_GALLON, dimension: D::VOLUME, description: "US liquid gallon", source: "NIST SP 811 B.8 (exact)" },
    // time
    UnitDef { names: &["s"], factor: 1.0, dimension: D::TIME, description: "second", source: "SI" },
    UnitDef { names: &["min"], factor: 60.0, dimension: D::TIME, description: "minute", source: "SI Brochure Table 8" },
    UnitDef { names: &["h"], factor: 3600.0, dimension: D::TIME, description: "hour", source: "SI Brochure Table 8" },
    // mass, amount
    UnitDef { names: &["kg"], factor: 1.0, dimension: D::MASS, description: "kilogram", source: "SI" },
    UnitDef { names: &["g"], factor: 1e-3, dimension: D::MASS, description: "gram", source: "SI prefix" },
    UnitDef { names: &["lb"], factor: POUND, dimension: D::MASS, description: "pound (avoirdupois)", source: "NIST SP 811 B.8 (exact)" },
    UnitDef { names: &["mol"], factor: 1.0, dimension: D::AMOUNT, description: "mole", source: "SI" },
    UnitDef { names: &["kmol"], factor: 1e3, dimension: D::AMOUNT, description: "kilomole", source: "SI prefix" },
    // convenience compounds that practitioners type as one word
    UnitDef { names: &["cfm"], factor: FOOT * FOOT * FOOT / 60.0, dimension: D::VOLUME_FLOW, description: "cubic foot per minute", source: "NIST SP 811 B.8" },
    UnitDef { names: &["gpm"], factor: US_GALLON / 60.0, dimension: D::VOLUME_FLOW, description: "US gallon per minute", source: "NIST SP 811 B.8" },
    UnitDef { names: &["fpm"], factor: FOOT / 60.0, dimension: D::VELOCITY, description: "foot per minute", source: "NIST SP 811 B.8" },
    // viscosity
    UnitDef { names: &["cP"], factor: 1e-3, dimension: D::DYNAMIC_VISCOSITY, description: "centipoise", source: "NIST SP 811 B.8" },
    UnitDef { names: &["cSt"], factor: 1e-6, dimension: D::KINEMATIC_VISCOSITY, description: "centistokes", source: "NIST SP 811 B.8" },
    // force, energy, power (for compound units)
    UnitDef { names: &["lbf"], factor: POUND * STANDARD_GRAVITY, dimension: Dimension([1, 1, -2, 0, 0]), description: "pound-force", source: "NIST SP 811 B.8 (4.448 222 E+00 N); exact from lb and g_n" },
    UnitDef { names: &["N"], factor: 1.0, dimension: Dimension([1, 1, -2, 0, 0]), description: "newton", source: "SI" },
    UnitDef { names: &["J"], factor: 1.0, dimension: Dimension([2, 1, -2, 0, 0]), description: "joule", source: "SI" },
    UnitDef { names: &["W"], factor: 1.0, dimension: Dimension([2, 1, -3, 0, 0]), description: "watt", source: "SI" },
    // pure numbers
    UnitDef { names: &["1"], factor: 1.0, dimension: D::NONE, description: "one (pure number)", source: "SI" },
    UnitDef { names: &["%", "percent"], factor: 0.01, dimension: D::NONE, description: "percent", source: "SI Brochure §5.4.7" },
    UnitDef { names: &["ppm"], factor: 1e-6, dimension: D::NONE, description: "parts per million", source: "common practice, no source" },
    UnitDef { names: &["rad"], factor: 1.0, dimension: D::NONE, description: "radian", source: "SI" },
    UnitDef { names: &["deg", "°"], factor: std::f64::consts::PI / 180.0, dimension: D::NONE, description: "degree of arc", source: "SI Brochure Table 8" },
];

/// Temperature units: (names, factor, offset for absolute use, description).
/// °F = 5/9 K with offset 459.67 °R; °C offset 273.15 K. Source: NIST SP 811 B.9.
const TEMPERATURES: &[(&[&str], f64, f64, &str)] = &[
    (&["K"], 1.0, 0.0, "kelvin"),
    (&["degC", "°C"], 1.0, ZERO_CELSIUS, "degree Celsius"),
    (&["degF", "°F"], 5.0 / 9.0, 459.67 * 5.0 / 9.0, "degree Fahrenheit"),
    (&["degR", "°R"], 5.0 / 9.0, 0.0, "degree Rankine"),
];

/// Every spelling the parser accepts for a single unit name, for completion and help.
pub fn unit_names() -> Vec<&'static str> {
    let mut v: Vec<&str> = UNITS.iter().flat_map(|u| u.names.iter().copied()).collect();
    for (names, ..) in TEMPERATURES {
        v.extend(names.iter().copied());
    }
    v.extend(["delta_K", "delta_degC", "delta_degF", "delta_degR"]);
    v
}

struct Atom {
    factor: f64,
    offset: f64,
    dimension: Dimension,
    temperature: Option<&'static str>,
}

fn lookup(name: &str) -> Option<Atom> {
    if let Some(u) = UNITS.iter().find(|u| u.names.contains(&name)) {
        return Some(Atom { factor: u.factor, offset: 0.0, dimension: u.dimension, temperature: None });
    }
    if let Some(rest) = name.strip_prefix("delta_") {
        return TEMPERATURES.iter().find(|t| t.0.contains(&rest)).map(|t| Atom {
            factor: t.1,
            offset: 0.0,
            dimension: Dimension::TEMPERATURE,
            temperature: None,
        });
    }
    TEMPERATURES.iter().find(|t| t.0.contains(&name)).map(|t| Atom {
        factor: t.1,
        offset: t.2,
        dimension: Dimension::TEMPERATURE,
        temperature: Some(t.3),
    })
}

/// Splits a trailing power from a name: `m3` → (`m`, 3), when `m3` is not a name itself.
fn split_power(token: &str) -> (&str, i8) {
    if lookup(token).is_some() {
        return (token, 1);
    }
    let base = token.trim_end_matches(|c: char| c.is_ascii_digit());
    if base.len() < token.len()
        && !base.is_empty()
        && lookup(base).is_some()
        && let Ok(p) = token[base.len()..].parse::<i8>()
    {
        return (base, p);
    }
    (token, 1)
}

fn nearest_name(name: &str) -> Option<&'static str> {
    let lower = name.to_lowercase();
    unit_names()
        .into_iter()
        .map(|n| (edit_distance(&lower, &n.to_lowercase()), n))
        .filter(|(d, _)| *d <= 2)
        .min_by_key(|(d, _)| *d)
        .map(|(_, n)| n)
}

/// Levenshtein distance between two names (for "did you mean" suggestions).
pub fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut cur = vec![i + 1; b.len() + 1];
        for (j, cb) in b.iter().enumerate() {
            cur[j + 1] = (prev[j] + usize::from(ca != *cb)).min(prev[j + 1] + 1).min(cur[j] + 1);
        }
        prev = cur;
    }
    prev[b.len()]
}

impl Unit {
    /// Parses a unit string (see the module doc for the syntax).
    ///
    /// ```
    /// use stagna::Unit;
    /// let u = Unit::parse("m3/h").unwrap();
    /// assert!((u.factor - 1.0 / 3600.0).abs() < 1e-15);
    /// assert!(Unit::parse("kg/m^3").is_ok());
    /// assert!(Unit::parse("inH2O@60F").is_ok());
    /// ```
    pub fn parse(input: &str) -> Result<Unit> {
        let err = |reason: String| Error::UnitSyntax { input: input.to_string(), reason };
        let text = input.trim();
        if text.is_empty() {
            return Err(err("empty unit; write e.g. 'Pa', 'm/s' or 'kg/m^3'".into()));
        }
        let mut factor = 1.0;
        let mut offset = 0.0;
        let mut dimension = Dimension::NONE;
        let mut terms = 0usize;
        let mut lone_temperature: Option<&str> = None;
        let mut sign: i8 = 1;
        let mut rest = text;
        loop {
            let end = rest.find(['*', '·', '/']).unwrap_or(rest.len());
            let term = rest[..end].trim();
            if term.is_empty() {
                return Err(err("a '*', '·' or '/' has nothing on one side".into()));
            }
            let (name, mut power) = match term.split_once('^') {
                Some((n, p)) => {
                    let p: i8 = p
                        .trim()
                        .parse()
                        .map_err(|_| err(format!("power '{}' after '^' must be a whole number", p.trim())))?;
                    (n.trim(), p)
                }
                None => split_power(term),
            };
            let atom = lookup(name).ok_or_else(|| {
                let hint = match nearest_name(name) {
                    Some(n) => format!("unknown unit '{name}'; did you mean '{n}'?"),
                    None => format!(
                        "unknown unit '{name}'; known units include Pa, kPa, mbar, psi, inH2O@60F, mmHg, m, mm, in, ft, m/s, m3/h, kg/m^3, degC, cP"
                    ),
                };
                err(hint)
            })?;
            power = power.checked_mul(sign).ok_or_else(|| err("a power must be within ±127".into()))?;
            if atom.temperature.is_some() {
                lone_temperature = atom.temperature;
            }
            if atom.offset != 0.0 {
                offset = atom.offset;
            }
            factor *= atom.factor.powi(i32::from(power));
            dimension = atom
                .dimension
                .checked_powi(i32::from(power))
                .and_then(|d| dimension.checked_mul(d))
                .ok_or_else(|| err("a dimension exponent would leave the range ±127".into()))?;
            terms += 1;
            if (terms > 1 || power != 1)
                && let Some(t) = lone_temperature
                && offset != 0.0
            {
                return Err(err(format!(
                    "{t} has an offset and cannot be part of a compound unit; use K (or delta_degC for a difference)"
                )));
            }
            if end == rest.len() {
                break;
            }
            let op = rest[end..].chars().next().unwrap_or('*');
            sign = if op == '/' { -1 } else { 1 };
            rest = &rest[end + op.len_utf8()..];
        }
        let absolute_temperature = terms == 1 && lone_temperature.is_some();
        Ok(Unit { symbol: text.to_string(), factor, offset, dimension, absolute_temperature })
    }

    /// SI value of `value` expressed in this unit.
    pub fn to_si(&self, value: f64) -> f64 {
        value * self.factor + self.offset
    }

    /// Value in this unit of an SI value.
    pub fn from_si(&self, si: f64) -> f64 {
        (si - self.offset) / self.factor
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Sources: NIST SP 811 (2008) Appendix B.8, factors as printed there.
    #[test]
    fn factors_match_nist_sp811() {
        let cases = [
            ("psi", 6_894.757, 1e-3),         // NIST SP 811 B.8: 6.894 757 E+03
            ("inH2O", 249.0889, 1e-4),        // "inch of water, conventional" 2.490 889 E+02
            ("inH2O@39.2F", 249.082, 1e-9),   // 2.490 82 E+02
            ("inH2O@60F", 248.84, 1e-9),      // 2.4884 E+02
            ("mmHg", 133.3224, 1e-4),         // "millimeter of mercury, conventional" 1.333 224 E+02
            ("inHg", 3_386.389, 1e-9),        // "inch of mercury, conventional" 3.386 389 E+03
            ("inHg@32F", 3_386.38, 1e-9),     // 3.386 38 E+03
            ("inHg@60F", 3_376.85, 1e-9),     // 3.376 85 E+03
            ("mmH2O", 9.806_65, 1e-12),       // "millimeter of water, conventional" 9.806 65 E+00
            ("ft3/min", 4.719_474e-4, 1e-10), // "cubic foot per minute" 4.719 474 E-04
            ("gpm", 6.309_020e-5, 1e-11),     // "gallon (U.S.) per minute" 6.309 020 E-05
            ("ft/min", 5.08e-3, 1e-15),       // "foot per minute" 5.08 E-03
            ("lb/h", 1.259_979e-4, 1e-10),    // "pound per hour" 1.259 979 E-04
            ("lb/ft3", 16.018_46, 1e-5),      // "pound per cubic foot" 1.601 846 E+01
            ("cP", 1e-3, 1e-15),              // "centipoise" 1.0 E-03
            ("lbf/in2", 6_894.757, 1e-3),     // same as psi
        ];
        for (u, v, tol) in cases {
            let got = Unit::parse(u).unwrap().factor;
            assert!((got - v).abs() <= tol, "{u}: {got} vs {v}");
        }
    }

    // The 68 °F water column is derived from Tanaka 2001; NIST SP 811 lists the 39.2 °F and
    // 60 °F ones. As a cross-check, Tanaka's density at 60 °F reproduces NIST's 248.84 Pa
    // to its printed digits (computed with our Tanaka implementation in water.rs tests).
    #[test]
    fn water_column_68f_is_derived_from_tanaka() {
        let u = Unit::parse("inH2O@68F").unwrap();
        assert!((u.factor - 0.0254 * 998.2067 * 9.80665).abs() < 1e-12);
    }

    #[test]
    fn temperatures_absolute_and_difference() {
        let c = Unit::parse("degC").unwrap();
        assert!(c.absolute_temperature);
        assert!((c.to_si(20.0) - 293.15).abs() < 1e-12);
        let f = Unit::parse("°F").unwrap();
        // 68 °F = 20 °C exactly: NIST SP 811 B.9 (t/°C = (t/°F − 32)/1.8)
        assert!((f.to_si(68.0) - 293.15).abs() < 1e-12);
        let d = Unit::parse("delta_degF").unwrap();
        assert!(!d.absolute_temperature);
        assert!((d.to_si(1.8) - 1.0).abs() < 1e-12);
        assert!(Unit::parse("J/(kg*degC)").is_err());
        assert!(Unit::parse("J/kg/K").unwrap().dimension == Dimension([2, 0, -2, -1, 0]));
    }

    #[test]
    fn compound_and_power_forms_agree() {
        let a = Unit::parse("kg/m^3").unwrap();
        let b = Unit::parse("kg/m3").unwrap();
        let c = Unit::parse("kg*m^-3").unwrap();
        assert_eq!(a.dimension, Dimension::DENSITY);
        assert_eq!(a.factor, b.factor);
        assert_eq!(b.factor, c.factor);
        assert_eq!(Unit::parse("Pa·s").unwrap().dimension, Dimension::DYNAMIC_VISCOSITY);
        assert_eq!(Unit::parse("L/min").unwrap().dimension, Dimension::VOLUME_FLOW);
    }

    #[test]
    fn bad_units_say_why() {
        let e = Unit::parse("inH20").unwrap_err().to_string();
        assert!(e.contains("did you mean 'inH2O'"), "{e}");
        let e = Unit::parse("kg/").unwrap_err().to_string();
        assert!(e.contains("nothing on one side"), "{e}");
        let e = Unit::parse("m^x").unwrap_err().to_string();
        assert!(e.contains("whole number"), "{e}");
        assert!(Unit::parse("").is_err());
    }
}
