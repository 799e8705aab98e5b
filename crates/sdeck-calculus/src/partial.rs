//! Partial results: the mean of a factor whose law is not known.
//!
//! When the drifts of a set of factors are affine in the factors of that set,
//! dX = (A·X + b) dt + G dW, taking expectations gives m′ = A·m + b whatever G is,
//! provided the stochastic integrals ∫ G dW are true martingales (the usual
//! integrability; Kloeden & Platen 1992, §4.2, derive the linear moment equations the same
//! way). So E[X(t)] = e^{At}·x₀ + ∫₀ᵗ e^{As} b ds exactly, while the variance, which needs
//! G, stays unknown. A price dS = μ·S dt + g(S, v) dW therefore has E[S(t)] = S₀·e^{μt},
//! and a factor dY = (a + c·S − k·Y) dt + h(Y) dB that follows it has its exact mean too.
//!
//! The set is the one the factor's drift reaches: the factor, the factors its drift
//! mentions, theirs in turn. The cost is that of the reached set, not of the model.

use crate::algebra::{to_poly, Poly};
use crate::linear_system::propagate;
use crate::{Derivation, Family, Moments};
use nalgebra::{DMatrix, DVector};
use sdeck_semantics::Model;

/// The largest set of factors a mean is computed over; past it the mean stays unknown
/// rather than cost a matrix exponential of that size per figure.
const MAX_MEAN_SYSTEM: usize = 64;

/// A drift c + Σ aⱼ·Xⱼ with constant coefficients.
struct AffineDrift {
    constant: f64,
    slopes: Vec<(usize, f64)>,
}

/// The constant coefficients of a factor's drift when it is affine in the factors and
/// does not depend on the time.
fn affine_drift(model: &Model, state: usize, params: &[f64]) -> Option<AffineDrift> {
    let equation = model.factors.get(state)?.equation.as_ref()?;
    if equation.drift.is_invalid() {
        return None;
    }
    let drift: Poly = to_poly(&equation.drift).ok()?;
    if drift.depends_on_time() || drift.state_degree() > 1 {
        return None;
    }
    let mut affine = AffineDrift {
        constant: 0.0,
        slopes: Vec::new(),
    };
    for (monomial, coefficient) in drift.by_state_monomial() {
        let value = coefficient.value(params, 0.0);
        if !value.is_finite() {
            return None;
        }
        match monomial.as_slice() {
            [] => affine.constant = value,
            [(j, 1)] => affine.slopes.push((*j, value)),
            _ => return None,
        }
    }
    Some(affine)
}

/// The linear mean equations m′ = A·m + b of the factors that `state`'s drift reaches,
/// when every one of them has an affine drift: the factors (state first), A and b.
fn mean_equations(
    model: &Model,
    state: usize,
    params: &[f64],
) -> Option<(Vec<usize>, DMatrix<f64>, DVector<f64>)> {
    let mut members = vec![state];
    let mut drifts = Vec::new();
    let mut next = 0;
    while let Some(&factor) = members.get(next) {
        let drift = affine_drift(model, factor, params)?;
        for &(j, _) in &drift.slopes {
            if !members.contains(&j) {
                if members.len() == MAX_MEAN_SYSTEM {
                    return None;
                }
                members.push(j);
            }
        }
        drifts.push(drift);
        next += 1;
    }
    let n = members.len();
    let mut a = DMatrix::<f64>::zeros(n, n);
    let mut b = DVector::<f64>::zeros(n);
    for (row, drift) in drifts.iter().enumerate() {
        b[row] = drift.constant;
        for &(j, slope) in &drift.slopes {
            let column = members.iter().position(|&m| m == j)?;
            a[(row, column)] += slope;
        }
    }
    Some((members, a, b))
}

/// Says, in the reason of a `general` factor whose mean follows from linear mean
/// equations, that its mean is known exactly and its variance is not.
pub(crate) fn explain(model: &Model, derivation: &mut Derivation) {
    let params = model.param_values();
    for (i, law) in derivation.states.iter_mut().enumerate() {
        if law.family != Family::General {
            continue;
        }
        let Some((members, _, _)) = mean_equations(model, i, &params) else {
            continue;
        };
        let name_of = |k: usize| model.factors.get(k).map_or("?", |f| f.name.as_str());
        let name = name_of(i);
        let sentence = if members.len() == 1 {
            format!(
                "; the drift of {name} is affine in {name}, so its mean follows from \
                 m′ = a + b·m and is exact (provided the noise term is a true martingale), \
                 while its variance is not known"
            )
        } else {
            let others: Vec<&str> = members.iter().skip(1).map(|&k| name_of(k)).collect();
            format!(
                "; the drift of {name} is affine in the factors, and so are those of {}, so \
                 its mean follows from the linear equations m′ = A·m + b and is exact \
                 (provided the noise terms are true martingales), while its variance is not \
                 known",
                others.join(", ")
            )
        };
        law.reason.push_str(&sentence);
    }
}

/// Fills the mean of every `general` factor whose mean follows from linear mean
/// equations and marks it exact; its variance stays unknown.
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

/// The exact mean at `t` of factor `state` when it is `general` and its mean follows from
/// linear mean equations (exact, as [`fill_means`] marks it).
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
    let (members, a, b) = mean_equations(model, state, &derivation.analysis().params)?;
    let x0 = DVector::from_iterator(
        members.len(),
        members
            .iter()
            .map(|&k| model.factors.get(k).map_or(f64::NAN, |f| f.initial)),
    );
    let (propagator, forcing) = propagate(&a, &b, t);
    let mean = (propagator.row(0) * x0)[0] + forcing[0];
    mean.is_finite().then_some(mean)
}
