//! Figures of one decoupled state dX = (a + b X) dt + g(X) dW with g² = α + β X + γ X²:
//! mean, variance, autocovariance, stationary law and quantiles.
//!
//! Constant coefficients use closed forms built on φ(x, t) = (e^{x t} − 1)/x, evaluated
//! with `exp_m1` so that a tiny slope loses no precision and x = 0 gives t exactly.
//! Time-dependent coefficients use the integrating factor with adaptive Gauss–Kronrod
//! quadrature (or the moment equations when the noise depends on the state), split at
//! the breaks of the coefficients ([`TimeBreaks`]: knots of `step` and `ramp`, kinks of
//! `min`, `max`, `abs` of t) so that every piece is smooth.

use crate::breaks::TimeBreaks;
use crate::elementary::{convolve, exp_polynomial, ExpPolynomial};
use crate::linear_system::matrix_exponential;
use crate::noncentral;
use crate::ode;
use crate::shape::OneState;
use crate::{Family, Method};
use nalgebra::DMatrix;
use statrs::distribution::{ContinuousCDF, Normal};

/// Relative tolerance of the quadratures.
const QUADRATURE_TOLERANCE: f64 = 1e-12;

/// (e^{x t} − 1)/x, equal to t at x = 0, without cancellation for small x·t.
pub fn phi(x: f64, t: f64) -> f64 {
    let z = x * t;
    if z == 0.0 {
        t
    } else {
        z.exp_m1() / x
    }
}

/// Coefficients evaluated at one time.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Values {
    pub a: f64,
    pub b: f64,
    pub alpha: f64,
    pub beta: f64,
    pub gamma: f64,
}

impl OneState {
    pub(crate) fn values(&self, params: &[f64], t: f64) -> Values {
        Values {
            a: self.a.value(params, t),
            b: self.b.value(params, t),
            alpha: self.alpha.value(params, t),
            beta: self.beta.value(params, t),
            gamma: self.gamma.value(params, t),
        }
    }

    /// Whether the noise depends on the state (β or γ non-zero).
    pub(crate) fn state_dependent_noise(&self) -> bool {
        !self.beta.is_zero() || !self.gamma.is_zero()
    }
}

/// Mean, variance and how they were obtained.
#[derive(Clone, Copy, Debug)]
pub(crate) struct MeanVariance {
    pub mean: f64,
    pub variance: f64,
    pub method: Method,
}

/// Mean and variance of the state at time `t` (clock units).
pub(crate) fn mean_variance(
    os: &OneState,
    family: Family,
    params: &[f64],
    x0: f64,
    t: f64,
) -> Option<MeanVariance> {
    if !(t.is_finite() && t >= 0.0) {
        return None;
    }
    if os.time_dependent {
        return time_dependent_mean_variance(os, params, x0, t);
    }
    let v = os.values(params, 0.0);
    let mean = x0 * (v.b * t).exp() + v.a * phi(v.b, t);
    let closed = |variance: f64| {
        Some(MeanVariance {
            mean,
            variance,
            method: Method::ClosedForm,
        })
    };
    match family {
        // No shock: the path is the mean.
        Family::Deterministic => closed(0.0),
        // Var = α t (Itô isometry with constant integrand).
        Family::ArithmeticBrownian => closed(v.alpha * t),
        // Var = α ∫₀ᵗ e^{2b(t−s)} ds = α φ(2b, t) (Vasicek 1977, eq. 25 with α = σ²).
        Family::OrnsteinUhlenbeck => closed(v.alpha * phi(2.0 * v.b, t)),
        // The same isometry with a positive slope: the variance grows without bound.
        Family::Linear if !os.state_dependent_noise() && v.b != 0.0 => {
            closed(v.alpha * phi(2.0 * v.b, t))
        }
        // Var = x0² e^{2bt} (e^{γ t} − 1) (Glasserman 2004, §3.2.1).
        Family::GeometricBrownian => {
            closed(x0 * x0 * (2.0 * v.b * t).exp() * (v.gamma * t).exp_m1())
        }
        // Var = β x0 e^{bt} φ(b,t) + a β φ(b,t)²/2, the CIR variance rewritten with
        // κ = −b, θ = a/κ, σ² = β (Cox, Ingersoll & Ross 1985, eq. 19).
        Family::SquareRoot => {
            let f = phi(v.b, t);
            closed(v.beta * x0 * (v.b * t).exp() * f + v.a * v.beta * f * f / 2.0)
        }
        Family::Linear | Family::Polynomial => {
            let variance = moment_equation_variance(&v, x0, t)?;
            Some(MeanVariance {
                mean,
                variance,
                method: if os.state_dependent_noise() {
                    Method::MomentEquations
                } else {
                    Method::ClosedForm
                },
            })
        }
        Family::LinearSystem | Family::ExponentialAffine | Family::General => None,
    }
}

