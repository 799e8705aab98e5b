//! Exact moments of polynomial diffusions: affine drift μ(x) = b + A x and instantaneous
//! covariance C(x) = Σ(x) R Σ(x)ᵀ with every entry at most quadratic in x.
//!
//! Such a generator maps polynomials of degree ≤ N to polynomials of degree ≤ N
//! (Cuchiero, Keller-Ressel & Teichmann 2012, Finance and Stochastics 16, "Polynomial
//! processes and their applications to mathematical finance"; Filipović & Larsson 2016,
//! Annals of Applied Probability 26, "Polynomial diffusions and applications in finance",
//! Theorem 3.1). Writing G for its matrix on the monomial basis, the vector of moments
//! solves m' = G m, so E[X_t^α] = (e^{Gt} m(0))_α exactly.
//!
//! Pure numerics over `nalgebra`; nothing here knows the model language.
//!
//! ```
//! use nalgebra::{DMatrix, DVector};
//! use sdeck_calculus::polynomial::PolynomialSystem;
//!
//! // dr = κ(θ − r) dt + σ √r dW: drift κθ − κ r, squared diffusion σ² r.
//! let (kappa, theta, sigma) = (1.5, 0.04, 0.2);
//! let rate = PolynomialSystem::new(
//!     DVector::from_element(1, kappa * theta),
//!     DMatrix::from_element(1, 1, -kappa),
//!     DMatrix::zeros(1, 1),
//!     vec![DMatrix::from_element(1, 1, sigma * sigma)],
//!     Vec::new(),
//! )?;
//! let stationary = rate.stationary_moments(2).unwrap();
//! // The stationary variance θσ²/(2κ).
//! let expected = theta * sigma * sigma / (2.0 * kappa);
//! assert!((stationary.variance(0).unwrap() - expected).abs() < 1e-15);
//! # Ok::<(), String>(())
//! ```

mod basis;
mod table;

pub use basis::MonomialBasis;
pub use table::MomentTable;

use nalgebra::{DMatrix, DVector};

use crate::linear_system::{is_stable, matrix_exponential};

/// Largest system (1 + n + n(n + 1)) for which covariances are computed about the mean
/// path; 14 factors give 225.
const MAX_CENTRED_SIZE: usize = 240;

/// Largest monomial basis (number of moments) the engine will build: the matrix
/// exponential costs O(size³). C(n + 4, 4) stays below it up to n = 11 states at order 4.
pub const MAX_BASIS_SIZE: usize = 1500;

/// dX = (b + A X) dt + Σ(X) dW with C(x) = c0 + Σ_k x_k c1[k] + Σ_{k,l} x_k x_l c2[k][l].
#[derive(Clone, Debug, PartialEq)]
pub struct PolynomialSystem {
    drift_constant: DVector<f64>,
    drift_matrix: DMatrix<f64>,
    covariance_constant: DMatrix<f64>,
    covariance_linear: Vec<DMatrix<f64>>,
    covariance_quadratic: Vec<Vec<DMatrix<f64>>>,
}

/// The generator's matrix as it is filled, and the exponents of the monomial a term
/// lands on.
struct GeneratorRows<'a> {
    basis: &'a MonomialBasis,
    matrix: DMatrix<f64>,
    shifted: Vec<u32>,
}

impl GeneratorRows<'_> {
    /// Adds `value` at row `row` and the column of the monomial `shifted`, when the
    /// basis holds it.
    fn add(&mut self, row: usize, value: f64) {
        if value != 0.0 {
            if let Some(column) = self.basis.position(&self.shifted) {
                self.matrix[(row, column)] += value;
            }
        }
    }
}

