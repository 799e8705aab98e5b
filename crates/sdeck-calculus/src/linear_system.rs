//! Exact moments of linear SDE systems with state-independent noise,
//! dX = (A X + b) dt + L dW with d⟨W⟩ = R dt: mean, covariance, cross-covariance in time,
//! stationary law, the exact step the simulator takes ([`gaussian_step`]), plus the matrix
//! exponential and eigenvalues they rest on.
//!
//! Everything here is plain numerics over `nalgebra` matrices and knows nothing of the model
//! language. Nothing panics on bad input: inconsistent shapes, non-finite numbers or negative
//! times give results filled with NaN (or `None` where the signature allows it), and
//! [`AffineGaussian::validate`] says what is wrong.
//!
//! ```
//! use nalgebra::{DMatrix, DVector};
//! use sdeck_calculus::linear_system::AffineGaussian;
//!
//! // dr = 2 (3% − r) dt + 1% dW: an Ornstein–Uhlenbeck rate.
//! let rate = AffineGaussian::new(
//!     DMatrix::from_element(1, 1, -2.0),
//!     DVector::from_element(1, 2.0 * 0.03),
//!     DMatrix::from_element(1, 1, 0.01),
//!     DMatrix::identity(1, 1),
//! )?;
//! let variance = rate.covariance_at(1.0)[(0, 0)];
//! // σ²(1 − e^{−2κt})/(2κ)
//! assert!((variance - 1e-4 * (1.0 - (-4.0_f64).exp()) / 4.0).abs() < 1e-16);
//! assert!((rate.stationary_mean().unwrap()[0] - 0.03).abs() < 1e-15);
//! # Ok::<(), String>(())
//! ```

use nalgebra::{DMatrix, DVector};

/// dX = (A X + b) dt + L dW, d⟨W⟩ = R dt; the instantaneous covariance is Q = L R Lᵀ.
#[derive(Clone, Debug, PartialEq)]
pub struct AffineGaussian {
    /// n×n drift matrix A.
    pub a: DMatrix<f64>,
    /// Constant drift b (length n).
    pub b: DVector<f64>,
    /// n×m diffusion coefficients L: column k is the loading of every state on noise k.
    pub loadings: DMatrix<f64>,
    /// m×m instantaneous correlation R of the noises (symmetric, unit diagonal).
    pub corr: DMatrix<f64>,
}

/// Largest tolerated asymmetry of the correlation matrix, relative to 1.
const SYMMETRY_TOLERANCE: f64 = 1e-12;

impl AffineGaussian {
    /// Builds the system after checking shapes and finiteness (see [`Self::validate`]).
    pub fn new(
        a: DMatrix<f64>,
        b: DVector<f64>,
        loadings: DMatrix<f64>,
        corr: DMatrix<f64>,
    ) -> Result<Self, String> {
        let system = AffineGaussian {
            a,
            b,
            loadings,
            corr,
        };
        system.validate()?;
        Ok(system)
    }

    /// Checks that A is n×n, b has n entries, L is n×m, R is m×m and symmetric, and every
    /// entry is finite.
    pub fn validate(&self) -> Result<(), String> {
        let n = self.a.nrows();
        if self.a.ncols() != n {
            return Err(format!(
                "the drift matrix must be square, it is {}×{}",
                n,
                self.a.ncols()
            ));
        }
        if self.b.len() != n {
            return Err(format!(
                "the constant drift has {} entries for {} factors",
                self.b.len(),
                n
            ));
        }
        if self.loadings.nrows() != n {
            return Err(format!(
                "the diffusion loadings have {} rows for {} factors",
                self.loadings.nrows(),
                n
            ));
        }
        let m = self.loadings.ncols();
        if self.corr.nrows() != m || self.corr.ncols() != m {
            return Err(format!(
                "the correlation matrix is {}×{} for {} shocks",
                self.corr.nrows(),
                self.corr.ncols(),
                m
            ));
        }
        let all_finite = self.a.iter().all(|v| v.is_finite())
            && self.b.iter().all(|v| v.is_finite())
            && self.loadings.iter().all(|v| v.is_finite())
            && self.corr.iter().all(|v| v.is_finite());
        if !all_finite {
            return Err("a coefficient is not a finite number".to_string());
        }
        for i in 0..m {
            for j in 0..i {
                if (self.corr[(i, j)] - self.corr[(j, i)]).abs() > SYMMETRY_TOLERANCE {
                    return Err(format!(
                        "the correlation matrix is not symmetric at ({i}, {j})"
                    ));
                }
            }
        }
        Ok(())
    }

