//! Correlation matrices: the positive semi-definite test, the smallest eigenvalue and the
//! nearest correlation matrix (Frobenius norm), for the rule `correlation-not-psd` and its
//! fix. Every eigen-decomposition goes through [`crate::symmetric::symmetric_eigen`],
//! which refuses non-finite input and stops after a bounded number of sweeps.
//!
//! Method of the nearest matrix: alternating projections with Dykstra's correction
//! (Higham 2002, "Computing the nearest correlation matrix — a problem from finance", IMA
//! J. Numerical Analysis 22, 329–343, Algorithm 3.3), onto the positive semi-definite cone
//! (eigenvalues clipped) and onto the matrices with unit diagonal. A fix writes numbers
//! with a few decimals; [`nearest_correlation_rounded`] keeps the smallest eigenvalue a
//! little above zero so that the rounded matrix is still positive semi-definite.

use crate::symmetric::symmetric_eigen;
use nalgebra::DMatrix;

/// The nearest correlation matrix to the symmetric matrix `a`, with every eigenvalue at
/// least `floor` (0 for Higham's problem proper). `None` for a non-square or non-finite
/// input, or when the iteration does not settle.
pub fn nearest_correlation(a: &[Vec<f64>], floor: f64) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    if a.iter()
        .any(|row| row.len() != n || row.iter().any(|x| !x.is_finite()))
    {
        return None;
    }
    if n == 0 {
        return Some(Vec::new());
    }
    let a = DMatrix::from_fn(n, n, |i, j| 0.5 * (a[i][j] + a[j][i]));
    let mut y = a.clone();
    let mut correction = DMatrix::<f64>::zeros(n, n);
    let mut x = a;
    for _ in 0..10_000 {
        let r = &y - &correction;
        x = project_psd(&r, floor)?;
        correction = &x - &r;
        let y_next = project_unit_diagonal(&x);
        let change = (&y_next - &y).norm() / y_next.norm().max(1.0);
        let gap = (&y_next - &x).norm() / y_next.norm().max(1.0);
        y = y_next;
        if change < 1e-12 && gap < 1e-10 {
            return Some(to_rows(&project_unit_diagonal(&x)));
        }
    }
    // Not settled: return the last iterate only if it is a correlation matrix.
    let result = project_unit_diagonal(&x);
    (smallest_eigenvalue(&to_rows(&result))? >= -1e-10).then(|| to_rows(&result))
}

/// The nearest correlation matrix written with `decimals` decimals, still positive
/// semi-definite after rounding: the eigenvalue floor rises until the rounded matrix
/// passes.
pub fn nearest_correlation_rounded(a: &[Vec<f64>], decimals: i32) -> Option<Vec<Vec<f64>>> {
    let scale = 10f64.powi(decimals);
    let mut floor = 0.0;
    for _ in 0..12 {
        let near = nearest_correlation(a, floor)?;
        let rounded: Vec<Vec<f64>> = near
            .iter()
            .enumerate()
            .map(|(i, row)| {
                row.iter()
                    .enumerate()
                    .map(|(j, x)| {
                        if i == j {
                            1.0
                        } else {
                            (x * scale).round() / scale
                        }
                    })
                    .collect()
            })
            .collect();
        if smallest_eigenvalue(&rounded)? >= 0.0 {
            return Some(rounded);
        }
        floor = if floor == 0.0 {
            1.0 / scale
        } else {
            floor * 2.0
        };
    }
    None
}

/// The smallest eigenvalue of a symmetric matrix; `None` when it is not square, not
/// finite or its decomposition does not settle.
pub fn smallest_eigenvalue(m: &[Vec<f64>]) -> Option<f64> {
    let n = m.len();
    if m.iter().any(|row| row.len() != n) {
        return None;
    }
    if n == 0 {
        return Some(0.0);
    }
    let matrix = DMatrix::from_fn(n, n, |i, j| m[i][j]);
    symmetric_eigen(&matrix)?
        .eigenvalues
        .iter()
        .copied()
        .reduce(f64::min)
}

fn project_psd(m: &DMatrix<f64>, floor: f64) -> Option<DMatrix<f64>> {
    let symmetric = 0.5 * (m + m.transpose());
    let eigen = symmetric_eigen(&symmetric)?;
    let clipped = eigen.eigenvalues.map(|l| l.max(floor));
    let q = &eigen.eigenvectors;
    let result = q * DMatrix::from_diagonal(&clipped) * q.transpose();
    Some(0.5 * (&result + result.transpose()))
}

