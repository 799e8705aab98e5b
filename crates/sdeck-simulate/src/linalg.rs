//! Matrix pieces of the engine: square-root factors of covariance and correlation
//! matrices, and the exact one-step transition of a linear Gaussian system (Van Loan).

use nalgebra::{DMatrix, DVector, SymmetricEigen};

/// A factor `L` with `L Lᵀ` equal to the matrix asked for (or to its nearest
/// positive semi-definite repair), and whether a repair was needed.
#[derive(Clone, Debug, PartialEq)]
pub struct Factor {
    pub lower: DMatrix<f64>,
    pub repaired: bool,
    /// The matrix that `lower` actually reproduces.
    pub effective: DMatrix<f64>,
}

/// Relative size below which a negative eigenvalue counts as round-off.
const EIGENVALUE_TOLERANCE: f64 = 1e-12;

/// Factor of a covariance matrix that may be singular (a state without noise, two states
/// driven by one noise). Cholesky when it succeeds, otherwise an eigen-decomposition with
/// negative eigenvalues set to zero.
pub fn covariance_factor(matrix: &DMatrix<f64>) -> Factor {
    let symmetric = (matrix + matrix.transpose()) * 0.5;
    if let Some(cholesky) = symmetric.clone().cholesky() {
        return Factor {
            lower: cholesky.l(),
            repaired: false,
            effective: symmetric,
        };
    }
    let eigen = SymmetricEigen::new(symmetric.clone());
    let largest = eigen.eigenvalues.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let repaired = eigen
        .eigenvalues
        .iter()
        .any(|v| *v < -EIGENVALUE_TOLERANCE * largest.max(1.0));
    let roots = eigen.eigenvalues.map(|v| v.max(0.0).sqrt());
    let lower = &eigen.eigenvectors * DMatrix::from_diagonal(&roots);
    let effective = &lower * lower.transpose();
    Factor {
        lower,
        repaired,
        effective: if repaired { effective } else { symmetric },
    }
}

/// Factor of a correlation matrix. When it is not positive semi-definite, its negative
/// eigenvalues are clipped to zero and the result is rescaled to a unit diagonal
/// (a simple repair, common practice, no source); `repaired` says so.
pub fn correlation_factor(matrix: &DMatrix<f64>) -> Factor {
    let factor = covariance_factor(matrix);
    if !factor.repaired {
        return factor;
    }
    let diagonal = factor.effective.diagonal();
    let scale = diagonal.map(|d| if d > 0.0 { 1.0 / d.sqrt() } else { 0.0 });
    let lower = DMatrix::from_diagonal(&scale) * &factor.lower;
    let effective = &lower * lower.transpose();
    Factor {
        lower,
        repaired: true,
        effective,
    }
}

/// Exact transition of dX = (A X + b) dt + dM with noise covariance Q dt over a step Δ:
/// X_{k+1} = transition · X_k + shift + noise_factor · Z, Z standard normal.
#[derive(Clone, Debug, PartialEq)]
pub struct GaussianStep {
    pub transition: DMatrix<f64>,
    pub shift: DVector<f64>,
    pub noise_factor: DMatrix<f64>,
}

