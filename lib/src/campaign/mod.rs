//! Whole campaigns.
//!
//! Takes in a table of readings (a polars `DataFrame`: many traverses, each a set
//! of points) with a [`CampaignSpec`] saying which columns hold what, and gives out
//! one row per traverse (mean velocity, flows, uncertainty) and the per-point
//! velocities, running the stages above over whole columns in Rust.

mod reduction;
pub mod samples;
pub mod stream;

pub use reduction::*;
