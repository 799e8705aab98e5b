//! Symmetric matrices: the eigen-decomposition, the Cholesky factor, the positive
//! semi-definite test and the square-root factors of covariance and correlation matrices.
//!
//! Every call of the linear-algebra library on a symmetric matrix goes through here,
//! behind a check that the matrix is square and finite, and with a cap on the iterations
//! of the eigen-decomposition: on a non-finite input the library's own entry points may
//! loop without end or panic. A matrix that fails the check gives `None`, never a panic.
//!
//! ```
//! use nalgebra::DMatrix;
//! use sdeck_calculus::symmetric::{correlation_factor, is_positive_semidefinite};
//!
//! // Three shocks pairwise correlated at −0.9 cannot exist: one eigenvalue is 1 − 1.8.
//! let m = DMatrix::from_row_slice(3, 3, &[1.0, -0.9, -0.9, -0.9, 1.0, -0.9, -0.9, -0.9, 1.0]);
//! assert_eq!(is_positive_semidefinite(&m), Some(false));
//! let factor = correlation_factor(&m).expect("a finite matrix");
//! assert!(factor.repaired);
//! assert_eq!(is_positive_semidefinite(&DMatrix::from_element(2, 2, f64::NAN)), None);
//! ```

use nalgebra::{Cholesky, DMatrix, Dyn, SymmetricEigen};

/// Relative size below which a negative eigenvalue counts as round-off.
pub const EIGENVALUE_TOLERANCE: f64 = 1e-12;

/// The most sweeps of the eigen-decomposition per row of the matrix. The implicit QR
/// iteration of a symmetric matrix converges in a few sweeps per eigenvalue; a thousand
/// per row is far beyond what a finite matrix needs and still ends in milliseconds.
const SWEEPS_PER_ROW: usize = 1000;

/// Whether `matrix` is square with finite entries.
pub fn square_and_finite(matrix: &DMatrix<f64>) -> bool {
    matrix.is_square() && matrix.iter().all(|v| v.is_finite())
}

/// The eigen-decomposition of the symmetric `matrix` (its lower triangle is read), with
/// the library's default tolerance and at most [`SWEEPS_PER_ROW`] sweeps per row. `None`
/// when the matrix is not square, has a non-finite entry, or the iteration does not
/// converge within the cap. An empty matrix has an empty decomposition.
pub fn symmetric_eigen(matrix: &DMatrix<f64>) -> Option<SymmetricEigen<f64, Dyn>> {
    if !square_and_finite(matrix) {
        return None;
    }
    if matrix.is_empty() {
        // The library panics on an empty matrix; its decomposition is empty.
        return Some(SymmetricEigen {
            eigenvectors: DMatrix::zeros(0, 0),
            eigenvalues: nalgebra::DVector::zeros(0),
        });
    }
    let sweeps = SWEEPS_PER_ROW * matrix.nrows().max(10);
    SymmetricEigen::try_new(matrix.clone(), f64::EPSILON, sweeps)
}

/// The Cholesky factor of the symmetric positive definite `matrix`; `None` when it is not
/// square, has a non-finite entry or is not positive definite.
pub fn cholesky(matrix: &DMatrix<f64>) -> Option<Cholesky<f64, Dyn>> {
    if !square_and_finite(matrix) {
        return None;
    }
    matrix.clone().cholesky()
}

/// The smallest eigenvalue of the symmetric `matrix` (`+∞` for an empty one); `None` as
/// for [`symmetric_eigen`].
pub fn smallest_eigenvalue(matrix: &DMatrix<f64>) -> Option<f64> {
    let eigen = symmetric_eigen(matrix)?;
    Some(
        eigen
            .eigenvalues
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min),
    )
}

/// Whether the symmetric `matrix` is positive semi-definite: no eigenvalue below
/// −[`EIGENVALUE_TOLERANCE`] times the largest eigenvalue in size (at least 1). `None`
/// as for [`symmetric_eigen`].
pub fn is_positive_semidefinite(matrix: &DMatrix<f64>) -> Option<bool> {
    let eigen = symmetric_eigen(matrix)?;
    Some(!has_negative_eigenvalue(&eigen))
}

fn has_negative_eigenvalue(eigen: &SymmetricEigen<f64, Dyn>) -> bool {
    let largest = eigen.eigenvalues.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    eigen
        .eigenvalues
        .iter()
        .any(|v| *v < -EIGENVALUE_TOLERANCE * largest.max(1.0))
}

