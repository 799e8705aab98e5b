//! Calculus of sdeck models: classification into families, closed forms and moments.

pub mod linear_system;
pub mod ode;
pub mod polynomial;
