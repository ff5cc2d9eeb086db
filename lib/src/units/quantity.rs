//! Quantities with units: a dynamic [`Quantity`] (value in SI plus its
//! dimension) for scripts and tables, and typed wrappers ([`Pressure`],
//! [`Temperature`], ...) for the domain API. All values are stored in SI.
//!
//! Absolute temperature and temperature difference are kept apart: the
//! difference of two absolute temperatures is a difference; adding two
//! absolute temperatures is an error.

use std::fmt;
use std::ops::{Div, Mul, Neg};

use crate::error::{Error, Result};
use crate::units::dimension::Dimension;
use crate::units::unit::Unit;

/// A value with a dimension, stored in SI.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Quantity {
    /// The value in SI units.
    pub si: f64,
    /// Its dimension.
    pub dimension: Dimension,
    /// True for an absolute temperature (as opposed to a temperature difference).
    pub absolute_temperature: bool,
}

impl Quantity {
    /// A value in the given unit string, e.g. `Quantity::new(3.0, "inH2O@60F")`.
    ///
    /// ```
    /// use stagna::Quantity;
    /// let dp = Quantity::new(3.0, "inH2O@60F").unwrap();
    /// assert!((dp.si - 746.52).abs() < 1e-9); // 3 × 248.84 Pa (NIST SP 811 B.8)
    /// assert!((dp.value_in("Pa").unwrap() - 746.52).abs() < 1e-9);
    /// ```
    pub fn new(value: f64, unit: &str) -> Result<Self> {
        let u = Unit::parse(unit)?;
        let q = Self::from_unit(value, &u);
        if !q.si.is_finite() {
            return Err(Error::Arithmetic {
                operation: format!("{value} {unit}"),
                message: "not a finite quantity (beyond ±1.8e308 in SI units, or NaN); check the number".into(),
            });
        }
        Ok(q)
    }

    /// Parses "value unit" text such as `"600 mm"`, `"1.2m"`, `"20 degC"` or `"3 inH2O@60F"`.
    ///
    /// ```
    /// use stagna::Quantity;
    /// assert!((Quantity::parse("600 mm").unwrap().si - 0.6).abs() < 1e-15);
    /// assert!((Quantity::parse("-2.5e3Pa").unwrap().si + 2500.0).abs() < 1e-12);
    /// assert!(Quantity::parse("mm").is_err());
    /// ```
    pub fn parse(text: &str) -> Result<Self> {
        let t = text.trim();
        let end = t
            .char_indices()
            .find(|&(i, c)| {
                !(c.is_ascii_digit()
                    || c == '.'
                    || ((c == '-' || c == '+') && (i == 0 || matches!(t.as_bytes()[i - 1], b'e' | b'E')))
                    || ((c == 'e' || c == 'E')
                        && i > 0
                        && t[i + 1..].starts_with(|n: char| n.is_ascii_digit() || n == '-' || n == '+')))
            })
            .map_or(t.len(), |(i, _)| i);
        let value: f64 = t[..end].parse().map_err(|_| Error::UnitSyntax {
            input: text.to_string(),
            reason: "expected a number followed by a unit, e.g. '600 mm' or '20 degC'".into(),
        })?;
        let unit = t[end..].trim();
        if !value.is_finite() {
            return Err(Error::Arithmetic {
                operation: text.trim().to_string(),
                message: "the number is too large to represent (beyond ±1.8e308)".into(),
            });
        }
        if unit.is_empty() {
            return Ok(Self::number(value));
        }
        Self::new(value, unit)
    }

    /// A value in an already parsed unit.
    pub fn from_unit(value: f64, unit: &Unit) -> Self {
        Self { si: unit.to_si(value), dimension: unit.dimension, absolute_temperature: unit.absolute_temperature }
    }

    /// A pure number.
    pub fn number(value: f64) -> Self {
        Self { si: value, dimension: Dimension::NONE, absolute_temperature: false }
    }

    /// The value expressed in `unit`; an error if the dimensions differ.
    pub fn value_in(&self, unit: &str) -> Result<f64> {
        let u = Unit::parse(unit)?;
        self.value_in_unit(&u)
    }

