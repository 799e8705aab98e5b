//! Semantic analysis of an sdeck model: names, units, values in clock units.
//!
//! [`analyze`] parses a file and resolves it into a [`Model`]: every name resolved, lets
//! inlined, every value converted to the model's clock, each equation split into drift
//! and diffusion. It never fails: broken input gives a model that holds what could be
//! understood, the diagnostics that arose while names were resolved and units inferred,
//! and the records (`structure`) from which sdeck-checks decides the structural rules.

mod analyze;
mod function;
mod ids;
mod meaning;
pub mod model;
pub mod structure;
pub mod symbols;
mod walk;

pub use analyze::{analyze, Analysis, Usage};
pub use meaning::meaning;
pub use model::*;
pub use structure::{Differential, RepeatedTerm, Structure, WrittenCorrelation};
pub use symbols::{Reference, Symbol, SymbolKind};