    /// Number of states n.
    pub fn dimension(&self) -> usize {
        self.a.nrows()
    }

    /// Q = L R Lᵀ, symmetrised.
    pub fn noise_covariance(&self) -> DMatrix<f64> {
        if self.validate().is_err() {
            return nan_matrix(self.a.nrows(), self.a.nrows());
        }
        let q = &self.loadings * &self.corr * self.loadings.transpose();
        symmetrised(&q)
    }

    /// E[X_t] given X_0 = x0: e^{At} x0 + ∫₀ᵗ e^{As} b ds, both read from the exponential of
    /// the augmented matrix [[A, b], [0, 0]]·t, so a singular A (a random walk) works.
    /// NaN when t is negative or not finite, or shapes disagree.
    pub fn mean_at(&self, x0: &DVector<f64>, t: f64) -> DVector<f64> {
        let n = self.dimension();
        if self.validate().is_err() || x0.len() != n || !(t.is_finite() && t >= 0.0) {
            return DVector::from_element(n, f64::NAN);
        }
        let (propagator, forcing) = propagate(&self.a, &self.b, t);
        propagator * x0 + forcing
    }

    /// Cov(X_t) = ∫₀ᵗ e^{As} Q e^{Aᵀs} ds for a deterministic X_0, by Van Loan's block
    /// exponential on a short step and doubling (see `van_loan_covariance`).
    pub fn covariance_at(&self, t: f64) -> DMatrix<f64> {
        let n = self.dimension();
        if self.validate().is_err() || !(t.is_finite() && t >= 0.0) {
            return nan_matrix(n, n);
        }
        van_loan_covariance(&self.a, &self.noise_covariance(), t)
    }

    /// Cov(X_s, X_t) = E[(X_s − m_s)(X_t − m_t)ᵀ]: P(s) e^{A(t−s)}ᵀ when s ≤ t, and
    /// e^{A(s−t)} P(t) when s > t. NaN for negative or non-finite times.
    pub fn cross_covariance(&self, s: f64, t: f64) -> DMatrix<f64> {
        let n = self.dimension();
        if self.validate().is_err() || !(s.is_finite() && t.is_finite() && s >= 0.0 && t >= 0.0) {
            return nan_matrix(n, n);
        }
        if s <= t {
            let propagator = matrix_exponential(&(&self.a * (t - s)));
            self.covariance_at(s) * propagator.transpose()
        } else {
            let propagator = matrix_exponential(&(&self.a * (s - t)));
            propagator * self.covariance_at(t)
        }
    }

    /// True when every eigenvalue of A has a negative real part.
    pub fn is_stable(&self) -> bool {
        self.validate().is_ok() && is_stable(&self.a)
    }

    /// The P solving A P + P Aᵀ + Q = 0 (the covariance of the stationary law), when A is
    /// stable. Solved as the Kronecker system (I⊗A + A⊗I) vec P = −vec Q, which is fine for
    /// the handful of states a model has (n² unknowns).
    pub fn stationary_covariance(&self) -> Option<DMatrix<f64>> {
        if !self.is_stable() {
            return None;
        }
        solve_lyapunov(&self.a, &self.noise_covariance())
    }

