//! Exact maximum-likelihood estimation of a model's own parameters from a discretely
//! observed time series.
//!
//! The likelihood is the product of exact transition densities, irregular steps allowed:
//! normal for arithmetic Brownian motion and Ornstein–Uhlenbeck, lognormal for geometric
//! Brownian motion, noncentral chi-square for the square-root family, and multivariate
//! normal through the matrix exponential and Van Loan's integral for a fully observed
//! linear system. Other families have no exact likelihood and are refused; nothing falls
//! back to a discretised one.
//!
//! The search starts from moment estimates of the coefficients (closed form where the
//! maximum itself is closed form), respects the declared bounds, and ends with Newton
//! steps; standard errors come from the observed information (the inverse Hessian of the
//! negative log-likelihood at the optimum).
//!
//! Every number in and out is in clock units; the faces convert to declared units.
//!
//! ```
//! let text = "model walk\nclock year\nparam mu = 0.1 [1/year]\n\
//!             param vol = 0.2 [1/sqrt(year)] > 0\nshock W\nfactor x = 0\n\
//!             dx = mu dt + vol dW\n";
//! let analysis = sdeck_semantics::analyze(text, "walk");
//! let times: Vec<f64> = (0..6).map(|i| i as f64 * 0.5).collect();
//! let values = vec![[0.0, 0.3, 0.1, 0.4, 0.2, 0.6].map(Some).to_vec()];
//! let series = sdeck_fit::Series { times, values };
//! let problem = sdeck_fit::Problem {
//!     model: &analysis.model,
//!     factors: &[0],
//!     fixed: &[],
//!     series: &series,
//! };
//! let fit = sdeck_fit::fit(&problem).expect("a Brownian motion has an exact likelihood");
//! // The closed-form MLE of the drift is the total change over the total time.
//! assert!((fit.estimates[0].estimate - 0.6 / 2.5).abs() < 1e-9);
//! ```

pub mod bessel;
mod law;
mod optimise;
mod varying;
pub mod write;

use nalgebra::{DMatrix, DVector};
use optimise::Transform;
use sdeck_calculus::coefficients::{
    linear_system_form, one_state_form, LinearSystemForm, OneStateForm,
};
use sdeck_calculus::linear_system::matrix_exponential;
use sdeck_calculus::one_state::phi;
use sdeck_calculus::Family;
use sdeck_semantics::Model;
use statrs::distribution::{ContinuousCDF, Normal};

/// Observations of the fitted factors.
#[derive(Clone, Debug, PartialEq)]
pub struct Series {
    /// Observation times in clock units, strictly increasing.
    pub times: Vec<f64>,
    /// `values[j][i]`: factor `factors[j]` of the [`Problem`] at `times[i]`, in clock units;
    /// `None` where it was not observed.
    pub values: Vec<Vec<Option<f64>>>,
}

/// What to fit.
#[derive(Clone, Copy, Debug)]
pub struct Problem<'a> {
    pub model: &'a Model,
    /// The observed factors (indices into `model.factors`), in the order of `series.values`.
    pub factors: &'a [usize],
    /// Parameters held at their file values (indices into `model.params`).
    pub fixed: &'a [usize],
    pub series: &'a Series,
}

/// One estimated parameter, clock units.
#[derive(Clone, Debug, PartialEq)]
pub struct Estimate {
    /// Index into `model.params`.
    pub param: usize,
    pub estimate: f64,
    /// Standard error from the observed information; NaN when the estimate sits at a
    /// declared bound.
    pub se: f64,
    /// The likelihood is highest at a declared bound: without it the estimate would lie
    /// beyond. No standard error is given (the normal approximation does not hold there).
    pub at_bound: bool,
}

impl Estimate {
    /// The two-sided Wald interval of confidence `level` (0.95 for 95%).
    pub fn interval(&self, level: f64) -> (f64, f64) {
        let z = normal_quantile(0.5 + level / 2.0);
        (self.estimate - z * self.se, self.estimate + z * self.se)
    }
}