    /// The value expressed in an already parsed unit.
    pub fn value_in_unit(&self, u: &Unit) -> Result<f64> {
        if u.dimension != self.dimension {
            return Err(Error::DimensionMismatch {
                operation: format!("conversion to '{}'", u.symbol),
                left: self.dimension.to_string(),
                right: u.dimension.to_string(),
            });
        }
        if u.absolute_temperature && !self.absolute_temperature {
            // A temperature difference shown in °C/°F: scale only.
            return Ok(self.si / u.factor);
        }
        if self.absolute_temperature && !u.absolute_temperature && self.dimension == Dimension::TEMPERATURE {
            return Err(Error::Inconsistent {
                context: "quantity",
                message: format!(
                    "an absolute temperature cannot be written in the difference unit '{}'; subtract a reference temperature first",
                    u.symbol
                ),
            });
        }
        Ok(u.from_si(self.si))
    }

    /// The value written in `unit`, e.g. `"3.00001 inH2O@60F"` (up to 6 significant digits).
    ///
    /// ```
    /// use stagna::Quantity;
    /// let p = Quantity::new(746.52, "Pa").unwrap();
    /// assert_eq!(p.display_in("inH2O@60F").unwrap(), "3 inH2O@60F");
    /// ```
    pub fn display_in(&self, unit: &str) -> Result<String> {
        Ok(format!("{} {}", format_number(self.value_in(unit)?), unit.trim()))
    }

    /// Sum of two quantities of the same dimension.
    pub fn try_add(self, rhs: Self) -> Result<Self> {
        self.same_dimension(&rhs, "addition")?;
        if self.absolute_temperature && rhs.absolute_temperature {
            return Err(Error::Inconsistent {
                context: "quantity",
                message: "cannot add two absolute temperatures; subtract them for a difference, or add a difference (delta_degC, delta_K)".into(),
            });
        }
        Ok(Self {
            si: self.si + rhs.si,
            dimension: self.dimension,
            absolute_temperature: self.absolute_temperature || rhs.absolute_temperature,
        })
    }

    /// Difference of two quantities of the same dimension. Absolute − absolute
    /// temperature gives a difference; absolute − difference stays absolute.
    pub fn try_sub(self, rhs: Self) -> Result<Self> {
        self.same_dimension(&rhs, "subtraction")?;
        if !self.absolute_temperature && rhs.absolute_temperature {
            return Err(Error::Inconsistent {
                context: "quantity",
                message: "cannot subtract an absolute temperature from a temperature difference".into(),
            });
        }
        Ok(Self {
            si: self.si - rhs.si,
            dimension: self.dimension,
            absolute_temperature: self.absolute_temperature && !rhs.absolute_temperature,
        })
    }

    /// Compares two quantities of the same dimension.
    pub fn try_cmp(&self, rhs: &Self) -> Result<Option<std::cmp::Ordering>> {
        self.same_dimension(rhs, "comparison")?;
        Ok(self.si.partial_cmp(&rhs.si))
    }

    /// Integer power.
    /// The product, refused when it is not finite or its dimension leaves ±127.
    pub fn try_mul(self, rhs: Self) -> Result<Self> {
        let dimension = self.dimension.checked_mul(rhs.dimension).ok_or_else(|| overflow(&self, "·", &rhs))?;
        finite(Self { si: self.si * rhs.si, dimension, absolute_temperature: false }, &self, "·", &rhs)
    }

    /// The quotient, refused when it is not finite (division by zero, overflow) or its
    /// dimension leaves ±127.
    pub fn try_div(self, rhs: Self) -> Result<Self> {
        let dimension = self.dimension.checked_div(rhs.dimension).ok_or_else(|| overflow(&self, "/", &rhs))?;
        finite(Self { si: self.si / rhs.si, dimension, absolute_temperature: false }, &self, "/", &rhs)
    }

    /// An integer power, refused when it is not finite or its dimension leaves ±127.
    pub fn try_powi(self, n: i32) -> Result<Self> {
        let op = || format!("({self})^{n}");
        let dimension = self.dimension.checked_powi(n).ok_or_else(|| Error::Arithmetic {
            operation: op(),
            message: "a dimension exponent would leave the range ±127".into(),
        })?;
        let q = Self { si: self.si.powi(n), dimension, absolute_temperature: false };
        if !q.si.is_finite() {
            return Err(Error::Arithmetic { operation: op(), message: NOT_FINITE.into() });
        }
        Ok(q)
    }

    /// The quantity raised to a power the caller chose (trusted); see [`Self::try_powi`].
    pub fn powi(self, n: i8) -> Self {
        Self { si: self.si.powi(i32::from(n)), dimension: self.dimension.powi(n), absolute_temperature: false }
    }