    /// −A⁻¹ b, the mean of the stationary law, when A is stable.
    pub fn stationary_mean(&self) -> Option<DVector<f64>> {
        if !self.is_stable() {
            return None;
        }
        if self.a.nrows() == 0 {
            // nalgebra's LU of a 0×0 matrix underflows an index: an empty system has an
            // empty mean.
            return Some(DVector::zeros(0));
        }
        let solution = self.a.clone().lu().solve(&self.b)?;
        let mean = -solution;
        mean.iter().all(|v| v.is_finite()).then_some(mean)
    }
}

/// ∫₀ᵗ e^{As} Q e^{Aᵀs} ds, the covariance after `t` of dX = A X dt + dM with
/// d⟨M⟩ = Q dt (finite inputs of matching shapes, t finite and non-negative).
///
/// Van Loan 1978 (IEEE Trans. Automatic Control 23, "Computing integrals involving the
/// matrix exponential", Theorem 1): with C = [[−A, Q], [0, Aᵀ]]·h, exp(C) = [[·, F₁₂],
/// [0, F₂₂]] and P(h) = F₂₂ᵀ F₁₂. The block exponential is taken on a short step h with
/// ‖A‖h ≤ ½, where it is accurate, and P(t) follows by doubling:
/// P(2h) = P(h) + e^{Ah} P(h) e^{Aᵀh}. Reason: the direct block exponential holds
/// e^{−At}, which overflows for fast rates (a rate of 100 per year at t = 10 already
/// gives NaN), and multiplying it back by e^{At} cancels away the slow directions.
fn van_loan_covariance(a: &DMatrix<f64>, q: &DMatrix<f64>, t: f64) -> DMatrix<f64> {
    let n = a.nrows();
    let q_scale = q.amax();
    if t == 0.0 || q_scale == 0.0 {
        return DMatrix::zeros(n, n);
    }
    let norm_a = one_norm(a);
    // Number of doublings k such that ‖A‖ t / 2^k ≤ ½, computed in logarithms so a huge
    // t cannot overflow; capped at the f64 exponent range.
    let doublings = if norm_a == 0.0 {
        0
    } else {
        let log2_size = norm_a.log2() + t.log2() + 1.0;
        log2_size.ceil().clamp(0.0, 1100.0) as i32
    };
    let step = t * 2f64.powi(-doublings);
    // P is linear in Q, so the block matrix is built with Q scaled to unit size.
    let mut block = DMatrix::<f64>::zeros(2 * n, 2 * n);
    block.view_mut((0, 0), (n, n)).copy_from(&(a * (-step)));
    block
        .view_mut((0, n), (n, n))
        .copy_from(&(q * (step / q_scale)));
    block
        .view_mut((n, n), (n, n))
        .copy_from(&(a.transpose() * step));
    let exponential = matrix_exponential(&block);
    let f12 = exponential.view((0, n), (n, n)).into_owned();
    let f22 = exponential.view((n, n), (n, n)).into_owned();
    let mut propagator = f22.transpose();
    let mut covariance = &propagator * f12;
    // Buffers allocated once: the doubling loop itself allocates nothing.
    let mut scratch = DMatrix::<f64>::zeros(n, n);
    let mut propagator_transposed = DMatrix::<f64>::zeros(n, n);
    for _ in 0..doublings {
        // covariance ← covariance + Φ covariance Φᵀ
        propagator.mul_to(&covariance, &mut scratch);
        propagator.transpose_to(&mut propagator_transposed);
        covariance.gemm(1.0, &scratch, &propagator_transposed, 1.0);
        // Φ ← Φ²
        propagator.mul_to(&propagator, &mut scratch);
        std::mem::swap(&mut propagator, &mut scratch);
    }
    symmetrised(&covariance) * q_scale
}

