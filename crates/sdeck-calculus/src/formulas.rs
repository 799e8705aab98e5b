//! Readable formulas (Unicode math with the model's own names) for `sdeck moments`.

use crate::algebra::{show_poly, Names, Poly};
use crate::shape::{correlation, noise_name, OneState};
use crate::{Analysis, Family, Formulas};
use sdeck_semantics::Model;

struct Writer<'a> {
    names: Names<'a>,
    model: &'a Model,
    state: String,
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
        terms: &[(usize, Poly, Poly)],
        integrand: &dyn Fn(&Poly) -> String,
    ) -> String {
        terms
            .iter()
            .filter(|(_, c, _)| !c.is_zero())
            .map(|(noise, c, _)| {
                let body = integrand(c);
                format!("{body} d{}(s)", noise_name(self.model, *noise))
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
            let mean = w.ratio(&os.a, &minus_b);
            let rate = os.b.scale(-2.0).sub(&os.gamma);
            let source = sum(&[
                if os.alpha.is_zero() {
                    String::new()
                } else {
                    w.show(&os.alpha)
                },
                w.term(&os.beta, "m∞"),
                w.term(&os.gamma, "m∞²"),
            ]);
            format!(
                "no named law; mean m∞ = {mean}, variance ({source})/{}",
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
    let x_t = w.at("t");
    let x_s = w.at("s");
    let x0 = w.start();
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
                solution: Some(format!("{x_t} = {x0}{drift}{noise}")),
                mean: Some(format!("E[{x_t}] = {x0}{drift}")),
                variance: Some(format!("Var[{x_t}] = {}", w.times(&os.alpha, "t"))),
                autocovariance: Some(format!(
                    "Cov({x_s}, {x_t}) = {}, s ≤ t",
                    w.times(&os.alpha, "s")
                )),
                stationary: None,
                transition: Some(format!(
                    "{x_t} | {x_s} ~ Normal({x_s} + {}, {})",
                    w.times(&os.a, "(t − s)"),
                    w.times(&os.alpha, "(t − s)")
                )),
            }
        }
        Family::OrnsteinUhlenbeck => {
            let mean = reverting_mean(&w, os, &x0, "t");
            let noise = w.noise_sum(terms, &|c| {
                format!("{}·∫₀ᵗ {}", w.factor(c), w.exp(&os.b, "(t − s)"))
            });
            let two_b = os.b.scale(2.0);
            let minus_two_b = os.b.scale(-2.0);
            let alpha = w.factor(&os.alpha);
            Formulas {
                solution: Some(format!("{x_t} = {mean} + {noise}")),
                mean: Some(format!("E[{x_t}] = {mean}")),
                variance: Some(format!(
                    "Var[{x_t}] = {alpha}·(1 − {})/{}",
                    w.exp(&two_b, "t"),
                    w.denominator(&minus_two_b)
                )),
                autocovariance: Some(format!(
                    "Cov({x_s}, {x_t}) = {alpha}·({} − {})/{}, s ≤ t",
                    w.exp(&os.b, "(t − s)"),
                    w.exp(&os.b, "(t + s)"),
                    w.denominator(&minus_two_b)
                )),
                stationary: Some(stationary_law(model, os, family)),
                transition: Some(format!(
                    "{x_t} | {x_s} ~ Normal({}, {alpha}·(1 − {})/{})",
                    reverting_mean(&w, os, &x_s, "(t − s)"),
                    w.exp(&two_b, "(t − s)"),
                    w.denominator(&minus_two_b)
                )),
            }
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
                    "Cov({x_s}, {x_t}) = {x0}²·{}·({} − 1), s ≤ t",
                    w.exp(&os.b, "(s + t)"),
                    w.exp(&os.gamma, "s")
                )),
                stationary: None,
                transition: Some(format!(
                    "log {x_t} | {x_s} ~ Normal(log {x_s} + {}, {gamma}·(t − s))",
                    w.times(&log_drift, "(t − s)")
                )),
            }
        }
        Family::SquareRoot => {
            let minus_b = os.b.neg();
            let beta = w.factor(&os.beta);
            let level = w.ratio(&os.a, &minus_b);
            Formulas {
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
                    "Cov({x_s}, {x_t}) = Var[{x_s}]·{}, s ≤ t",
                    w.exp(&os.b, "(t − s)")
                )),
                stationary: Some(stationary_law(model, os, family)),
                transition: Some(format!(
                    "2c·{x_t} | {x_s} ~ noncentral χ²(degrees {}, noncentrality 2c·{x_s}·{}), \
                     c = {}/({beta}·(1 − {}))",
                    w.ratio(&os.a.scale(4.0), &os.beta),
                    w.exp(&os.b, "(t − s)"),
                    w.factor(&os.b.scale(-2.0)),
                    w.exp(&os.b, "(t − s)")
                )),
            }
        }
        Family::Linear | Family::Polynomial => linear_formulas(&w, os, family, terms),
        Family::LinearSystem | Family::ExponentialAffine | Family::General => Formulas::default(),
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

    /// The polynomial with `t` written as `s` (inside an integral over s).
    fn show_at_s(&self, p: &Poly) -> String {
        show_poly(p, &self.names.with_time("s"))
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
    terms: &[(usize, Poly, Poly)],
) -> Formulas {
    let x_t = w.at("t");
    let x_s = w.at("s");
    let x0 = w.start();
    let b_varies = os.b.depends_on_time();
    // e^(∫ₛᵗ b) written out when b is constant.
    let growth = |from: &str| {
        if b_varies {
            let slope = show_poly(&os.b, &w.names.with_time("u"));
            format!("e^(∫{from}ᵗ ({slope}) du)")
        } else if from == "₀" {
            w.exp(&os.b, "t")
        } else {
            w.exp(&os.b, "(t − s)")
        }
    };
    let multiplicative = terms.iter().any(|(_, _, d)| !d.is_zero());
    let solution = if family == Family::Linear && !multiplicative {
        let noise: Vec<String> = terms
            .iter()
            .filter(|(_, c, _)| !c.is_zero())
            .map(|(k, c, _)| {
                format!(
                    "∫₀ᵗ {}·{} d{}(s)",
                    growth("ₛ"),
                    w.factor_at_s(c),
                    noise_name(w.model, *k)
                )
            })
            .collect();
        let mut parts = vec![format!("{}·{x0}", growth("₀"))];
        if !os.a.is_zero() {
            parts.push(format!("∫₀ᵗ {}·{} ds", growth("ₛ"), w.factor_at_s(&os.a)));
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
                    " + ∫₀ᵗ Φ(s)⁻¹·{} d{}(s)",
                    w.factor_at_s(c),
                    noise_name(w.model, *k)
                )
            })
            .collect();
        let mut exponent = vec![format!(
            "∫₀ᵗ ({}) ds",
            w.show_at_s(&os.b.sub(&os.gamma.scale(0.5)))
        )];
        exponent.extend(phi_noise);
        Some(format!(
            "{x_t} = Φ(t)·({x0} + ∫₀ᵗ Φ(s)⁻¹·({}) ds{additive}), Φ(t) = exp({})",
            w.show_at_s(&os.a.sub(&cross)),
            sum(&exponent)
        ))
    } else {
        None
    };
    let mean = if os.time_dependent {
        format!(
            "m′(t) = {}, m(0) = {x0}",
            sum(&[w.show(&os.a), w.term(&os.b, "m(t)")])
        )
    } else {
        format!("E[{x_t}] = {}", reverting_mean(w, os, &x0, "t"))
    };
    let variance = format!(
        "v′(t) = {}, v(0) = 0",
        sum(&[
            if os.alpha.is_zero() {
                String::new()
            } else {
                w.show(&os.alpha)
            },
            w.term(&os.beta, "m(t)"),
            w.term(&os.gamma, "m(t)²"),
            w.term(&os.b.scale(2.0).add(&os.gamma), "v(t)"),
        ])
    );
    let stationary = (!os.time_dependent).then(|| stationary_law(w.model, os, family));
    Formulas {
        solution,
        mean: Some(mean),
        variance: Some(variance),
        autocovariance: Some(format!(
            "Cov({x_s}, {x_t}) = Var[{x_s}]·{}, s ≤ t",
            growth("ₛ")
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
    let _ = analysis;
    let x = &w.state;
    match family {
        Family::LinearSystem => Formulas {
            solution: Some(format!(
                "X(t) = e^(A·t)·X₀ + ∫₀ᵗ e^(A·(t − s))·b ds + ∫₀ᵗ e^(A·(t − s))·L dW(s), \
                 {x} its component"
            )),
            mean: Some(format!(
                "E[X(t)] = e^(A·t)·X₀ + ∫₀ᵗ e^(A·s)·b ds, {x} its component"
            )),
            variance: Some(format!(
                "Cov[X(t)] = ∫₀ᵗ e^(A·s)·L·R·Lᵀ·e^(Aᵀ·s) ds (Van Loan), entry ({x}, {x})"
            )),
            autocovariance: Some(format!(
                "Cov(X(s), X(t)) = Cov[X(s)]·e^(Aᵀ·(t − s)), s ≤ t, entry ({x}, {x})"
            )),
            stationary: Some("Normal(−A⁻¹·b, P) with A·P + P·Aᵀ + L·R·Lᵀ = 0".to_string()),
            transition: None,
        },
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
