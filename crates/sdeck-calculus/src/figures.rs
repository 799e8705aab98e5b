//! The figures of a derivation at a time: moments, covariances, quantiles, the value of
//! an `expect` line. Each asks the closed form of a decoupled state, the engine of the
//! system for a coupled one, and leaves unknown what lies outside a family's domain.

use crate::{
    curve, exponential_affine, laws, partial, system, Derivation, Family, Method, Moments,
    StateMoments,
};
use sdeck_semantics::{Expectation, FactorId, Model};
use sdeck_syntax::ast::{Figure, Side};

/// Mean and variance of one state at time `t` (clock units): a closed form for a
/// decoupled state (a few operations, whatever the size of the model), the engine of
/// the system for a coupled one.
pub fn state_moments(
    model: &Model,
    derivation: &Derivation,
    state: FactorId,
    t: f64,
) -> StateMoments {
    if derivation.outside_domain(state) {
        return StateMoments {
            mean: None,
            variance: None,
            method: Method::None,
        };
    }
    let exponential = derivation
        .states
        .by_id(state)
        .is_some_and(|law| law.family == Family::ExponentialAffine);
    if exponential {
        return exponential_affine::state_moments(model, state.index(), t);
    }
    system::state_moments(model, derivation.analysis(), state.index(), t)
}

/// The figures of one state at one time, as [`moments_at`] gives them for that state.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StateFigures {
    pub mean: Option<f64>,
    pub variance: Option<f64>,
    /// Closed form or exact moment equations (not Monte Carlo).
    pub exact: bool,
    /// The time (clock units, at most the time asked) from which the variance is
    /// infinite, when it is (moment explosion of an exponential-affine factor).
    pub variance_infinite_from: Option<f64>,
}

/// What [`moments_at`] says of state `state` at time `t`, at the cost of that state alone
/// (a closed form for a decoupled state, whatever the size of the model).
pub fn state_figures(
    model: &Model,
    derivation: &Derivation,
    state: FactorId,
    t: f64,
) -> StateFigures {
    let exponential = derivation
        .states
        .by_id(state)
        .is_some_and(|law| law.family == Family::ExponentialAffine);
    let (moments, variance_infinite_from) = if exponential {
        let (moments, infinite_from) = exponential_affine::state_figures(model, state.index(), t);
        // Outside its domain the moments are unknown; the explosion time stays, as in
        // `moments_at`.
        match derivation.outside_domain(state) {
            true => (state_moments(model, derivation, state, t), infinite_from),
            false => (moments, infinite_from),
        }
    } else {
        (state_moments(model, derivation, state, t), None)
    };
    let mut figures = StateFigures {
        mean: moments.mean,
        variance: moments.variance,
        exact: moments.method != Method::None,
        variance_infinite_from,
    };
    // A general factor with a drift affine in itself has its exact mean alone.
    if figures.mean.is_none() && !derivation.outside_domain(state) {
        if let Some(mean) = partial::state_mean(model, derivation, state.index(), t) {
            figures.mean = Some(mean);
            figures.exact = true;
        }
    }
    figures
}

/// Cov(X_i(t), X_j(t)), where known; the variance when `i == j`. Two decoupled states
/// cost one closed form, whatever the size of the model.
pub fn covariance(
    model: &Model,
    derivation: &Derivation,
    i: FactorId,
    j: FactorId,
    t: f64,
) -> Option<f64> {
    if derivation.outside_domain(i) || derivation.outside_domain(j) {
        return None;
    }
    system::covariance(model, derivation.analysis(), i.index(), j.index(), t)
}

/// Means, variances and covariances of every state at time `t` (clock units). The full
/// matrix costs states × states closed forms: ask [`state_moments`] and [`covariance`]
/// for single figures.
pub fn moments_at(model: &Model, derivation: &Derivation, t: f64) -> Moments {
    let mut moments = system::moments_at(model, derivation.analysis(), t);
    exponential_affine::fill_moments(model, derivation, &mut moments);
    partial::fill_means(model, derivation, &mut moments);
    // Figures of a factor outside its family's domain are unknown, not numbers.
    for id in derivation
        .states
        .ids()
        .filter(|i| derivation.outside_domain(*i))
    {
        let i = id.index();
        for slot in [&mut moments.mean, &mut moments.variance] {
            if let Some(x) = slot.get_mut(i) {
                *x = None;
            }
        }
        if let Some(x) = moments.exact.get_mut(i) {
            *x = false;
        }
        if let Some(m) = moments.method.get_mut(i) {
            *m = Method::None;
        }
        for (j, row) in moments.covariance.iter_mut().enumerate() {
            for (k, cell) in row.iter_mut().enumerate() {
                if j == i || k == i {
                    *cell = None;
                }
            }
        }
    }
    moments
}