/// e^{At} and ∫₀ᵗ e^{As} b ds, both read from the exponential of the augmented matrix
/// [[A, b], [0, 0]]·t, so a singular A (a random walk) works.
pub(crate) fn propagate(
    a: &DMatrix<f64>,
    b: &DVector<f64>,
    t: f64,
) -> (DMatrix<f64>, DVector<f64>) {
    let n = a.nrows();
    let mut augmented = DMatrix::<f64>::zeros(n + 1, n + 1);
    augmented.view_mut((0, 0), (n, n)).copy_from(&(a * t));
    augmented.view_mut((0, n), (n, 1)).copy_from(&(b * t));
    let exponential = matrix_exponential(&augmented);
    let propagator = exponential.view((0, 0), (n, n)).into_owned();
    let forcing = exponential.view((0, n), (n, 1)).column(0).into_owned();
    (propagator, forcing)
}

/// The exact step of dX = (A X + b) dt + dM with d⟨M⟩ = Q dt over Δ:
/// X(t + Δ) = transition · X(t) + shift + noise_factor · Z, Z standard normal.
#[derive(Clone, Debug, PartialEq)]
pub struct GaussianStep {
    pub transition: DMatrix<f64>,
    pub shift: DVector<f64>,
    /// A square root of the step's covariance (see [`crate::symmetric::covariance_factor`]).
    pub noise_factor: DMatrix<f64>,
}

/// The exact step over `step` (Van Loan's block exponentials, as in
/// [`AffineGaussian::covariance_at`]): e^{AΔ}, ∫₀^Δ e^{As} b ds and a factor of
/// ∫₀^Δ e^{As} Q e^{Aᵀs} ds. `None` when the shapes disagree, an entry or the step is not
/// finite, the step is negative, or the covariance cannot be factored.
pub fn gaussian_step(
    a: &DMatrix<f64>,
    b: &DVector<f64>,
    q: &DMatrix<f64>,
    step: f64,
) -> Option<GaussianStep> {
    let n = a.nrows();
    let shapes = a.ncols() == n && b.len() == n && q.nrows() == n && q.ncols() == n;
    let finite = a
        .iter()
        .chain(b.iter())
        .chain(q.iter())
        .all(|v| v.is_finite());
    if !(shapes && finite && step.is_finite() && step >= 0.0) {
        return None;
    }
    let (transition, shift) = propagate(a, b, step);
    let covariance = van_loan_covariance(a, &symmetrised(q), step);
    let factor = crate::symmetric::covariance_factor(&covariance)?;
    Some(GaussianStep {
        transition,
        shift,
        noise_factor: factor.lower,
    })
}

/// Solves A P + P Aᵀ + Q = 0 by the Kronecker system (I⊗A + A⊗I) vec P = −vec Q.
/// `None` when shapes disagree or the system is singular (A and −A share an eigenvalue).
pub fn solve_lyapunov(a: &DMatrix<f64>, q: &DMatrix<f64>) -> Option<DMatrix<f64>> {
    let n = a.nrows();
    if a.ncols() != n || q.nrows() != n || q.ncols() != n {
        return None;
    }
    if n == 0 {
        return Some(DMatrix::zeros(0, 0));
    }
    let identity = DMatrix::<f64>::identity(n, n);
    let kronecker = identity.kronecker(a) + a.kronecker(&identity);
    // Column-major storage makes the slice of Q exactly vec(Q).
    let right_side = DVector::from_iterator(n * n, q.iter().map(|v| -v));
    let solution = kronecker.lu().solve(&right_side)?;
    if !solution.iter().all(|v| v.is_finite()) {
        return None;
    }
    let p = DMatrix::from_column_slice(n, n, solution.as_slice());
    Some(symmetrised(&p))
}

