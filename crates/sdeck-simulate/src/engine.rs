//! The Monte Carlo engine: blocks of paths advanced step by step, each block with its own
//! random stream, run on a local thread pool and gathered in a fixed order.
//!
//! Reproducibility: paths are cut into blocks of [`LANES`] paths whatever `paths` and the
//! thread count are; block b draws from ChaCha8 stream b of the seed, and blocks are
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

use crate::bytecode::{CompileError, Lanes, Program, LANES};
use crate::normals::fill_normals_chunk;
use crate::plan::{ExactLaw, Plan, Scheme, VarianceDriven};
use crate::progress::{Progress, Reporting};
use crate::samplers::SquareRootStep;
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use sdeck_calculus::linear_system::{gaussian_step, GaussianStep};
use sdeck_calculus::symmetric::correlation_factor;
use sdeck_semantics::Model;
use std::fmt;

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

struct EulerState {
    index: usize,
    drift: Program,
    diffusion: Vec<(usize, Program)>,
}

struct LognormalState {
    index: usize,
    /// growth − ½ dᵀ R d, per clock unit.
    log_drift_rate: f64,
    loadings: Vec<(usize, f64)>,
}

struct SquareRootState {
    index: usize,
    speed: f64,
    level: f64,
    vol: f64,
}

struct DrivenState {
    index: usize,
    law: VarianceDriven,
    /// (speed, level, vol) of the variance.
    variance: (f64, f64, f64),
}

/// Andersen's log-price step over Δ: x' = x + k0 + kv·v + kv_next·v' + kz·√(v + v')·Z.
#[derive(Clone, Copy, Debug, PartialEq)]
struct DrivenStep {
    k0: f64,
    kv: f64,
    kv_next: f64,
    kz: f64,
}

impl DrivenStep {
    /// From dX = (a + b V) dt + c √V dW_X, corr ρ with dV = κ(θ − V) dt + ε √V dW_V:
    /// c ρ ∫√V dW_V = (c ρ/ε)(V' − V − κθΔ + κ ∫V), ∫V ≈ Δ(V + V')/2 (Andersen 2008,
    /// eq. (33), γ₁ = γ₂ = ½), and the orthogonal part c √(1 − ρ²) √(∫V) Z.
    fn new(state: &DrivenState, dt: f64) -> DrivenStep {
        let (speed, level, vol) = state.variance;
        let law = &state.law;
        let ratio = law.loading * law.correlation / vol;
        let slope = law.drift_slope + ratio * speed;
        DrivenStep {
            k0: law.drift_constant * dt - ratio * speed * level * dt,
            kv: 0.5 * slope * dt - ratio,
            kv_next: 0.5 * slope * dt + ratio,
            kz: law.loading
                * (1.0 - law.correlation * law.correlation).max(0.0).sqrt()
                * (0.5 * dt).sqrt(),
        }
    }

    #[inline(always)]
    fn apply(&self, x: f64, v: f64, v_next: f64, z: f64) -> f64 {
        let v = v.max(0.0);
        let v_next = v_next.max(0.0);
        x + self.k0 + self.kv * v + self.kv_next * v_next + self.kz * (v + v_next).sqrt() * z
    }
}

struct GroupStep {
    states: Vec<usize>,
    transition: Vec<Vec<f64>>,
    shift: Vec<f64>,
    noise_factor: Vec<Vec<f64>>,
}

/// The exact laws of one interval between reporting dates, for its step size.
struct Segment {
    start: f64,
    dt: f64,
    sqrt_dt: f64,
    steps: usize,
    lognormal: Vec<f64>,
    square_root: Vec<SquareRootStep>,
    group: Option<GroupStep>,
    driven: Vec<DrivenStep>,
    /// The same over two steps, for the coarse grid.
    driven_coarse: Vec<DrivenStep>,
}

