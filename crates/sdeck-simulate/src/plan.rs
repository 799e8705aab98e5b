//! Choice of the scheme for each state: an exact transition where the law of a step is
//! known, Euler–Maruyama with full truncation otherwise.
//!
//! Exact steps are only used when they keep the joint law of the whole system right:
//! a linear Gaussian group or a square-root state draws its own normals, so it must not
//! share a noise (or a correlated noise) with a state simulated otherwise. The lognormal
//! step reuses the Brownian increments themselves and can share noises freely. A
//! square-root variance is autonomous, so it keeps its exact step when log-prices it
//! drives share or correlate with its noise: those take the log-price step of Andersen
//! (2008) over the exact variance path ([`VarianceDriven`]).

use crate::affine::{affine_form, scaled_square_root, AffineForm};
use crate::bytecode::mark_root_states;
use sdeck_calculus::laws::LawKind;
use sdeck_calculus::Derivation;
use sdeck_semantics::{Expr, Function, Model};

/// How one state advances over a step.
#[derive(Clone, Debug, PartialEq)]
pub enum Scheme {
    Exact(ExactLaw),
    /// A log-price driven by a square-root variance sampled exactly.
    VarianceDriven(VarianceDriven),
    /// Euler–Maruyama; coefficients read max(x, 0) for the states in [`Plan::truncated`].
    Euler,
}

/// dX = (drift_constant + drift_slope · V) dt + loading · √V dW_X with corr(W_X, W_V) =
/// `correlation`, V a square-root state simulated exactly. The step is Andersen's
/// (L. Andersen 2008, "Simple and efficient simulation of the Heston stochastic volatility
/// model", Journal of Computational Finance 11(3), eq. (33) with γ₁ = γ₂ = ½):
/// ∫√V dW_V is read off the exact variance step, ∫V ds is the trapezoid rule, and the
/// part of the noise orthogonal to W_V is Gaussian given the variance path.
#[derive(Clone, Debug, PartialEq)]
pub struct VarianceDriven {
    /// Index of the square-root state.
    pub variance: usize,
    /// The state's own noise (its orthogonal part is drawn from this noise's normals).
    pub noise: usize,
    pub drift_constant: f64,
    pub drift_slope: f64,
    pub loading: f64,
    pub correlation: f64,
}

/// A transition law sampled exactly.
#[derive(Clone, Debug, PartialEq)]
pub enum ExactLaw {
    /// Member of [`Plan::gaussian_group`]: Gaussian step with exact mean and covariance.
    LinearGaussian,
    /// dX = growth X dt + Σ loading_k X dW_k: lognormal step.
    Lognormal {
        growth: f64,
        loadings: Vec<(usize, f64)>,
    },
    /// dX = speed (level − X) dt + vol √X dW: noncentral chi-square step.
    SquareRoot { speed: f64, level: f64, vol: f64 },
}

/// The states whose joint law is Gaussian with constant coefficients:
/// dX_G = (drift X_G + constant) dt + loadings dW.
#[derive(Clone, Debug, PartialEq)]
pub struct GaussianGroup {
    /// Indices into the model's states, in declaration order.
    pub states: Vec<usize>,
    /// `states.len()` × `states.len()`.
    pub drift: Vec<Vec<f64>>,
    pub constant: Vec<f64>,
    /// `states.len()` × number of noises.
    pub loadings: Vec<Vec<f64>>,
}

/// The simulation plan of a model.
#[derive(Clone, Debug, PartialEq)]
pub struct Plan {
    /// One scheme per state, declaration order.
    pub schemes: Vec<Scheme>,
    pub gaussian_group: Option<GaussianGroup>,
    /// States read as max(x, 0) inside Euler coefficients and reported as such (full
    /// truncation, Lord, Koekkoek & van Dijk 2010, Quantitative Finance 10(2)).
    pub truncated: Vec<bool>,
    /// Why a state got a less exact scheme than its family suggests, for the report.
    pub notes: Vec<String>,
}

impl Scheme {
    /// A short description for reports: "exact (noncentral chi-square)", "Euler–Maruyama".
    pub fn describe(&self) -> &'static str {
        match self {
            Scheme::Exact(ExactLaw::LinearGaussian) => "exact (Gaussian)",
            Scheme::Exact(ExactLaw::Lognormal { .. }) => "exact (lognormal)",
            Scheme::Exact(ExactLaw::SquareRoot { .. }) => "exact (noncentral chi-square)",
            Scheme::VarianceDriven(_) => "log-price step over the exact variance (Andersen 2008)",
            Scheme::Euler => "Euler–Maruyama",
        }
    }

    pub fn is_exact(&self) -> bool {
        matches!(self, Scheme::Exact(_))
    }

    /// Whether the figures of a state on this scheme carry a discretisation bias.
    pub fn is_discretised(&self) -> bool {
        !self.is_exact()
    }
}

