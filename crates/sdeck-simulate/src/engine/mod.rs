//! The Monte Carlo engine: blocks of paths advanced step by step, each block with its own
//! random stream, run on a local thread pool and gathered in a fixed order.
//!
//! Reproducibility: paths are cut into blocks of [`LANES`] paths whatever `paths` and the
//! thread count are; block b draws from its own stream ([`crate::streams`]), seeded from
//! the seed and b alone, and blocks are
//! gathered by index. So the same seed gives the same numbers, bit for bit, on one
//! thread or many.
//!
//! Layout of a block: structure of arrays, one [`Lanes`] row per state and per noise, so
//! that every operation of a step is a loop over 64 paths that the compiler vectorises.
//! Normals are drawn in bulk for the whole block ([`crate::normals`]); nothing is
//! allocated once a block has started.
//!
//! Several reporting dates cut the time line into segments, each with a whole number of
//! steps, so every date falls on the grid. With step doubling, the states on a discretised
//! scheme are also advanced on the grid of every other step, driven by the sums of the same
//! Brownian increments: the two runs share their streams, so their difference estimates
//! the discretisation bias with little noise.

//!
//! Layout: [`compile`] reads the plan once (programs, exact laws per interval); [`step`]
//! advances one block; this module checks the sizes, runs the blocks on the pool and
//! gathers their values.

mod compile;
mod gather;
mod polynomial;
mod step;

use crate::bytecode::LANES;
use crate::isa::Isa;
use crate::plan::{ExactLaw, Plan, Scheme};
use crate::progress::{Progress, Reporting};
use compile::compile;
use gather::{gather_discount, gather_states};
use rayon::prelude::*;
use sdeck_semantics::Model;
use std::fmt;
use step::{simulate_block, BlockOutput, Scratch};

/// What to simulate.
#[derive(Clone, Debug, PartialEq)]
pub struct SimulationOptions {
    pub paths: usize,
    /// Time steps between 0 and the last reporting date (spread over the dates in
    /// proportion to their intervals, at least one each; rounded up to an even number per
    /// interval when step doubling is on).
    pub steps: usize,
    /// Reporting time in clock units; `None` means the model's horizon. Ignored when
    /// `dates` is not empty.
    pub at: Option<f64>,
    /// Reporting dates in clock units (any order; duplicates merged).
    pub dates: Vec<f64>,
    pub seed: u64,
    /// Worker threads; `None` means one per core.
    pub threads: Option<usize>,
    /// Where to report how far the run has got (the caller draws it); `None` reports
    /// nothing.
    pub progress: Option<Progress>,
    /// Number of times on the grid (besides 0) at which quantile bands are recorded for a
    /// fan chart; 0 records none.
    pub band_times: usize,
    /// Also advance the discretised states on the grid of every other step (same streams)
    /// so that the report can estimate their bias. No effect when every scheme is exact.
    pub step_doubling: bool,
    /// Memory the stored values may take, in bytes; `None` means [`DEFAULT_MEMORY_LIMIT`].
    pub memory_limit: Option<u64>,
}

impl Default for SimulationOptions {
    fn default() -> SimulationOptions {
        SimulationOptions {
            paths: 10_000,
            steps: 100,
            at: None,
            dates: Vec::new(),
            seed: 1,
            threads: None,
            progress: None,
            band_times: 0,
            step_doubling: false,
            memory_limit: None,
        }
    }
}

/// Why a simulation could not run.
#[derive(Clone, Debug, PartialEq)]
pub enum SimulateError {
    NoStates,
    MissingEquation {
        state: String,
    },
    UnresolvedEquation {
        state: String,
    },
    UnknownNoise {
        state: String,
    },
    NoPaths,
    NoSteps,
    BadTime {
        at: f64,
    },
    /// The stored values would need `needed` bytes, more than `limit`.
    TooLarge {
        paths: usize,
        needed: u64,
        limit: u64,
        max_paths: usize,
    },
    ThreadPool(String),
    /// A hand-made [`Plan`] whose sizes do not match the model.
    InconsistentPlan(String),
    /// A matrix the steps need has a value that is not finite, or cannot be factored.
    Matrix(String),
}

