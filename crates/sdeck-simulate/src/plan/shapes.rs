//! What the equations say, read structurally: the states under a root (full truncation),
//! and per state the affine drift and diffusion, a square root of itself or of another
//! state, or the shape of a price driven by a variance.

use crate::affine::{affine_form, scaled_square_root, AffineForm};
use crate::bytecode::mark_root_states;
use sdeck_semantics::{Expr, Function, Model};

/// States that Euler–Maruyama reads as max(x, 0) (full truncation). A state qualifies when
/// it appears under `sqrt`, `log` or a fractional power and either
/// - that argument is affine with non-negative constant and positive coefficients
///   (`sqrt(v)`, `sqrt(theta * v)`, `x^1.5`): reading x⁺ keeps the argument in its domain; or
/// - the state's declared domain has a lower bound at or above 0 (`factor v = 4% >= 0`):
///   reading x⁺ keeps to the declared domain.
///
/// A state that may be negative and appears only under a root whose argument stays
/// positive anyway (`sqrt(1 + p^2)`) is left alone: truncating it would change the model.
pub(super) fn root_states(model: &Model) -> Vec<bool> {
    let n = model.factors.len();
    let params = model.param_values();
    let mut under_root = vec![false; n];
    let mut affine_argument = vec![false; n];
    for state in &model.factors {
        if let Some(equation) = &state.equation {
            let coefficients = std::iter::once(&equation.drift)
                .chain(equation.diffusion.iter().map(|term| &term.coefficient));
            for expr in coefficients {
                mark_root_states(expr, &mut under_root);
                mark_affine_root_arguments(expr, &params, &mut affine_argument);
            }
        }
    }
    (0..n)
        .map(|i| {
            let declared_non_negative = model.factors[i]
                .domain
                .lower
                .is_some_and(|(bound, _)| bound >= 0.0);
            affine_argument[i] || (under_root[i] && declared_non_negative)
        })
        .collect()
}

/// Marks the states of every root argument that is affine with a non-negative constant
/// and positive coefficients.
fn mark_affine_root_arguments(expr: &Expr, params: &[f64], marks: &mut [bool]) {
    let n = marks.len();
    let mark_argument = |argument: &Expr, marks: &mut [bool]| {
        if let Some(form) = affine_form(argument, params, n) {
            let positive = form.constant >= 0.0 && form.coefficients.iter().all(|c| *c >= 0.0);
            if positive {
                for (mark, c) in marks.iter_mut().zip(&form.coefficients) {
                    *mark |= *c > 0.0;
                }
            }
        }
    };
    match expr {
        Expr::Call(Function::Sqrt | Function::Log, args) => {
            if let Some(argument) = args.first() {
                mark_argument(argument, marks);
            }
        }
        Expr::Pow(base, exponent) => {
            let integer = matches!(affine_form(exponent, params, n), Some(f) if f.is_constant() && f.constant.fract() == 0.0);
            if !integer {
                mark_argument(base, marks);
            }
        }
        _ => {}
    }
    expr.for_each_child(|child| mark_affine_root_arguments(child, params, marks));
}

/// What the equations say about each state, read structurally.
pub(super) struct StateShape {
    pub(super) drift: Option<AffineForm>,
    /// `(noise, form)` per diffusion term; `None` when some term is not affine.
    pub(super) diffusion: Option<Vec<(usize, AffineForm)>>,
    pub(super) noises: Vec<usize>,
    pub(super) square_root: Option<(usize, f64)>,
    /// `(noise, c, j)` when the one diffusion term is c·√x_j of another state j.
    pub(super) variance_root: Option<(usize, f64, usize)>,
    /// A price written as dS = S (a + b V) dt + c S √V dW, V another state.
    pub(super) price: Option<PriceShape>,
}

/// dS = S (drift) dt + loading · S √V dW on `noise`, V = state `variance`, `drift` affine in V.
pub(super) struct PriceShape {
    pub(super) drift: AffineForm,
    pub(super) noise: usize,
    pub(super) loading: f64,
    pub(super) variance: usize,
}

/// `expr / x_state` when every term of `expr` has the factor x_state (a product with it,
/// or sums and quotients of such); `None` otherwise.
fn without_factor(expr: &Expr, state: usize) -> Option<Expr> {
    let boxed = Box::new;
    match expr {
        Expr::Factor(i) if i.index() == state => Some(Expr::Const(1.0)),
        Expr::Mul(a, b) => without_factor(a, state)
            .map(|a| Expr::Mul(boxed(a), b.clone()))
            .or_else(|| without_factor(b, state).map(|b| Expr::Mul(a.clone(), boxed(b)))),
        Expr::Div(a, b) => without_factor(a, state).map(|a| Expr::Div(boxed(a), b.clone())),
        Expr::Neg(a) => without_factor(a, state).map(|a| Expr::Neg(boxed(a))),
        Expr::Add(a, b) => Some(Expr::Add(
            boxed(without_factor(a, state)?),
            boxed(without_factor(b, state)?),
        )),
        Expr::Sub(a, b) => Some(Expr::Sub(
            boxed(without_factor(a, state)?),
            boxed(without_factor(b, state)?),
        )),
        _ => None,
    }
}

/// The price shape of state `index`: its drift and its one diffusion term divided by the
/// state are, in turn, affine in one other state V and a constant times √V.
fn price_shape(
    index: usize,
    equation: &sdeck_semantics::Equation,
    params: &[f64],
    n: usize,
) -> Option<PriceShape> {
    let [term] = equation.diffusion.as_slice() else {
        return None;
    };
    let per_unit = without_factor(&term.coefficient, index)?;
    let (loading, variance) = scaled_square_root(&per_unit, params, n)?;
    let drift = affine_form(&without_factor(&equation.drift, index)?, params, n)?;
    (variance != index && drift.involves_only(variance)).then_some(PriceShape {
        drift,
        noise: term.noise.index(),
        loading,
        variance,
    })
}

pub(super) fn read_shapes(model: &Model) -> Vec<Option<StateShape>> {
    let params = model.param_values();
    let n = model.factors.len();
    model
        .factors
        .iter()
        .enumerate()
        .map(|(index, state)| {
            let equation = state.equation.as_ref()?;
            let drift = affine_form(&equation.drift, &params, n);
            let diffusion = equation
                .diffusion
                .iter()
                .map(|term| {
                    affine_form(&term.coefficient, &params, n)
                        .map(|form| (term.noise.index(), form))
                })
                .collect::<Option<Vec<_>>>();
            // Only a square root of the state itself counts.
            let root = match equation.diffusion.as_slice() {
                [term] => scaled_square_root(&term.coefficient, &params, n)
                    .map(|(vol, root_state)| (term.noise.index(), vol, root_state)),
                _ => None,
            };
            let square_root = root
                .filter(|(_, _, root_state)| *root_state == index)
                .map(|(noise, vol, _)| (noise, vol));
            let variance_root = root.filter(|(_, _, root_state)| *root_state != index);
            Some(StateShape {
                drift,
                diffusion,
                noises: equation.diffusion.iter().map(|t| t.noise.index()).collect(),
                square_root,
                variance_root,
                price: price_shape(index, equation, &params, n),
            })
        })
        .collect()
}

/// Whether the noises `own` are disjoint from, and uncorrelated with, the noises `others`.
pub(super) fn noises_exclusive(own: &[usize], others: &[usize], correlation: &[Vec<f64>]) -> bool {
    own.iter().all(|k| {
        others.iter().all(|j| {
            k != j
                && correlation
                    .get(*k)
                    .and_then(|row| row.get(*j))
                    .is_none_or(|rho| *rho == 0.0)
        })
    })
}
