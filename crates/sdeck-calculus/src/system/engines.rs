//! The engines for several states: the affine Gaussian engine of a linear system, the
//! moment engine of a polynomial one, and the moment equations integrated in time when
//! the coefficients depend on t.

use super::MAX_SYSTEM_STATES;
use crate::algebra::Poly;
use crate::breaks::TimeBreaks;
use crate::linear_system::AffineGaussian;
use crate::polynomial::PolynomialSystem;
use crate::shape::{correlation_at, diffusion_product};
use crate::{ode, Analysis, Family};
use nalgebra::{DMatrix, DVector};
use sdeck_semantics::Model;

/// The affine Gaussian engine of the system, built once per derivation.
pub(super) fn cached_linear_engine<'a>(
    model: &Model,
    analysis: &'a Analysis,
) -> Option<&'a AffineGaussian> {
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
pub(super) fn integrate_linear_system(
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
pub(super) fn integrate_polynomial_system(
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