/// The result of a fit.
#[derive(Clone, Debug, PartialEq)]
pub struct Fit {
    /// Declaration order.
    pub estimates: Vec<Estimate>,
    /// Correlation of the estimates, same order.
    pub correlation: Vec<Vec<f64>>,
    pub loglik: f64,
    /// 2k − 2 ln L.
    pub aic: f64,
    /// Observation times that entered the likelihood (the first of each run conditions).
    pub used: usize,
    /// Per fitted factor: the family whose transition law was used.
    pub families: Vec<Family>,
}

/// Why a fit could not be made.
#[derive(Clone, Debug, PartialEq)]
pub enum FitError {
    /// The factor's family has no exact likelihood here.
    NoExactLikelihood { factor: String, reason: String },
    /// An observed value outside the family's domain. `column` indexes the problem's
    /// factors, `observation` the series' times.
    OutsideDomain {
        column: usize,
        observation: usize,
        value: f64,
        domain: &'static str,
        family: Family,
    },
    /// Fewer usable observations than estimated parameters + 2.
    TooFewObservations {
        factor: String,
        have: usize,
        need: usize,
    },
    /// No parameter appears in the fitted equations, or all are fixed.
    NothingToEstimate,
    /// The observed information is not positive definite: the named parameters are not
    /// separately determined by the data.
    NotIdentifiable { params: Vec<String> },
    /// The likelihood is not finite at any parameter value tried.
    NoFiniteLikelihood,
}

impl std::fmt::Display for FitError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            FitError::NoExactLikelihood { factor, reason } => write!(
                f,
                "factor {factor} has no exact likelihood: {reason}; sdeck fits only \
                 arithmetic and geometric Brownian motion, Ornstein–Uhlenbeck (with \
                 coefficients of t where the noise is free of the factor), square-root \
                 factors with constant coefficients and fully observed linear systems"
            ),
            FitError::OutsideDomain {
                value,
                domain,
                family,
                ..
            } => write!(
                f,
                "the value {value} is not {domain}, as every value of a {} factor must be",
                family.as_str()
            ),
            FitError::TooFewObservations { factor, have, need } => write!(
                f,
                "factor {factor} has {have} usable observations; estimating its parameters \
                 needs at least {need} (parameters + 2)"
            ),
            FitError::NothingToEstimate => write!(
                f,
                "no parameter is left to estimate: none appears in the fitted equations, or \
                 all are fixed"
            ),
            FitError::NotIdentifiable { params } => write!(
                f,
                "the data do not determine {} separately (the observed information is \
                 singular); fix all but one of them with --fix",
                params.join(", ")
            ),
            FitError::NoFiniteLikelihood => write!(
                f,
                "the likelihood is not finite at the file's values nor at the moment \
                 estimates; check that the data are the factor's values in its declared unit"
            ),
        }
    }
}

impl std::error::Error for FitError {}

fn normal_quantile(p: f64) -> f64 {
    Normal::new(0.0, 1.0)
        .map(|n| n.inverse_cdf(p))
        .unwrap_or(f64::NAN)
}

/// Parameters that appear in the equations of the given factors, in declaration order. A
/// parameter written as an expression of others (`param stress = theta + 150bp`) is not
/// estimated itself: the free parameters of its expression stand in its place, and it
/// follows them.
pub fn parameters_in(model: &Model, factors: &[usize]) -> Vec<usize> {
    let mut out: Vec<usize> = written_in(model, factors)
        .into_iter()
        .flat_map(|p| model.free_params_of(p))
        .collect();
    out.sort_unstable();
    out.dedup();
    out
}

/// Parameters written in the equations of the given factors, derived ones included.
pub fn written_in(model: &Model, factors: &[usize]) -> Vec<usize> {
    let mut out = Vec::new();
    for &f in factors {
        if let Some(eq) = model.factors.get(f).and_then(|s| s.equation.as_ref()) {
            eq.drift.params(&mut out);
            for term in &eq.diffusion {
                term.coefficient.params(&mut out);
            }
        }
    }
    out.sort_unstable();
    out.dedup();
    out
}

/// One factor fitted on its own.
struct Single {
    column: usize,
    family: Family,
    form: OneStateForm,
    /// `(time, value, observation index)` of the observed values.
    points: Vec<(f64, f64, usize)>,
    /// Consecutive pairs of `points`.
    steps: Vec<law::Transition>,
}

