//! Names of the pieces of an equation, for messages: which parameter is the speed, the
//! level, the volatility of a square-root state, and how they print.

use crate::algebra::{show_poly, Atom, Names, Poly};
use crate::{Derivation, Family};
use sdeck_semantics::{FactorId, Model, ParamId};

/// The speed, level and squared volatility of a square-root state as the model writes
/// them, with the parameter behind each when it is a single parameter.
#[derive(Clone, Debug, PartialEq)]
pub struct SquareRootTerms {
    /// e.g. `kappa`.
    pub speed: String,
    /// e.g. `level`.
    pub level: String,
    /// e.g. `vol²`.
    pub vol_squared: String,
    /// The parameter that is the speed, when the speed is exactly one parameter.
    pub speed_param: Option<ParamId>,
    /// The parameter whose square is the squared volatility, when it is one parameter.
    pub vol_param: Option<ParamId>,
}

/// The single parameter `p` when `poly` is exactly `p^power`.
fn single_param(poly: &Poly, power: i64) -> Option<ParamId> {
    let (monomial, coefficient) = poly.single_term()?;
    match (monomial.as_slice(), coefficient) {
        ([(Atom::Param(p), k)], c) if *k == power && c == 1.0 => Some(*p),
        _ => None,
    }
}

/// Describes state `state` when its family is square-root.
pub fn square_root_terms(
    model: &Model,
    derivation: &Derivation,
    state: FactorId,
) -> Option<SquareRootTerms> {
    let analysis = derivation.analysis();
    let (os, family) = analysis.one_state(state.index())?;
    if family != Family::SquareRoot {
        return None;
    }
    let names = Names::new(model);
    let speed = os.b.neg();
    let level = os.a.divide_by_term(&speed);
    let level_text = match &level {
        Some(l) => show_poly(l, &names),
        None => format!(
            "({})/({})",
            show_poly(&os.a, &names),
            show_poly(&speed, &names)
        ),
    };
    Some(SquareRootTerms {
        speed: show_poly(&speed, &names),
        level: level_text,
        vol_squared: show_poly(&os.beta, &names),
        speed_param: single_param(&speed, 1),
        vol_param: single_param(&os.beta, 2),
    })
}

/// The parameter `p` when the coefficient of the state in its own drift is exactly `−p`
/// (a speed of mean reversion written as one parameter), for a state with a one-state
/// family.
pub fn drift_speed_param(derivation: &Derivation, state: FactorId) -> Option<ParamId> {
    let (os, _) = derivation.analysis().one_state(state.index())?;
    single_param(&os.b.neg(), 1)
}

/// The coefficient of the state in its own drift, printed (`−kappa`), for a state with a
/// one-state family.
pub fn drift_slope_text(model: &Model, derivation: &Derivation, state: FactorId) -> Option<String> {
    let analysis = derivation.analysis();
    let (os, _) = analysis.one_state(state.index())?;
    Some(show_poly(&os.b, &Names::new(model)))
}

#[cfg(test)]
mod tests {
    use super::drift_speed_param;

    fn speed_of(equation: &str) -> Option<String> {
        let text = format!(
            "param kappa = 2 [1/year]\nparam theta = 0.03\nparam vol = 0.01 [1/sqrt(year)]\nshock W\nfactor x = 0.01\n{equation}\n"
        );
        let analysis = sdeck_semantics::analyze(&text, "speed");
        assert!(!analysis.has_errors(), "{:?}", analysis.diagnostics);
        let model = &analysis.model;
        let derivation = crate::derive(model);
        let x = model.factor_id("x")?;
        drift_speed_param(&derivation, x).map(|p| model.params[p].name.clone())
    }

    /// The speed is the parameter `p` only when the drift's own coefficient is exactly −p.
    #[test]
    fn the_speed_is_the_parameter_of_a_slope_minus_p() {
        assert_eq!(
            speed_of("dx = kappa * (theta - x) dt + vol dW").as_deref(),
            Some("kappa")
        );
        assert_eq!(speed_of("dx = -2 * kappa * x dt + vol dW"), None);
        assert_eq!(speed_of("dx = kappa * x dt + vol dW"), None);
    }
}