/// Everything a block needs, fixed for the whole run.
struct Compiled {
    state_count: usize,
    noise_count: usize,
    initial: Vec<f64>,
    euler: Vec<EulerState>,
    lognormal: Vec<LognormalState>,
    square_root: Vec<SquareRootState>,
    driven: Vec<DrivenState>,
    segments: Vec<Segment>,
    /// Factor of the noise correlation; `None` for independent noises.
    noise_factor: Option<Vec<Vec<f64>>>,
    needs_normals: bool,
    needs_increments: bool,
    stack_depth: usize,
    truncated: Vec<bool>,
    /// Per state: on the coarse grid too (discretised scheme) when step doubling.
    discretised: Vec<bool>,
    step_doubling: bool,
    /// The short rate of a `discount` line, per clock unit.
    discount: Option<Program>,
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

/// Splits [0, last date] into one interval per date with a whole number of steps each,
/// about `steps` in all: `(start, end, steps)`.
fn cut_segments(dates: &[f64], steps: usize, even: bool) -> Vec<(f64, f64, usize)> {
    let last = dates.last().copied().unwrap_or(1.0);
    let mut start = 0.0;
    dates
        .iter()
        .map(|&end| {
            let share = (steps as f64 * (end - start) / last).round();
            // A date at the start (today) takes no step: its values are the start values.
            let mut n = if end <= start {
                0
            } else if share.is_finite() && share >= 1.0 {
                share as usize
            } else {
                1
            };
            if even && n % 2 == 1 {
                n += 1;
            }
            let segment = (start, end, n);
            start = end;
            segment
        })
        .collect()
}

#[allow(clippy::too_many_arguments)]
fn compile(
    model: &Model,
    plan: &Plan,
    dates: &[f64],
    steps: usize,
    step_doubling: bool,
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

    let discount = match &model.discount {
        Some(line) => Some(
            Program::compile(&line.rate, &params, state_count, &truncated)
                .map_err(|e| compile_error("discount", e))?,
        ),
        None => None,
    };

    let correlation = model.correlation_matrix();
    let correlation = DMatrix::from_fn(noise_count, noise_count, |i, j| correlation[i][j]);
    let factor = correlation_factor(&correlation)
        .ok_or_else(|| SimulateError::Matrix("the correlation matrix of the shocks".to_string()))?;
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
    let mut driven = Vec::new();
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
                    log_drift_rate: growth - 0.5 * quadratic,
                    loadings: loadings
                        .iter()
                        .filter(|(k, _)| *k < noise_count)
                        .copied()
                        .collect(),
                });
            }
            Scheme::Exact(ExactLaw::SquareRoot { speed, level, vol }) => {
                square_root.push(SquareRootState {
                    index,
                    speed: *speed,
                    level: *level,
                    vol: *vol,
                });
            }
            Scheme::VarianceDriven(law) => {
                let variance = match plan.schemes.get(law.variance) {
                    Some(Scheme::Exact(ExactLaw::SquareRoot { speed, level, vol })) => {
                        (*speed, *level, *vol)
                    }
                    _ => {
                        return Err(SimulateError::InconsistentPlan(
                            "a log-price step whose variance is not exact".into(),
                        ))
                    }
                };
                driven.push(DrivenState {
                    index,
                    law: law.clone(),
                    variance,
                });
            }
        }
    }
    // The driven step reads the variance's next value: square roots come first in a step.
    let group_matrices = match &plan.gaussian_group {
        Some(group) if !group.states.is_empty() => {
            let m = group.states.len();
            let drift = DMatrix::from_fn(m, m, |i, j| group.drift[i][j]);
            let constant = DVector::from_fn(m, |i, _| group.constant[i]);
            let loadings = DMatrix::from_fn(m, noise_count, |i, k| group.loadings[i][k]);
            let noise_covariance = &loadings * &effective * loadings.transpose();
            Some((group.states.clone(), drift, constant, noise_covariance))
        }
        _ => None,
    };

    let discretised: Vec<bool> = (0..state_count)
        .map(|i| plan.schemes.get(i).is_none_or(Scheme::is_discretised))
        .collect();
    // The trapezoid of the discount has a bias even over exact factors.
    let step_doubling = step_doubling && (discretised.iter().any(|d| *d) || discount.is_some());
    let segments = cut_segments(dates, steps, step_doubling)
        .into_iter()
        .map(|(start, end, n)| -> Result<Segment, SimulateError> {
            let dt = if n == 0 {
                0.0
            } else {
                (end - start) / n as f64
            };
            Ok(Segment {
                start,
                dt,
                sqrt_dt: dt.sqrt(),
                steps: n,
                lognormal: lognormal.iter().map(|l| l.log_drift_rate * dt).collect(),
                square_root: square_root
                    .iter()
                    .map(|q| SquareRootStep::new(q.speed, q.level, q.vol, dt))
                    .collect(),
                group: match group_matrices.as_ref() {
                    None => None,
                    Some((states, drift, constant, q)) => {
                        let GaussianStep {
                            transition,
                            shift,
                            noise_factor,
                        } = gaussian_step(drift, constant, q, dt).ok_or_else(|| {
                            SimulateError::Matrix(
                                "the exact step of the Gaussian factors".to_string(),
                            )
                        })?;
                        Some(GroupStep {
                            states: states.clone(),
                            transition: matrix_rows(&transition),
                            shift: shift.iter().copied().collect(),
                            noise_factor: matrix_rows(&noise_factor),
                        })
                    }
                },
                driven: driven.iter().map(|d| DrivenStep::new(d, dt)).collect(),
                driven_coarse: driven
                    .iter()
                    .map(|d| DrivenStep::new(d, 2.0 * dt))
                    .collect(),
            })
        })
        .collect::<Result<Vec<_>, _>>()?;

    let stack_depth = euler
        .iter()
        .flat_map(|e| std::iter::once(&e.drift).chain(e.diffusion.iter().map(|(_, p)| p)))
        .chain(discount.iter())
        .map(Program::max_depth)
        .max()
        .unwrap_or(0)
        .max(1);
    let needs_increments = noise_count > 0 && (!euler.is_empty() || !lognormal.is_empty());
    let needs_normals = needs_increments || (noise_count > 0 && !driven.is_empty());
    Ok(Compiled {
        state_count,
        noise_count,
        initial: model.initial_values(),
        euler,
        lognormal,
        square_root,
        driven,
        segments,
        noise_factor: if identity {
            None
        } else {
            Some(matrix_rows(&factor.lower))
        },
        needs_normals,
        needs_increments,
        stack_depth,
        truncated,
        discretised,
        step_doubling,
        discount,
    })
}