impl Single {
    /// Σ ln p over the observed transitions at model parameters `params`.
    fn ln_likelihood(&self, model: &Model, params: &[f64]) -> f64 {
        if self.form.time_dependent {
            let breaks = sdeck_calculus::breaks::TimeBreaks::of_model(model, params);
            varying::ln_likelihood(&self.form, params, &breaks, &self.points)
        } else {
            law::ln_likelihood(self.family, &self.form.at(params, 0.0), &self.steps)
        }
    }
}

enum Plan {
    Singles(Vec<Single>),
    System {
        form: LinearSystemForm,
        /// Per model factor, its column.
        columns: Vec<usize>,
        /// Observation indices where every factor is observed.
        rows: Vec<usize>,
    },
}

fn factor_name(model: &Model, i: usize) -> String {
    model
        .factors
        .get(i)
        .map(|s| s.name.clone())
        .unwrap_or_default()
}

fn plan(problem: &Problem) -> Result<Plan, FitError> {
    let model = problem.model;
    let series = problem.series;
    let mut singles = Vec::new();
    let mut single_reason = None;
    for (column, &factor) in problem.factors.iter().enumerate() {
        let name = factor_name(model, factor);
        match one_state_form(model, factor) {
            Ok(form) if form.time_dependent && !form.additive_noise() => {
                single_reason = Some((
                    name,
                    "its coefficients depend on t and its noise on its own value; with \
                     coefficients of t only Gaussian factors (noise free of the factor) \
                     have an exact likelihood here"
                        .to_string(),
                ));
            }
            Ok(form) => match fitted_family(&form) {
                Family::Deterministic => {
                    single_reason = Some((
                        name,
                        "no shock drives it, so its path is fixed by its start and its \
                         parameters: a transition with variance 0 has no likelihood to \
                         maximise (add a shock, or fix its parameters with --fix)"
                            .to_string(),
                    ));
                }
                family
                    if form.time_dependent
                        || matches!(
                            family,
                            Family::ArithmeticBrownian
                                | Family::OrnsteinUhlenbeck
                                | Family::GeometricBrownian
                                | Family::SquareRoot
                        ) =>
                {
                    let points = series
                        .values
                        .get(column)
                        .map(|col| {
                            col.iter()
                                .enumerate()
                                .filter_map(|(i, v)| Some((*series.times.get(i)?, (*v)?, i)))
                                .collect()
                        })
                        .unwrap_or_default();
                    let points: Vec<(f64, f64, usize)> = points;
                    let steps = points
                        .windows(2)
                        .map(|w| law::Transition::new(w[1].0 - w[0].0, w[0].1, w[1].1))
                        .collect();
                    singles.push(Single {
                        column,
                        family,
                        form,
                        points,
                        steps,
                    })
                }
                family => {
                    single_reason = Some((
                        name,
                        format!(
                            "it is of the {} family ({}), whose transition law is not known \
                             in closed form",
                            family.as_str(),
                            form.reason
                        ),
                    ))
                }
            },
            Err(reason) => single_reason = Some((name, reason)),
        }
    }
    // Independent factors: no shock shared or correlated between two fitted equations.
    let shocks = |factor: usize| -> Vec<usize> {
        model
            .factors
            .get(factor)
            .and_then(|s| s.equation.as_ref())
            .map(|eq| eq.diffusion.iter().map(|d| d.noise).collect())
            .unwrap_or_default()
    };
    let corr = model.correlation_matrix();
    let linked = |a: usize, b: usize| {
        shocks(a).iter().any(|&k| {
            shocks(b).iter().any(|&l| {
                k == l
                    || corr
                        .get(k)
                        .and_then(|r| r.get(l))
                        .is_some_and(|c| *c != 0.0)
            })
        })
    };
    let mut independent = true;
    for (i, &a) in problem.factors.iter().enumerate() {
        for &b in problem.factors.iter().skip(i + 1) {
            if linked(a, b) {
                independent = false;
            }
        }
    }
    if single_reason.is_none() && independent {
        return Ok(Plan::Singles(singles));
    }
    // Otherwise: the whole model as a fully observed linear system.
    let n = model.factors.len();
    let mut columns = vec![usize::MAX; n];
    for (column, &factor) in problem.factors.iter().enumerate() {
        if let Some(slot) = columns.get_mut(factor) {
            *slot = column;
        }
    }
    let (blame, why) = single_reason.unwrap_or_else(|| {
        (
            problem
                .factors
                .iter()
                .map(|&f| factor_name(model, f))
                .collect::<Vec<_>>()
                .join(", "),
            "their shocks are shared or correlated, so they are fitted jointly".to_string(),
        )
    });
    if let Some(missing) = columns.iter().position(|c| *c == usize::MAX) {
        return Err(FitError::NoExactLikelihood {
            factor: blame,
            reason: format!(
                "{why}; a joint (linear-system) likelihood needs every factor observed, and \
                 the data have no column for {}",
                factor_name(model, missing)
            ),
        });
    }
    let form = linear_system_form(model).map_err(|reason| FitError::NoExactLikelihood {
        factor: blame.clone(),
        reason: format!("{why}; as a system: {reason}"),
    })?;
    if form.time_dependent {
        return Err(FitError::NoExactLikelihood {
            factor: blame,
            reason: "the system's coefficients depend on t, and only constant coefficients \
                     are fitted"
                .to_string(),
        });
    }
    let rows = (0..series.times.len())
        .filter(|&i| {
            columns.iter().all(|&c| {
                series
                    .values
                    .get(c)
                    .and_then(|col| col.get(i))
                    .is_some_and(|v| v.is_some())
            })
        })
        .collect();
    Ok(Plan::System {
        form,
        columns,
        rows,
    })
}

