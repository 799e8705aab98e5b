//! The formulas of a factor that is part of a coupled system.

use super::{Symbols, Writer};
use crate::shape::correlation_at;
use crate::{Analysis, Family, Formulas};
use sdeck_semantics::Model;

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
                model.factor_list()
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
