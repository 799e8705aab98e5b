//! Closed-form figures from the calculus layer, shaped as the report and the fan chart
//! take them: means and variances, and P(X < q) from the calculus layer's law of X_t
//! (normal, lognormal, noncentral chi-square, or Fourier inversion for affine sets).

use crate::engine::{reporting_dates, SimulateError, SimulationOptions};
use crate::plan::plan;
use crate::report::{ClosedFigures, SimulationResult};
use sdeck_calculus::curve::curve;
use sdeck_calculus::laws::law_of;
use sdeck_calculus::{moments_at, Derivation};
use sdeck_semantics::Model;

/// `(mean, variance)` of each state at `t` (clock units) where the calculus knows both,
/// declaration order.
pub fn closed_forms_at(model: &Model, derivation: &Derivation, t: f64) -> Vec<Option<(f64, f64)>> {
    let moments = moments_at(model, derivation, t);
    (0..model.factors.len())
        .map(|i| {
            let mean = moments.mean.get(i).copied().flatten()?;
            let variance = moments.variance.get(i).copied().flatten()?;
            Some((mean, variance))
        })
        .collect()
}

/// Closed-form means on a time grid, `[state][time]`, for the fan chart.
pub fn closed_form_means(
    model: &Model,
    derivation: &Derivation,
    times: &[f64],
) -> Vec<Vec<Option<f64>>> {
    let per_time: Vec<Vec<Option<f64>>> = times
        .iter()
        .map(|t| moments_at(model, derivation, *t).mean)
        .collect();
    (0..model.factors.len())
        .map(|i| {
            per_time
                .iter()
                .map(|means| means.get(i).copied().flatten())
                .collect()
        })
        .collect()
}

/// Closed-form figures of every state at `t`; `thresholds[state]` asks for P(X < q).
pub fn closed_figures_at(
    model: &Model,
    derivation: &Derivation,
    t: f64,
    thresholds: &[Option<f64>],
) -> Vec<ClosedFigures> {
    closed_forms_at(model, derivation, t)
        .into_iter()
        .enumerate()
        .map(|(i, moments)| ClosedFigures {
            mean: moments.map(|m| m.0),
            variance: moments.map(|m| m.1),
            below: thresholds.get(i).copied().flatten().and_then(|q| {
                law_of(model, derivation, sdeck_semantics::FactorId::new(i), t)?.cdf(q)
            }),
        })
        .collect()
}

/// The whole `simulate` command in one call: plan from the classification, simulate,
/// attach the closed forms at the reporting time.
pub fn simulate_and_compare(
    model: &Model,
    derivation: &Derivation,
    options: &SimulationOptions,
) -> Result<SimulationResult, SimulateError> {
    simulate_and_compare_below(model, derivation, options, &[])
}

/// [`simulate_and_compare`] with P(X < q) for the states given a threshold, at every
/// reporting date.
pub fn simulate_and_compare_below(
    model: &Model,
    derivation: &Derivation,
    options: &SimulationOptions,
    thresholds: &[Option<f64>],
) -> Result<SimulationResult, SimulateError> {
    let plan = plan(model, derivation);
    let samples = crate::engine::simulate_paths(model, &plan, options)?;
    let mut result = SimulationResult::from_samples_below(&samples, thresholds);
    let dates = reporting_dates(model, options)?;
    for (index, t) in dates.iter().enumerate() {
        result.attach_closed_figures(index, &closed_figures_at(model, derivation, *t, thresholds));
    }
    if model.discount.is_some() {
        match closed_prices_at(model, &dates) {
            Ok(prices) => {
                for (index, price) in prices.into_iter().enumerate() {
                    result.attach_closed_price(index, price);
                }
            }
            Err(why) => result.warnings.push(format!(
                "the bond prices are not compared with a curve: {why}"
            )),
        }
    }
    Ok(result)
}

/// The curve's zero-coupon bond prices P(0, t) of the model's `discount` line at `dates`
/// (clock units; 1 at t = 0), from the calculus layer (closed form or Riccati). `None`
/// for a model without a discount line.
pub fn closed_prices_at(model: &Model, dates: &[f64]) -> Result<Vec<Option<f64>>, String> {
    let Some(line) = &model.discount else {
        return Ok(vec![None; dates.len()]);
    };
    let positive: Vec<f64> = dates.iter().copied().filter(|t| *t > 0.0).collect();
    let derived = if positive.is_empty() {
        Vec::new()
    } else {
        curve(model, &line.rate, &positive)?.points
    };
    let mut points = derived.iter();
    Ok(dates
        .iter()
        .map(|t| {
            if *t > 0.0 {
                points.next().map(|p| p.price)
            } else {
                Some(1.0)
            }
        })
        .collect())
}
