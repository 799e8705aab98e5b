//! The states that take Andersen's step over an exact square-root variance.

use super::shapes::StateShape;
use super::{Scheme, VarianceDriven};

/// A state read as a log-price dX = (a + b V) dt + c √V dW on `noise`.
struct LogForm {
    variance: usize,
    noise: usize,
    drift_constant: f64,
    drift_slope: f64,
    loading: f64,
    /// The state is S = exp(X).
    price: bool,
}

/// The log-price form of a state written as a log-price, or as a price with a positive
/// start.
fn log_form(shape: &StateShape, start: Option<f64>) -> Option<LogForm> {
    if let (Some(drift), Some((noise, loading, variance))) = (&shape.drift, shape.variance_root) {
        if drift.involves_only(variance) {
            return Some(LogForm {
                variance,
                noise,
                drift_constant: drift.constant,
                drift_slope: drift.coefficients.get(variance).copied().unwrap_or(0.0),
                loading,
                price: false,
            });
        }
    }
    let price = shape.price.as_ref()?;
    if !start.is_some_and(|s| s > 0.0 && s.is_finite()) {
        return None;
    }
    let slope = price
        .drift
        .coefficients
        .get(price.variance)
        .copied()
        .unwrap_or(0.0);
    Some(LogForm {
        variance: price.variance,
        noise: price.noise,
        drift_constant: price.drift.constant,
        drift_slope: slope - 0.5 * price.loading * price.loading,
        loading: price.loading,
        price: true,
    })
}

/// The states that are log-prices driven by the square-root state `variance` (noise
/// `variance_noise`): dX = (a + b V) dt + c √V dW_X, or prices dS = S (a + b V) dt +
/// c S √V dW_S with S₀ > 0 (then X = ln S has drift a + (b − c²/2) V by Itô's formula),
/// read structurally, each with a noise of its own that no other state uses and that
/// correlates with no noise but the variance's. A state that reads the variance in another
/// way keeps its scheme.
pub(super) fn driven_by(
    variance: usize,
    variance_noise: usize,
    shapes: &[Option<StateShape>],
    schemes: &[Scheme],
    correlation: &[Vec<f64>],
    initial: &[f64],
) -> Vec<(usize, VarianceDriven)> {
    let n = shapes.len();
    let rho = |a: usize, b: usize| -> f64 {
        if a == b {
            1.0
        } else {
            correlation
                .get(a)
                .and_then(|row| row.get(b))
                .copied()
                .unwrap_or(0.0)
        }
    };
    let mut driven = Vec::new();
    for (j, shape) in shapes.iter().enumerate() {
        if j == variance || schemes[j].is_exact() {
            continue;
        }
        let Some(shape) = shape else { continue };
        let Some(form) = log_form(shape, initial.get(j).copied()) else {
            continue;
        };
        let (noise, loading) = (form.noise, form.loading);
        if form.variance != variance || loading == 0.0 {
            continue;
        }
        // The state's noise: used by no other state (the variance aside when it is the
        // same noise), correlated with no noise other than the variance's.
        let alone = (0..n).filter(|k| *k != j).all(|k| {
            shapes[k].as_ref().is_none_or(|other| {
                other.noises.iter().all(|m| {
                    (k == variance && *m == variance_noise)
                        || (*m != noise && rho(*m, noise) == 0.0)
                })
            })
        });
        let correlated_elsewhere = (0..correlation.len())
            .any(|m| m != noise && m != variance_noise && rho(m, noise) != 0.0);
        if !alone || correlated_elsewhere {
            continue;
        }
        driven.push((
            j,
            VarianceDriven {
                variance,
                noise,
                drift_constant: form.drift_constant,
                drift_slope: form.drift_slope,
                loading,
                correlation: rho(noise, variance_noise),
                price: form.price,
            },
        ));
    }
    // Two log-prices on correlated noises would need their joint law: keep them on Euler.
    let independent = driven.iter().all(|(a, da)| {
        driven
            .iter()
            .all(|(b, db)| a == b || (da.noise != db.noise && rho(da.noise, db.noise) == 0.0))
    });
    if independent {
        driven
    } else {
        Vec::new()
    }
}
