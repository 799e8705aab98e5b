//! Printing polynomials and expressions in readable math with the model's names.

use super::{Atom, Monomial, Poly};
use sdeck_semantics::{Expr, FactorId, Model, ParamId};

/// Names used when printing: the model's own parameter and state names, and the symbol
/// written for the time (`t`, or `s` inside an integral over s).
pub struct Names<'a> {
    pub model: &'a Model,
    pub time: &'a str,
}

impl<'a> Names<'a> {
    pub fn new(model: &'a Model) -> Names<'a> {
        Names { model, time: "t" }
    }

    /// The same names with the time written as `time`.
    pub fn with_time(&self, time: &'a str) -> Names<'a> {
        Names {
            model: self.model,
            time,
        }
    }

    fn param(&self, i: ParamId) -> String {
        self.model
            .params
            .by_id(i)
            .map(|p| p.name.clone())
            .unwrap_or_else(|| format!("p{i}"))
    }

    fn state(&self, i: FactorId) -> String {
        self.model
            .factors
            .by_id(i)
            .map(|s| s.name.clone())
            .unwrap_or_else(|| format!("x{i}"))
    }
}

/// Superscript digits for small powers, `^n` otherwise.
fn superscript(k: i64) -> String {
    const DIGITS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    if k == 1 {
        return String::new();
    }
    if (2..=9).contains(&k) {
        return DIGITS
            .get(k as usize)
            .map(|c| c.to_string())
            .unwrap_or_default();
    }
    format!("^{k}")
}

/// A number printed short: integers without a decimal point, others with up to 6
/// significant digits.
pub fn show_number(x: f64) -> String {
    if x.fract() == 0.0 && x.abs() < 1e15 {
        return format!("{}", x as i64).replace('-', "−");
    }
    let text = format!("{:.6}", x);
    let trimmed = if x.abs() >= 1e-4 && x.abs() < 1e6 {
        let t = format!("{}", (x * 1e6).round() / 1e6);
        if t.len() < text.len() {
            t
        } else {
            text
        }
    } else {
        format!("{x:.4e}")
    };
    trimmed.replace('-', "−")
}

fn show_atom(atom: &Atom, names: &Names) -> String {
    match atom {
        Atom::State(i) => names.state(*i),
        Atom::Param(i) => names.param(*i),
        Atom::Time => names.time.to_string(),
        Atom::Opaque(expr) => {
            let text = show_expr(expr, names);
            if matches!(**expr, Expr::Call(..)) {
                text
            } else {
                format!("({text})")
            }
        }
    }
}

fn show_factors(factors: &[(&Atom, i64)], names: &Names) -> String {
    factors
        .iter()
        .map(|(a, k)| format!("{}{}", show_atom(a, names), superscript(*k)))
        .collect::<Vec<_>>()
        .join("·")
}

/// One term printed without its sign; returns (negative, text).
fn show_term(monomial: &Monomial, coefficient: f64, names: &Names) -> (bool, String) {
    let numerator: Vec<(&Atom, i64)> = monomial
        .iter()
        .filter(|(_, k)| *k > 0)
        .map(|(a, k)| (a, *k))
        .collect();
    let denominator: Vec<(&Atom, i64)> = monomial
        .iter()
        .filter(|(_, k)| *k < 0)
        .map(|(a, k)| (a, -k))
        .collect();
    let mut magnitude = coefficient.abs();
    // A coefficient 1/k with a small integer k reads better below the line: vol²/(2·kappa).
    let mut below_number = None;
    let inverse = 1.0 / magnitude;
    let has_atoms = !numerator.is_empty() || !denominator.is_empty();
    if has_atoms && magnitude < 1.0 && inverse.fract() == 0.0 && inverse <= 12.0 {
        below_number = Some(inverse);
        magnitude = 1.0;
    }
    let mut text = String::new();
    if numerator.is_empty() {
        text.push_str(&show_number(magnitude));
    } else {
        if magnitude != 1.0 {
            text.push_str(&show_number(magnitude));
            text.push('·');
        }
        text.push_str(&show_factors(&numerator, names));
    }
    let mut below = Vec::new();
    if let Some(k) = below_number {
        below.push(show_number(k));
    }
    if !denominator.is_empty() {
        below.push(show_factors(&denominator, names));
    }
    if below.len() > 1 || denominator.len() > 1 {
        text.push_str(&format!("/({})", below.join("·")));
    } else if let Some(single) = below.first() {
        text.push_str(&format!("/{single}"));
    }
    (coefficient < 0.0, text)
}

/// Prints a polynomial in readable math with the model's names: `kappa·level − kappa·r`.
pub fn show_poly(poly: &Poly, names: &Names) -> String {
    if poly.is_zero() {
        return "0".to_string();
    }
    // Higher state degree last, constant first: `a + b·x + c·x²`.
    let mut terms: Vec<(&Monomial, f64)> = poly.terms.iter().map(|(m, c)| (m, *c)).collect();
    terms.sort_by_key(|(m, _)| {
        m.iter()
            .filter(|(a, _)| matches!(a, Atom::State(_)))
            .map(|(_, k)| *k)
            .sum::<i64>()
    });
    let mut out = String::new();
    for (index, (m, c)) in terms.iter().enumerate() {
        let (negative, text) = show_term(m, *c, names);
        match (index, negative) {
            (0, true) => out.push('−'),
            (0, false) => {}
            (_, true) => out.push_str(" − "),
            (_, false) => out.push_str(" + "),
        }
        out.push_str(&text);
    }
    out
}

/// Whether the printed polynomial needs parentheses when it is a factor.
pub fn show_poly_factor(poly: &Poly, names: &Names) -> String {
    let text = show_poly(poly, names);
    if poly.terms.len() > 1 || text.starts_with('−') {
        format!("({text})")
    } else {
        text
    }
}

fn precedence(expr: &Expr) -> u8 {
    match expr {
        Expr::Add(..) | Expr::Sub(..) => 1,
        Expr::Mul(..) | Expr::Div(..) => 2,
        Expr::Neg(..) => 3,
        Expr::Pow(..) => 4,
        _ => 5,
    }
}

/// Prints an expression of the model in readable math.
pub fn show_expr(expr: &Expr, names: &Names) -> String {
    let wrap = |e: &Expr, min: u8| {
        let text = show_expr(e, names);
        if precedence(e) < min {
            format!("({text})")
        } else {
            text
        }
    };
    match expr {
        Expr::Const(c) => {
            if (*c - std::f64::consts::PI).abs() < 1e-15 {
                "π".to_string()
            } else {
                show_number(*c)
            }
        }
        Expr::Param(i) => names.param(*i),
        Expr::Factor(i) => names.state(*i),
        Expr::Time => names.time.to_string(),
        Expr::Neg(a) => format!("−{}", wrap(a, 3)),
        Expr::Add(a, b) => format!("{} + {}", wrap(a, 1), wrap(b, 1)),
        Expr::Sub(a, b) => format!("{} − {}", wrap(a, 1), wrap(b, 2)),
        Expr::Mul(a, b) => format!("{}·{}", wrap(a, 2), wrap(b, 2)),
        Expr::Div(a, b) => format!("{}/{}", wrap(a, 2), wrap(b, 3)),
        Expr::Pow(a, b) => format!("{}^{}", wrap(a, 5), wrap(b, 5)),
        Expr::Call(f, args) => {
            let inner: Vec<String> = args.iter().map(|a| show_expr(a, names)).collect();
            format!("{}({})", f.name(), inner.join(", "))
        }
        Expr::Invalid => "?".to_string(),
    }
}
