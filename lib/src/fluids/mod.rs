//! The fluids and the site.
//!
//! Takes in the measuring conditions (pressure, temperature, humidity or gas
//! analysis, latitude and elevation) and gives out the properties the later
//! stages need: the working fluid's density and viscosity as a
//! [`FluidState`](fluid::FluidState) (water by IAPWS-IF97, moist air by CIPM-2007,
//! ideal-gas mixtures), the gauge liquid's density at its temperature, and local
//! gravity.

pub mod fluid;
pub mod gas_mixture;
pub mod gauge_liquid;
pub mod gravity;
pub mod humid_air;
pub mod water;