/// Builds the exact step with Van Loan's block exponential (Van Loan 1978, IEEE Trans.
/// Automatic Control 23(3), "Computing integrals involving the matrix exponential", §2):
/// exp([[-A, Q], [0, Aᵀ]] h) = [[·, G], [0, F]] gives e^{Ah} = Fᵀ and the step covariance
/// P(h) = ∫₀^h e^{As} Q e^{Aᵀs} ds = Fᵀ G. The shift ∫₀^h e^{As} b ds is the last column of
/// exp([[A, b], [0, 0]] h).
///
/// The block holds both e^{−Ah} and e^{Ah}, which overflow when ‖A‖h is large (a fast
/// mean reversion over a long step). So the blocks are built for h = Δ/2^k with ‖A‖h ≤ 1
/// and doubled k times with the exact semigroup rules T(2h) = T(h)²,
/// shift(2h) = shift(h) + T(h) shift(h), P(2h) = P(h) + T(h) P(h) T(h)ᵀ.
pub fn gaussian_step(
    drift: &DMatrix<f64>,
    constant: &DVector<f64>,
    noise_covariance: &DMatrix<f64>,
    step: f64,
) -> GaussianStep {
    let norm = drift
        .row_iter()
        .map(|row| row.iter().map(|v| v.abs()).sum::<f64>())
        .fold(0.0f64, f64::max);
    let mut doublings = 0u32;
    let mut small_step = step;
    // At most 60 halvings: beyond that the step is below any meaningful time scale.
    while norm * small_step > 1.0 && doublings < 60 {
        small_step *= 0.5;
        doublings += 1;
    }
    let (mut transition, mut shift, mut covariance) =
        van_loan(drift, constant, noise_covariance, small_step);
    for _ in 0..doublings {
        shift = &shift + &transition * &shift;
        covariance = &covariance + &transition * &covariance * transition.transpose();
        transition = &transition * &transition;
    }
    GaussianStep {
        transition,
        shift,
        noise_factor: covariance_factor(&covariance).lower,
    }
}

