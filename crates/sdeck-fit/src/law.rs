//! Exact transition log-densities of the families that have one, from the coefficients
//! of the one-state form dX = (a + b X) dt + g dW, g² = α + β X + γ X², held constant
//! over the step `dt`.

use crate::bessel::{ln_bessel_i_scaled, ln_bessel_i_scaled_derivatives};
use sdeck_calculus::coefficients::OneStateValues;
use sdeck_calculus::one_state::phi;
use sdeck_calculus::Family;

const LN_2PI: f64 = 1.837_877_066_409_345_5;

/// ln of the normal density N(mean, variance) at x.
pub(crate) fn ln_normal(x: f64, mean: f64, variance: f64) -> f64 {
    if variance.is_nan() || variance <= 0.0 {
        return f64::NAN;
    }
    let d = x - mean;
    -0.5 * (LN_2PI + variance.ln() + d * d / variance)
}

/// ln p(y at t + dt | x at t) for a one-state family; NaN where the coefficients leave
/// the family's domain (a non-positive variance, a negative level of a square-root
/// factor).
pub(crate) fn ln_transition(family: Family, v: &OneStateValues, x: f64, y: f64, dt: f64) -> f64 {
    match family {
        // X_{t+Δ} ~ N(x + aΔ, αΔ).
        Family::ArithmeticBrownian => ln_normal(y, x + v.a * dt, v.alpha * dt),
        // X_{t+Δ} ~ N(x e^{bΔ} + a φ(b,Δ), α φ(2b,Δ)) (Vasicek 1977, eq. 25 with b = −κ).
        Family::OrnsteinUhlenbeck => ln_normal(
            y,
            x * (v.b * dt).exp() + v.a * phi(v.b, dt),
            v.alpha * phi(2.0 * v.b, dt),
        ),
        // ln X_{t+Δ} ~ N(ln x + (b − γ/2)Δ, γΔ); the density of X carries the Jacobian 1/y
        // (Glasserman 2004, §3.2.1).
        Family::GeometricBrownian => {
            let ly = y.ln();
            ln_normal(ly, x.ln() + (v.b - v.gamma / 2.0) * dt, v.gamma * dt) - ly
        }
        Family::SquareRoot => ln_square_root(v.a, v.b, v.beta, x, y, dt),
        _ => f64::NAN,
    }
}

/// The square-root transition density dX = (a + bX) dt + √(βX) dW (Cox, Ingersoll & Ross
/// 1985, eq. 18, with κ = −b, θ = a/κ, σ² = β): c = 2 / (β φ(b,Δ)), u = c x e^{bΔ},
/// v = c y, q = 2a/β − 1, and
/// p(y | x) = c e^{−u−v} (v/u)^{q/2} I_q(2√(uv)).
///
/// Written as ln c − (√v − √u)² + (q/2) ln(v/u) + ln(e^{−z} I_q(z)) with z = 2√(uv): the
/// terms u, v and ln I_q(z) are each near z (10³ and more with weekly data) while the
/// density is of order 1, and summing them directly would leave a rounding noise that
/// moves with the parameters and spoils the finite-difference Hessian.
fn ln_square_root(a: f64, b: f64, beta: f64, x: f64, y: f64, dt: f64) -> f64 {
    if !(beta > 0.0 && x > 0.0 && y > 0.0) {
        return f64::NAN;
    }
    let q = 2.0 * a / beta - 1.0;
    if q <= -1.0 {
        return f64::NAN;
    }
    let c = 2.0 / (beta * phi(b, dt));
    // x e^{bΔ}: the conditional mean of X without its level part.
    let decayed = x * (b * dt).exp();
    let gap = y.sqrt() - decayed.sqrt();
    let z = 2.0 * c * (decayed * y).sqrt();
    c.ln() - c * gap * gap + 0.5 * q * (y.ln() - x.ln() - b * dt) + ln_bessel_i_scaled(q, z)
}

/// One observed step, with what the densities need of it computed once.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Transition {
    pub dt: f64,
    pub x: f64,
    pub y: f64,
    /// ln y − ln x, √x, √y, √(xy): NaN unless both values are positive.
    pub ln_ratio: f64,
    pub sqrt_x: f64,
    pub sqrt_y: f64,
    pub sqrt_xy: f64,
}