impl PolynomialSystem {
    /// Builds the system from the drift b + A x and the covariance parts.
    ///
    /// `c1` has one n×n matrix per state, `c2` an n×n grid of n×n matrices; either may be
    /// empty to mean zero. Only the symmetric part of each covariance matrix matters (the
    /// generator contracts it with the symmetric Hessian). Errors name the first shape that
    /// disagrees or the first non-finite coefficient.
    pub fn new(
        b: DVector<f64>,
        a: DMatrix<f64>,
        c0: DMatrix<f64>,
        c1: Vec<DMatrix<f64>>,
        c2: Vec<Vec<DMatrix<f64>>>,
    ) -> Result<Self, String> {
        let n = b.len();
        let check_square = |matrix: &DMatrix<f64>, what: &str| -> Result<(), String> {
            if matrix.nrows() != n || matrix.ncols() != n {
                return Err(format!(
                    "{what} is {}×{}, expected {n}×{n}",
                    matrix.nrows(),
                    matrix.ncols()
                ));
            }
            if !matrix.iter().all(|v| v.is_finite()) {
                return Err(format!("{what} has a non-finite entry"));
            }
            Ok(())
        };
        if !b.iter().all(|v| v.is_finite()) {
            return Err("the constant drift has a non-finite entry".to_string());
        }
        check_square(&a, "the drift matrix")?;
        check_square(&c0, "the constant covariance part")?;
        let covariance_linear = if c1.is_empty() {
            vec![DMatrix::zeros(n, n); n]
        } else if c1.len() != n {
            return Err(format!(
                "{} linear covariance parts for {n} factors",
                c1.len()
            ));
        } else {
            for (k, matrix) in c1.iter().enumerate() {
                check_square(matrix, &format!("the linear covariance part of factor {k}"))?;
            }
            c1
        };
        let covariance_quadratic = if c2.is_empty() {
            vec![vec![DMatrix::zeros(n, n); n]; n]
        } else if c2.len() != n || c2.iter().any(|row| row.len() != n) {
            return Err(format!(
                "the quadratic covariance parts must form a {n}×{n} grid"
            ));
        } else {
            for (k, row) in c2.iter().enumerate() {
                for (l, matrix) in row.iter().enumerate() {
                    check_square(
                        matrix,
                        &format!("the quadratic covariance part of factors ({k}, {l})"),
                    )?;
                }
            }
            c2
        };
        Ok(PolynomialSystem {
            drift_constant: b,
            drift_matrix: a,
            covariance_constant: c0,
            covariance_linear,
            covariance_quadratic,
        })
    }

    /// Builds the system from loadings affine in the state, Σ(x) = s0 + Σ_k x_k s1[k]
    /// (each n×m) and the m×m noise correlation R, expanding C = Σ R Σᵀ:
    /// c0 = s0 R s0ᵀ, c1[k] = s0 R s1[k]ᵀ + s1[k] R s0ᵀ, c2[k][l] = s1[k] R s1[l]ᵀ.
    /// `s1` may be empty to mean state-independent loadings.
    pub fn from_affine_loadings(
        b: DVector<f64>,
        a: DMatrix<f64>,
        s0: &DMatrix<f64>,
        s1: &[DMatrix<f64>],
        corr: &DMatrix<f64>,
    ) -> Result<Self, String> {
        let n = b.len();
        let m = s0.ncols();
        if s0.nrows() != n {
            return Err(format!(
                "the constant loadings have {} rows for {n} factors",
                s0.nrows()
            ));
        }
        if corr.nrows() != m || corr.ncols() != m {
            return Err(format!(
                "the correlation matrix is {}×{} for {m} shocks",
                corr.nrows(),
                corr.ncols()
            ));
        }
        if !s1.is_empty() && s1.len() != n {
            return Err(format!("{} linear loading parts for {n} factors", s1.len()));
        }
        if let Some(k) = s1
            .iter()
            .position(|part| part.nrows() != n || part.ncols() != m)
        {
            return Err(format!(
                "the linear loading part of factor {k} is not {n}×{m}"
            ));
        }
        let c0 = s0 * corr * s0.transpose();
        let c1: Vec<DMatrix<f64>> = s1
            .iter()
            .map(|part| s0 * corr * part.transpose() + part * corr * s0.transpose())
            .collect();
        let c2: Vec<Vec<DMatrix<f64>>> = s1
            .iter()
            .map(|left| {
                s1.iter()
                    .map(|right| left * corr * right.transpose())
                    .collect()
            })
            .collect();
        PolynomialSystem::new(b, a, c0, c1, c2)
    }

    /// Number of states n.
    pub fn dimension(&self) -> usize {
        self.drift_constant.len()
    }

    /// The generator's matrix G on the monomials of degree ≤ `order`: for the monomial with
    /// exponents α at position r, L x^α = Σ_s G[r, s] x^{β_s}, where
    /// L f = Σ_i μ_i ∂_i f + ½ Σ_{i,j} C_ij ∂_i ∂_j f.
    pub fn generator(&self, order: usize) -> Result<(MonomialBasis, DMatrix<f64>), String> {
        let basis = MonomialBasis::new(self.dimension(), order)?;
        let size = basis.len();
        let mut rows = GeneratorRows {
            basis: &basis,
            matrix: DMatrix::<f64>::zeros(size, size),
            shifted: vec![0u32; self.dimension()],
        };
        for (row, alpha) in basis.iter().enumerate() {
            self.drift_part(&mut rows, row, alpha);
            self.diffusion_part(&mut rows, row, alpha);
        }
        let matrix = rows.matrix;
        Ok((basis, matrix))
    }

