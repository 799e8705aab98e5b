//! The times at which a coefficient of the model may jump or bend: the knots of `step`
//! and `ramp`, and the kinks of `min`, `max` and `abs` of an expression in `t`.
//!
//! Every time integral of the calculus (quadrature of the integrating factor, the
//! moment equations) is split at these times, so that each piece it integrates is
//! smooth. Adaptive quadrature or a Runge–Kutta step that straddles a short ramp can miss
//! it entirely and still report a small error estimate; on smooth pieces both converge to
//! the requested tolerance.

use crate::algebra::{Atom, Poly};
use sdeck_semantics::{Expr, Function, Model};

/// Samples per piece when looking for the kinks of `min`, `max` and `abs`.
const CROSSING_SAMPLES: usize = 128;

/// Bisections of one sign change: far below `f64` resolution of any time.
const BISECTIONS: usize = 200;

/// Break times of a set of coefficients, with the parameter values folded in.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct TimeBreaks {
    /// Knots of schedules of `t` itself, sorted.
    knots: Vec<f64>,
    /// Expressions of `t` alone whose sign changes are breaks: the kinks of `min`,
    /// `max`, `abs`, and the knots of schedules of an expression of `t`.
    crossings: Vec<Expr>,
    params: Vec<f64>,
}

impl TimeBreaks {
    /// The breaks of the expressions `exprs` with parameter values `params`.
    pub fn of_exprs<'a>(exprs: impl IntoIterator<Item = &'a Expr>, params: &[f64]) -> Self {
        let mut breaks = TimeBreaks {
            params: params.to_vec(),
            ..TimeBreaks::default()
        };
        for expr in exprs {
            breaks.collect(expr);
        }
        breaks.knots.retain(|k| k.is_finite());
        breaks.knots.sort_by(f64::total_cmp);
        breaks.knots.dedup();
        breaks
    }

    /// The breaks of the time-dependent atoms of some polynomials.
    pub fn of_polys<'a>(polys: impl IntoIterator<Item = &'a Poly>, params: &[f64]) -> Self {
        let exprs: Vec<&Expr> = polys
            .into_iter()
            .flat_map(|p| p.terms.keys())
            .flat_map(|monomial| monomial.iter())
            .filter_map(|(atom, _)| match atom {
                Atom::Opaque(expr) => Some(expr.as_ref()),
                _ => None,
            })
            .collect();
        TimeBreaks::of_exprs(exprs, params)
    }

    /// The breaks of every drift and diffusion coefficient of a model.
    pub fn of_model(model: &Model, params: &[f64]) -> Self {
        let exprs = model
            .factors
            .iter()
            .filter_map(|s| s.equation.as_ref())
            .flat_map(|eq| {
                std::iter::once(&eq.drift).chain(eq.diffusion.iter().map(|d| &d.coefficient))
            });
        TimeBreaks::of_exprs(exprs, params)
    }

    pub fn is_empty(&self) -> bool {
        self.knots.is_empty() && self.crossings.is_empty()
    }

    /// The partition of [from, to] at the breaks strictly inside it: `from`, the breaks
    /// in the direction of integration, `to`.
    pub fn pieces(&self, from: f64, to: f64) -> Vec<f64> {
        let (low, high) = if from <= to { (from, to) } else { (to, from) };
        let mut inner: Vec<f64> = self
            .knots
            .iter()
            .copied()
            .filter(|k| *k > low && *k < high)
            .collect();
        if !self.crossings.is_empty() && low.is_finite() && high.is_finite() && low < high {
            for g in &self.crossings {
                inner.extend(
                    sign_changes(|s| g.eval(&self.params, &[], s), low, high)
                        .into_iter()
                        .filter(|k| *k > low && *k < high),
                );
            }
            inner.sort_by(f64::total_cmp);
            inner.dedup();
        }
        let mut out = Vec::with_capacity(inner.len() + 2);
        out.push(low);
        out.extend(inner);
        out.push(high);
        if from > to {
            out.reverse();
        }
        out
    }

    fn collect(&mut self, expr: &Expr) {
        if let Expr::Call(f, args) = expr {
            let time_only = mentions_time(expr) && !mentions_states(expr);
            match f {
                Function::Step | Function::Ramp => {
                    if let Some(x) = args.first() {
                        for k in f.knot_positions(args.len()) {
                            let Some(knot) = args.get(k) else {
                                continue;
                            };
                            let at = knot.eval(&self.params, &[], 0.0);
                            if *x == Expr::Time {
                                self.knots.push(at);
                            } else if mentions_time(x) && !mentions_states(x) {
                                self.crossings.push(Expr::Sub(
                                    Box::new(x.clone()),
                                    Box::new(Expr::Const(at)),
                                ));
                            }
                        }
                    }
                }
                Function::Min | Function::Max if time_only => {
                    if let [a, b] = args.as_slice() {
                        self.crossings
                            .push(Expr::Sub(Box::new(a.clone()), Box::new(b.clone())));
                    }
                }
                Function::Abs if time_only => {
                    if let Some(a) = args.first() {
                        self.crossings.push(a.clone());
                    }
                }
                _ => {}
            }
        }
        expr.for_each_child(|child| self.collect(child));
    }
}

