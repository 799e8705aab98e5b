//! The closed forms of the one-state families, one function each.

use super::linear::linear_formulas;
use super::{reverting_mean, stationary_law, sum, wrap_level, Marks, Writer};
use crate::algebra::Poly;
use crate::shape::{noise_name, OneState};
use crate::{Family, Formulas};
use sdeck_semantics::ShockId;

/// dX = a dt + Σ c dW: the start plus a drift line plus the Brownian motions.
pub(super) fn arithmetic_brownian(
    w: &Writer,
    os: &OneState,
    terms: &[(ShockId, Poly, Poly)],
) -> Formulas {
    let Marks {
        s,
        x_t,
        x_s,
        x0,
        elapsed,
    } = w.marks();
    let s = s.as_str();
    let drift = if os.a.is_zero() {
        String::new()
    } else {
        format!(" + {}", w.times(&os.a, "t"))
    };
    let noise = terms
        .iter()
        .filter(|(_, c, _)| !c.is_zero())
        .map(|(k, c, _)| w.times(c, &format!("{}(t)", noise_name(w.model, *k))))
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

/// No shock: the path of the ordinary differential equation, with variance 0.
pub(super) fn deterministic(
    w: &Writer,
    os: &OneState,
    family: Family,
    terms: &[(ShockId, Poly, Poly)],
) -> Formulas {
    let Marks {
        s, x_t, x_s, x0, ..
    } = w.marks();
    let s = s.as_str();
    let mut formulas = if os.time_dependent {
        linear_formulas(w, os, family, terms)
    } else {
        let path = if os.b.is_zero() {
            sum(&[x0.clone(), w.term(&os.a, "t")])
        } else {
            reverting_mean(w, os, &x0, "t")
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
        (!os.time_dependent && !os.b.is_zero()).then(|| stationary_law(w.model, os, family));
    formulas
}

/// dX = bX dt + Σ dX dW: the lognormal closed forms.
pub(super) fn geometric_brownian(
    w: &Writer,
    os: &OneState,
    terms: &[(ShockId, Poly, Poly)],
) -> Formulas {
    let Marks {
        s,
        x_t,
        x_s,
        x0,
        elapsed,
    } = w.marks();
    let s = s.as_str();
    let log_drift = os.b.sub(&os.gamma.scale(0.5));
    let noise = terms
        .iter()
        .filter(|(_, _, d)| !d.is_zero())
        .map(|(k, _, d)| w.times(d, &format!("{}(t)", noise_name(w.model, *k))))
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

/// dX = (a + bX) dt + sqrt(β X) dW: moments and the noncentral chi-square transition
/// (Cox, Ingersoll & Ross 1985).
pub(super) fn square_root(w: &Writer, os: &OneState, family: Family) -> Formulas {
    let Marks {
        s,
        x_t,
        x_s,
        x0,
        elapsed,
    } = w.marks();
    let s = s.as_str();
    let minus_b = os.b.neg();
    let beta = w.factor(&os.beta);
    let level = w.ratio(&os.a, &minus_b);
    Formulas {
        matrices: None,
        solution: None,
        mean: Some(format!("E[{x_t}] = {}", reverting_mean(w, os, &x0, "t"))),
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
        stationary: Some(stationary_law(w.model, os, family)),
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

/// The Gaussian closed forms of dX = (a + bX) dt + Σ c dW with constant coefficients and
/// b ≠ 0 (Vasicek 1977, eqs. 23–25, written with b = −κ so that they hold for either
/// sign); the stationary law is the caller's to add.
pub(super) fn gaussian_affine(
    w: &Writer,
    os: &OneState,
    terms: &[(ShockId, Poly, Poly)],
) -> Formulas {
    let Marks {
        s,
        x_t,
        x_s,
        x0,
        elapsed,
    } = w.marks();
    let s = s.as_str();
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