    /// Adds to row `row` the first-order part of L x^α: α_i x^{α−e_i} (b_i + Σ_k A_ik x_k).
    fn drift_part(&self, rows: &mut GeneratorRows, row: usize, alpha: &[u32]) {
        let n = self.dimension();
        for i in 0..n {
            if alpha[i] == 0 {
                continue;
            }
            let weight = f64::from(alpha[i]);
            rows.shifted.copy_from_slice(alpha);
            rows.shifted[i] -= 1;
            rows.add(row, weight * self.drift_constant[i]);
            for k in 0..n {
                rows.shifted[k] += 1;
                rows.add(row, weight * self.drift_matrix[(i, k)]);
                rows.shifted[k] -= 1;
            }
        }
    }

    /// Adds to row `row` the second-order part of L x^α: ½ C_ij(x) ∂_i ∂_j x^α.
    fn diffusion_part(&self, rows: &mut GeneratorRows, row: usize, alpha: &[u32]) {
        let n = self.dimension();
        for i in 0..n {
            for j in 0..n {
                let weight = if i == j {
                    f64::from(alpha[i]) * (f64::from(alpha[i]) - 1.0)
                } else {
                    f64::from(alpha[i]) * f64::from(alpha[j])
                };
                if weight == 0.0 {
                    continue;
                }
                let half_weight = 0.5 * weight;
                rows.shifted.copy_from_slice(alpha);
                rows.shifted[i] -= 1;
                rows.shifted[j] -= 1;
                rows.add(row, half_weight * self.covariance_constant[(i, j)]);
                for k in 0..n {
                    rows.shifted[k] += 1;
                    rows.add(row, half_weight * self.covariance_linear[k][(i, j)]);
                    for l in 0..n {
                        rows.shifted[l] += 1;
                        rows.add(row, half_weight * self.covariance_quadratic[k][l][(i, j)]);
                        rows.shifted[l] -= 1;
                    }
                    rows.shifted[k] -= 1;
                }
            }
        }
    }

    /// Every moment E[X_t^α] with |α| ≤ `order`, from X_0 = x0. With bad input (x0 of the
    /// wrong length or non-finite, t negative or not finite, a basis above
    /// [`MAX_BASIS_SIZE`]) every value is NaN; [`Self::try_moments_at`] gives the reason.
    pub fn moments_at(&self, x0: &DVector<f64>, t: f64, order: usize) -> MomentTable {
        match self.try_moments_at(x0, t, order) {
            Ok(table) => table,
            Err(_) => MomentTable::not_available(self.dimension(), order),
        }
    }

    /// As [`Self::moments_at`], with the reason when the moments cannot be computed.
    pub fn try_moments_at(
        &self,
        x0: &DVector<f64>,
        t: f64,
        order: usize,
    ) -> Result<MomentTable, String> {
        let n = self.dimension();
        if x0.len() != n {
            return Err(format!(
                "the initial values have {} entries for {n} factors",
                x0.len()
            ));
        }
        if !x0.iter().all(|v| v.is_finite()) {
            return Err("the initial values have a non-finite entry".to_string());
        }
        if !(t.is_finite() && t >= 0.0) {
            return Err(format!(
                "the time must be finite and non-negative (got {t})"
            ));
        }
        // Reason for the shift: moments of Y = X − x₀ start at zero, so the covariance is not
        // the difference of two large raw moments (a level of 10⁶ with unit spread would
        // otherwise lose every digit). Reason for the scale: it balances the generator, whose
        // exponential is accurate relative to its largest entries.
        let time_scale = t / (1.0 + one_norm(&self.drift_matrix) * t);
        let scale = self.balancing_scale(x0, time_scale);
        let (basis, generator) = self.shifted(x0).scaled(&scale).generator(order)?;
        let size = basis.len();
        // Z₀ = 0: only the constant monomial is 1, so the moments are the first column.
        let moments: Vec<f64> = if t == 0.0 {
            (0..size).map(|r| if r == 0 { 1.0 } else { 0.0 }).collect()
        } else {
            let exponential = matrix_exponential(&(generator * t));
            basis
                .iter()
                .enumerate()
                .map(|(r, beta)| exponential[(r, 0)] * scale_power(&scale, beta))
                .collect()
        };
        let mut table = MomentTable::from_shifted(basis, x0.iter().copied().collect(), moments);
        if order >= 2 && t > 0.0 {
            table.centred = self
                .shifted(x0)
                .scaled(&scale)
                .centred_covariance(t)
                .map(|p| DMatrix::from_fn(n, n, |i, j| p[(i, j)] * scale[i] * scale[j]));
        }
        Ok(table)
    }

