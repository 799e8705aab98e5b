//! Exact expression algebra: drifts and diffusions as polynomials in the states.
//!
//! A [`Poly`] is a finite sum of `coefficient · monomial`, where a monomial is a product
//! of atoms raised to integer powers. Atoms are states, parameters, the time `t`, and
//! "opaque" sub-expressions that mention no state (`exp(-kappa * t)`, `sqrt(level)`,
//! `1 / (a + b)`). States only ever carry non-negative powers, so a `Poly` is a true
//! polynomial in the states whose coefficients are Laurent monomials of parameters, `t`
//! and opaque pieces. Two expressions that are equal after expanding products and
//! collecting terms give equal `Poly` values, which is what classification relies on.
//!
//! A diffusion coefficient may also be a square root (`vol * sqrt(r)`): [`RootForm`]
//! keeps it as `scale · sqrt(radicand)`, whose square is again a polynomial.
//!
//! Parts: [`root_form`] (the square roots of diffusions), [`show`] (printing with the
//! model's names).

mod root_form;
mod show;

pub use root_form::{to_root_form, RootForm};
use sdeck_semantics::{Expr, FactorId, ParamId};
pub use show::{show_expr, show_number, show_poly, show_poly_factor, Names};
use std::cmp::Ordering;
use std::collections::BTreeMap;

/// Integer powers above this are not expanded (a guard against `x^1000000`).
const MAX_EXPANDED_POWER: i64 = 16;

/// Products that would have more terms than this are not expanded: such an expression is
/// treated as not polynomial rather than exhausting memory on `(a + b + ... + x)^16`.
const MAX_TERMS: usize = 20_000;

/// `a · b`, unless the expansion would be too large.
fn bounded_product(a: &Poly, b: &Poly, expr: &Expr) -> Result<Poly, NotPolynomial> {
    if a.terms.len().saturating_mul(b.terms.len()) > MAX_TERMS {
        return Err(NotPolynomial {
            piece: expr.clone(),
        });
    }
    Ok(a.mul(b))
}

/// An indivisible factor of a monomial.
#[derive(Clone, Debug)]
pub enum Atom {
    State(FactorId),
    Param(ParamId),
    Time,
    /// A sub-expression without states, kept whole; opaque atoms are ordered and
    /// compared by their structure ([`structural_order`]).
    Opaque(Box<Expr>),
}

impl Atom {
    fn rank(&self) -> (u8, usize) {
        match self {
            // States last, so that a term prints as `kappa·r`.
            Atom::Param(i) => (0, i.index()),
            Atom::Time => (1, 0),
            Atom::Opaque(_) => (2, 0),
            Atom::State(i) => (3, i.index()),
        }
    }

    fn opaque(expr: Expr) -> Atom {
        Atom::Opaque(Box::new(expr))
    }

    /// Whether the atom changes with `t`.
    pub fn depends_on_time(&self) -> bool {
        match self {
            Atom::Time => true,
            Atom::Opaque(expr) => expr_mentions_time(expr),
            _ => false,
        }
    }

    fn eval(&self, params: &[f64], states: &[f64], t: f64) -> f64 {
        match self {
            Atom::State(i) => states.get(i.index()).copied().unwrap_or(f64::NAN),
            Atom::Param(i) => params.get(i.index()).copied().unwrap_or(f64::NAN),
            Atom::Time => t,
            Atom::Opaque(expr) => expr.eval(params, states, t),
        }
    }
}