/// Solves d/dt (1, m, m², V) = M (1, m, m², V) exactly by the matrix exponential, with
/// m' = a + b m, (m²)' = 2 a m + 2 b m², V' = α + β m + γ m² + (2b + γ) V
/// (Kloeden & Platen 1992, §4.2, moment equations of linear SDEs).
fn moment_equation_variance(v: &Values, x0: f64, t: f64) -> Option<f64> {
    let rows = [
        [0.0, 0.0, 0.0, 0.0],
        [v.a, v.b, 0.0, 0.0],
        [0.0, 2.0 * v.a, 2.0 * v.b, 0.0],
        [v.alpha, v.beta, v.gamma, 2.0 * v.b + v.gamma],
    ];
    let m = DMatrix::from_fn(4, 4, |i, j| {
        rows.get(i).and_then(|r| r.get(j)).copied().unwrap_or(0.0) * t
    });
    let propagator = matrix_exponential(&m);
    let start = nalgebra::DVector::from_vec(vec![1.0, x0, x0 * x0, 0.0]);
    let end = propagator * start;
    let variance = end.get(3).copied()?;
    variance.is_finite().then_some(variance)
}

/// ∫ f from `from` to `to` by adaptive Gauss–Kronrod on each smooth piece between the
/// breaks; NaN when the integrator gives up.
fn integral(f: impl Fn(f64) -> f64, from: f64, to: f64, breaks: &TimeBreaks) -> f64 {
    if from == to {
        return 0.0;
    }
    ode::quad_pieces(f, &breaks.pieces(from, to), QUADRATURE_TOLERANCE).unwrap_or(f64::NAN)
}

impl OneState {
    /// The breaks of every coefficient of the equation.
    pub(crate) fn breaks(&self, params: &[f64]) -> TimeBreaks {
        TimeBreaks::of_polys(
            [&self.a, &self.b, &self.alpha, &self.beta, &self.gamma],
            params,
        )
    }
}

/// exp(∫ₛᵗ b(u) du).
pub(crate) fn growth_factor(os: &OneState, params: &[f64], s: f64, t: f64) -> f64 {
    if os.b.depends_on_time() {
        let breaks = TimeBreaks::of_polys([&os.b], params);
        integral(|u| os.b.value(params, u), s, t, &breaks).exp()
    } else {
        (os.b.value(params, 0.0) * (t - s)).exp()
    }
}

/// y(t) for y' = p(t) y + q(t), y(0) = y0, by the integrating factor:
/// y(t) = e^{P(t)} y0 + ∫₀ᵗ e^{P(t) − P(s)} q(s) ds with P(t) = ∫₀ᵗ p.
fn integrating_factor(
    p: &dyn Fn(f64) -> f64,
    p_is_constant: bool,
    q: &dyn Fn(f64) -> f64,
    y0: f64,
    t: f64,
    breaks: &TimeBreaks,
) -> f64 {
    let p0 = p(0.0);
    let exponent = |s: f64| {
        if p_is_constant {
            p0 * (t - s)
        } else {
            integral(p, s, t, breaks)
        }
    };
    let homogeneous = if y0 == 0.0 {
        0.0
    } else {
        y0 * exponent(0.0).exp()
    };
    homogeneous + integral(|s| exponent(s).exp() * q(s), 0.0, t, breaks)
}

/// Whether a time-dependent state has closed forms: constant slope b, additive noise,
/// and a(t), α(t) sums of c·tᵏ·e^{λt}.
pub(crate) fn elementary_forms(
    os: &OneState,
    params: &[f64],
) -> Option<(ExpPolynomial, ExpPolynomial)> {
    if os.b.depends_on_time() || os.state_dependent_noise() {
        return None;
    }
    Some((
        exp_polynomial(&os.a, params)?,
        exp_polynomial(&os.alpha, params)?,
    ))
}