fn mentions_time(expr: &Expr) -> bool {
    crate::algebra::expr_mentions_time(expr)
}

fn mentions_states(expr: &Expr) -> bool {
    crate::algebra::expr_mentions_states(expr)
}

/// The points in [low, high] where `g` changes sign, each located by bisection to the
/// resolution of `f64` (a zero met on the sampling grid is taken as it is).
fn sign_changes(g: impl Fn(f64) -> f64, low: f64, high: f64) -> Vec<f64> {
    let mut out = Vec::new();
    let width = (high - low) / CROSSING_SAMPLES as f64;
    let at = |k: usize| {
        if k == CROSSING_SAMPLES {
            high
        } else {
            low + width * k as f64
        }
    };
    let mut previous = (low, g(low));
    for k in 1..=CROSSING_SAMPLES {
        let s = at(k);
        let value = g(s);
        let (s0, v0) = previous;
        if value == 0.0 {
            out.push(s);
        } else if v0 != 0.0 && v0.is_finite() && value.is_finite() && (v0 < 0.0) != (value < 0.0) {
            let (mut a, mut b) = (s0, s);
            for _ in 0..BISECTIONS {
                let middle = 0.5 * (a + b);
                if middle <= a || middle >= b {
                    break;
                }
                let gm = g(middle);
                if gm == 0.0 {
                    a = middle;
                    b = middle;
                    break;
                }
                if (gm < 0.0) == (v0 < 0.0) {
                    a = middle;
                } else {
                    b = middle;
                }
            }
            out.push(0.5 * (a + b));
        }
        previous = (s, value);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn b(e: Expr) -> Box<Expr> {
        Box::new(e)
    }

    #[test]
    fn schedule_knots_and_kinks_are_found() {
        // step(t, 1, p0, 2), ramp(t, 0.25, 0, 0.2525, 1), max(t − 1.5, 0), abs(t − 0.1):
        // breaks at p0 = 0.5, 0.25, 0.2525, 1.5 and 0.1.
        let c = Expr::Const;
        let exprs = [
            Expr::Call(
                Function::Step,
                vec![Expr::Time, c(1.0), Expr::param(0), c(2.0)],
            ),
            Expr::Call(
                Function::Ramp,
                vec![Expr::Time, c(0.25), c(0.0), c(0.2525), c(1.0)],
            ),
            Expr::Call(
                Function::Max,
                vec![Expr::Sub(b(Expr::Time), b(c(1.5))), c(0.0)],
            ),
            Expr::Call(Function::Abs, vec![Expr::Sub(b(Expr::Time), b(c(0.1)))]),
        ];
        let breaks = TimeBreaks::of_exprs(&exprs, &[0.5]);
        let pieces = breaks.pieces(0.0, 2.0);
        let expected = [0.0, 0.1, 0.25, 0.2525, 0.5, 1.5, 2.0];
        assert_eq!(pieces.len(), expected.len(), "{pieces:?}");
        for (got, want) in pieces.iter().zip(expected) {
            assert!((got - want).abs() <= 4.0 * f64::EPSILON, "{pieces:?}");
        }
        // Only the breaks inside the interval, in the direction of integration.
        assert_eq!(breaks.pieces(1.0, 0.3), vec![1.0, 0.5, 0.3]);
        // A kink of a factor is no break of time.
        let of_factor = Expr::Call(Function::Max, vec![Expr::factor(0), Expr::Time]);
        assert!(TimeBreaks::of_exprs([&of_factor], &[]).is_empty());
    }
}
