//! Diffusion coefficients with a square root: `scale · sqrt(radicand)`.

use super::{constant_value, expr_mentions_states, to_poly, Atom, NotPolynomial, Poly};
use sdeck_semantics::{Expr, Function};

/// A diffusion coefficient `scale · sqrt(radicand)`; `radicand` is 1 for polynomials.
#[derive(Clone, Debug, PartialEq)]
pub struct RootForm {
    pub scale: Poly,
    pub radicand: Poly,
}

impl RootForm {
    pub fn is_polynomial(&self) -> bool {
        self.radicand.is_one()
    }

    /// `scale² · radicand`.
    pub fn square(&self) -> Poly {
        self.scale.mul(&self.scale).mul(&self.radicand)
    }

    /// `self · other` when it is a polynomial (same radicand, or both polynomial).
    pub fn product(&self, other: &RootForm) -> Option<Poly> {
        if self.radicand == other.radicand {
            Some(self.scale.mul(&other.scale).mul(&self.radicand))
        } else {
            None
        }
    }
}

fn is_sqrt_of_state_expression(expr: &Expr) -> Option<&Expr> {
    match expr {
        Expr::Call(Function::Sqrt, args) if args.len() == 1 => {
            args.first().filter(|a| expr_mentions_states(a))
        }
        Expr::Pow(base, exponent)
            if constant_value(exponent) == Some(0.5) && expr_mentions_states(base) =>
        {
            Some(base)
        }
        _ => None,
    }
}

/// Recognises `c · sqrt(p)`, `sqrt(c · p)`, products and quotients of such by
/// state-free factors, and plain polynomials.
pub fn to_root_form(expr: &Expr) -> Result<RootForm, NotPolynomial> {
    if let Some(inner) = is_sqrt_of_state_expression(expr) {
        return Ok(RootForm {
            scale: Poly::one(),
            radicand: to_poly(inner)?,
        });
    }
    match expr {
        Expr::Neg(a) => {
            let r = to_root_form(a)?;
            Ok(RootForm {
                scale: r.scale.neg(),
                radicand: r.radicand,
            })
        }
        Expr::Mul(a, b) => Ok(product(to_root_form(a)?, to_root_form(b)?)),
        Expr::Div(a, b) => quotient(expr, a, b),
        Expr::Add(a, b) | Expr::Sub(a, b) => sum(expr, a, b),
        _ => to_poly(expr).map(polynomial),
    }
}

/// A polynomial as a root form of radicand 1.
fn polynomial(scale: Poly) -> RootForm {
    RootForm {
        scale,
        radicand: Poly::one(),
    }
}

fn not_polynomial(expr: &Expr) -> NotPolynomial {
    NotPolynomial {
        piece: expr.clone(),
    }
}

/// `ra · rb`: the same root twice is its radicand, a polynomial.
fn product(ra: RootForm, rb: RootForm) -> RootForm {
    if ra.radicand == rb.radicand && !ra.is_polynomial() {
        RootForm {
            scale: ra.scale.mul(&rb.scale).mul(&ra.radicand),
            radicand: Poly::one(),
        }
    } else {
        RootForm {
            scale: ra.scale.mul(&rb.scale),
            radicand: ra.radicand.mul(&rb.radicand),
        }
    }
}

/// `expr = a / b`: a root divided by a term, or by a state-free expression.
fn quotient(expr: &Expr, a: &Expr, b: &Expr) -> Result<RootForm, NotPolynomial> {
    let ra = to_root_form(a)?;
    if ra.is_polynomial() {
        return to_poly(expr).map(polynomial);
    }
    let denominator = to_poly(b).map_err(|_| not_polynomial(expr))?;
    let scale = match ra.scale.divide_by_term(&denominator) {
        Some(s) => s,
        None if !denominator.mentions_states() => {
            let mut inverse = Poly::zero();
            inverse.insert_term(vec![(Atom::opaque(b.clone()), -1)], 1.0);
            ra.scale.mul(&inverse)
        }
        None => return Err(not_polynomial(expr)),
    };
    Ok(RootForm {
        scale,
        radicand: ra.radicand,
    })
}

/// `expr = a ± b`: two roots of the same radicand, or a root plus zero.
fn sum(expr: &Expr, a: &Expr, b: &Expr) -> Result<RootForm, NotPolynomial> {
    let ra = to_root_form(a)?;
    let mut rb = to_root_form(b)?;
    if matches!(expr, Expr::Sub(..)) {
        rb.scale = rb.scale.neg();
    }
    if ra.radicand == rb.radicand {
        Ok(RootForm {
            scale: ra.scale.add(&rb.scale),
            radicand: ra.radicand,
        })
    } else if ra.scale.is_zero() {
        Ok(rb)
    } else if rb.scale.is_zero() {
        Ok(ra)
    } else {
        Err(not_polynomial(expr))
    }
}
