//! The shape of each equation (polynomial drift, diffusion terms in root form) and the
//! classification of states and of the whole system into families.

use crate::algebra::{
    show_expr, show_poly, to_poly, to_root_form, Names, NotPolynomial, Poly, RootForm,
};
use crate::system::MAX_SYSTEM_STATES;
use crate::Family;
use sdeck_semantics::{Correlations, Expr, FactorId, Model, ShockId};

/// One diffusion term, normalised.
#[derive(Clone, Debug)]
pub(crate) struct NoiseTerm {
    pub noise: ShockId,
    pub form: RootForm,
    pub expr: Expr,
}

/// A state's equation, normalised: drift polynomial, diffusion terms in root form.
#[derive(Clone, Debug)]
pub(crate) struct Shape {
    pub drift: Poly,
    pub noises: Vec<NoiseTerm>,
}

/// Why an equation could not be normalised.
#[derive(Clone, Debug)]
pub(crate) enum Unresolved {
    /// No equation, or `Expr::Invalid` somewhere in it.
    DidNotResolve,
    /// A piece that is not polynomial in the states (or not a square root of one).
    NotPolynomial { place: String, piece: Expr },
}

/// Every state mentioned by the state's equation, itself excluded.
pub(crate) fn mentioned_states(model: &Model, index: usize) -> Vec<FactorId> {
    let mut out = Vec::new();
    if let Some(eq) = model.factors.get(index).and_then(|s| s.equation.as_ref()) {
        eq.drift.factors(&mut out);
        for term in &eq.diffusion {
            term.coefficient.factors(&mut out);
        }
    }
    out.sort_unstable();
    out.dedup();
    out.retain(|s| s.index() != index);
    out
}

pub(crate) fn shape_of(model: &Model, index: usize) -> Result<Shape, Unresolved> {
    let equation = model
        .factors
        .get(index)
        .and_then(|s| s.equation.as_ref())
        .ok_or(Unresolved::DidNotResolve)?;
    if equation.drift.is_invalid()
        || equation
            .diffusion
            .iter()
            .any(|d| d.coefficient.is_invalid())
        || equation
            .diffusion
            .iter()
            .any(|d| d.noise.index() >= model.shocks.len())
    {
        return Err(Unresolved::DidNotResolve);
    }
    let drift =
        to_poly(&equation.drift).map_err(|NotPolynomial { piece }| Unresolved::NotPolynomial {
            place: "drift".to_string(),
            piece,
        })?;
    let mut noises = Vec::new();
    for term in &equation.diffusion {
        let form = to_root_form(&term.coefficient).map_err(|NotPolynomial { piece }| {
            Unresolved::NotPolynomial {
                place: format!("diffusion on {}", noise_name(model, term.noise)),
                piece,
            }
        })?;
        noises.push(NoiseTerm {
            noise: term.noise,
            form,
            expr: term.coefficient.clone(),
        });
    }
    Ok(Shape { drift, noises })
}

pub(crate) fn noise_name(model: &Model, noise: ShockId) -> String {
    model
        .shocks
        .by_id(noise)
        .map(|n| n.name.clone())
        .unwrap_or_else(|| format!("shock {noise}"))
}

/// Correlation of two noises, 1 on the diagonal, 0 when unknown.
pub(crate) fn correlation(corr: &Correlations, k: ShockId, l: ShockId) -> f64 {
    corr.get(k, l)
}

/// The same, for the shocks at positions `k` and `l` (rows and columns of a matrix in
/// declaration order).
pub(crate) fn correlation_at(corr: &Correlations, k: usize, l: usize) -> f64 {
    corr.get(ShockId::new(k), ShockId::new(l))
}

/// Σ_kl ρ_kl g_k h_l, the instantaneous covariance rate of two diffusions, when it is a
/// polynomial. On failure returns the expression of an offending term.
pub(crate) fn diffusion_product(
    first: &[NoiseTerm],
    second: &[NoiseTerm],
    corr: &Correlations,
) -> Result<Poly, Expr> {
    let mut total = Poly::zero();
    for g in first {
        for h in second {
            let rho = correlation(corr, g.noise, h.noise);
            if rho == 0.0 {
                continue;
            }
            let product = g.form.product(&h.form).ok_or_else(|| h.expr.clone())?;
            total = total.add(&product.scale(rho));
        }
    }
    Ok(total)
}