fn project_unit_diagonal(m: &DMatrix<f64>) -> DMatrix<f64> {
    let mut out = m.clone();
    for i in 0..out.nrows() {
        out[(i, i)] = 1.0;
    }
    out
}

fn to_rows(m: &DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..m.nrows())
        .map(|i| (0..m.ncols()).map(|j| m[(i, j)]).collect())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn frobenius(a: &[Vec<f64>], b: &[Vec<f64>]) -> f64 {
        a.iter()
            .zip(b)
            .flat_map(|(r, s)| r.iter().zip(s).map(|(x, y)| (x - y) * (x - y)))
            .sum::<f64>()
            .sqrt()
    }

    #[test]
    fn higham_2002_worked_example() {
        // Higham 2002, IMA J. Numerical Analysis 22, §4: the nearest correlation matrix
        // to the tridiagonal matrix with 2 on the diagonal and −1 beside it. Figures to
        // four decimals as printed there (from memory of the paper's table).
        let a = vec![
            vec![2.0, -1.0, 0.0, 0.0],
            vec![-1.0, 2.0, -1.0, 0.0],
            vec![0.0, -1.0, 2.0, -1.0],
            vec![0.0, 0.0, -1.0, 2.0],
        ];
        let expected = [
            [1.0, -0.8084, 0.1916, 0.1068],
            [-0.8084, 1.0, -0.6562, 0.1916],
            [0.1916, -0.6562, 1.0, -0.8084],
            [0.1068, 0.1916, -0.8084, 1.0],
        ];
        let near = nearest_correlation(&a, 0.0).expect("the iteration settles");
        for i in 0..4 {
            for j in 0..4 {
                assert!(
                    (near[i][j] - expected[i][j]).abs() < 1e-4,
                    "entry ({i},{j}): {} vs {}",
                    near[i][j],
                    expected[i][j]
                );
            }
        }
    }

    #[test]
    fn three_noises_with_impossible_correlations() {
        // ρ12 = ρ23 = 0.9, ρ13 = −0.9 cannot hold together (common practice, no source:
        // two noises close to a third are close to each other).
        let a = vec![
            vec![1.0, 0.9, -0.9],
            vec![0.9, 1.0, 0.9],
            vec![-0.9, 0.9, 1.0],
        ];
        assert!(smallest_eigenvalue(&a).unwrap_or(0.0) < 0.0);
        let near = nearest_correlation(&a, 0.0).expect("settles");
        assert!(smallest_eigenvalue(&near).unwrap_or(-1.0) > -1e-9);
        for (i, row) in near.iter().enumerate() {
            assert!((row[i] - 1.0).abs() < 1e-12);
        }
        // Nearest: no closer than a simple repair (clip eigenvalues, rescale to unit
        // diagonal), which is also a correlation matrix.
        let clipped = project_psd(&DMatrix::from_fn(3, 3, |i, j| a[i][j]), 0.0).expect("eigen");
        let d: Vec<f64> = (0..3).map(|i| clipped[(i, i)].sqrt()).collect();
        let rescaled: Vec<Vec<f64>> = (0..3)
            .map(|i| (0..3).map(|j| clipped[(i, j)] / (d[i] * d[j])).collect())
            .collect();
        assert!(frobenius(&near, &a) <= frobenius(&rescaled, &a) + 1e-9);
        let rounded = nearest_correlation_rounded(&a, 4).expect("rounds");
        assert!(smallest_eigenvalue(&rounded).unwrap_or(-1.0) >= 0.0);
        for row in &rounded {
            for x in row {
                assert!(((x * 1e4).round() - x * 1e4).abs() < 1e-6);
            }
        }
    }

    #[test]
    fn a_correlation_matrix_is_its_own_nearest() {
        let a = vec![vec![1.0, 0.3], vec![0.3, 1.0]];
        let near = nearest_correlation(&a, 0.0).expect("settles");
        assert!(frobenius(&near, &a) < 1e-9);
    }

    #[test]
    fn bad_input_gives_none() {
        assert_eq!(nearest_correlation(&[vec![1.0, 2.0]], 0.0), None);
        assert_eq!(nearest_correlation(&[vec![f64::NAN]], 0.0), None);
        assert_eq!(smallest_eigenvalue(&[vec![f64::INFINITY]]), None);
        assert!(symmetric_eigen(&DMatrix::from_element(2, 2, f64::NAN)).is_none());
    }
}
