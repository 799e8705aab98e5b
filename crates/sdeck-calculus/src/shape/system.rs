//! The classification of the whole system: linear, polynomial or general, with the
//! drift rows and diffusion loadings the several-state engines read.

use super::{diffusion_product, shape_of, shown, unresolved_reason, Classified, Shape};
use crate::algebra::{show_expr, show_poly, Names, Poly};
use crate::system::MAX_SYSTEM_STATES;
use crate::Family;
use sdeck_semantics::{Correlations, Model};

/// The system-wide shape: drift affine in all states? diffusion state-free? squared
/// diffusion quadratic?
pub(crate) struct SystemShape {
    pub family: Family,
    pub reason: String,
    /// Per state: drift coefficients on each state (polys) and the constant part.
    pub drift_rows: Option<Vec<(Vec<Poly>, Poly)>>,
    /// Per state: diffusion loadings per noise when state-free (polys).
    pub loadings: Option<Vec<Vec<Poly>>>,
    pub shapes: Vec<Shape>,
    pub time_dependent: bool,
}

impl SystemShape {
    /// A general system for `reason`, with nothing known of its equations.
    pub(crate) fn unknown(reason: String) -> SystemShape {
        SystemShape {
            family: Family::General,
            reason,
            drift_rows: None,
            loadings: None,
            shapes: Vec::new(),
            time_dependent: false,
        }
    }
}

pub(crate) fn classify_system(
    model: &Model,
    states: &[Classified],
    corr: &Correlations,
) -> SystemShape {
    let n = model.factors.len();
    if n == 0 {
        return SystemShape::unknown("the model declares no factor".to_string());
    }
    let shapes = match shapes(model, states) {
        Ok(shapes) => shapes,
        Err(unknown) => return unknown,
    };
    if n == 1 {
        if let Some(only) = states.first() {
            return SystemShape {
                family: only.family,
                reason: only.reason.clone(),
                drift_rows: drift_rows(&shapes, n),
                loadings: loadings(&shapes, model.shocks.len()),
                time_dependent: only.one_state.as_ref().is_some_and(|o| o.time_dependent),
                shapes,
            };
        }
    }
    let time_dependent = shapes.iter().any(|s| {
        s.drift.depends_on_time() || s.noises.iter().any(|t| t.form.square().depends_on_time())
    });
    if n > MAX_SYSTEM_STATES {
        return large_system(shapes, time_dependent);
    }
    let names = Names::new(model);
    let rows = drift_rows(&shapes, n);
    let loads = loadings(&shapes, model.shocks.len());
    if rows.is_none() {
        return SystemShape {
            family: Family::General,
            reason: not_affine(model, &shapes, &names),
            drift_rows: None,
            loadings: None,
            shapes,
            time_dependent,
        };
    }
    let (family, reason) = if loads.is_some() {
        (
            Family::LinearSystem,
            format!(
                "{n} factors, drift affine in the factors, diffusion independent of the factors"
            ),
        )
    } else if let Some(reason) = covariance_not_quadratic(model, &shapes, corr, &names) {
        (Family::General, reason)
    } else {
        (
            Family::Polynomial,
            format!(
                "{n} factors, drift affine in the factors, instantaneous covariances at most \
                 quadratic in the factors"
            ),
        )
    };
    SystemShape {
        family,
        reason,
        drift_rows: rows,
        loadings: loads,
        shapes,
        time_dependent,
    }
}

/// The shape of every state's equation, or the general system naming the first that
/// did not resolve.
fn shapes(model: &Model, states: &[Classified]) -> Result<Vec<Shape>, SystemShape> {
    (0..states.len())
        .map(|i| {
            shape_of(model, i).map_err(|why| {
                SystemShape::unknown(format!(
                    "factor {}: {}",
                    model.factors.get(i).map(|s| s.name.as_str()).unwrap_or("?"),
                    unresolved_reason(model, &why)
                ))
            })
        })
        .collect()
}

fn state_name(model: &Model, i: usize) -> String {
    model
        .factors
        .get(i)
        .map(|s| s.name.clone())
        .unwrap_or_default()
}

