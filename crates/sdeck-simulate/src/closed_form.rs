//! Closed-form figures from the calculus layer, shaped as the report and the fan chart
//! take them: means and variances, and P(X < q) where the law of X_t is known.

use crate::engine::{reporting_dates, SimulateError, SimulationOptions};
use crate::plan::plan;
use crate::report::{ClosedFigures, SimulationResult};
use sdeck_calculus::{moments_at, Derivation, Family};
use sdeck_semantics::{Expr, Model};
use statrs::distribution::{ChiSquared, ContinuousCDF, Normal};
use statrs::function::gamma::ln_gamma;

/// `(mean, variance)` of each state at `t` (clock units) where the calculus knows both,
/// declaration order.
pub fn closed_forms_at(model: &Model, derivation: &Derivation, t: f64) -> Vec<Option<(f64, f64)>> {
    let moments = moments_at(model, derivation, t);
    (0..model.factors.len())
        .map(|i| {
            let mean = moments.mean.get(i).copied().flatten()?;
            let variance = moments.variance.get(i).copied().flatten()?;
            Some((mean, variance))
        })
        .collect()
}

/// Closed-form means on a time grid, `[state][time]`, for the fan chart.
pub fn closed_form_means(
    model: &Model,
    derivation: &Derivation,
    times: &[f64],
) -> Vec<Vec<Option<f64>>> {
    let per_time: Vec<Vec<Option<f64>>> = times
        .iter()
        .map(|t| moments_at(model, derivation, *t).mean)
        .collect();
    (0..model.factors.len())
        .map(|i| {
            per_time
                .iter()
                .map(|means| means.get(i).copied().flatten())
                .collect()
        })
        .collect()
}

/// The law of X_t that P(X < q) is read from.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum KnownLaw {
    Normal {
        mean: f64,
        variance: f64,
    },
    /// sign · exp(N(mu, sigma²)).
    Lognormal {
        sign: f64,
        mu: f64,
        sigma2: f64,
    },
    /// scale · χ'²(dof, noncentrality).
    ScaledNoncentralChiSquare {
        scale: f64,
        dof: f64,
        noncentrality: f64,
    },
}

impl KnownLaw {
    /// P(X < q).
    pub fn below(&self, q: f64) -> Option<f64> {
        let standard = Normal::new(0.0, 1.0).ok()?;
        let p = match *self {
            KnownLaw::Normal { mean, variance } => {
                if variance > 0.0 {
                    standard.cdf((q - mean) / variance.sqrt())
                } else if q > mean {
                    1.0
                } else {
                    0.0
                }
            }
            KnownLaw::Lognormal { sign, mu, sigma2 } => {
                // X = sign·Y, Y lognormal: P(X < q) = P(Y < q) or P(Y > −q).
                let below_y = |y: f64| {
                    if y <= 0.0 {
                        0.0
                    } else if sigma2 > 0.0 {
                        standard.cdf((y.ln() - mu) / sigma2.sqrt())
                    } else if y.ln() > mu {
                        1.0
                    } else {
                        0.0
                    }
                };
                if sign > 0.0 {
                    below_y(q)
                } else {
                    1.0 - below_y(-q)
                }
            }
            KnownLaw::ScaledNoncentralChiSquare {
                scale,
                dof,
                noncentrality,
            } => noncentral_chi_square_cdf(q / scale, dof, noncentrality)?,
        };
        p.is_finite().then_some(p)
    }
}

/// P(χ'²(k, λ) ≤ x) as the Poisson mixture Σ_j e^{−λ/2}(λ/2)^j/j! · P(χ²_{k+2j} ≤ x)
/// (Johnson, Kotz & Balakrishnan 1995, Continuous Univariate Distributions vol. 2,
/// eq. (29.2)), summed over the Poisson weights within 12 standard deviations of λ/2.
pub fn noncentral_chi_square_cdf(x: f64, dof: f64, noncentrality: f64) -> Option<f64> {
    if !(x.is_finite() && dof >= 0.0 && noncentrality >= 0.0) {
        return None;
    }
    if x <= 0.0 {
        // χ'² is positive, except for the point mass at 0 when k = 0 (probability e^{−λ/2}):
        // P(X < q) for q ≤ 0 is 0 either way.
        return Some(0.0);
    }
    let half = 0.5 * noncentrality;
    let spread = 12.0 * half.sqrt() + 30.0;
    let first = (half - spread).max(0.0).floor() as u64;
    let last = (half + spread).ceil() as u64;
    let mut total = 0.0;
    for j in first..=last {
        let j_f = j as f64;
        let log_weight = if half > 0.0 {
            j_f * half.ln() - half - ln_gamma(j_f + 1.0)
        } else if j == 0 {
            0.0
        } else {
            break;
        };
        let k = dof + 2.0 * j_f;
        let cdf = if k == 0.0 {
            1.0
        } else {
            ChiSquared::new(k).ok()?.cdf(x)
        };
        total += log_weight.exp() * cdf;
    }
    Some(total.clamp(0.0, 1.0))
}

/// Whether an expression reads a state.
fn reads_state(expr: &Expr) -> bool {
    match expr {
        Expr::Factor(_) => true,
        Expr::Neg(a) => reads_state(a),
        Expr::Add(a, b) | Expr::Sub(a, b) | Expr::Mul(a, b) | Expr::Div(a, b) | Expr::Pow(a, b) => {
            reads_state(a) || reads_state(b)
        }
        Expr::Call(_, args) => args.iter().any(reads_state),
        Expr::Const(_) | Expr::Param(_) | Expr::Time | Expr::Invalid => false,
    }
}

