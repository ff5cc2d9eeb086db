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

pub mod analysis;
pub mod campaign;
pub mod columns;
pub mod conduit;
pub mod constants;
pub mod dimension;
pub mod epa;
pub mod error;
pub mod evcxr;
pub mod flow;
pub mod flow_uncertainty;
pub mod fluid;
pub mod friction;
pub mod gas_mixture;
pub mod gauge_liquid;
pub mod gravity;
pub mod humid_air;
pub mod integration;
pub mod layout;
pub mod manometer;
pub mod monte_carlo;
pub mod plot;
pub mod probe;
pub mod profile;
pub mod quantity;
pub mod steps;
pub mod table;
pub mod uncertainty;
pub mod unit;
pub mod water;

pub use conduit::{Conduit, Section};
pub use dimension::Dimension;
pub use error::{Error, Result, Warning};
pub use flow::{FlowOptions, FlowResult, WallFactor, flow};
pub use fluid::{Fluid, FluidState};
pub use friction::{FrictionModel, Regime};
pub use gas_mixture::{Component, GasMixture, ReferenceCondition};
pub use gauge_liquid::{GaugeLiquid, UserLiquid};
pub use humid_air::{HumidAir, Humidity};
pub use integration::{Averaging, SectionMean, section_mean};
pub use layout::{LayoutRule, Position, TraverseLayout};
pub use manometer::{Manometer, ManometerKind, ManometerResult, Reading};
pub use probe::{FlowDirection, PointVelocity, Probe, ProbeKind, VelocityMethod};
pub use profile::{ProfileFamily, ProfileModel, SinglePointResult, single_point};
pub use quantity::{
    Acceleration, Area, Density, DynamicViscosity, KinematicViscosity, Length, MassFlow, MolarMass, Pressure, Quantity,
    Temperature, TemperatureDifference, Velocity, VolumeFlow,
};
pub use steps::{Step, Steps};
pub use unit::Unit;
pub use water::{Water, WaterModel};
