//! Derivations and figures of whole models: decoupled states through `one_state`,
//! coupled states and cross-covariances through the engines for several states.

use crate::algebra::Poly;
use crate::breaks::TimeBreaks;
use crate::linear_system::{eigenvalues, matrix_exponential, AffineGaussian};
use crate::one_state::{self, phi};
use crate::polynomial::PolynomialSystem;
use crate::shape::{correlation, correlation_at, diffusion_product, shape_of, OneState};
use crate::{
    formulas, ode, Analysis, CoupledBlock, Derivation, Family, LinearCoefficients, Method, Moments,
    Prepared, SquareRootParams, StateLaw, StateMoments, Stationary, MAX_BLOCK_EIGEN,
};
use nalgebra::{DMatrix, DVector};
use sdeck_semantics::{FactorId, Model, ShockId};
use statrs::distribution::{ContinuousCDF, Normal};
use std::sync::Arc;

/// The most states the several-state engines take. The Lyapunov solve is a dense system in
/// n² unknowns and the polynomial engine holds n⁴ coefficients: beyond this a model would
/// cost seconds and gigabytes, so its coupled figures are reported as not known.
pub const MAX_SYSTEM_STATES: usize = 24;

/// Whether some state has no one-state law of its own, so the system engines are needed.
fn needs_system(model: &Model, analysis: &Analysis) -> bool {
    (0..model.factors.len()).any(|i| analysis.one_state(i).is_none())
}

pub(crate) fn derive(model: &Model, prepared: Arc<Analysis>) -> Derivation {
    let analysis = prepared.as_ref();
    let n = model.factors.len();
    let mut states = Vec::with_capacity(n);
    let params = &analysis.params;
    let system = &analysis.system;
    let use_system = needs_system(model, analysis);
    let system_engine = if use_system {
        cached_linear_engine(model, analysis)
    } else {
        None
    };
    let stationary_system = match &system_engine {
        _ if !use_system => None,
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
    };
    for (i, classified) in analysis.classified.iter().enumerate() {
        if let Some((os, family)) = analysis.one_state(i) {
            states.push(one_state_law(model, analysis, i, os, family));
            continue;
        }
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
            stationary_system
                .as_ref()
                .and_then(|(mean, covariance, law)| {
                    Some(Stationary {
                        mean: *mean.get(i)?,
                        variance: *covariance.get((i, i))?,
                        law: law.to_string(),
                    })
                })
        } else {
            None
        };
        states.push(StateLaw {
            family,
            reason,
            method,
            half_life: None,
            stationary,
            linear: None,
            square_root: None,
            depends_on: classified.depends_on.clone(),
            outside_domain: None,
        });
    }
    let blocks = coupled_blocks(model, analysis);
    let drift_matrix = system.drift_rows.as_ref().and_then(|rows| {
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
    });
    let drift_eigenvalues = drift_matrix.as_ref().and_then(|rows| {
        let size = rows.len();
        if size == 0 || rows.iter().flatten().any(|v| !v.is_finite()) {
            return None;
        }
        let matrix = DMatrix::from_fn(size, size, |r, c| {
            rows.get(r)
                .and_then(|row| row.get(c))
                .copied()
                .unwrap_or(0.0)
        });
        Some(eigenvalues(&matrix))
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
            let drift_eigenvalues = drift_matrix.as_ref().and_then(|rows| {
                let size = rows.len();
                let matrix = DMatrix::from_fn(size, size, |r, c| {
                    rows.get(r)
                        .and_then(|row| row.get(c))
                        .copied()
                        .unwrap_or(0.0)
                });
                (size > 0 && matrix.iter().all(|v| v.is_finite())).then(|| eigenvalues(&matrix))
            });
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
    let method = if os.time_dependent {
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
    };
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
    let linear = match (&os.affine_terms, os.time_dependent) {
        (Some(terms), false) => Some(LinearCoefficients {
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
        }),
        _ => None,
    };
    let square_root = (family == Family::SquareRoot).then(|| {
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
    });
    StateLaw {
        family,
        reason: analysis
            .classified
            .get(index)
            .map(|c| c.reason.clone())
            .unwrap_or_default(),
        method,
        half_life,
        stationary,
        linear,
        square_root,
        depends_on: Vec::new(),
        outside_domain: None,
    }
}

/// The affine Gaussian engine of the system, built once per derivation.
fn cached_linear_engine<'a>(model: &Model, analysis: &'a Analysis) -> Option<&'a AffineGaussian> {
    analysis
        .linear
        .get_or_init(|| linear_engine(model, analysis))
        .as_ref()
}