impl Transition {
    pub(crate) fn new(dt: f64, x: f64, y: f64) -> Transition {
        Transition {
            dt,
            x,
            y,
            ln_ratio: y.ln() - x.ln(),
            sqrt_x: x.sqrt(),
            sqrt_y: y.sqrt(),
            sqrt_xy: (x * y).sqrt(),
        }
    }
}

/// Observations per chunk of the parallel sum; the chunks are summed in order, so the
/// total does not depend on the number of threads.
const CHUNK: usize = 2048;

/// Σ ln p over the transitions, in parallel chunks.
pub(crate) fn ln_likelihood(family: Family, v: &OneStateValues, steps: &[Transition]) -> f64 {
    use rayon::prelude::*;
    let chunk_sum = |chunk: &[Transition]| -> f64 {
        match family {
            Family::SquareRoot => square_root_sum(v, chunk),
            _ => chunk
                .iter()
                .map(|s| ln_transition(family, v, s.x, s.y, s.dt))
                .sum(),
        }
    };
    if steps.len() <= CHUNK {
        return chunk_sum(steps);
    }
    let parts: Vec<f64> = steps.par_chunks(CHUNK).map(chunk_sum).collect();
    parts.iter().sum()
}

/// The square-root density summed over steps, with the step-dependent constants kept
/// while the step stays the same (regular data: computed once).
fn square_root_sum(v: &OneStateValues, steps: &[Transition]) -> f64 {
    let (a, b, beta) = (v.a, v.b, v.beta);
    if beta.is_nan() || beta <= 0.0 {
        return f64::NAN;
    }
    let q = 2.0 * a / beta - 1.0;
    if q <= -1.0 {
        return f64::NAN;
    }
    let mut cached_dt = f64::NAN;
    let (mut c, mut ln_c, mut half_decay, mut shift) = (0.0, 0.0, 0.0, 0.0);
    let mut total = 0.0;
    for s in steps {
        if s.dt != cached_dt {
            cached_dt = s.dt;
            c = 2.0 / (beta * phi(b, s.dt));
            ln_c = c.ln();
            half_decay = (0.5 * b * s.dt).exp();
            shift = b * s.dt;
        }
        if !(s.x > 0.0 && s.y > 0.0) {
            return f64::NAN;
        }
        // The same terms as `ln_square_root`, from the precomputed roots.
        let gap = s.sqrt_y - s.sqrt_x * half_decay;
        let z = 2.0 * c * s.sqrt_xy * half_decay;
        total += ln_c - c * gap * gap + 0.5 * q * (s.ln_ratio - shift) + ln_bessel_i_scaled(q, z);
    }
    total
}

/// A log-likelihood with its gradient and Hessian in the square-root coefficients
/// (a, b, β) of dX = (a + bX) dt + √(βX) dW.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub(crate) struct Curvature {
    pub value: f64,
    pub gradient: [f64; 3],
    pub hessian: [[f64; 3]; 3],
}

impl Curvature {
    fn nan() -> Curvature {
        Curvature {
            value: f64::NAN,
            ..Curvature::default()
        }
    }

    fn add(&mut self, other: &Curvature) {
        self.value += other.value;
        for i in 0..3 {
            self.gradient[i] += other.gradient[i];
            for j in 0..3 {
                self.hessian[i][j] += other.hessian[i][j];
            }
        }
    }
}

/// ∫₀^Δ s^m e^{bs} ds for m = 0, 1, 2: φ(b, Δ) and its first two derivatives in b. A
/// power series in bΔ where the closed forms would cancel (|bΔ| < 2), the closed forms
/// (integration by parts) beyond.
fn phi_and_derivatives(b: f64, dt: f64) -> [f64; 3] {
    let u = b * dt;
    if u.abs() < 2.0 {
        // Σ_n Δ^{m+1} uⁿ / (n! (n+m+1)).
        let mut out = [0.0; 3];
        let mut power = 1.0;
        for n in 0..40 {
            let nf = n as f64;
            for (m, slot) in out.iter_mut().enumerate() {
                *slot += power / (nf + m as f64 + 1.0);
            }
            power *= u / (nf + 1.0);
            if power.abs() < 1e-18 {
                break;
            }
        }
        [out[0] * dt, out[1] * dt * dt, out[2] * dt * dt * dt]
    } else {
        let grown = u.exp();
        let f0 = (grown - 1.0) / b;
        let f1 = (dt * grown - f0) / b;
        let f2 = (dt * dt * grown - 2.0 * f1) / b;
        [f0, f1, f2]
    }
}