/// Eigenvalues (real part, imaginary part) of a square matrix, sorted by decreasing real
/// part then decreasing imaginary part. A non-square or non-finite matrix, or a Schur
/// iteration that does not converge, gives NaN pairs.
pub fn eigenvalues(a: &DMatrix<f64>) -> Vec<(f64, f64)> {
    let n = a.nrows();
    if a.ncols() != n || !a.iter().all(|v| v.is_finite()) {
        return vec![(f64::NAN, f64::NAN); n];
    }
    if n == 0 {
        return Vec::new();
    }
    // Reason for the iteration cap: nalgebra's default (0) means "no limit".
    let Some(schur) = nalgebra::Schur::try_new(a.clone(), f64::EPSILON, 1000 * n.max(10)) else {
        return vec![(f64::NAN, f64::NAN); n];
    };
    let mut values: Vec<(f64, f64)> = schur
        .complex_eigenvalues()
        .iter()
        .map(|z| (z.re, z.im))
        .collect();
    values.sort_by(|left, right| {
        right
            .0
            .total_cmp(&left.0)
            .then_with(|| right.1.total_cmp(&left.1))
    });
    values
}

/// True when the matrix is square and every eigenvalue has a real part below
/// −64·ε·‖A‖₁. Reason for the margin: the Schur iteration returns an exact zero eigenvalue
/// (a random walk, an integrated rate) as ±10⁻¹⁷ or so, which must not count as decay.
pub fn is_stable(a: &DMatrix<f64>) -> bool {
    let margin = 64.0 * f64::EPSILON * one_norm(a);
    a.nrows() == a.ncols() && eigenvalues(a).iter().all(|(re, _)| *re < -margin)
}

/// θ_m of Higham 2005 (SIAM J. Matrix Anal. Appl. 26, "The scaling and squaring method for
/// the matrix exponential revisited", Table 2.3): the largest 1-norm for which the [m/m]
/// Padé approximant is accurate to double precision.
const THETA_3: f64 = 1.495_585_217_958_292e-2;
const THETA_5: f64 = 2.539_398_330_063_23e-1;
const THETA_7: f64 = 9.504_178_996_162_932e-1;
const THETA_9: f64 = 2.097_847_961_257_068;
const THETA_13: f64 = 5.371_920_351_148_152;

/// Coefficients b_k of the [m/m] Padé numerator of e^x, Higham 2005, §2 (also scipy.linalg.expm).
const PADE_3: [f64; 4] = [120.0, 60.0, 12.0, 1.0];
const PADE_5: [f64; 6] = [30240.0, 15120.0, 3360.0, 420.0, 30.0, 1.0];
const PADE_7: [f64; 8] = [
    17_297_280.0,
    8_648_640.0,
    1_995_840.0,
    277_200.0,
    25_200.0,
    1512.0,
    56.0,
    1.0,
];
const PADE_9: [f64; 10] = [
    17_643_225_600.0,
    8_821_612_800.0,
    2_075_673_600.0,
    302_702_400.0,
    30_270_240.0,
    2_162_160.0,
    110_880.0,
    3960.0,
    90.0,
    1.0,
];
const PADE_13: [f64; 14] = [
    64_764_752_532_480_000.0,
    32_382_376_266_240_000.0,
    7_771_770_303_897_600.0,
    1_187_353_796_428_800.0,
    129_060_195_264_000.0,
    10_559_470_521_600.0,
    670_442_572_800.0,
    33_522_128_640.0,
    1_323_241_920.0,
    40_840_800.0,
    960_960.0,
    16_380.0,
    182.0,
    1.0,
];