/// A factor `L` with `L Lᵀ` equal to the matrix asked for (or to its nearest positive
/// semi-definite repair), and whether a repair was needed.
#[derive(Clone, Debug, PartialEq)]
pub struct Factor {
    pub lower: DMatrix<f64>,
    pub repaired: bool,
    /// The matrix that `lower` actually reproduces.
    pub effective: DMatrix<f64>,
}

/// Factor of a covariance matrix that may be singular (a state without noise, two states
/// driven by one noise): Cholesky when it succeeds, otherwise an eigen-decomposition with
/// negative eigenvalues set to zero. `None` when the matrix is not square, has a
/// non-finite entry or cannot be decomposed.
pub fn covariance_factor(matrix: &DMatrix<f64>) -> Option<Factor> {
    if !square_and_finite(matrix) {
        return None;
    }
    let symmetric = (matrix + matrix.transpose()) * 0.5;
    if let Some(factor) = cholesky(&symmetric) {
        return Some(Factor {
            lower: factor.l(),
            repaired: false,
            effective: symmetric,
        });
    }
    let eigen = symmetric_eigen(&symmetric)?;
    let repaired = has_negative_eigenvalue(&eigen);
    let roots = eigen.eigenvalues.map(|v| v.max(0.0).sqrt());
    let lower = &eigen.eigenvectors * DMatrix::from_diagonal(&roots);
    let effective = &lower * lower.transpose();
    Some(Factor {
        lower,
        repaired,
        effective: if repaired { effective } else { symmetric },
    })
}

/// Factor of a correlation matrix. When it is not positive semi-definite, its negative
/// eigenvalues are clipped to zero and the result is rescaled to a unit diagonal (a
/// simple repair, common practice, no source); `repaired` says so. `None` as for
/// [`covariance_factor`].
pub fn correlation_factor(matrix: &DMatrix<f64>) -> Option<Factor> {
    let factor = covariance_factor(matrix)?;
    if !factor.repaired {
        return Some(factor);
    }
    let diagonal = factor.effective.diagonal();
    let scale = diagonal.map(|d| if d > 0.0 { 1.0 / d.sqrt() } else { 0.0 });
    let lower = DMatrix::from_diagonal(&scale) * &factor.lower;
    let effective = &lower * lower.transpose();
    Some(Factor {
        lower,
        repaired: true,
        effective,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn singular_covariance_is_factored_without_repair() {
        // One noise driving two states: rank one, positive semi-definite.
        let m = DMatrix::from_row_slice(2, 2, &[1.0, 2.0, 2.0, 4.0]);
        let factor = covariance_factor(&m).expect("a finite matrix");
        assert!(!factor.repaired);
        assert!((&factor.lower * factor.lower.transpose() - m).abs().max() < 1e-12);
    }

    #[test]
    fn indefinite_correlation_is_repaired_to_a_unit_diagonal() {
        // Three noises pairwise correlated at −0.9: eigenvalue 1 − 1.8 < 0.
        let m = DMatrix::from_row_slice(3, 3, &[1.0, -0.9, -0.9, -0.9, 1.0, -0.9, -0.9, -0.9, 1.0]);
        let factor = correlation_factor(&m).expect("a finite matrix");
        assert!(factor.repaired);
        for i in 0..3 {
            assert!((factor.effective[(i, i)] - 1.0).abs() < 1e-12);
        }
        let smallest = smallest_eigenvalue(&factor.effective).expect("a finite matrix");
        assert!(smallest > -1e-12);
        assert_eq!(is_positive_semidefinite(&factor.effective), Some(true));
    }

    #[test]
    fn smallest_eigenvalue_of_a_known_matrix() {
        // [[2, 1], [1, 2]] has eigenvalues 1 and 3.
        let m = DMatrix::from_row_slice(2, 2, &[2.0, 1.0, 1.0, 2.0]);
        let smallest = smallest_eigenvalue(&m).expect("a finite matrix");
        assert!((smallest - 1.0).abs() < 1e-14);
        assert_eq!(
            smallest_eigenvalue(&DMatrix::zeros(0, 0)),
            Some(f64::INFINITY)
        );
    }

    #[test]
    fn non_finite_or_non_square_input_gives_none_at_once() {
        let huge = DMatrix::from_row_slice(2, 2, &[1e308, f64::INFINITY, f64::INFINITY, 1.0]);
        let nan = DMatrix::from_element(3, 3, f64::NAN);
        let wide = DMatrix::from_element(2, 3, 0.5);
        for m in [&huge, &nan, &wide] {
            assert!(symmetric_eigen(m).is_none());
            assert!(cholesky(m).is_none());
            assert!(covariance_factor(m).is_none());
            assert!(correlation_factor(m).is_none());
            assert_eq!(is_positive_semidefinite(m), None);
        }
    }
}
