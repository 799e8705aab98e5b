//! The Monte Carlo engine: blocks of paths advanced step by step, each block with its own
//! random stream, run on a local thread pool and gathered in a fixed order.
//!
//! Reproducibility: paths are cut into blocks of [`LANES`] paths whatever `paths` and the
//! thread count are; block b draws from ChaCha8 stream b of the seed, and blocks are
//! gathered by index. So the same seed gives the same numbers, bit for bit, on one
//! thread or many.

use crate::bytecode::{CompileError, Lanes, Program, LANES};
use crate::linalg::{correlation_factor, gaussian_step, GaussianStep};
use crate::plan::{ExactLaw, Plan, Scheme};
use crate::progress::Progress;
use crate::samplers::{fill_standard_normal, SquareRootStep};
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use sdeck_semantics::Model;
use std::fmt;

/// What to simulate.
#[derive(Clone, Debug, PartialEq)]
pub struct SimulationOptions {
    pub paths: usize,
    /// Time steps between 0 and `at`.
    pub steps: usize,
    /// Reporting time in clock units; `None` means the model's horizon.
    pub at: Option<f64>,
    pub seed: u64,
    /// Worker threads; `None` means one per core.
    pub threads: Option<usize>,
    /// Show a progress bar on stderr (only drawn when stderr is a terminal and the run
    /// lasts more than a second).
    pub progress: bool,
    /// Number of times on the grid (besides 0) at which quantile bands are recorded for a
    /// fan chart; 0 records none.
    pub band_times: usize,
}

impl Default for SimulationOptions {
    fn default() -> SimulationOptions {
        SimulationOptions {
            paths: 10_000,
            steps: 100,
            at: None,
            seed: 1,
            threads: None,
            progress: false,
            band_times: 0,
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
    TooLarge {
        paths: usize,
        states: usize,
    },
    ThreadPool(String),
    /// A hand-made [`Plan`] whose sizes do not match the model.
    InconsistentPlan(String),
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
            SimulateError::NoPaths => write!(f, "the number of paths must be at least 1"),
            SimulateError::NoSteps => write!(f, "the number of steps must be at least 1"),
            SimulateError::BadTime { at } => {
                write!(f, "the simulation time must be a positive number of clock units, not {at}")
            }
            SimulateError::TooLarge { paths, states } => write!(
                f,
                "{paths} paths of {states} factors would not fit in memory; use at most {} paths",
                MAX_STORED_VALUES / states.max(&1)
            ),
            SimulateError::ThreadPool(message) => write!(f, "could not start the worker threads: {message}"),
            SimulateError::InconsistentPlan(message) => write!(f, "the simulation plan does not fit the model: {message}"),
        }
    }
}

impl std::error::Error for SimulateError {}

/// Upper limit on paths × states kept in memory (about 1.6 GB of f64).
const MAX_STORED_VALUES: usize = 200_000_000;

/// Paths recorded for quantile bands at most (the fan chart uses the first ones).
pub const MAX_BAND_PATHS: usize = 50_000;

/// Times recorded for quantile bands at most: enough for a smooth chart, and it bounds the
/// memory of the recording to MAX_BAND_PATHS × MAX_BAND_TIMES values per state.
pub const MAX_BAND_TIMES: usize = 400;

/// Checks that a plan (possibly built by hand) fits the model, so that the engine never
/// indexes outside it.
fn validate_plan(model: &Model, plan: &Plan) -> Result<(), SimulateError> {
    let states = model.factors.len();
    let noises = model.shocks.len();
    if plan.schemes.len() != states {
        return Err(SimulateError::InconsistentPlan(format!(
            "{} schemes for {states} factors",
            plan.schemes.len()
        )));
    }
    for scheme in &plan.schemes {
        if let Scheme::Exact(ExactLaw::Lognormal { loadings, .. }) = scheme {
            if loadings.iter().any(|(noise, _)| *noise >= noises) {
                return Err(SimulateError::InconsistentPlan(
                    "a lognormal loading on an unknown shock".into(),
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
                "the Gaussian group's matrices do not match its factors".into(),
            ));
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
            "a Gaussian factor outside the Gaussian group".into(),
        ));
    }
    Ok(())
}

