//! The classification of one state on its own: the one-state equation and its family.

use super::{
    diffusion_product, general, mentioned_states, noise_name, shape_of, shown, unresolved_reason,
    Classified, OneState, Shape,
};
use crate::algebra::{show_expr, show_poly, Atom, Names, Poly};
use crate::Family;
use sdeck_semantics::{Correlations, FactorId, Model, ShockId};

/// Classifies state `index` on its own.
pub(crate) fn classify_state(
    model: &Model,
    index: usize,
    corr: &Correlations,
    params: &[f64],
    names: &Names,
) -> Classified {
    let depends_on = mentioned_states(model, index);
    let shape = match shape_of(model, index) {
        Ok(s) => s,
        Err(why) => return general(unresolved_reason(model, &why), depends_on),
    };
    let name = model
        .factors
        .get(index)
        .map(|s| s.name.clone())
        .unwrap_or_default();
    if !depends_on.is_empty() {
        // Coupled: the system classification decides; here only say why.
        let others: Vec<String> = depends_on
            .iter()
            .filter_map(|i| model.factors.by_id(*i).map(|s| s.name.clone()))
            .collect();
        return Classified {
            family: Family::General,
            reason: format!("the equation of {name} mentions {}", others.join(", ")),
            one_state: None,
            depends_on,
            coupled: true,
        };
    }
    let squared = match squared_diffusion(&shape, corr, &name, names) {
        Ok(squared) => squared,
        Err(reason) => return general(reason, depends_on),
    };
    let one_state = one_state_of(index, &shape, &squared);
    let facts = Facts {
        model,
        names,
        name: &name,
        drift_text: show_poly(&shape.drift, names),
        b_value: one_state.b.value(params, 0.0),
    };
    let (family, reason) = match &one_state.affine_terms {
        Some(terms) => affine_family(&one_state, terms, &facts),
        None => root_family(&one_state, &squared, &facts),
    };
    Classified {
        family,
        reason,
        one_state: Some(one_state),
        depends_on,
        coupled: false,
    }
}

/// The square of the diffusion, when the drift is affine and the squared diffusion a
/// polynomial at most quadratic in the state; otherwise why no closed form is known.
fn squared_diffusion(
    shape: &Shape,
    corr: &Correlations,
    name: &str,
    names: &Names,
) -> Result<Poly, String> {
    let drift_degree = shape.drift.state_degree();
    if drift_degree > 1 {
        return Err(format!(
            "no closed form is known: the drift{} is of degree {drift_degree} in {name} \
             (not affine)",
            shown(show_poly(&shape.drift, names))
        ));
    }
    let squared = diffusion_product(&shape.noises, &shape.noises, corr).map_err(|piece| {
        format!(
            "no closed form is known: the diffusion `{}` combined with the other \
             shock terms is not the square root of a polynomial",
            show_expr(&piece, names)
        )
    })?;
    let squared_degree = squared.state_degree();
    if squared_degree > 2 {
        return Err(format!(
            "no closed form is known: the squared diffusion{} is of degree \
             {squared_degree} in {name} (above quadratic)",
            shown(show_poly(&squared, names))
        ));
    }
    Ok(squared)
}

/// The coefficients of dX = (a + b X) dt + diffusion with squared diffusion
/// α + β X + γ X², and the affine diffusion terms when every term is affine.
fn one_state_of(index: usize, shape: &Shape, squared: &Poly) -> OneState {
    let a = shape.drift.coefficient_of(index, 0);
    let b = shape.drift.coefficient_of(index, 1);
    let alpha = squared.coefficient_of(index, 0);
    let beta = squared.coefficient_of(index, 1);
    let gamma = squared.coefficient_of(index, 2);
    let every_term_affine = shape
        .noises
        .iter()
        .all(|n| n.form.is_polynomial() && n.form.scale.state_degree() <= 1);
    let affine_terms = every_term_affine.then(|| {
        shape
            .noises
            .iter()
            .map(|n| {
                (
                    n.noise,
                    n.form.scale.coefficient_of(index, 0),
                    n.form.scale.coefficient_of(index, 1),
                )
            })
            .collect::<Vec<_>>()
    });
    let time_dependent = [&a, &b, &alpha, &beta, &gamma]
        .iter()
        .any(|p| p.depends_on_time());
    OneState {
        state: index,
        a,
        b,
        alpha,
        beta,
        gamma,
        affine_terms,
        time_dependent,
    }
}

