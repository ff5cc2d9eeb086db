//! Working fluids (the fluid that flows past the probe and fills the
//! manometer lines) and their state at the measuring temperature and pressure.

use crate::error::{Result, Warning, positive};
use crate::fluids::gas_mixture::GasMixture;
use crate::fluids::gauge_liquid::UserLiquid;
use crate::fluids::humid_air::{AIR_ISENTROPIC_EXPONENT, HumidAir, sutherland_viscosity};
use crate::fluids::water::Water;
use crate::units::quantity::{Density, DynamicViscosity, MolarMass, Pressure, Temperature};

/// A working fluid.
#[derive(Debug, Clone, PartialEq)]
pub enum Fluid {
    /// Liquid water.
    Water(Water),
    /// Moist air by CIPM-2007.
    HumidAir(HumidAir),
    /// An ideal-gas mixture (stack gas).
    Gas(GasMixture),
    /// A user gas given by molar mass, γ and viscosity.
    IdealGas {
        /// Name for reports.
        name: String,
        /// Molar mass.
        molar_mass: MolarMass,
        /// Ratio of specific heats.
        isentropic_exponent: f64,
        /// Dynamic viscosity, if known.
        viscosity: Option<DynamicViscosity>,
    },
    /// A user liquid given by density law and viscosity.
    Liquid {
        /// Density law.
        liquid: UserLiquid,
        /// Dynamic viscosity, if known.
        viscosity: Option<DynamicViscosity>,
    },
}

/// Properties of a fluid at one temperature and pressure.
#[derive(Debug, Clone, PartialEq)]
pub struct FluidState {
    /// Absolute pressure.
    pub pressure: Pressure,
    /// Temperature.
    pub temperature: Temperature,
    /// Density.
    pub density: Density,
    /// Dynamic viscosity, where the fluid model has one.
    pub viscosity: Option<DynamicViscosity>,
    /// Ratio of specific heats for gases (`None` for liquids).
    pub isentropic_exponent: Option<f64>,
    /// Which model gave the density.
    pub model: &'static str,
    /// Remarks on validity.
    pub warnings: Vec<Warning>,
}

impl Fluid {
    /// State at absolute pressure `p` and temperature `t`.
    ///
    /// ```
    /// use stagna::{Fluid, HumidAir, Pressure, Temperature};
    /// let air = Fluid::HumidAir(HumidAir::relative(0.5).unwrap());
    /// let s = air.state(Pressure::pa(101_325.0), Temperature::celsius(20.0)).unwrap();
    /// assert!((s.density.si() - 1.199314).abs() < 1e-6); // CIPM-2007, check-values.md §2.1
    /// ```
    pub fn state(&self, p: Pressure, t: Temperature) -> Result<FluidState> {
        Ok(match self {
            Fluid::Water(w) => FluidState {
                pressure: p,
                temperature: t,
                density: w.density(t, p)?,
                viscosity: Some(w.viscosity(t, p)?),
                isentropic_exponent: None,
                model: w.model.describe(),
                warnings: w.warnings(t, p),
            },
            Fluid::HumidAir(a) => {
                let s = a.state(p, t)?;
                FluidState {
                    pressure: p,
                    temperature: t,
                    density: s.density,
                    viscosity: Some(sutherland_viscosity(t)),
                    isentropic_exponent: Some(AIR_ISENTROPIC_EXPONENT),
                    model: "CIPM-2007 moist air (Picard et al. 2008)",
                    warnings: s.warnings,
                }
            }
            Fluid::Gas(g) => FluidState {
                pressure: p,
                temperature: t,
                density: g.density(p, t)?,
                viscosity: g.viscosity(t),
                isentropic_exponent: Some(g.isentropic_exponent()),
                model: "ideal-gas mixture",
                warnings: Vec::new(),
            },
            Fluid::IdealGas { molar_mass, isentropic_exponent, viscosity, .. } => {
                let m = positive("gas", "molar mass", molar_mass.si(), "kg/mol")?;
                positive("gas", "absolute pressure", p.si(), "Pa")?;
                positive("gas", "temperature", t.k(), "K")?;
                FluidState {
                    pressure: p,
                    temperature: t,
                    density: Density::kg_m3(p.si() * m / (crate::units::constants::MOLAR_GAS_CONSTANT * t.k())),
                    viscosity: *viscosity,
                    isentropic_exponent: Some(*isentropic_exponent),
                    model: "ideal gas",
                    warnings: Vec::new(),
                }
            }
            Fluid::Liquid { liquid, viscosity } => FluidState {
                pressure: p,
                temperature: t,
                density: liquid.density(t)?,
                viscosity: *viscosity,
                isentropic_exponent: None,
                model: "user liquid",
                warnings: Vec::new(),
            },
        })
    }

