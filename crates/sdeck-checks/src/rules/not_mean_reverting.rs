//! `not-mean-reverting`: a drift that pushes a factor (or a coupled block) away from its
//! level.

use super::shared::{equation_span, state_name};
use super::Context;
use sdeck_calculus::Family;
use sdeck_diagnostics::{rules, Diagnostic};
use sdeck_units::number::significant_whole;

/// `not-mean-reverting`: a positive linear coefficient in a mean-reverting family, or an
/// eigenvalue of a coupled drift matrix with positive real part.
pub(super) fn run(cx: &Context, out: &mut Vec<Diagnostic>) {
    single_factors(cx, out);
    coupled_blocks(cx, out);
}

/// A factor of a mean-reverting family whose own drift coefficient is positive.
fn single_factors(cx: &Context, out: &mut Vec<Diagnostic>) {
    let (model, derivation) = (cx.model, cx.derivation);
    let clock = &model.clock.unit;
    for (index, law) in derivation.states.iter_ids() {
        let eligible = match law.family {
            Family::OrnsteinUhlenbeck => true,
            Family::Linear => law.linear.as_ref().is_some_and(|lc| lc.d.is_empty()),
            Family::SquareRoot => true,
            _ => false,
        };
        if !eligible {
            continue;
        }
        let b = match (&law.linear, &law.square_root) {
            (Some(lc), _) => lc.b,
            (None, Some(sr)) => -sr.speed,
            _ => continue,
        };
        let explosive = b > 0.0;
        if !explosive {
            continue;
        }
        let Some(span) = equation_span(model, index) else {
            continue;
        };
        let name = state_name(model, index);
        let slope = sdeck_calculus::describe::drift_slope_text(model, derivation, index)
            .unwrap_or_else(|| "b".to_string());
        let doubling = std::f64::consts::LN_2 / b;
        out.push(
            Diagnostic::new(
                &rules::NOT_MEAN_REVERTING,
                span,
                format!(
                    "the drift of {name} pushes away from its level: the coefficient of {name} \
                     is {slope} = +{} per {clock} (> 0), so deviations double every {} {clock}s \
                     (ln 2/{})",
                    significant_whole(b, 4),
                    significant_whole(doubling, 3),
                    significant_whole(b, 4)
                ),
            )
            .with_help(format!(
                "make the coefficient of {name} negative, e.g. write `kappa * (level - {name})` \
                 with kappa > 0"
            )),
        );
    }
}

/// Coupled states: an eigenvalue of a connected block's drift matrix with positive real
/// part.
fn coupled_blocks(cx: &Context, out: &mut Vec<Diagnostic>) {
    let (model, derivation) = (cx.model, cx.derivation);
    let clock = &model.clock.unit;
    for coupled in &derivation.blocks {
        let block = &coupled.states;
        // A factor carried by its logarithm, or a polynomial system, grows as its own
        // family says (`moment-explosion` speaks of it): only linear blocks are judged here.
        let nonlinear = block.iter().any(|&i| {
            derivation.states.by_id(i).is_some_and(|law| {
                matches!(law.family, Family::ExponentialAffine | Family::Polynomial)
            })
        });
        if nonlinear {
            continue;
        }
        let Some(eigen) = &coupled.drift_eigenvalues else {
            continue;
        };
        let Some(&(re, im)) = eigen
            .iter()
            .max_by(|x, y| x.0.partial_cmp(&y.0).unwrap_or(std::cmp::Ordering::Equal))
        else {
            continue;
        };
        let explosive = re > 0.0;
        if !explosive {
            continue;
        }
        let names: Vec<String> = block.iter().map(|i| state_name(model, *i)).collect();
        let Some(&first) = block.first() else {
            continue;
        };
        let Some(span) = equation_span(model, first) else {
            continue;
        };
        let eigen_text = if im != 0.0 {
            format!(
                "{} ± {}i",
                significant_whole(re, 4),
                significant_whole(im.abs(), 4)
            )
        } else {
            significant_whole(re, 4)
        };
        let mut diagnostic = Diagnostic::new(
            &rules::NOT_MEAN_REVERTING,
            span,
            format!(
                "the coupled drift of {} is explosive: its drift matrix has the eigenvalue {} \
                 per {clock} with positive real part, so deviations double every {} {clock}s \
                 (ln 2/{})",
                names.join(", "),
                eigen_text,
                significant_whole(std::f64::consts::LN_2 / re, 3),
                significant_whole(re, 4)
            ),
        )
        .with_help(
            "make every eigenvalue of the drift matrix negative: strengthen the reversion \
             (more negative own coefficients) or weaken the cross terms",
        );
        for other in block.iter().skip(1) {
            if let Some(span) = equation_span(model, *other) {
                diagnostic = diagnostic.with_related(span, "coupled equation");
            }
        }
        out.push(diagnostic);
    }
}
