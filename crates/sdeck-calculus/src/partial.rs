//! Partial results: the mean of a factor whose law is not known.
//!
//! When the drift of a factor is affine in the factor itself, dX = (a + b·X) dt + g dW,
//! taking expectations gives m′ = a + b·m whatever g is, provided the stochastic
//! integral ∫ g dW is a true martingale (the usual integrability; Kloeden & Platen 1992,
//! §4.2, derive the linear moment equations the same way). So E[X(t)] =
//! x₀·e^{bt} + a·(e^{bt} − 1)/b exactly, while the variance, which needs g, stays unknown.
//! A price dS = μ·S dt + g(S, v) dW therefore has E[S(t)] = S₀·e^{μt}.

use crate::algebra::{to_poly, Poly};
use crate::one_state::phi;
use crate::{Derivation, Family, Moments};
use sdeck_semantics::Model;

/// The constant coefficients (a, b) of a drift a + b·X that mentions no other factor and
/// not the time, when the factor's drift has that form.
fn own_affine_drift(model: &Model, state: usize, params: &[f64]) -> Option<(f64, f64)> {
    let equation = model.factors.get(state)?.equation.as_ref()?;
    if equation.drift.is_invalid() {
        return None;
    }
    let drift: Poly = to_poly(&equation.drift).ok()?;
    if drift.depends_on_time()
        || drift.state_degree() > 1
        || drift.states().iter().any(|&j| j != state)
    {
        return None;
    }
    let a = drift.coefficient_of(state, 0).value(params, 0.0);
    let b = drift.coefficient_of(state, 1).value(params, 0.0);
    (a.is_finite() && b.is_finite()).then_some((a, b))
}

/// Says, in the reason of a `general` factor whose drift is affine in itself, that its
/// mean is known exactly and its variance is not.
pub(crate) fn explain(model: &Model, derivation: &mut Derivation) {
    let params = model.param_values();
    for (i, law) in derivation.states.iter_mut().enumerate() {
        if law.family != Family::General || own_affine_drift(model, i, &params).is_none() {
            continue;
        }
        let name = model
            .factors
            .get(i)
            .map_or("the factor", |f| f.name.as_str());
        law.reason.push_str(&format!(
            "; its drift is affine in {name}, so its mean follows from m′ = a + b·m and is \
             exact (provided the noise term is a true martingale), while its variance is \
             not known"
        ));
    }
}

/// Fills the mean of every `general` factor whose drift is affine in itself and marks it
/// exact; its variance stays unknown.
pub(crate) fn fill_means(model: &Model, derivation: &Derivation, moments: &mut Moments) {
    let t = moments.at;
    for i in 0..derivation.states.len() {
        if moments.mean.get(i).is_some_and(|m| m.is_some()) {
            continue;
        }
        let Some(mean) = state_mean(model, derivation, i, t) else {
            continue;
        };
        if let Some(slot) = moments.mean.get_mut(i) {
            *slot = Some(mean);
        }
        if let Some(exact) = moments.exact.get_mut(i) {
            *exact = true;
        }
    }
}

/// The exact mean at `t` of factor `state` when it is `general` with a drift affine in
/// itself (exact, as [`fill_means`] marks it).
pub(crate) fn state_mean(
    model: &Model,
    derivation: &Derivation,
    state: usize,
    t: f64,
) -> Option<f64> {
    if !(t.is_finite() && t >= 0.0) {
        return None;
    }
    if derivation.states.get(state)?.family != Family::General {
        return None;
    }
    let (a, b) = own_affine_drift(model, state, &derivation.analysis().params)?;
    let x0 = model.factors.get(state)?.initial;
    let mean = x0 * (b * t).exp() + a * phi(b, t);
    mean.is_finite().then_some(mean)
}