/// Transition, shift and covariance of one step `h` by Van Loan's block exponentials.
fn van_loan(
    drift: &DMatrix<f64>,
    constant: &DVector<f64>,
    noise_covariance: &DMatrix<f64>,
    h: f64,
) -> (DMatrix<f64>, DVector<f64>, DMatrix<f64>) {
    let n = drift.nrows();
    let mut block = DMatrix::zeros(2 * n, 2 * n);
    block.view_mut((0, 0), (n, n)).copy_from(&(-drift * h));
    block
        .view_mut((0, n), (n, n))
        .copy_from(&(noise_covariance * h));
    block
        .view_mut((n, n), (n, n))
        .copy_from(&(drift.transpose() * h));
    let exponential = block.exp();
    let f = exponential.view((n, n), (n, n)).into_owned();
    let g = exponential.view((0, n), (n, n)).into_owned();
    let transition = f.transpose();
    let covariance = &transition * g;
    let covariance = (&covariance + covariance.transpose()) * 0.5;

    let mut augmented = DMatrix::zeros(n + 1, n + 1);
    augmented.view_mut((0, 0), (n, n)).copy_from(&(drift * h));
    augmented
        .view_mut((0, n), (n, 1))
        .copy_from(&(constant * h));
    let augmented_exponential = augmented.exp();
    let shift = augmented_exponential
        .view((0, n), (n, 1))
        .column(0)
        .into_owned();
    (transition, shift, covariance)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_state_step_matches_the_ornstein_uhlenbeck_transition() {
        // dX = κ(θ − X) dt + σ dW: transition e^{−κΔ}, shift θ(1 − e^{−κΔ}),
        // variance σ²(1 − e^{−2κΔ})/(2κ) (Vasicek 1977, J. Financial Economics 5, §4).
        let (kappa, theta, sigma, step) = (1.8, 0.032, 0.15, 0.25);
        let result = gaussian_step(
            &DMatrix::from_element(1, 1, -kappa),
            &DVector::from_element(1, kappa * theta),
            &DMatrix::from_element(1, 1, sigma * sigma),
            step,
        );
        let decay = (-kappa * step).exp();
        assert!((result.transition[(0, 0)] - decay).abs() < 1e-13);
        assert!((result.shift[0] - theta * (1.0 - decay)).abs() < 1e-13);
        let variance = sigma * sigma * (1.0 - (-2.0 * kappa * step).exp()) / (2.0 * kappa);
        assert!((result.noise_factor[(0, 0)].powi(2) - variance).abs() < 1e-13);
    }

    #[test]
    fn two_state_covariance_matches_the_correlated_ou_formula() {
        // Two independent-drift OU states on noises with correlation ρ:
        // Cov = ρ σ1 σ2 (1 − e^{−(κ1+κ2)Δ})/(κ1+κ2) (Brigo & Mercurio 2006, Interest Rate
        // Models, §4.2, the G2++ covariance of x and y).
        let (k1, k2, s1, s2, rho, step) = (0.9, 0.2, 0.01, 0.008, -0.6, 1.5);
        let drift = DMatrix::from_row_slice(2, 2, &[-k1, 0.0, 0.0, -k2]);
        let q = DMatrix::from_row_slice(2, 2, &[s1 * s1, rho * s1 * s2, rho * s1 * s2, s2 * s2]);
        let result = gaussian_step(&drift, &DVector::zeros(2), &q, step);
        let p = &result.noise_factor * result.noise_factor.transpose();
        let expected = rho * s1 * s2 * (1.0 - (-(k1 + k2) * step).exp()) / (k1 + k2);
        assert!(
            (p[(0, 1)] - expected).abs() < 1e-15,
            "{} vs {expected}",
            p[(0, 1)]
        );
        let expected_first = s1 * s1 * (1.0 - (-2.0 * k1 * step).exp()) / (2.0 * k1);
        assert!((p[(0, 0)] - expected_first).abs() < 1e-15);
    }

    #[test]
    fn long_steps_of_fast_mean_reversion_stay_finite_and_exact() {
        // κΔ = 1000: the plain block exponential would overflow. Same Vasicek formulas.
        let (kappa, theta, sigma, step) = (365.0, 0.02, 0.5, 2.74);
        let result = gaussian_step(
            &DMatrix::from_element(1, 1, -kappa),
            &DVector::from_element(1, kappa * theta),
            &DMatrix::from_element(1, 1, sigma * sigma),
            step,
        );
        let decay = (-kappa * step).exp();
        assert!((result.transition[(0, 0)] - decay).abs() < 1e-15);
        assert!((result.shift[0] - theta * (1.0 - decay)).abs() < 1e-15);
        let variance = sigma * sigma * (1.0 - (-2.0 * kappa * step).exp()) / (2.0 * kappa);
        let got = result.noise_factor[(0, 0)].powi(2);
        assert!(
            (got - variance).abs() < 1e-12 * variance,
            "{got} vs {variance}"
        );
    }

    #[test]
    fn arithmetic_brownian_step_has_linear_shift_and_variance() {
        // A = 0: shift b Δ and variance σ² Δ (common practice, no source).
        let result = gaussian_step(
            &DMatrix::zeros(1, 1),
            &DVector::from_element(1, 0.5),
            &DMatrix::from_element(1, 1, 0.04),
            2.0,
        );
        assert!((result.transition[(0, 0)] - 1.0).abs() < 1e-14);
        assert!((result.shift[0] - 1.0).abs() < 1e-14);
        assert!((result.noise_factor[(0, 0)].powi(2) - 0.08).abs() < 1e-14);
    }

    #[test]
    fn singular_covariance_is_factored_without_repair() {
        // One noise driving two states: rank one, positive semi-definite.
        let m = DMatrix::from_row_slice(2, 2, &[1.0, 2.0, 2.0, 4.0]);
        let factor = covariance_factor(&m);
        assert!(!factor.repaired);
        assert!((&factor.lower * factor.lower.transpose() - m).abs().max() < 1e-12);
    }

    #[test]
    fn indefinite_correlation_is_repaired_to_a_unit_diagonal() {
        // Three noises pairwise correlated at −0.9: eigenvalue 1 − 1.8 < 0.
        let m = DMatrix::from_row_slice(3, 3, &[1.0, -0.9, -0.9, -0.9, 1.0, -0.9, -0.9, -0.9, 1.0]);
        let factor = correlation_factor(&m);
        assert!(factor.repaired);
        for i in 0..3 {
            assert!((factor.effective[(i, i)] - 1.0).abs() < 1e-12);
        }
        let eigen = SymmetricEigen::new(factor.effective.clone());
        assert!(eigen.eigenvalues.iter().all(|v| *v > -1e-12));
    }
}
