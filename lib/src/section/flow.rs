//! From a mean velocity to the flows people report: volume flow at actual
//! conditions, mass flow, flow at a reference condition, dry-basis flow.
//!
//! # Formula
//! Q = k_w · U · A (k_w the wall adjustment factor, 1 unless given),
//! ṁ = ρ Q, Q_ref = Q (p/p_ref)(T_ref/T) (ideal gas), Q_ref,dry = Q_ref (1 − B_ws).
//!
//! # References
//! - US EPA 40 CFR 60 App. A-1 Method 2 eq. 2-10 (dry standard flow) and
//!   Method 2H (wall effects): default WAF 0.9900 for brick-and-mortar stacks and
//!   0.9950 for all others, for circular stacks of 1.0 m or more (§1–2; as
//!   read in check-values.md §5.1).

use crate::error::{Error, Result, Warning, finite, within};
use crate::fluids::fluid::FluidState;
use crate::fluids::gas_mixture::ReferenceCondition;
use crate::section::conduit::Conduit;
use crate::units::quantity::{Area, MassFlow, Velocity, VolumeFlow};

/// A wall adjustment factor for equal-area traverses of circular stacks.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum WallFactor {
    /// US EPA Method 2H default for brick-and-mortar stacks, 0.9900.
    EpaBrickAndMortar,
    /// US EPA Method 2H default for all other stacks, 0.9950.
    EpaOtherStacks,
    /// A measured factor.
    Measured(f64),
}

impl WallFactor {
    /// The factor's value.
    pub fn value(self) -> f64 {
        match self {
            WallFactor::EpaBrickAndMortar => 0.9900,
            WallFactor::EpaOtherStacks => 0.9950,
            WallFactor::Measured(v) => v,
        }
    }
}

/// What to report besides the actual flow.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct FlowOptions {
    /// Reference condition for a gas flow.
    pub reference: Option<ReferenceCondition>,
    /// Water-vapour mole fraction B_ws for a dry-basis flow.
    pub moisture: Option<f64>,
    /// Wall adjustment factor.
    pub wall_factor: Option<WallFactor>,
}

/// Flows from one mean velocity.
#[derive(Debug, Clone, PartialEq)]
pub struct FlowResult {
    /// Mean velocity after any wall factor.
    pub mean_velocity: Velocity,
    /// Section area.
    pub area: Area,
    /// Volume flow at the measuring conditions.
    pub volume_flow: VolumeFlow,
    /// Mass flow.
    pub mass_flow: MassFlow,
    /// Volume flow at the reference condition (wet), if asked.
    pub reference_flow: Option<VolumeFlow>,
    /// Dry-basis flow at the reference condition, if moisture was given.
    pub dry_reference_flow: Option<VolumeFlow>,
    /// The reference condition of those flows.
    pub reference: Option<crate::ReferenceCondition>,
    /// Wall factor applied.
    pub wall_factor: Option<f64>,
    /// Remarks.
    pub warnings: Vec<Warning>,
}

