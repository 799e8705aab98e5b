//! Closed-form figures from the calculus layer, shaped as the report and the fan chart
//! take them: means and variances, and P(X < q) from the calculus layer's law of X_t
//! (normal, lognormal, noncentral chi-square, or Fourier inversion for affine sets).

use crate::engine::{reporting_dates, SimulateError, SimulationOptions};
use crate::plan::plan;
use crate::report::{ClosedFigures, SimulationResult};
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
            below: thresholds
                .get(i)
                .copied()
                .flatten()
                .and_then(|q| law_of(model, derivation, i, t)?.cdf(q)),
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
    Ok(result)
}