    /// The covariance about the mean path at time `t`, from a start at the origin, without
    /// subtracting two raw moments (near t = 0 a raw second moment of size (b·t)² would
    /// swamp a variance of size t³: an integrated factor loses half its digits at t = 1e-6).
    ///
    /// With m the mean, w = m ⊗ m and P the covariance, the drift b + A y and the covariance
    /// C(y) = c₀ + Σ_k y_k c₁[k] + Σ_kl y_k y_l c₂[k][l] give the linear system
    ///   m′ = b + A m,
    ///   w′_ij = b_i m_j + b_j m_i + (A w + w Aᵀ)_ij,
    ///   P′ = A P + P Aᵀ + c₀ + Σ_k m_k c₁[k] + Σ_kl (P_kl + w_kl) c₂[k][l]
    /// (the covariance equation of a polynomial diffusion; E[Y_k Y_l] = P_kl + w_kl), solved
    /// exactly by one matrix exponential, every source of P a product of small terms.
    fn centred_covariance(&self, t: f64) -> Option<DMatrix<f64>> {
        let n = self.dimension();
        // Pairs (i, j), i ≤ j, row by row: (i, j) sits at i·n − i(i − 1)/2 + (j − i).
        let pairs: Vec<(usize, usize)> = (0..n).flat_map(|i| (i..n).map(move |j| (i, j))).collect();
        let pair_index = |i: usize, j: usize| -> usize {
            let (i, j) = if i <= j { (i, j) } else { (j, i) };
            i * n - i * i.saturating_sub(1) / 2 + (j - i)
        };
        let m0 = 1;
        let w0 = m0 + n;
        let p0 = w0 + pairs.len();
        let size = p0 + pairs.len();
        // The exponential costs O(size³): past this size (14 factors) the raw moments'
        // difference is kept rather than let one figure cost seconds.
        if size > MAX_CENTRED_SIZE {
            return None;
        }
        let b = &self.drift_constant;
        let a = &self.drift_matrix;
        let mut h = DMatrix::<f64>::zeros(size, size);
        for i in 0..n {
            h[(m0 + i, 0)] = b[i];
            for k in 0..n {
                h[(m0 + i, m0 + k)] = a[(i, k)];
            }
        }
        // d/dt of a symmetric pair (i, j): row of the product (X_i X_j)′ for X = m or P.
        let symmetric_drift =
            |h: &mut DMatrix<f64>, row: usize, base: usize, i: usize, j: usize| {
                for k in 0..n {
                    h[(row, base + pair_index(k, j))] += a[(i, k)];
                    h[(row, base + pair_index(i, k))] += a[(j, k)];
                }
            };
        for (q, &(i, j)) in pairs.iter().enumerate() {
            let w_row = w0 + q;
            h[(w_row, m0 + j)] += b[i];
            h[(w_row, m0 + i)] += b[j];
            symmetric_drift(&mut h, w_row, w0, i, j);
            let p_row = p0 + q;
            symmetric_drift(&mut h, p_row, p0, i, j);
            let entry = |matrix: &DMatrix<f64>| 0.5 * (matrix[(i, j)] + matrix[(j, i)]);
            h[(p_row, 0)] += entry(&self.covariance_constant);
            for k in 0..n {
                h[(p_row, m0 + k)] += entry(&self.covariance_linear[k]);
                for l in 0..n {
                    let c = entry(&self.covariance_quadratic[k][l]);
                    h[(p_row, w0 + pair_index(k, l))] += c;
                    h[(p_row, p0 + pair_index(k, l))] += c;
                }
            }
        }
        let exponential = matrix_exponential(&(h * t));
        let p = DMatrix::from_fn(n, n, |i, j| exponential[(p0 + pair_index(i, j), 0)]);
        p.iter().all(|v| v.is_finite()).then_some(p)
    }