impl Plan {
    fn log_likelihood(&self, problem: &Problem, params: &[f64]) -> f64 {
        match self {
            Plan::Singles(singles) => singles
                .iter()
                .map(|s| s.ln_likelihood(problem.model, params))
                .sum(),
            Plan::System {
                form,
                columns,
                rows,
            } => system_log_likelihood(problem, form, columns, rows, params),
        }
    }

    fn used(&self) -> usize {
        match self {
            Plan::Singles(singles) => {
                let mut seen: Vec<usize> = singles
                    .iter()
                    .flat_map(|s| s.points.iter().map(|p| p.2))
                    .collect();
                seen.sort_unstable();
                seen.dedup();
                seen.len()
            }
            Plan::System { rows, .. } => rows.len(),
        }
    }
}

/// Per distinct step Δ: Δ, e^{AΔ}, the mean from zero and the Cholesky factor of the
/// covariance.
type StepLaw = (
    f64,
    DMatrix<f64>,
    DVector<f64>,
    nalgebra::Cholesky<f64, nalgebra::Dyn>,
);

/// Σ ln N(y; e^{AΔ} x + m(Δ), P(Δ)) over consecutive complete rows, with m and P the mean
/// from zero and the covariance of the system after Δ (Van Loan 1978 via
/// `AffineGaussian`), cached per distinct step.
fn system_log_likelihood(
    problem: &Problem,
    form: &LinearSystemForm,
    columns: &[usize],
    rows: &[usize],
    params: &[f64],
) -> f64 {
    let Some(system) = form.at(params, 0.0) else {
        return f64::NAN;
    };
    let series = problem.series;
    let n = columns.len();
    let vector = |i: usize| {
        DVector::from_fn(n, |r, _| {
            series
                .values
                .get(columns[r])
                .and_then(|col| col.get(i).copied().flatten())
                .unwrap_or(f64::NAN)
        })
    };
    let mut cache: Vec<StepLaw> = Vec::new();
    let mut total = 0.0;
    for pair in rows.windows(2) {
        let (Some(&t0), Some(&t1)) = (series.times.get(pair[0]), series.times.get(pair[1])) else {
            return f64::NAN;
        };
        let dt = t1 - t0;
        let position = cache
            .iter()
            .position(|(d, ..)| (d - dt).abs() <= 1e-12 * dt.abs());
        let index = match position {
            Some(i) => i,
            None => {
                let propagator = matrix_exponential(&(&system.a * dt));
                let offset = system.mean_at(&DVector::zeros(n), dt);
                let Some(cholesky) = sdeck_calculus::symmetric::cholesky(&system.covariance_at(dt))
                else {
                    return f64::NAN;
                };
                cache.push((dt, propagator, offset, cholesky));
                cache.len() - 1
            }
        };
        let (_, propagator, offset, cholesky) = &cache[index];
        let residual = vector(pair[1]) - (propagator * vector(pair[0]) + offset);
        let solved = cholesky.l().solve_lower_triangular(&residual);
        let Some(z) = solved else {
            return f64::NAN;
        };
        let log_det: f64 = cholesky.l().diagonal().iter().map(|d| d.ln()).sum::<f64>() * 2.0;
        total += -0.5 * (n as f64 * 1.837_877_066_409_345_5 + log_det + z.norm_squared());
    }
    total
}