/// A one-state SDE dX = (a + b X) dt + diffusion with squared diffusion α + β X + γ X²,
/// every coefficient a polynomial of parameters and t.
#[derive(Clone, Debug)]
pub(crate) struct OneState {
    pub state: usize,
    pub a: Poly,
    pub b: Poly,
    pub alpha: Poly,
    pub beta: Poly,
    pub gamma: Poly,
    /// `(noise, c_k, d_k)` when every diffusion term is affine: c_k + d_k X.
    pub affine_terms: Option<Vec<(ShockId, Poly, Poly)>>,
    pub time_dependent: bool,
}

/// The outcome of classifying one state.
#[derive(Clone, Debug)]
pub(crate) struct Classified {
    pub family: Family,
    pub reason: String,
    /// Present when the state is decoupled and its equation is of the one-state kind
    /// (every family but `general`).
    pub one_state: Option<OneState>,
    pub depends_on: Vec<FactorId>,
    /// Whether the equation resolved and mentions other states, so that the system's
    /// classification decides the family.
    pub coupled: bool,
}

pub(crate) fn general(reason: String, depends_on: Vec<FactorId>) -> Classified {
    Classified {
        family: Family::General,
        reason,
        one_state: None,
        depends_on,
        coupled: false,
    }
}

/// Longest printed expression kept inside a reason; longer ones are left out.
const MAX_SHOWN: usize = 100;

/// `" text"` when short enough to read in a sentence, empty otherwise.
fn shown(text: String) -> String {
    if text.chars().count() <= MAX_SHOWN {
        format!(" {text}")
    } else {
        String::new()
    }
}

pub(crate) fn unresolved_reason(model: &Model, why: &Unresolved) -> String {
    let names = Names::new(model);
    match why {
        Unresolved::DidNotResolve => "the equation did not resolve".to_string(),
        Unresolved::NotPolynomial { place, piece } => format!(
            "no closed form is known: in the {place}, `{}` is not a polynomial in the factors \
             (nor a square root of one)",
            show_expr(piece, &names)
        ),
    }
}

