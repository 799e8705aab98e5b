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
//!     factors: &[sdeck_semantics::FactorId::new(0)],
//!     fixed: &[],
//!     series: &series,
//! };
//! let fit = sdeck_fit::fit(&problem).expect("a Brownian motion has an exact likelihood");
//! // The closed-form MLE of the drift is the total change over the total time.
//! assert!((fit.estimates[0].estimate - 0.6 / 2.5).abs() < 1e-9);
//! ```

pub mod bessel;
mod derivatives;
mod law;
mod optimise;
mod plan;
mod start;
mod varying;
pub mod write;

use derivatives::{exact_derivatives, Gradient, Hessian};
use nalgebra::DMatrix;
use optimise::Transform;
use plan::{factor_name, Plan};
use sdeck_calculus::Family;
use sdeck_semantics::{FactorId, Model, ParamId};
use start::{coefficient, moment_targets};
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
    /// The observed factors, in the order of `series.values`.
    pub factors: &'a [FactorId],
    /// Parameters held at their file values.
    pub fixed: &'a [ParamId],
    pub series: &'a Series,
}

/// One estimated parameter, clock units.
#[derive(Clone, Debug, PartialEq)]
pub struct Estimate {
    /// The parameter estimated.
    pub param: ParamId,
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
pub fn parameters_in(model: &Model, factors: &[FactorId]) -> Vec<ParamId> {
    let mut out: Vec<ParamId> = written_in(model, factors)
        .into_iter()
        .flat_map(|p| model.free_params_of(p))
        .collect();
    out.sort_unstable();
    out.dedup();
    out
}

/// Parameters written in the equations of the given factors, derived ones included.
pub fn written_in(model: &Model, factors: &[FactorId]) -> Vec<ParamId> {
    let mut ids = Vec::new();
    for &f in factors {
        if let Some(eq) = model.factors.by_id(f).and_then(|s| s.equation.as_ref()) {
            eq.drift.params(&mut ids);
            for term in &eq.diffusion {
                term.coefficient.params(&mut ids);
            }
        }
    }
    let mut out: Vec<ParamId> = ids;
    out.sort_unstable();
    out.dedup();
    out
}

/// Estimates the parameters of `problem` by exact maximum likelihood: the checks of the
/// data, the start, the search, and the standard errors.
pub fn fit(problem: &Problem) -> Result<Fit, FitError> {
    let model = problem.model;
    let plan = plan::plan(problem)?;
    let estimated: Vec<ParamId> = parameters_in(model, problem.factors)
        .into_iter()
        .filter(|p| !problem.fixed.contains(p))
        .collect();
    if estimated.is_empty() {
        return Err(FitError::NothingToEstimate);
    }
    let k = estimated.len();
    enough_data(problem, &plan, &estimated)?;
    let file_values = model.param_values();
    let full = |theta: &[f64]| {
        let mut all = file_values.clone();
        for (slot, value) in estimated.iter().zip(theta) {
            all[slot.index()] = *value;
        }
        model.derive_params(&mut all);
        all
    };
    // The last few costs are remembered: the search asks again for the value at its
    // start and at the optimum, each a pass over every observation.
    let costs = Remembered::new(4, |theta: &[f64]| {
        let l = plan.log_likelihood(problem, &full(theta));
        if l.is_nan() {
            f64::INFINITY
        } else {
            -l
        }
    });
    let cost = |theta: &[f64]| costs.call(theta);
    let file_start: Vec<f64> = estimated.iter().map(|&p| file_values[p.index()]).collect();
    let transforms: Vec<Transform> = estimated
        .iter()
        .zip(&file_start)
        .map(|(&p, start)| Transform::new(model.params[p].bound.as_deref(), *start))
        .collect();
    // Start: the file's values, or the parameters whose coefficients best match the
    // moment estimates, whichever the likelihood prefers.
    let mut starts = vec![file_start.clone()];
    if let Plan::Singles(singles) = &plan {
        starts.extend(moment_start(singles, &full, &transforms, &file_start));
    }
    let best_start = starts
        .into_iter()
        .map(|s| (cost(&s), s))
        .filter(|(c, _)| c.is_finite())
        .min_by(|a, b| a.0.total_cmp(&b.0))
        .map(|(_, s)| s)
        .ok_or(FitError::NoFiniteLikelihood)?;
    // Exact derivatives where the likelihood has them; differences of the cost elsewhere.
    // The last ones are remembered: the search ends where it computed them.
    let last = Remembered::new(1, |theta: &[f64]| {
        let exact = match &plan {
            Plan::Singles(singles) => exact_derivatives(singles, &full, theta),
            Plan::System { .. } => None,
        };
        exact.unwrap_or_else(|| optimise::finite_differences(&cost, theta, optimise::HESSIAN_STEP))
    });
    let derivatives = |theta: &[f64]| last.call(theta);
    let theta = search(&cost, &derivatives, &transforms, best_start);
    let loglik = -cost(&theta);
    if !loglik.is_finite() {
        return Err(FitError::NoFiniteLikelihood);
    }
    let (gradient, hessian) = derivatives(&theta);
    let errors = StandardErrors::at(model, &estimated, &theta, &gradient, &hessian, &transforms)?;
    Ok(Fit {
        estimates: errors.estimates(&estimated, &theta),
        correlation: errors.correlation,
        loglik,
        aic: 2.0 * k as f64 - 2.0 * loglik,
        used: plan.used(),
        families: families(&plan, problem.factors.len()),
    })
}

/// Per fitted factor, the family whose transition law was used.
fn families(plan: &Plan, factors: usize) -> Vec<Family> {
    match plan {
        Plan::Singles(singles) => singles.iter().map(|s| s.family).collect(),
        Plan::System { .. } => vec![Family::LinearSystem; factors],
    }
}

/// Newton steps straight from the start converge in a few steps when it is close (the
/// moment estimates usually are); otherwise the simplex search first.
fn search(
    cost: &dyn Fn(&[f64]) -> f64,
    derivatives: &optimise::Derivatives,
    transforms: &[Transform],
    start: Vec<f64>,
) -> Vec<f64> {
    match optimise::polish(&cost, derivatives, transforms, start.clone()) {
        (theta, true) => theta,
        (_, false) => {
            let found = optimise::simplex(&cost, transforms, &start, 20_000);
            let found = optimise::simplex(&cost, transforms, &found, 20_000);
            optimise::polish(&cost, derivatives, transforms, found).0
        }
    }
}

/// A function of the parameters that remembers its last `keep` values.
struct Remembered<T, F> {
    f: F,
    keep: usize,
    memory: std::cell::RefCell<Vec<(Vec<f64>, T)>>,
}

impl<T: Clone, F: Fn(&[f64]) -> T> Remembered<T, F> {
    fn new(keep: usize, f: F) -> Self {
        Remembered {
            f,
            keep,
            memory: Default::default(),
        }
    }

