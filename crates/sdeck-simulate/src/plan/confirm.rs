//! The plan held to the calculus layer's classification.

use super::shapes::root_states;
use super::{plan_from_model, ExactLaw, Plan, Scheme};
use sdeck_calculus::laws::LawKind;
use sdeck_calculus::Derivation;
use sdeck_semantics::Model;

/// Relative agreement required between the calculus layer's numbers and the equations'.
const AGREEMENT: f64 = 1e-9;

fn agree(x: f64, y: f64) -> bool {
    (x - y).abs() <= AGREEMENT * x.abs().max(y.abs()).max(1e-300)
}

/// Chooses a scheme for every state from the calculus layer's classification: a state gets
/// an exact transition only when its family has one (Gaussian for arithmetic-Brownian,
/// Ornstein–Uhlenbeck, linear with additive noise and linear-system; lognormal for
/// geometric-Brownian; noncentral chi-square for square-root) and the equations confirm
/// the numbers. Every other state is simulated with Euler–Maruyama.
pub fn plan(model: &Model, derivation: &Derivation) -> Plan {
    let mut plan = plan_from_model(model);
    // Which exact steps the calculus's classification allows for factor `i`.
    let allows = |i: usize, step: LawKind| {
        derivation
            .states
            .get(i)
            .is_some_and(|law| law.family.step_laws().contains(&step))
    };
    let mut to_euler = Vec::new();

    if let Some(group) = &plan.gaussian_group {
        let families_agree = group.states.iter().all(|&i| allows(i, LawKind::Normal));
        // When the calculus gives the drift matrix of the whole system, it must match.
        let matrix_agrees = match &derivation.drift_matrix {
            Some(matrix) if group.states.len() == model.factors.len() => {
                group.states.iter().enumerate().all(|(a, _)| {
                    group.drift[a].iter().enumerate().all(|(b, value)| {
                        matrix
                            .get(a)
                            .and_then(|row| row.get(b))
                            .is_some_and(|m| agree(*m, *value))
                    })
                })
            }
            _ => true,
        };
        if !(families_agree && matrix_agrees) {
            to_euler.extend(group.states.iter().copied());
            plan.gaussian_group = None;
        }
    }

    for i in 0..plan.schemes.len() {
        let law = derivation.states.get(i);
        match &mut plan.schemes[i] {
            Scheme::Exact(ExactLaw::Lognormal { .. }) => {
                if !allows(i, LawKind::Lognormal) {
                    to_euler.push(i);
                }
            }
            Scheme::Exact(ExactLaw::SquareRoot { speed, level, vol }) => {
                match law
                    .and_then(|l| l.square_root.as_ref())
                    .filter(|_| allows(i, LawKind::NoncentralChiSquare))
                {
                    Some(params)
                        if agree(params.speed, *speed)
                            && agree(params.level, *level)
                            && agree(params.vol.abs(), *vol) =>
                    {
                        (*speed, *level, *vol) = (params.speed, params.level, params.vol.abs());
                    }
                    _ => to_euler.push(i),
                }
            }
            Scheme::Exact(ExactLaw::LinearGaussian) | Scheme::VarianceDriven(_) | Scheme::Euler => {
            }
        }
    }
    // A log-price whose variance lost its exact step goes to Euler with it.
    for i in 0..plan.schemes.len() {
        if let Scheme::VarianceDriven(driven) = &plan.schemes[i] {
            if to_euler.contains(&driven.variance) {
                to_euler.push(i);
            }
        }
    }
    demote(model, &mut plan, to_euler);
    plan
}

/// Moves the states `to_euler` to Euler–Maruyama with a note, and sets truncation anew.
fn demote(model: &Model, plan: &mut Plan, to_euler: Vec<usize>) {
    let names: Vec<&str> = to_euler
        .iter()
        .filter_map(|i| model.factors.get(*i).map(|s| s.name.as_str()))
        .collect();
    if !names.is_empty() {
        plan.notes.push(format!(
            "the classification of {} does not confirm the shape read from the equations; simulated with Euler–Maruyama",
            names.iter().map(|n| format!("`{n}`")).collect::<Vec<_>>().join(", ")
        ));
    }
    for i in to_euler {
        if let Some(scheme) = plan.schemes.get_mut(i) {
            *scheme = Scheme::Euler;
        }
    }
    // Euler states under a root now need truncation.
    let roots = root_states(model);
    for ((flag, scheme), root) in plan.truncated.iter_mut().zip(&plan.schemes).zip(roots) {
        *flag = root && !scheme.is_exact();
    }
}