/// Classifies state `index` on its own.
pub(crate) fn classify_state(
    model: &Model,
    index: usize,
    corr: &Correlations,
    params: &[f64],
    names: &Names,
) -> Classified {
    let depends_on = mentioned_states(model, index);
    let shape = match shape_of(model, index) {
        Ok(s) => s,
        Err(why) => return general(unresolved_reason(model, &why), depends_on),
    };
    let name = model
        .factors
        .get(index)
        .map(|s| s.name.clone())
        .unwrap_or_default();
    if !depends_on.is_empty() {
        // Coupled: the system classification decides; here only say why.
        let others: Vec<String> = depends_on
            .iter()
            .filter_map(|i| model.factors.by_id(*i).map(|s| s.name.clone()))
            .collect();
        return Classified {
            family: Family::General,
            reason: format!("the equation of {name} mentions {}", others.join(", ")),
            one_state: None,
            depends_on,
            coupled: true,
        };
    }
    let drift_degree = shape.drift.state_degree();
    if drift_degree > 1 {
        return general(
            format!(
                "no closed form is known: the drift{} is of degree {drift_degree} in {name} \
                 (not affine)",
                shown(show_poly(&shape.drift, names))
            ),
            depends_on,
        );
    }
    let squared = match diffusion_product(&shape.noises, &shape.noises, corr) {
        Ok(p) => p,
        Err(piece) => {
            return general(
                format!(
                    "no closed form is known: the diffusion `{}` combined with the other \
                     shock terms is not the square root of a polynomial",
                    show_expr(&piece, names)
                ),
                depends_on,
            )
        }
    };
    let squared_degree = squared.state_degree();
    if squared_degree > 2 {
        return general(
            format!(
                "no closed form is known: the squared diffusion{} is of degree \
                 {squared_degree} in {name} (above quadratic)",
                shown(show_poly(&squared, names))
            ),
            depends_on,
        );
    }
    let a = shape.drift.coefficient_of(index, 0);
    let b = shape.drift.coefficient_of(index, 1);
    let alpha = squared.coefficient_of(index, 0);
    let beta = squared.coefficient_of(index, 1);
    let gamma = squared.coefficient_of(index, 2);
    let every_term_affine = shape
        .noises
        .iter()
        .all(|n| n.form.is_polynomial() && n.form.scale.state_degree() <= 1);
    let affine_terms = every_term_affine.then(|| {
        shape
            .noises
            .iter()
            .map(|n| {
                (
                    n.noise,
                    n.form.scale.coefficient_of(index, 0),
                    n.form.scale.coefficient_of(index, 1),
                )
            })
            .collect::<Vec<_>>()
    });
    let time_dependent = [&a, &b, &alpha, &beta, &gamma]
        .iter()
        .any(|p| p.depends_on_time());
    let b_value = b.value(params, 0.0);
    let drift_text = show_poly(&shape.drift, names);
    let one_state = OneState {
        state: index,
        a: a.clone(),
        b: b.clone(),
        alpha: alpha.clone(),
        beta: beta.clone(),
        gamma: gamma.clone(),
        affine_terms: affine_terms.clone(),
        time_dependent,
    };
    let constant = !time_dependent;
    let time_note = if time_dependent {
        ", coefficients depend on t"
    } else {
        ""
    };
    let (family, reason) = if let Some(terms) = &affine_terms {
        let multiplicative = terms.iter().any(|(_, _, d)| !d.is_zero());
        let additive = terms.iter().any(|(_, c, _)| !c.is_zero());
        let diffusion_text = terms
            .iter()
            .map(|(noise, c, d)| {
                let g = c.add(
                    &d.mul(&Poly::atom(crate::algebra::Atom::State(FactorId::new(
                        index,
                    )))),
                );
                format!("{} on {}", show_poly(&g, names), noise_name(model, *noise))
            })
            .collect::<Vec<_>>()
            .join(", ");
        let diffusion_text = if diffusion_text.is_empty() {
            "the diffusion (none)".to_string()
        } else {
            format!("diffusion {diffusion_text}")
        };
        if !multiplicative && !additive {
            (
                Family::Deterministic,
                format!(
                    "no shock drives {name}: its path solves d{name}/dt = {drift_text}, \
                     so its variance is 0{time_note}"
                ),
            )
        } else if !multiplicative {
            if b.is_zero() && constant {
                (
                    Family::ArithmeticBrownian,
                    format!("drift {drift_text} is constant, {diffusion_text} is constant"),
                )
            } else if constant && b_value < 0.0 {
                (
                    Family::OrnsteinUhlenbeck,
                    format!(
                        "drift {drift_text} is affine in {name} with negative slope {}, \
                         {diffusion_text} does not depend on {name}",
                        show_poly(&b, names)
                    ),
                )
            } else if constant && b_value > 0.0 {
                // Mean reversion needs a negative slope; with a positive one the same
                // Gaussian closed forms hold but the factor runs away from its level.
                (
                    Family::Linear,
                    format!(
                        "drift {drift_text} is affine in {name} with positive slope {}, so it \
                         pushes {name} away from its level (not mean-reverting), \
                         {diffusion_text} does not depend on {name}",
                        show_poly(&b, names)
                    ),
                )
            } else {
                (
                    Family::Linear,
                    format!(
                        "drift {drift_text} is affine in {name}, {diffusion_text} does not \
                         depend on {name}{time_note}"
                    ),
                )
            }
        } else if a.is_zero() && !additive && constant {
            (
                Family::GeometricBrownian,
                format!("drift {drift_text} and {diffusion_text} are both proportional to {name}"),
            )
        } else {
            (
                Family::Linear,
                format!("drift {drift_text} and {diffusion_text} are affine in {name}{time_note}"),
            )
        }
    } else {
        let squared_text = show_poly(&squared, names);
        let pure_square_root = alpha.is_zero() && gamma.is_zero() && !beta.is_zero();
        if pure_square_root && constant && b_value != 0.0 {
            (
                Family::SquareRoot,
                format!(
                    "drift {drift_text} is affine in {name}, squared diffusion {squared_text} \
                     is proportional to {name}"
                ),
            )
        } else {
            (
                Family::Polynomial,
                format!(
                    "drift {drift_text} is affine in {name}, squared diffusion {squared_text} \
                     is at most quadratic in {name}{time_note}"
                ),
            )
        }
    };
    Classified {
        family,
        reason,
        one_state: Some(one_state),
        depends_on,
        coupled: false,
    }
}

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

