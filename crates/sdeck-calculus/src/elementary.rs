//! Closed-form integrals for time-dependent coefficients that are sums of
//! `c · tᵏ · e^{λt}` (constants, polynomials in t, exponentials of t and their products):
//! ∫₀ᵗ e^{β(t−s)} f(s) ds term by term, without cancellation for small rates.

use crate::algebra::{to_poly, Atom, Poly};
use sdeck_semantics::{Expr, Function};

/// Largest power of t handled in closed form (beyond it the quadrature is used).
const MAX_POWER: i64 = 12;

/// Σ c · tᵏ · e^{λ t}.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct ExpPolynomial {
    /// `(c, k, λ)`.
    pub terms: Vec<(f64, i64, f64)>,
}

/// `exp(q·t + r)` as `(q, r)` when q and r are free of t and of states.
fn exponential_rate(expr: &Expr, params: &[f64]) -> Option<(f64, f64)> {
    let Expr::Call(Function::Exp, args) = expr else {
        return None;
    };
    let [argument] = args.as_slice() else {
        return None;
    };
    let poly = to_poly(argument).ok()?;
    if poly.mentions_states() {
        return None;
    }
    let (mut rate, mut offset) = (0.0, 0.0);
    for (monomial, coefficient) in &poly.terms {
        let mut value = *coefficient;
        let mut time_power = 0;
        for (atom, power) in monomial {
            match atom {
                Atom::Time => time_power += power,
                Atom::Opaque(..) if atom.depends_on_time() => return None,
                other => {
                    value *= Poly::atom(other.clone())
                        .value(params, 0.0)
                        .powi(*power as i32)
                }
            }
        }
        match time_power {
            0 => offset += value,
            1 => rate += value,
            _ => return None,
        }
    }
    Some((rate, offset))
}

/// Writes a state-free coefficient as Σ c · tᵏ · e^{λt}, when it has that shape.
pub(crate) fn exp_polynomial(poly: &Poly, params: &[f64]) -> Option<ExpPolynomial> {
    let mut terms = Vec::with_capacity(poly.terms.len());
    for (monomial, coefficient) in &poly.terms {
        let (mut c, mut k, mut lambda) = (*coefficient, 0_i64, 0.0);
        for (atom, power) in monomial {
            match atom {
                Atom::State(_) => return None,
                Atom::Time => {
                    if *power < 0 {
                        return None;
                    }
                    k += power;
                }
                Atom::Opaque(expr) if atom.depends_on_time() => {
                    let (rate, offset) = exponential_rate(expr, params)?;
                    lambda += rate * *power as f64;
                    c *= (offset * *power as f64).exp();
                }
                other => {
                    c *= Poly::atom(other.clone())
                        .value(params, 0.0)
                        .powi(*power as i32)
                }
            }
        }
        if k > MAX_POWER || !c.is_finite() || !lambda.is_finite() {
            return None;
        }
        terms.push((c, k, lambda));
    }
    Some(ExpPolynomial { terms })
}

/// ∫₀ᵗ sᵏ e^{μ s} ds: a power series when |μ t| is moderate (every term positive up to
/// the sign of μ, no division by μ), the downward-free recurrence
/// I_k = (tᵏ e^{μt} − k I_{k−1}) / μ from I₀ = expm1(μ t)/μ otherwise.
pub(crate) fn power_exponential_integral(k: i64, mu: f64, t: f64) -> f64 {
    let z = mu * t;
    if z.abs() <= 10.0 {
        // Σ_j μʲ t^{k+j+1} / (j! (k + j + 1)).
        let mut term = t.powi(k as i32 + 1); // j = 0: t^{k+1}, divided below
        let mut total = 0.0;
        for j in 0..200 {
            let contribution = term / (k + j + 1) as f64;
            total += contribution;
            if contribution.abs() <= 1e-17 * total.abs() {
                break;
            }
            term *= z / (j + 1) as f64;
        }
        return total;
    }
    let mut integral = z.exp_m1() / mu;
    for power in 1..=k {
        integral = (t.powi(power as i32) * z.exp() - power as f64 * integral) / mu;
    }
    integral
}

/// ∫₀ᵗ e^{β(t−s)} f(s) ds for f = Σ c · sᵏ · e^{λ s}.
pub(crate) fn convolve(beta: f64, f: &ExpPolynomial, t: f64) -> f64 {
    f.terms
        .iter()
        .map(|(c, k, lambda)| {
            c * (beta * t).exp() * power_exponential_integral(*k, lambda - beta, t)
        })
        .sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn power_exponential_integral_against_mpmath() {
        // mpmath.quad(lambda s: s**k * exp(mu*s), [0, t]) at 40 digits, rounded to f64.
        let cases = [
            (1, 0.3, 2.0, 3.012_805_331_597_738),
            (1, -4.0, 5.0, 0.062_499_997_294_735_87),
            (1, 12.0, 1.5, 7_751_524.141_212_63),
            (1, -0.001, 3.0, 4.491_010_116_905_06),
            (3, -25.0, 2.0, 1.536e-5),
        ];
        for (k, mu, t, exact) in cases {
            let value = power_exponential_integral(k, mu, t);
            assert!(
                ((value - exact) / exact).abs() < 1e-13,
                "k={k} μ={mu} t={t}: {value} vs {exact}"
            );
        }
        // ∫₀³ s² ds = 9.
        assert!((power_exponential_integral(2, 0.0, 3.0) - 9.0).abs() < 1e-14);
    }

    #[test]
    fn tiny_rates_do_not_cancel() {
        // With μ → 0, ∫₀ᵗ e^{μs} ds → t + μt²/2 (Taylor series, common practice).
        let (mu, t) = (1e-12, 2.0);
        let value = power_exponential_integral(0, mu, t);
        assert!(((value - (t + mu * t * t / 2.0)) / t).abs() < 1e-16);
    }
}
