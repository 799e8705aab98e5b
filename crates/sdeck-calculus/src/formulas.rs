//! Readable formulas (Unicode math with the model's own names) for `sdeck moments`.

use crate::algebra::{show_poly, Names, Poly};
use crate::shape::{correlation, correlation_at, noise_name, OneState};
use crate::{Analysis, Family, Formulas};
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
    let s = w.sym.s.as_str();
    let x_t = w.at("t");
    let x_s = w.at(s);
    let x0 = w.start();
    let elapsed = format!("(t − {s})");
    let empty = Vec::new();
    let terms = os.affine_terms.as_ref().unwrap_or(&empty);
    match family {
        Family::ArithmeticBrownian => {
            let drift = if os.a.is_zero() {
                String::new()
            } else {
                format!(" + {}", w.times(&os.a, "t"))
            };
            let noise = terms
                .iter()
                .filter(|(_, c, _)| !c.is_zero())
                .map(|(k, c, _)| w.times(c, &format!("{}(t)", noise_name(model, *k))))
                .collect::<Vec<_>>()
                .join(" + ");
            let noise = if noise.is_empty() {
                String::new()
            } else {
                format!(" + {noise}")
            };
            Formulas {
                matrices: None,
                solution: Some(format!("{x_t} = {x0}{drift}{noise}")),
                mean: Some(format!("E[{x_t}] = {x0}{drift}")),
                variance: Some(format!("Var[{x_t}] = {}", w.times(&os.alpha, "t"))),
                autocovariance: Some(format!(
                    "Cov({x_s}, {x_t}) = {}, {s} ≤ t",
                    w.times(&os.alpha, s)
                )),
                stationary: None,
                transition: Some(format!(
                    "{x_t} | {x_s} ~ Normal({x_s} + {}, {})",
                    w.times(&os.a, &elapsed),
                    w.times(&os.alpha, &elapsed)
                )),
            }
        }
        Family::Deterministic => {
            let mut formulas = if os.time_dependent {
                linear_formulas(&w, os, family, terms)
            } else {
                let path = if os.b.is_zero() {
                    sum(&[x0.clone(), w.term(&os.a, "t")])
                } else {
                    reverting_mean(&w, os, &x0, "t")
                };
                Formulas {
                    solution: Some(format!("{x_t} = {path}")),
                    mean: Some(format!("E[{x_t}] = {path}")),
                    stationary: None,
                    transition: None,
                    ..Formulas::default()
                }
            };
            formulas.variance = Some(format!("Var[{x_t}] = 0"));
            formulas.autocovariance = Some(format!("Cov({x_s}, {x_t}) = 0, {s} ≤ t"));
            formulas.stationary =
                (!os.time_dependent && !os.b.is_zero()).then(|| stationary_law(model, os, family));
            formulas
        }
        Family::Linear if !os.time_dependent && !os.state_dependent_noise() => {
            let mut formulas = gaussian_affine(&w, os, terms);
            formulas.stationary = None;
            formulas
        }
        Family::OrnsteinUhlenbeck => {
            let mut formulas = gaussian_affine(&w, os, terms);
            formulas.stationary = Some(stationary_law(model, os, family));
            formulas
        }
        Family::GeometricBrownian => {
            let log_drift = os.b.sub(&os.gamma.scale(0.5));
            let noise = terms
                .iter()
                .filter(|(_, _, d)| !d.is_zero())
                .map(|(k, _, d)| w.times(d, &format!("{}(t)", noise_name(model, *k))))
                .collect::<Vec<_>>()
                .join(" + ");
            let gamma = w.factor(&os.gamma);
            Formulas {
                matrices: None,
                solution: Some(format!(
                    "{x_t} = {x0}·e^({} + {noise})",
                    w.times(&log_drift, "t")
                )),
                mean: Some(format!("E[{x_t}] = {x0}·{}", w.exp(&os.b, "t"))),
                variance: Some(format!(
                    "Var[{x_t}] = {x0}²·{}·({} − 1)",
                    w.exp(&os.b.scale(2.0), "t"),
                    w.exp(&os.gamma, "t")
                )),
                autocovariance: Some(format!(
                    "Cov({x_s}, {x_t}) = {x0}²·{}·({} − 1), {s} ≤ t",
                    w.exp(&os.b, &format!("({s} + t)")),
                    w.exp(&os.gamma, s)
                )),
                stationary: None,
                transition: Some(format!(
                    "log {x_t} | {x_s} ~ Normal(log {x_s} + {}, {gamma}·{elapsed})",
                    w.times(&log_drift, &elapsed)
                )),
            }
        }
        Family::SquareRoot => {
            let minus_b = os.b.neg();
            let beta = w.factor(&os.beta);
            let level = w.ratio(&os.a, &minus_b);
            Formulas {
                matrices: None,
                solution: None,
                mean: Some(format!("E[{x_t}] = {}", reverting_mean(&w, os, &x0, "t"))),
                variance: Some({
                    let start_part = format!(
                        "{x0}·{beta}·({} − {})/{}",
                        w.exp(&os.b, "t"),
                        w.exp(&os.b.scale(2.0), "t"),
                        w.denominator(&minus_b),
                    );
                    if os.a.is_zero() {
                        format!("Var[{x_t}] = {start_part}")
                    } else {
                        format!(
                            "Var[{x_t}] = {start_part} + {}·{beta}·(1 − {})²/{}",
                            wrap_level(&level),
                            w.exp(&os.b, "t"),
                            w.denominator(&os.b.scale(-2.0)),
                        )
                    }
                }),
                autocovariance: Some(format!(
                    "Cov({x_s}, {x_t}) = Var[{x_s}]·{}, {s} ≤ t",
                    w.exp(&os.b, &elapsed)
                )),
                stationary: Some(stationary_law(model, os, family)),
                transition: Some(format!(
                    "2{c}·{x_t} | {x_s} ~ noncentral χ²(degrees {}, noncentrality 2{c}·{x_s}·{}), \
                     {c} = {}/({beta}·(1 − {}))",
                    w.ratio(&os.a.scale(4.0), &os.beta),
                    w.exp(&os.b, &elapsed),
                    w.factor(&os.b.scale(-2.0)),
                    w.exp(&os.b, &elapsed),
                    c = w.sym.c
                )),
            }
        }
        Family::Linear | Family::Polynomial => linear_formulas(&w, os, family, terms),
        Family::LinearSystem | Family::ExponentialAffine | Family::General => Formulas::default(),
    }
}