impl PartialEq for Atom {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == Ordering::Equal
    }
}
impl Eq for Atom {}
impl PartialOrd for Atom {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Atom {
    fn cmp(&self, other: &Self) -> Ordering {
        self.rank()
            .cmp(&other.rank())
            .then_with(|| match (self, other) {
                (Atom::Opaque(a), Atom::Opaque(b)) => structural_order(a, b),
                _ => Ordering::Equal,
            })
    }
}

/// A total order on expressions by their structure: the kind of node, then its numbers
/// (by `f64::total_cmp`, so equal means bit-equal), ids and operands in turn. Equal
/// exactly when the two trees are the same.
fn structural_order(a: &Expr, b: &Expr) -> Ordering {
    fn kind(e: &Expr) -> u8 {
        match e {
            Expr::Const(_) => 0,
            Expr::Param(_) => 1,
            Expr::Factor(_) => 2,
            Expr::Time => 3,
            Expr::Neg(_) => 4,
            Expr::Add(..) => 5,
            Expr::Sub(..) => 6,
            Expr::Mul(..) => 7,
            Expr::Div(..) => 8,
            Expr::Pow(..) => 9,
            Expr::Call(..) => 10,
            Expr::Invalid => 11,
        }
    }
    match (a, b) {
        (Expr::Const(x), Expr::Const(y)) => x.total_cmp(y),
        (Expr::Param(i), Expr::Param(j)) => i.index().cmp(&j.index()),
        (Expr::Factor(i), Expr::Factor(j)) => i.index().cmp(&j.index()),
        (Expr::Neg(x), Expr::Neg(y)) => structural_order(x, y),
        (Expr::Add(a1, a2), Expr::Add(b1, b2))
        | (Expr::Sub(a1, a2), Expr::Sub(b1, b2))
        | (Expr::Mul(a1, a2), Expr::Mul(b1, b2))
        | (Expr::Div(a1, a2), Expr::Div(b1, b2))
        | (Expr::Pow(a1, a2), Expr::Pow(b1, b2)) => {
            structural_order(a1, b1).then_with(|| structural_order(a2, b2))
        }
        (Expr::Call(f, xs), Expr::Call(g, ys)) => (*f as u8)
            .cmp(&(*g as u8))
            .then_with(|| xs.len().cmp(&ys.len()))
            .then_with(|| {
                xs.iter()
                    .zip(ys)
                    .map(|(x, y)| structural_order(x, y))
                    .find(|o| o.is_ne())
                    .unwrap_or(Ordering::Equal)
            }),
        _ => kind(a).cmp(&kind(b)),
    }
}

/// A product of atoms with non-zero integer powers, sorted by atom.
pub type Monomial = Vec<(Atom, i64)>;

/// A sum of `coefficient · monomial` with distinct monomials and non-zero coefficients.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Poly {
    pub terms: BTreeMap<Monomial, f64>,
}

/// The piece of an expression that kept it from being a polynomial in the states.
#[derive(Clone, Debug, PartialEq)]
pub struct NotPolynomial {
    pub piece: Expr,
}

impl Poly {
    pub fn zero() -> Poly {
        Poly::default()
    }

    pub fn constant(value: f64) -> Poly {
        let mut p = Poly::zero();
        if value != 0.0 {
            p.terms.insert(Vec::new(), value);
        }
        p
    }

    pub fn one() -> Poly {
        Poly::constant(1.0)
    }

    pub fn atom(atom: Atom) -> Poly {
        let mut p = Poly::zero();
        p.terms.insert(vec![(atom, 1)], 1.0);
        p
    }

    pub fn is_zero(&self) -> bool {
        self.terms.is_empty()
    }

    pub fn is_one(&self) -> bool {
        self.terms.len() == 1 && self.terms.get(&Vec::new()) == Some(&1.0)
    }

    /// The value when the polynomial is a plain number.
    pub fn as_constant(&self) -> Option<f64> {
        match self.terms.len() {
            0 => Some(0.0),
            1 => self.terms.get(&Vec::new()).copied(),
            _ => None,
        }
    }

    fn insert_term(&mut self, monomial: Monomial, coefficient: f64) {
        if coefficient == 0.0 {
            return;
        }
        let entry = self.terms.entry(monomial).or_insert(0.0);
        *entry += coefficient;
        if *entry == 0.0 {
            self.terms.retain(|_, c| *c != 0.0);
        }
    }

    pub fn add(&self, other: &Poly) -> Poly {
        let mut out = self.clone();
        for (m, c) in &other.terms {
            out.insert_term(m.clone(), *c);
        }
        out
    }

    pub fn scale(&self, factor: f64) -> Poly {
        let mut out = Poly::zero();
        for (m, c) in &self.terms {
            out.insert_term(m.clone(), c * factor);
        }
        out
    }

    pub fn neg(&self) -> Poly {
        self.scale(-1.0)
    }

    pub fn sub(&self, other: &Poly) -> Poly {
        self.add(&other.neg())
    }

    pub fn mul(&self, other: &Poly) -> Poly {
        let mut out = Poly::zero();
        for (ma, ca) in &self.terms {
            for (mb, cb) in &other.terms {
                out.insert_term(multiply_monomials(ma, mb), ca * cb);
            }
        }
        out
    }

    /// The single term `(coefficient, monomial)` when the polynomial has exactly one.
    pub fn single_term(&self) -> Option<(&Monomial, f64)> {
        if self.terms.len() == 1 {
            self.terms.iter().next().map(|(m, c)| (m, *c))
        } else {
            None
        }
    }