    fn call(&self, theta: &[f64]) -> T {
        if let Some((_, value)) = self.memory.borrow().iter().find(|(t, _)| t == theta) {
            return value.clone();
        }
        let value = (self.f)(theta);
        let mut memory = self.memory.borrow_mut();
        if memory.len() == self.keep {
            memory.remove(0);
        }
        memory.push((theta.to_vec(), value.clone()));
        value
    }
}

/// Whether the data can be fitted: every observed value in its family's domain, and
/// at least two observations more than the parameters estimated.
fn enough_data(problem: &Problem, plan: &Plan, estimated: &[ParamId]) -> Result<(), FitError> {
    let model = problem.model;
    let k = estimated.len();
    match plan {
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
    Ok(())
}

/// The parameters whose coefficients best match the moment estimates of each factor
/// (a simplex search from the file's values); `None` when no factor has them.
fn moment_start(
    singles: &[plan::Single],
    full: &dyn Fn(&[f64]) -> Vec<f64>,
    transforms: &[Transform],
    file_start: &[f64],
) -> Option<Vec<f64>> {
    let targets: Vec<(usize, Vec<(usize, f64)>)> = singles
        .iter()
        .enumerate()
        .map(|(i, s)| (i, moment_targets(s)))
        .filter(|(_, t)| !t.is_empty() && t.iter().all(|(_, v)| v.is_finite()))
        .collect();
    if targets.is_empty() {
        return None;
    }
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
    Some(optimise::simplex(&mismatch, transforms, file_start, 4000))
}

/// The standard errors and correlations of the estimates from the observed information,
/// and which estimates sit at a declared bound (no standard error there).
struct StandardErrors {
    se: Vec<f64>,
    correlation: Vec<Vec<f64>>,
    at_bound: Vec<bool>,
}

impl StandardErrors {
    fn at(
        model: &Model,
        estimated: &[ParamId],
        theta: &[f64],
        gradient: &Gradient,
        hessian: &Hessian,
        transforms: &[Transform],
    ) -> Result<StandardErrors, FitError> {
        let k = estimated.len();
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
        // sqrt(c)² is not always c in floating point: the diagonal is set to exactly one
        // and the rest kept within [−1, 1], as a correlation is.
        let correlation = (0..k)
            .map(|i| {
                (0..k)
                    .map(|j| {
                        let r = covariance[(i, j)] / (se[i] * se[j]);
                        if !r.is_finite() {
                            r
                        } else if i == j {
                            1.0
                        } else {
                            r.clamp(-1.0, 1.0)
                        }
                    })
                    .collect()
            })
            .collect();
        Ok(StandardErrors {
            se,
            correlation,
            at_bound,
        })
    }

    /// The estimates `theta` of the parameters `estimated`, with their errors.
    fn estimates(&self, estimated: &[ParamId], theta: &[f64]) -> Vec<Estimate> {
        estimated
            .iter()
            .zip(theta)
            .zip(&self.se)
            .zip(&self.at_bound)
            .map(|(((&param, &estimate), &se), &at_bound)| Estimate {
                param,
                estimate,
                se,
                at_bound,
            })
            .collect()
    }
}