/// The square-root log-likelihood with its gradient and Hessian in (a, b, β), exact (no
/// differences): per observation in (q, C, e) = (2a/β − 1, ln c, bΔ/2), in which
/// ln p = C − c (√y − √x eᵉ)² + q (ln(y/x) − 2e)/2 + Λ(q, 2c√(xy) eᵉ) with Λ the scaled
/// log Bessel function (see `ln_square_root`), then by the chain rule through the map to
/// (a, b, β), once per run of equal steps.
pub(crate) fn square_root_curvature(v: &OneStateValues, steps: &[Transition]) -> Curvature {
    use rayon::prelude::*;
    if steps.len() <= CHUNK {
        return square_root_curvature_chunk(v, steps);
    }
    let parts: Vec<Curvature> = steps
        .par_chunks(CHUNK)
        .map(|chunk| square_root_curvature_chunk(v, chunk))
        .collect();
    let mut total = Curvature::default();
    for part in &parts {
        total.add(part);
    }
    total
}

fn square_root_curvature_chunk(v: &OneStateValues, steps: &[Transition]) -> Curvature {
    let (a, b, beta) = (v.a, v.b, v.beta);
    if beta.is_nan() || beta <= 0.0 {
        return Curvature::nan();
    }
    let q = 2.0 * a / beta - 1.0;
    if q <= -1.0 {
        return Curvature::nan();
    }
    let mut total = Curvature::default();
    let mut start = 0;
    while start < steps.len() {
        let dt = steps[start].dt;
        let end = steps[start..]
            .iter()
            .position(|s| s.dt != dt)
            .map_or(steps.len(), |p| start + p);
        let Some(run) = steps.get(start..end) else {
            return Curvature::nan();
        };
        let f = phi_and_derivatives(b, dt);
        let c = 2.0 / (beta * f[0]);
        let Some(in_w) = square_root_run(run, q, b, c, dt) else {
            return Curvature::nan();
        };
        total.add(&square_root_chain(&in_w, a, beta, dt, f));
        start = end;
    }
    total
}

/// Value, gradient and Hessian of the log-likelihood of a run of steps of one length
/// `dt`, in w = (q, C, e) (e the exponent ½·b·dt); `None` when a value is not positive.
fn square_root_run(run: &[Transition], q: f64, b: f64, c: f64, dt: f64) -> Option<Curvature> {
    let half_decay = (0.5 * b * dt).exp();
    let mut value = 0.0;
    let mut g = [0.0; 3];
    let mut h = [[0.0; 3]; 3];
    for s in run {
        if !(s.x > 0.0 && s.y > 0.0) {
            return None;
        }
        let root_x = s.sqrt_x * half_decay;
        let gap = s.sqrt_y - root_x;
        let z = 2.0 * c * s.sqrt_xy * half_decay;
        let bessel = ln_bessel_i_scaled_derivatives(q, z);
        let tilt = s.ln_ratio - b * dt;
        let spread = c * gap * gap;
        value += c.ln() - spread + 0.5 * q * tilt + bessel.value;
        let zl = bessel.d_z * z;
        let zzl = bessel.d_z_z * z * z + zl;
        let pull = 2.0 * c * gap * root_x;
        g[0] += 0.5 * tilt + bessel.d_nu;
        g[1] += 1.0 - spread + zl;
        g[2] += pull - q + zl;
        h[0][0] += bessel.d_nu_nu;
        h[0][1] += bessel.d_nu_z * z;
        h[0][2] += bessel.d_nu_z * z - 1.0;
        h[1][1] += zzl - spread;
        h[1][2] += zzl + pull;
        h[2][2] += zzl + 2.0 * c * root_x * (gap - root_x);
    }
    h[1][0] = h[0][1];
    h[2][0] = h[0][2];
    h[2][1] = h[1][2];
    Some(Curvature {
        value,
        gradient: g,
        hessian: h,
    })
}