    /// Square root; every dimension exponent must be even.
    pub fn sqrt(self) -> Result<Self> {
        if self.dimension.0.iter().any(|e| e % 2 != 0) {
            return Err(Error::Inconsistent {
                context: "quantity",
                message: format!("square root of {} has no whole-number dimension", self.dimension),
            });
        }
        Ok(Self {
            si: self.si.sqrt(),
            dimension: Dimension(self.dimension.0.map(|e| e / 2)),
            absolute_temperature: false,
        })
    }

    fn same_dimension(&self, rhs: &Self, op: &str) -> Result<()> {
        if self.dimension == rhs.dimension {
            Ok(())
        } else {
            Err(Error::DimensionMismatch {
                operation: op.to_string(),
                left: self.dimension.to_string(),
                right: rhs.dimension.to_string(),
            })
        }
    }

    /// The SI unit symbol used for display of this dimension.
    pub fn si_symbol(&self) -> String {
        si_symbol(self.dimension)
    }
}

/// The preferred SI symbol for a dimension (`Pa`, `m/s`, `kg/m³`, ...), or
/// the base-unit product when there is no special name.
pub fn si_symbol(d: Dimension) -> String {
    const PREFERRED: [(Dimension, &str); 15] = [
        (Dimension::NONE, ""),
        (Dimension::LENGTH, "m"),
        (Dimension::MASS, "kg"),
        (Dimension::TIME, "s"),
        (Dimension::TEMPERATURE, "K"),
        (Dimension::AREA, "m²"),
        (Dimension::VOLUME, "m³"),
        (Dimension::VELOCITY, "m/s"),
        (Dimension::ACCELERATION, "m/s²"),
        (Dimension::PRESSURE, "Pa"),
        (Dimension::DENSITY, "kg/m³"),
        (Dimension::DYNAMIC_VISCOSITY, "Pa·s"),
        (Dimension::KINEMATIC_VISCOSITY, "m²/s"),
        (Dimension::VOLUME_FLOW, "m³/s"),
        (Dimension::MASS_FLOW, "kg/s"),
    ];
    if let Some((_, s)) = PREFERRED.iter().find(|(p, _)| *p == d) {
        return (*s).to_string();
    }
    if d == Dimension::MOLAR_MASS {
        return "kg/mol".into();
    }
    let s = d.to_string();
    s.split(" (").next().unwrap_or(&s).to_string()
}

const NOT_FINITE: &str = "the result is not a finite number (a division by zero or an overflow)";

fn overflow(a: &Quantity, op: &str, b: &Quantity) -> Error {
    Error::Arithmetic {
        operation: format!("{a} {op} {b}"),
        message: "a dimension exponent would leave the range ±127".into(),
    }
}

fn finite(q: Quantity, a: &Quantity, op: &str, b: &Quantity) -> Result<Quantity> {
    if q.si.is_finite() {
        Ok(q)
    } else {
        Err(Error::Arithmetic { operation: format!("{a} {op} {b}"), message: NOT_FINITE.into() })
    }
}

impl Mul for Quantity {
    type Output = Self;
    fn mul(self, rhs: Self) -> Self {
        Self { si: self.si * rhs.si, dimension: self.dimension * rhs.dimension, absolute_temperature: false }
    }
}

impl Div for Quantity {
    type Output = Self;
    fn div(self, rhs: Self) -> Self {
        Self { si: self.si / rhs.si, dimension: self.dimension / rhs.dimension, absolute_temperature: false }
    }
}

impl Neg for Quantity {
    type Output = Self;
    fn neg(self) -> Self {
        Self { si: -self.si, ..self }
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let sym = self.si_symbol();
        let v = format_number(self.si);
        if sym.is_empty() { write!(f, "{v}") } else { write!(f, "{v} {sym}") }
    }
}

/// Formats a number with up to 6 significant digits, without trailing zeros.
pub fn format_number(v: f64) -> String {
    format_figures(v, 6)
}