impl Plan {
    /// Every state on Euler–Maruyama (for comparisons and for models the calculus could not
    /// classify).
    pub fn all_euler(model: &Model) -> Plan {
        Plan {
            schemes: vec![Scheme::Euler; model.factors.len()],
            gaussian_group: None,
            truncated: root_states(model),
            notes: Vec::new(),
        }
    }

    /// Human-readable scheme of state `index`, with the truncation noted.
    pub fn describe_state(&self, index: usize) -> String {
        match self.schemes.get(index) {
            Some(Scheme::Euler) if self.truncated.get(index).copied().unwrap_or(false) => {
                "Euler–Maruyama, full truncation".to_string()
            }
            Some(scheme) => scheme.describe().to_string(),
            None => "none".to_string(),
        }
    }

    /// Whether any state is simulated with a discretised scheme (its figures then carry a
    /// bias that step doubling estimates).
    pub fn has_discretised(&self) -> bool {
        self.schemes.iter().any(Scheme::is_discretised)
    }
}

/// States that Euler–Maruyama reads as max(x, 0) (full truncation). A state qualifies when
/// it appears under `sqrt`, `log` or a fractional power and either
/// - that argument is affine with non-negative constant and positive coefficients
///   (`sqrt(v)`, `sqrt(theta * v)`, `x^1.5`): reading x⁺ keeps the argument in its domain; or
/// - the state's declared domain has a lower bound at or above 0 (`factor v = 4% >= 0`):
///   reading x⁺ keeps to the declared domain.
///
/// A state that may be negative and appears only under a root whose argument stays
/// positive anyway (`sqrt(1 + p^2)`) is left alone: truncating it would change the model.
fn root_states(model: &Model) -> Vec<bool> {
    let n = model.factors.len();
    let params = model.param_values();
    let mut under_root = vec![false; n];
    let mut affine_argument = vec![false; n];
    for state in &model.factors {
        if let Some(equation) = &state.equation {
            let coefficients = std::iter::once(&equation.drift)
                .chain(equation.diffusion.iter().map(|term| &term.coefficient));
            for expr in coefficients {
                mark_root_states(expr, &mut under_root);
                mark_affine_root_arguments(expr, &params, &mut affine_argument);
            }
        }
    }
    (0..n)
        .map(|i| {
            let declared_non_negative = model.factors[i]
                .domain
                .lower
                .is_some_and(|(bound, _)| bound >= 0.0);
            affine_argument[i] || (under_root[i] && declared_non_negative)
        })
        .collect()
}

/// Marks the states of every root argument that is affine with a non-negative constant
/// and positive coefficients.
fn mark_affine_root_arguments(expr: &Expr, params: &[f64], marks: &mut [bool]) {
    let n = marks.len();
    let mark_argument = |argument: &Expr, marks: &mut [bool]| {
        if let Some(form) = affine_form(argument, params, n) {
            let positive = form.constant >= 0.0 && form.coefficients.iter().all(|c| *c >= 0.0);
            if positive {
                for (mark, c) in marks.iter_mut().zip(&form.coefficients) {
                    *mark |= *c > 0.0;
                }
            }
        }
    };
    match expr {
        Expr::Call(Function::Sqrt | Function::Log, args) => {
            if let Some(argument) = args.first() {
                mark_argument(argument, marks);
            }
        }
        Expr::Pow(base, exponent) => {
            let integer = matches!(affine_form(exponent, params, n), Some(f) if f.is_constant() && f.constant.fract() == 0.0);
            if !integer {
                mark_argument(base, marks);
            }
        }
        _ => {}
    }
    expr.for_each_child(|child| mark_affine_root_arguments(child, params, marks));
}

/// What the equations say about each state, read structurally.
struct StateShape {
    drift: Option<AffineForm>,
    /// `(noise, form)` per diffusion term; `None` when some term is not affine.
    diffusion: Option<Vec<(usize, AffineForm)>>,
    noises: Vec<usize>,
    square_root: Option<(usize, f64)>,
    /// `(noise, c, j)` when the one diffusion term is c·√x_j of another state j.
    variance_root: Option<(usize, f64, usize)>,
}

