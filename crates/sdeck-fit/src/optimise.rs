//! Minimisation that respects declared bounds: each parameter is mapped to an
//! unconstrained coordinate (a logarithm above a lower bound, a logistic between two), the
//! simplex method of `argmin` searches there, and Newton steps on the finite-difference
//! Hessian polish the optimum in the parameters themselves.

use argmin::core::{CostFunction, Error, Executor, State};
use argmin::solver::neldermead::NelderMead;
use nalgebra::{DMatrix, DVector};
use sdeck_semantics::Interval;

/// How one parameter maps to its unconstrained coordinate.
#[derive(Clone, Copy, Debug)]
pub(crate) enum Transform {
    /// θ = scale · u.
    Free { scale: f64 },
    /// θ = lo + e^u.
    Above { lo: f64 },
    /// θ = hi − e^u.
    Below { hi: f64 },
    /// θ = lo + (hi − lo) / (1 + e^{−u}).
    Between { lo: f64, hi: f64 },
}

impl Transform {
    pub(crate) fn new(bound: Option<&Interval>, start: f64) -> Transform {
        let lo = bound.and_then(|b| b.lower).map(|(v, _)| v);
        let hi = bound.and_then(|b| b.upper).map(|(v, _)| v);
        match (lo, hi) {
            (Some(lo), Some(hi)) if hi > lo => Transform::Between { lo, hi },
            (Some(lo), _) => Transform::Above { lo },
            (_, Some(hi)) => Transform::Below { hi },
            _ => Transform::Free {
                scale: if start.abs() > 0.0 { start.abs() } else { 1.0 },
            },
        }
    }

    pub(crate) fn to_param(self, u: f64) -> f64 {
        match self {
            Transform::Free { scale } => scale * u,
            Transform::Above { lo } => lo + u.exp(),
            Transform::Below { hi } => hi - u.exp(),
            Transform::Between { lo, hi } => lo + (hi - lo) / (1.0 + (-u).exp()),
        }
    }

    /// The coordinate of θ, moved strictly inside the bounds first.
    pub(crate) fn to_coordinate(self, theta: f64) -> f64 {
        match self {
            Transform::Free { scale } => theta / scale,
            Transform::Above { lo } => {
                let gap = theta - lo;
                (if gap > 0.0 {
                    gap
                } else {
                    1e-3 * lo.abs().max(1e-3)
                })
                .ln()
            }
            Transform::Below { hi } => {
                let gap = hi - theta;
                (if gap > 0.0 {
                    gap
                } else {
                    1e-3 * hi.abs().max(1e-3)
                })
                .ln()
            }
            Transform::Between { lo, hi } => {
                let p = ((theta - lo) / (hi - lo)).clamp(1e-6, 1.0 - 1e-6);
                (p / (1.0 - p)).ln()
            }
        }
    }

    /// Whether θ lies within the (open or closed) bounds the transform keeps.
    pub(crate) fn admits(self, theta: f64) -> bool {
        theta.is_finite()
            && match self {
                Transform::Free { .. } => true,
                Transform::Above { lo } => theta > lo,
                Transform::Below { hi } => theta < hi,
                Transform::Between { lo, hi } => theta > lo && theta < hi,
            }
    }
}

struct Problem<'a, F: Fn(&[f64]) -> f64> {
    cost: &'a F,
    transforms: &'a [Transform],
}

impl<F: Fn(&[f64]) -> f64> CostFunction for Problem<'_, F> {
    type Param = Vec<f64>;
    type Output = f64;

    fn cost(&self, u: &Self::Param) -> Result<f64, Error> {
        let theta: Vec<f64> = u
            .iter()
            .zip(self.transforms)
            .map(|(u, t)| t.to_param(*u))
            .collect();
        let c = (self.cost)(&theta);
        Ok(if c.is_finite() { c } else { f64::INFINITY })
    }
}