/// `v` to at most `figures` significant figures with trailing zeros dropped (a value as
/// given, 1.2, stays 1.2), in exponent form outside 10⁻⁴ … 10⁹. Integer digits are kept
/// even past `figures` (13 470, not 1.347e4).
///
/// ```
/// use stagna::units::quantity::format_figures;
/// assert_eq!(format_figures(0.838312, 4), "0.8383");
/// assert_eq!(format_figures(1.2, 4), "1.2");
/// assert_eq!(format_figures(13470.4, 4), "13470");
/// assert_eq!(format_figures(9.99951, 4), "10");
/// assert_eq!(format_figures(1091.7 - 2e-13, 10), "1091.7");
/// assert_eq!(format_figures(2.5e-7, 4), "2.5e-7");
/// ```
pub fn format_figures(v: f64, figures: u32) -> String {
    if !v.is_finite() {
        return v.to_string();
    }
    if v == 0.0 {
        return "0".into();
    }
    let figures = figures.clamp(1, 17) as i32;
    let mut mag = v.abs().log10().floor() as i32;
    if (v.abs() * 10f64.powi(figures - 1 - mag)).round() >= 10f64.powi(figures) {
        mag += 1; // rounding carried into the next digit
    }
    if !(-4..9).contains(&mag) {
        let s = format!("{v:.prec$e}", prec = (figures - 1) as usize);
        return match s.split_once('e') {
            Some((m, e)) if m.contains('.') => format!("{}e{e}", m.trim_end_matches('0').trim_end_matches('.')),
            _ => s,
        };
    }
    let decimals = (figures - 1 - mag).max(0) as usize;
    let s = format!("{v:.decimals$}");
    if s.contains('.') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s }
}

/// `v` to `digits` significant figures, e.g. an uncertainty to two (GUM 7.2.6).
///
/// ```
/// use stagna::units::quantity::format_sig;
/// assert_eq!(format_sig(0.165508, 2), "0.17");
/// assert_eq!(format_sig(0.0995, 2), "0.10");
/// assert_eq!(format_sig(1234.5, 2), "1200");
/// assert_eq!(format_sig(0.0025, 2), "0.0025");
/// ```
pub fn format_sig(v: f64, digits: u32) -> String {
    if !v.is_finite() || v == 0.0 {
        return format_number(v);
    }
    let mut mag = v.abs().log10().floor() as i32;
    if (v * 10f64.powi(digits as i32 - 1 - mag)).round().abs() >= 10f64.powi(digits as i32) {
        mag += 1; // rounding carried into the next digit (0.0995 → 0.10)
    }
    let decimals = (digits as i32 - 1 - mag).max(0) as usize;
    let scale = 10f64.powi(digits as i32 - 1 - mag);
    format!("{:.decimals$}", (v * scale).round() / scale)
}

/// A value and its uncertainty as printed by GUM 7.2.6: the uncertainty to two
/// significant figures and the value rounded to the same last digit.
///
/// ```
/// use stagna::units::quantity::format_with_uncertainty;
/// assert_eq!(format_with_uncertainty(3.741738, 0.0376817), ("3.742".into(), "0.038".into()));
/// assert_eq!(format_with_uncertainty(13467.7, 135.6), ("13470".into(), "140".into()));
/// assert_eq!(format_with_uncertainty(0.998, 0.0025), ("0.9980".into(), "0.0025".into()));
/// assert_eq!(format_with_uncertainty(2.5, 0.0), ("2.5".into(), "0".into()));
/// ```
pub fn format_with_uncertainty(y: f64, u: f64) -> (String, String) {
    if !(u.is_finite() && y.is_finite()) || u <= 0.0 {
        return (format_number(y), format_number(u));
    }
    let us = format_sig(u, 2);
    // The place of the uncertainty's last digit: 10^-decimals, or 10^power for u ≥ 10.
    let mut mag = u.abs().log10().floor() as i32;
    if (u * 10f64.powi(1 - mag)).round() >= 100.0 {
        mag += 1;
    }
    let last = mag - 1;
    let ys = if last < 0 {
        let d = (-last) as usize;
        format!("{y:.d$}")
    } else {
        let step = 10f64.powi(last);
        format!("{:.0}", (y / step).round() * step)
    };
    let ys =
        if ys.starts_with('-') && ys[1..].chars().all(|c| c == '0' || c == '.') { ys[1..].to_string() } else { ys };
    (ys, us)
}