    /// `self / other` when `other` is a single term without states.
    pub fn divide_by_term(&self, other: &Poly) -> Option<Poly> {
        let (monomial, coefficient) = other.single_term()?;
        if monomial.iter().any(|(a, _)| matches!(a, Atom::State(_))) || coefficient == 0.0 {
            return None;
        }
        let inverse: Monomial = monomial.iter().map(|(a, k)| (a.clone(), -k)).collect();
        let mut inverse_poly = Poly::zero();
        inverse_poly.insert_term(inverse, 1.0 / coefficient);
        Some(self.mul(&inverse_poly))
    }

    /// Whether any state appears.
    pub fn mentions_states(&self) -> bool {
        self.terms
            .keys()
            .any(|m| m.iter().any(|(a, _)| matches!(a, Atom::State(_))))
    }

    /// Whether any coefficient changes with `t`.
    pub fn depends_on_time(&self) -> bool {
        self.terms
            .keys()
            .any(|m| m.iter().any(|(a, _)| a.depends_on_time()))
    }

    /// The states that appear, sorted.
    pub fn states(&self) -> Vec<FactorId> {
        let mut out: Vec<FactorId> = self
            .terms
            .keys()
            .flat_map(|m| m.iter())
            .filter_map(|(a, _)| match a {
                Atom::State(i) => Some(*i),
                _ => None,
            })
            .collect();
        out.sort_unstable();
        out.dedup();
        out
    }

    /// Splits into coefficients of state monomials: `{ [(state, power)] -> coefficient }`.
    /// The empty key holds the state-free part.
    pub fn by_state_monomial(&self) -> BTreeMap<Vec<(usize, i64)>, Poly> {
        let mut out: BTreeMap<Vec<(usize, i64)>, Poly> = BTreeMap::new();
        for (m, c) in &self.terms {
            let state_part: Vec<(usize, i64)> = m
                .iter()
                .filter_map(|(a, k)| match a {
                    Atom::State(i) => Some((i.index(), *k)),
                    _ => None,
                })
                .collect();
            let rest: Monomial = m
                .iter()
                .filter(|(a, _)| !matches!(a, Atom::State(_)))
                .cloned()
                .collect();
            out.entry(state_part).or_default().insert_term(rest, *c);
        }
        out
    }

    /// Total degree in the states.
    pub fn state_degree(&self) -> i64 {
        self.by_state_monomial()
            .keys()
            .map(|k| k.iter().map(|(_, p)| p).sum::<i64>())
            .max()
            .unwrap_or(0)
    }

    /// The coefficient of `state^power` alone (other states absent).
    pub fn coefficient_of(&self, state: usize, power: i64) -> Poly {
        let key: Vec<(usize, i64)> = if power == 0 {
            Vec::new()
        } else {
            vec![(state, power)]
        };
        self.by_state_monomial().remove(&key).unwrap_or_default()
    }

    pub fn eval(&self, params: &[f64], states: &[f64], t: f64) -> f64 {
        // Folding from +0 (not `sum`, which starts at −0) so that zero prints as 0.
        self.terms.iter().fold(0.0, |total, (m, c)| {
            total
                + m.iter().fold(*c, |acc, (a, k)| {
                    acc * a.eval(params, states, t).powi(*k as i32)
                })
        })
    }

    /// Value of a polynomial without states, at time `t`.
    pub fn value(&self, model_params: &[f64], t: f64) -> f64 {
        self.eval(model_params, &[], t)
    }
}

fn multiply_monomials(a: &Monomial, b: &Monomial) -> Monomial {
    let mut powers: BTreeMap<Atom, i64> = BTreeMap::new();
    for (atom, k) in a.iter().chain(b.iter()) {
        *powers.entry(atom.clone()).or_insert(0) += k;
    }
    powers.into_iter().filter(|(_, k)| *k != 0).collect()
}

/// Whether `t` appears in the expression.
pub fn expr_mentions_time(expr: &Expr) -> bool {
    expr.any(&mut |e| matches!(e, Expr::Time))
}

/// Whether a state appears in the expression.
pub fn expr_mentions_states(expr: &Expr) -> bool {
    expr.any(&mut |e| matches!(e, Expr::Factor(_)))
}

/// The value of an expression made only of numbers (and `pi`, already a number).
fn constant_value(expr: &Expr) -> Option<f64> {
    let numeric_only = !expr.any(&mut |e| {
        matches!(
            e,
            Expr::Param(_) | Expr::Factor(_) | Expr::Time | Expr::Invalid
        )
    });
    numeric_only.then(|| expr.eval(&[], &[], 0.0))
}