/// Raw simulated values at the reporting time and on the band grid.
#[derive(Clone, Debug, PartialEq)]
pub struct PathSamples {
    pub at: f64,
    /// The model's clock unit (`year`, `day`, ...), in which `at` and the band times run.
    pub clock_unit: String,
    pub paths: usize,
    pub steps: usize,
    pub seed: u64,
    pub state_names: Vec<String>,
    /// Scheme of each state, in words.
    pub schemes: Vec<String>,
    /// `finals[state][path]`.
    pub finals: Vec<Vec<f64>>,
    /// Times of the band grid (starting at 0), empty when no bands were asked for.
    pub band_times: Vec<f64>,
    /// `band_values[time][state][path]` for the first `band_paths` paths.
    pub band_values: Vec<Vec<Vec<f64>>>,
    pub warnings: Vec<String>,
}

struct EulerState {
    index: usize,
    drift: Program,
    diffusion: Vec<(usize, Program)>,
}

struct LognormalState {
    index: usize,
    /// (growth − ½ dᵀ R d) Δ.
    log_drift_per_step: f64,
    loadings: Vec<(usize, f64)>,
}

struct GroupStep {
    states: Vec<usize>,
    transition: Vec<Vec<f64>>,
    shift: Vec<f64>,
    noise_factor: Vec<Vec<f64>>,
}

/// Everything a block needs, fixed for the whole run.
struct Compiled {
    state_count: usize,
    noise_count: usize,
    initial: Vec<f64>,
    step: f64,
    steps: usize,
    euler: Vec<EulerState>,
    lognormal: Vec<LognormalState>,
    square_root: Vec<(usize, SquareRootStep)>,
    group: Option<GroupStep>,
    /// Factor of the noise correlation; `None` for independent noises.
    noise_factor: Option<Vec<Vec<f64>>>,
    needs_increments: bool,
    stack_depth: usize,
    truncated: Vec<bool>,
}

fn compile_error(state: &str, error: CompileError) -> SimulateError {
    match error {
        CompileError::Invalid | CompileError::UnknownIndex | CompileError::Arity(_) => {
            SimulateError::UnresolvedEquation {
                state: state.to_string(),
            }
        }
    }
}

fn matrix_rows(matrix: &DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..matrix.nrows())
        .map(|i| (0..matrix.ncols()).map(|j| matrix[(i, j)]).collect())
        .collect()
}