/// e^M by Padé approximation with scaling and squaring (Higham 2005, Algorithm 2.3).
///
/// Written here rather than taken from nalgebra's `exp()` because that one does not finish
/// when the powers of its input overflow (a 2×2 with entries 10³⁰⁰ ran without end in a
/// trial with nalgebra 0.33); this one always finishes (at most ~1030 squarings) and returns
/// NaN for a non-square or non-finite input.
pub fn matrix_exponential(m: &DMatrix<f64>) -> DMatrix<f64> {
    let n = m.nrows();
    if m.ncols() != n || !m.iter().all(|v| v.is_finite()) {
        return nan_matrix(n, m.ncols());
    }
    if n == 0 {
        return DMatrix::zeros(0, 0);
    }
    let norm = one_norm(m);
    if norm == 0.0 {
        return DMatrix::identity(n, n);
    }
    if !norm.is_finite() {
        // Finite entries whose sum overflows: the scaling exponent would saturate and
        // the squaring loop run 2^31 times. No figure can come out finite anyway.
        return nan_matrix(n, n);
    }
    let identity = DMatrix::<f64>::identity(n, n);
    let (u, v, squarings) = if norm <= THETA_9 {
        let a2 = m * m;
        if norm <= THETA_3 {
            let (u, v) = low_degree_pade(m, &a2, &identity, &PADE_3);
            (u, v, 0)
        } else if norm <= THETA_5 {
            let (u, v) = low_degree_pade(m, &a2, &identity, &PADE_5);
            (u, v, 0)
        } else if norm <= THETA_7 {
            let (u, v) = low_degree_pade(m, &a2, &identity, &PADE_7);
            (u, v, 0)
        } else {
            let (u, v) = low_degree_pade(m, &a2, &identity, &PADE_9);
            (u, v, 0)
        }
    } else {
        let squarings = (norm / THETA_13).log2().ceil().max(0.0) as i32;
        let scaled = m * 2f64.powi(-squarings);
        let a2 = &scaled * &scaled;
        let a4 = &a2 * &a2;
        let a6 = &a4 * &a2;
        let b = &PADE_13;
        let inner_u = &a6 * (&a6 * b[13] + &a4 * b[11] + &a2 * b[9]);
        let u_sum = inner_u + &a6 * b[7] + &a4 * b[5] + &a2 * b[3] + &identity * b[1];
        let u = &scaled * u_sum;
        let inner_v = &a6 * (&a6 * b[12] + &a4 * b[10] + &a2 * b[8]);
        let v = inner_v + &a6 * b[6] + &a4 * b[4] + &a2 * b[2] + &identity * b[0];
        (u, v, squarings)
    };
    let numerator = &v + &u;
    let denominator = v - u;
    let Some(mut result) = denominator.lu().solve(&numerator) else {
        return nan_matrix(n, n);
    };
    let mut scratch = DMatrix::<f64>::zeros(n, n);
    for _ in 0..squarings {
        result.mul_to(&result, &mut scratch);
        std::mem::swap(&mut result, &mut scratch);
        if !result.iter().all(|v| v.is_finite()) {
            // Overflowed: squaring again changes nothing but the time taken.
            return nan_matrix(n, n);
        }
    }
    result
}

/// U and V of the [m/m] Padé approximant for m ∈ {3, 5, 7, 9}: U = A Σ b_{2j+1} A^{2j},
/// V = Σ b_{2j} A^{2j}.
fn low_degree_pade(
    a: &DMatrix<f64>,
    a2: &DMatrix<f64>,
    identity: &DMatrix<f64>,
    coefficients: &[f64],
) -> (DMatrix<f64>, DMatrix<f64>) {
    let mut even_power = identity.clone();
    let mut odd_sum = DMatrix::<f64>::zeros(a.nrows(), a.nrows());
    let mut even_sum = DMatrix::<f64>::zeros(a.nrows(), a.nrows());
    for pair in coefficients.chunks(2) {
        if let [even, odd] = pair {
            even_sum += &even_power * *even;
            odd_sum += &even_power * *odd;
            even_power = &even_power * a2;
        }
    }
    (a * odd_sum, even_sum)
}

/// Largest absolute column sum.
fn one_norm(m: &DMatrix<f64>) -> f64 {
    m.column_iter()
        .map(|column| column.iter().map(|v| v.abs()).sum::<f64>())
        .fold(0.0, f64::max)
}

fn symmetrised(m: &DMatrix<f64>) -> DMatrix<f64> {
    (m + m.transpose()) * 0.5
}

