//! The measuring section, from point velocities to flows.
//!
//! Takes in the conduit's shape and size and the point velocities of the
//! instruments stage and gives out where to put the probe ([`layout`]), the
//! Reynolds number and friction factor ([`conduit`], [`friction`]), developed-flow
//! profiles and the single-point method ([`profile`]), the section-mean velocity
//! ([`integration`]), volume, mass and reference-condition flows ([`flow`]) and
//! profile fits and checks ([`profile_analysis`]), and the local-velocity corrections and
//! conditions of use of the probe ([`local_corrections`]).

pub mod conduit;
pub mod flow;
pub mod friction;
pub mod integration;
pub mod layout;
pub mod local_corrections;
pub mod profile;
pub mod profile_analysis;