fn compile(
    model: &Model,
    plan: &Plan,
    step: f64,
    steps: usize,
    warnings: &mut Vec<String>,
) -> Result<Compiled, SimulateError> {
    let state_count = model.factors.len();
    let noise_count = model.shocks.len();
    let params = model.param_values();
    let truncated: Vec<bool> = (0..state_count)
        .map(|i| plan.truncated.get(i).copied().unwrap_or(false))
        .collect();

    // Every equation must compile, whatever its scheme: an exact scheme on a broken model
    // would hide the error.
    let mut programs = Vec::with_capacity(state_count);
    for state in &model.factors {
        let equation = state
            .equation
            .as_ref()
            .ok_or_else(|| SimulateError::MissingEquation {
                state: state.name.clone(),
            })?;
        let drift = Program::compile(&equation.drift, &params, state_count, &truncated)
            .map_err(|e| compile_error(&state.name, e))?;
        let mut diffusion = Vec::with_capacity(equation.diffusion.len());
        for term in &equation.diffusion {
            if term.noise >= noise_count {
                return Err(SimulateError::UnknownNoise {
                    state: state.name.clone(),
                });
            }
            let program = Program::compile(&term.coefficient, &params, state_count, &truncated)
                .map_err(|e| compile_error(&state.name, e))?;
            diffusion.push((term.noise, program));
        }
        programs.push((drift, diffusion));
    }

    let correlation = model.correlation_matrix();
    let correlation = DMatrix::from_fn(noise_count, noise_count, |i, j| correlation[i][j]);
    let factor = correlation_factor(&correlation);
    if factor.repaired {
        warnings.push(
            "the correlation matrix of the shocks is not positive semi-definite; simulated with a repaired matrix \
             (negative eigenvalues set to zero, unit diagonal restored)"
                .to_string(),
        );
    }
    let effective = factor.effective.clone();
    let identity = factor.lower == DMatrix::identity(noise_count, noise_count);

    let mut euler = Vec::new();
    let mut lognormal = Vec::new();
    let mut square_root = Vec::new();
    for (index, (drift, diffusion)) in programs.into_iter().enumerate() {
        match plan.schemes.get(index).unwrap_or(&Scheme::Euler) {
            Scheme::Euler => euler.push(EulerState {
                index,
                drift,
                diffusion,
            }),
            Scheme::Exact(ExactLaw::LinearGaussian) => {}
            Scheme::Exact(ExactLaw::Lognormal { growth, loadings }) => {
                let mut quadratic = 0.0;
                for (k, dk) in loadings {
                    for (l, dl) in loadings {
                        quadratic += dk * dl * effective.get((*k, *l)).copied().unwrap_or(0.0);
                    }
                }
                lognormal.push(LognormalState {
                    index,
                    log_drift_per_step: (growth - 0.5 * quadratic) * step,
                    loadings: loadings
                        .iter()
                        .filter(|(k, _)| *k < noise_count)
                        .copied()
                        .collect(),
                });
            }
            Scheme::Exact(ExactLaw::SquareRoot { speed, level, vol }) => {
                square_root.push((index, SquareRootStep::new(*speed, *level, *vol, step)));
            }
        }
    }

    let group = match &plan.gaussian_group {
        Some(group) if !group.states.is_empty() => {
            let m = group.states.len();
            let drift = DMatrix::from_fn(m, m, |i, j| group.drift[i][j]);
            let constant = DVector::from_fn(m, |i, _| group.constant[i]);
            let loadings = DMatrix::from_fn(m, noise_count, |i, k| group.loadings[i][k]);
            let noise_covariance = &loadings * &effective * loadings.transpose();
            let GaussianStep {
                transition,
                shift,
                noise_factor,
            } = gaussian_step(&drift, &constant, &noise_covariance, step);
            Some(GroupStep {
                states: group.states.clone(),
                transition: matrix_rows(&transition),
                shift: shift.iter().copied().collect(),
                noise_factor: matrix_rows(&noise_factor),
            })
        }
        _ => None,
    };

    let stack_depth = euler
        .iter()
        .flat_map(|e| std::iter::once(&e.drift).chain(e.diffusion.iter().map(|(_, p)| p)))
        .map(Program::max_depth)
        .max()
        .unwrap_or(0)
        .max(1);
    let needs_increments = noise_count > 0 && (!euler.is_empty() || !lognormal.is_empty());
    Ok(Compiled {
        state_count,
        noise_count,
        initial: model.initial_values(),
        step,
        steps,
        euler,
        lognormal,
        square_root,
        group,
        noise_factor: if identity {
            None
        } else {
            Some(matrix_rows(&factor.lower))
        },
        needs_increments,
        stack_depth,
        truncated,
    })
}

/// Per-thread working memory, reused across blocks.
struct Scratch {
    current: Vec<Lanes>,
    next: Vec<Lanes>,
    normals: Vec<Lanes>,
    increments: Vec<Lanes>,
    group_normals: Vec<Lanes>,
    stack: Vec<Lanes>,
    value: Lanes,
}

impl Scratch {
    fn new(compiled: &Compiled) -> Scratch {
        let group_size = compiled.group.as_ref().map_or(0, |g| g.states.len());
        Scratch {
            current: vec![[0.0; LANES]; compiled.state_count],
            next: vec![[0.0; LANES]; compiled.state_count],
            normals: vec![[0.0; LANES]; compiled.noise_count],
            increments: vec![[0.0; LANES]; compiled.noise_count],
            group_normals: vec![[0.0; LANES]; group_size],
            stack: vec![[0.0; LANES]; compiled.stack_depth],
            value: [0.0; LANES],
        }
    }
}

/// The values of one block: `finals[state * LANES + lane]`, and for recorded blocks
/// `bands[(record * states + state) * LANES + lane]`.
struct BlockOutput {
    finals: Vec<f64>,
    bands: Vec<f64>,
}

