//! Readable formulas (Unicode math with the model's own names) for `sdeck moments`.

mod coupled;
mod families;
mod linear;

use crate::algebra::{show_poly, Names, Poly};
use crate::shape::{noise_name, OneState};
use crate::{Family, Formulas};
pub(crate) use coupled::coupled;
use sdeck_semantics::{Model, ShockId};

/// The letters a formula uses besides the model's names: the integration variable, the
/// moment functions and the matrices of a linear system. Each is the first of its
/// candidates that no factor, parameter, shock or let of the model is called, so a factor
/// named `s` never reads as "Cov(s(s), s(t))"; past the candidates a prime makes a letter
/// no identifier can be.
struct Symbols {
    /// Integration variable and its subscript (`s`, `ₛ`).
    s: String,
    s_sub: String,
    /// A second integration variable, inside an exponent.
    u: String,
    /// Mean and variance as functions of time in the moment equations.
    m: String,
    v: String,
    /// The scale of the square-root transition.
    c: String,
    /// Vector of factors, drift matrix and vector, loadings, correlation, stationary
    /// covariance of a linear system.
    x: String,
    a: String,
    b: String,
    l: String,
    r: String,
    p: String,
}

impl Symbols {
    fn new(model: &Model) -> Symbols {
        // Only a name of at most two characters can equal a candidate.
        let short: Vec<&str> = model
            .factors
            .iter()
            .map(|f| f.name.as_str())
            .chain(model.params.iter().map(|p| p.name.as_str()))
            .chain(model.shocks.iter().map(|s| s.name.as_str()))
            .chain(model.lets.iter().map(|l| l.name.as_str()))
            .filter(|name| name.chars().count() <= 2)
            .collect();
        let mut taken: Vec<String> = short.iter().map(|s| s.to_string()).collect();
        let mut pick = |candidates: &[&str]| -> String {
            let chosen = candidates
                .iter()
                .find(|c| !taken.iter().any(|t| t == *c))
                .map(|c| c.to_string())
                .unwrap_or_else(|| format!("{}′", candidates[0]));
            taken.push(chosen.clone());
            chosen
        };
        const VARIABLES: [(&str, &str); 4] = [("s", "ₛ"), ("u", "ᵤ"), ("r", "ᵣ"), ("v", "ᵥ")];
        let s = pick(&VARIABLES.map(|(v, _)| v));
        let s_sub = VARIABLES
            .iter()
            .find(|(v, _)| *v == s)
            .map_or_else(|| s.clone(), |(_, sub)| sub.to_string());
        let u = pick(&["u", "r", "v", "q"]);
        let m = pick(&["m", "μ", "M"]);
        let v = pick(&["v", "w", "V"]);
        let c = pick(&["c", "h", "k"]);
        let x = pick(&["X", "Y", "Z"]);
        let a = pick(&["A", "K", "M"]);
        let b = pick(&["b", "a", "h"]);
        let l = pick(&["L", "G", "H"]);
        let r = pick(&["R", "C", "Q"]);
        let p = pick(&["P", "S", "V"]);
        Symbols {
            s,
            s_sub,
            u,
            m,
            v,
            c,
            x,
            a,
            b,
            l,
            r,
            p,
        }
    }
}

struct Writer<'a> {
    names: Names<'a>,
    model: &'a Model,
    state: String,
    sym: Symbols,
}

