//! Monte Carlo simulation of sdeck models: exact transitions where the law of a step is
//! known, Euler–Maruyama with full truncation otherwise, reproducible whatever the thread
//! count.
//!
//! Layout:
//! - [`mod@plan`]: the scheme of each state (exact Gaussian, lognormal, noncentral chi-square,
//!   Andersen's log-price step over an exact variance, or Euler–Maruyama), read from the
//!   equations;
//! - [`streams`]: the random stream of a block, xoshiro256++ in 16 lanes;
//! - [`normals`]: standard normals in bulk, a vectorised ziggurat over that stream;
//! - [`isa`]: the instruction set the block loop is compiled for, chosen at run time;
//! - [`bytecode`]: drift and diffusion compiled to a flat program run over 64 paths at once;
//! - [`engine`]: blocks of paths with one random stream each, on a local thread pool;
//! - [`stats`] and [`report`]: figures with Monte Carlo standard errors, the bias by step
//!   doubling, P(X < q), JSON, text, and the verdicts of `--check`;
//! - [`plot`]: fan charts as SVG.
//!
//! ```
//! use sdeck_simulate::{check, simulate_and_compare, to_json, SimulationOptions};
//!
//! let source = "param kappa = 1.2 [1/year] > 0\nparam theta = 4%\n\
//!               param sigma = 1.5% [1/sqrt(year)] > 0\nshock W\nfactor r = 1%\n\
//!               dr = kappa * (theta - r) dt + sigma dW\n";
//! let model = sdeck_semantics::analyze(source, "demo").model;
//! let derivation = sdeck_calculus::derive(&model);
//! let options = SimulationOptions { paths: 20_000, steps: 50, seed: 7, ..Default::default() };
//! let result = simulate_and_compare(&model, &derivation, &options).unwrap();
//! assert_eq!(result.states[0].scheme, "exact (Gaussian)");
//! assert!(check(&result).is_empty());
//! println!("{}", to_json(&result));
//! ```

pub mod affine;
pub mod bytecode;
pub mod closed_form;
pub mod engine;
pub mod isa;
pub mod normals;
pub mod plan;
pub mod plot;
pub mod progress;
pub mod report;
pub mod samplers;
pub mod stats;
pub mod streams;

pub use closed_form::{
    closed_figures_at, closed_form_means, closed_forms_at, closed_prices_at, simulate_and_compare,
    simulate_and_compare_below,
};
pub use engine::{
    reporting_dates, simulate_paths, simulate_paths_on, DiscountSamples, PathSamples,
    SimulateError, SimulationOptions, DEFAULT_MEMORY_LIMIT,
};
pub use plan::{plan, plan_from_model, ExactLaw, GaussianGroup, Plan, Scheme, VarianceDriven};
pub use plot::{fan_chart_svg, write_fan_chart, PlotError};
pub use report::{
    check, render_text, to_json, verdicts, Bands, BelowEstimate, BiasEstimate, ClosedFigures,
    ClosedFormComparison, DateResult, Disagreement, DiscountEstimate, SimulationResult,
    StateResult, Undecided, CHECK_THRESHOLD,
};
pub use stats::QUANTILE_PROBABILITIES;

use sdeck_semantics::Model;

/// Simulates `model` with `plan` and summarises the result (figures and standard errors;
/// closed forms are attached by the caller with [`SimulationResult::attach_closed_forms`]).
pub fn simulate(
    model: &Model,
    plan: &Plan,
    options: &SimulationOptions,
) -> Result<SimulationResult, SimulateError> {
    let samples = simulate_paths(model, plan, options)?;
    Ok(SimulationResult::from_samples(&samples))
}
