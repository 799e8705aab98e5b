//! The choice of schemes from the equations alone.

use super::driven::driven_by;
use super::shapes::{noises_exclusive, read_shapes, root_states, StateShape};
use super::{ExactLaw, GaussianGroup, Plan, Scheme};
use sdeck_semantics::Model;

/// Chooses a scheme for every state from the equations alone.
pub fn plan_from_model(model: &Model) -> Plan {
    let n = model.factors.len();
    let shapes = read_shapes(model);
    let correlation = model.correlation_matrix();
    let initial = model.initial_values();
    let mut schemes = vec![Scheme::Euler; n];
    let gaussian_group = gaussian_group(model, &shapes, &correlation, &mut schemes);
    for i in 0..n {
        one_state_scheme(i, &shapes, &correlation, &initial, &mut schemes);
    }
    let mut truncated = root_states(model);
    for (flag, scheme) in truncated.iter_mut().zip(&schemes) {
        // Exact laws stay in their domain by construction.
        if scheme.is_exact() {
            *flag = false;
        }
    }
    Plan {
        schemes,
        gaussian_group,
        truncated,
        notes: Vec::new(),
    }
}

/// The noises of the states that `select` picks.
fn noises_of(shapes: &[Option<StateShape>], select: &dyn Fn(usize) -> bool) -> Vec<usize> {
    (0..shapes.len())
        .filter(|i| select(*i))
        .filter_map(|i| shapes[i].as_ref())
        .flat_map(|s| s.noises.iter().copied())
        .collect()
}

/// The linear Gaussian group, when its noises are its own; its members' schemes are set.
fn gaussian_group(
    model: &Model,
    shapes: &[Option<StateShape>],
    correlation: &[Vec<f64>],
    schemes: &mut [Scheme],
) -> Option<GaussianGroup> {
    let n = shapes.len();
    let in_group = group_candidates(shapes);
    let group_noises = noises_of(shapes, &|i| in_group[i]);
    let other_noises = noises_of(shapes, &|i| !in_group[i]);
    if !(in_group.iter().any(|g| *g) && noises_exclusive(&group_noises, &other_noises, correlation))
    {
        return None;
    }
    {
        let states: Vec<usize> = (0..n).filter(|i| in_group[*i]).collect();
        let mut drift = Vec::with_capacity(states.len());
        let mut constant = Vec::with_capacity(states.len());
        let mut loadings = Vec::with_capacity(states.len());
        for &i in &states {
            let Some(shape) = shapes[i].as_ref() else {
                continue;
            };
            let Some(form) = shape.drift.as_ref() else {
                continue;
            };
            drift.push(states.iter().map(|j| form.coefficients[*j]).collect());
            constant.push(form.constant);
            let mut row = vec![0.0; model.shocks.len()];
            for (noise, term) in shape.diffusion.iter().flatten() {
                if let Some(slot) = row.get_mut(*noise) {
                    *slot += term.constant;
                }
            }
            loadings.push(row);
            schemes[i] = Scheme::Exact(ExactLaw::LinearGaussian);
        }
        Some(GaussianGroup {
            states,
            drift,
            constant,
            loadings,
        })
    }
}

/// Linear Gaussian candidates: affine drift, constant diffusion; then dropped, until
/// nothing changes, every candidate whose drift reads a non-candidate.
fn group_candidates(shapes: &[Option<StateShape>]) -> Vec<bool> {
    let n = shapes.len();
    let mut in_group: Vec<bool> = shapes
        .iter()
        .map(|shape| {
            shape.as_ref().is_some_and(|s| {
                s.drift.is_some()
                    && s.diffusion
                        .as_ref()
                        .is_some_and(|terms| terms.iter().all(|(_, f)| f.is_constant()))
            })
        })
        .collect();
    loop {
        let mut changed = false;
        for i in 0..n {
            if !in_group[i] {
                continue;
            }
            let reads_outside = shapes[i]
                .as_ref()
                .and_then(|s| s.drift.as_ref())
                .is_none_or(|drift| {
                    drift
                        .coefficients
                        .iter()
                        .enumerate()
                        .any(|(j, c)| *c != 0.0 && !in_group[j])
                });
            if reads_outside {
                in_group[i] = false;
                changed = true;
            }
        }
        if !changed {
            break;
        }
    }
    in_group
}

/// The exact one-state scheme of state `i`, if any: square root (with the log-prices it
/// drives) or lognormal.
fn one_state_scheme(
    i: usize,
    shapes: &[Option<StateShape>],
    correlation: &[Vec<f64>],
    initial: &[f64],
    schemes: &mut [Scheme],
) {
    if schemes[i].is_exact() {
        return;
    }
    let Some(shape) = shapes[i].as_ref() else {
        return;
    };
    let Some(drift) = shape.drift.as_ref() else {
        return;
    };
    if !drift.involves_only(i) {
        return;
    }
    let own_slope = drift.coefficients.get(i).copied().unwrap_or(0.0);
    // Square root: drift a + b x with b < 0, a >= 0, its noise shared or correlated
    // only with the log-prices it drives.
    if let Some((noise, vol)) = shape.square_root {
        if own_slope < 0.0 && drift.constant >= 0.0 && vol != 0.0 {
            let driven = driven_by(i, noise, shapes, schemes, correlation, initial);
            let outside = noises_of(shapes, &|j| j != i && !driven.iter().any(|d| d.0 == j));
            if noises_exclusive(&[noise], &outside, correlation) {
                let speed = -own_slope;
                schemes[i] = Scheme::Exact(ExactLaw::SquareRoot {
                    speed,
                    level: drift.constant / speed,
                    vol: vol.abs(),
                });
                for (j, step) in driven {
                    schemes[j] = Scheme::VarianceDriven(step);
                }
                return;
            }
        }
    }
    // Geometric Brownian: no constant parts, only the state itself.
    if drift.constant == 0.0 {
        if let Some(terms) = shape.diffusion.as_ref() {
            let proportional = terms
                .iter()
                .all(|(_, f)| f.constant == 0.0 && f.involves_only(i));
            if proportional && !terms.is_empty() {
                schemes[i] = Scheme::Exact(ExactLaw::Lognormal {
                    growth: own_slope,
                    loadings: terms
                        .iter()
                        .map(|(noise, f)| (*noise, f.coefficients.get(i).copied().unwrap_or(0.0)))
                        .collect(),
                });
            }
        }
    }
}
