//! Physical dimension as integer exponents of the SI base quantities used here:
//! length L, mass M, time T, thermodynamic temperature Θ and amount of substance N.

use std::fmt;
use std::ops::{Div, Mul};

/// Exponents of L, M, T, Θ, N (in that order).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Default)]
pub struct Dimension(pub [i8; 5]);

impl Dimension {
    /// Pure number (ratio, angle, specific gravity).
    pub const NONE: Self = Self([0, 0, 0, 0, 0]);
    /// L.
    pub const LENGTH: Self = Self([1, 0, 0, 0, 0]);
    /// M.
    pub const MASS: Self = Self([0, 1, 0, 0, 0]);
    /// T.
    pub const TIME: Self = Self([0, 0, 1, 0, 0]);
    /// Θ (absolute temperature and temperature difference share it).
    pub const TEMPERATURE: Self = Self([0, 0, 0, 1, 0]);
    /// N.
    pub const AMOUNT: Self = Self([0, 0, 0, 0, 1]);
    /// L².
    pub const AREA: Self = Self([2, 0, 0, 0, 0]);
    /// L³.
    pub const VOLUME: Self = Self([3, 0, 0, 0, 0]);
    /// L·T⁻¹.
    pub const VELOCITY: Self = Self([1, 0, -1, 0, 0]);
    /// L·T⁻².
    pub const ACCELERATION: Self = Self([1, 0, -2, 0, 0]);
    /// M·L⁻¹·T⁻² (Pa).
    pub const PRESSURE: Self = Self([-1, 1, -2, 0, 0]);
    /// M·L⁻³.
    pub const DENSITY: Self = Self([-3, 1, 0, 0, 0]);
    /// M·L⁻¹·T⁻¹ (Pa·s).
    pub const DYNAMIC_VISCOSITY: Self = Self([-1, 1, -1, 0, 0]);
    /// L²·T⁻¹.
    pub const KINEMATIC_VISCOSITY: Self = Self([2, 0, -1, 0, 0]);
    /// L³·T⁻¹.
    pub const VOLUME_FLOW: Self = Self([3, 0, -1, 0, 0]);
    /// M·T⁻¹.
    pub const MASS_FLOW: Self = Self([0, 1, -1, 0, 0]);
    /// M·N⁻¹.
    pub const MOLAR_MASS: Self = Self([0, 1, 0, 0, -1]);

    /// The dimension raised to an integer power.
    ///
    /// For dimensions and powers the library itself chooses; anything that comes from
    /// a user goes through [`checked_powi`](Self::checked_powi), which refuses an
    /// exponent outside ±127 instead of wrapping around.
    pub fn powi(self, n: i8) -> Self {
        self.checked_powi(i32::from(n)).unwrap_or(self)
    }

    /// The dimension raised to an integer power, or `None` when an exponent would leave
    /// the range ±127 (`m^100 · m^100` is no dimension of this domain).
    pub fn checked_powi(self, n: i32) -> Option<Self> {
        let mut out = [0i8; 5];
        for (o, e) in out.iter_mut().zip(self.0) {
            *o = i8::try_from(i32::from(e).checked_mul(n)?).ok()?;
        }
        Some(Self(out))
    }

    /// The product of two dimensions (exponents added), or `None` when an exponent
    /// would leave the range ±127.
    pub fn checked_mul(self, rhs: Self) -> Option<Self> {
        let mut out = self.0;
        for (o, r) in out.iter_mut().zip(rhs.0) {
            *o = o.checked_add(r)?;
        }
        Some(Self(out))
    }

    /// The quotient of two dimensions, or `None` when an exponent would leave ±127.
    pub fn checked_div(self, rhs: Self) -> Option<Self> {
        self.checked_mul(rhs.checked_powi(-1)?)
    }

    /// A plain name for well-known dimensions ("pressure", "velocity", ...).
    pub fn name(self) -> Option<&'static str> {
        NAMES.iter().find(|(d, _)| *d == self).map(|(_, n)| *n)
    }
}

const NAMES: [(Dimension, &str); 17] = [
    (Dimension::NONE, "dimensionless"),
    (Dimension::LENGTH, "length"),
    (Dimension::MASS, "mass"),
    (Dimension::TIME, "time"),
    (Dimension::TEMPERATURE, "temperature"),
    (Dimension::AMOUNT, "amount of substance"),
    (Dimension::AREA, "area"),
    (Dimension::VOLUME, "volume"),
    (Dimension::VELOCITY, "velocity"),
    (Dimension::ACCELERATION, "acceleration"),
    (Dimension::PRESSURE, "pressure"),
    (Dimension::DENSITY, "density"),
    (Dimension::DYNAMIC_VISCOSITY, "dynamic viscosity"),
    (Dimension::KINEMATIC_VISCOSITY, "kinematic viscosity"),
    (Dimension::VOLUME_FLOW, "volume flow rate"),
    (Dimension::MASS_FLOW, "mass flow rate"),
    (Dimension::MOLAR_MASS, "molar mass"),
];

// Multiplying quantities adds their dimension exponents.
#[allow(clippy::suspicious_arithmetic_impl)]
impl Mul for Dimension {
    type Output = Self;
    /// Saturates at ±127 rather than wrapping; user-driven products go through
    /// [`Dimension::checked_mul`] and are refused there.
    fn mul(self, rhs: Self) -> Self {
        let mut out = self.0;
        for (o, r) in out.iter_mut().zip(rhs.0) {
            *o = o.saturating_add(r);
        }
        Self(out)
    }
}

impl Div for Dimension {
    type Output = Self;
    fn div(self, rhs: Self) -> Self {
        let mut out = self.0;
        for (o, r) in out.iter_mut().zip(rhs.0) {
            *o = o.saturating_sub(r);
        }
        Self(out)
    }
}

impl fmt::Display for Dimension {
    /// Shows the SI base-unit form, e.g. `kg·m^-1·s^-2 (pressure)`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        const BASE: [&str; 5] = ["m", "kg", "s", "K", "mol"];
        let parts: Vec<String> = self
            .0
            .iter()
            .zip(BASE)
            .filter(|(e, _)| **e != 0)
            .map(|(e, b)| if *e == 1 { b.to_string() } else { format!("{b}^{e}") })
            .collect();
        let base = if parts.is_empty() { "1".to_string() } else { parts.join("·") };
        match self.name() {
            Some(n) => write!(f, "{base} ({n})"),
            None => write!(f, "{base}"),
        }
    }
}