/// Minimises `cost` from `start` within the transforms' bounds by the simplex method;
/// returns the best parameters found.
pub(crate) fn simplex<F: Fn(&[f64]) -> f64>(
    cost: &F,
    transforms: &[Transform],
    start: &[f64],
    iterations: u64,
) -> Vec<f64> {
    let u0: Vec<f64> = start
        .iter()
        .zip(transforms)
        .map(|(x, t)| t.to_coordinate(*x))
        .collect();
    let mut vertices = vec![u0.clone()];
    for j in 0..u0.len() {
        let mut v = u0.clone();
        v[j] += if v[j].abs() > 1.0 {
            0.1 * v[j].abs()
        } else {
            0.1
        };
        vertices.push(v);
    }
    let c0 = cost(start);
    let tolerance = 1e-10 * c0.abs().max(1.0);
    let back = |u: &[f64]| -> Vec<f64> {
        u.iter()
            .zip(transforms)
            .map(|(u, t)| t.to_param(*u))
            .collect()
    };
    let Ok(solver) = NelderMead::new(vertices).with_sd_tolerance(tolerance) else {
        return start.to_vec();
    };
    let problem = Problem { cost, transforms };
    match Executor::new(problem, solver)
        .configure(|s| s.max_iters(iterations))
        .run()
    {
        Ok(result) => match result.state().get_best_param() {
            Some(u) if result.state().get_best_cost().is_finite() => back(u),
            _ => start.to_vec(),
        },
        Err(_) => start.to_vec(),
    }
}

/// Relative step of the finite-difference Hessian (the observed information). Its
/// truncation error is about the step squared (10⁻⁶), while the rounding noise of a
/// likelihood summed over thousands of observations (10⁻¹⁰ or so) divided by the step
/// squared stays below 10⁻⁴ of the curvature.
pub(crate) const HESSIAN_STEP: f64 = 1e-3;

/// Relative step of the gradient that decides where the Newton steps stop: small, since
/// the optimum is only as accurate as this gradient.
const GRADIENT_STEP: f64 = 1e-5;

fn step_of(theta: f64, relative: f64) -> f64 {
    relative * theta.abs().max(1e-8)
}

/// Gradient (central differences with relative step 10⁻⁵) and Hessian (relative step
/// `step`) of `f` at θ.
pub(crate) fn finite_differences<F: Fn(&[f64]) -> f64>(
    f: &F,
    theta: &[f64],
    step: f64,
) -> (DVector<f64>, DMatrix<f64>) {
    let k = theta.len();
    let f0 = f(theta);
    let at = |changes: &[(usize, f64)]| {
        let mut x = theta.to_vec();
        for (j, d) in changes {
            x[*j] += d;
        }
        f(&x)
    };
    let h: Vec<f64> = theta.iter().map(|x| step_of(*x, step)).collect();
    let mut gradient = DVector::zeros(k);
    let mut hessian = DMatrix::zeros(k, k);
    for i in 0..k {
        let g = step_of(theta[i], GRADIENT_STEP);
        gradient[i] = (at(&[(i, g)]) - at(&[(i, -g)])) / (2.0 * g);
        let plus = at(&[(i, h[i])]);
        let minus = at(&[(i, -h[i])]);
        hessian[(i, i)] = (plus - 2.0 * f0 + minus) / (h[i] * h[i]);
        for j in 0..i {
            let pp = at(&[(i, h[i]), (j, h[j])]);
            let pm = at(&[(i, h[i]), (j, -h[j])]);
            let mp = at(&[(i, -h[i]), (j, h[j])]);
            let mm = at(&[(i, -h[i]), (j, -h[j])]);
            let value = (pp - pm - mp + mm) / (4.0 * h[i] * h[j]);
            hessian[(i, j)] = value;
            hessian[(j, i)] = value;
        }
    }
    (gradient, hessian)
}

/// Gradient and Hessian of the cost at a point.
pub(crate) type Derivatives<'a> = dyn Fn(&[f64]) -> (DVector<f64>, DMatrix<f64>) + 'a;

