//! Gauge (manometer) liquids and user liquids: density at the liquid's
//! temperature, kg/m³.
//!
//! # Formula
//! - Mercury: ρ(t) = 13 595.1 / (1 + 1.818·10⁻⁴ t) kg/m³, t in °C
//!   (conventional density at 0 °C and mean cubical expansion; within 4 ppm
//!   of tabulated values over 0–40 °C).
//! - Water: see [`crate::fluids::water`].
//! - User liquid: ρ(t) = ρ_ref / (1 + β (t − t_ref)), with ρ_ref measured (or
//!   from a certificate) at t_ref and β the volumetric expansion coefficient
//!   (1/K); with no β the density is taken as constant and a warning appears
//!   when t differs from t_ref by more than 2 K. A specific gravity SG at
//!   t_liquid referred to water at t_water gives ρ_ref = SG · ρ_water(t_water).
//!
//! Stagna never estimates the density of an unknown liquid: estimates from
//! group-contribution methods can be 10 % wrong; give the supplier's or a
//! measured value.
//!
//! # References
//! - WMO-No. 8, *Guide to Instruments and Methods of Observation*, Vol. I,
//!   ch. 3 (barometer reduction: 13 595.1 kg/m³ at 0 °C, 1.818·10⁻⁴ K⁻¹), from memory;
//!   agreement with CRC Handbook specific volumes is tested below.

use crate::error::{Error, Result, Warning, finite, positive, within};
use crate::fluids::water::{Water, WaterModel};
use crate::units::quantity::{Density, Temperature};

const MERCURY_RHO0: f64 = 13_595.1; // kg/m³ at 0 °C; ISO 80000-4 conventional value
const MERCURY_BETA: f64 = 1.818e-4; // 1/K, mean cubical expansion 0–40 °C (WMO-No. 8)

/// A liquid whose density follows ρ_ref / (1 + β (t − t_ref)).
#[derive(Debug, Clone, PartialEq)]
pub struct UserLiquid {
    /// Name for reports.
    pub name: String,
    /// Density at `t_ref`.
    pub density_ref: Density,
    /// Temperature at which `density_ref` holds.
    pub t_ref: Temperature,
    /// Volumetric expansion coefficient, 1/K, if known.
    pub expansion_per_k: Option<f64>,
}

impl UserLiquid {
    /// A liquid of known density at a stated temperature.
    pub fn new(name: &str, density: Density, at: Temperature, expansion_per_k: Option<f64>) -> Result<Self> {
        positive("liquid", "density", density.si(), "kg/m³")?;
        finite("liquid", "reference temperature", at.k())?;
        if let Some(b) = expansion_per_k {
            within("liquid", "expansion coefficient", b, "1/K", -1e-2, 1e-2)?;
        }
        Ok(Self { name: name.into(), density_ref: density, t_ref: at, expansion_per_k })
    }

    /// A liquid from its specific gravity at `t_liquid` relative to water at `t_water`
    /// (water density by Tanaka et al. 2001 within 0–40 °C, else IAPWS-IF97, at 101 325 Pa).
    pub fn from_specific_gravity(
        name: &str,
        sg: f64,
        t_liquid: Temperature,
        t_water: Temperature,
        expansion_per_k: Option<f64>,
    ) -> Result<Self> {
        positive("liquid", "specific gravity", sg, "")?;
        let model = if (0.0..=40.0).contains(&t_water.c()) { WaterModel::Tanaka2001 } else { WaterModel::If97 };
        let rho_w = Water::new(model).density(t_water, crate::Pressure::pa(101_325.0))?;
        Self::new(name, Density::kg_m3(sg * rho_w.si()), t_liquid, expansion_per_k)
    }

    /// Density at temperature `t`.
    pub fn density(&self, t: Temperature) -> Result<Density> {
        let t_k = finite("liquid", "temperature", t.k())?;
        let dt = t_k - self.t_ref.k();
        let rho = match self.expansion_per_k {
            Some(b) => self.density_ref.si() / (1.0 + b * dt),
            None => self.density_ref.si(),
        };
        Ok(Density::kg_m3(rho))
    }

    fn warnings(&self, t: Temperature) -> Vec<Warning> {
        if self.expansion_per_k.is_none() && (t.k() - self.t_ref.k()).abs() > 2.0 {
            vec![Warning::new(
                "assumption",
                format!(
                    "{}: density {} is for {} and is used unchanged at {}; give an expansion coefficient for a temperature correction",
                    self.name, self.density_ref, self.t_ref, t
                ),
            )]
        } else {
            Vec::new()
        }
    }
}

