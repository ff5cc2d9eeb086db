//! Uncertainty of the results.
//!
//! Takes in a measurement model and its inputs with their distributions and gives
//! out the combined and expanded uncertainty: GUM propagation with exact
//! sensitivities from dual numbers, budgets and Student-t coverage factors
//! (JCGM 100, in `propagation`, re-exported here), Monte Carlo propagation of
//! distributions (JCGM 101, [`monte_carlo`]) and the models of the
//! differential-pressure chain with their method terms ([`flow_models`]).

pub mod flow_models;
pub mod monte_carlo;
mod normal;
mod propagation;

pub use propagation::*;
