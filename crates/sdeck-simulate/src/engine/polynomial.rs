//! The Euler–Maruyama step of a factor whose drift and diffusion are polynomials of degree
//! at most [`MAX_DEGREE`] in that factor alone (constant coefficients, one shock), as in
//! `dc = r c (cap − c) dt + s c (cap − c) dW`: both are evaluated by Horner's rule and the
//! update written in one pass over the lanes, every intermediate in registers, instead of
//! one pass per instruction of the general program ([`crate::bytecode`]). The polynomial
//! is read by the calculus layer's algebra (`sdeck_calculus::algebra::to_poly`), so a
//! common part such as `c (cap − c)` written twice costs nothing twice.

use crate::bytecode::Lanes;
use sdeck_calculus::algebra::to_poly;
use sdeck_semantics::Expr;

/// Highest power of the factor the fused step takes.
pub(crate) const MAX_DEGREE: usize = 4;

/// Coefficients of x⁰ … x⁴.
type Coefficients = [f64; MAX_DEGREE + 1];

/// Drift a(x) and diffusion b(x) of one factor as polynomials in it.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct PolynomialStep {
    drift: Coefficients,
    diffusion: Coefficients,
    degree: usize,
    /// Read max(x, 0) in the coefficients (full truncation).
    truncated: bool,
}

/// The coefficients of `expr` as a polynomial in factor `state` alone, with parameters
/// folded in; `None` when it reads time, another factor, a negative or high power, or a
/// value that is not finite.
pub(crate) fn coefficients(expr: &Expr, state: usize, params: &[f64]) -> Option<Coefficients> {
    let poly = to_poly(expr).ok()?;
    if poly.depends_on_time() {
        return None;
    }
    let mut out = [0.0; MAX_DEGREE + 1];
    for (key, coefficient) in poly.by_state_monomial() {
        let power = match key.as_slice() {
            [] => 0,
            [(s, k)] if *s == state && (1..=MAX_DEGREE as i64).contains(k) => *k as usize,
            _ => return None,
        };
        let value = coefficient.value(params, 0.0);
        if !value.is_finite() {
            return None;
        }
        out[power] += value;
    }
    Some(out)
}

impl PolynomialStep {
    pub(crate) fn new(drift: Coefficients, diffusion: Coefficients, truncated: bool) -> Self {
        let degree = (0..=MAX_DEGREE)
            .rev()
            .find(|k| drift[*k] != 0.0 || diffusion[*k] != 0.0)
            .unwrap_or(0);
        PolynomialStep {
            drift,
            diffusion,
            degree,
            truncated,
        }
    }

    /// `to = from + a(from)·dt + b(from)·increment`, lane by lane.
    #[inline(always)]
    pub(crate) fn advance(&self, from: &Lanes, to: &mut Lanes, dt: f64, increment: &Lanes) {
        match self.degree {
            0 | 1 => self.advance_degree::<1>(from, to, dt, increment),
            2 => self.advance_degree::<2>(from, to, dt, increment),
            3 => self.advance_degree::<3>(from, to, dt, increment),
            _ => self.advance_degree::<MAX_DEGREE>(from, to, dt, increment),
        }
    }

    #[inline(always)]
    fn advance_degree<const D: usize>(
        &self,
        from: &Lanes,
        to: &mut Lanes,
        dt: f64,
        increment: &Lanes,
    ) {
        let (p, q, truncated) = (&self.drift, &self.diffusion, self.truncated);
        for ((next, x), dw) in to.iter_mut().zip(from).zip(increment) {
            let y = if truncated { x.max(0.0) } else { *x };
            let mut a = p[D];
            let mut b = q[D];
            for k in (0..D).rev() {
                a = a * y + p[k];
                b = b * y + q[k];
            }
            *next = b * dw + (a * dt + x);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use sdeck_semantics::analyze;

    fn equation(source: &str) -> (sdeck_semantics::Model, Vec<f64>) {
        let model = analyze(source, "t").model;
        let params = model.param_values();
        (model, params)
    }

    #[test]
    fn the_logistic_coefficients_are_read_once_per_power() {
        let (model, params) = equation(
            "param r = 1.5\nparam cap = 2\nparam s = 0.3\nshock W\nfactor c = 0.1\n\
             dc = r * c * (cap - c) dt + s * c * (cap - c) dW\n",
        );
        let equation = model.factors[0].equation.as_ref().unwrap();
        let drift = coefficients(&equation.drift, 0, &params).unwrap();
        let diffusion = coefficients(&equation.diffusion[0].coefficient, 0, &params).unwrap();
        assert_eq!(drift, [0.0, 3.0, -1.5, 0.0, 0.0]);
        assert!((diffusion[1] - 0.6).abs() < 1e-15 && (diffusion[2] + 0.3).abs() < 1e-15);
        // One pass agrees with a hand-written Euler step.
        let step = PolynomialStep::new(drift, diffusion, false);
        let from = [0.4; 64];
        let mut to = [0.0; 64];
        let mut increment = [0.0; 64];
        increment[3] = -0.05;
        step.advance(&from, &mut to, 0.01, &increment);
        let g = 0.4 * (2.0 - 0.4);
        assert!((to[0] - (0.4 + 1.5 * g * 0.01)).abs() < 1e-15);
        assert!((to[3] - (0.4 + 1.5 * g * 0.01 - 0.3 * g * 0.05)).abs() < 1e-15);
    }

    #[test]
    fn other_shapes_are_left_to_the_program() {
        let (model, params) = equation(
            "param k = 1.5\nshock W\nfactor x = 0.1\nfactor y = 1\n\
             dx = k * y * x dt + sqrt(x) dW\ndy = t * y dt + y ^ 5 dW\n",
        );
        let x = model.factors[0].equation.as_ref().unwrap();
        let y = model.factors[1].equation.as_ref().unwrap();
        assert_eq!(coefficients(&x.drift, 0, &params), None); // reads y
        assert_eq!(coefficients(&x.diffusion[0].coefficient, 0, &params), None); // a root
        assert_eq!(coefficients(&y.drift, 1, &params), None); // reads t
        assert_eq!(coefficients(&y.diffusion[0].coefficient, 1, &params), None);
        // power 5
    }

    #[test]
    fn truncation_reads_the_positive_part() {
        let step = PolynomialStep::new([1.0, 2.0, 0.0, 0.0, 0.0], [0.0; 5], true);
        let mut to = [0.0; 64];
        step.advance(&[-0.5; 64], &mut to, 0.1, &[0.0; 64]);
        // a(max(−0.5, 0)) = 1, so −0.5 + 0.1.
        assert!((to[0] + 0.4).abs() < 1e-15);
    }
}
