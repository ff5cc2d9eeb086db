//! The instruments, from a reading to a point velocity.
//!
//! Takes in what was read (a manometer deflection, a scale reading, a transducer's
//! Δp) with the fluid states of the fluids stage and gives out the differential pressure
//! ([`manometer`]) and the point velocity behind a probe with its coefficient
//! and compressibility correction ([`probe`]); transducers and their calibration curves
//! ([`transducer`]).

pub mod manometer;
pub mod probe;
pub mod transducer;