fn gib(bytes: u64) -> String {
    format!("{:.1} GiB", bytes as f64 / (1u64 << 30) as f64)
}

impl fmt::Display for SimulateError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SimulateError::NoStates => write!(f, "the model declares no factor: there is nothing to simulate"),
            SimulateError::MissingEquation { state } => {
                write!(f, "factor `{state}` has no equation; add `d{state} = ... dt + ... dW`")
            }
            SimulateError::UnresolvedEquation { state } => write!(
                f,
                "the equation of `{state}` did not resolve (see the errors of `check`); fix them before simulating"
            ),
            SimulateError::UnknownNoise { state } => {
                write!(f, "the equation of `{state}` refers to a shock that is not declared")
            }
            SimulateError::NoPaths => write!(f, "the number of paths must be at least 1 (use --paths 1 or more)"),
            SimulateError::NoSteps => write!(f, "the number of steps must be at least 1 (use --steps 1 or more)"),
            SimulateError::BadTime { at } => {
                write!(f, "a reporting date must be a time from now, 0 or later, in clock units, not {at}")
            }
            SimulateError::TooLarge { paths, needed, limit, max_paths } => write!(
                f,
                "{paths} paths would need {} to keep their values, more than the {} available;                  use at most {max_paths} paths, or fewer dates",
                gib(*needed),
                gib(*limit)
            ),
            SimulateError::ThreadPool(message) => write!(f, "could not start the worker threads: {message}"),
            SimulateError::InconsistentPlan(message) => write!(f, "the simulation plan does not fit the model: {message}"),
            SimulateError::Matrix(what) => write!(f, "{what} has a value that is not finite or cannot be factored: nothing is simulated"),
        }
    }
}

impl std::error::Error for SimulateError {}

/// Memory the stored values may take when the caller gives no limit (2 GiB).
pub const DEFAULT_MEMORY_LIMIT: u64 = 2 << 30;

/// Paths recorded for quantile bands at most (the fan chart uses the first ones).
pub const MAX_BAND_PATHS: usize = 50_000;

/// Times recorded for quantile bands at most: enough for a smooth chart, and it bounds the
/// memory of the recording to MAX_BAND_PATHS × MAX_BAND_TIMES values per state.
pub const MAX_BAND_TIMES: usize = 400;

/// Bytes the run keeps for `paths`: each value is held twice at the peak (in its block,
/// then gathered by state), and once more while its figures are summarised.
fn stored_bytes(paths: usize, values_per_path: usize, band_values: usize) -> u64 {
    let per_path = (values_per_path as u64).saturating_mul(8 * 3);
    (paths as u64)
        .saturating_mul(per_path)
        .saturating_add((band_values as u64).saturating_mul(8 * 2))
}

/// Checks that a plan (possibly built by hand) fits the model, so that the engine never
/// indexes outside it.
fn validate_plan(model: &Model, plan: &Plan) -> Result<(), SimulateError> {
    let states = model.factors.len();
    let noises = model.shocks.len();
    if plan.schemes.len() != states {
        return Err(SimulateError::InconsistentPlan(format!(
            "{} schemes for {states} states",
            plan.schemes.len()
        )));
    }
    for scheme in &plan.schemes {
        if let Scheme::Exact(ExactLaw::Lognormal { loadings, .. }) = scheme {
            if loadings.iter().any(|(noise, _)| *noise >= noises) {
                return Err(SimulateError::InconsistentPlan(
                    "a lognormal loading on an unknown noise".into(),
                ));
            }
        }
    }
    if let Some(group) = &plan.gaussian_group {
        let m = group.states.len();
        let square = |rows: &Vec<Vec<f64>>, columns: usize| {
            rows.len() == m && rows.iter().all(|r| r.len() == columns)
        };
        let members_ok = group.states.iter().all(|i| {
            *i < states
                && matches!(
                    plan.schemes.get(*i),
                    Some(Scheme::Exact(ExactLaw::LinearGaussian))
                )
        });
        if !(members_ok
            && square(&group.drift, m)
            && square(&group.loadings, noises)
            && group.constant.len() == m)
        {
            return Err(SimulateError::InconsistentPlan(
                "the Gaussian group's matrices do not match its states".into(),
            ));
        }
    }
    for scheme in &plan.schemes {
        if let Scheme::VarianceDriven(driven) = scheme {
            let variance_exact = matches!(
                plan.schemes.get(driven.variance),
                Some(Scheme::Exact(ExactLaw::SquareRoot { .. }))
            );
            if !variance_exact || driven.noise >= noises {
                return Err(SimulateError::InconsistentPlan(
                    "a log-price step whose variance is not an exact square-root factor".into(),
                ));
            }
        }
    }
    let orphans = plan.schemes.iter().enumerate().any(|(i, scheme)| {
        *scheme == Scheme::Exact(ExactLaw::LinearGaussian)
            && !plan
                .gaussian_group
                .as_ref()
                .is_some_and(|g| g.states.contains(&i))
    });
    if orphans {
        return Err(SimulateError::InconsistentPlan(
            "a Gaussian state outside the Gaussian group".into(),
        ));
    }
    Ok(())
}