/// What the reasons of a one-state family quote.
struct Facts<'a> {
    model: &'a Model,
    names: &'a Names<'a>,
    name: &'a str,
    drift_text: String,
    /// The drift's slope at the file's parameters and t = 0.
    b_value: f64,
}

/// `", coefficients depend on t"` when they do.
fn time_note(os: &OneState) -> &'static str {
    if os.time_dependent {
        ", coefficients depend on t"
    } else {
        ""
    }
}

/// The family of a state whose every diffusion term is affine in it: c_k + d_k X.
fn affine_family(
    os: &OneState,
    terms: &[(ShockId, Poly, Poly)],
    facts: &Facts,
) -> (Family, String) {
    let (name, drift_text) = (facts.name, &facts.drift_text);
    let note = time_note(os);
    let multiplicative = terms.iter().any(|(_, _, d)| !d.is_zero());
    let additive = terms.iter().any(|(_, c, _)| !c.is_zero());
    let diffusion_text = terms
        .iter()
        .map(|(noise, c, d)| {
            let g = c.add(&d.mul(&Poly::atom(Atom::State(FactorId::new(os.state)))));
            format!(
                "{} on {}",
                show_poly(&g, facts.names),
                noise_name(facts.model, *noise)
            )
        })
        .collect::<Vec<_>>()
        .join(", ");
    let diffusion_text = if diffusion_text.is_empty() {
        "the diffusion (none)".to_string()
    } else {
        format!("diffusion {diffusion_text}")
    };
    if !multiplicative && !additive {
        (
            Family::Deterministic,
            format!(
                "no shock drives {name}: its path solves d{name}/dt = {drift_text}, \
                 so its variance is 0{note}"
            ),
        )
    } else if !multiplicative {
        additive_family(os, &diffusion_text, facts)
    } else if os.a.is_zero() && !additive && !os.time_dependent {
        (
            Family::GeometricBrownian,
            format!("drift {drift_text} and {diffusion_text} are both proportional to {name}"),
        )
    } else {
        (
            Family::Linear,
            format!("drift {drift_text} and {diffusion_text} are affine in {name}{note}"),
        )
    }
}

/// The family of a state whose diffusion does not depend on it, by the drift's slope.
fn additive_family(os: &OneState, diffusion_text: &str, facts: &Facts) -> (Family, String) {
    let (name, drift_text) = (facts.name, &facts.drift_text);
    let constant = !os.time_dependent;
    if os.b.is_zero() && constant {
        (
            Family::ArithmeticBrownian,
            format!("drift {drift_text} is constant, {diffusion_text} is constant"),
        )
    } else if constant && facts.b_value < 0.0 {
        (
            Family::OrnsteinUhlenbeck,
            format!(
                "drift {drift_text} is affine in {name} with negative slope {}, \
                 {diffusion_text} does not depend on {name}",
                show_poly(&os.b, facts.names)
            ),
        )
    } else if constant && facts.b_value > 0.0 {
        // Mean reversion needs a negative slope; with a positive one the same
        // Gaussian closed forms hold but the factor runs away from its level.
        (
            Family::Linear,
            format!(
                "drift {drift_text} is affine in {name} with positive slope {}, so it \
                 pushes {name} away from its level (not mean-reverting), \
                 {diffusion_text} does not depend on {name}",
                show_poly(&os.b, facts.names)
            ),
        )
    } else {
        (
            Family::Linear,
            format!(
                "drift {drift_text} is affine in {name}, {diffusion_text} does not \
                 depend on {name}{}",
                time_note(os)
            ),
        )
    }
}

/// The family of a state with a square root in its diffusion: square-root when the
/// squared diffusion is proportional to the state, polynomial otherwise.
fn root_family(os: &OneState, squared: &Poly, facts: &Facts) -> (Family, String) {
    let (name, drift_text) = (facts.name, &facts.drift_text);
    let squared_text = show_poly(squared, facts.names);
    let pure_square_root = os.alpha.is_zero() && os.gamma.is_zero() && !os.beta.is_zero();
    if pure_square_root && !os.time_dependent && facts.b_value != 0.0 {
        (
            Family::SquareRoot,
            format!(
                "drift {drift_text} is affine in {name}, squared diffusion {squared_text} \
                 is proportional to {name}"
            ),
        )
    } else {
        (
            Family::Polynomial,
            format!(
                "drift {drift_text} is affine in {name}, squared diffusion {squared_text} \
                 is at most quadratic in {name}{}",
                time_note(os)
            ),
        )
    }
}
