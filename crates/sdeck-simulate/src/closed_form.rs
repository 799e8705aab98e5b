//! Closed-form figures from the calculus layer, shaped as the report and the fan chart
//! take them.

use crate::engine::{SimulateError, SimulationOptions};
use crate::plan::plan;
use crate::report::SimulationResult;
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

/// The whole `simulate` command in one call: plan from the classification, simulate,
/// attach the closed forms at the reporting time.
pub fn simulate_and_compare(
    model: &Model,
    derivation: &Derivation,
    options: &SimulationOptions,
) -> Result<SimulationResult, SimulateError> {
    let plan = plan(model, derivation);
    let mut result = crate::simulate(model, &plan, options)?;
    result.attach_closed_forms(&closed_forms_at(model, derivation, result.at));
    Ok(result)
}