/// Raw simulated values at the reporting dates and on the band grid.
#[derive(Clone, Debug, PartialEq)]
pub struct PathSamples {
    /// The reporting dates, ascending, clock units.
    pub dates: Vec<f64>,
    /// The last date.
    pub at: f64,
    /// The model's clock unit (`year`, `day`, ...), in which dates and band times run.
    pub clock_unit: String,
    pub paths: usize,
    /// Steps actually taken from 0 to the last date.
    pub steps: usize,
    pub seed: u64,
    pub state_names: Vec<String>,
    /// Scheme of each state, in words.
    pub schemes: Vec<String>,
    /// Whether each state's scheme is discretised (its figures carry a bias).
    pub discretised: Vec<bool>,
    /// `values[date][state][path]`: what export and the report read.
    pub values: Vec<Vec<Vec<f64>>>,
    /// With step doubling, the same paths on the grid of every other step,
    /// `coarse[date][state][path]` (exact states hold the same values as `values`).
    pub coarse: Option<Vec<Vec<Vec<f64>>>>,
    /// With a `discount` line: exp(−∫₀ᵗ r ds) of every path at every date.
    pub discount: Option<DiscountSamples>,
    /// Times of the band grid (starting at 0), empty when no bands were asked for.
    pub band_times: Vec<f64>,
    /// `band_values[time][state][path]` for the first `band_paths` paths.
    pub band_values: Vec<Vec<Vec<f64>>>,
    pub warnings: Vec<String>,
}

/// The discount factor exp(−∫₀ᵗ r ds) of every path, the integral by the trapezoid rule
/// on the step grid.
///
/// Bias: where every factor the rate reads is sampled exactly, the only error is the
/// trapezoid's, of order Δ² in expectation (the mean path is smooth, and the part of the
/// path between grid points adds a variance of order Δ² to the integral): weak order 2.
/// Where the rate reads a discretised factor, that factor's weak order 1 dominates.
#[derive(Clone, Debug, PartialEq)]
pub struct DiscountSamples {
    /// `values[date][path]`.
    pub values: Vec<Vec<f64>>,
    /// With step doubling, the same paths with the rate integrated on the grid of every
    /// other step (same streams), `coarse[date][path]`.
    pub coarse: Option<Vec<Vec<f64>>>,
    /// Weak order of the estimate in the step: 2 or 1 (see above).
    pub order: u32,
}

impl PathSamples {
    /// `values[state][path]` at the last date.
    pub fn finals(&self) -> &[Vec<f64>] {
        self.values.last().map_or(&[], Vec::as_slice)
    }
}

/// Step indices (0 = start) at which bands are recorded: `count` points spread evenly up
/// to the last step, plus the start.
fn band_steps(steps: usize, count: usize) -> Vec<usize> {
    if count == 0 {
        return Vec::new();
    }
    let count = count.min(steps);
    if count == 0 {
        return vec![0];
    }
    let mut indices: Vec<usize> = (0..=count).map(|j| (j * steps).div_ceil(count)).collect();
    indices.dedup();
    indices
}

