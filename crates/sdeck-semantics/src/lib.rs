//! Semantic analysis of an sdeck model: names, units, values in clock units.

pub mod model;

pub use model::*;