    /// Per-state scale of the excursion from `origin` over a time `time_scale`: the larger of
    /// the drift's push |μ_i|·τ and the diffusion's spread √(C_ii·τ), evaluated at the origin;
    /// 1 where both vanish.
    fn balancing_scale(&self, origin: &DVector<f64>, time_scale: f64) -> DVector<f64> {
        let shifted = self.shifted(origin);
        DVector::from_fn(self.dimension(), |i, _| {
            let push = shifted.drift_constant[i].abs() * time_scale;
            let spread = (shifted.covariance_constant[(i, i)].abs() * time_scale).sqrt();
            let scale = push.max(spread);
            if scale.is_finite() && scale > 0.0 {
                scale
            } else {
                1.0
            }
        })
    }

    /// The same dynamics written for Z = S⁻¹ X with S = diag(scale): drift S⁻¹b + S⁻¹AS z,
    /// covariance S⁻¹ C(S z) S⁻¹.
    fn scaled(&self, scale: &DVector<f64>) -> PolynomialSystem {
        let n = self.dimension();
        let inverse = DMatrix::from_diagonal(&scale.map(|v| 1.0 / v));
        let forward = DMatrix::from_diagonal(scale);
        let sandwich = |matrix: &DMatrix<f64>| &inverse * matrix * &inverse;
        PolynomialSystem {
            drift_constant: &inverse * &self.drift_constant,
            drift_matrix: &inverse * &self.drift_matrix * &forward,
            covariance_constant: sandwich(&self.covariance_constant),
            covariance_linear: (0..n)
                .map(|k| sandwich(&self.covariance_linear[k]) * scale[k])
                .collect(),
            covariance_quadratic: (0..n)
                .map(|k| {
                    (0..n)
                        .map(|l| sandwich(&self.covariance_quadratic[k][l]) * (scale[k] * scale[l]))
                        .collect()
                })
                .collect(),
        }
    }

    /// The same dynamics written for Y = X − origin: drift b + A·origin + A y, and
    /// C(y + origin) regrouped by powers of y.
    fn shifted(&self, origin: &DVector<f64>) -> PolynomialSystem {
        let n = self.dimension();
        let mut covariance_constant = self.covariance_constant.clone();
        let mut covariance_linear = self.covariance_linear.clone();
        for k in 0..n {
            covariance_constant += &self.covariance_linear[k] * origin[k];
            for l in 0..n {
                let part = &self.covariance_quadratic[k][l];
                covariance_constant += part * (origin[k] * origin[l]);
                covariance_linear[k] += part * origin[l];
                covariance_linear[l] += part * origin[k];
            }
        }
        PolynomialSystem {
            drift_constant: &self.drift_constant + &self.drift_matrix * origin,
            drift_matrix: self.drift_matrix.clone(),
            covariance_constant,
            covariance_linear,
            covariance_quadratic: self.covariance_quadratic.clone(),
        }
    }

    /// Moments of the stationary law up to `order`: the solution of G m = 0 with m₀ = 1.
    ///
    /// Ordering the basis by degree makes G block lower-triangular (the generator never
    /// raises the degree), so the non-constant block is stable exactly when each degree's
    /// diagonal block has eigenvalues with negative real parts; then the moments are
    /// m = −H⁻¹ g where g is the column of the constant monomial. `None` when some moment up
    /// to `order` does not converge to a limit (or the basis is too large).
    pub fn stationary_moments(&self, order: usize) -> Option<MomentTable> {
        let n = self.dimension();
        // The stationary mean first (the degree-1 block of G is A), then every moment about
        // it, for the same reason as the shift in `try_moments_at`.
        let origin = if order == 0 || n == 0 {
            DVector::zeros(n)
        } else {
            if !is_stable(&self.drift_matrix) {
                return None;
            }
            -self.drift_matrix.clone().lu().solve(&self.drift_constant)?
        };
        if !origin.iter().all(|v| v.is_finite()) {
            return None;
        }
        // Balanced as in `try_moments_at`, over the slowest relaxation time ~ 1/‖A‖.
        let norm = one_norm(&self.drift_matrix);
        let time_scale = if norm > 0.0 { 1.0 / norm } else { 1.0 };
        let scale = self.balancing_scale(&origin, time_scale);
        let (basis, generator) = self.shifted(&origin).scaled(&scale).generator(order).ok()?;
        let size = basis.len();
        // The diagonal blocks of degree ≥ 2 depend only on A and c2, which the shift keeps
        // (the scale is a similarity, it keeps eigenvalues).
        for degree in 2..=order {
            let (start, end) = basis.degree_range(degree);
            let block = generator.view((start, start), (end - start, end - start));
            if !is_stable(&block.into_owned()) {
                return None;
            }
        }
        let mut moments = vec![1.0];
        if size > 1 {
            let rest = generator.view((1, 1), (size - 1, size - 1)).into_owned();
            let constant_column = generator.view((1, 0), (size - 1, 1)).into_owned();
            let solution = rest.lu().solve(&(-constant_column))?;
            moments.extend(solution.iter().copied());
        }
        for (moment, beta) in moments.iter_mut().zip(basis.iter()) {
            *moment *= scale_power(&scale, beta);
        }
        if !moments.iter().all(|v| v.is_finite()) {
            return None;
        }
        Some(MomentTable::from_shifted(
            basis,
            origin.iter().copied().collect(),
            moments,
        ))
    }
}