/// Normalises an expression into a polynomial in the states.
pub fn to_poly(expr: &Expr) -> Result<Poly, NotPolynomial> {
    let not_polynomial = || NotPolynomial {
        piece: expr.clone(),
    };
    match expr {
        Expr::Const(c) => Ok(Poly::constant(*c)),
        Expr::Param(i) => Ok(Poly::atom(Atom::Param(*i))),
        Expr::Factor(i) => Ok(Poly::atom(Atom::State(*i))),
        Expr::Time => Ok(Poly::atom(Atom::Time)),
        Expr::Neg(a) => Ok(to_poly(a)?.neg()),
        Expr::Add(a, b) => Ok(to_poly(a)?.add(&to_poly(b)?)),
        Expr::Sub(a, b) => Ok(to_poly(a)?.sub(&to_poly(b)?)),
        Expr::Mul(a, b) => bounded_product(&to_poly(a)?, &to_poly(b)?, expr),
        Expr::Div(a, b) => {
            let numerator = to_poly(a)?;
            if let Ok(denominator) = to_poly(b) {
                if let Some(q) = numerator.divide_by_term(&denominator) {
                    return Ok(q);
                }
            }
            if expr_mentions_states(b) {
                return Err(not_polynomial());
            }
            let mut inverse = Poly::zero();
            inverse.insert_term(vec![(Atom::opaque((**b).clone()), -1)], 1.0);
            Ok(numerator.mul(&inverse))
        }
        Expr::Pow(base, exponent) => {
            if let Some(k) = constant_value(exponent) {
                if k.fract() == 0.0 && k.abs() <= MAX_EXPANDED_POWER as f64 {
                    let k = k as i64;
                    let base_poly = to_poly(base)?;
                    if k >= 0 {
                        let mut out = Poly::one();
                        for _ in 0..k {
                            out = bounded_product(&out, &base_poly, expr)?;
                        }
                        return Ok(out);
                    }
                    if let Some((monomial, c)) = base_poly.single_term() {
                        if !base_poly.mentions_states() && c != 0.0 {
                            let m: Monomial =
                                monomial.iter().map(|(a, p)| (a.clone(), p * k)).collect();
                            let mut out = Poly::zero();
                            out.insert_term(m, c.powi(k as i32));
                            return Ok(out);
                        }
                    }
                }
            }
            opaque_or_error(expr)
        }
        Expr::Call(..) => opaque_or_error(expr),
        Expr::Invalid => Err(not_polynomial()),
    }
}

fn opaque_or_error(expr: &Expr) -> Result<Poly, NotPolynomial> {
    if expr_mentions_states(expr) || expr.is_invalid() {
        return Err(NotPolynomial {
            piece: expr.clone(),
        });
    }
    if let Some(v) = constant_value(expr) {
        return Ok(Poly::constant(v));
    }
    Ok(Poly::atom(Atom::opaque(expr.clone())))
}

#[cfg(test)]
mod tests {
    use super::*;
    use sdeck_semantics::Function;

    fn p(i: usize) -> Box<Expr> {
        Box::new(Expr::Param(ParamId::new(i)))
    }
    fn x(i: usize) -> Box<Expr> {
        Box::new(Expr::Factor(FactorId::new(i)))
    }

    #[test]
    fn mean_reverting_drift_expands_to_affine() {
        // kappa * (level - r) = kappa·level − kappa·r
        let drift = Expr::Mul(p(0), Box::new(Expr::Sub(p(1), x(0))));
        let poly = to_poly(&drift).expect("polynomial");
        assert_eq!(poly.state_degree(), 1);
        let slope = poly.coefficient_of(0, 1);
        assert_eq!(slope, Poly::atom(Atom::Param(ParamId::new(0))).neg());
        let intercept = poly.coefficient_of(0, 0);
        assert_eq!(
            intercept,
            Poly::atom(Atom::Param(ParamId::new(0))).mul(&Poly::atom(Atom::Param(ParamId::new(1))))
        );
        // level = intercept / (−slope) cancels kappa exactly.
        let level = intercept.divide_by_term(&slope.neg()).expect("divisible");
        assert_eq!(level, Poly::atom(Atom::Param(ParamId::new(1))));
    }

    #[test]
    fn equal_expressions_normalise_equally() {
        // (a + x)² and a² + 2·a·x + x²
        let square = Expr::Pow(Box::new(Expr::Add(p(0), x(0))), Box::new(Expr::Const(2.0)));
        let expanded = Expr::Add(
            Box::new(Expr::Add(
                Box::new(Expr::Mul(p(0), p(0))),
                Box::new(Expr::Mul(
                    Box::new(Expr::Const(2.0)),
                    Box::new(Expr::Mul(p(0), x(0))),
                )),
            )),
            Box::new(Expr::Mul(x(0), x(0))),
        );
        assert_eq!(to_poly(&square), to_poly(&expanded));
    }

