//! The monomial basis: the exponent vectors of every moment up to an order, in a stable
//! order.

use super::MAX_BASIS_SIZE;
use std::collections::HashMap;

/// The monomials x^α of n variables with |α| ≤ order, in a stable order: by degree, then
/// lexicographically with larger exponents of earlier states first. For two states and
/// order 2: 1, x₀, x₁, x₀², x₀x₁, x₁².
#[derive(Clone, Debug, PartialEq)]
pub struct MonomialBasis {
    dimension: usize,
    order: usize,
    exponents: Vec<Vec<u32>>,
    positions: HashMap<Vec<u32>, usize>,
    /// Position where each degree 0..=order starts, plus the total size at the end.
    degree_starts: Vec<usize>,
}

impl MonomialBasis {
    /// A basis of `dimension` variables with no monomial, for a table that holds none.
    pub(super) fn empty(dimension: usize) -> Self {
        MonomialBasis {
            dimension,
            order: 0,
            exponents: Vec::new(),
            positions: HashMap::new(),
            degree_starts: vec![0, 0],
        }
    }

    /// Enumerates the basis; an error when it would exceed [`MAX_BASIS_SIZE`].
    pub fn new(dimension: usize, order: usize) -> Result<Self, String> {
        let size = basis_size(dimension, order).filter(|size| *size <= MAX_BASIS_SIZE);
        let Some(size) = size else {
            return Err(format!(
                "moments up to order {order} of {dimension} factors need more than \
                 {MAX_BASIS_SIZE} monomials"
            ));
        };
        let mut exponents = Vec::with_capacity(size);
        let mut degree_starts = Vec::with_capacity(order + 2);
        let mut current = vec![0u32; dimension];
        for degree in 0..=order {
            degree_starts.push(exponents.len());
            push_monomials_of_degree(&mut current, 0, degree as u32, &mut exponents);
        }
        degree_starts.push(exponents.len());
        let positions = exponents
            .iter()
            .enumerate()
            .map(|(position, alpha)| (alpha.clone(), position))
            .collect();
        Ok(MonomialBasis {
            dimension,
            order,
            exponents,
            positions,
            degree_starts,
        })
    }

    /// Number of monomials.
    pub fn len(&self) -> usize {
        self.exponents.len()
    }

    /// True for an empty basis (never: the constant monomial is always there).
    pub fn is_empty(&self) -> bool {
        self.exponents.is_empty()
    }

    /// Highest total degree.
    pub fn order(&self) -> usize {
        self.order
    }

    /// Number of variables.
    pub fn dimension(&self) -> usize {
        self.dimension
    }

    /// Exponents of the monomial at `position`; `None` past the end.
    pub fn exponents(&self, position: usize) -> Option<&[u32]> {
        self.exponents.get(position).map(Vec::as_slice)
    }

    /// Every monomial's exponents, in basis order.
    pub fn iter(&self) -> impl Iterator<Item = &[u32]> {
        self.exponents.iter().map(Vec::as_slice)
    }

    /// Position of the monomial with these exponents, if it is in the basis.
    pub fn position(&self, exponents: &[u32]) -> Option<usize> {
        self.positions.get(exponents).copied()
    }

    /// Positions [start, end) of the monomials of exactly this degree.
    pub fn degree_range(&self, degree: usize) -> (usize, usize) {
        match (
            self.degree_starts.get(degree),
            self.degree_starts.get(degree + 1),
        ) {
            (Some(&start), Some(&end)) => (start, end),
            _ => (self.len(), self.len()),
        }
    }
}

/// C(n + N, N) with overflow checks; `None` when it does not fit in usize.
pub(super) fn basis_size(dimension: usize, order: usize) -> Option<usize> {
    let mut size: usize = 1;
    for k in 1..=order {
        // size · (n + k) / k stays an integer at every step (it is C(n + k, k)).
        size = size.checked_mul(dimension.checked_add(k)?)? / k;
    }
    Some(size)
}

/// Appends, in the basis order, every exponent vector of total `remaining` over the
/// variables from `variable` on (the earlier ones are fixed in `current`).
fn push_monomials_of_degree(
    current: &mut [u32],
    variable: usize,
    remaining: u32,
    out: &mut Vec<Vec<u32>>,
) {
    match current.len().saturating_sub(variable) {
        0 => {
            // No variables left (or none at all): only a zero remainder is a monomial.
            if remaining == 0 {
                out.push(current.to_vec());
            }
        }
        1 => {
            current[variable] = remaining;
            out.push(current.to_vec());
            current[variable] = 0;
        }
        _ => {
            for power in (0..=remaining).rev() {
                current[variable] = power;
                push_monomials_of_degree(current, variable + 1, remaining - power, out);
            }
            current[variable] = 0;
        }
    }
}
