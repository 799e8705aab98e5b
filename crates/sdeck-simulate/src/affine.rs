//! Structural reading of coefficients: is an expression affine in the states with constant
//! coefficients, or a constant times the square root of one state?
//!
//! The exact schemes need numbers (drift matrix, diffusion loadings, square-root
//! parameters); the calculus layer says which family a state belongs to, and this module
//! reads the numbers off the equations and confirms that the shape really holds.

use sdeck_semantics::{Expr, Function};

/// `constant + Σ coefficients[i] · x_i`.
#[derive(Clone, Debug, PartialEq)]
pub struct AffineForm {
    pub constant: f64,
    /// One entry per state of the model.
    pub coefficients: Vec<f64>,
}

impl AffineForm {
    fn constant(value: f64, state_count: usize) -> AffineForm {
        AffineForm {
            constant: value,
            coefficients: vec![0.0; state_count],
        }
    }

    /// Whether no state appears.
    pub fn is_constant(&self) -> bool {
        self.coefficients.iter().all(|c| *c == 0.0)
    }

    /// Whether only state `own` (if any) appears.
    pub fn involves_only(&self, own: usize) -> bool {
        self.coefficients
            .iter()
            .enumerate()
            .all(|(i, c)| i == own || *c == 0.0)
    }

    fn scaled(mut self, factor: f64) -> AffineForm {
        self.constant *= factor;
        self.coefficients.iter_mut().for_each(|c| *c *= factor);
        self
    }

    fn combined(mut self, other: AffineForm, sign: f64) -> AffineForm {
        self.constant += sign * other.constant;
        for (c, o) in self.coefficients.iter_mut().zip(other.coefficients) {
            *c += sign * o;
        }
        self
    }
}

/// The affine form of `expr` when it is affine in the states with constant coefficients
/// (no `t`, no unresolved part); `None` otherwise.
pub fn affine_form(expr: &Expr, params: &[f64], state_count: usize) -> Option<AffineForm> {
    let form =
        match expr {
            Expr::Invalid | Expr::Time => return None,
            Expr::Const(c) => AffineForm::constant(*c, state_count),
            Expr::Param(i) => AffineForm::constant(*params.get(i.index())?, state_count),
            Expr::Factor(i) => {
                let mut form = AffineForm::constant(0.0, state_count);
                *form.coefficients.get_mut(i.index())? = 1.0;
                form
            }
            Expr::Neg(a) => affine_form(a, params, state_count)?.scaled(-1.0),
            Expr::Add(a, b) => affine_form(a, params, state_count)?
                .combined(affine_form(b, params, state_count)?, 1.0),
            Expr::Sub(a, b) => affine_form(a, params, state_count)?
                .combined(affine_form(b, params, state_count)?, -1.0),
            Expr::Mul(a, b) => {
                let left = affine_form(a, params, state_count)?;
                let right = affine_form(b, params, state_count)?;
                if left.is_constant() {
                    right.scaled(left.constant)
                } else if right.is_constant() {
                    left.scaled(right.constant)
                } else {
                    return None;
                }
            }
            Expr::Div(a, b) => {
                let right = affine_form(b, params, state_count)?;
                if !right.is_constant() || right.constant == 0.0 {
                    return None;
                }
                affine_form(a, params, state_count)?.scaled(1.0 / right.constant)
            }
            Expr::Pow(a, b) => {
                let base = affine_form(a, params, state_count)?;
                let exponent = affine_form(b, params, state_count)?;
                if !exponent.is_constant() {
                    return None;
                }
                if base.is_constant() {
                    AffineForm::constant(base.constant.powf(exponent.constant), state_count)
                } else if exponent.constant == 1.0 {
                    base
                } else if exponent.constant == 0.0 {
                    AffineForm::constant(1.0, state_count)
                } else {
                    return None;
                }
            }
            Expr::Call(function, args) => {
                // A function of constants is a constant; anything else is not affine.
                let mut values = Vec::with_capacity(args.len());
                for arg in args {
                    let form = affine_form(arg, params, state_count)?;
                    if !form.is_constant() {
                        return None;
                    }
                    values.push(form.constant);
                }
                let value = Expr::Call(*function, values.into_iter().map(Expr::Const).collect())
                    .eval(&[], &[], 0.0);
                AffineForm::constant(value, state_count)
            }
        };
    if form.constant.is_finite() && form.coefficients.iter().all(|c| c.is_finite()) {
        Some(form)
    } else {
        None
    }
}

