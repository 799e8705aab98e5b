//! The shape of each equation (polynomial drift, diffusion terms in root form) and the
//! classification of states and of the whole system into families.
//!
//! Parts: [`state`] classifies one state on its own, [`system`] the whole system.

mod state;
mod system;

pub(crate) use state::classify_state;
pub(crate) use system::{classify_system, SystemShape};

use crate::algebra::{show_expr, to_poly, to_root_form, Names, NotPolynomial, Poly, RootForm};
use crate::Family;
use sdeck_semantics::{Correlations, Expr, FactorId, Model, ShockId};

/// One diffusion term, normalised.
#[derive(Clone, Debug)]
pub(crate) struct NoiseTerm {
    pub noise: ShockId,
    pub form: RootForm,
    pub expr: Expr,
}

/// A state's equation, normalised: drift polynomial, diffusion terms in root form.
#[derive(Clone, Debug)]
pub(crate) struct Shape {
    pub drift: Poly,
    pub noises: Vec<NoiseTerm>,
}

/// Why an equation could not be normalised.
#[derive(Clone, Debug)]
pub(crate) enum Unresolved {
    /// No equation, or `Expr::Invalid` somewhere in it.
    DidNotResolve,
    /// A piece that is not polynomial in the states (or not a square root of one).
    NotPolynomial { place: String, piece: Expr },
}

/// Every state mentioned by the state's equation, itself excluded.
pub(crate) fn mentioned_states(model: &Model, index: usize) -> Vec<FactorId> {
    let mut out = Vec::new();
    if let Some(eq) = model.factors.get(index).and_then(|s| s.equation.as_ref()) {
        eq.drift.factors(&mut out);
        for term in &eq.diffusion {
            term.coefficient.factors(&mut out);
        }
    }
    out.sort_unstable();
    out.dedup();
    out.retain(|s| s.index() != index);
    out
}

pub(crate) fn shape_of(model: &Model, index: usize) -> Result<Shape, Unresolved> {
    let equation = model
        .factors
        .get(index)
        .and_then(|s| s.equation.as_ref())
        .ok_or(Unresolved::DidNotResolve)?;
    if equation.drift.is_invalid()
        || equation
            .diffusion
            .iter()
            .any(|d| d.coefficient.is_invalid())
        || equation
            .diffusion
            .iter()
            .any(|d| d.noise.index() >= model.shocks.len())
    {
        return Err(Unresolved::DidNotResolve);
    }
    let drift =
        to_poly(&equation.drift).map_err(|NotPolynomial { piece }| Unresolved::NotPolynomial {
            place: "drift".to_string(),
            piece,
        })?;
    let mut noises = Vec::new();
    for term in &equation.diffusion {
        let form = to_root_form(&term.coefficient).map_err(|NotPolynomial { piece }| {
            Unresolved::NotPolynomial {
                place: format!("diffusion on {}", noise_name(model, term.noise)),
                piece,
            }
        })?;
        noises.push(NoiseTerm {
            noise: term.noise,
            form,
            expr: term.coefficient.clone(),
        });
    }
    Ok(Shape { drift, noises })
}

pub(crate) fn noise_name(model: &Model, noise: ShockId) -> String {
    model
        .shocks
        .by_id(noise)
        .map(|n| n.name.clone())
        .unwrap_or_else(|| format!("shock {noise}"))
}

/// Correlation of two noises, 1 on the diagonal, 0 when unknown.
pub(crate) fn correlation(corr: &Correlations, k: ShockId, l: ShockId) -> f64 {
    corr.get(k, l)
}

/// The same, for the shocks at positions `k` and `l` (rows and columns of a matrix in
/// declaration order).
pub(crate) fn correlation_at(corr: &Correlations, k: usize, l: usize) -> f64 {
    corr.get(ShockId::new(k), ShockId::new(l))
}

/// Σ_kl ρ_kl g_k h_l, the instantaneous covariance rate of two diffusions, when it is a
/// polynomial. On failure returns the expression of an offending term.
pub(crate) fn diffusion_product(
    first: &[NoiseTerm],
    second: &[NoiseTerm],
    corr: &Correlations,
) -> Result<Poly, Expr> {
    let mut total = Poly::zero();
    for g in first {
        for h in second {
            let rho = correlation(corr, g.noise, h.noise);
            if rho == 0.0 {
                continue;
            }
            let product = g.form.product(&h.form).ok_or_else(|| h.expr.clone())?;
            total = total.add(&product.scale(rho));
        }
    }
    Ok(total)
}

/// A one-state SDE dX = (a + b X) dt + diffusion with squared diffusion α + β X + γ X²,
/// every coefficient a polynomial of parameters and t.
#[derive(Clone, Debug)]
pub(crate) struct OneState {
    pub state: usize,
    pub a: Poly,
    pub b: Poly,
    pub alpha: Poly,
    pub beta: Poly,
    pub gamma: Poly,
    /// `(noise, c_k, d_k)` when every diffusion term is affine: c_k + d_k X.
    pub affine_terms: Option<Vec<(ShockId, Poly, Poly)>>,
    pub time_dependent: bool,
}

/// The outcome of classifying one state.
#[derive(Clone, Debug)]
pub(crate) struct Classified {
    pub family: Family,
    pub reason: String,
    /// Present when the state is decoupled and its equation is of the one-state kind
    /// (every family but `general`).
    pub one_state: Option<OneState>,
    pub depends_on: Vec<FactorId>,
    /// Whether the equation resolved and mentions other states, so that the system's
    /// classification decides the family.
    pub coupled: bool,
}

pub(crate) fn general(reason: String, depends_on: Vec<FactorId>) -> Classified {
    Classified {
        family: Family::General,
        reason,
        one_state: None,
        depends_on,
        coupled: false,
    }
}

/// Longest printed expression kept inside a reason; longer ones are left out.
const MAX_SHOWN: usize = 100;

/// `" text"` when short enough to read in a sentence, empty otherwise.
fn shown(text: String) -> String {
    if text.chars().count() <= MAX_SHOWN {
        format!(" {text}")
    } else {
        String::new()
    }
}

pub(crate) fn unresolved_reason(model: &Model, why: &Unresolved) -> String {
    let names = Names::new(model);
    match why {
        Unresolved::DidNotResolve => "the equation did not resolve".to_string(),
        Unresolved::NotPolynomial { place, piece } => format!(
            "no closed form is known: in the {place}, `{}` is not a polynomial in the factors \
             (nor a square root of one)",
            show_expr(piece, &names)
        ),
    }
}