/// Moment estimates of the coefficients of one factor: the closed-form MLE for the
/// Brownian families; for Ornstein–Uhlenbeck and square-root, the AR(1) regression of
/// each value on the previous one at the mean step. `(coefficient index, value)` with
/// indices 0 = a, 1 = b, 2 = α, 3 = β, 4 = γ.
fn moment_targets(single: &Single) -> Vec<(usize, f64)> {
    let p = &single.points;
    if p.len() < 3 || single.form.time_dependent {
        return Vec::new();
    }
    let steps: Vec<(f64, f64, f64)> = p
        .windows(2)
        .map(|w| (w[1].0 - w[0].0, w[0].1, w[1].1))
        .collect();
    let total_time: f64 = steps.iter().map(|s| s.0).sum();
    let count = steps.len() as f64;
    // Brownian: drift Σ Δx / Σ Δt, variance rate mean((Δx − m Δt)² / Δt).
    let brownian = |f: &dyn Fn(f64) -> f64| {
        let m = steps.iter().map(|s| f(s.2) - f(s.1)).sum::<f64>() / total_time;
        let v = steps
            .iter()
            .map(|s| (f(s.2) - f(s.1) - m * s.0).powi(2) / s.0)
            .sum::<f64>()
            / count;
        (m, v)
    };
    match single.family {
        Family::ArithmeticBrownian => {
            let (m, v) = brownian(&|x| x);
            vec![(0, m), (2, v)]
        }
        Family::GeometricBrownian => {
            let (m, v) = brownian(&|x: f64| x.ln());
            vec![(1, m + v / 2.0), (4, v)]
        }
        Family::OrnsteinUhlenbeck | Family::SquareRoot => {
            let dt = total_time / count;
            let mx = steps.iter().map(|s| s.1).sum::<f64>() / count;
            let my = steps.iter().map(|s| s.2).sum::<f64>() / count;
            let sxy: f64 = steps.iter().map(|s| (s.1 - mx) * (s.2 - my)).sum();
            let sxx: f64 = steps.iter().map(|s| (s.1 - mx).powi(2)).sum();
            let slope = sxy / sxx;
            if !(slope > 0.0 && slope < 1.0) {
                return Vec::new();
            }
            let intercept = my - slope * mx;
            let b = slope.ln() / dt;
            let level = intercept / (1.0 - slope);
            let a = -b * level;
            let squares: f64 = steps
                .iter()
                .map(|s| (s.2 - intercept - slope * s.1).powi(2))
                .sum();
            if single.family == Family::OrnsteinUhlenbeck {
                vec![(0, a), (1, b), (2, squares / count / phi(2.0 * b, dt))]
            } else {
                // Var(X_{t+Δ} | x) = β (x e^{bΔ} φ(b,Δ) + a φ(b,Δ)²/2) (Cox, Ingersoll &
                // Ross 1985, eq. 19).
                let f = phi(b, dt);
                let scale: f64 = steps
                    .iter()
                    .map(|s| s.1 * (b * dt).exp() * f + a * f * f / 2.0)
                    .sum();
                vec![(0, a), (1, b), (3, squares / scale)]
            }
        }
        _ => Vec::new(),
    }
}

