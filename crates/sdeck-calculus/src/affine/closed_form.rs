//! The closed forms of the transform: the scalar Riccati structure (every moving β_j on
//! an equation of its own with constant coefficients, as for Vasicek, Cox–Ingersoll–Ross
//! and a log-price over a square-root variance) and Gaussian sets through the mean and
//! covariance of (X_t, ∫ρ₁·X).

use super::{AffineSet, Numbers, Rate, TransformError};
use crate::linear_system::AffineGaussian;
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

/// The fixed components, when every other β_j has a scalar Riccati equation with
/// constant coefficients and α needs only ∫β_j and ∫β_j².
pub(super) fn scalar_structure(n: usize, c: &Numbers, r1: &[f64]) -> Option<Vec<bool>> {
    let h1 = |k: usize, i: usize, j: usize| c.h1[k * n * n + i * n + j];
    let fixed: Vec<bool> = (0..n)
        .map(|j| {
            (0..n).all(|i| c.k1[i * n + j] == 0.0)
                && (0..n).all(|i| (0..n).all(|l| h1(j, i, l) == 0.0))
                && r1.get(j).copied().unwrap_or(0.0) == 0.0
        })
        .collect();
    for j in (0..n).filter(|&j| !fixed[j]) {
        for i in (0..n).filter(|&i| !fixed[i] && i != j) {
            if c.k1[i * n + j] != 0.0 || c.h0[i * n + j] != 0.0 {
                return None;
            }
            for l in 0..n {
                if h1(j, i, l) != 0.0 || h1(j, l, i) != 0.0 {
                    return None;
                }
            }
        }
        if h1(j, j, j) == 0.0 && c.h0[j * n + j] != 0.0 {
            return None;
        }
    }
    Some(fixed)
}

/// (α, β) at τ = t for the scalar structure.
pub(super) fn scalar_solution(
    n: usize,
    c: &Numbers,
    r1: &[f64],
    fixed: &[bool],
    u: &[Complex64],
    t: f64,
) -> Result<(Complex64, Vec<Complex64>), TransformError> {
    let h1 = |k: usize, i: usize, j: usize| c.h1[k * n * n + i * n + j];
    let zero = Complex64::new(0.0, 0.0);
    let mut beta = u.to_vec();
    let mut alpha = zero;
    // The fixed part of α: K0·u + ½ uᵀH0u over the fixed components, times t.
    for i in (0..n).filter(|&i| fixed[i]) {
        alpha += c.k0[i] * u[i] * t;
        for l in (0..n).filter(|&l| fixed[l]) {
            alpha += 0.5 * c.h0[i * n + l] * u[i] * u[l] * t;
        }
    }
    for j in (0..n).filter(|&j| !fixed[j]) {
        let a = 0.5 * h1(j, j, j);
        let mut b = Complex64::new(c.k1[j * n + j], 0.0);
        let mut c0 = Complex64::new(-r1.get(j).copied().unwrap_or(0.0), 0.0);
        for k in (0..n).filter(|&k| fixed[k]) {
            b += 0.5 * (h1(j, j, k) + h1(j, k, j)) * u[k];
            c0 += c.k1[k * n + j] * u[k];
            for l in (0..n).filter(|&l| fixed[l]) {
                c0 += 0.5 * u[k] * h1(j, k, l) * u[l];
            }
        }
        let (value, integral) =
            scalar_riccati(a, b, c0, u[j], t).ok_or(TransformError::Explodes)?;
        let mut linear = Complex64::new(c.k0[j], 0.0);
        for k in (0..n).filter(|&k| fixed[k]) {
            linear += 0.5 * (c.h0[j * n + k] + c.h0[k * n + j]) * u[k];
        }
        alpha += linear * integral;
        let hjj = c.h0[j * n + j];
        if hjj != 0.0 {
            // ∫β² from the equation itself: a∫β² = β(t) − β(0) − b∫β − c t.
            let square = (value - u[j] - b * integral - c0 * t) / a;
            alpha += 0.5 * hjj * square;
        }
        beta[j] = value;
    }
    if !alpha.is_finite() || beta.iter().any(|b| !b.is_finite()) {
        return Err(TransformError::Explodes);
    }
    Ok((alpha, beta))
}