/// The affine Gaussian engine for a linear system with constant coefficients.
pub(crate) fn linear_engine(model: &Model, analysis: &Analysis) -> Option<AffineGaussian> {
    let system = &analysis.system;
    if system.family != Family::LinearSystem
        || system.time_dependent
        || model.factors.len() > MAX_SYSTEM_STATES
    {
        return None;
    }
    let (a, b, loadings) = linear_matrices(model, analysis, 0.0)?;
    let m = model.shocks.len();
    let corr = DMatrix::from_fn(m, m, |k, l| correlation_at(&analysis.corr, k, l));
    AffineGaussian::new(a, b, loadings, corr).ok()
}

/// The moment engine of a polynomial system with constant coefficients: drift b + A x,
/// instantaneous covariance c0 + Σ_k x_k c1[k] + Σ_kl x_k x_l c2[k][l].
pub(crate) fn polynomial_engine(model: &Model, analysis: &Analysis) -> Option<PolynomialSystem> {
    let system = &analysis.system;
    if system.family != Family::Polynomial
        || system.time_dependent
        || model.factors.len() > MAX_SYSTEM_STATES
    {
        return None;
    }
    let rows = system.drift_rows.as_ref()?;
    let n = model.factors.len();
    let params = &analysis.params;
    let a = DMatrix::from_fn(n, n, |r, c| {
        rows.get(r)
            .and_then(|(cs, _)| cs.get(c))
            .map(|p| p.value(params, 0.0))
            .unwrap_or(0.0)
    });
    let b = DVector::from_fn(n, |r, _| {
        rows.get(r)
            .map(|(_, k)| k.value(params, 0.0))
            .unwrap_or(0.0)
    });
    let mut c0 = DMatrix::zeros(n, n);
    let mut c1 = vec![DMatrix::zeros(n, n); n];
    let mut c2 = vec![vec![DMatrix::zeros(n, n); n]; n];
    for i in 0..n {
        for j in 0..n {
            let (Some(si), Some(sj)) = (system.shapes.get(i), system.shapes.get(j)) else {
                return None;
            };
            let product = diffusion_product(&si.noises, &sj.noises, &analysis.corr).ok()?;
            for (key, coefficient) in product.by_state_monomial() {
                let value = coefficient.value(params, 0.0);
                match key.as_slice() {
                    [] => c0[(i, j)] += value,
                    [(k, 1)] => c1.get_mut(*k)?[(i, j)] += value,
                    [(k, 2)] => c2.get_mut(*k)?.get_mut(*k)?[(i, j)] += value,
                    [(k, 1), (l, 1)] => {
                        // x_k x_l appears twice in the double sum: split it evenly.
                        c2.get_mut(*k)?.get_mut(*l)?[(i, j)] += value / 2.0;
                        c2.get_mut(*l)?.get_mut(*k)?[(i, j)] += value / 2.0;
                    }
                    _ => return None,
                }
            }
        }
    }
    PolynomialSystem::new(b, a, c0, c1, c2).ok()
}

/// A, b and the loadings L of a linear system at time `t`.
fn linear_matrices(
    model: &Model,
    analysis: &Analysis,
    t: f64,
) -> Option<(DMatrix<f64>, DVector<f64>, DMatrix<f64>)> {
    let rows = analysis.system.drift_rows.as_ref()?;
    let loads = analysis.system.loadings.as_ref()?;
    let n = model.factors.len();
    let m = model.shocks.len();
    let params = &analysis.params;
    let value = |p: Option<&Poly>| p.map(|p| p.value(params, t)).unwrap_or(0.0);
    let a = DMatrix::from_fn(n, n, |r, c| {
        value(rows.get(r).and_then(|(cs, _)| cs.get(c)))
    });
    let b = DVector::from_fn(n, |r, _| value(rows.get(r).map(|(_, k)| k)));
    let loadings = DMatrix::from_fn(n, m, |r, k| value(loads.get(r).and_then(|l| l.get(k))));
    Some((a, b, loadings))
}