    /// Density in kg/m³ at p (Pa, absolute) and T (K) without collecting
    /// warnings or viscosity: the per-row path of column kernels.
    pub fn density_si(&self, p_pa: f64, t_k: f64) -> Result<f64> {
        match self {
            Fluid::Water(w) => Ok(w.density(Temperature::kelvin(t_k), Pressure::pa(p_pa))?.si()),
            Fluid::HumidAir(a) => a.density_si(p_pa, t_k),
            Fluid::Gas(g) => Ok(g.density(Pressure::pa(p_pa), Temperature::kelvin(t_k))?.si()),
            Fluid::IdealGas { molar_mass, .. } => {
                let m = positive("gas", "molar mass", molar_mass.si(), "kg/mol")?;
                positive("gas", "absolute pressure", p_pa, "Pa")?;
                positive("gas", "temperature", t_k, "K")?;
                Ok(p_pa * m / (crate::units::constants::MOLAR_GAS_CONSTANT * t_k))
            }
            Fluid::Liquid { liquid, .. } => Ok(liquid.density(Temperature::kelvin(t_k))?.si()),
        }
    }

    /// Ratio of specific heats for gases, `None` for liquids.
    pub fn isentropic_exponent(&self) -> Option<f64> {
        match self {
            Fluid::HumidAir(_) => Some(AIR_ISENTROPIC_EXPONENT),
            Fluid::Gas(g) => Some(g.isentropic_exponent()),
            Fluid::IdealGas { isentropic_exponent, .. } => Some(*isentropic_exponent),
            Fluid::Water(_) | Fluid::Liquid { .. } => None,
        }
    }

    /// True for gases (compressibility corrections apply).
    pub fn is_gas(&self) -> bool {
        matches!(self, Fluid::HumidAir(_) | Fluid::Gas(_) | Fluid::IdealGas { .. })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fluids::gas_mixture::Component;

    const ATM: Pressure = Pressure::pa(101_325.0);

    // Ideal-gas N2 at 20 °C, 1 atm: p·M/(R·T) = 1.164554 kg/m³ (arithmetic with CoolProp 8.0.0's
    // molar mass 28.01348 g/mol); CoolProp's real-gas density is 1.164830, 2.4e-4 higher.
    #[test]
    fn ideal_gas_and_mixture_agree() {
        let n2 = Fluid::IdealGas {
            name: "nitrogen".into(),
            molar_mass: MolarMass::g_mol(28.013_48),
            isentropic_exponent: 1.4,
            viscosity: None,
        };
        let s = n2.state(ATM, Temperature::celsius(20.0)).unwrap();
        assert!((s.density.si() - 1.164_554).abs() < 1e-6);
        assert!((s.density.si() / 1.164_830 - 1.0).abs() < 3e-4);
        let mix = Fluid::Gas(GasMixture::new(&[(Component::N2, 1.0)], 0.0).unwrap());
        let m = mix.state(ATM, Temperature::celsius(20.0)).unwrap();
        assert!((m.density.si() - s.density.si()).abs() < 1e-12);
        assert!(m.viscosity.is_some() && n2.is_gas() && mix.is_gas());
        let bad = Fluid::IdealGas {
            name: "x".into(),
            molar_mass: MolarMass::g_mol(0.0),
            isentropic_exponent: 1.4,
            viscosity: None,
        };
        assert_eq!(
            bad.state(ATM, Temperature::celsius(20.0)).unwrap_err().to_string(),
            "gas: molar mass must be greater than 0, got 0 kg/mol"
        );
    }

    #[test]
    fn water_state_carries_viscosity_and_warnings() {
        let w = Fluid::Water(Water::default());
        let s = w.state(ATM, Temperature::celsius(20.0)).unwrap();
        assert!((s.viscosity.unwrap().si() * 1e6 - 1001.60).abs() < 0.02); // IAPWS 2008, check-values.md §1.2
        assert!(s.isentropic_exponent.is_none() && !w.is_gas());
        assert_eq!(w.state(ATM, Temperature::celsius(100.0)).unwrap().warnings.len(), 1);
    }

    #[test]
    fn user_liquid_state() {
        let glycol =
            UserLiquid::new("glycol 30 %", Density::kg_m3(1040.0), Temperature::celsius(20.0), Some(5e-4)).unwrap();
        let f = Fluid::Liquid { liquid: glycol, viscosity: Some(DynamicViscosity::from_si(2.5e-3)) };
        let s = f.state(ATM, Temperature::celsius(30.0)).unwrap();
        assert!((s.density.si() - 1040.0 / 1.005).abs() < 1e-9); // ρ_ref/(1 + β·Δt), definition
        assert_eq!(s.viscosity.unwrap().si(), 2.5e-3);
    }
}
