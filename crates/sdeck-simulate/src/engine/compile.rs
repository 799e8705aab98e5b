//! The run compiled once: each state's scheme with its programs or constants, and the
//! exact laws of every interval between reporting dates for its step size.

use crate::bytecode::{CompileError, Program};
use crate::plan::{ExactLaw, Plan, Scheme, VarianceDriven};
use crate::samplers::SquareRootStep;
use nalgebra::{DMatrix, DVector};
use sdeck_calculus::linear_system::{gaussian_step, GaussianStep};
use sdeck_calculus::symmetric::correlation_factor;
use sdeck_semantics::Model;

use super::polynomial::{coefficients, PolynomialStep};
use super::SimulateError;

pub(super) struct EulerState {
    pub(super) index: usize,
    pub(super) drift: Program,
    pub(super) diffusion: Vec<(usize, Program)>,
    /// Set when drift and diffusion are polynomials in the state alone: one fused pass.
    pub(super) polynomial: Option<PolynomialStep>,
}

impl EulerState {
    fn new(index: usize, drift: Program, diffusion: Vec<(usize, Program)>) -> EulerState {
        EulerState {
            index,
            drift,
            diffusion,
            polynomial: None,
        }
    }
}

pub(super) struct LognormalState {
    pub(super) index: usize,
    /// growth − ½ dᵀ R d, per clock unit.
    pub(super) log_drift_rate: f64,
    pub(super) loadings: Vec<(usize, f64)>,
}

pub(super) struct SquareRootState {
    pub(super) index: usize,
    pub(super) speed: f64,
    pub(super) level: f64,
    pub(super) vol: f64,
}

pub(super) struct DrivenState {
    pub(super) index: usize,
    pub(super) law: VarianceDriven,
    /// (speed, level, vol) of the variance.
    pub(super) variance: (f64, f64, f64),
}

/// Andersen's log-price step over Δ: x' = x + k0 + kv·v + kv_next·v' + kz·√(v + v')·Z.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct DrivenStep {
    pub(super) k0: f64,
    pub(super) kv: f64,
    pub(super) kv_next: f64,
    pub(super) kz: f64,
}

impl DrivenStep {
    /// From dX = (a + b V) dt + c √V dW_X, corr ρ with dV = κ(θ − V) dt + ε √V dW_V:
    /// c ρ ∫√V dW_V = (c ρ/ε)(V' − V − κθΔ + κ ∫V), ∫V ≈ Δ(V + V')/2 (Andersen 2008,
    /// eq. (33), γ₁ = γ₂ = ½), and the orthogonal part c √(1 − ρ²) √(∫V) Z.
    pub(super) fn new(state: &DrivenState, dt: f64) -> DrivenStep {
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
    pub(super) fn apply(&self, x: f64, v: f64, v_next: f64, z: f64) -> f64 {
        let v = v.max(0.0);
        let v_next = v_next.max(0.0);
        x + self.k0 + self.kv * v + self.kv_next * v_next + self.kz * (v + v_next).sqrt() * z
    }

    /// The step of a state that is the log-price itself, or the price exp(log-price).
    #[inline(always)]
    pub(super) fn advance(&self, price: bool, x: f64, v: f64, v_next: f64, z: f64) -> f64 {
        if price {
            x * self.apply(0.0, v, v_next, z).exp()
        } else {
            self.apply(x, v, v_next, z)
        }
    }
}

pub(super) struct GroupStep {
    pub(super) states: Vec<usize>,
    pub(super) transition: Vec<Vec<f64>>,
    pub(super) shift: Vec<f64>,
    pub(super) noise_factor: Vec<Vec<f64>>,
}

/// The exact laws of one interval between reporting dates, for its step size.
pub(super) struct Segment {
    pub(super) start: f64,
    pub(super) dt: f64,
    pub(super) sqrt_dt: f64,
    pub(super) steps: usize,
    pub(super) lognormal: Vec<f64>,
    pub(super) square_root: Vec<SquareRootStep>,
    pub(super) group: Option<GroupStep>,
    pub(super) driven: Vec<DrivenStep>,
    /// The same over two steps, for the coarse grid.
    pub(super) driven_coarse: Vec<DrivenStep>,
}

/// Everything a block needs, fixed for the whole run.
pub(super) struct Compiled {
    pub(super) state_count: usize,
    pub(super) noise_count: usize,
    pub(super) initial: Vec<f64>,
    pub(super) euler: Vec<EulerState>,
    pub(super) lognormal: Vec<LognormalState>,
    pub(super) square_root: Vec<SquareRootState>,
    pub(super) driven: Vec<DrivenState>,
    pub(super) segments: Vec<Segment>,
    /// Factor of the noise correlation; `None` for independent noises.
    pub(super) noise_factor: Option<Vec<Vec<f64>>>,
    pub(super) needs_normals: bool,
    pub(super) needs_increments: bool,
    pub(super) stack_depth: usize,
    pub(super) truncated: Vec<bool>,
    /// Per state: on the coarse grid too (discretised scheme) when step doubling.
    pub(super) discretised: Vec<bool>,
    pub(super) step_doubling: bool,
    /// The short rate of a `discount` line, per clock unit.
    pub(super) discount: Option<Program>,
}

pub(super) fn compile_error(state: &str, error: CompileError) -> SimulateError {
    match error {
        CompileError::Invalid | CompileError::UnknownIndex | CompileError::Arity(_) => {
            SimulateError::UnresolvedEquation {
                state: state.to_string(),
            }
        }
    }
}

pub(super) fn matrix_rows(matrix: &DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..matrix.nrows())
        .map(|i| (0..matrix.ncols()).map(|j| matrix[(i, j)]).collect())
        .collect()
}