/// Defines a typed quantity: a newtype over its SI value with a fixed dimension.
macro_rules! typed_quantity {
    ($(#[$doc:meta])* $name:ident, $dim:expr, $sym:literal) => {
        $(#[$doc])*
        #[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Default)]
        pub struct $name(f64);

        impl $name {
            /// The dimension of this quantity.
            pub const DIMENSION: Dimension = $dim;
            /// Display symbol of the SI unit.
            pub const SI_SYMBOL: &'static str = $sym;

            /// From a value already in SI units.
            pub const fn from_si(si: f64) -> Self {
                Self(si)
            }

            /// The value in SI units.
            pub const fn si(self) -> f64 {
                self.0
            }

            /// From a value in a unit string; an error if the unit is of another dimension.
            pub fn new(value: f64, unit: &str) -> Result<Self> {
                Self::try_from(Quantity::new(value, unit)?)
            }

            /// The value expressed in `unit`.
            pub fn value_in(self, unit: &str) -> Result<f64> {
                Quantity::from(self).value_in(unit)
            }
        }

        impl From<$name> for Quantity {
            fn from(q: $name) -> Quantity {
                Quantity { si: q.0, dimension: $dim, absolute_temperature: false }
            }
        }

        impl TryFrom<Quantity> for $name {
            type Error = Error;
            fn try_from(q: Quantity) -> Result<Self> {
                if q.dimension != $dim {
                    return Err(Error::DimensionMismatch {
                        operation: concat!("use as ", stringify!($name)).to_string(),
                        left: q.dimension.to_string(),
                        right: $dim.to_string(),
                    });
                }
                Ok(Self(q.si))
            }
        }

        impl std::ops::Add for $name {
            type Output = Self;
            fn add(self, rhs: Self) -> Self { Self(self.0 + rhs.0) }
        }
        impl std::ops::Sub for $name {
            type Output = Self;
            fn sub(self, rhs: Self) -> Self { Self(self.0 - rhs.0) }
        }
        impl std::ops::Mul<f64> for $name {
            type Output = Self;
            fn mul(self, rhs: f64) -> Self { Self(self.0 * rhs) }
        }
        impl std::ops::Div<f64> for $name {
            type Output = Self;
            fn div(self, rhs: f64) -> Self { Self(self.0 / rhs) }
        }
        impl std::ops::Neg for $name {
            type Output = Self;
            fn neg(self) -> Self { Self(-self.0) }
        }
        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                write!(f, "{} {}", format_number(self.0), $sym)
            }
        }
    };
}

typed_quantity!(
    /// Pressure or pressure difference, Pa.
    Pressure, Dimension::PRESSURE, "Pa");
typed_quantity!(
    /// Length, m.
    Length, Dimension::LENGTH, "m");
typed_quantity!(
    /// Area, m².
    Area, Dimension::AREA, "m²");
typed_quantity!(
    /// Velocity, m/s.
    Velocity, Dimension::VELOCITY, "m/s");
typed_quantity!(
    /// Acceleration (of gravity), m/s².
    Acceleration, Dimension::ACCELERATION, "m/s²");
typed_quantity!(
    /// Mass density, kg/m³.
    Density, Dimension::DENSITY, "kg/m³");
typed_quantity!(
    /// Dynamic viscosity, Pa·s.
    DynamicViscosity, Dimension::DYNAMIC_VISCOSITY, "Pa·s");
typed_quantity!(
    /// Kinematic viscosity, m²/s.
    KinematicViscosity, Dimension::KINEMATIC_VISCOSITY, "m²/s");
typed_quantity!(
    /// Volume flow rate, m³/s.
    VolumeFlow, Dimension::VOLUME_FLOW, "m³/s");
typed_quantity!(
    /// Mass flow rate, kg/s.
    MassFlow, Dimension::MASS_FLOW, "kg/s");
typed_quantity!(
    /// Molar mass, kg/mol.
    MolarMass, Dimension::MOLAR_MASS, "kg/mol");
typed_quantity!(
    /// Temperature difference (interval), K.
    TemperatureDifference, Dimension::TEMPERATURE, "K");

impl Pressure {
    /// Pressure in pascals.
    pub const fn pa(v: f64) -> Self {
        Self(v)
    }
    /// Pressure in kilopascals.
    pub const fn kpa(v: f64) -> Self {
        Self(v * 1e3)
    }
}

impl Length {
    /// Length in metres.
    pub const fn m(v: f64) -> Self {
        Self(v)
    }
    /// Length in millimetres.
    pub const fn mm(v: f64) -> Self {
        Self(v * 1e-3)
    }
}