fn reported(value: f64, truncated: bool) -> f64 {
    if truncated {
        value.max(0.0)
    } else {
        value
    }
}

fn advance(compiled: &Compiled, scratch: &mut Scratch, rng: &mut ChaCha8Rng, step_index: usize) {
    let dt = compiled.step;
    let t = step_index as f64 * dt;
    let Scratch {
        current,
        next,
        normals,
        increments,
        group_normals,
        stack,
        value,
    } = scratch;

    if compiled.needs_increments {
        for lanes in normals.iter_mut() {
            fill_standard_normal(rng, lanes);
        }
        let sqrt_dt = dt.sqrt();
        match &compiled.noise_factor {
            None => {
                for (increment, normal) in increments.iter_mut().zip(normals.iter()) {
                    for (d, z) in increment.iter_mut().zip(normal) {
                        *d = sqrt_dt * z;
                    }
                }
            }
            Some(factor) => {
                for (increment, row) in increments.iter_mut().zip(factor) {
                    increment.fill(0.0);
                    for (weight, normal) in row.iter().zip(normals.iter()) {
                        if *weight == 0.0 {
                            continue;
                        }
                        let w = weight * sqrt_dt;
                        for (d, z) in increment.iter_mut().zip(normal) {
                            *d += w * z;
                        }
                    }
                }
            }
        }
    }

    for state in &compiled.euler {
        let i = state.index;
        state.drift.evaluate(current, t, stack, value);
        let (target, start) = (&mut next[i], &current[i]);
        for ((n, x), a) in target.iter_mut().zip(start).zip(value.iter()) {
            *n = x + a * dt;
        }
        for (noise, program) in &state.diffusion {
            let increment = &increments[*noise];
            if let Some(c) = program.constant() {
                for (n, d) in next[i].iter_mut().zip(increment) {
                    *n += c * d;
                }
            } else {
                program.evaluate(current, t, stack, value);
                for ((n, b), d) in next[i].iter_mut().zip(value.iter()).zip(increment) {
                    *n += b * d;
                }
            }
        }
    }

    for state in &compiled.lognormal {
        value.fill(state.log_drift_per_step);
        for (noise, loading) in &state.loadings {
            for (v, d) in value.iter_mut().zip(&increments[*noise]) {
                *v += loading * d;
            }
        }
        let i = state.index;
        for ((n, x), v) in next[i].iter_mut().zip(&current[i]).zip(value.iter()) {
            *n = x * v.exp();
        }
    }

    for (i, transition) in &compiled.square_root {
        for (n, x) in next[*i].iter_mut().zip(&current[*i]) {
            *n = transition.sample(rng, *x);
        }
    }

    if let Some(group) = &compiled.group {
        for lanes in group_normals.iter_mut() {
            fill_standard_normal(rng, lanes);
        }
        for (a, &target) in group.states.iter().enumerate() {
            value.fill(group.shift[a]);
            for (b, &source) in group.states.iter().enumerate() {
                let weight = group.transition[a][b];
                if weight != 0.0 {
                    for (v, x) in value.iter_mut().zip(&current[source]) {
                        *v += weight * x;
                    }
                }
                let loading = group.noise_factor[a][b];
                if loading != 0.0 {
                    for (v, z) in value.iter_mut().zip(&group_normals[b]) {
                        *v += loading * z;
                    }
                }
            }
            next[target] = *value;
        }
    }

    std::mem::swap(current, next);
}

fn simulate_block(
    compiled: &Compiled,
    scratch: &mut Scratch,
    seed: u64,
    block: usize,
    record_steps: &[usize],
) -> BlockOutput {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(block as u64);
    for (lanes, x0) in scratch.current.iter_mut().zip(&compiled.initial) {
        lanes.fill(*x0);
    }
    let states = compiled.state_count;
    let mut bands = Vec::with_capacity(record_steps.len() * states * LANES);
    let record = |current: &[Lanes], bands: &mut Vec<f64>| {
        for (i, lanes) in current.iter().enumerate() {
            let truncated = compiled.truncated[i];
            bands.extend(lanes.iter().map(|x| reported(*x, truncated)));
        }
    };
    let mut next_record = record_steps.iter().peekable();
    if next_record.peek() == Some(&&0) {
        record(&scratch.current, &mut bands);
        next_record.next();
    }
    for step_index in 0..compiled.steps {
        advance(compiled, scratch, &mut rng, step_index);
        if next_record.peek() == Some(&&(step_index + 1)) {
            record(&scratch.current, &mut bands);
            next_record.next();
        }
    }
    let mut finals = Vec::with_capacity(states * LANES);
    record(&scratch.current, &mut finals);
    BlockOutput { finals, bands }
}