/// Π_i scale_i^{β_i}.
fn scale_power(scale: &DVector<f64>, beta: &[u32]) -> f64 {
    scale
        .iter()
        .zip(beta.iter())
        .map(|(value, &power)| value.powi(power as i32))
        .product()
}

/// Largest absolute column sum.
fn one_norm(matrix: &DMatrix<f64>) -> f64 {
    matrix
        .column_iter()
        .map(|column| column.iter().map(|v| v.abs()).sum::<f64>())
        .fold(0.0, f64::max)
}

#[cfg(test)]
mod tests {
    use super::basis::basis_size;
    use super::*;

    #[test]
    fn basis_order_and_size() {
        let basis = MonomialBasis::new(2, 2).unwrap();
        let listed: Vec<&[u32]> = basis.iter().collect();
        assert_eq!(
            listed,
            vec![&[0, 0][..], &[1, 0], &[0, 1], &[2, 0], &[1, 1], &[0, 2]]
        );
        // C(n + N, N): C(7, 4) = 35, C(14, 4) = 1001 (common practice, no source).
        assert_eq!(MonomialBasis::new(3, 4).unwrap().len(), 35);
        assert_eq!(MonomialBasis::new(10, 4).unwrap().len(), 1001);
        assert_eq!(basis_size(10, 4), Some(1001));
        assert!(MonomialBasis::new(40, 6).is_err());
        assert!(MonomialBasis::new(usize::MAX, 3).is_err());
        assert_eq!(MonomialBasis::new(0, 3).unwrap().len(), 1);
    }

    #[test]
    fn bad_inputs_are_reported() {
        let system = PolynomialSystem::new(
            DVector::from_vec(vec![0.0]),
            DMatrix::from_element(1, 1, -1.0),
            DMatrix::from_element(1, 1, 1.0),
            Vec::new(),
            Vec::new(),
        )
        .unwrap();
        let wrong_length = DVector::from_vec(vec![1.0, 2.0]);
        assert!(system.try_moments_at(&wrong_length, 1.0, 2).is_err());
        assert!(system
            .moments_at(&wrong_length, 1.0, 2)
            .values()
            .iter()
            .all(|v| v.is_nan()));
        let start = DVector::from_vec(vec![1.0]);
        assert!(system.try_moments_at(&start, -1.0, 2).is_err());
        assert!(system.try_moments_at(&start, f64::NAN, 2).is_err());
        assert!(system.try_moments_at(&start, 1.0, 5000).is_err());
        let table = system.moments_at(&start, 1.0, 1);
        assert_eq!(table.covariance(0, 0), None);
        assert_eq!(table.mean(3), None);
        assert!(PolynomialSystem::new(
            DVector::from_vec(vec![0.0, 0.0]),
            DMatrix::zeros(2, 2),
            DMatrix::zeros(2, 3),
            Vec::new(),
            Vec::new(),
        )
        .is_err());
    }

    /// Binomial expansion check on a table of a point mass at (2, −3): every central moment
    /// of degree ≥ 1 is zero (common practice, no source).
    #[test]
    fn central_moments_of_a_point_mass_vanish() {
        let system = PolynomialSystem::new(
            DVector::zeros(2),
            DMatrix::zeros(2, 2),
            DMatrix::zeros(2, 2),
            Vec::new(),
            Vec::new(),
        )
        .unwrap();
        let table = system.moments_at(&DVector::from_vec(vec![2.0, -3.0]), 1.0, 4);
        assert_eq!(table.raw(&[2, 1]), Some(-12.0));
        for alpha in [[1, 0], [0, 2], [2, 2], [3, 1]] {
            let central = table.central(&alpha).unwrap();
            assert!(central.abs() < 1e-12, "{alpha:?}: {central}");
        }
    }
}
