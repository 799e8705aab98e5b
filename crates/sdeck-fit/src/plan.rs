//! What the likelihood is made of: each observed factor on its own with its family's
//! transition law, or the whole model as a fully observed linear system; and why a
//! factor has no exact likelihood.

use crate::{law, varying, FitError, Problem};
use nalgebra::{DMatrix, DVector};
use sdeck_calculus::coefficients::{
    linear_system_form, one_state_form, LinearSystemForm, OneStateForm,
};
use sdeck_calculus::linear_system::matrix_exponential;
use sdeck_calculus::Family;
use sdeck_semantics::{FactorId, Model};

/// One factor fitted on its own.
pub(crate) struct Single {
    pub(crate) column: usize,
    pub(crate) family: Family,
    pub(crate) form: OneStateForm,
    /// `(time, value, observation index)` of the observed values.
    pub(crate) points: Vec<(f64, f64, usize)>,
    /// Consecutive pairs of `points`.
    pub(crate) steps: Vec<law::Transition>,
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

pub(crate) enum Plan {
    Singles(Vec<Single>),
    System {
        form: LinearSystemForm,
        /// Per model factor, its column.
        columns: Vec<usize>,
        /// Observation indices where every factor is observed.
        rows: Vec<usize>,
    },
}

pub(crate) fn factor_name(model: &Model, factor: FactorId) -> String {
    model
        .factors
        .by_id(factor)
        .map(|s| s.name.clone())
        .unwrap_or_default()
}

/// What the likelihood is made of: each observed factor's own transition law when every
/// one has a law in closed form and no two are linked by their shocks; otherwise the
/// whole model as a fully observed linear system, or the reason there is no exact
/// likelihood.
pub(crate) fn plan(problem: &Problem) -> Result<Plan, FitError> {
    let model = problem.model;
    let mut singles = Vec::new();
    let mut single_reason = None;
    for (column, &factor) in problem.factors.iter().enumerate() {
        match single(problem, column, factor) {
            Ok(s) => singles.push(s),
            Err(reason) => single_reason = Some((factor_name(model, factor), reason)),
        }
    }
    if single_reason.is_none() && independent(model, problem.factors) {
        return Ok(Plan::Singles(singles));
    }
    system(problem, single_reason)
}

/// The transition law of the factor observed in `column`, or why it has none that is
/// known in closed form.
fn single(problem: &Problem, column: usize, factor: FactorId) -> Result<Single, String> {
    let series = problem.series;
    let form = one_state_form(problem.model, factor.index())?;
    if form.time_dependent && !form.additive_noise() {
        return Err(
            "its coefficients depend on t and its noise on its own value; with \
                    coefficients of t only Gaussian factors (noise free of the factor) \
                    have an exact likelihood here"
                .to_string(),
        );
    }
    match fitted_family(&form) {
        Family::Deterministic => Err("no shock drives it, so its path is fixed by its start \
                                      and its parameters: a transition with variance 0 has \
                                      no likelihood to maximise (add a shock, or fix its \
                                      parameters with --fix)"
            .to_string()),
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
            let points: Vec<(f64, f64, usize)> = series
                .values
                .get(column)
                .map(|col| {
                    col.iter()
                        .enumerate()
                        .filter_map(|(i, v)| Some((*series.times.get(i)?, (*v)?, i)))
                        .collect()
                })
                .unwrap_or_default();
            let steps = points
                .windows(2)
                .map(|w| law::Transition::new(w[1].0 - w[0].0, w[0].1, w[1].1))
                .collect();
            Ok(Single {
                column,
                family,
                form,
                points,
                steps,
            })
        }
        family => Err(format!(
            "it is of the {} family ({}), whose transition law is not known in closed form",
            family.as_str(),
            form.reason
        )),
    }
}

/// Whether no shock is shared or correlated between the equations of two of `factors`.
fn independent(model: &Model, factors: &[FactorId]) -> bool {
    let shocks = |factor: FactorId| -> Vec<usize> {
        model
            .factors
            .by_id(factor)
            .and_then(|s| s.equation.as_ref())
            .map(|eq| eq.diffusion.iter().map(|d| d.noise.index()).collect())
            .unwrap_or_default()
    };
    let corr = model.correlation_matrix();
    let linked = |a: FactorId, b: FactorId| {
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
    for (i, &a) in factors.iter().enumerate() {
        for &b in factors.iter().skip(i + 1) {
            if linked(a, b) {
                independent = false;
            }
        }
    }
    independent
}

/// The whole model as a fully observed linear system; `single_reason` is why a factor
/// has no law of its own (none when the factors are fitted jointly for their shocks).
fn system(problem: &Problem, single_reason: Option<(String, String)>) -> Result<Plan, FitError> {
    let (model, series) = (problem.model, problem.series);
    let n = model.factors.len();
    let mut columns = vec![usize::MAX; n];
    for (column, &factor) in problem.factors.iter().enumerate() {
        if let Some(slot) = columns.get_mut(factor.index()) {
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
                factor_name(model, FactorId::new(missing))
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
    pub(crate) fn log_likelihood(&self, problem: &Problem, params: &[f64]) -> f64 {
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

    pub(crate) fn used(&self) -> usize {
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

/// The family whose transition law the likelihood uses: a linear factor with a positive
/// slope and constant, factor-free noise has the Gaussian transition of the
/// Ornstein–Uhlenbeck family (the same formulas hold for either sign of the slope).
fn fitted_family(form: &OneStateForm) -> Family {
    match form.family {
        Family::Linear if form.gaussian_with_constant_coefficients() => Family::OrnsteinUhlenbeck,
        family => family,
    }
}