impl<'a> Writer<'a> {
    fn new(model: &'a Model, state: usize) -> Writer<'a> {
        Writer {
            names: Names::new(model),
            model,
            state: model
                .factors
                .get(state)
                .map(|s| s.name.clone())
                .unwrap_or_else(|| "x".to_string()),
            sym: Symbols::new(model),
        }
    }

    fn show(&self, p: &Poly) -> String {
        show_poly(p, &self.names)
    }

    /// As a factor: parenthesised when it is a sum or starts with a minus.
    fn factor(&self, p: &Poly) -> String {
        let text = self.show(p);
        if p.terms.len() > 1 || text.starts_with('−') {
            format!("({text})")
        } else {
            text
        }
    }

    /// As a denominator: parenthesised unless a single name or number.
    fn denominator(&self, p: &Poly) -> String {
        let text = self.show(p);
        if text.chars().any(|c| matches!(c, '·' | ' ' | '/' | '−')) {
            format!("({text})")
        } else {
            text
        }
    }

    /// `p·var`, with `p = 1` and `p = −1` simplified.
    fn times(&self, p: &Poly, var: &str) -> String {
        if p.is_one() {
            return var.to_string();
        }
        if p.neg().is_one() {
            return format!("−{var}");
        }
        if p.terms.len() == 1 {
            format!("{}·{var}", self.show(p))
        } else {
            format!("({})·{var}", self.show(p))
        }
    }

    fn exp(&self, p: &Poly, var: &str) -> String {
        format!("e^({})", self.times(p, var))
    }

    /// `num / den`, cancelling a single-term denominator when possible.
    fn ratio(&self, num: &Poly, den: &Poly) -> String {
        if let Some(q) = num.divide_by_term(den) {
            return self.show(&q);
        }
        format!("{}/{}", self.factor(num), self.denominator(den))
    }

    fn ratio_poly(&self, num: &Poly, den: &Poly) -> Option<Poly> {
        num.divide_by_term(den)
    }

    fn at(&self, time: &str) -> String {
        format!("{}({time})", self.state)
    }

    fn start(&self) -> String {
        format!("{}₀", self.state)
    }

    /// Σ_k c_k·(integrand) dW_k, one summand per noise term.
    fn noise_sum(
        &self,
        terms: &[(ShockId, Poly, Poly)],
        integrand: &dyn Fn(&Poly) -> String,
    ) -> String {
        terms
            .iter()
            .filter(|(_, c, _)| !c.is_zero())
            .map(|(noise, c, _)| {
                let body = integrand(c);
                format!("{body} d{}({})", noise_name(self.model, *noise), self.sym.s)
            })
            .collect::<Vec<_>>()
            .join(" + ")
    }
}

/// A level printed as a factor.
fn wrap_level(text: &str) -> String {
    if text.contains(' ') || text.starts_with('−') {
        format!("({text})")
    } else {
        text.to_string()
    }
}

/// The stationary law, as text.
pub(crate) fn stationary_law(model: &Model, os: &OneState, family: Family) -> String {
    let w = Writer::new(model, os.state);
    let minus_b = os.b.neg();
    match family {
        Family::Deterministic => format!("point mass at {}", w.ratio(&os.a, &minus_b)),
        Family::OrnsteinUhlenbeck => format!(
            "Normal({}, {})",
            w.ratio(&os.a, &minus_b),
            w.ratio(&os.alpha, &os.b.scale(-2.0))
        ),
        Family::SquareRoot => format!(
            "Gamma(shape {}, scale {})",
            w.ratio(&os.a.scale(2.0), &os.beta),
            w.ratio(&os.beta, &os.b.scale(-2.0))
        ),
        _ => {
            // Fixed point of m' = a + b m and v' = α + β m + γ m² + (2b + γ) v.
            let m = &w.sym.m;
            let mean = w.ratio(&os.a, &minus_b);
            let rate = os.b.scale(-2.0).sub(&os.gamma);
            let source = sum(&[
                if os.alpha.is_zero() {
                    String::new()
                } else {
                    w.show(&os.alpha)
                },
                w.term(&os.beta, &format!("{m}∞")),
                w.term(&os.gamma, &format!("{m}∞²")),
            ]);
            format!(
                "no named law; mean {m}∞ = {mean}, variance ({source})/{}",
                w.denominator(&rate)
            )
        }
    }
}

/// `L + (x₀ − L)·e^(b·t)` or `x₀·e^(b·t)` when the level is zero.
fn reverting_mean(w: &Writer, os: &OneState, start: &str, elapsed: &str) -> String {
    let growth = w.exp(&os.b, elapsed);
    if os.a.is_zero() {
        return format!("{start}·{growth}");
    }
    match w.ratio_poly(&os.a, &os.b.neg()) {
        Some(level) => {
            let level_text = w.show(&level);
            let wrapped = w.factor(&level);
            format!("{level_text} + ({start} − {wrapped})·{growth}")
        }
        None => format!(
            "{start}·{growth} + {}·({growth} − 1)/{}",
            w.factor(&os.a),
            w.denominator(&os.b)
        ),
    }
}

pub(crate) fn one_state(model: &Model, os: &OneState, family: Family) -> Formulas {
    let w = Writer::new(model, os.state);
    let empty = Vec::new();
    let terms = os.affine_terms.as_ref().unwrap_or(&empty);
    match family {
        Family::ArithmeticBrownian => families::arithmetic_brownian(&w, os, terms),
        Family::Deterministic => families::deterministic(&w, os, family, terms),
        Family::Linear if !os.time_dependent && !os.state_dependent_noise() => {
            let mut formulas = families::gaussian_affine(&w, os, terms);
            formulas.stationary = None;
            formulas
        }
        Family::OrnsteinUhlenbeck => {
            let mut formulas = families::gaussian_affine(&w, os, terms);
            formulas.stationary = Some(stationary_law(model, os, family));
            formulas
        }
        Family::GeometricBrownian => families::geometric_brownian(&w, os, terms),
        Family::SquareRoot => families::square_root(&w, os, family),
        Family::Linear | Family::Polynomial => linear::linear_formulas(&w, os, family, terms),
        Family::LinearSystem | Family::ExponentialAffine | Family::General => Formulas::default(),
    }
}

/// The pieces every one-state formula writes: the integration variable, the state at t
/// and at it, the start, and the elapsed time `(t − s)`.
struct Marks {
    s: String,
    x_t: String,
    x_s: String,
    x0: String,
    elapsed: String,
}

impl Writer<'_> {
    fn marks(&self) -> Marks {
        let s = self.sym.s.clone();
        Marks {
            x_t: self.at("t"),
            x_s: self.at(&s),
            x0: self.start(),
            elapsed: format!("(t − {s})"),
            s,
        }
    }
}

/// Joins signed terms: `a + b − c`, skipping empty ones.
fn sum(terms: &[String]) -> String {
    let mut out = String::new();
    for term in terms.iter().filter(|t| !t.is_empty()) {
        if out.is_empty() {
            out.push_str(term);
        } else if let Some(rest) = term.strip_prefix('−') {
            out.push_str(" − ");
            out.push_str(rest);
        } else {
            out.push_str(" + ");
            out.push_str(term);
        }
    }
    if out.is_empty() {
        "0".to_string()
    } else {
        out
    }
}

impl Writer<'_> {
    /// `p·var`, or nothing when p is zero.
    fn term(&self, p: &Poly, var: &str) -> String {
        if p.is_zero() {
            String::new()
        } else {
            self.times(p, var)
        }
    }

    /// The polynomial with `t` written as the integration variable (inside an integral).
    fn show_at_s(&self, p: &Poly) -> String {
        show_poly(p, &self.names.with_time(&self.sym.s))
    }

    fn factor_at_s(&self, p: &Poly) -> String {
        let text = self.show_at_s(p);
        if p.terms.len() > 1 || text.starts_with('−') {
            format!("({text})")
        } else {
            text
        }
    }
}