/// Mean vector and covariance matrix of a linear system with time-dependent
/// coefficients, by integrating m' = A m + b and P' = A P + P Aᵀ + L R Lᵀ.
fn integrate_linear_system(
    model: &Model,
    analysis: &Analysis,
    t: f64,
) -> Option<(DVector<f64>, DMatrix<f64>)> {
    let m = model.shocks.len();
    let corr = DMatrix::from_fn(m, m, |k, l| correlation_at(&analysis.corr, k, l));
    integrate_mean_covariance(model, t, |s, _mean, _cov| {
        let (a, b, loadings) = linear_matrices(model, analysis, s)?;
        let noise = &loadings * &corr * loadings.transpose();
        Some((a, b, noise))
    })
}

/// Integrates the first two moment equations m' = A(s) m + b(s) and
/// P' = A P + P Aᵀ + Q(s, m, P) from the initial state (P(0) = 0) to `t`, where
/// `coefficients(s, m, P)` gives A, b and Q (`None` makes the result unknown).
fn integrate_mean_covariance<F>(
    model: &Model,
    t: f64,
    coefficients: F,
) -> Option<(DVector<f64>, DMatrix<f64>)>
where
    F: Fn(f64, &DVector<f64>, &DMatrix<f64>) -> Option<(DMatrix<f64>, DVector<f64>, DMatrix<f64>)>,
{
    let n = model.factors.len();
    let unpack = |y: &[f64]| {
        let mean = DVector::from_fn(n, |r, _| y.get(r).copied().unwrap_or(f64::NAN));
        let cov = DMatrix::from_fn(n, n, |r, c| {
            y.get(n + r * n + c).copied().unwrap_or(f64::NAN)
        });
        (mean, cov)
    };
    let derivative = |s: f64, y: &[f64], dy: &mut [f64]| {
        let (mean, cov) = unpack(y);
        let Some((a, b, noise)) = coefficients(s, &mean, &cov) else {
            dy.iter_mut().for_each(|v| *v = f64::NAN);
            return;
        };
        let dm = &a * &mean + &b;
        let dp = &a * &cov + &cov * a.transpose() + noise;
        for (r, v) in dm.iter().enumerate() {
            if let Some(slot) = dy.get_mut(r) {
                *slot = *v;
            }
        }
        for r in 0..n {
            for c in 0..n {
                if let (Some(slot), Some(v)) = (dy.get_mut(n + r * n + c), dp.get((r, c))) {
                    *slot = *v;
                }
            }
        }
    };
    let mut start = model.initial_values();
    start.extend(std::iter::repeat_n(0.0, n * n));
    // Split at the knots and kinks of the coefficients, so that every step of the
    // integrator sees a smooth right-hand side.
    let pieces = TimeBreaks::of_model(model, &model.param_values()).pieces(0.0, t);
    let end = ode::integrate_pieces(derivative, &start, &pieces, 1e-11, 1e-300).ok()?;
    Some(unpack(&end))
}

/// E[x^key] from the means and covariances: 1, m_k, P_kk + m_k², P_kl + m_k m_l.
fn expected_monomial(key: &[(usize, i64)], mean: &DVector<f64>, cov: &DMatrix<f64>) -> f64 {
    let m = |k: usize| mean.get(k).copied().unwrap_or(f64::NAN);
    let p = |k: usize, l: usize| cov.get((k, l)).copied().unwrap_or(f64::NAN);
    match key {
        [] => 1.0,
        [(k, 1)] => m(*k),
        [(k, 2)] => p(*k, *k) + m(*k) * m(*k),
        [(k, 1), (l, 1)] => p(*k, *l) + m(*k) * m(*l),
        _ => f64::NAN,
    }
}

