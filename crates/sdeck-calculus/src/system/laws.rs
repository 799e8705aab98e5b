//! The law of each state in a derivation: a one-state family's closed forms, or the
//! system's family for a coupled state; the coupled blocks and the drift matrices.

use super::engines::{cached_linear_engine, polynomial_engine};
use super::{needs_system, MAX_SYSTEM_STATES};
use crate::linear_system::eigenvalues;
use crate::one_state;
use crate::shape::{shape_of, Classified, OneState, SystemShape};
use crate::{
    formulas, Analysis, CoupledBlock, Derivation, Family, LinearCoefficients, Method, Prepared,
    SquareRootParams, StateLaw, Stationary, MAX_BLOCK_EIGEN,
};
use nalgebra::{DMatrix, DVector};
use sdeck_semantics::{FactorId, Model, ShockId};
use std::sync::Arc;

pub(crate) fn derive(model: &Model, prepared: Arc<Analysis>) -> Derivation {
    let analysis = prepared.as_ref();
    let n = model.factors.len();
    let system = &analysis.system;
    let stationary_system = if needs_system(model, analysis) {
        stationary_system(model, analysis)
    } else {
        None
    };
    let mut states = Vec::with_capacity(n);
    for (i, classified) in analysis.classified.iter().enumerate() {
        let law = match analysis.one_state(i) {
            Some((os, family)) => one_state_law(model, analysis, i, os, family),
            None => coupled_state_law(classified, system, n, stationary_system.as_ref(), i),
        };
        states.push(law);
    }
    let blocks = coupled_blocks(model, analysis);
    let drift_matrix = system_drift_matrix(system, &analysis.params);
    let drift_eigenvalues = drift_matrix.as_ref().and_then(|rows| {
        if rows.iter().flatten().any(|v| !v.is_finite()) {
            return None;
        }
        eigenvalues_of(rows)
    });
    Derivation {
        states: states.into(),
        system_family: system.family,
        system_reason: system.reason.clone(),
        drift_matrix,
        drift_eigenvalues,
        blocks,
        prepared: Prepared(prepared),
    }
}

