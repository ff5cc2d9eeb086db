//! Conduits: circular and rectangular sections, area, hydraulic diameter,
//! roughness, Reynolds number and friction factor.
//!
//! # Formula
//! - circular: A = π D²/4, D_h = D
//! - rectangular W × H: A = W H, D_h = 2 W H/(W + H) (also the US EPA
//!   Method 1 "equivalent diameter")
//! - Re = ρ v D_h / μ
//!
//! # References
//! - US EPA 40 CFR 60 App. A-1, Method 1 §12.2 (equivalent diameter).

use std::fmt;

use crate::error::{Error, Result, Warning, finite, positive};
use crate::fluids::fluid::FluidState;
use crate::section::friction::{FrictionFactor, FrictionModel, friction_factor};
use crate::units::quantity::{Area, Length, Velocity, format_number};

/// Shape and size of a cross-section.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Section {
    /// Round.
    Circular {
        /// Inside diameter.
        diameter: Length,
    },
    /// Rectangular.
    Rectangular {
        /// Inside width (the side along which the ports are set).
        width: Length,
        /// Inside height (the traverse depth).
        height: Length,
    },
}

/// A pipe, duct or stack at the measuring section.
#[derive(Debug, Clone, PartialEq)]
pub struct Conduit {
    /// Shape and size.
    pub section: Section,
    /// Equivalent sand roughness ε of the wall.
    pub roughness: Length,
    /// Remarks from construction (e.g. ovality).
    pub warnings: Vec<Warning>,
}

impl Conduit {
    /// A round conduit of inside diameter `d` (smooth until a roughness is given).
    pub fn circular(d: Length) -> Result<Self> {
        positive("conduit", "diameter", d.si(), "m")?;
        Ok(Self { section: Section::Circular { diameter: d }, roughness: Length::m(0.0), warnings: Vec::new() })
    }

    /// A round conduit from several measured diameters (their mean); a warning
    /// when they spread by more than 1 % of the mean (ovality; ISO 3966 asks for the
    /// mean of several diameters, from memory).
    pub fn circular_from_diameters(ds: &[Length]) -> Result<Self> {
        if ds.is_empty() {
            return Err(Error::Inconsistent { context: "conduit", message: "no diameters given".into() });
        }
        for d in ds {
            positive("conduit", "diameter", d.si(), "m")?;
        }
        let mean = ds.iter().map(|d| d.si()).sum::<f64>() / ds.len() as f64;
        let spread =
            ds.iter().map(|d| d.si()).fold(f64::MIN, f64::max) - ds.iter().map(|d| d.si()).fold(f64::MAX, f64::min);
        let mut c = Self::circular(Length::m(mean))?;
        if spread > 0.01 * mean {
            c.warnings.push(Warning::new(
                "ovality",
                format!(
                    "measured diameters spread by {:.1} % of their mean {} m; the section is out of round",
                    spread / mean * 100.0,
                    format_number(mean)
                ),
            ));
        }
        Ok(c)
    }

    /// A rectangular conduit `width` × `height`.
    pub fn rectangular(width: Length, height: Length) -> Result<Self> {
        positive("conduit", "width", width.si(), "m")?;
        positive("conduit", "height", height.si(), "m")?;
        Ok(Self { section: Section::Rectangular { width, height }, roughness: Length::m(0.0), warnings: Vec::new() })
    }

    /// The same conduit with a wall roughness ε.
    pub fn with_roughness(mut self, eps: Length) -> Result<Self> {
        finite("conduit", "roughness", eps.si())?;
        if eps.si() < 0.0 {
            return Err(Error::OutOfRange {
                context: "conduit",
                param: "roughness",
                value: eps.si(),
                unit: "m",
                allowed: "0 or more".into(),
            });
        }
        // An absolute roughness as large as the hydraulic radius leaves no bore: a
        // unit slip (2 m for 2 mm), refused rather than fed to Colebrook.
        let limit = self.hydraulic_diameter().si() / 4.0;
        if eps.si() >= limit {
            return Err(Error::OutOfRange {
                context: "conduit",
                param: "roughness",
                value: eps.si(),
                unit: "m",
                allowed: format!(
                    "below a quarter of the hydraulic diameter ({} m)",
                    crate::units::quantity::format_number(limit)
                ),
            });
        }
        self.roughness = eps;
        Ok(self)
    }

    /// Cross-sectional area.
    pub fn area(&self) -> Area {
        Area::from_si(match self.section {
            Section::Circular { diameter } => std::f64::consts::PI * diameter.si().powi(2) / 4.0,
            Section::Rectangular { width, height } => width.si() * height.si(),
        })
    }