/// Means and covariances of a polynomial system with time-dependent coefficients, by
/// integrating m' = A m + b and P' = A P + P Aᵀ + E[C(X)], where the instantaneous
/// covariance C is at most quadratic so that E[C(X)] needs only m and P
/// (Kloeden & Platen 1992, §4.8; Cuchiero, Keller-Ressel & Teichmann 2012).
fn integrate_polynomial_system(
    model: &Model,
    analysis: &Analysis,
    t: f64,
) -> Option<(DVector<f64>, DMatrix<f64>)> {
    let system = &analysis.system;
    let rows = system.drift_rows.as_ref()?;
    let n = model.factors.len();
    let params = &analysis.params;
    type Pieces = Vec<(Vec<(usize, i64)>, Poly)>;
    let mut covariance_pieces: Vec<Vec<Pieces>> = Vec::with_capacity(n);
    for i in 0..n {
        let mut row = Vec::with_capacity(n);
        for j in 0..n {
            let (si, sj) = (system.shapes.get(i)?, system.shapes.get(j)?);
            let product = diffusion_product(&si.noises, &sj.noises, &analysis.corr).ok()?;
            row.push(product.by_state_monomial().into_iter().collect());
        }
        covariance_pieces.push(row);
    }
    integrate_mean_covariance(model, t, |s, mean, cov| {
        let value = |p: Option<&Poly>| p.map(|p| p.value(params, s)).unwrap_or(0.0);
        let a = DMatrix::from_fn(n, n, |r, c| {
            value(rows.get(r).and_then(|(cs, _)| cs.get(c)))
        });
        let b = DVector::from_fn(n, |r, _| value(rows.get(r).map(|(_, k)| k)));
        let noise = DMatrix::from_fn(n, n, |r, c| {
            covariance_pieces
                .get(r)
                .and_then(|row| row.get(c))
                .map(|pieces| {
                    pieces
                        .iter()
                        .map(|(key, coefficient)| {
                            coefficient.value(params, s) * expected_monomial(key, mean, cov)
                        })
                        .sum::<f64>()
                })
                .unwrap_or(f64::NAN)
        });
        Some((a, b, noise))
    })
}

/// Means and covariance matrix of the whole system at one time, from its engine.
#[derive(Clone, Debug)]
pub(crate) struct SystemFigures {
    mean: DVector<f64>,
    covariance: DMatrix<f64>,
    method: Method,
}

/// How many times' system figures a derivation keeps.
const KEPT_TIMES: usize = 8;

/// The figures of the system engines at `t`, computed once per time and kept (the
/// expectations and hovers of one model mostly ask for a few times). `None` when the
/// model has no system engine or more states than they take.
fn system_figures(model: &Model, analysis: &Analysis, t: f64) -> Option<SystemFigures> {
    if model.factors.len() > MAX_SYSTEM_STATES || !(t.is_finite() && t >= 0.0) {
        return None;
    }
    if let Ok(kept) = analysis.system_figures.lock() {
        if let Some((_, figures)) = kept.iter().find(|(at, _)| at.to_bits() == t.to_bits()) {
            return figures.clone();
        }
    }
    let figures = compute_system_figures(model, analysis, t);
    if let Ok(mut kept) = analysis.system_figures.lock() {
        if kept.len() >= KEPT_TIMES {
            kept.remove(0);
        }
        kept.push((t, figures.clone()));
    }
    figures
}

fn compute_system_figures(model: &Model, analysis: &Analysis, t: f64) -> Option<SystemFigures> {
    let x0 = model.initial_values();
    let (mean, covariance, method) = if analysis.system.family == Family::LinearSystem {
        if let Some(engine) = cached_linear_engine(model, analysis) {
            let start = DVector::from_vec(x0);
            (
                engine.mean_at(&start, t),
                engine.covariance_at(t),
                Method::ClosedForm,
            )
        } else if analysis.system.time_dependent {
            let (m, p) = integrate_linear_system(model, analysis, t)?;
            (m, p, Method::MomentEquations)
        } else {
            return None;
        }
    } else if analysis.system.family == Family::Polynomial {
        if analysis.system.time_dependent {
            let (m, p) = integrate_polynomial_system(model, analysis, t)?;
            (m, p, Method::MomentEquations)
        } else {
            let engine = polynomial_engine(model, analysis)?;
            let table = engine.moments_at(&DVector::from_vec(x0), t, 2);
            (
                table.means(),
                table.covariance_matrix()?,
                Method::MomentEquations,
            )
        }
    } else {
        return None;
    };
    Some(SystemFigures {
        mean,
        covariance,
        method,
    })
}