impl Density {
    /// Density in kg/m³.
    pub const fn kg_m3(v: f64) -> Self {
        Self(v)
    }
}

impl Velocity {
    /// Velocity in m/s.
    pub const fn m_s(v: f64) -> Self {
        Self(v)
    }
}

impl MolarMass {
    /// Molar mass in g/mol (numerically the relative molecular mass).
    pub const fn g_mol(v: f64) -> Self {
        Self(v * 1e-3)
    }
}

/// Absolute (thermodynamic) temperature, stored in kelvin.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct Temperature(f64);

impl Temperature {
    /// From kelvin.
    pub const fn kelvin(k: f64) -> Self {
        Self(k)
    }
    /// From degrees Celsius.
    pub const fn celsius(c: f64) -> Self {
        Self(c + crate::units::constants::ZERO_CELSIUS)
    }
    /// From degrees Fahrenheit (NIST SP 811 B.9: T/K = (t/°F + 459.67)/1.8).
    pub fn fahrenheit(f: f64) -> Self {
        Self((f + 459.67) / 1.8)
    }
    /// From a value in an absolute temperature unit (`K`, `degC`, `degF`, `degR`).
    pub fn new(value: f64, unit: &str) -> Result<Self> {
        Self::try_from(Quantity::new(value, unit)?)
    }
    /// In kelvin.
    pub const fn k(self) -> f64 {
        self.0
    }
    /// In degrees Celsius.
    pub fn c(self) -> f64 {
        self.0 - crate::units::constants::ZERO_CELSIUS
    }
    /// In degrees Fahrenheit.
    pub fn f(self) -> f64 {
        self.0 * 1.8 - 459.67
    }
    /// The value expressed in `unit`.
    pub fn value_in(self, unit: &str) -> Result<f64> {
        Quantity::from(self).value_in(unit)
    }
}

impl From<Temperature> for Quantity {
    fn from(t: Temperature) -> Quantity {
        Quantity { si: t.0, dimension: Dimension::TEMPERATURE, absolute_temperature: true }
    }
}

impl TryFrom<Quantity> for Temperature {
    type Error = Error;
    fn try_from(q: Quantity) -> Result<Self> {
        if q.dimension != Dimension::TEMPERATURE {
            return Err(Error::DimensionMismatch {
                operation: "use as Temperature".into(),
                left: q.dimension.to_string(),
                right: Dimension::TEMPERATURE.to_string(),
            });
        }
        if !q.absolute_temperature {
            return Err(Error::Inconsistent {
                context: "temperature",
                message: "expected an absolute temperature (degC, degF, K), got a temperature difference".into(),
            });
        }
        Ok(Self(q.si))
    }
}

