//! Exact derivatives of the negative log-likelihood in the estimated parameters, where
//! the transition law has them.

use crate::law;
use crate::plan::Single;
use nalgebra::{DMatrix, DVector};
use sdeck_calculus::Family;

pub(crate) type Gradient = DVector<f64>;
pub(crate) type Hessian = DMatrix<f64>;

/// Relative step of the differences of the coefficients in the parameters.
const COEFFICIENT_STEP: f64 = 1e-4;

/// The exact gradient and Hessian of the negative log-likelihood in the estimated
/// parameters θ, when every fitted factor is square-root with constant coefficients: the
/// likelihood's own derivatives in the coefficients (a, b, β)
/// (`law::square_root_curvature`), carried to θ by the chain rule. The coefficients are
/// cheap functions of θ (products and squares of parameters) and their derivatives are
/// central differences, which are exact for the quadratics they usually are.
pub(crate) fn exact_derivatives(
    singles: &[Single],
    full: &dyn Fn(&[f64]) -> Vec<f64>,
    theta: &[f64],
) -> Option<(DVector<f64>, DMatrix<f64>)> {
    if singles
        .iter()
        .any(|s| s.family != Family::SquareRoot || s.form.time_dependent)
    {
        return None;
    }
    let k = theta.len();
    let h: Vec<f64> = theta
        .iter()
        .map(|x| COEFFICIENT_STEP * x.abs().max(1e-3))
        .collect();
    let mut gradient = DVector::zeros(k);
    let mut hessian = DMatrix::zeros(k, k);
    for single in singles {
        let coefficients = |changes: &[(usize, f64)]| {
            let mut x = theta.to_vec();
            for (j, d) in changes {
                x[*j] += d;
            }
            let v = single.form.at(&full(&x), 0.0);
            DVector::from_vec(vec![v.a, v.b, v.beta])
        };
        let centre = coefficients(&[]);
        let Some(&[a, b, beta]) = centre.as_slice().get(..3) else {
            return None;
        };
        let values = sdeck_calculus::coefficients::OneStateValues {
            a,
            b,
            alpha: 0.0,
            beta,
            gamma: 0.0,
        };
        let law = law::square_root_curvature(&values, &single.steps);
        if !law.value.is_finite() {
            return None;
        }
        let g = DVector::from_row_slice(&law.gradient);
        let hc = DMatrix::from_fn(3, 3, |r, c| law.hessian[r][c]);
        // Jacobian of the coefficients (3 × k) and their second derivatives.
        let mut jacobian = DMatrix::zeros(3, k);
        let mut second = DMatrix::zeros(k, k);
        for i in 0..k {
            let plus = coefficients(&[(i, h[i])]);
            let minus = coefficients(&[(i, -h[i])]);
            jacobian.set_column(i, &((&plus - &minus) / (2.0 * h[i])));
            second[(i, i)] = g.dot(&((&plus - 2.0 * &centre + &minus) / (h[i] * h[i])));
            for j in 0..i {
                let mixed = (coefficients(&[(i, h[i]), (j, h[j])])
                    - coefficients(&[(i, h[i]), (j, -h[j])])
                    - coefficients(&[(i, -h[i]), (j, h[j])])
                    + coefficients(&[(i, -h[i]), (j, -h[j])]))
                    / (4.0 * h[i] * h[j]);
                second[(i, j)] = g.dot(&mixed);
                second[(j, i)] = second[(i, j)];
            }
        }
        // The cost is the negative log-likelihood.
        gradient -= jacobian.transpose() * &g;
        hessian -= jacobian.transpose() * hc * &jacobian + second;
    }
    Some((gradient, hessian))
}