/// The derivatives of a run in w = (q, C, e) carried to (a, b, β) by the chain rule;
/// `f` is φ(b, dt) with its first two derivatives in b.
fn square_root_chain(w: &Curvature, a: f64, beta: f64, dt: f64, f: [f64; 3]) -> Curvature {
    let [f0, f1, f2] = f;
    let (g, h) = (&w.gradient, &w.hessian);
    // Jacobian of w in (a, b, β) and the second derivatives of each w.
    let jacobian = [
        [2.0 / beta, 0.0, -2.0 * a / (beta * beta)],
        [0.0, -f1 / f0, -1.0 / beta],
        [0.0, 0.5 * dt, 0.0],
    ];
    let mut second = [[[0.0; 3]; 3]; 3];
    second[0][0][2] = -2.0 / (beta * beta);
    second[0][2][0] = second[0][0][2];
    second[0][2][2] = 4.0 * a / (beta * beta * beta);
    second[1][1][1] = -(f2 / f0 - (f1 / f0).powi(2));
    second[1][2][2] = 1.0 / (beta * beta);
    let mut part = Curvature {
        value: w.value,
        ..Curvature::default()
    };
    for i in 0..3 {
        part.gradient[i] = (0..3).map(|k| g[k] * jacobian[k][i]).sum();
        for j in 0..3 {
            part.hessian[i][j] = (0..3)
                .map(|k| {
                    (0..3)
                        .map(|l| jacobian[k][i] * h[k][l] * jacobian[l][j])
                        .sum::<f64>()
                        + g[k] * second[k][i][j]
                })
                .sum();
        }
    }
    part
}