/// Newton steps on the derivatives `derivatives` gives (exact, or finite differences of
/// the cost), halved until the cost falls and the bounds hold; stops when a step no
/// longer moves any parameter by more than 10⁻¹¹ relative. Returns the point and whether it converged so (a Hessian that is not
/// positive definite, a step that cannot lower the cost before that, or 30 steps, do not).
pub(crate) fn polish<F: Fn(&[f64]) -> f64>(
    cost: &F,
    derivatives: &Derivatives,
    transforms: &[Transform],
    start: Vec<f64>,
) -> (Vec<f64>, bool) {
    let mut theta = start;
    let mut current = cost(&theta);
    if !current.is_finite() {
        return (theta, false);
    }
    for _ in 0..30 {
        let (gradient, hessian) = derivatives(&theta);
        let Some(cholesky) = sdeck_calculus::symmetric::cholesky(&hessian) else {
            return (theta, false);
        };
        let step = cholesky.solve(&gradient);
        // A Newton step this small moves no digit that matters: θ is the optimum, and
        // the caller's derivatives there are the ones just computed.
        if theta
            .iter()
            .zip(step.iter())
            .all(|(a, s)| s.abs() <= 1e-11 * a.abs().max(1e-12))
        {
            return (theta, true);
        }
        let mut scale = 1.0;
        let mut moved = false;
        let mut small = false;
        for _ in 0..40 {
            let candidate: Vec<f64> = theta
                .iter()
                .zip(step.iter())
                .map(|(x, s)| x - scale * s)
                .collect();
            let inside = candidate.iter().zip(transforms).all(|(x, t)| t.admits(*x));
            if inside {
                let c = cost(&candidate);
                if c.is_finite() && c <= current {
                    // Converged when the step is tiny or the cost no longer falls beyond
                    // its rounding noise.
                    small = theta
                        .iter()
                        .zip(candidate.iter())
                        .all(|(a, b)| (a - b).abs() <= 1e-11 * a.abs().max(1e-12))
                        || current - c <= 1e-14 * current.abs().max(1.0);
                    theta = candidate;
                    current = c;
                    moved = true;
                    break;
                }
            }
            scale /= 2.0;
        }
        if small {
            return (theta, true);
        }
        if !moved {
            // No step lowers the cost: converged if the full step was already tiny.
            let tiny = theta
                .iter()
                .zip(step.iter())
                .all(|(a, s)| s.abs() <= 1e-9 * a.abs().max(1e-12));
            return (theta, tiny);
        }
    }
    (theta, false)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn transforms_round_trip_and_respect_bounds() {
        let cases = [
            (Transform::Free { scale: 2.0 }, -3.0),
            (Transform::Above { lo: 0.0 }, 0.25),
            (Transform::Below { hi: 1.0 }, -4.0),
            (Transform::Between { lo: -1.0, hi: 1.0 }, 0.3),
        ];
        for (t, x) in cases {
            assert!((t.to_param(t.to_coordinate(x)) - x).abs() < 1e-12);
            for u in [-700.0, -5.0, 0.0, 5.0, 30.0] {
                let theta = t.to_param(u);
                assert!(
                    !theta.is_finite()
                        || t.admits(theta)
                        || theta == 0.0
                        || theta == 1.0
                        || theta == -1.0
                );
            }
        }
    }

    #[test]
    fn finds_the_minimum_of_a_bounded_quadratic() {
        // Minimum at (2, 0.5); the second parameter is declared > 0.
        let cost = |x: &[f64]| (x[0] - 2.0).powi(2) + 10.0 * (x[1] - 0.5).powi(2) + x[0] * x[1];
        let transforms = [Transform::Free { scale: 1.0 }, Transform::Above { lo: 0.0 }];
        let differences = |x: &[f64]| finite_differences(&cost, x, HESSIAN_STEP);
        let (found, converged) = polish(
            &cost,
            &differences,
            &transforms,
            simplex(&cost, &transforms, &[0.1, 3.0], 2000),
        );
        assert!(converged);
        // ∂/∂x0: 2(x0−2) + x1 = 0, ∂/∂x1: 20(x1−0.5) + x0 = 0.
        let x1 = (10.0 - 2.0) / (20.0 - 0.5);
        let x0 = 2.0 - x1 / 2.0;
        assert!(
            (found[0] - x0).abs() < 1e-9 && (found[1] - x1).abs() < 1e-9,
            "{found:?}"
        );
    }

    #[test]
    fn a_minimum_beyond_the_bound_stays_inside() {
        let cost = |x: &[f64]| (x[0] + 1.0).powi(2);
        let transforms = [Transform::Above { lo: 0.0 }];
        let differences = |x: &[f64]| finite_differences(&cost, x, HESSIAN_STEP);
        let start = simplex(&cost, &transforms, &[1.0], 500);
        let (found, _) = polish(&cost, &differences, &transforms, start);
        assert!(found[0] > 0.0 && found[0] < 1e-3, "{found:?}");
    }
}