fn coefficient(v: &sdeck_calculus::coefficients::OneStateValues, index: usize) -> f64 {
    match index {
        0 => v.a,
        1 => v.b,
        2 => v.alpha,
        3 => v.beta,
        _ => v.gamma,
    }
}

/// Estimates the parameters of `problem` by exact maximum likelihood.
pub fn fit(problem: &Problem) -> Result<Fit, FitError> {
    let model = problem.model;
    let plan = plan(problem)?;
    let estimated: Vec<usize> = parameters_in(model, problem.factors)
        .into_iter()
        .filter(|p| !problem.fixed.contains(p))
        .collect();
    if estimated.is_empty() {
        return Err(FitError::NothingToEstimate);
    }
    let k = estimated.len();
    // Domain and count checks.
    match &plan {
        Plan::Singles(singles) => {
            for s in singles {
                if let Some(domain) = law::domain(s.family) {
                    if let Some(bad) = s.points.iter().find(|p| p.1.is_nan() || p.1 <= 0.0) {
                        return Err(FitError::OutsideDomain {
                            column: s.column,
                            observation: bad.2,
                            value: bad.1,
                            domain,
                            family: s.family,
                        });
                    }
                }
                let own = parameters_in(model, &[problem.factors[s.column]])
                    .into_iter()
                    .filter(|p| estimated.contains(p))
                    .count();
                if s.points.len() < own + 2 {
                    return Err(FitError::TooFewObservations {
                        factor: factor_name(model, problem.factors[s.column]),
                        have: s.points.len(),
                        need: own + 2,
                    });
                }
            }
        }
        Plan::System { rows, .. } => {
            if rows.len() < k + 2 {
                return Err(FitError::TooFewObservations {
                    factor: problem
                        .factors
                        .iter()
                        .map(|&f| factor_name(model, f))
                        .collect::<Vec<_>>()
                        .join(", "),
                    have: rows.len(),
                    need: k + 2,
                });
            }
        }
    }
    let file_values = model.param_values();
    let full = |theta: &[f64]| {
        let mut all = file_values.clone();
        for (slot, value) in estimated.iter().zip(theta) {
            all[*slot] = *value;
        }
        model.derive_params(&mut all);
        all
    };
    // The last few costs are remembered: the search asks again for the value at its
    // start and at the optimum, each a pass over every observation.
    let remembered: std::cell::RefCell<Vec<(Vec<f64>, f64)>> = Default::default();
    let cost = |theta: &[f64]| {
        if let Some((_, c)) = remembered.borrow().iter().find(|(t, _)| t == theta) {
            return *c;
        }
        let l = plan.log_likelihood(problem, &full(theta));
        let c = if l.is_nan() { f64::INFINITY } else { -l };
        let mut memory = remembered.borrow_mut();
        if memory.len() == 4 {
            memory.remove(0);
        }
        memory.push((theta.to_vec(), c));
        c
    };
    let file_start: Vec<f64> = estimated.iter().map(|&p| file_values[p]).collect();
    let transforms: Vec<Transform> = estimated
        .iter()
        .zip(&file_start)
        .map(|(&p, start)| Transform::new(model.params[p].bound.as_ref(), *start))
        .collect();
    // Start: the parameters whose coefficients best match the moment estimates.
    let mut starts = vec![file_start.clone()];
    if let Plan::Singles(singles) = &plan {
        let targets: Vec<(usize, Vec<(usize, f64)>)> = singles
            .iter()
            .enumerate()
            .map(|(i, s)| (i, moment_targets(s)))
            .filter(|(_, t)| !t.is_empty() && t.iter().all(|(_, v)| v.is_finite()))
            .collect();
        if !targets.is_empty() {
            let mismatch = |theta: &[f64]| {
                let all = full(theta);
                targets
                    .iter()
                    .map(|(i, t)| {
                        let v = singles[*i].form.at(&all, 0.0);
                        t.iter()
                            .map(|(c, target)| {
                                ((coefficient(&v, *c) - target) / target.abs().max(1e-300)).powi(2)
                            })
                            .sum::<f64>()
                    })
                    .sum::<f64>()
            };
            let matched = optimise::simplex(&mismatch, &transforms, &file_start, 4000);
            starts.push(matched);
        }
    }
    let best_start = starts
        .into_iter()
        .map(|s| (cost(&s), s))
        .filter(|(c, _)| c.is_finite())
        .min_by(|a, b| a.0.total_cmp(&b.0))
        .map(|(_, s)| s)
        .ok_or(FitError::NoFiniteLikelihood)?;
    // Exact derivatives where the likelihood has them; differences of the cost elsewhere.
    let exact = |theta: &[f64]| match &plan {
        Plan::Singles(singles) => exact_derivatives(singles, &full, theta),
        Plan::System { .. } => None,
    };
    // The last derivatives are remembered: the search ends where it computed them.
    let last: std::cell::RefCell<Option<(Vec<f64>, Gradient, Hessian)>> = Default::default();
    let derivatives = |theta: &[f64]| {
        if let Some((t, g, h)) = last.borrow().as_ref() {
            if t == theta {
                return (g.clone(), h.clone());
            }
        }
        let (g, h) = exact(theta)
            .unwrap_or_else(|| optimise::finite_differences(&cost, theta, optimise::HESSIAN_STEP));
        *last.borrow_mut() = Some((theta.to_vec(), g.clone(), h.clone()));
        (g, h)
    };
    // Newton steps straight from the start converge in a few steps when it is close (the
    // moment estimates usually are); otherwise the simplex search first.
    let theta = match optimise::polish(&cost, &derivatives, &transforms, best_start.clone()) {
        (theta, true) => theta,
        (_, false) => {
            let found = optimise::simplex(&cost, &transforms, &best_start, 20_000);
            let found = optimise::simplex(&cost, &transforms, &found, 20_000);
            optimise::polish(&cost, &derivatives, &transforms, found).0
        }
    };
    let loglik = -cost(&theta);
    if !loglik.is_finite() {
        return Err(FitError::NoFiniteLikelihood);
    }
    let (gradient, hessian) = derivatives(&theta);
    // At a bound when the one-parameter Newton step would cross it.
    let at_bound: Vec<bool> = (0..k)
        .map(|j| {
            let newton = theta[j] - gradient[j] / hessian[(j, j)];
            !matches!(transforms[j], Transform::Free { .. })
                && (hessian[(j, j)].is_nan()
                    || hessian[(j, j)] <= 0.0
                    || !transforms[j].admits(newton))
                && gradient[j].abs() > 1e-6 * hessian[(j, j)].abs().sqrt()
        })
        .collect();
    let inside: Vec<usize> = (0..k).filter(|&j| !at_bound[j]).collect();
    let names = || {
        inside
            .iter()
            .map(|&j| model.params[estimated[j]].name.clone())
            .collect::<Vec<_>>()
    };
    let sub = DMatrix::from_fn(inside.len(), inside.len(), |r, c| {
        hessian[(inside[r], inside[c])]
    });
    let sub_covariance = if inside.is_empty() {
        DMatrix::zeros(0, 0)
    } else {
        sdeck_calculus::symmetric::cholesky(&sub)
            .map(|c| c.inverse())
            .filter(|c| c.iter().all(|v| v.is_finite()))
            .ok_or_else(|| FitError::NotIdentifiable { params: names() })?
    };
    let mut covariance = DMatrix::from_element(k, k, f64::NAN);
    for (r, &i) in inside.iter().enumerate() {
        for (c, &j) in inside.iter().enumerate() {
            covariance[(i, j)] = sub_covariance[(r, c)];
        }
    }
    let se: Vec<f64> = (0..k).map(|i| covariance[(i, i)].sqrt()).collect();
    let correlation = (0..k)
        .map(|i| {
            (0..k)
                .map(|j| covariance[(i, j)] / (se[i] * se[j]))
                .collect()
        })
        .collect();
    let families = match &plan {
        Plan::Singles(singles) => singles.iter().map(|s| s.family).collect(),
        Plan::System { .. } => vec![Family::LinearSystem; problem.factors.len()],
    };
    Ok(Fit {
        estimates: estimated
            .iter()
            .zip(&theta)
            .zip(&se)
            .zip(&at_bound)
            .map(|(((&param, &estimate), &se), &at_bound)| Estimate {
                param,
                estimate,
                se,
                at_bound,
            })
            .collect(),
        correlation,
        loglik,
        aic: 2.0 * k as f64 - 2.0 * loglik,
        used: plan.used(),
        families,
    })
}