/// Step indices (0 = start) at which bands are recorded: `count` points spread evenly up
/// to the last step, plus the start.
fn band_steps(steps: usize, count: usize) -> Vec<usize> {
    if count == 0 {
        return Vec::new();
    }
    let count = count.min(steps);
    let mut indices: Vec<usize> = (0..=count).map(|j| (j * steps).div_ceil(count)).collect();
    indices.dedup();
    indices
}

/// Runs the simulation and returns the raw values.
pub fn simulate_paths(
    model: &Model,
    plan: &Plan,
    options: &SimulationOptions,
) -> Result<PathSamples, SimulateError> {
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
    if options.paths.saturating_mul(states) > MAX_STORED_VALUES {
        return Err(SimulateError::TooLarge {
            paths: options.paths,
            states,
        });
    }
    let at = options.at.unwrap_or(model.horizon);
    if !(at.is_finite() && at > 0.0) {
        return Err(SimulateError::BadTime { at });
    }
    validate_plan(model, plan)?;
    let step = at / options.steps as f64;
    let mut warnings = plan.notes.clone();
    let compiled = compile(model, plan, step, options.steps, &mut warnings)?;

    let blocks = options.paths.div_ceil(LANES);
    let record_steps = band_steps(options.steps, options.band_times.min(MAX_BAND_TIMES));
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
    let progress = Progress::start(options.progress, blocks);
    let outputs: Vec<BlockOutput> = pool.install(|| {
        (0..blocks)
            .into_par_iter()
            .map_init(
                || Scratch::new(&compiled),
                |scratch, block| {
                    let records: &[usize] = if block < band_blocks {
                        &record_steps
                    } else {
                        &[]
                    };
                    let output = simulate_block(&compiled, scratch, options.seed, block, records);
                    progress.advance();
                    output
                },
            )
            .collect()
    });
    progress.finish();

    let mut finals = vec![Vec::with_capacity(options.paths); states];
    for (block, output) in outputs.iter().enumerate() {
        let lanes_used = (options.paths - block * LANES).min(LANES);
        for (i, values) in finals.iter_mut().enumerate() {
            values.extend_from_slice(&output.finals[i * LANES..i * LANES + lanes_used]);
        }
    }
    let band_paths = options.paths.min(MAX_BAND_PATHS);
    let mut band_values = vec![vec![Vec::with_capacity(band_paths); states]; record_steps.len()];
    for (block, output) in outputs.iter().enumerate().take(band_blocks) {
        let lanes_used = (band_paths - block * LANES).min(LANES);
        for (r, per_state) in band_values.iter_mut().enumerate() {
            for (i, values) in per_state.iter_mut().enumerate() {
                let start = (r * states + i) * LANES;
                values.extend_from_slice(&output.bands[start..start + lanes_used]);
            }
        }
    }

    Ok(PathSamples {
        at,
        clock_unit: model.clock.unit.clone(),
        paths: options.paths,
        steps: options.steps,
        seed: options.seed,
        state_names: model.factors.iter().map(|s| s.name.clone()).collect(),
        schemes: (0..states).map(|i| plan.describe_state(i)).collect(),
        finals,
        band_times: record_steps.iter().map(|s| *s as f64 * step).collect(),
        band_values,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn band_steps_cover_start_and_end() {
        assert_eq!(band_steps(100, 4), vec![0, 25, 50, 75, 100]);
        assert_eq!(band_steps(3, 10), vec![0, 1, 2, 3]);
        assert_eq!(band_steps(7, 2), vec![0, 4, 7]);
        assert!(band_steps(10, 0).is_empty());
    }
}