/// Cov(X_s, X_t) for s <= t, where known.
pub fn autocovariance(
    model: &Model,
    derivation: &Derivation,
    state: FactorId,
    s: f64,
    t: f64,
) -> Option<f64> {
    if derivation.outside_domain(state) {
        return None;
    }
    system::autocovariance(model, derivation, state.index(), s, t)
}

/// Quantile of the law of one state at t where the law is known (Gaussian, lognormal,
/// noncentral chi-square).
pub fn quantile(
    model: &Model,
    derivation: &Derivation,
    state: FactorId,
    t: f64,
    p: f64,
) -> Option<f64> {
    if derivation.outside_domain(state) {
        return None;
    }
    system::quantile(model, derivation.analysis(), state.index(), t, p)
}

/// The value of a figure an `expect` line can pin (`mean`, `sd`, `halflife`,
/// `stationary_sd`, ...) for one state; `at` is the time of the time-dependent figures
/// (clock units). `None` when the family has no such figure or it is not known.
pub fn figure_value(
    model: &Model,
    derivation: &Derivation,
    state: FactorId,
    figure: Figure,
    at: f64,
) -> Option<f64> {
    let law = derivation.states.by_id(state)?;
    let stationary = law.stationary.as_ref();
    match figure {
        Figure::Mean | Figure::Variance | Figure::Sd => {
            let moments = state_moments(model, derivation, state, at);
            match figure {
                Figure::Mean => moments.mean,
                Figure::Variance => moments.variance,
                _ => moments.variance.map(|v| v.max(0.0).sqrt()),
            }
        }
        Figure::Halflife => law.half_life,
        Figure::StationaryMean => stationary.map(|s| s.mean),
        Figure::StationaryVariance => stationary.map(|s| s.variance),
        Figure::StationarySd => stationary.map(|s| s.variance.max(0.0).sqrt()),
        Figure::Prob | Figure::Quantile | Figure::Price | Figure::Yield | Figure::Forward => None,
    }
}

/// The value of the figure an `expect` line pins, in the units of
/// [`Expectation::admissible`]: clock units for the moments and quantiles, a probability
/// for `prob`, the bond price, and annual decimals for `yield` and `forward`. The error
/// says in words why the figure does not exist.
pub fn expectation_value(
    model: &Model,
    derivation: &Derivation,
    e: &Expectation,
) -> Result<f64, String> {
    let work = crate::affine::WorkBudget::new(laws::LAW_WORK);
    expectation_value_within(model, derivation, e, &work)
}

/// [`expectation_value`], a law's Riccati integrations drawing on `work` (shared by the
/// expectations of one check).
pub fn expectation_value_within(
    model: &Model,
    derivation: &Derivation,
    e: &Expectation,
    work: &crate::affine::WorkBudget,
) -> Result<f64, String> {
    let t = e.at.unwrap_or(model.horizon);
    match (e.figure, e.state) {
        (Figure::Prob | Figure::Quantile, Some(state)) => {
            let law = laws::law_within(model, derivation, state, t, work)
                .ok_or_else(|| "no known law at that time".to_string())?;
            let level = e
                .level
                .ok_or_else(|| "no level to compare with".to_string())?;
            let value = if e.figure == Figure::Quantile {
                law.quantile(level)
            } else {
                law.cdf(level).map(|p| match e.side {
                    Some(Side::Above) => 1.0 - p,
                    _ => p,
                })
            };
            value.ok_or_else(|| {
                format!(
                    "its {} law could not be evaluated at that level",
                    law.kind().as_str()
                )
            })
        }
        (Figure::Price | Figure::Yield | Figure::Forward, _) => {
            let discount = model.discount.as_ref().ok_or_else(|| {
                "the model has no `discount` line, so it has no bond prices".to_string()
            })?;
            let point = curve::curve(model, &discount.rate, &[t])?
                .points
                .into_iter()
                .next()
                .ok_or_else(|| "no point on the curve".to_string())?;
            Ok(match e.figure {
                Figure::Price => point.price,
                Figure::Yield => point.yield_rate,
                _ => point.forward,
            })
        }
        (figure, Some(state)) => figure_value(model, derivation, state, figure, t)
            .ok_or_else(|| "no known value for this figure".to_string()),
        (_, None) => Err("no factor".to_string()),
    }
}