/// Mean and variance of one state: its closed form when decoupled, else the system's.
pub(crate) fn state_moments(
    model: &Model,
    analysis: &Analysis,
    state: usize,
    t: f64,
) -> StateMoments {
    let unknown = StateMoments {
        mean: None,
        variance: None,
        method: Method::None,
    };
    if let Some((os, family)) = analysis.one_state(state) {
        let start = model
            .factors
            .get(state)
            .map(|s| s.initial)
            .unwrap_or(f64::NAN);
        return match one_state::mean_variance(os, family, &analysis.params, start, t) {
            Some(mv) => StateMoments {
                mean: Some(mv.mean),
                variance: Some(mv.variance),
                method: mv.method,
            },
            None => unknown,
        };
    }
    let Some(figures) = system_figures(model, analysis, t) else {
        return unknown;
    };
    let mean = figures.mean.get(state).copied().filter(|v| v.is_finite());
    if mean.is_none() {
        return unknown;
    }
    StateMoments {
        mean,
        variance: figures
            .covariance
            .get((state, state))
            .copied()
            .filter(|v| v.is_finite()),
        method: figures.method,
    }
}

/// Cov(X_i(t), X_j(t)): the variance on the diagonal, the system engine's entry when the
/// model has one, else the closed form of the pair.
pub(crate) fn covariance(
    model: &Model,
    analysis: &Analysis,
    i: usize,
    j: usize,
    t: f64,
) -> Option<f64> {
    if i >= model.factors.len() || j >= model.factors.len() {
        return None;
    }
    if i == j {
        return state_moments(model, analysis, i, t).variance;
    }
    if let Some(figures) = system_figures(model, analysis, t) {
        if let Some(value) = figures.covariance.get((i, j)).copied() {
            if value.is_finite() {
                return Some(value);
            }
        }
    }
    pair_covariance(model, analysis, i, j, t)
}

pub(crate) fn moments_at(model: &Model, analysis: &Analysis, t: f64) -> Moments {
    let n = model.factors.len();
    let mut mean = vec![None; n];
    let mut variance = vec![None; n];
    let mut method = vec![Method::None; n];
    for i in 0..n {
        let figures = state_moments(model, analysis, i, t);
        mean[i] = figures.mean;
        variance[i] = figures.variance;
        method[i] = figures.method;
    }
    let system = system_figures(model, analysis, t);
    let mut covariance = vec![vec![None; n]; n];
    for (i, row) in covariance.iter_mut().enumerate() {
        for (j, slot) in row.iter_mut().enumerate() {
            *slot = if i == j {
                variance.get(i).copied().flatten()
            } else {
                system
                    .as_ref()
                    .and_then(|f| f.covariance.get((i, j)).copied())
                    .filter(|v| v.is_finite())
                    .or_else(|| pair_covariance(model, analysis, i, j, t))
            };
        }
    }
    let exact = method.iter().map(|m| *m != Method::None).collect();
    Moments {
        at: t,
        mean,
        variance,
        covariance,
        exact,
        method,
        variance_infinite_from: vec![None; n],
    }
}

