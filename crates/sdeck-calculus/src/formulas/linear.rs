//! The formulas of a linear (or polynomial) one-state equation: the solution through
//! its fundamental solution, and the moment equations.

use super::{reverting_mean, stationary_law, sum, Marks, Writer};
use crate::algebra::{show_poly, Poly};
use crate::shape::{correlation, noise_name, OneState};
use crate::{Family, Formulas};
use sdeck_semantics::ShockId;

pub(super) fn linear_formulas(
    w: &Writer,
    os: &OneState,
    family: Family,
    terms: &[(ShockId, Poly, Poly)],
) -> Formulas {
    let Marks {
        s, x_t, x_s, x0, ..
    } = w.marks();
    let multiplicative = terms.iter().any(|(_, _, d)| !d.is_zero());
    let solution = match family {
        Family::Linear if !multiplicative => Some(additive_solution(w, os, terms)),
        Family::Linear => Some(multiplicative_solution(w, os, terms)),
        _ => None,
    };
    let (m, v) = (w.sym.m.as_str(), w.sym.v.as_str());
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
            growth(w, os, &w.sym.s_sub)
        )),
        stationary,
        transition: None,
    }
}

/// e^(∫ from ᵗ b), written out when b is constant; `from` is the lower end's subscript
/// (`₀`, or that of the integration variable).
fn growth(w: &Writer, os: &OneState, from: &str) -> String {
    let (s, u) = (w.sym.s.as_str(), w.sym.u.as_str());
    if os.b.depends_on_time() {
        let slope = show_poly(&os.b, &w.names.with_time(u));
        format!("e^(∫{from}ᵗ ({slope}) d{u})")
    } else if from == "₀" {
        w.exp(&os.b, "t")
    } else {
        w.exp(&os.b, &format!("(t − {s})"))
    }
}

/// The solution when the noise is free of the state: growth of the start, plus the
/// drift and each shock integrated against the growth.
fn additive_solution(w: &Writer, os: &OneState, terms: &[(ShockId, Poly, Poly)]) -> String {
    let (s, s_sub) = (w.sym.s.as_str(), w.sym.s_sub.as_str());
    let (x_t, x0) = (w.at("t"), w.start());
    let noise: Vec<String> = terms
        .iter()
        .filter(|(_, c, _)| !c.is_zero())
        .map(|(k, c, _)| {
            format!(
                "∫₀ᵗ {}·{} d{}({s})",
                growth(w, os, s_sub),
                w.factor_at_s(c),
                noise_name(w.model, *k)
            )
        })
        .collect();
    let mut parts = vec![format!("{}·{x0}", growth(w, os, "₀"))];
    if !os.a.is_zero() {
        parts.push(format!(
            "∫₀ᵗ {}·{} d{s}",
            growth(w, os, s_sub),
            w.factor_at_s(&os.a)
        ));
    }
    parts.extend(noise);
    format!("{x_t} = {}", sum(&parts))
}

/// The solution when the noise is proportional to the state, through the fundamental
/// solution Φ (Kloeden & Platen 1992, §4.2, eq. (2.4)).
fn multiplicative_solution(w: &Writer, os: &OneState, terms: &[(ShockId, Poly, Poly)]) -> String {
    let s = w.sym.s.as_str();
    let (x_t, x0) = (w.at("t"), w.start());
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
    format!(
        "{x_t} = Φ(t)·({x0} + ∫₀ᵗ Φ({s})⁻¹·({}) d{s}{additive}), Φ(t) = exp({})",
        w.show_at_s(&os.a.sub(&cross)),
        sum(&exponent)
    )
}