fn read_shapes(model: &Model) -> Vec<Option<StateShape>> {
    let params = model.param_values();
    let n = model.factors.len();
    model
        .factors
        .iter()
        .enumerate()
        .map(|(index, state)| {
            let equation = state.equation.as_ref()?;
            let drift = affine_form(&equation.drift, &params, n);
            let diffusion = equation
                .diffusion
                .iter()
                .map(|term| {
                    affine_form(&term.coefficient, &params, n)
                        .map(|form| (term.noise.index(), form))
                })
                .collect::<Option<Vec<_>>>();
            // Only a square root of the state itself counts.
            let root = match equation.diffusion.as_slice() {
                [term] => scaled_square_root(&term.coefficient, &params, n)
                    .map(|(vol, root_state)| (term.noise.index(), vol, root_state)),
                _ => None,
            };
            let square_root = root
                .filter(|(_, _, root_state)| *root_state == index)
                .map(|(noise, vol, _)| (noise, vol));
            let variance_root = root.filter(|(_, _, root_state)| *root_state != index);
            Some(StateShape {
                drift,
                diffusion,
                noises: equation.diffusion.iter().map(|t| t.noise.index()).collect(),
                square_root,
                variance_root,
            })
        })
        .collect()
}

/// Whether the noises `own` are disjoint from, and uncorrelated with, the noises `others`.
fn noises_exclusive(own: &[usize], others: &[usize], correlation: &[Vec<f64>]) -> bool {
    own.iter().all(|k| {
        others.iter().all(|j| {
            k != j
                && correlation
                    .get(*k)
                    .and_then(|row| row.get(*j))
                    .is_none_or(|rho| *rho == 0.0)
        })
    })
}

/// The states that are log-prices driven by the square-root state `variance` (noise
/// `variance_noise`): dX = (a + b V) dt + c √V dW_X, read structurally, each with a noise
/// of its own that no other state uses and that correlates with no noise but the
/// variance's. A state that reads the variance in another way keeps its scheme.
fn driven_by(
    variance: usize,
    variance_noise: usize,
    shapes: &[Option<StateShape>],
    schemes: &[Scheme],
    correlation: &[Vec<f64>],
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
        let Some(drift) = shape.drift.as_ref() else {
            continue;
        };
        let Some((noise, loading, root_state)) = shape.variance_root else {
            continue;
        };
        if root_state != variance || loading == 0.0 || !drift.involves_only(variance) {
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
                drift_constant: drift.constant,
                drift_slope: drift.coefficients.get(variance).copied().unwrap_or(0.0),
                loading,
                correlation: rho(noise, variance_noise),
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

/// Chooses a scheme for every state from the equations alone.
pub fn plan_from_model(model: &Model) -> Plan {
    let n = model.factors.len();
    let shapes = read_shapes(model);
    let correlation = model.correlation_matrix();
    let mut schemes = vec![Scheme::Euler; n];

    // Linear Gaussian candidates: affine drift, constant diffusion; then drop, until
    // nothing changes, every candidate whose drift reads a non-candidate.
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
    let noises_of = |select: &dyn Fn(usize) -> bool| -> Vec<usize> {
        (0..n)
            .filter(|i| select(*i))
            .filter_map(|i| shapes[i].as_ref())
            .flat_map(|s| s.noises.iter().copied())
            .collect()
    };
    let group_noises = noises_of(&|i| in_group[i]);
    let other_noises = noises_of(&|i| !in_group[i]);
    let mut gaussian_group = None;
    if in_group.iter().any(|g| *g) && noises_exclusive(&group_noises, &other_noises, &correlation) {
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
        gaussian_group = Some(GaussianGroup {
            states,
            drift,
            constant,
            loadings,
        });
    }

    for i in 0..n {
        if schemes[i].is_exact() {
            continue;
        }
        let Some(shape) = shapes[i].as_ref() else {
            continue;
        };
        let Some(drift) = shape.drift.as_ref() else {
            continue;
        };
        if !drift.involves_only(i) {
            continue;
        }
        let own_slope = drift.coefficients.get(i).copied().unwrap_or(0.0);
        // Square root: drift a + b x with b < 0, a >= 0, its noise shared or correlated
        // only with the log-prices it drives.
        if let Some((noise, vol)) = shape.square_root {
            if own_slope < 0.0 && drift.constant >= 0.0 && vol != 0.0 {
                let driven = driven_by(i, noise, &shapes, &schemes, &correlation);
                let outside = noises_of(&|j| j != i && !driven.iter().any(|d| d.0 == j));
                if noises_exclusive(&[noise], &outside, &correlation) {
                    let speed = -own_slope;
                    schemes[i] = Scheme::Exact(ExactLaw::SquareRoot {
                        speed,
                        level: drift.constant / speed,
                        vol: vol.abs(),
                    });
                    for (j, step) in driven {
                        schemes[j] = Scheme::VarianceDriven(step);
                    }
                    continue;
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
                            .map(|(noise, f)| {
                                (*noise, f.coefficients.get(i).copied().unwrap_or(0.0))
                            })
                            .collect(),
                    });
                }
            }
        }
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
    plan
}
