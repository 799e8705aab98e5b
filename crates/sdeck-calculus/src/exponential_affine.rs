//! The `exponential-affine` family: a factor dS = S·(a + b·X) dt + S·(...) dW whose
//! logarithm belongs to an affine set. Its moments are values of the transform:
//! E[S_t^u] = exp(α(t) + β(t)·X₀) with u on ln S (Duffie, Pan & Singleton 2000), so the
//! mean is the transform at u = 1 and the variance needs u = 2. Where the transform at
//! u = 2 has a pole before t the variance is infinite from that time on (Andersen &
//! Piterbarg 2007).

use crate::affine::{AffineSet, Rate, TransformError};
use crate::{Derivation, Family, Formulas, Method, Moments, StateMoments};
use num_complex::Complex64;
use sdeck_semantics::{FactorId, Model};

/// E[S_t^u] for the log factor `state`, or why it has no finite value.
fn power_moment(set: &AffineSet, state: usize, u: f64, t: f64) -> Result<f64, TransformError> {
    let mut argument = vec![Complex64::new(0.0, 0.0); set.dimension()];
    if let Some(slot) = argument.get_mut(state) {
        *slot = Complex64::new(u, 0.0);
    }
    set.log_transform(&argument, &Rate::zero(set), t)
        .map(|l| l.re.exp())
}

/// Moves the factors carried by their logarithm from `general` to `exponential-affine`.
pub(crate) fn classify(model: &Model, derivation: &mut Derivation) {
    // Only a factor left `general` can move; most models have none.
    if derivation
        .states
        .iter()
        .all(|law| law.family != Family::General)
    {
        return;
    }
    let Ok(set) = AffineSet::from_model(model) else {
        return;
    };
    for (i, law) in derivation.states.iter_mut().enumerate() {
        if law.family != Family::General || !set.is_log(i) {
            continue;
        }
        let name = model.factors.get(i).map(|s| s.name.as_str()).unwrap_or("S");
        law.family = Family::ExponentialAffine;
        law.method = if set.time_dependent() {
            Method::MomentEquations
        } else {
            Method::ClosedForm
        };
        law.reason = format!(
            "the equation of {name} is {name} times an expression free of {name}, and \
             ln {name} has a drift and covariances affine in the other factors"
        );
    }
}

/// Readable math for exponential-affine factor `state`.
pub(crate) fn formulas(model: &Model, state: usize) -> Formulas {
    let name = model
        .factors
        .get(state)
        .map(|s| s.name.as_str())
        .unwrap_or("S");
    Formulas {
        solution: Some(format!(
            "ln {name}(t) = ln {name}(0) + ∫₀ᵗ (drift/{name} − ½·(diffusion/{name})²) ds \
             + ∫₀ᵗ diffusion/{name} dW"
        )),
        mean: Some(format!(
            "E[{name}(t)^u] = exp(α(t) + β(t)·X(0)), α and β solving the Riccati \
             equations of the affine factors; the mean is u = 1"
        )),
        variance: Some(format!(
            "Var[{name}(t)] = E[{name}(t)²] − E[{name}(t)]², the transform at u = 2 and \
             u = 1; infinite from the first pole of the u = 2 equation"
        )),
        ..Formulas::default()
    }
}

/// Mean and variance of one exponential-affine factor at `t`.
pub(crate) fn state_moments(model: &Model, state: usize, t: f64) -> StateMoments {
    state_figures(model, state, t).0
}

/// Mean and variance of one exponential-affine factor at `t`, and the time (at most `t`)
/// from which its variance is infinite, when it is.
pub(crate) fn state_figures(model: &Model, state: usize, t: f64) -> (StateMoments, Option<f64>) {
    let mut out = StateMoments {
        mean: None,
        variance: None,
        method: Method::None,
    };
    if !(t.is_finite() && t >= 0.0) {
        return (out, None);
    }
    let Ok(set) = AffineSet::from_model(model) else {
        return (out, None);
    };
    let first = power_moment(&set, state, 1.0, t);
    let second = power_moment(&set, state, 2.0, t);
    if let Ok(mean) = first {
        out.mean = Some(mean).filter(|m| m.is_finite());
        if let Ok(square) = &second {
            out.variance = Some((square - mean * mean).max(0.0)).filter(|v| v.is_finite());
        }
    }
    if out.mean.is_some() {
        out.method = Method::ClosedForm;
    }
    let infinite_from =
        matches!(second, Err(TransformError::Explodes)).then(|| explosion_from(&set, state, t));
    (out, infinite_from)
}

/// The first time, at most `t`, from which E[S²] of log factor `state` is infinite.
fn explosion_from(set: &AffineSet, state: usize, t: f64) -> f64 {
    let mut u = vec![0.0; set.dimension()];
    if let Some(entry) = u.get_mut(state) {
        *entry = 2.0;
    }
    set.explosion_time(&u, t.max(f64::MIN_POSITIVE))
        .unwrap_or(t)
}

/// Fills the mean and variance of exponential-affine factors, and the time from which a
/// variance is infinite.
pub(crate) fn fill_moments(model: &Model, derivation: &Derivation, moments: &mut Moments) {
    let t = moments.at;
    if !(t.is_finite() && t >= 0.0) {
        return;
    }
    let wanted: Vec<usize> = derivation
        .states
        .iter()
        .enumerate()
        .filter(|(_, law)| law.family == Family::ExponentialAffine)
        .map(|(i, _)| i)
        .collect();
    if wanted.is_empty() {
        return;
    }
    let Ok(set) = AffineSet::from_model(model) else {
        return;
    };
    for i in wanted {
        let first = power_moment(&set, i, 1.0, t);
        let second = power_moment(&set, i, 2.0, t);
        if let Ok(mean) = first {
            if let Some(slot) = moments.mean.get_mut(i) {
                *slot = Some(mean).filter(|m| m.is_finite());
            }
        }
        match (first, second) {
            (Ok(mean), Ok(square)) => {
                let variance = square - mean * mean;
                if let Some(slot) = moments.variance.get_mut(i) {
                    *slot = Some(variance.max(0.0)).filter(|v| v.is_finite());
                }
            }
            (_, Err(TransformError::Explodes)) => {
                if let Some(slot) = moments.variance_infinite_from.get_mut(i) {
                    *slot = Some(explosion_from(&set, i, t));
                }
            }
            _ => {}
        }
        if let (Some(slot), Some(Some(_))) = (moments.method.get_mut(i), moments.mean.get(i)) {
            *slot = Method::ClosedForm;
        }
        if let (Some(row), Some(v)) = (moments.covariance.get_mut(i), moments.variance.get(i)) {
            if let Some(entry) = row.get_mut(i) {
                *entry = *v;
            }
        }
        if let Some(slot) = moments.exact.get_mut(i) {
            *slot = moments.mean.get(i).copied().flatten().is_some();
        }
    }
}

/// The first time, up to `limit`, from which Var[S] is infinite, for each
/// exponential-affine factor with constant coefficients.
pub fn variance_explosions(
    model: &Model,
    derivation: &Derivation,
    limit: f64,
) -> Vec<(FactorId, f64)> {
    let Ok(set) = AffineSet::from_model(model) else {
        return Vec::new();
    };
    derivation
        .states
        .iter_ids()
        .filter(|(_, law)| law.family == Family::ExponentialAffine)
        .filter_map(|(i, _)| {
            let mut u = vec![0.0; set.dimension()];
            *u.get_mut(i.index())? = 2.0;
            set.explosion_time(&u, limit).map(|t| (i, t))
        })
        .filter(|(_, t)| *t <= limit)
        .collect()
}