pub(crate) fn classify_system(
    model: &Model,
    states: &[Classified],
    corr: &Correlations,
) -> SystemShape {
    let n = model.factors.len();
    if n == 0 {
        return SystemShape {
            family: Family::General,
            reason: "the model declares no factor".to_string(),
            drift_rows: None,
            loadings: None,
            shapes: Vec::new(),
            time_dependent: false,
        };
    }
    let mut shapes = Vec::with_capacity(n);
    let names = Names::new(model);
    for (i, classified) in states.iter().enumerate() {
        match shape_of(model, i) {
            Ok(s) => shapes.push(s),
            Err(why) => {
                return SystemShape {
                    family: Family::General,
                    reason: format!(
                        "factor {}: {}",
                        model.factors.get(i).map(|s| s.name.as_str()).unwrap_or("?"),
                        unresolved_reason(model, &why)
                    ),
                    drift_rows: None,
                    loadings: None,
                    shapes: Vec::new(),
                    time_dependent: false,
                }
            }
        }
        let _ = classified;
    }
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
        return large_system(model, shapes, time_dependent);
    }
    let rows = drift_rows(&shapes, n);
    let loads = loadings(&shapes, model.shocks.len());
    let state_name = |i: usize| {
        model
            .factors
            .get(i)
            .map(|s| s.name.clone())
            .unwrap_or_default()
    };
    let Some(rows_ok) = rows.clone() else {
        let culprit = shapes
            .iter()
            .position(|s| s.drift.state_degree() > 1)
            .unwrap_or(0);
        return SystemShape {
            family: Family::General,
            reason: format!(
                "no closed form is known: the drift of {} is not affine in the factors{}",
                state_name(culprit),
                shapes
                    .get(culprit)
                    .map(|s| shown(show_poly(&s.drift, &names)))
                    .filter(|t| !t.is_empty())
                    .map(|t| format!(":{t}"))
                    .unwrap_or_default()
            ),
            drift_rows: None,
            loadings: None,
            shapes,
            time_dependent,
        };
    };
    let _ = rows_ok;
    if loads.is_some() {
        return SystemShape {
            family: Family::LinearSystem,
            reason: format!(
                "{n} factors, drift affine in the factors, diffusion independent of the factors"
            ),
            drift_rows: rows,
            loadings: loads,
            shapes,
            time_dependent,
        };
    }
    for i in 0..n {
        for j in i..n {
            let (Some(si), Some(sj)) = (shapes.get(i), shapes.get(j)) else {
                continue;
            };
            match diffusion_product(&si.noises, &sj.noises, corr) {
                Ok(p) if p.state_degree() <= 2 => {}
                Ok(p) => {
                    return SystemShape {
                        family: Family::General,
                        reason: format!(
                            "no closed form is known: the instantaneous covariance of {} and \
                             {}{} is above quadratic in the factors",
                            state_name(i),
                            state_name(j),
                            shown(show_poly(&p, &names))
                        ),
                        drift_rows: rows,
                        loadings: None,
                        shapes,
                        time_dependent,
                    }
                }
                Err(piece) => {
                    return SystemShape {
                        family: Family::General,
                        reason: format!(
                            "no closed form is known: the diffusion `{}` times the diffusion \
                             of {} is not a polynomial in the factors",
                            show_expr(&piece, &names),
                            state_name(i)
                        ),
                        drift_rows: rows,
                        loadings: None,
                        shapes,
                        time_dependent,
                    }
                }
            }
        }
    }
    SystemShape {
        family: Family::Polynomial,
        reason: format!(
            "{n} factors, drift affine in the factors, instantaneous covariances at most \
             quadratic in the factors"
        ),
        drift_rows: rows,
        loadings: None,
        shapes,
        time_dependent,
    }
}

/// The shape of a model with more states than the several-state engines take, in time
/// linear in the model: no matrix of size states × states is built (the engines would
/// not use it), only whether every drift is affine and every diffusion free of states.
fn large_system(model: &Model, shapes: Vec<Shape>, time_dependent: bool) -> SystemShape {
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
    let _ = model;
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