fn time_dependent_mean_variance(
    os: &OneState,
    params: &[f64],
    x0: f64,
    t: f64,
) -> Option<MeanVariance> {
    if let Some((drift, noise)) = elementary_forms(os, params) {
        // m(t) = x₀ e^{bt} + ∫₀ᵗ e^{b(t−s)} a(s) ds, v(t) = ∫₀ᵗ e^{2b(t−s)} α(s) ds
        // (Kloeden & Platen 1992, §4.2, integrating factor with constant b).
        let b = os.b.value(params, 0.0);
        let mean = x0 * (b * t).exp() + convolve(b, &drift, t);
        let variance = convolve(2.0 * b, &noise, t);
        return (mean.is_finite() && variance.is_finite()).then_some(MeanVariance {
            mean,
            variance,
            method: Method::ClosedForm,
        });
    }
    let breaks = os.breaks(params);
    let b_constant = !os.b.depends_on_time();
    let b = |s: f64| os.b.value(params, s);
    let a = |s: f64| os.a.value(params, s);
    let mean = integrating_factor(&b, b_constant, &a, x0, t, &breaks);
    if !os.state_dependent_noise() {
        // V' = 2b V + α(t): the Itô isometry with a time-dependent integrand
        // (Kloeden & Platen 1992, §4.2, eq. 2.9 with d = 0).
        let two_b = |s: f64| 2.0 * os.b.value(params, s);
        let alpha = |s: f64| os.alpha.value(params, s);
        let variance = integrating_factor(&two_b, b_constant, &alpha, 0.0, t, &breaks);
        return (mean.is_finite() && variance.is_finite()).then_some(MeanVariance {
            mean,
            variance,
            method: Method::Quadrature,
        });
    }
    // State-dependent noise: integrate the moment equations (m, V) together.
    let derivative = |s: f64, y: &[f64], dy: &mut [f64]| {
        let v = os.values(params, s);
        let m = y.first().copied().unwrap_or(f64::NAN);
        let var = y.get(1).copied().unwrap_or(f64::NAN);
        if let Some(slot) = dy.get_mut(0) {
            *slot = v.a + v.b * m;
        }
        if let Some(slot) = dy.get_mut(1) {
            *slot = v.alpha + v.beta * m + v.gamma * m * m + (2.0 * v.b + v.gamma) * var;
        }
    };
    let end = ode::integrate_pieces(
        derivative,
        &[x0, 0.0],
        &breaks.pieces(0.0, t),
        1e-11,
        1e-300,
    )
    .ok()?;
    let variance = end.get(1).copied()?;
    (mean.is_finite() && variance.is_finite()).then_some(MeanVariance {
        mean,
        variance,
        method: Method::MomentEquations,
    })
}

/// Cov(X_s, X_t) for s ≤ t: Var(X_s) · exp(∫ₛᵗ b), since E[X_t | X_s] is affine in X_s
/// with that slope (Kloeden & Platen 1992, §4.2).
pub(crate) fn autocovariance(
    os: &OneState,
    family: Family,
    params: &[f64],
    x0: f64,
    s: f64,
    t: f64,
) -> Option<f64> {
    let (early, late) = if s <= t { (s, t) } else { (t, s) };
    let at_early = mean_variance(os, family, params, x0, early)?;
    let value = at_early.variance * growth_factor(os, params, early, late);
    value.is_finite().then_some(value)
}

/// Stationary mean and variance, when the coefficients are constant, b < 0 and
/// 2b + γ < 0 (the second moment converges).
pub(crate) fn stationary(os: &OneState, params: &[f64]) -> Option<(f64, f64)> {
    if os.time_dependent {
        return None;
    }
    let v = os.values(params, 0.0);
    if !(v.b < 0.0 && 2.0 * v.b + v.gamma < 0.0) {
        return None;
    }
    let mean = -v.a / v.b;
    let variance = -(v.alpha + v.beta * mean + v.gamma * mean * mean) / (2.0 * v.b + v.gamma);
    (mean.is_finite() && variance.is_finite()).then_some((mean, variance))
}

/// The p-quantile of X_t where its law is known.
pub(crate) fn quantile(
    os: &OneState,
    family: Family,
    params: &[f64],
    x0: f64,
    t: f64,
    p: f64,
) -> Option<f64> {
    if !(p > 0.0 && p < 1.0) {
        return None;
    }
    let standard = Normal::new(0.0, 1.0).ok()?;
    let gaussian = matches!(
        family,
        Family::Deterministic | Family::ArithmeticBrownian | Family::OrnsteinUhlenbeck
    ) || (family == Family::Linear && !os.state_dependent_noise());
    if gaussian {
        let mv = mean_variance(os, family, params, x0, t)?;
        return Some(mv.mean + mv.variance.max(0.0).sqrt() * standard.inverse_cdf(p));
    }
    match family {
        Family::GeometricBrownian => {
            // ln(X_t / x0) ~ Normal((b − γ/2) t, γ t) (Glasserman 2004, §3.2.1).
            if x0 == 0.0 {
                return Some(0.0);
            }
            let v = os.values(params, 0.0);
            let location = (v.b - v.gamma / 2.0) * t;
            let spread = (v.gamma * t).max(0.0).sqrt();
            // A negative start mirrors the law: the p-quantile of X is x0 times the
            // (1 − p)-quantile of the lognormal factor.
            let z = if x0 > 0.0 {
                standard.inverse_cdf(p)
            } else {
                standard.inverse_cdf(1.0 - p)
            };
            Some(x0 * (location + spread * z).exp())
        }
        Family::SquareRoot => {
            let law = square_root_transition(os, params, x0, t)?;
            if t == 0.0 {
                return Some(x0);
            }
            noncentral::quantile(p, law.degrees, law.noncentrality).map(|y| y / law.scale)
        }
        _ => None,
    }
}