/// The Gaussian closed forms of dX = (a + bX) dt + Σ c dW with constant coefficients and
/// b ≠ 0 (Vasicek 1977, eqs. 23–25, written with b = −κ so that they hold for either
/// sign); the stationary law is the caller's to add.
fn gaussian_affine(w: &Writer, os: &OneState, terms: &[(ShockId, Poly, Poly)]) -> Formulas {
    let s = w.sym.s.as_str();
    let x_t = w.at("t");
    let x_s = w.at(s);
    let x0 = w.start();
    let elapsed = format!("(t − {s})");
    let mean = reverting_mean(w, os, &x0, "t");
    let noise = w.noise_sum(terms, &|c| {
        format!("{}·∫₀ᵗ {}", w.factor(c), w.exp(&os.b, &elapsed))
    });
    let two_b = os.b.scale(2.0);
    let minus_two_b = os.b.scale(-2.0);
    let alpha = w.factor(&os.alpha);
    Formulas {
        matrices: None,
        solution: Some(format!("{x_t} = {mean} + {noise}")),
        mean: Some(format!("E[{x_t}] = {mean}")),
        variance: Some(format!(
            "Var[{x_t}] = {alpha}·(1 − {})/{}",
            w.exp(&two_b, "t"),
            w.denominator(&minus_two_b)
        )),
        autocovariance: Some(format!(
            "Cov({x_s}, {x_t}) = {alpha}·({} − {})/{}, {s} ≤ t",
            w.exp(&os.b, &elapsed),
            w.exp(&os.b, &format!("(t + {s})")),
            w.denominator(&minus_two_b)
        )),
        stationary: None,
        transition: Some(format!(
            "{x_t} | {x_s} ~ Normal({}, {alpha}·(1 − {})/{})",
            reverting_mean(w, os, &x_s, &elapsed),
            w.exp(&two_b, &elapsed),
            w.denominator(&minus_two_b)
        )),
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

fn linear_formulas(
    w: &Writer,
    os: &OneState,
    family: Family,
    terms: &[(ShockId, Poly, Poly)],
) -> Formulas {
    let (s, s_sub, u) = (w.sym.s.as_str(), w.sym.s_sub.as_str(), w.sym.u.as_str());
    let (m, v) = (w.sym.m.as_str(), w.sym.v.as_str());
    let x_t = w.at("t");
    let x_s = w.at(s);
    let x0 = w.start();
    let b_varies = os.b.depends_on_time();
    // e^(∫ₛᵗ b) written out when b is constant.
    let growth = |from: &str| {
        if b_varies {
            let slope = show_poly(&os.b, &w.names.with_time(u));
            format!("e^(∫{from}ᵗ ({slope}) d{u})")
        } else if from == "₀" {
            w.exp(&os.b, "t")
        } else {
            w.exp(&os.b, &format!("(t − {s})"))
        }
    };
    let multiplicative = terms.iter().any(|(_, _, d)| !d.is_zero());
    let solution = if family == Family::Linear && !multiplicative {
        let noise: Vec<String> = terms
            .iter()
            .filter(|(_, c, _)| !c.is_zero())
            .map(|(k, c, _)| {
                format!(
                    "∫₀ᵗ {}·{} d{}({s})",
                    growth(s_sub),
                    w.factor_at_s(c),
                    noise_name(w.model, *k)
                )
            })
            .collect();
        let mut parts = vec![format!("{}·{x0}", growth("₀"))];
        if !os.a.is_zero() {
            parts.push(format!(
                "∫₀ᵗ {}·{} d{s}",
                growth(s_sub),
                w.factor_at_s(&os.a)
            ));
        }
        parts.extend(noise);
        Some(format!("{x_t} = {}", sum(&parts)))
    } else if family == Family::Linear {
        // Kloeden & Platen 1992, §4.2, eq. (2.4): the fundamental solution Φ.
        let corr = w.model.correlations();
        let mut cross = Poly::zero();
        for (k, c, _) in terms {
            for (l, _, d) in terms {
                let rho = correlation(&corr, *k, *l);
                cross = cross.add(&c.mul(d).scale(rho));
            }
        }
        let phi_noise: Vec<String> = terms
            .iter()
            .filter(|(_, _, d)| !d.is_zero())
            .map(|(k, _, d)| format!("∫₀ᵗ {} d{}", w.factor_at_s(d), noise_name(w.model, *k)))
            .collect();
        let additive: String = terms
            .iter()
            .filter(|(_, c, _)| !c.is_zero())
            .map(|(k, c, _)| {
                format!(
                    " + ∫₀ᵗ Φ({s})⁻¹·{} d{}({s})",
                    w.factor_at_s(c),
                    noise_name(w.model, *k)
                )
            })
            .collect();
        let mut exponent = vec![format!(
            "∫₀ᵗ ({}) d{s}",
            w.show_at_s(&os.b.sub(&os.gamma.scale(0.5)))
        )];
        exponent.extend(phi_noise);
        Some(format!(
            "{x_t} = Φ(t)·({x0} + ∫₀ᵗ Φ({s})⁻¹·({}) d{s}{additive}), Φ(t) = exp({})",
            w.show_at_s(&os.a.sub(&cross)),
            sum(&exponent)
        ))
    } else {
        None
    };
    let mean = if os.time_dependent {
        format!(
            "{m}′(t) = {}, {m}(0) = {x0}",
            sum(&[w.show(&os.a), w.term(&os.b, &format!("{m}(t)"))])
        )
    } else {
        format!("E[{x_t}] = {}", reverting_mean(w, os, &x0, "t"))
    };
    let variance = format!(
        "{v}′(t) = {}, {v}(0) = 0",
        sum(&[
            if os.alpha.is_zero() {
                String::new()
            } else {
                w.show(&os.alpha)
            },
            w.term(&os.beta, &format!("{m}(t)")),
            w.term(&os.gamma, &format!("{m}(t)²")),
            w.term(&os.b.scale(2.0).add(&os.gamma), &format!("{v}(t)")),
        ])
    );
    let stationary = (!os.time_dependent).then(|| stationary_law(w.model, os, family));
    Formulas {
        matrices: None,
        solution,
        mean: Some(mean),
        variance: Some(variance),
        autocovariance: Some(format!(
            "Cov({x_s}, {x_t}) = Var[{x_s}]·{}, {s} ≤ t",
            growth(s_sub)
        )),
        stationary,
        transition: None,
    }
}

/// Formulas of a state that is part of a coupled system.
pub(crate) fn coupled(
    model: &Model,
    analysis: &Analysis,
    state: usize,
    family: Family,
) -> Formulas {
    let w = Writer::new(model, state);
    let x = &w.state;
    match family {
        Family::LinearSystem => {
            let Symbols {
                s,
                x: v,
                a,
                b,
                l,
                r,
                p,
                ..
            } = &w.sym;
            Formulas {
                solution: Some(format!(
                    "{v}(t) = e^({a}·t)·{v}₀ + ∫₀ᵗ e^({a}·(t − {s}))·{b} d{s} \
                     + ∫₀ᵗ e^({a}·(t − {s}))·{l} dW({s}), {x} its component"
                )),
                mean: Some(format!(
                    "E[{v}(t)] = e^({a}·t)·{v}₀ + ∫₀ᵗ e^({a}·{s})·{b} d{s}, {x} its component"
                )),
                variance: Some(format!(
                    "Cov[{v}(t)] = ∫₀ᵗ e^({a}·{s})·{l}·{r}·{l}ᵀ·e^({a}ᵀ·{s}) d{s} (Van Loan), \
                     entry ({x}, {x})"
                )),
                autocovariance: Some(format!(
                    "Cov({v}({s}), {v}(t)) = Cov[{v}({s})]·e^({a}ᵀ·(t − {s})), {s} ≤ t, \
                     entry ({x}, {x})"
                )),
                stationary: Some(format!(
                    "Normal(−{a}⁻¹·{b}, {p}) with {a}·{p} + {p}·{a}ᵀ + {l}·{r}·{l}ᵀ = 0"
                )),
                transition: None,
                matrices: system_numbers(model, analysis, &w.sym),
            }
        }
        Family::Polynomial => Formulas {
            mean: Some(format!(
                "first and second moments of ({}) from their linear moment equations",
                model
                    .factors
                    .iter()
                    .map(|s| s.name.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            )),
            ..Formulas::default()
        },
        _ => Formulas::default(),
    }
}

/// The most factors (and shocks) whose matrices are printed as numbers; a larger system
/// keeps its formulas in letters only.
const MAX_PRINTED_SYSTEM: usize = 6;

/// A, b, L and R of a linear system with constant coefficients, as numbers in the
/// factors' declaration order (rows of A and L: factors; columns of L and R: shocks).
fn system_numbers(model: &Model, analysis: &Analysis, sym: &Symbols) -> Option<String> {
    let system = &analysis.system;
    let (rows, loadings) = (system.drift_rows.as_ref()?, system.loadings.as_ref()?);
    let (n, k) = (model.factors.len(), model.shocks.len());
    if system.time_dependent || n == 0 || n > MAX_PRINTED_SYSTEM || k > MAX_PRINTED_SYSTEM {
        return None;
    }
    let params = &analysis.params;
    let show = |x: f64| sdeck_units::number::plain(x).replace('-', "−");
    let vector = |values: Vec<f64>| {
        format!(
            "({})",
            values.into_iter().map(show).collect::<Vec<_>>().join(", ")
        )
    };
    let matrix = |rows: Vec<Vec<f64>>| {
        format!(
            "({})",
            rows.into_iter().map(vector).collect::<Vec<_>>().join(", ")
        )
    };
    let a = matrix(
        rows.iter()
            .map(|(coefficients, _)| coefficients.iter().map(|c| c.value(params, 0.0)).collect())
            .collect(),
    );
    let b = vector(
        rows.iter()
            .map(|(_, constant)| constant.value(params, 0.0))
            .collect(),
    );
    let l = matrix(
        loadings
            .iter()
            .map(|row| {
                (0..k)
                    .map(|j| row.get(j).map_or(0.0, |p| p.value(params, 0.0)))
                    .collect()
            })
            .collect(),
    );
    let corr = &analysis.corr;
    let r = matrix(
        (0..k)
            .map(|i| (0..k).map(|j| correlation_at(corr, i, j)).collect())
            .collect(),
    );
    Some(format!(
        "{} = {a}; {} = {b}; {} = {l}; {} = {r}",
        sym.a, sym.b, sym.l, sym.r
    ))
}
