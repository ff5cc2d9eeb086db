//! # Stagna
//!
//! The domain of differential-pressure flow measurement in plain Rust: units
//! and quantities, fluid properties at the measuring conditions, local
//! gravity, liquid manometers, probes and point velocities, with the
//! published formulation behind each and tests against published values.
//!
//! SI units inside; typed quantities ([`Pressure`], [`Temperature`], ...) at
//! the API; unit strings parsed by [`Unit::parse`]. Scalar results keep what
//! went into them and can show their worked [`Steps`]; whole-column kernels
//! (`*_column`) work over `&[f64]` slices in SI units and write into a
//! caller's buffer.
//!
//! ```
//! use stagna::*;
//! // Inclined gauge with oil, pitot-static tube in room air.
//! let air = Fluid::HumidAir(HumidAir::relative(0.45)?)
//!     .state(Pressure::kpa(100.8), Temperature::celsius(21.0))?;
//! let oil = GaugeLiquid::User(UserLiquid::new("gauge oil", Density::kg_m3(826.0), Temperature::celsius(20.0), Some(7.5e-4))?);
//! let gauge = Manometer::new(ManometerKind::Inclined { angle_deg: 20.0, area_ratio: 0.0036 }, oil, gravity::local(52.0, Length::m(40.0))?)?;
//! let dp = gauge.differential_pressure(Reading::Deflection(Length::mm(42.0)), Temperature::celsius(21.0), air.density)?;
//! let v = Probe::new(ProbeKind::PitotStatic, 0.998)?.velocity(dp.dp, &air, VelocityMethod::Auto)?;
//! // Same chain with CoolProp 8.0.0 humid air (HAPropsSI) and the incompressible formula:
//! // 14.0226 m/s; the isentropic correction (about M²/8) takes off 0.003 m/s.
//! assert!((v.velocity.si() - 14.0197).abs() < 0.002);
//! # Ok::<(), stagna::Error>(())
//! ```

// The reduction chain, stage by stage (each folder's module doc says what the
// stage takes in and gives out).
/// Whole campaigns over tables of readings.
pub mod campaign;
/// Fluids at the measuring conditions, gauge liquids, local gravity.
pub mod fluids;
/// Manometers and probes: from a reading to a point velocity.
pub mod instruments;
/// Tables in and out, charts, notebook display.
pub mod io;
/// Published test methods in their own form.
pub mod methods;
/// The measuring section: layouts, profiles, section means, flows.
pub mod section;
/// GUM and Monte Carlo uncertainty.
pub mod uncertainty;
/// Units and quantities.
pub mod units;

// Shared by every stage.
pub mod columns;
pub mod error;
pub mod progress;
pub mod steps;
#[cfg(test)]
mod testdir;

// The flat module paths of release 0.1, kept so that existing Rust code and
// notebooks (`stagna::probe::Probe`, `stagna::table::read_table`) keep compiling.
#[doc(hidden)]
pub use fluids::{fluid, gas_mixture, gauge_liquid, gravity, humid_air, water};
#[doc(hidden)]
pub use instruments::{manometer, probe};
#[doc(hidden)]
pub use io::{evcxr, plot, table};
#[doc(hidden)]
pub use methods::us_epa as epa;
#[doc(hidden)]
pub use section::{conduit, flow, friction, integration, layout, profile, profile_analysis as analysis};
#[doc(hidden)]
pub use uncertainty::{flow_models as flow_uncertainty, monte_carlo};
#[doc(hidden)]
pub use units::{constants, dimension, quantity, unit};

pub use error::{Error, Result, Warning};
pub use fluids::fluid::{Fluid, FluidState};
pub use fluids::gas_mixture::{Component, GasMixture, ReferenceCondition};
pub use fluids::gauge_liquid::{GaugeLiquid, UserLiquid};
pub use fluids::humid_air::{HumidAir, Humidity};
pub use fluids::water::{Water, WaterModel};
pub use instruments::manometer::{Manometer, ManometerKind, ManometerResult, Reading};
pub use instruments::probe::{FlowDirection, PointVelocity, Probe, ProbeKind, VelocityMethod};
pub use section::conduit::{Conduit, Section};
pub use section::flow::{FlowOptions, FlowResult, WallFactor, flow};
pub use section::friction::{FrictionModel, Regime};
pub use section::integration::{Averaging, SectionMean, section_mean};
pub use section::layout::{LayoutRule, Position, TraverseLayout};
pub use section::profile::{ProfileFamily, ProfileModel, SinglePointResult, single_point};
pub use steps::{Step, Steps};
pub use units::dimension::Dimension;
pub use units::quantity::{
    Acceleration, Area, Density, DynamicViscosity, KinematicViscosity, Length, MassFlow, MolarMass, Pressure, Quantity,
    Temperature, TemperatureDifference, Velocity, VolumeFlow,
};
pub use units::unit::Unit;