impl fmt::Display for Temperature {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} °C", format_number(self.c()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn non_finite_results_and_overflowing_dimensions_are_errors() {
        // Regressions (issue 16): these printed inf or wrapped around to m^-56.
        let e = Quantity::parse("1e400 Pa").unwrap_err().to_string();
        assert!(e.contains("1e400 Pa") && e.contains("too large"), "{e}");
        let e = Quantity::parse("1 m^100*m^100").unwrap_err().to_string();
        assert!(e.contains("±127"), "{e}");
        let m = Quantity::new(1.0, "m").unwrap();
        let e = m.try_div(Quantity::number(0.0)).unwrap_err().to_string();
        assert!(e.starts_with("1 m / 0") && e.contains("division by zero"), "{e}");
        assert!(m.try_div(Quantity::new(0.0, "m").unwrap()).is_err());
        let m8 = m.try_powi(8).unwrap();
        let m64 = m8.try_powi(8).unwrap();
        assert_eq!(m64.dimension, Dimension::LENGTH.checked_powi(64).unwrap());
        assert!(m64.try_powi(2).unwrap_err().to_string().contains("±127"));
        assert!(m64.try_mul(m64).is_err());
        let ok = m.try_mul(Quantity::new(2.0, "m").unwrap()).unwrap();
        assert_eq!((ok.si, ok.dimension), (2.0, Dimension::AREA));
        assert!(Quantity::new(f64::NAN, "m").is_err());
    }

    #[test]
    fn dimension_mismatch_names_both() {
        let p = Quantity::new(1.0, "kPa").unwrap();
        let e = p.value_in("m/s").unwrap_err().to_string();
        assert!(e.contains("pressure") && e.contains("velocity"), "{e}");
        let l = Quantity::new(1.0, "mm").unwrap();
        let e = p.try_add(l).unwrap_err().to_string();
        assert!(e.contains("addition") && e.contains("length"), "{e}");
    }

    #[test]
    fn temperature_arithmetic_keeps_absolute_and_difference_apart() {
        let a = Quantity::new(20.0, "degC").unwrap();
        let b = Quantity::new(68.0, "degF").unwrap();
        let d = a.try_sub(b).unwrap();
        assert!(!d.absolute_temperature && d.si.abs() < 1e-12);
        assert!(a.try_add(b).is_err());
        let warmer = a.try_add(Quantity::new(9.0, "delta_degF").unwrap()).unwrap();
        // 9 °F difference = 5 K: NIST SP 811 B.9
        assert!((warmer.value_in("degC").unwrap() - 25.0).abs() < 1e-12);
        assert!(Temperature::try_from(d).is_err());
        // An absolute temperature is not a difference (NIST SP 811 §4.2.1.1 keeps them apart).
        let e = a.value_in("delta_degC").unwrap_err().to_string();
        assert!(e.contains("subtract a reference temperature"), "{e}");
        assert!((d.value_in("degF").unwrap()).abs() < 1e-12, "a difference shown in °F is scaled only");
    }

    #[test]
    fn typed_quantities_refuse_other_dimensions() {
        assert!(Pressure::new(1.0, "m").is_err());
        let v = Velocity::new(1000.0, "ft/min").unwrap();
        assert!((v.si() - 5.08).abs() < 1e-12); // 1 ft/min = 5.08e-3 m/s, NIST SP 811 B.8
        assert_eq!(format!("{}", Pressure::pa(249.08891)), "249.089 Pa");
    }

    #[test]
    fn comparison_and_powers() {
        let a = Quantity::new(1.0, "inH2O").unwrap();
        let b = Quantity::new(249.0, "Pa").unwrap();
        // 1 inH2O (conventional) = 249.0889 Pa > 249 Pa: NIST SP 811 B.8
        assert_eq!(a.try_cmp(&b).unwrap(), Some(std::cmp::Ordering::Greater));
        assert!(a.try_cmp(&Quantity::new(1.0, "m").unwrap()).is_err());
        let area = Quantity::new(2.0, "ft").unwrap().powi(2);
        assert!((area.value_in("m^2").unwrap() - 4.0 * 0.3048 * 0.3048).abs() < 1e-15); // ft exact, NIST SP 811
        assert_eq!(Quantity::new(4.0, "m^2").unwrap().sqrt().unwrap().dimension, Dimension::LENGTH);
        assert_eq!(Quantity::new(1.0, "mmHg@60F").unwrap().display_in("inHg@60F").unwrap(), "0.0393701 inHg@60F");
    }

    #[test]
    fn sqrt_and_products() {
        let dp = Quantity::new(250.0, "Pa").unwrap();
        let rho = Quantity::new(1.2, "kg/m^3").unwrap();
        let v = (Quantity::number(2.0) * dp / rho).sqrt().unwrap();
        assert_eq!(v.dimension, Dimension::VELOCITY);
        assert!(dp.sqrt().is_err());
    }

    proptest! {
        // Round trips through every unit of a dimension return the value (common practice, no source).
        #[test]
        fn unit_round_trip(v in -1e6f64..1e6, i in 0usize..crate::units::unit::UNITS.len()) {
            let def = &crate::units::unit::UNITS[i];
            for name in def.names {
                let q = Quantity::new(v, name).unwrap();
                let back = q.value_in(name).unwrap();
                prop_assert!((back - v).abs() <= 1e-9 * v.abs().max(1.0));
            }
        }

        #[test]
        fn temperature_round_trip(v in -200.0f64..2000.0) {
            for u in ["degC", "degF", "K", "degR", "°C", "°F"] {
                let t = Temperature::new(v, u).unwrap();
                prop_assert!((t.value_in(u).unwrap() - v).abs() < 1e-9);
            }
        }

        #[test]
        fn pressure_conversion_chain(v in 0.0f64..1e5) {
            let p = Pressure::new(v, "inH2O@60F").unwrap();
            let mm = p.value_in("mmHg").unwrap();
            let back = Pressure::new(mm, "mmHg").unwrap().value_in("inH2O@60F").unwrap();
            prop_assert!((back - v).abs() <= 1e-9 * v.max(1.0));
        }
    }
}