/// Per-thread working memory, reused across blocks.
struct Scratch {
    current: Vec<Lanes>,
    next: Vec<Lanes>,
    words: [u64; LANES / 2],
    normals: Vec<Lanes>,
    increments: Vec<Lanes>,
    group_normals: Vec<Lanes>,
    stack: Vec<Lanes>,
    value: Lanes,
    /// Step doubling: the coarse grid's states, and the first half of each pair of steps.
    coarse: Vec<Lanes>,
    coarse_next: Vec<Lanes>,
    first_increments: Vec<Lanes>,
    first_normals: Vec<Lanes>,
    /// With a discount: ∫ r ds so far and the rate at the current time, on the fine and
    /// on the coarse grid.
    integral: Lanes,
    rate: Lanes,
    coarse_integral: Lanes,
    coarse_rate: Lanes,
}

impl Scratch {
    fn new(compiled: &Compiled) -> Scratch {
        let group_size = compiled
            .segments
            .first()
            .and_then(|s| s.group.as_ref())
            .map_or(0, |g| g.states.len());
        let doubling = if compiled.step_doubling { 1 } else { 0 };
        Scratch {
            current: vec![[0.0; LANES]; compiled.state_count],
            next: vec![[0.0; LANES]; compiled.state_count],
            words: [0; LANES / 2],
            normals: vec![[0.0; LANES]; compiled.noise_count],
            increments: vec![[0.0; LANES]; compiled.noise_count],
            group_normals: vec![[0.0; LANES]; group_size],
            stack: vec![[0.0; LANES]; compiled.stack_depth],
            value: [0.0; LANES],
            coarse: vec![[0.0; LANES]; compiled.state_count * doubling],
            coarse_next: vec![[0.0; LANES]; compiled.state_count * doubling],
            first_increments: vec![[0.0; LANES]; compiled.noise_count * doubling],
            first_normals: vec![[0.0; LANES]; compiled.noise_count * doubling],
            integral: [0.0; LANES],
            rate: [0.0; LANES],
            coarse_integral: [0.0; LANES],
            coarse_rate: [0.0; LANES],
        }
    }
}

