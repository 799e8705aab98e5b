//! Gaussian transitions of a factor whose coefficients depend on t:
//! dX = (a(t) + b(t) X) dt + √α(t) dW, as with a level written with `step`, `ramp` or
//! another deterministic function of t.
//!
//! Over an observation interval [t₀, t₁] the transition is normal with mean G x + M and
//! variance V, where G = exp(∫ b), M = ∫ e^{∫ₛ b} a(s) ds and V = ∫ e^{2∫ₛ b} α(s) ds
//! (the integrating factor; Kloeden & Platen 1992, §4.2). They solve G′ = bG, M′ = a + bM,
//! V′ = α + 2bV from (1, 0, 0), integrated across the interval split at the breaks of the
//! coefficients (knots of `step` and `ramp`, kinks of `min`, `max`, `abs` of t), so that
//! each piece is smooth and a jump is read on its own side.

use sdeck_calculus::breaks::TimeBreaks;
use sdeck_calculus::coefficients::{OneStateForm, OneStateValues};
use sdeck_calculus::ode;

/// Relative tolerance of the integration across an interval: far below the statistical
/// error of any estimate, and a smooth likelihood for the finite-difference Hessian.
const TOLERANCE: f64 = 1e-12;

/// (G, M, V) over [t₀, t₁]; `None` when the integration fails or V is not positive.
pub(crate) fn transition(
    form: &OneStateForm,
    params: &[f64],
    breaks: &TimeBreaks,
    t0: f64,
    t1: f64,
) -> Option<(f64, f64, f64)> {
    // M and V start at 0, where a relative tolerance alone cannot be met: they are
    // integrated in units of their size over the interval (the coefficients at its ends
    // and middle times its length), with an absolute tolerance in those units.
    let span = (t1 - t0).abs();
    let size = |f: &dyn Fn(&OneStateValues) -> f64| {
        let largest = [t0, 0.5 * (t0 + t1), t1]
            .iter()
            .map(|&s| f(&form.at(params, s)).abs())
            .fold(0.0, f64::max);
        if largest > 0.0 && largest.is_finite() {
            largest * span
        } else {
            1.0
        }
    };
    let (mean_unit, variance_unit) = (size(&|c| c.a), size(&|c| c.alpha));
    let derivative = |s: f64, y: &[f64], dy: &mut [f64]| {
        let c = form.at(params, s);
        let at = |i: usize| y.get(i).copied().unwrap_or(f64::NAN);
        let rates = [
            c.b * at(0),
            c.a / mean_unit + c.b * at(1),
            c.alpha / variance_unit + 2.0 * c.b * at(2),
        ];
        for (slot, rate) in dy.iter_mut().zip(rates) {
            *slot = rate;
        }
    };
    let end = ode::integrate_pieces(
        derivative,
        &[1.0, 0.0, 0.0],
        &breaks.pieces(t0, t1),
        TOLERANCE,
        TOLERANCE,
    )
    .ok()?;
    let end = [
        end.first().copied()?,
        end.get(1).copied()? * mean_unit,
        end.get(2).copied()? * variance_unit,
    ];
    match end.as_slice() {
        [g, m, v] if g.is_finite() && m.is_finite() && *v > 0.0 && v.is_finite() => {
            Some((*g, *m, *v))
        }
        _ => None,
    }
}

/// Σ ln N(y; G x + M, V) over consecutive observed `(time, value, _)` points; NaN when a
/// transition has no law at these parameters.
pub(crate) fn ln_likelihood(
    form: &OneStateForm,
    params: &[f64],
    breaks: &TimeBreaks,
    points: &[(f64, f64, usize)],
) -> f64 {
    let mut total = 0.0;
    for pair in points.windows(2) {
        let ((t0, x, _), (t1, y, _)) = (pair[0], pair[1]);
        let Some((g, m, v)) = transition(form, params, breaks, t0, t1) else {
            return f64::NAN;
        };
        total += crate::law::ln_normal(y, g * x + m, v);
    }
    total
}

#[cfg(test)]
mod tests {
    use super::*;

    /// dr = κ(step(t, l₀, 1, l₁) − r) dt + σ dW across the knot at t = 1: composing the two
    /// Ornstein–Uhlenbeck transitions on either side (Vasicek 1977, eq. 25): over [s, u]
    /// with level l, G = e^{−κ(u−s)}, M = l(1 − G), V = σ²(1 − G²)/(2κ).
    #[test]
    fn a_step_in_the_level_composes_two_ornstein_uhlenbeck_transitions() {
        let text = "model m\nclock year\nparam kappa = 2 [1/year] > 0\nparam l0 = 2%\n\
                    param l1 = 5%\nparam vol = 1% [1/sqrt(year)] > 0\nshock W\n\
                    factor r = 2%\ndr = kappa * (step(t, l0, 1 [year], l1) - r) dt + vol dW\n";
        let analysis = sdeck_semantics::analyze(text, "m");
        assert!(!analysis.has_errors(), "{:?}", analysis.diagnostics);
        let model = &analysis.model;
        let form = sdeck_calculus::coefficients::one_state_form(model, 0).expect("one state");
        let params = model.param_values();
        let breaks = TimeBreaks::of_model(model, &params);
        let (t0, t1) = (0.9, 1.25);
        let (g, m, v) = transition(&form, &params, &breaks, t0, t1).expect("a transition");
        let (kappa, l0, l1, vol) = (2.0_f64, 0.02, 0.05, 0.01);
        let piece = |s: f64, u: f64, level: f64| {
            let g = (-kappa * (u - s)).exp();
            (
                g,
                level * (1.0 - g),
                vol * vol * (1.0 - g * g) / (2.0 * kappa),
            )
        };
        let (g0, m0, v0) = piece(t0, 1.0, l0);
        let (g1, m1, v1) = piece(1.0, t1, l1);
        let expected = (g0 * g1, g1 * m0 + m1, g1 * g1 * v0 + v1);
        assert!((g - expected.0).abs() < 1e-12, "{g} vs {}", expected.0);
        assert!(
            (m - expected.1).abs() < 1e-12 * expected.1,
            "{m} vs {}",
            expected.1
        );
        assert!(
            (v - expected.2).abs() < 1e-11 * expected.2,
            "{v} vs {}",
            expected.2
        );
    }
}
