//! Published test methods, in the form the methods print their equations.
//!
//! Takes in the raw values a method's data sheet asks for, in the method's own
//! units, and gives out the method's results with its constants, equation by
//! equation, so that a result can be checked line by line against the method
//! text. Today: the US EPA stack-test equations of Methods 2 and 3 ([`us_epa`]).

pub mod us_epa;