/// Cov(X_t, Y_t) of two decoupled states with affine noise and constant coefficients:
/// K' = (b₁ + b₂ + Σρ d₁d₂) K + Σ_kl ρ_kl (c₁ₖ + d₁ₖ m₁)(c₂ₗ + d₂ₗ m₂), K(0) = 0
/// (Itô's product rule; Kloeden & Platen 1992, §4.2).
fn pair_covariance(model: &Model, analysis: &Analysis, i: usize, j: usize, t: f64) -> Option<f64> {
    if !(t.is_finite() && t >= 0.0) {
        return None;
    }
    let (first, _) = analysis.one_state(i)?;
    let (second, _) = analysis.one_state(j)?;
    // Two decoupled states driven by uncorrelated noises are independent, whatever
    // their families.
    let noises = |k: usize| -> Option<Vec<ShockId>> {
        let equation = model.factors.get(k)?.equation.as_ref()?;
        Some(equation.diffusion.iter().map(|d| d.noise).collect())
    };
    if let (Some(of_first), Some(of_second)) = (noises(i), noises(j)) {
        let independent = of_first.iter().all(|&k| {
            of_second
                .iter()
                .all(|&l| correlation(&analysis.corr, k, l) == 0.0)
        });
        if independent {
            return Some(0.0);
        }
    }
    if first.time_dependent || second.time_dependent {
        return None;
    }
    let terms_first = first.affine_terms.as_ref()?;
    let terms_second = second.affine_terms.as_ref()?;
    let params = &analysis.params;
    let v1 = first.values(params, 0.0);
    let v2 = second.values(params, 0.0);
    let x1 = model.factors.get(i)?.initial;
    let x2 = model.factors.get(j)?.initial;
    let mut cross_constant = 0.0;
    let mut cross_first = Vec::new();
    let mut q = 0.0;
    for (k, c1, d1) in terms_first {
        for (l, c2, d2) in terms_second {
            let rho = correlation(&analysis.corr, *k, *l);
            if rho == 0.0 {
                continue;
            }
            let (c1, d1, c2, d2) = (
                c1.value(params, 0.0),
                d1.value(params, 0.0),
                c2.value(params, 0.0),
                d2.value(params, 0.0),
            );
            cross_constant += rho * c1 * c2;
            q += rho * d1 * d2;
            cross_first.push((rho, c1, d1, c2, d2));
        }
    }
    let rate = v1.b + v2.b + q;
    let state_dependent = cross_first
        .iter()
        .any(|(_, _, d1, _, d2)| *d1 != 0.0 || *d2 != 0.0);
    if !state_dependent {
        return Some(cross_constant * phi(rate, t));
    }
    let m1 = |s: f64| x1 * (v1.b * s).exp() + v1.a * phi(v1.b, s);
    let m2 = |s: f64| x2 * (v2.b * s).exp() + v2.a * phi(v2.b, s);
    let source = |s: f64| {
        let (a, b) = (m1(s), m2(s));
        cross_first
            .iter()
            .map(|(rho, c1, d1, c2, d2)| rho * (c1 + d1 * a) * (c2 + d2 * b))
            .sum::<f64>()
    };
    let value = ode::quad(|s| (rate * (t - s)).exp() * source(s), 0.0, t, 1e-12).ok()?;
    value.is_finite().then_some(value)
}

pub(crate) fn autocovariance(
    model: &Model,
    derivation: &Derivation,
    state: usize,
    s: f64,
    t: f64,
) -> Option<f64> {
    let analysis = derivation.analysis();
    let x0 = model.factors.get(state)?.initial;
    if let Some((os, family)) = analysis.one_state(state) {
        return one_state::autocovariance(os, family, &analysis.params, x0, s, t);
    }
    // Coupled affine drift: E[X_t | X_s] = e^{A(t−s)} X_s + const, so
    // Cov(X_s, X_t) = Cov[X_s] e^{Aᵀ(t−s)} (Kloeden & Platen 1992, §4.8).
    let (early, late) = if s <= t { (s, t) } else { (t, s) };
    let rows = derivation.drift_matrix.as_ref()?;
    let n = rows.len();
    let a = DMatrix::from_fn(n, n, |r, c| {
        rows.get(r)
            .and_then(|row| row.get(c))
            .copied()
            .unwrap_or(f64::NAN)
    });
    let moments = moments_at(model, analysis, early);
    let mut cov = DMatrix::zeros(n, n);
    for r in 0..n {
        for c in 0..n {
            cov[(r, c)] = moments.covariance.get(r)?.get(c).copied().flatten()?;
        }
    }
    let propagator = matrix_exponential(&(a.transpose() * (late - early)));
    (cov * propagator)
        .get((state, state))
        .copied()
        .filter(|v| v.is_finite())
}

pub(crate) fn quantile(
    model: &Model,
    analysis: &Analysis,
    state: usize,
    t: f64,
    p: f64,
) -> Option<f64> {
    let x0 = model.factors.get(state)?.initial;
    if let Some((os, family)) = analysis.one_state(state) {
        return one_state::quantile(os, family, &analysis.params, x0, t, p);
    }
    if analysis.system.family != Family::LinearSystem || !(p > 0.0 && p < 1.0) {
        return None;
    }
    // A linear system with state-free noise is Gaussian.
    let moments = state_moments(model, analysis, state, t);
    let mean = moments.mean?;
    let variance = moments.variance?;
    let standard = Normal::new(0.0, 1.0).ok()?;
    Some(mean + variance.max(0.0).sqrt() * standard.inverse_cdf(p))
}