/// The weak order of the discount's estimate: 2 when every factor the rate reads is
/// sampled exactly (the trapezoid's own order), 1 when one of them is discretised.
fn discount_order(model: &Model, discretised: &[bool]) -> u32 {
    let Some(line) = &model.discount else {
        return 1;
    };
    let reads_discretised = line.rate.any(&mut |e| {
        matches!(e, sdeck_semantics::Expr::Factor(i) if discretised.get(i.index()).copied().unwrap_or(true))
    });
    if reads_discretised {
        1
    } else {
        2
    }
}

/// The reporting dates of `options`, ascending and without duplicates.
pub fn reporting_dates(
    model: &Model,
    options: &SimulationOptions,
) -> Result<Vec<f64>, SimulateError> {
    let mut dates = if options.dates.is_empty() {
        vec![options.at.unwrap_or(model.horizon)]
    } else {
        options.dates.clone()
    };
    if let Some(bad) = dates.iter().find(|t| !(t.is_finite() && **t >= 0.0)) {
        return Err(SimulateError::BadTime { at: *bad });
    }
    dates.sort_by(f64::total_cmp);
    dates.dedup();
    Ok(dates)
}

/// Runs the simulation and returns the raw values.
pub fn simulate_paths(
    model: &Model,
    plan: &Plan,
    options: &SimulationOptions,
) -> Result<PathSamples, SimulateError> {
    simulate_paths_on(model, plan, options, Isa::detected())
}

/// [`simulate_paths`] with each step compiled for `isa`: the values are the same bits
/// whichever it is (for tests and benchmarks that compare instruction sets).
pub fn simulate_paths_on(
    model: &Model,
    plan: &Plan,
    options: &SimulationOptions,
    isa: Isa,
) -> Result<PathSamples, SimulateError> {
    let dates = check_request(model, plan, options)?;
    let mut warnings = plan.notes.clone();
    let compiled = compile(
        model,
        plan,
        &dates,
        options.steps,
        options.step_doubling,
        &mut warnings,
    )?;
    let total_steps: usize = compiled.segments.iter().map(|s| s.steps).sum();
    let record_steps = band_steps(total_steps, options.band_times.min(MAX_BAND_TIMES));
    let outputs = run_blocks(&compiled, options, &record_steps, isa)?;

    let (paths, states) = (options.paths, model.factors.len());
    let values = gather_states(&outputs, paths, states, dates.len(), |o| &o.values);
    let coarse = compiled
        .step_doubling
        .then(|| gather_states(&outputs, paths, states, dates.len(), |o| &o.coarse));
    let discount = compiled.discount.as_ref().map(|_| DiscountSamples {
        values: gather_discount(&outputs, paths, dates.len(), |o| &o.discount),
        coarse: compiled
            .step_doubling
            .then(|| gather_discount(&outputs, paths, dates.len(), |o| &o.coarse_discount)),
        order: discount_order(model, &compiled.discretised),
    });
    let band_paths = paths.min(MAX_BAND_PATHS);
    let band_blocks = if record_steps.is_empty() {
        0
    } else {
        band_paths.div_ceil(LANES)
    };
    let band_values = gather_states(
        &outputs[..band_blocks],
        band_paths,
        states,
        record_steps.len(),
        |o| &o.bands,
    );
    drop(outputs);

    Ok(PathSamples {
        at: dates.last().copied().unwrap_or(0.0),
        dates: dates.clone(),
        clock_unit: model.clock.unit.clone(),
        paths,
        steps: total_steps,
        seed: options.seed,
        state_names: model.factors.iter().map(|s| s.name.clone()).collect(),
        schemes: (0..states).map(|i| plan.describe_state(i)).collect(),
        discretised: compiled.discretised.clone(),
        values,
        coarse,
        discount,
        band_times: record_steps
            .iter()
            .map(|s| step_time(&compiled.segments, &dates, *s))
            .collect(),
        band_values,
        warnings,
    })
}