fn nan_matrix(rows: usize, columns: usize) -> DMatrix<f64> {
    DMatrix::from_element(rows, columns, f64::NAN)
}

#[cfg(test)]
mod tests {

    // The exact step, as the simulator takes it.

    fn step_of(a: &[f64], b: &[f64], q: &[f64], step: f64) -> GaussianStep {
        let n = b.len();
        gaussian_step(
            &DMatrix::from_row_slice(n, n, a),
            &DVector::from_row_slice(b),
            &DMatrix::from_row_slice(n, n, q),
            step,
        )
        .expect("finite inputs")
    }

    #[test]
    fn one_state_step_matches_the_ornstein_uhlenbeck_transition() {
        // dX = κ(θ − X) dt + σ dW: transition e^{−κΔ}, shift θ(1 − e^{−κΔ}),
        // variance σ²(1 − e^{−2κΔ})/(2κ) (Vasicek 1977, J. Financial Economics 5, §4).
        let (kappa, theta, sigma, step) = (1.8, 0.032, 0.15, 0.25);
        let result = step_of(&[-kappa], &[kappa * theta], &[sigma * sigma], step);
        let decay = (-kappa * step).exp();
        assert!((result.transition[(0, 0)] - decay).abs() < 1e-13);
        assert!((result.shift[0] - theta * (1.0 - decay)).abs() < 1e-13);
        let variance = sigma * sigma * (1.0 - (-2.0 * kappa * step).exp()) / (2.0 * kappa);
        assert!((result.noise_factor[(0, 0)].powi(2) - variance).abs() < 1e-13);
    }

    #[test]
    fn two_state_step_covariance_matches_the_correlated_ou_formula() {
        // Two independent-drift OU states on noises with correlation ρ:
        // Cov = ρ σ1 σ2 (1 − e^{−(κ1+κ2)Δ})/(κ1+κ2) (Brigo & Mercurio 2006, Interest Rate
        // Models, §4.2, the G2++ covariance of x and y).
        let (k1, k2, s1, s2, rho, step) = (0.9, 0.2, 0.01, 0.008, -0.6, 1.5);
        let q = [s1 * s1, rho * s1 * s2, rho * s1 * s2, s2 * s2];
        let result = step_of(&[-k1, 0.0, 0.0, -k2], &[0.0, 0.0], &q, step);
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
        let result = step_of(&[-kappa], &[kappa * theta], &[sigma * sigma], step);
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
        let result = step_of(&[0.0], &[0.5], &[0.04], 2.0);
        assert!((result.transition[(0, 0)] - 1.0).abs() < 1e-14);
        assert!((result.shift[0] - 1.0).abs() < 1e-14);
        assert!((result.noise_factor[(0, 0)].powi(2) - 0.08).abs() < 1e-14);
    }

    #[test]
    fn a_step_of_non_finite_or_mismatched_inputs_is_refused() {
        let one = DMatrix::from_element(1, 1, -1.0);
        let b = DVector::from_element(1, 0.0);
        let nan = DMatrix::from_element(1, 1, f64::NAN);
        assert!(gaussian_step(&one, &b, &nan, 1.0).is_none());
        assert!(gaussian_step(&nan, &b, &one, 1.0).is_none());
        assert!(gaussian_step(&one, &b, &one, f64::INFINITY).is_none());
        assert!(gaussian_step(&one, &b, &one, -1.0).is_none());
        assert!(gaussian_step(&one, &DVector::zeros(2), &one, 1.0).is_none());
    }

    use super::*;