/// The stationary law of the whole system, when one is known: mean, covariance and
/// the name of the law each state's marginal follows.
type StationarySystem = (DVector<f64>, DMatrix<f64>, &'static str);

/// The stationary law of the system from the linear engine, or the stationary moments
/// of the polynomial engine when the system is not linear.
fn stationary_system(model: &Model, analysis: &Analysis) -> Option<StationarySystem> {
    match cached_linear_engine(model, analysis) {
        Some(engine) => engine
            .stationary_mean()
            .zip(engine.stationary_covariance())
            .map(|(mean, cov)| {
                (
                    mean,
                    cov,
                    "Normal (marginal of the stationary law of the linear system)",
                )
            }),
        None => polynomial_engine(model, analysis)
            .and_then(|engine| engine.stationary_moments(2))
            .and_then(|table| Some((table.means(), table.covariance_matrix()?)))
            .map(|(mean, cov)| {
                (
                    mean,
                    cov,
                    "no named law: mean and variance of the stationary moments",
                )
            }),
    }
}

/// The law of state `i`, which has no one-state family of its own: the system's family
/// when it is coupled into a system the engines take, general otherwise.
fn coupled_state_law(
    classified: &Classified,
    system: &SystemShape,
    n: usize,
    stationary_system: Option<&StationarySystem>,
    i: usize,
) -> StateLaw {
    let coupled = classified.coupled;
    let (family, reason, method) = if coupled && n > MAX_SYSTEM_STATES {
        (
            Family::General,
            format!(
                "{}; the model has {n} factors, more than the {MAX_SYSTEM_STATES} the several-factor engines take: simulate it",
                classified.reason
            ),
            Method::None,
        )
    } else if coupled && system.family != Family::General {
        let method = match (system.family, system.time_dependent) {
            (Family::LinearSystem, false) => Method::ClosedForm,
            (Family::LinearSystem, true) => Method::MomentEquations,
            (Family::Polynomial, _) => Method::MomentEquations,
            _ => Method::None,
        };
        (
            system.family,
            format!("{}; {}", classified.reason, system.reason),
            method,
        )
    } else if coupled {
        (
            Family::General,
            format!("{}; {}", classified.reason, system.reason),
            Method::None,
        )
    } else {
        (Family::General, classified.reason.clone(), Method::None)
    };
    let stationary = if matches!(family, Family::LinearSystem | Family::Polynomial) {
        stationary_system.and_then(|(mean, covariance, law)| {
            Some(Stationary {
                mean: *mean.get(i)?,
                variance: *covariance.get((i, i))?,
                law: law.to_string(),
            })
        })
    } else {
        None
    };
    StateLaw {
        family,
        reason,
        method,
        half_life: None,
        stationary,
        linear: None,
        square_root: None,
        depends_on: classified.depends_on.clone(),
        outside_domain: None,
    }
}

/// The drift matrix A of the whole system at the file's parameters, when the drift is
/// affine with constant coefficients.
fn system_drift_matrix(system: &SystemShape, params: &[f64]) -> Option<Vec<Vec<f64>>> {
    let rows = system.drift_rows.as_ref()?;
    let constant = rows
        .iter()
        .all(|(coefficients, _)| coefficients.iter().all(|c| !c.depends_on_time()));
    constant.then(|| {
        rows.iter()
            .map(|(coefficients, _)| {
                coefficients
                    .iter()
                    // + 0.0 turns −0 into 0 for display.
                    .map(|c| c.value(params, 0.0) + 0.0)
                    .collect::<Vec<f64>>()
            })
            .collect::<Vec<_>>()
    })
}

/// The eigenvalues `(re, im)` of a square matrix given by rows; `None` when it is empty
/// or holds a value that is not finite.
fn eigenvalues_of(rows: &[Vec<f64>]) -> Option<Vec<(f64, f64)>> {
    let size = rows.len();
    let matrix = DMatrix::from_fn(size, size, |r, c| {
        rows.get(r)
            .and_then(|row| row.get(c))
            .copied()
            .unwrap_or(0.0)
    });
    (size > 0 && matrix.iter().all(|v| v.is_finite())).then(|| eigenvalues(&matrix))
}

/// Connected groups (two states or more) of the graph "the equation of i mentions j",
/// each with its drift matrix and eigenvalues when the drifts are affine with constant
/// coefficients. Linear in the model (union–find over the mentions).
fn coupled_blocks(model: &Model, analysis: &Analysis) -> Vec<CoupledBlock> {
    let n = analysis.classified.len();
    let mut parent: Vec<usize> = (0..n).collect();
    fn root(parent: &mut [usize], mut i: usize) -> usize {
        while let Some(&up) = parent.get(i) {
            if up == i {
                break;
            }
            // Path halving keeps the trees shallow.
            let grand = parent.get(up).copied().unwrap_or(up);
            if let Some(slot) = parent.get_mut(i) {
                *slot = grand;
            }
            i = grand;
        }
        i
    }
    for (i, classified) in analysis.classified.iter().enumerate() {
        for j in classified.depends_on.iter().map(|j| j.index()) {
            if j >= n {
                continue;
            }
            let (ri, rj) = (root(&mut parent, i), root(&mut parent, j));
            if ri != rj {
                if let Some(slot) = parent.get_mut(ri) {
                    *slot = rj;
                }
            }
        }
    }
    let mut members: std::collections::BTreeMap<usize, Vec<usize>> = Default::default();
    for i in 0..n {
        let r = root(&mut parent, i);
        members.entry(r).or_default().push(i);
    }
    let mut blocks: Vec<CoupledBlock> = members
        .into_values()
        .filter(|states| states.len() > 1)
        .map(|states| {
            let drift_matrix = (states.len() <= MAX_BLOCK_EIGEN)
                .then(|| block_drift_matrix(model, analysis, &states))
                .flatten();
            let drift_eigenvalues = drift_matrix.as_deref().and_then(eigenvalues_of);
            CoupledBlock {
                states: states.into_iter().map(FactorId::new).collect(),
                drift_matrix,
                drift_eigenvalues,
            }
        })
        .collect();
    blocks.sort_by_key(|b| b.states.first().copied());
    blocks
}

/// The drift matrix of the states `block` (in that order), when every drift is affine in
/// the states with constant coefficients.
fn block_drift_matrix(
    model: &Model,
    analysis: &Analysis,
    block: &[usize],
) -> Option<Vec<Vec<f64>>> {
    let position: std::collections::HashMap<usize, usize> =
        block.iter().enumerate().map(|(p, s)| (*s, p)).collect();
    let mut rows = Vec::with_capacity(block.len());
    for &state in block {
        let shape = shape_of(model, state).ok()?;
        if shape.drift.state_degree() > 1 {
            return None;
        }
        let mut row = vec![0.0; block.len()];
        for (key, coefficient) in shape.drift.by_state_monomial() {
            if coefficient.depends_on_time() {
                return None;
            }
            match key.as_slice() {
                [] => {}
                [(j, 1)] => {
                    let slot = row.get_mut(*position.get(j)?)?;
                    // + 0.0 turns −0 into 0 for display.
                    *slot = coefficient.value(&analysis.params, 0.0) + 0.0;
                }
                _ => return None,
            }
        }
        rows.push(row);
    }
    Some(rows)
}

fn one_state_law(
    model: &Model,
    analysis: &Analysis,
    index: usize,
    os: &OneState,
    family: Family,
) -> StateLaw {
    let params = &analysis.params;
    let values = os.values(params, 0.0);
    let mean_reverting_family = matches!(
        family,
        Family::Deterministic
            | Family::OrnsteinUhlenbeck
            | Family::SquareRoot
            | Family::Linear
            | Family::Polynomial
    );
    // The half-life needs only a constant slope: a level that moves with t still
    // reverts at the rate |b|.
    let half_life = (mean_reverting_family && !os.b.depends_on_time() && values.b < 0.0)
        .then(|| std::f64::consts::LN_2 / values.b.abs());
    // A square-root state with zero level is absorbed at 0: no stationary law worth
    // the name (its Gamma shape would be 0).
    let degenerate = family == Family::SquareRoot && values.a <= 0.0;
    let stationary = if mean_reverting_family && !degenerate {
        one_state::stationary(os, params).map(|(mean, variance)| Stationary {
            mean,
            variance,
            law: formulas::stationary_law(model, os, family),
        })
    } else {
        None
    };
    StateLaw {
        family,
        reason: analysis
            .classified
            .get(index)
            .map(|c| c.reason.clone())
            .unwrap_or_default(),
        method: one_state_method(os, family, params),
        half_life,
        stationary,
        linear: linear_coefficients(os, &values, params),
        square_root: (family == Family::SquareRoot)
            .then(|| square_root_params(model, index, &values)),
        depends_on: Vec::new(),
        outside_domain: None,
    }
}

/// How the figures of a one-state equation are obtained: closed forms, quadrature of
/// time-dependent coefficients, or the moment equations.
fn one_state_method(os: &OneState, family: Family, params: &[f64]) -> Method {
    if os.time_dependent {
        if os.state_dependent_noise() {
            Method::MomentEquations
        } else if one_state::elementary_forms(os, params).is_some() {
            Method::ClosedForm
        } else {
            Method::Quadrature
        }
    } else if matches!(family, Family::Linear | Family::Polynomial) && os.state_dependent_noise() {
        Method::MomentEquations
    } else {
        Method::ClosedForm
    }
}

/// The constant coefficients a, b, c_k, d_k of a one-state linear equation, when every
/// diffusion term is affine and nothing depends on t.
fn linear_coefficients(
    os: &OneState,
    values: &one_state::Values,
    params: &[f64],
) -> Option<LinearCoefficients> {
    let terms = match (&os.affine_terms, os.time_dependent) {
        (Some(terms), false) => terms,
        _ => return None,
    };
    Some(LinearCoefficients {
        a: values.a,
        b: values.b,
        c: terms
            .iter()
            .filter(|(_, c, _)| !c.is_zero())
            .map(|(noise, c, _)| (*noise, c.value(params, 0.0)))
            .collect(),
        d: terms
            .iter()
            .filter(|(_, _, d)| !d.is_zero())
            .map(|(noise, _, d)| (*noise, d.value(params, 0.0)))
            .collect(),
    })
}

/// Speed, level and volatility of a square-root state, with the shock that drives it.
fn square_root_params(model: &Model, index: usize, values: &one_state::Values) -> SquareRootParams {
    let speed = -values.b;
    let noise = model
        .factors
        .get(index)
        .and_then(|s| s.equation.as_ref())
        .and_then(|e| e.diffusion.first())
        .map(|d| d.noise)
        .unwrap_or(ShockId::new(0));
    SquareRootParams {
        speed,
        level: values.a / speed,
        vol: values.beta.max(0.0).sqrt(),
        noise,
    }
}