/// The reporting dates of a run, once its sizes, plan and memory needs are checked (before
/// anything is allocated).
fn check_request(
    model: &Model,
    plan: &Plan,
    options: &SimulationOptions,
) -> Result<Vec<f64>, SimulateError> {
    let states = model.factors.len();
    if states == 0 {
        return Err(SimulateError::NoStates);
    }
    if options.paths == 0 {
        return Err(SimulateError::NoPaths);
    }
    if options.steps == 0 {
        return Err(SimulateError::NoSteps);
    }
    let dates = reporting_dates(model, options)?;
    validate_plan(model, plan)?;
    let doubling = options.step_doubling && (plan.has_discretised() || model.discount.is_some());
    let discounts = usize::from(model.discount.is_some());
    let values_per_path = (states + discounts) * dates.len() * if doubling { 2 } else { 1 };
    let band_times = options.band_times.min(MAX_BAND_TIMES);
    let band_values = options.paths.min(MAX_BAND_PATHS) * (band_times + 1) * states;
    let needed = stored_bytes(options.paths, values_per_path, band_values);
    let limit = options.memory_limit.unwrap_or(DEFAULT_MEMORY_LIMIT);
    if needed > limit {
        let per_path = stored_bytes(1, values_per_path, 0).max(1);
        return Err(SimulateError::TooLarge {
            paths: options.paths,
            needed,
            limit,
            max_paths: (limit.saturating_sub(stored_bytes(0, 0, band_values)) / per_path) as usize,
        });
    }
    Ok(dates)
}

/// Every block of paths on a local thread pool, in block order; the first blocks (up to
/// [`MAX_BAND_PATHS`] paths) also record the band grid.
fn run_blocks(
    compiled: &compile::Compiled,
    options: &SimulationOptions,
    record_steps: &[usize],
    isa: Isa,
) -> Result<Vec<BlockOutput>, SimulateError> {
    let blocks = options.paths.div_ceil(LANES);
    let band_blocks = if record_steps.is_empty() {
        0
    } else {
        options.paths.min(MAX_BAND_PATHS).div_ceil(LANES)
    };
    let mut builder = rayon::ThreadPoolBuilder::new();
    if let Some(threads) = options.threads {
        builder = builder.num_threads(threads.max(1));
    }
    let pool = builder
        .build()
        .map_err(|e| SimulateError::ThreadPool(e.to_string()))?;
    let progress = Reporting::start(options.progress.as_ref(), blocks);
    let outputs = pool.install(|| {
        (0..blocks)
            .into_par_iter()
            .map_init(
                || Scratch::new(compiled),
                |scratch, block| {
                    let records: &[usize] = if block < band_blocks {
                        record_steps
                    } else {
                        &[]
                    };
                    let output =
                        simulate_block(compiled, scratch, options.seed, block, records, isa);
                    progress.advance();
                    output
                },
            )
            .collect()
    });
    drop(progress);
    Ok(outputs)
}

/// Time of each global step index, for the band grid.
fn step_time(segments: &[compile::Segment], dates: &[f64], index: usize) -> f64 {
    let mut remaining = index;
    for segment in segments {
        if remaining <= segment.steps {
            return segment.start + remaining as f64 * segment.dt;
        }
        remaining -= segment.steps;
    }
    dates.last().copied().unwrap_or(0.0)
}

#[cfg(test)]
mod tests {
    use super::compile::cut_segments;
    use super::*;

    #[test]
    fn band_steps_cover_start_and_end() {
        assert_eq!(band_steps(100, 4), vec![0, 25, 50, 75, 100]);
        assert_eq!(band_steps(3, 10), vec![0, 1, 2, 3]);
        assert_eq!(band_steps(7, 2), vec![0, 4, 7]);
        assert!(band_steps(10, 0).is_empty());
    }

    #[test]
    fn segments_put_every_date_on_the_grid() {
        let segments = cut_segments(&[0.25, 0.5, 1.0], 100, false);
        assert_eq!(
            segments,
            vec![(0.0, 0.25, 25), (0.25, 0.5, 25), (0.5, 1.0, 50)]
        );
        // Even counts for step doubling; at least one step (two) per interval.
        let segments = cut_segments(&[0.001, 1.0], 9, true);
        assert_eq!(segments, vec![(0.0, 0.001, 2), (0.001, 1.0, 10)]);
    }

    #[test]
    fn memory_estimate_refuses_before_allocating() {
        assert_eq!(stored_bytes(10, 2, 0), 10 * 2 * 24);
        assert_eq!(stored_bytes(usize::MAX, usize::MAX, usize::MAX), u64::MAX);
    }
}