/// The values of one block: `values[(date * states + state) * LANES + lane]`, the same for
/// `coarse`, and for recorded blocks `bands[(record * states + state) * LANES + lane]`.
struct BlockOutput {
    values: Vec<f64>,
    coarse: Vec<f64>,
    bands: Vec<f64>,
    /// With a discount: `discount[date * LANES + lane]`, the same for `coarse_discount`.
    discount: Vec<f64>,
    coarse_discount: Vec<f64>,
}

fn reported(value: f64, truncated: bool) -> f64 {
    if truncated {
        value.max(0.0)
    } else {
        value
    }
}

/// Correlated Brownian increments √Δ·L·Z from the normals of every noise.
#[multiversion::multiversion(targets(
    "x86_64+avx512f+avx512dq+avx512vl",
    "x86_64+avx2+fma",
    "x86_64+sse4.1",
    "aarch64+neon"
))]
fn increments_from_normals(
    factor: Option<&[Vec<f64>]>,
    sqrt_dt: f64,
    normals: &[Lanes],
    increments: &mut [Lanes],
) {
    match factor {
        None => {
            for (increment, normal) in increments.iter_mut().zip(normals) {
                for (d, z) in increment.iter_mut().zip(normal) {
                    *d = sqrt_dt * z;
                }
            }
        }
        Some(factor) => {
            for (increment, row) in increments.iter_mut().zip(factor) {
                increment.fill(0.0);
                for (weight, normal) in row.iter().zip(normals) {
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

/// One Euler–Maruyama step of every Euler state, from `from` to `to`, over `dt` with
/// increments `increments` (or the sums `increments + extra`, for the coarse grid).
#[multiversion::multiversion(targets(
    "x86_64+avx512f+avx512dq+avx512vl",
    "x86_64+avx2+fma",
    "x86_64+sse4.1",
    "aarch64+neon"
))]
#[allow(clippy::too_many_arguments)]
fn euler_step(
    euler: &[EulerState],
    from: &[Lanes],
    to: &mut [Lanes],
    t: f64,
    dt: f64,
    increments: &[Lanes],
    extra: Option<&[Lanes]>,
    stack: &mut [Lanes],
    value: &mut Lanes,
) {
    for state in euler {
        let i = state.index;
        state.drift.evaluate(from, t, stack, value);
        let (target, start) = (&mut to[i], &from[i]);
        for ((n, x), a) in target.iter_mut().zip(start).zip(value.iter()) {
            *n = x + a * dt;
        }
        for (noise, program) in &state.diffusion {
            let mut increment = increments[*noise];
            if let Some(extra) = extra {
                for (d, e) in increment.iter_mut().zip(&extra[*noise]) {
                    *d += e;
                }
            }
            if let Some(c) = program.constant() {
                for (n, d) in to[i].iter_mut().zip(&increment) {
                    *n += c * d;
                }
            } else {
                program.evaluate(from, t, stack, value);
                for ((n, b), d) in to[i].iter_mut().zip(value.iter()).zip(&increment) {
                    *n += b * d;
                }
            }
        }
    }
}

#[multiversion::multiversion(targets(
    "x86_64+avx512f+avx512dq+avx512vl",
    "x86_64+avx2+fma",
    "x86_64+sse4.1",
    "aarch64+neon"
))]
fn lognormal_step(
    states: &[LognormalState],
    drifts: &[f64],
    current: &[Lanes],
    next: &mut [Lanes],
    increments: &[Lanes],
    value: &mut Lanes,
) {
    for (state, drift) in states.iter().zip(drifts) {
        value.fill(*drift);
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
}

fn group_step(
    group: &GroupStep,
    current: &[Lanes],
    next: &mut [Lanes],
    normals: &[Lanes],
    value: &mut Lanes,
) {
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
                for (v, z) in value.iter_mut().zip(&normals[b]) {
                    *v += loading * z;
                }
            }
        }
        next[target] = *value;
    }
}

