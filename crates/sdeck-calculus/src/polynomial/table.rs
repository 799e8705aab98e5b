//! The table of moments a computation gives, with its summaries: means, covariances,
//! raw and central moments.

use super::MonomialBasis;
use nalgebra::{DMatrix, DVector};

/// Moments E[X^α] for every |α| ≤ order, with the usual summaries.
///
/// Held as moments of Y = X − origin (the start, or the stationary mean) so that
/// covariances and central moments come without cancellation; raw moments of X are
/// expanded from them once.
#[derive(Clone, Debug, PartialEq)]
pub struct MomentTable {
    basis: MonomialBasis,
    /// E[X^α] in basis order.
    values: Vec<f64>,
    origin: Vec<f64>,
    /// E[(X − origin)^α] in basis order.
    shifted: Vec<f64>,
    /// The covariance computed about the mean path, when it was (order ≥ 2, t > 0).
    pub(super) centred: Option<DMatrix<f64>>,
}

impl MomentTable {
    pub(super) fn from_shifted(basis: MonomialBasis, origin: Vec<f64>, shifted: Vec<f64>) -> Self {
        let negated_origin: Vec<f64> = origin.iter().map(|v| -v).collect();
        let values = basis
            .iter()
            .map(|alpha| expand_about(&basis, &shifted, alpha, &negated_origin).unwrap_or(f64::NAN))
            .collect();
        MomentTable {
            basis,
            values,
            origin,
            shifted,
            centred: None,
        }
    }

    /// A table whose every value is NaN (the moments could not be computed).
    pub(super) fn not_available(dimension: usize, order: usize) -> Self {
        // The smallest basis that still answers `order()` and `dimension()` honestly.
        let basis = MonomialBasis::new(dimension, order)
            .or_else(|_| MonomialBasis::new(dimension, 0))
            .unwrap_or_else(|_| MonomialBasis::empty(dimension));
        let values = vec![f64::NAN; basis.len()];
        MomentTable {
            basis,
            shifted: values.clone(),
            values,
            origin: vec![f64::NAN; dimension],
            centred: None,
        }
    }

    fn shifted_moment(&self, multi_index: &[u32]) -> Option<f64> {
        let position = self.basis.position(multi_index)?;
        self.shifted.get(position).copied()
    }

    /// Highest total degree held.
    pub fn order(&self) -> usize {
        self.basis.order()
    }

    /// Number of states.
    pub fn dimension(&self) -> usize {
        self.basis.dimension()
    }

    /// The basis the values are listed in.
    pub fn basis(&self) -> &MonomialBasis {
        &self.basis
    }

    /// The values in basis order.
    pub fn values(&self) -> &[f64] {
        &self.values
    }

    /// E[Π_i X_i^{α_i}]; `None` when α has the wrong length or a degree above the order.
    pub fn raw(&self, multi_index: &[u32]) -> Option<f64> {
        let position = self.basis.position(multi_index)?;
        self.values.get(position).copied()
    }

    /// E[X_i].
    pub fn mean(&self, state: usize) -> Option<f64> {
        let displacement = self.shifted_moment(&self.unit_index(state, None)?)?;
        Some(self.origin.get(state)? + displacement)
    }

    /// Cov(X_i, X_j), computed about the table's origin; needs order ≥ 2.
    pub fn covariance(&self, i: usize, j: usize) -> Option<f64> {
        if let Some(centred) = &self.centred {
            return centred.get((i, j)).copied();
        }
        let second = self.shifted_moment(&self.unit_index(i, Some(j))?)?;
        let first_i = self.shifted_moment(&self.unit_index(i, None)?)?;
        let first_j = self.shifted_moment(&self.unit_index(j, None)?)?;
        Some(second - first_i * first_j)
    }

    /// Var(X_i).
    pub fn variance(&self, state: usize) -> Option<f64> {
        self.covariance(state, state)
    }

    /// E[Π_i (X_i − E X_i)^{α_i}], expanded binomially over the moments about the origin.
    pub fn central(&self, multi_index: &[u32]) -> Option<f64> {
        let displacements: Vec<f64> = (0..self.dimension())
            .map(|i| self.shifted_moment(&self.unit_index(i, None)?))
            .collect::<Option<_>>()?;
        expand_about(&self.basis, &self.shifted, multi_index, &displacements)
    }

    /// The vector of means (NaN where unavailable).
    pub fn means(&self) -> DVector<f64> {
        DVector::from_iterator(
            self.dimension(),
            (0..self.dimension()).map(|i| self.mean(i).unwrap_or(f64::NAN)),
        )
    }

    /// The covariance matrix; `None` below order 2.
    pub fn covariance_matrix(&self) -> Option<DMatrix<f64>> {
        let n = self.dimension();
        let mut matrix = DMatrix::zeros(n, n);
        for i in 0..n {
            for j in 0..n {
                matrix[(i, j)] = self.covariance(i, j)?;
            }
        }
        Some(matrix)
    }

    /// Multi-index with 1 at `first` (and 1 more at `second`).
    fn unit_index(&self, first: usize, second: Option<usize>) -> Option<Vec<u32>> {
        let mut index = vec![0u32; self.dimension()];
        *index.get_mut(first)? += 1;
        if let Some(second) = second {
            *index.get_mut(second)? += 1;
        }
        Some(index)
    }
}

/// E[Π_i (Z_i − c_i)^{α_i}] = Σ_{β ≤ α} Π_i C(α_i, β_i) (−c_i)^{α_i − β_i} E[Z^β], where
/// `moments` lists E[Z^β] in the order of `basis`. `None` when α does not fit the basis.
fn expand_about(
    basis: &MonomialBasis,
    moments: &[f64],
    multi_index: &[u32],
    centre: &[f64],
) -> Option<f64> {
    let n = basis.dimension();
    if multi_index.len() != n || centre.len() != n {
        return None;
    }
    basis.position(multi_index)?;
    let mut beta = vec![0u32; n];
    let mut total = 0.0;
    loop {
        let mut weight = 1.0;
        for i in 0..n {
            let lower = multi_index[i] - beta[i];
            weight *= binomial(multi_index[i], beta[i]) * (-centre[i]).powi(lower as i32);
        }
        if weight != 0.0 {
            total += weight * moments.get(basis.position(&beta)?)?;
        }
        // Next β ≤ α in odometer order.
        let mut carried = true;
        for i in 0..n {
            if beta[i] < multi_index[i] {
                beta[i] += 1;
                carried = false;
                break;
            }
            beta[i] = 0;
        }
        if carried {
            return Some(total);
        }
    }
}

fn binomial(n: u32, k: u32) -> f64 {
    (0..k).fold(1.0, |product, step| {
        product * f64::from(n - step) / f64::from(step + 1)
    })
}