/// `(factor, state)` when `expr` is `factor · sqrt(x_state)` with a constant factor.
pub fn scaled_square_root(expr: &Expr, params: &[f64], state_count: usize) -> Option<(f64, usize)> {
    let root_of = |inner: &Expr| -> Option<(f64, usize)> {
        let form = affine_form(inner, params, state_count)?;
        if form.constant != 0.0 {
            return None;
        }
        let mut present = form
            .coefficients
            .iter()
            .enumerate()
            .filter(|(_, c)| **c != 0.0);
        let (state, weight) = present.next()?;
        if present.next().is_some() || *weight <= 0.0 {
            return None;
        }
        Some((weight.sqrt(), state))
    };
    let constant_of = |e: &Expr| -> Option<f64> {
        let form = affine_form(e, params, state_count)?;
        form.is_constant().then_some(form.constant)
    };
    match expr {
        Expr::Call(Function::Sqrt, args) => root_of(args.first()?),
        Expr::Pow(base, exponent) if constant_of(exponent) == Some(0.5) => root_of(base),
        Expr::Neg(a) => scaled_square_root(a, params, state_count).map(|(f, s)| (-f, s)),
        Expr::Mul(a, b) => {
            if let Some(k) = constant_of(a) {
                scaled_square_root(b, params, state_count).map(|(f, s)| (k * f, s))
            } else {
                let k = constant_of(b)?;
                scaled_square_root(a, params, state_count).map(|(f, s)| (k * f, s))
            }
        }
        Expr::Div(a, b) => {
            let k = constant_of(b)?;
            if k == 0.0 {
                return None;
            }
            scaled_square_root(a, params, state_count).map(|(f, s)| (f / k, s))
        }
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn b(e: Expr) -> Box<Expr> {
        Box::new(e)
    }

    #[test]
    fn mean_reverting_drift_is_affine() {
        // kappa * (level - x) with kappa = 2, level = 0.03, read against y as well.
        let drift = Expr::Mul(
            b(Expr::param(0)),
            b(Expr::Sub(b(Expr::param(1)), b(Expr::factor(0)))),
        );
        let form = affine_form(&drift, &[2.0, 0.03], 2).unwrap();
        assert!((form.constant - 0.06).abs() < 1e-15);
        assert_eq!(form.coefficients, vec![-2.0, 0.0]);
        assert!(form.involves_only(0));
    }

    #[test]
    fn products_of_states_time_and_functions_of_states_are_not_affine() {
        let square = Expr::Mul(b(Expr::factor(0)), b(Expr::factor(0)));
        assert_eq!(affine_form(&square, &[], 1), None);
        assert_eq!(
            affine_form(&Expr::Mul(b(Expr::Time), b(Expr::factor(0))), &[], 1),
            None
        );
        assert_eq!(
            affine_form(&Expr::Call(Function::Exp, vec![Expr::factor(0)]), &[], 1),
            None
        );
        assert_eq!(
            affine_form(&Expr::Div(b(Expr::factor(0)), b(Expr::Const(0.0))), &[], 1),
            None
        );
        let constant_call = Expr::Call(Function::Sqrt, vec![Expr::Const(4.0)]);
        assert_eq!(
            affine_form(&constant_call, &[], 1).map(|f| f.constant),
            Some(2.0)
        );
    }

    #[test]
    fn square_root_diffusions_are_recognised_in_their_usual_spellings() {
        let sqrt_x = Expr::Call(Function::Sqrt, vec![Expr::factor(0)]);
        let vol_sqrt_x = Expr::Mul(b(Expr::param(0)), b(sqrt_x.clone()));
        assert_eq!(scaled_square_root(&vol_sqrt_x, &[0.3], 1), Some((0.3, 0)));
        let sqrt_x_over_two = Expr::Div(b(sqrt_x), b(Expr::Const(2.0)));
        assert_eq!(scaled_square_root(&sqrt_x_over_two, &[], 1), Some((0.5, 0)));
        // sqrt(vol^2 * x)
        let inside = Expr::Call(
            Function::Sqrt,
            vec![Expr::Mul(
                b(Expr::Pow(b(Expr::param(0)), b(Expr::Const(2.0)))),
                b(Expr::factor(0)),
            )],
        );
        let (factor, state) = scaled_square_root(&inside, &[0.3], 1).unwrap();
        assert!((factor - 0.3).abs() < 1e-15 && state == 0);
        // x ^ 0.5 with another state: not a square root of one state.
        let mixed = Expr::Pow(
            b(Expr::Add(b(Expr::factor(0)), b(Expr::factor(1)))),
            b(Expr::Const(0.5)),
        );
        assert_eq!(scaled_square_root(&mixed, &[], 2), None);
    }
}
