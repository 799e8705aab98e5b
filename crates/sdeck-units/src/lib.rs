//! Units of sdeck models: dimensions with exact rational exponents, the built-in time
//! units, and the conversion of a value written in any unit to the model's clock.
//!
//! Layout:
//! - [`rational`]: [`Rational`], exact exponents with checked arithmetic.
//! - [`dimension`]: [`Dimension`], its algebra and its human forms.
//! - [`time_units`]: `year`, `month`, `week`, `day`, `bday` and their lengths in years.
//! - [`number`]: the one number formatter (significant digits, %, bp, units).
//! - [`eval`]: [`eval_unit`], from a written [`UnitExpr`](sdeck_syntax::ast::UnitExpr) to a
//!   dimension and a scale factor to the clock, with errors that say what to write.
//!
//! Invariant: exponents are never floating point, so `year^(-1/2) * sqrt(year)` is
//! dimensionless exactly; only the scale factor is an `f64`. Nothing here panics on what a
//! user writes: exponent overflow is an error.
//!
//! ```
//! use sdeck_diagnostics::Span;
//! use sdeck_syntax::ast::{Ident, UnitExpr};
//! use sdeck_units::{eval_unit, suggest_unit_text, time_unit_years};
//!
//! // [1/sqrt(day)], as the parser gives it.
//! let day = UnitExpr::Name(Ident { name: "day".into(), span: 7..10 });
//! let sqrt_day = UnitExpr::Sqrt { inner: Box::new(day), span: 2..11 };
//! let unit = UnitExpr::Div {
//!     lhs: Box::new(UnitExpr::One { span: 0..1 }),
//!     rhs: Box::new(sqrt_day),
//!     span: 0..11,
//! };
//! let clock = time_unit_years("year").unwrap_or(1.0);
//! let value = eval_unit(&unit, &|name: &str| name == "EUR", clock).unwrap();
//! assert_eq!(value.scale, 365f64.sqrt());
//! assert_eq!(value.dimension.display_in("year"), "1/sqrt(year)");
//! assert_eq!(value.dimension.describe(), "1/sqrt(time)");
//! assert_eq!(suggest_unit_text(&value.dimension, "day"), "1/sqrt(day)");
//! ```

pub mod dimension;
pub mod eval;
pub mod number;
pub mod rational;
pub mod time_units;

pub use dimension::{Dimension, TIME_BASE};
pub use eval::{
    eval_unit, eval_unit_with_names, suggest_unit_text, unit_expr_text, UnitError, UnitValue,
};
pub use rational::Rational;
pub use time_units::{is_time_unit, time_unit_years, time_unit_years_exact, TIME_UNITS};