/// Flows from a mean velocity, the conduit and the fluid state at the section.
pub fn flow(mean: Velocity, conduit: &Conduit, fluid: &FluidState, options: &FlowOptions) -> Result<FlowResult> {
    let u = finite("flow", "mean velocity", mean.si())?;
    let mut warnings = conduit.warnings.clone();
    let k = match options.wall_factor {
        None => 1.0,
        Some(w) => {
            let v = within("flow", "wall adjustment factor", w.value(), "", 0.9, 1.0)?;
            let large_round = conduit.is_circular() && conduit.hydraulic_diameter().si() >= 1.0;
            if !large_round {
                warnings.push(Warning::new(
                    "wall-factor",
                    "US EPA Method 2H wall factors are for circular stacks of 1.0 m diameter or more",
                ));
            }
            v
        }
    };
    let area = conduit.area();
    let q = k * u * area.si();
    let (reference_flow, dry_reference_flow) = match options.reference {
        None => {
            if options.moisture.is_some() {
                return Err(Error::Inconsistent {
                    context: "flow",
                    message: "a dry-basis flow needs a reference condition".into(),
                });
            }
            (None, None)
        }
        Some(r) => {
            if fluid.isentropic_exponent.is_none() {
                return Err(Error::Inconsistent {
                    context: "flow",
                    message: format!("a flow at reference conditions is for gases; '{}' is a liquid", fluid.model),
                });
            }
            let (t_ref, p_ref) = r.state();
            let q_ref = q * (fluid.pressure.si() / p_ref.si()) * (t_ref.k() / fluid.temperature.k());
            let dry = match options.moisture {
                Some(b) => Some(VolumeFlow::from_si(
                    q_ref * (1.0 - within("flow", "moisture fraction B_ws", b, "", 0.0, 1.0)?),
                )),
                None => None,
            };
            (Some(VolumeFlow::from_si(q_ref)), dry)
        }
    };
    Ok(FlowResult {
        mean_velocity: Velocity::m_s(k * u),
        area,
        volume_flow: VolumeFlow::from_si(q),
        mass_flow: MassFlow::from_si(fluid.density.si() * q),
        reference_flow,
        dry_reference_flow,
        reference: options.reference,
        wall_factor: options.wall_factor.map(WallFactor::value),
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fluids::gas_mixture::GasMixture;
    use crate::units::quantity::{Length, Pressure, Temperature};

    // check-values.md §4.2 worked example: v_s = 14.3852 m/s, D = 1.50 m, B_ws = 0.10,
    // 150 °C, P_s = 758.1618 mmHg → Q_sd = 56 912.5 dscm/h with EPA's T = t + 273 and
    // 760 mmHg; with exact 423.15 K and 101 325 Pa the same flow is 0.035 % lower.
    #[test]
    fn dry_standard_flow_matches_epa_example() {
        let stack = Conduit::circular(Length::m(1.5)).unwrap();
        let gas = GasMixture::flue_gas(12.0, 6.0, 0.0, 0.10).unwrap();
        let p = Pressure::pa(758.161_8 * 133.322_387_415);
        let t = Temperature::celsius(150.0);
        let state = crate::Fluid::Gas(gas).state(p, t).unwrap();
        let opts = FlowOptions { reference: Some(ReferenceCondition::Epa20C), moisture: Some(0.10), wall_factor: None };
        let r = flow(Velocity::m_s(14.3852), &stack, &state, &opts).unwrap();
        let q_sd = r.dry_reference_flow.unwrap().si() * 3600.0;
        let epa_form = 3600.0 * 0.9 * 14.3852 * r.area.si() * (293.15 / 423.15) * (758.161_8 / 760.0);
        // 760 mmHg (conventional) is 101 325.01 Pa, not exactly 1 atm: 1e-7 relative
        assert!((q_sd / epa_form - 1.0).abs() < 1e-6);
        assert!((q_sd / 56_912.5 - 1.0).abs() < 6e-4, "{q_sd}");
        assert!((r.mass_flow.si() - state.density.si() * r.volume_flow.si()).abs() < 1e-12);
    }

    #[test]
    fn wall_factor_and_refusals() {
        let stack = Conduit::circular(Length::m(2.0)).unwrap();
        let state = crate::Fluid::Gas(GasMixture::dry_air())
            .state(Pressure::pa(101_325.0), Temperature::celsius(20.0))
            .unwrap();
        let o = FlowOptions { wall_factor: Some(WallFactor::EpaOtherStacks), ..Default::default() };
        let r = flow(Velocity::m_s(10.0), &stack, &state, &o).unwrap();
        assert!((r.mean_velocity.si() - 9.95).abs() < 1e-12); // WAF 0.9950, EPA Method 2H
        assert!(r.warnings.is_empty());
        let small = Conduit::circular(Length::m(0.8)).unwrap();
        assert_eq!(flow(Velocity::m_s(10.0), &small, &state, &o).unwrap().warnings.len(), 1);
        let water =
            crate::Fluid::Water(crate::Water::default()).state(Pressure::pa(3e5), Temperature::celsius(10.0)).unwrap();
        let ref_opts = FlowOptions { reference: Some(ReferenceCondition::Normal0C), ..Default::default() };
        assert!(flow(Velocity::m_s(1.0), &small, &water, &ref_opts).unwrap_err().to_string().contains("liquid"));
        let bad = FlowOptions { moisture: Some(0.1), ..Default::default() };
        assert!(flow(Velocity::m_s(1.0), &small, &state, &bad).is_err());
    }
}
