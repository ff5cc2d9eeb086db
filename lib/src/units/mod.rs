//! Units and quantities.
//!
//! Takes in numbers with unit strings (`"600 mm"`, `"3 inH2O@60F"`) and gives out
//! values in SI with their [`Dimension`](dimension::Dimension): the unit table and
//! parser ([`unit`]), dimensions ([`dimension`]), the dynamic [`Quantity`](quantity::Quantity)
//! and the typed quantities the rest of the library takes ([`quantity`]), and the
//! physical and conventional constants with their sources ([`constants`]).

pub mod constants;
pub mod dimension;
pub mod quantity;
pub mod unit;