/// Whether an observed value lies in the family's domain; the reason when not.
pub(crate) fn domain(family: Family) -> Option<&'static str> {
    match family {
        Family::GeometricBrownian | Family::SquareRoot => Some("above 0"),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn values(a: f64, b: f64, alpha: f64, beta: f64, gamma: f64) -> OneStateValues {
        OneStateValues {
            a,
            b,
            alpha,
            beta,
            gamma,
        }
    }

    /// scipy 1.17.1: `scipy.stats.ncx2.logpdf(2*c*y, df=4*a/beta, nc=2*u) + log(2*c)` for
    /// κ = 0.8, θ = 0.05, σ = 0.12, x = 0.04, y = 0.045, Δ = 0.25 (the density of y is that
    /// of the scaled noncentral chi-square 2cY with 4κθ/σ² degrees and noncentrality 2u).
    #[test]
    fn square_root_density_matches_the_noncentral_chi_square() {
        let (kappa, theta, sigma) = (0.8_f64, 0.05_f64, 0.12_f64);
        let v = values(kappa * theta, -kappa, 0.0, sigma * sigma, 0.0);
        let got = ln_transition(Family::SquareRoot, &v, 0.04, 0.045, 0.25);
        let expected = 3.482_127_161_333_650_6;
        assert!((got - expected).abs() < 1e-12, "{got} vs {expected}");
    }

    #[test]
    fn the_summed_square_root_density_is_the_sum_of_the_densities() {
        let v = values(0.04, -0.8, 0.0, 0.0144, 0.0);
        let steps: Vec<Transition> = (0..5000)
            .map(|i| {
                let dt = if i % 7 == 0 { 0.5 / 52.0 } else { 1.0 / 52.0 };
                Transition::new(
                    dt,
                    0.03 + 0.001 * (i % 11) as f64,
                    0.031 + 0.001 * (i % 5) as f64,
                )
            })
            .collect();
        let one_by_one: f64 = steps
            .iter()
            .map(|s| ln_transition(Family::SquareRoot, &v, s.x, s.y, s.dt))
            .sum();
        let summed = ln_likelihood(Family::SquareRoot, &v, &steps);
        assert!(
            (summed - one_by_one).abs() < 1e-9 * one_by_one.abs(),
            "{summed} vs {one_by_one}"
        );
    }

    /// The exact gradient and Hessian against central differences of the summed density,
    /// with regular and irregular steps and in both regimes of the Bessel function.
    #[test]
    fn square_root_curvature_matches_differences() {
        let steps: Vec<Transition> = (0..300)
            .map(|i| {
                let dt = if i % 7 == 0 { 0.25 } else { 1.0 / 252.0 };
                Transition::new(
                    dt,
                    0.03 + 0.001 * (i % 11) as f64,
                    0.031 + 0.001 * (i % 5) as f64,
                )
            })
            .collect();
        let at = |c: [f64; 3]| values(c[0], c[1], 0.0, c[2], 0.0);
        let centre = [0.04, -0.8, 0.0144];
        let exact = square_root_curvature(&at(centre), &steps);
        let value = |c: [f64; 3]| ln_likelihood(Family::SquareRoot, &at(c), &steps);
        assert!((exact.value - value(centre)).abs() < 1e-9 * exact.value.abs());
        for i in 0..3 {
            let h = 1e-5 * centre[i].abs();
            let shifted = |d: f64| {
                let mut c = centre;
                c[i] += d;
                c
            };
            let gradient = (value(shifted(h)) - value(shifted(-h))) / (2.0 * h);
            assert!(
                (exact.gradient[i] - gradient).abs() < 1e-5 * gradient.abs().max(1.0),
                "gradient {i}: {} vs {gradient}",
                exact.gradient[i]
            );
            let (up, down) = (
                square_root_curvature(&at(shifted(h)), &steps),
                square_root_curvature(&at(shifted(-h)), &steps),
            );
            for j in 0..3 {
                let second = (up.gradient[j] - down.gradient[j]) / (2.0 * h);
                assert!(
                    (exact.hessian[j][i] - second).abs() < 1e-5 * second.abs().max(1.0),
                    "hessian {j},{i}: {} vs {second}",
                    exact.hessian[j][i]
                );
            }
        }
    }

    #[test]
    fn phi_derivatives_agree_in_both_forms() {
        // Either side of |bΔ| = 2 the series and the closed forms agree.
        for (b, dt) in [(-1.999, 1.0), (-2.001, 1.0), (1.999, 1.0), (3.0, 0.5)] {
            let [f0, f1, f2] = phi_and_derivatives(b, dt);
            assert!((f0 - phi(b, dt)).abs() < 1e-14 * f0.abs());
            let h = 1e-5;
            let d1 = (phi(b + h, dt) - phi(b - h, dt)) / (2.0 * h);
            let d2 = (phi(b + h, dt) - 2.0 * phi(b, dt) + phi(b - h, dt)) / (h * h);
            assert!((f1 - d1).abs() < 1e-8 * d1.abs(), "{f1} vs {d1}");
            assert!((f2 - d2).abs() < 1e-4 * d2.abs(), "{f2} vs {d2}");
        }
    }

    #[test]
    fn square_root_density_integrates_to_one() {
        // Trapezoid rule over y on a fine grid: the transition law is a probability law.
        let v = values(0.04, -0.8, 0.0, 0.0144, 0.0);
        let (lo, hi, n) = (1e-6_f64, 0.3_f64, 200_000);
        let h = (hi - lo) / n as f64;
        let total: f64 = (0..=n)
            .map(|i| {
                let y = lo + h * i as f64;
                let w = if i == 0 || i == n { 0.5 } else { 1.0 };
                w * ln_transition(Family::SquareRoot, &v, 0.04, y, 0.25).exp()
            })
            .sum::<f64>()
            * h;
        assert!((total - 1.0).abs() < 1e-6, "{total}");
    }

    #[test]
    fn ornstein_uhlenbeck_with_vanishing_slope_is_brownian() {
        let ou = ln_transition(
            Family::OrnsteinUhlenbeck,
            &values(0.3, -1e-14, 0.04, 0.0, 0.0),
            1.0,
            1.2,
            0.5,
        );
        let abm = ln_transition(
            Family::ArithmeticBrownian,
            &values(0.3, 0.0, 0.04, 0.0, 0.0),
            1.0,
            1.2,
            0.5,
        );
        assert!((ou - abm).abs() < 1e-12);
    }

    #[test]
    fn outside_the_domain_is_nan() {
        let v = values(0.04, -0.8, 0.0, 0.0144, 0.0);
        assert!(ln_transition(Family::SquareRoot, &v, 0.04, -0.01, 0.25).is_nan());
        assert!(ln_transition(Family::GeometricBrownian, &v, 1.0, 1.0, 0.25).is_nan());
        let negative_level = values(-0.04, -0.8, 0.0, 0.0144, 0.0);
        assert!(ln_transition(Family::SquareRoot, &negative_level, 0.04, 0.05, 0.25).is_nan());
    }
}