type Gradient = DVector<f64>;
type Hessian = DMatrix<f64>;

/// Relative step of the differences of the coefficients in the parameters.
const COEFFICIENT_STEP: f64 = 1e-4;

/// The exact gradient and Hessian of the negative log-likelihood in the estimated
/// parameters θ, when every fitted factor is square-root with constant coefficients: the
/// likelihood's own derivatives in the coefficients (a, b, β)
/// (`law::square_root_curvature`), carried to θ by the chain rule. The coefficients are
/// cheap functions of θ (products and squares of parameters) and their derivatives are
/// central differences, which are exact for the quadratics they usually are.
fn exact_derivatives(
    singles: &[Single],
    full: &dyn Fn(&[f64]) -> Vec<f64>,
    theta: &[f64],
) -> Option<(DVector<f64>, DMatrix<f64>)> {
    if singles
        .iter()
        .any(|s| s.family != Family::SquareRoot || s.form.time_dependent)
    {
        return None;
    }
    let k = theta.len();
    let h: Vec<f64> = theta
        .iter()
        .map(|x| COEFFICIENT_STEP * x.abs().max(1e-3))
        .collect();
    let mut gradient = DVector::zeros(k);
    let mut hessian = DMatrix::zeros(k, k);
    for single in singles {
        let coefficients = |changes: &[(usize, f64)]| {
            let mut x = theta.to_vec();
            for (j, d) in changes {
                x[*j] += d;
            }
            let v = single.form.at(&full(&x), 0.0);
            DVector::from_vec(vec![v.a, v.b, v.beta])
        };
        let centre = coefficients(&[]);
        let Some(&[a, b, beta]) = centre.as_slice().get(..3) else {
            return None;
        };
        let values = sdeck_calculus::coefficients::OneStateValues {
            a,
            b,
            alpha: 0.0,
            beta,
            gamma: 0.0,
        };
        let law = law::square_root_curvature(&values, &single.steps);
        if !law.value.is_finite() {
            return None;
        }
        let g = DVector::from_row_slice(&law.gradient);
        let hc = DMatrix::from_fn(3, 3, |r, c| law.hessian[r][c]);
        // Jacobian of the coefficients (3 × k) and their second derivatives.
        let mut jacobian = DMatrix::zeros(3, k);
        let mut second = DMatrix::zeros(k, k);
        for i in 0..k {
            let plus = coefficients(&[(i, h[i])]);
            let minus = coefficients(&[(i, -h[i])]);
            jacobian.set_column(i, &((&plus - &minus) / (2.0 * h[i])));
            second[(i, i)] = g.dot(&((&plus - 2.0 * &centre + &minus) / (h[i] * h[i])));
            for j in 0..i {
                let mixed = (coefficients(&[(i, h[i]), (j, h[j])])
                    - coefficients(&[(i, h[i]), (j, -h[j])])
                    - coefficients(&[(i, -h[i]), (j, h[j])])
                    + coefficients(&[(i, -h[i]), (j, -h[j])]))
                    / (4.0 * h[i] * h[j]);
                second[(i, j)] = g.dot(&mixed);
                second[(j, i)] = second[(i, j)];
            }
        }
        // The cost is the negative log-likelihood.
        gradient -= jacobian.transpose() * &g;
        hessian -= jacobian.transpose() * hc * &jacobian + second;
    }
    Some((gradient, hessian))
}

/// The family whose transition law the likelihood uses: a linear factor with a positive
/// slope and constant, factor-free noise has the Gaussian transition of the
/// Ornstein–Uhlenbeck family (the same formulas hold for either sign of the slope).
fn fitted_family(form: &OneStateForm) -> Family {
    match form.family {
        Family::Linear if form.gaussian_with_constant_coefficients() => Family::OrnsteinUhlenbeck,
        family => family,
    }
}