    /// Hydraulic diameter 4A/P (the EPA Method 1 equivalent diameter for rectangles).
    pub fn hydraulic_diameter(&self) -> Length {
        match self.section {
            Section::Circular { diameter } => diameter,
            Section::Rectangular { width, height } => {
                Length::m(2.0 * width.si() * height.si() / (width.si() + height.si()))
            }
        }
    }

    /// Relative roughness ε/D_h.
    pub fn relative_roughness(&self) -> f64 {
        self.roughness.si() / self.hydraulic_diameter().si()
    }

    /// True for a round section.
    pub fn is_circular(&self) -> bool {
        matches!(self.section, Section::Circular { .. })
    }

    /// Reynolds number ρ v D_h/μ of a mean velocity; the fluid state must carry a viscosity.
    pub fn reynolds(&self, v: Velocity, fluid: &FluidState) -> Result<f64> {
        let mu = fluid.viscosity.ok_or_else(|| Error::Inconsistent {
            context: "Reynolds number",
            message: format!("the fluid model '{}' has no viscosity; give one", fluid.model),
        })?;
        Ok(fluid.density.si() * v.si().abs() * self.hydraulic_diameter().si() / mu.si())
    }

    /// Darcy friction factor at Reynolds number `re`.
    pub fn friction_factor(&self, re: f64, model: FrictionModel) -> Result<FrictionFactor> {
        friction_factor(re, self.relative_roughness(), model)
    }
}

impl fmt::Display for Conduit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.section {
            Section::Circular { diameter } => {
                write!(f, "circular conduit, D = {} mm", format_number(diameter.si() * 1e3))?
            }
            Section::Rectangular { width, height } => write!(
                f,
                "rectangular conduit, {} × {} mm",
                format_number(width.si() * 1e3),
                format_number(height.si() * 1e3)
            )?,
        }
        // Four significant figures: the diameter is rarely known better than 0.1 %.
        write!(f, ", A = {} m²", crate::units::quantity::format_sig(self.area().si(), 4))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::quantity::{Density, DynamicViscosity, Pressure, Temperature};

    #[test]
    fn areas_and_hydraulic_diameters() {
        // check-values.md §4.2: D = 1.50 m → A = 1.76715 m²
        let c = Conduit::circular(Length::m(1.5)).unwrap();
        assert!((c.area().si() - 1.767_15).abs() < 1e-5);
        // EPA Method 1 §12.2: D_e = 2LW/(L + W); 1.2 m × 0.6 m → 0.8 m
        let r = Conduit::rectangular(Length::m(1.2), Length::m(0.6)).unwrap();
        assert!((r.hydraulic_diameter().si() - 0.8).abs() < 1e-15);
        assert!((r.area().si() - 0.72).abs() < 1e-15);
        assert!(r.to_string().contains("1200 × 600 mm"));
    }

    #[test]
    fn diameters_are_averaged_and_ovality_flagged() {
        let c = Conduit::circular_from_diameters(&[Length::mm(399.0), Length::mm(401.0)]).unwrap();
        assert!((c.hydraulic_diameter().si() - 0.4).abs() < 1e-12);
        assert!(c.warnings.is_empty());
        let o = Conduit::circular_from_diameters(&[Length::mm(390.0), Length::mm(410.0)]).unwrap();
        assert_eq!(o.warnings.len(), 1);
        assert!(Conduit::circular_from_diameters(&[]).is_err());
    }

    #[test]
    fn reynolds_and_friction() {
        let c = Conduit::circular(Length::mm(100.0)).unwrap().with_roughness(Length::mm(0.01)).unwrap();
        let st = FluidState {
            pressure: Pressure::pa(101_325.0),
            temperature: Temperature::celsius(20.0),
            density: Density::kg_m3(1000.0),
            viscosity: Some(DynamicViscosity::from_si(1e-3)),
            isentropic_exponent: None,
            model: "test",
            warnings: vec![],
        };
        let re = c.reynolds(Velocity::m_s(1.0), &st).unwrap();
        assert!((re - 1e5).abs() < 1e-6); // ρvD/μ = 1000·1·0.1/1e-3 (definition)
        let f = c.friction_factor(re, FrictionModel::Colebrook).unwrap();
        assert!((f.f - 0.018_513_866_077_471_648).abs() < 1e-15); // `fluids` 1.3.1 Colebrook(1e5, 1e-4)
        let mut no_mu = st.clone();
        no_mu.viscosity = None;
        assert!(c.reynolds(Velocity::m_s(1.0), &no_mu).unwrap_err().to_string().contains("no viscosity"));
        assert!(Conduit::circular(Length::m(0.0)).is_err());
        assert!(Conduit::circular(Length::m(1.0)).unwrap().with_roughness(Length::m(-1.0)).is_err());
    }
}