/// X_t = Y / scale with Y noncentral chi-square(degrees, noncentrality).
#[derive(Clone, Copy, Debug)]
pub(crate) struct SquareRootTransition {
    pub degrees: f64,
    pub noncentrality: f64,
    pub scale: f64,
}

/// The transition law of dX = κ(θ − X) dt + σ √X dW from x0 over t:
/// 2c X_t ~ χ'²(4κθ/σ², 2c x0 e^{−κt}) with c = 2κ / (σ² (1 − e^{−κt}))
/// (Cox, Ingersoll & Ross 1985, eq. 18).
pub(crate) fn square_root_transition(
    os: &OneState,
    params: &[f64],
    x0: f64,
    t: f64,
) -> Option<SquareRootTransition> {
    let v = os.values(params, 0.0);
    if !(v.beta > 0.0 && v.a >= 0.0 && x0 >= 0.0 && t >= 0.0) {
        return None;
    }
    // c = 2κ/(σ²(1 − e^{−κt})) = 2 / (σ² φ(b, t)) with b = −κ; fine for any sign of b.
    let c = 2.0 / (v.beta * phi(v.b, t));
    let degrees = 4.0 * v.a / v.beta;
    let noncentrality = 2.0 * c * x0 * (v.b * t).exp();
    (degrees > 0.0 && c.is_finite()).then_some(SquareRootTransition {
        degrees,
        noncentrality,
        scale: 2.0 * c,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    use crate::algebra::Poly;
    use proptest::prelude::*;

    fn constant_state(a: f64, b: f64, alpha: f64, beta: f64, gamma: f64) -> OneState {
        OneState {
            state: 0,
            a: Poly::constant(a),
            b: Poly::constant(b),
            alpha: Poly::constant(alpha),
            beta: Poly::constant(beta),
            gamma: Poly::constant(gamma),
            affine_terms: None,
            time_dependent: false,
        }
    }

    proptest! {
        // Each closed form solves the same moment equations as the exact exponential of
        // the 4×4 moment matrix (Kloeden & Platen 1992, §4.2); they must agree.
        #[test]
        fn closed_forms_solve_the_moment_equations(
            a in 0.0..0.1f64,
            b in -3.0..1.0f64,
            vol in 0.01..0.5f64,
            x0 in 0.001..0.2f64,
            t in 0.01..5.0f64,
        ) {
            let params: [f64; 0] = [];
            let cases = [
                (Family::OrnsteinUhlenbeck, constant_state(a, b, vol * vol, 0.0, 0.0)),
                (Family::SquareRoot, constant_state(a, b, 0.0, vol * vol, 0.0)),
                (Family::GeometricBrownian, constant_state(0.0, b, 0.0, 0.0, vol * vol)),
            ];
            for (family, os) in cases {
                let closed = mean_variance(&os, family, &params, x0, t).expect("closed form");
                let v = os.values(&params, 0.0);
                let reference = moment_equation_variance(&v, x0, t).expect("moment equations");
                let scale = reference.abs().max(1e-300);
                prop_assert!(
                    (closed.variance - reference).abs() <= 1e-9 * scale,
                    "{family:?}: {} vs {}", closed.variance, reference
                );
            }
        }

        // With κ → 0 the square-root variance tends to σ²(x₀t + a t²/2), the solution of
        // v' = σ² m with m = x₀ + a t (common practice, no source).
        #[test]
        fn square_root_variance_has_the_zero_speed_limit(
            a in 0.0..0.1f64,
            vol in 0.01..0.5f64,
            x0 in 0.001..0.2f64,
            t in 0.01..5.0f64,
            tiny in 1e-15..1e-12f64,
        ) {
            let os = constant_state(a, -tiny, 0.0, vol * vol, 0.0);
            let closed = mean_variance(&os, Family::SquareRoot, &[], x0, t).expect("closed");
            let limit = vol * vol * (x0 * t + a * t * t / 2.0);
            prop_assert!((closed.variance - limit).abs() <= 1e-10 * limit);
        }
    }

    #[test]
    fn phi_is_stable_for_tiny_rates() {
        // (e^{xt} − 1)/x → t + x t²/2 for small x (Taylor series, common practice).
        let t = 2.0;
        for x in [1e-9, -1e-12, 1e-15] {
            let series = t + x * t * t / 2.0;
            assert!(((phi(x, t) - series) / series).abs() < 1e-15);
        }
        assert_eq!(phi(0.0, t), t);
    }
}
