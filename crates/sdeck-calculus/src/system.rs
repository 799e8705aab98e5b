//! Derivations and figures of whole models: decoupled states through `one_state`,
//! coupled states and cross-covariances through the engines for several states.

use crate::linear_system::matrix_exponential;
use crate::one_state::{self, phi};
use crate::shape::correlation;
use crate::{ode, Analysis, Derivation, Family, Method, Moments, StateMoments};
use nalgebra::{DMatrix, DVector};
use sdeck_semantics::{Model, ShockId};
use statrs::distribution::{ContinuousCDF, Normal};

/// The most states the several-state engines take. The Lyapunov solve is a dense system in
/// n² unknowns and the polynomial engine holds n⁴ coefficients: beyond this a model would
/// cost seconds and gigabytes, so its coupled figures are reported as not known.
pub const MAX_SYSTEM_STATES: usize = 24;

mod engines;
mod laws;

use engines::polynomial_engine;
use engines::{cached_linear_engine, integrate_linear_system, integrate_polynomial_system};
pub(crate) use laws::derive;

/// Whether some state has no one-state law of its own, so the system engines are needed.
fn needs_system(model: &Model, analysis: &Analysis) -> bool {
    (0..model.factors.len()).any(|i| analysis.one_state(i).is_none())
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