/// Splits [0, last date] into one interval per date with a whole number of steps each,
/// about `steps` in all: `(start, end, steps)`.
pub(super) fn cut_segments(dates: &[f64], steps: usize, even: bool) -> Vec<(f64, f64, usize)> {
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

/// The fused step of factor `index` when its drift and its one diffusion term (if any) are
/// polynomials in it alone.
fn polynomial_step(
    model: &Model,
    index: usize,
    params: &[f64],
    truncated: bool,
) -> Option<PolynomialStep> {
    let equation = model.factors.get(index)?.equation.as_ref()?;
    let drift = coefficients(&equation.drift, index, params)?;
    let diffusion = match equation.diffusion.as_slice() {
        [] => [0.0; 5],
        [term] => coefficients(&term.coefficient, index, params)?,
        _ => return None,
    };
    Some(PolynomialStep::new(drift, diffusion, truncated))
}

/// The drift program and the (noise, diffusion program) terms of one factor.
type StatePrograms = (Program, Vec<(usize, Program)>);

/// The factors sorted by the scheme that advances them.
#[derive(Default)]
struct ByScheme {
    euler: Vec<EulerState>,
    lognormal: Vec<LognormalState>,
    square_root: Vec<SquareRootState>,
    driven: Vec<DrivenState>,
}

/// The Gaussian group's states, drift matrix, constant and noise covariance.
type GroupMatrices = (Vec<usize>, DMatrix<f64>, DVector<f64>, DMatrix<f64>);

pub(super) fn compile(
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
    let programs = compile_programs(model, &params, &truncated)?;
    let discount = match &model.discount {
        Some(line) => Some(
            Program::compile(&line.rate, &params, state_count, &truncated)
                .map_err(|e| compile_error("discount", e))?,
        ),
        None => None,
    };

    let (effective, lower) = shock_factor(model, warnings)?;
    let identity = lower == DMatrix::identity(noise_count, noise_count);

    let mut by_scheme = sort_by_scheme(plan, programs, &effective, noise_count)?;
    for state in &mut by_scheme.euler {
        state.polynomial = polynomial_step(model, state.index, &params, truncated[state.index]);
    }
    // The driven step reads the variance's next value: square roots come first in a step.
    let group = group_matrices(plan, &effective, noise_count);

    let discretised: Vec<bool> = (0..state_count)
        .map(|i| plan.schemes.get(i).is_none_or(Scheme::is_discretised))
        .collect();
    // The trapezoid of the discount has a bias even over exact factors.
    let step_doubling = step_doubling && (discretised.iter().any(|d| *d) || discount.is_some());
    let segments = cut_segments(dates, steps, step_doubling)
        .into_iter()
        .map(|(start, end, n)| segment(start, end, n, &by_scheme, group.as_ref()))
        .collect::<Result<Vec<_>, _>>()?;

    let stack_depth = stack_depth(&by_scheme.euler, discount.as_ref());
    let ByScheme {
        euler,
        lognormal,
        square_root,
        driven,
    } = by_scheme;
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
            Some(matrix_rows(&lower))
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

/// The correlation matrix the shocks are simulated with and its lower factor (a repaired
/// matrix, with a warning, when the declared one is not positive semi-definite).
fn shock_factor(
    model: &Model,
    warnings: &mut Vec<String>,
) -> Result<(DMatrix<f64>, DMatrix<f64>), SimulateError> {
    let noise_count = model.shocks.len();
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
    Ok((factor.effective, factor.lower))
}

/// The drift and diffusion programs of every factor.
fn compile_programs(
    model: &Model,
    params: &[f64],
    truncated: &[bool],
) -> Result<Vec<StatePrograms>, SimulateError> {
    let state_count = model.factors.len();
    let noise_count = model.shocks.len();
    let mut programs = Vec::with_capacity(state_count);
    for state in &model.factors {
        let equation = state
            .equation
            .as_ref()
            .ok_or_else(|| SimulateError::MissingEquation {
                state: state.name.clone(),
            })?;
        let drift = Program::compile(&equation.drift, params, state_count, truncated)
            .map_err(|e| compile_error(&state.name, e))?;
        let mut diffusion = Vec::with_capacity(equation.diffusion.len());
        for term in &equation.diffusion {
            if term.noise.index() >= noise_count {
                return Err(SimulateError::UnknownNoise {
                    state: state.name.clone(),
                });
            }
            let program = Program::compile(&term.coefficient, params, state_count, truncated)
                .map_err(|e| compile_error(&state.name, e))?;
            diffusion.push((term.noise.index(), program));
        }
        programs.push((drift, diffusion));
    }
    Ok(programs)
}

/// Each factor's step by its scheme; `effective` is the correlation matrix the shocks are
/// simulated with (for the lognormal drift correction).
fn sort_by_scheme(
    plan: &Plan,
    programs: Vec<StatePrograms>,
    effective: &DMatrix<f64>,
    noise_count: usize,
) -> Result<ByScheme, SimulateError> {
    let mut out = ByScheme::default();
    for (index, (drift, diffusion)) in programs.into_iter().enumerate() {
        match plan.schemes.get(index).unwrap_or(&Scheme::Euler) {
            Scheme::Euler => out.euler.push(EulerState::new(index, drift, diffusion)),
            Scheme::Exact(ExactLaw::LinearGaussian) => {}
            Scheme::Exact(ExactLaw::Lognormal { growth, loadings }) => {
                let mut quadratic = 0.0;
                for (k, dk) in loadings {
                    for (l, dl) in loadings {
                        quadratic += dk * dl * effective.get((*k, *l)).copied().unwrap_or(0.0);
                    }
                }
                out.lognormal.push(LognormalState {
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
                out.square_root.push(SquareRootState {
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
                out.driven.push(DrivenState {
                    index,
                    law: law.clone(),
                    variance,
                });
            }
        }
    }
    Ok(out)
}

/// The matrices of the plan's Gaussian group, if it has one.
fn group_matrices(
    plan: &Plan,
    effective: &DMatrix<f64>,
    noise_count: usize,
) -> Option<GroupMatrices> {
    let group = plan
        .gaussian_group
        .as_ref()
        .filter(|g| !g.states.is_empty())?;
    let m = group.states.len();
    let drift = DMatrix::from_fn(m, m, |i, j| group.drift[i][j]);
    let constant = DVector::from_fn(m, |i, _| group.constant[i]);
    let loadings = DMatrix::from_fn(m, noise_count, |i, k| group.loadings[i][k]);
    let noise_covariance = &loadings * effective * loadings.transpose();
    Some((group.states.clone(), drift, constant, noise_covariance))
}

/// The steps of one interval between dates: `n` steps from `start` to `end`.
fn segment(
    start: f64,
    end: f64,
    n: usize,
    by_scheme: &ByScheme,
    group: Option<&GroupMatrices>,
) -> Result<Segment, SimulateError> {
    let dt = if n == 0 {
        0.0
    } else {
        (end - start) / n as f64
    };
    let group = match group {
        None => None,
        Some((states, drift, constant, q)) => {
            let GaussianStep {
                transition,
                shift,
                noise_factor,
            } = gaussian_step(drift, constant, q, dt).ok_or_else(|| {
                SimulateError::Matrix("the exact step of the Gaussian factors".to_string())
            })?;
            Some(GroupStep {
                states: states.clone(),
                transition: matrix_rows(&transition),
                shift: shift.iter().copied().collect(),
                noise_factor: matrix_rows(&noise_factor),
            })
        }
    };
    let driven = &by_scheme.driven;
    Ok(Segment {
        start,
        dt,
        sqrt_dt: dt.sqrt(),
        steps: n,
        lognormal: by_scheme
            .lognormal
            .iter()
            .map(|l| l.log_drift_rate * dt)
            .collect(),
        square_root: by_scheme
            .square_root
            .iter()
            .map(|q| SquareRootStep::new(q.speed, q.level, q.vol, dt))
            .collect(),
        group,
        driven: driven.iter().map(|d| DrivenStep::new(d, dt)).collect(),
        driven_coarse: driven
            .iter()
            .map(|d| DrivenStep::new(d, 2.0 * dt))
            .collect(),
    })
}

/// The deepest stack any program of the Euler states or the discount needs (at least 1).
fn stack_depth(euler: &[EulerState], discount: Option<&Program>) -> usize {
    euler
        .iter()
        .flat_map(|e| std::iter::once(&e.drift).chain(e.diffusion.iter().map(|(_, p)| p)))
        .chain(discount)
        .map(Program::max_depth)
        .max()
        .unwrap_or(0)
        .max(1)
}