/// The law of state `index` at time `t` when it is one of the known ones: Gaussian for a
/// linear state with additive noise whose inputs are all such states (deterministic start);
/// lognormal for geometric Brownian motion; scaled noncentral chi-square for a
/// square-root state (Cox, Ingersoll & Ross 1985, Econometrica 53(2), eq. (18)).
pub fn known_law(model: &Model, derivation: &Derivation, index: usize, t: f64) -> Option<KnownLaw> {
    let law = derivation.states.get(index)?;
    let moments = moments_at(model, derivation, t);
    let mean = moments.mean.get(index).copied().flatten()?;
    let variance = moments.variance.get(index).copied().flatten()?;
    if !moments.exact.get(index).copied().unwrap_or(false) {
        return None;
    }
    let additive = |i: usize| {
        model
            .factors
            .get(i)
            .and_then(|s| s.equation.as_ref())
            .is_some_and(|e| {
                e.diffusion
                    .iter()
                    .all(|term| !reads_state(&term.coefficient))
            })
    };
    let gaussian_family = |i: usize| {
        derivation.states.get(i).is_some_and(|l| {
            matches!(
                l.family,
                Family::ArithmeticBrownian
                    | Family::OrnsteinUhlenbeck
                    | Family::Linear
                    | Family::LinearSystem
            )
        }) && additive(i)
    };
    match law.family {
        Family::ArithmeticBrownian
        | Family::OrnsteinUhlenbeck
        | Family::Linear
        | Family::LinearSystem => {
            let inputs_gaussian =
                gaussian_family(index) && law.depends_on.iter().all(|j| gaussian_family(*j));
            inputs_gaussian.then_some(KnownLaw::Normal { mean, variance })
        }
        Family::GeometricBrownian if mean != 0.0 => {
            let sigma2 = (1.0 + variance / (mean * mean)).ln();
            Some(KnownLaw::Lognormal {
                sign: mean.signum(),
                mu: mean.abs().ln() - 0.5 * sigma2,
                sigma2,
            })
        }
        Family::SquareRoot => {
            let params = law.square_root.as_ref()?;
            let x0 = *model.initial_values().get(index)?;
            let (speed, level, vol) = (params.speed, params.level, params.vol.abs());
            if !(speed > 0.0 && vol > 0.0 && x0 >= 0.0) {
                return None;
            }
            let decay = (-speed * t).exp();
            let scale = vol * vol * (1.0 - decay) / (4.0 * speed);
            Some(KnownLaw::ScaledNoncentralChiSquare {
                scale,
                dof: 4.0 * speed * level / (vol * vol),
                noncentrality: x0 * decay / scale,
            })
        }
        _ => None,
    }
}

/// Closed-form figures of every state at `t`; `thresholds[state]` asks for P(X < q).
pub fn closed_figures_at(
    model: &Model,
    derivation: &Derivation,
    t: f64,
    thresholds: &[Option<f64>],
) -> Vec<ClosedFigures> {
    closed_forms_at(model, derivation, t)
        .into_iter()
        .enumerate()
        .map(|(i, moments)| ClosedFigures {
            mean: moments.map(|m| m.0),
            variance: moments.map(|m| m.1),
            below: thresholds
                .get(i)
                .copied()
                .flatten()
                .and_then(|q| known_law(model, derivation, i, t)?.below(q)),
        })
        .collect()
}

/// The whole `simulate` command in one call: plan from the classification, simulate,
/// attach the closed forms at the reporting time.
pub fn simulate_and_compare(
    model: &Model,
    derivation: &Derivation,
    options: &SimulationOptions,
) -> Result<SimulationResult, SimulateError> {
    simulate_and_compare_below(model, derivation, options, &[])
}

/// [`simulate_and_compare`] with P(X < q) for the states given a threshold, at every
/// reporting date.
pub fn simulate_and_compare_below(
    model: &Model,
    derivation: &Derivation,
    options: &SimulationOptions,
    thresholds: &[Option<f64>],
) -> Result<SimulationResult, SimulateError> {
    let plan = plan(model, derivation);
    let samples = crate::engine::simulate_paths(model, &plan, options)?;
    let mut result = SimulationResult::from_samples_below(&samples, thresholds);
    let dates = reporting_dates(model, options)?;
    for (index, t) in dates.iter().enumerate() {
        result.attach_closed_figures(index, &closed_figures_at(model, derivation, *t, thresholds));
    }
    Ok(result)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn noncentral_chi_square_cdf_matches_scipy() {
        // scipy.stats.ncx2.cdf(x, df, nc), scipy 1.17.1.
        let cases = [
            (2.0, 3.0, 1.5, 0.2610532021056975),
            (0.3, 0.4, 5.0, 0.07886278134254202),
            (40.0, 10.0, 25.0, 0.6997648848930589),
        ];
        for (x, k, lambda, expected) in cases {
            let p = noncentral_chi_square_cdf(x, k, lambda).unwrap();
            assert!(
                (p - expected).abs() < 1e-9,
                "ncx2.cdf({x}, {k}, {lambda}) = {p}, scipy {expected}"
            );
        }
        // No noncentrality: the central law.
        let central = ChiSquared::new(3.0).unwrap().cdf(2.0);
        assert!((noncentral_chi_square_cdf(2.0, 3.0, 0.0).unwrap() - central).abs() < 1e-15);
        assert_eq!(noncentral_chi_square_cdf(-1.0, 3.0, 2.0), Some(0.0));
    }
}