/// The liquid in a manometer.
#[derive(Debug, Clone, PartialEq)]
pub enum GaugeLiquid {
    /// Mercury (see the module doc). Handle with care: toxic vapour; spills need trained cleanup.
    Mercury,
    /// Water, by the given formulation, at 101 325 Pa.
    Water(WaterModel),
    /// Any other liquid, by its stated density.
    User(UserLiquid),
}

impl GaugeLiquid {
    /// Short name for reports.
    pub fn name(&self) -> &str {
        match self {
            Self::Mercury => "mercury",
            Self::Water(_) => "water",
            Self::User(u) => &u.name,
        }
    }

    /// Density at the liquid's temperature `t`.
    ///
    /// ```
    /// use stagna::{GaugeLiquid, Temperature};
    /// let rho = GaugeLiquid::Mercury.density(Temperature::celsius(20.0)).unwrap();
    /// assert!((rho.si() - 13_545.85).abs() < 0.01); // CRC Handbook, check-values.md §3.1
    /// ```
    pub fn density(&self, t: Temperature) -> Result<Density> {
        match self {
            Self::Mercury => {
                let t_c = finite("gauge liquid", "temperature", t.k())? - crate::units::constants::ZERO_CELSIUS;
                if !(-38.0..=100.0).contains(&t_c) {
                    return Err(Error::OutsideModel {
                        model: "mercury density",
                        param: "temperature",
                        value: t_c,
                        unit: "°C",
                        range: "-38–100 °C",
                        hint: "; mercury freezes at -38.8 °C",
                    });
                }
                Ok(Density::kg_m3(MERCURY_RHO0 / (1.0 + MERCURY_BETA * t_c)))
            }
            Self::Water(m) => Water::new(*m).density(t, crate::Pressure::pa(101_325.0)),
            Self::User(u) => u.density(t),
        }
    }

    /// Remarks on how far the density can be trusted at `t`.
    pub fn warnings(&self, t: Temperature) -> Vec<Warning> {
        match self {
            Self::User(u) => u.warnings(t),
            _ => Vec::new(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // check-values.md §3.1: CRC Handbook specific volumes converted to kg/m³ [R],
    // 0/10/20/30/40 °C → 13595.07, 13570.41, 13545.81, 13521.32, 13496.88. The linear model
    // stays within 0.08 kg/m³ (6 ppm) of them.
    #[test]
    fn mercury_against_crc_table() {
        for (t, rho) in [(0.0, 13_595.07), (10.0, 13_570.41), (20.0, 13_545.81), (30.0, 13_521.32), (40.0, 13_496.88)] {
            let got = GaugeLiquid::Mercury.density(Temperature::celsius(t)).unwrap().si();
            assert!((got - rho).abs() < 0.08, "{t}: {got} vs {rho}");
        }
        assert!(GaugeLiquid::Mercury.density(Temperature::celsius(-40.0)).is_err());
    }

    // Dibutyl phthalate d20 = 1.0459 (Merck Index citing Kemppinen & Gokcen 1956,
    // check-values.md §3.2): as SG 20/4 °C the density is 1.0459 × 999.9749 kg/m³.
    #[test]
    fn specific_gravity_route() {
        let dbp = UserLiquid::from_specific_gravity(
            "dibutyl phthalate",
            1.0459,
            Temperature::celsius(20.0),
            Temperature::celsius(4.0),
            None,
        )
        .unwrap();
        assert!((dbp.density_ref.si() - 1.0459 * 999.9749).abs() < 1e-3);
        let oil = GaugeLiquid::User(
            UserLiquid::new("gauge oil", Density::kg_m3(826.0), Temperature::celsius(20.0), Some(7.5e-4)).unwrap(),
        );
        let warm = oil.density(Temperature::celsius(30.0)).unwrap().si();
        assert!((warm - 826.0 / 1.0075).abs() < 1e-9);
        assert!(oil.warnings(Temperature::celsius(30.0)).is_empty());
        let plain =
            GaugeLiquid::User(UserLiquid::new("oil", Density::kg_m3(826.0), Temperature::celsius(20.0), None).unwrap());
        assert_eq!(plain.warnings(Temperature::celsius(30.0)).len(), 1);
    }

    #[test]
    fn user_liquid_needs_a_real_density() {
        let e = UserLiquid::new("x", Density::kg_m3(0.0), Temperature::celsius(20.0), None).unwrap_err();
        assert_eq!(e.to_string(), "liquid: density must be greater than 0, got 0 kg/m³");
        assert!(UserLiquid::new("x", Density::kg_m3(f64::NAN), Temperature::celsius(20.0), None).is_err());
    }
}