    /// e^{[[0, θ], [−θ, 0]]} is the rotation [[cos θ, sin θ], [−sin θ, cos θ]]
    /// (common practice, no source); θ spans every Padé branch and the squaring branch.
    #[test]
    fn exponential_of_rotation_generator() {
        for theta in [1e-3, 0.1, 0.5, 1.5, 3.0, 10.0, 100.0] {
            let generator = DMatrix::from_row_slice(2, 2, &[0.0, theta, -theta, 0.0]);
            let exponential = matrix_exponential(&generator);
            let expected = DMatrix::from_row_slice(
                2,
                2,
                &[theta.cos(), theta.sin(), -theta.sin(), theta.cos()],
            );
            let error = (&exponential - &expected).amax();
            assert!(error < 1e-13 * theta.max(1.0), "θ = {theta}: error {error}");
            // nalgebra's own exponential meets the same closed form on these moderate inputs;
            // ours is kept for its guaranteed termination (see `matrix_exponential`).
            let library_error = (&generator.exp() - &expected).amax();
            assert!(
                library_error < 1e-13 * theta.max(1.0),
                "nalgebra, θ = {theta}: {library_error}"
            );
        }
    }

    /// e^{[[λ, 1], [0, λ]] t} = e^{λt} [[1, t], [0, 1]] (a Jordan block; common practice, no source).
    #[test]
    fn exponential_of_jordan_block() {
        for (lambda, t) in [(-0.3, 0.01), (-2.0, 1.0), (0.7, 4.0), (-1.0, 40.0)] {
            let block = DMatrix::from_row_slice(2, 2, &[lambda, 1.0, 0.0, lambda]) * t;
            let exponential = matrix_exponential(&block);
            let scale = (lambda * t).exp();
            let expected = DMatrix::from_row_slice(2, 2, &[scale, scale * t, 0.0, scale]);
            for (got, want) in exponential.iter().zip(expected.iter()) {
                assert!(
                    (got - want).abs() <= 1e-12 * want.abs().max(scale),
                    "λ = {lambda}, t = {t}: {got} vs {want}"
                );
            }
        }
    }

    #[test]
    fn bad_matrices_give_nan_not_panic() {
        assert!(matrix_exponential(&DMatrix::from_element(2, 3, 1.0))
            .iter()
            .all(|v| v.is_nan()));
        let infinite = DMatrix::from_row_slice(2, 2, &[f64::INFINITY, 0.0, 0.0, 1.0]);
        assert!(matrix_exponential(&infinite).iter().all(|v| v.is_nan()));
        let huge = DMatrix::from_row_slice(2, 2, &[1e300, 1e300, -1e300, 1e300]);
        // Finishes (overflow to non-finite values is the honest answer).
        let _ = matrix_exponential(&huge);
        assert!(eigenvalues(&infinite).iter().all(|(re, _)| re.is_nan()));
    }

    #[test]
    fn a_one_norm_that_overflows_ends_at_once_with_nan() {
        // Every entry is finite but each column sums past f64::MAX: the scaling exponent
        // once saturated to i32::MAX and the squaring loop ran for minutes.
        let m = DMatrix::from_row_slice(2, 2, &[-1e308, 1e308, 1e308, -1e308]);
        assert!(matrix_exponential(&m).iter().all(|v| v.is_nan()));
    }

    #[test]
    fn validation_names_the_problem() {
        let result = AffineGaussian::new(
            DMatrix::zeros(2, 2),
            DVector::zeros(3),
            DMatrix::zeros(2, 1),
            DMatrix::identity(1, 1),
        );
        assert!(matches!(result, Err(message) if message.contains("constant drift")));
        let asymmetric = AffineGaussian::new(
            DMatrix::zeros(1, 1),
            DVector::zeros(1),
            DMatrix::zeros(1, 2),
            DMatrix::from_row_slice(2, 2, &[1.0, 0.5, 0.2, 1.0]),
        );
        assert!(matches!(asymmetric, Err(message) if message.contains("symmetric")));
        let system = AffineGaussian {
            a: DMatrix::zeros(2, 2),
            b: DVector::zeros(2),
            loadings: DMatrix::zeros(3, 1),
            corr: DMatrix::identity(1, 1),
        };
        assert!(system.covariance_at(1.0).iter().all(|v| v.is_nan()));
        assert!(system.stationary_covariance().is_none());
    }
}