/// Why the system's drift is not affine: the first drift of degree above one.
fn not_affine(model: &Model, shapes: &[Shape], names: &Names) -> String {
    let culprit = shapes
        .iter()
        .position(|s| s.drift.state_degree() > 1)
        .unwrap_or(0);
    format!(
        "no closed form is known: the drift of {} is not affine in the factors{}",
        state_name(model, culprit),
        shapes
            .get(culprit)
            .map(|s| shown(show_poly(&s.drift, names)))
            .filter(|t| !t.is_empty())
            .map(|t| format!(":{t}"))
            .unwrap_or_default()
    )
}

/// Why the instantaneous covariances are not all polynomials at most quadratic in the
/// factors, for the first pair that is not; `None` when they all are.
fn covariance_not_quadratic(
    model: &Model,
    shapes: &[Shape],
    corr: &Correlations,
    names: &Names,
) -> Option<String> {
    let n = shapes.len();
    for i in 0..n {
        for j in i..n {
            let (Some(si), Some(sj)) = (shapes.get(i), shapes.get(j)) else {
                continue;
            };
            match diffusion_product(&si.noises, &sj.noises, corr) {
                Ok(p) if p.state_degree() <= 2 => {}
                Ok(p) => {
                    return Some(format!(
                        "no closed form is known: the instantaneous covariance of {} and \
                         {}{} is above quadratic in the factors",
                        state_name(model, i),
                        state_name(model, j),
                        shown(show_poly(&p, names))
                    ))
                }
                Err(piece) => {
                    return Some(format!(
                        "no closed form is known: the diffusion `{}` times the diffusion \
                         of {} is not a polynomial in the factors",
                        show_expr(&piece, names),
                        state_name(model, i)
                    ))
                }
            }
        }
    }
    None
}
/// The shape of a model with more states than the several-state engines take, in time
/// linear in the model: no matrix of size states × states is built (the engines would
/// not use it), only whether every drift is affine and every diffusion free of states.
fn large_system(shapes: Vec<Shape>, time_dependent: bool) -> SystemShape {
    let n = shapes.len();
    let affine = shapes.iter().all(|s| s.drift.state_degree() <= 1);
    let state_free = shapes.iter().all(|s| {
        s.noises
            .iter()
            .all(|t| t.form.is_polynomial() && !t.form.scale.mentions_states())
    });
    let (family, reason) = if affine && state_free {
        (
            Family::LinearSystem,
            format!("{n} states, drift affine in the states, diffusion independent of the states"),
        )
    } else {
        (
            Family::General,
            format!(
                "the model has {n} states, more than the {MAX_SYSTEM_STATES} the several-state \
                 engines take"
            ),
        )
    };
    SystemShape {
        family,
        reason,
        drift_rows: None,
        loadings: None,
        shapes,
        time_dependent,
    }
}

/// Drift of each state as (coefficient on each state, constant part), when affine.
fn drift_rows(shapes: &[Shape], n: usize) -> Option<Vec<(Vec<Poly>, Poly)>> {
    let mut rows = Vec::with_capacity(shapes.len());
    for shape in shapes {
        if shape.drift.state_degree() > 1 {
            return None;
        }
        let by = shape.drift.by_state_monomial();
        let mut coefficients = vec![Poly::zero(); n];
        let mut constant = Poly::zero();
        for (key, coefficient) in by {
            match key.as_slice() {
                [] => constant = coefficient,
                [(j, 1)] => {
                    if let Some(slot) = coefficients.get_mut(*j) {
                        *slot = coefficient;
                    }
                }
                _ => return None,
            }
        }
        rows.push((coefficients, constant));
    }
    Some(rows)
}

/// Loadings of each state on each noise, when every diffusion is free of states.
fn loadings(shapes: &[Shape], noises: usize) -> Option<Vec<Vec<Poly>>> {
    let mut out = Vec::with_capacity(shapes.len());
    for shape in shapes {
        let mut row = vec![Poly::zero(); noises];
        for term in &shape.noises {
            if !term.form.is_polynomial() || term.form.scale.mentions_states() {
                return None;
            }
            if let Some(slot) = row.get_mut(term.noise.index()) {
                *slot = slot.add(&term.form.scale);
            }
        }
        out.push(row);
    }
    Some(out)
}