/// Advances a block by one step of `segment`; `t` is the time at the start of the step,
/// `second_of_pair` says whether this step closes a pair of the coarse grid.
fn advance(
    compiled: &Compiled,
    segment: &Segment,
    scratch: &mut Scratch,
    rng: &mut ChaCha8Rng,
    t: f64,
    second_of_pair: bool,
) {
    let dt = segment.dt;
    let Scratch {
        current,
        next,
        words,
        normals,
        increments,
        group_normals,
        stack,
        value,
        coarse,
        coarse_next,
        first_increments,
        first_normals,
        integral,
        rate,
        coarse_integral,
        coarse_rate,
    } = scratch;

    if compiled.needs_normals {
        for lanes in normals.iter_mut() {
            fill_normals_chunk(rng, words, lanes);
        }
    }
    if compiled.needs_increments {
        increments_from_normals(
            compiled.noise_factor.as_deref(),
            segment.sqrt_dt,
            normals,
            increments,
        );
    }

    euler_step(
        &compiled.euler,
        current,
        next,
        t,
        dt,
        increments,
        None,
        stack,
        value,
    );
    lognormal_step(
        &compiled.lognormal,
        &segment.lognormal,
        current,
        next,
        increments,
        value,
    );
    for (state, transition) in compiled.square_root.iter().zip(&segment.square_root) {
        let i = state.index;
        for (n, x) in next[i].iter_mut().zip(&current[i]) {
            *n = transition.sample(rng, *x);
        }
    }
    if let Some(group) = &segment.group {
        for lanes in group_normals.iter_mut() {
            fill_normals_chunk(rng, words, lanes);
        }
        group_step(group, current, next, group_normals, value);
    }
    for (state, step) in compiled.driven.iter().zip(&segment.driven) {
        let (i, v, k) = (state.index, state.law.variance, state.law.noise);
        let variance_next = next[v];
        for ((((n, x), v0), v1), z) in next[i]
            .iter_mut()
            .zip(&current[i])
            .zip(&current[v])
            .zip(&variance_next)
            .zip(&normals[k])
        {
            *n = step.apply(*x, *v0, *v1, *z);
        }
    }

    if compiled.step_doubling {
        if !second_of_pair {
            // Start of a pair: the exact states on the coarse grid are the fine ones.
            for (i, discretised) in compiled.discretised.iter().enumerate() {
                if !discretised {
                    coarse[i] = current[i];
                }
            }
            first_increments.copy_from_slice(increments);
            first_normals.copy_from_slice(normals);
        } else {
            // Close the pair: one step of 2Δ on the coarse grid with the summed increments.
            coarse_step(
                compiled,
                segment,
                coarse,
                coarse_next,
                t - dt,
                increments,
                first_increments,
                normals,
                first_normals,
                next,
                stack,
                value,
            );
            if let Some(program) = &compiled.discount {
                // The exact states of the coarse grid are the fine ones.
                for (i, discretised) in compiled.discretised.iter().enumerate() {
                    if !discretised {
                        coarse[i] = next[i];
                    }
                }
                program.evaluate(coarse, t + dt, stack, value);
                trapezoid(coarse_integral, coarse_rate, value, 2.0 * dt);
            }
        }
    }

    std::mem::swap(current, next);
    if let Some(program) = &compiled.discount {
        program.evaluate(current, t + dt, stack, value);
        trapezoid(integral, rate, value, dt);
    }
}