/// β′ = aβ² + bβ + c from β(0) = β₀: (β(t), ∫₀ᵗ β). `None` when the solution has a pole
/// in [0, t].
pub(crate) fn scalar_riccati(
    a: f64,
    b: Complex64,
    c: Complex64,
    beta0: Complex64,
    t: f64,
) -> Option<(Complex64, Complex64)> {
    if a == 0.0 {
        // Linear: β = β₀ e^{bt} + c (e^{bt} − 1)/b.
        let bt = b * t;
        let growth = bt.exp();
        let phi = if bt.norm() < 1e-8 {
            t * (1.0 + bt / 2.0 + bt * bt / 6.0)
        } else {
            (growth - 1.0) / b
        };
        let value = beta0 * growth + c * phi;
        let integral = if bt.norm() < 1e-5 {
            beta0 * phi + c * t * t * (0.5 + bt / 6.0 + bt * bt / 24.0)
        } else {
            beta0 * phi + c * (phi - t) / b
        };
        return Some((value, integral));
    }
    let mut d = (b * b - 4.0 * a * c).sqrt();
    if d.re > 0.0 {
        d = -d;
    }
    if d.norm() < 1e-300 {
        // Double root r: 1/(β − r) = 1/(β₀ − r) − a t.
        let r = -b / (2.0 * a);
        let inverse = 1.0 / (beta0 - r) - a * t;
        let value = r + 1.0 / inverse;
        let integral = r * t - (1.0 - a * t * (beta0 - r)).ln() / a;
        return (value.is_finite() && integral.is_finite()).then_some((value, integral));
    }
    let plus = (-b + d) / (2.0 * a);
    let minus = (-b - d) / (2.0 * a);
    let gap = beta0 - minus;
    if gap.norm() <= 1e-15 * (minus.norm() + 1e-300) {
        return Some((minus, minus * t));
    }
    let z0 = (beta0 - plus) / gap;
    let decay = (d * t).exp();
    let denominator = 1.0 - z0 * decay;
    let real = beta0.im == 0.0 && b.im == 0.0 && c.im == 0.0;
    let discriminant = (b * b - 4.0 * a * c).re;
    if real && discriminant >= 0.0 && z0.re > 1.0 {
        // Real roots: the denominator vanishes at e^{dτ} = 1/z0, a pole at −ln(z0)/d.
        if -z0.re.ln() / d.re <= t {
            return None;
        }
    }
    if real && discriminant < 0.0 {
        // Complex-conjugate roots of a real equation: β = −b/(2a) + (ω/a) tan(ωτ + θ₀)
        // with ω = √(4ac − b²)/2, which has a pole at (π/2 − θ₀)/ω.
        let omega = (-discriminant).sqrt() / 2.0;
        let start = ((beta0.re + b.re / (2.0 * a)) * a / omega).atan();
        if (std::f64::consts::FRAC_PI_2 - start) / omega <= t {
            return None;
        }
    }
    let value = (plus - minus * z0 * decay) / denominator;
    let integral = plus * t - (denominator / (1.0 - z0)).ln() / a;
    (value.is_finite() && integral.is_finite()).then_some((value, integral))
}

/// The Gaussian set: the vector (X_t, ∫ρ₁·X) is Gaussian with mean and covariance from
/// the matrix exponential (Van Loan 1978), and log E[e^{w·Z}] = w·m + ½ wᵀPw with
/// w = (u, −1), exact for complex u.
pub(super) fn gaussian_log_transform(
    set: &AffineSet,
    c: &Numbers,
    u: &[Complex64],
    rate: &Rate,
    t: f64,
) -> Result<Complex64, TransformError> {
    let n = set.n;
    let (_, r1) = rate.values(&set.params, 0.0);
    let size = n + 1;
    let a = DMatrix::from_fn(size, size, |i, j| {
        if i < n && j < n {
            c.k1[i * n + j]
        } else if i == n && j < n {
            r1[j]
        } else {
            0.0
        }
    });
    let b = DVector::from_fn(size, |i, _| if i < n { c.k0[i] } else { 0.0 });
    let loadings = DMatrix::from_fn(size, n, |i, j| if i == j { 1.0 } else { 0.0 });
    let covariance = DMatrix::from_fn(n, n, |i, j| c.h0[i * n + j]);
    let system = AffineGaussian::new(a, b, loadings, covariance).map_err(TransformError::Failed)?;
    let mut start = set.x0.clone();
    start.push(0.0);
    let mean = system.mean_at(&DVector::from_vec(start), t);
    let p = system.covariance_at(t);
    let w: Vec<Complex64> = u
        .iter()
        .copied()
        .chain([Complex64::new(-1.0, 0.0)])
        .collect();
    let mut value = Complex64::new(0.0, 0.0);
    for i in 0..size {
        value += w[i] * mean[i];
        for j in 0..size {
            value += 0.5 * w[i] * p[(i, j)] * w[j];
        }
    }
    if value.is_finite() {
        Ok(value)
    } else {
        Err(TransformError::Failed(
            "the Gaussian figures are not finite".into(),
        ))
    }
}