    #[test]
    fn square_root_forms_are_recognised() {
        // vol * sqrt(r), sqrt(vol^2 * r) and sqrt(r) * vol all square to vol²·r.
        let a = Expr::Mul(p(0), Box::new(Expr::Call(Function::Sqrt, vec![*x(0)])));
        let b = Expr::Call(
            Function::Sqrt,
            vec![Expr::Mul(
                Box::new(Expr::Pow(p(0), Box::new(Expr::Const(2.0)))),
                x(0),
            )],
        );
        let c = Expr::Mul(Box::new(Expr::Call(Function::Sqrt, vec![*x(0)])), p(0));
        let expected = Poly::atom(Atom::Param(ParamId::new(0)))
            .mul(&Poly::atom(Atom::Param(ParamId::new(0))))
            .mul(&Poly::atom(Atom::State(FactorId::new(0))));
        for e in [a, b, c] {
            let root = to_root_form(&e).expect("root form");
            assert!(!root.is_polynomial());
            assert_eq!(root.square(), expected);
        }
    }

    #[test]
    fn state_inside_a_function_is_not_polynomial() {
        let e = Expr::Call(Function::Exp, vec![*x(0)]);
        let err = to_poly(&e).expect_err("exp of a factor");
        assert_eq!(err.piece, e);
        // but a function of parameters and t is an opaque coefficient
        let g = Expr::Mul(Box::new(Expr::Call(Function::Sin, vec![Expr::Time])), x(0));
        let poly = to_poly(&g).expect("polynomial");
        assert!(poly.depends_on_time());
        assert_eq!(poly.state_degree(), 1);
    }

    use proptest::prelude::*;

    /// Random expressions over two parameters, two states and t, with the operators the
    /// normaliser expands.
    fn expression() -> impl Strategy<Value = Expr> {
        let leaf = prop_oneof![
            (-3.0..3.0f64).prop_map(Expr::Const),
            (0..2usize).prop_map(|i| *p(i)),
            (0..2usize).prop_map(|i| *x(i)),
            Just(Expr::Time),
        ];
        leaf.prop_recursive(4, 24, 2, |inner| {
            prop_oneof![
                inner.clone().prop_map(|a| Expr::Neg(Box::new(a))),
                (inner.clone(), inner.clone())
                    .prop_map(|(a, b)| Expr::Add(Box::new(a), Box::new(b))),
                (inner.clone(), inner.clone())
                    .prop_map(|(a, b)| Expr::Sub(Box::new(a), Box::new(b))),
                (inner.clone(), inner.clone())
                    .prop_map(|(a, b)| Expr::Mul(Box::new(a), Box::new(b))),
                (inner.clone(), 0..3i32)
                    .prop_map(|(a, k)| Expr::Pow(Box::new(a), Box::new(Expr::Const(f64::from(k))))),
                inner.clone().prop_map(|a| Expr::Div(Box::new(a), p(1))),
                inner.prop_map(|a| Expr::Call(Function::Exp, vec![Expr::Mul(p(0), Box::new(a))])),
            ]
        })
    }

    proptest! {
        #[test]
        fn normal_form_evaluates_like_the_expression(
            e in expression(),
            params in (0.5..2.0f64, 0.5..2.0f64),
            states in (-2.0..2.0f64, -2.0..2.0f64),
            t in 0.0..3.0f64,
        ) {
            let params = [params.0, params.1];
            let states = [states.0, states.1];
            let direct = e.eval(&params, &states, t);
            match to_poly(&e) {
                Ok(poly) => {
                    let value = poly.eval(&params, &states, t);
                    let scale = direct.abs().max(1.0);
                    prop_assert!(
                        (value - direct).abs() <= 1e-9 * scale || !direct.is_finite(),
                        "{e:?}: {value} vs {direct}"
                    );
                }
                // Only an exponential of a state is outside the polynomials here.
                Err(NotPolynomial { piece }) => prop_assert!(expr_mentions_states(&piece)),
            }
        }
    }

    #[test]
    fn evaluation_matches_the_expression() {
        let e = Expr::Div(
            Box::new(Expr::Mul(p(0), Box::new(Expr::Sub(p(1), x(0))))),
            Box::new(Expr::Add(p(2), Box::new(Expr::Const(1.0)))),
        );
        let poly = to_poly(&e).expect("polynomial");
        let params = [1.5, 0.03, 2.0];
        let states = [0.05];
        let direct = e.eval(&params, &states, 0.0);
        assert!((poly.eval(&params, &states, 0.0) - direct).abs() < 1e-15);
    }
}