/// One panel of the trapezoid rule: `integral += h (rate + next)/2`, then `rate = next`.
#[inline(always)]
fn trapezoid(integral: &mut Lanes, rate: &mut Lanes, next: &Lanes, h: f64) {
    let half = 0.5 * h;
    for ((i, r), n) in integral.iter_mut().zip(rate.iter_mut()).zip(next) {
        *i += half * (*r + n);
        *r = *n;
    }
}

/// The coarse grid's step over [t0, t0 + 2Δ]: Euler states with the summed increments,
/// log-prices with the summed normals over the fine variance path (the variance is exact,
/// so its coarse values are its fine ones).
#[allow(clippy::too_many_arguments)]
fn coarse_step(
    compiled: &Compiled,
    segment: &Segment,
    coarse: &mut [Lanes],
    coarse_next: &mut [Lanes],
    t0: f64,
    increments: &[Lanes],
    first_increments: &[Lanes],
    normals: &[Lanes],
    first_normals: &[Lanes],
    fine_next: &[Lanes],
    stack: &mut [Lanes],
    value: &mut Lanes,
) {
    // Euler reads every state at t0, so the new values go to `coarse_next` first.
    euler_step(
        &compiled.euler,
        coarse,
        coarse_next,
        t0,
        2.0 * segment.dt,
        first_increments,
        Some(increments),
        stack,
        value,
    );
    for state in &compiled.euler {
        coarse[state.index] = coarse_next[state.index];
    }
    let half = std::f64::consts::FRAC_1_SQRT_2;
    for (state, step) in compiled.driven.iter().zip(&segment.driven_coarse) {
        let (i, v, k) = (state.index, state.law.variance, state.law.noise);
        for lane in 0..LANES {
            let z = (first_normals[k][lane] + normals[k][lane]) * half;
            coarse[i][lane] = step.apply(coarse[i][lane], coarse[v][lane], fine_next[v][lane], z);
        }
    }
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
    for (lanes, x0) in scratch.coarse.iter_mut().zip(&compiled.initial) {
        lanes.fill(*x0);
    }
    let with_discount = compiled.discount.is_some();
    if let Some(program) = &compiled.discount {
        program.evaluate(
            &scratch.current,
            0.0,
            &mut scratch.stack,
            &mut scratch.value,
        );
        scratch.rate = scratch.value;
        scratch.coarse_rate = scratch.value;
        scratch.integral = [0.0; LANES];
        scratch.coarse_integral = [0.0; LANES];
    }
    let date_count = compiled.segments.len();
    let mut discount = Vec::with_capacity(if with_discount { date_count * LANES } else { 0 });
    let mut coarse_discount = Vec::with_capacity(if with_discount && compiled.step_doubling {
        date_count * LANES
    } else {
        0
    });
    let states = compiled.state_count;
    let dates = compiled.segments.len();
    let mut bands = Vec::with_capacity(record_steps.len() * states * LANES);
    let mut values = Vec::with_capacity(dates * states * LANES);
    let mut coarse = Vec::with_capacity(if compiled.step_doubling {
        dates * states * LANES
    } else {
        0
    });
    let record = |current: &[Lanes], out: &mut Vec<f64>| {
        for (i, lanes) in current.iter().enumerate() {
            let truncated = compiled.truncated[i];
            out.extend(lanes.iter().map(|x| reported(*x, truncated)));
        }
    };
    let mut next_record = record_steps.iter().peekable();
    if next_record.peek() == Some(&&0) {
        record(&scratch.current, &mut bands);
        next_record.next();
    }
    let mut global = 0usize;
    for segment in &compiled.segments {
        for k in 0..segment.steps {
            let t = segment.start + k as f64 * segment.dt;
            advance(compiled, segment, scratch, &mut rng, t, k % 2 == 1);
            global += 1;
            if next_record.peek() == Some(&&global) {
                record(&scratch.current, &mut bands);
                next_record.next();
            }
        }
        record(&scratch.current, &mut values);
        if with_discount {
            discount.extend(scratch.integral.iter().map(|i| (-i).exp()));
        }
        if compiled.step_doubling {
            for (i, discretised) in compiled.discretised.iter().enumerate() {
                if !discretised {
                    scratch.coarse[i] = scratch.current[i];
                }
            }
            record(&scratch.coarse, &mut coarse);
            if with_discount {
                coarse_discount.extend(scratch.coarse_integral.iter().map(|i| (-i).exp()));
            }
        }
    }
    BlockOutput {
        values,
        coarse,
        bands,
        discount,
        coarse_discount,
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
        matches!(e, sdeck_semantics::Expr::Factor(i) if discretised.get(*i).copied().unwrap_or(true))
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

    let blocks = options.paths.div_ceil(LANES);
    let record_steps = band_steps(total_steps, band_times);
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
    drop(progress);

    let gather = |pick: &dyn Fn(&BlockOutput) -> &[f64]| -> Vec<Vec<Vec<f64>>> {
        let mut gathered = vec![vec![Vec::with_capacity(options.paths); states]; dates.len()];
        for (block, output) in outputs.iter().enumerate() {
            let lanes_used = (options.paths - block * LANES).min(LANES);
            let values = pick(output);
            for (d, per_state) in gathered.iter_mut().enumerate() {
                for (i, target) in per_state.iter_mut().enumerate() {
                    let start = (d * states + i) * LANES;
                    target.extend_from_slice(&values[start..start + lanes_used]);
                }
            }
        }
        gathered
    };
    let values = gather(&|o| &o.values);
    let coarse = compiled.step_doubling.then(|| gather(&|o| &o.coarse));
    let gather_discount = |pick: &dyn Fn(&BlockOutput) -> &[f64]| -> Vec<Vec<f64>> {
        let mut gathered = vec![Vec::with_capacity(options.paths); dates.len()];
        for (block, output) in outputs.iter().enumerate() {
            let lanes_used = (options.paths - block * LANES).min(LANES);
            let values = pick(output);
            for (d, target) in gathered.iter_mut().enumerate() {
                target.extend_from_slice(&values[d * LANES..d * LANES + lanes_used]);
            }
        }
        gathered
    };
    let discount = compiled.discount.as_ref().map(|_| DiscountSamples {
        values: gather_discount(&|o| &o.discount),
        coarse: compiled
            .step_doubling
            .then(|| gather_discount(&|o| &o.coarse_discount)),
        order: discount_order(model, &compiled.discretised),
    });
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
    drop(outputs);

    // Time of each global step index, for the band grid.
    let step_time = |index: usize| -> f64 {
        let mut remaining = index;
        for segment in &compiled.segments {
            if remaining <= segment.steps {
                return segment.start + remaining as f64 * segment.dt;
            }
            remaining -= segment.steps;
        }
        dates.last().copied().unwrap_or(0.0)
    };

    Ok(PathSamples {
        at: dates.last().copied().unwrap_or(0.0),
        dates: dates.clone(),
        clock_unit: model.clock.unit.clone(),
        paths: options.paths,
        steps: total_steps,
        seed: options.seed,
        state_names: model.factors.iter().map(|s| s.name.clone()).collect(),
        schemes: (0..states).map(|i| plan.describe_state(i)).collect(),
        discretised: compiled.discretised.clone(),
        values,
        coarse,
        discount,
        band_times: record_steps.iter().map(|s| step_time(*s)).collect(),
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
