//! The result of a simulation: per-state figures with standard errors, the comparison
//! with closed forms, the JSON and text renderings, and the `--check` verdict.

//!
//! Layout: this module holds the figures and builds them from the samples; [`verdict`]
//! judges them against the closed forms; [`render`] writes JSON and text.

mod render;
mod verdict;

pub use render::{format_number, render_text, to_json};
pub use verdict::{
    check, verdicts, Disagreement, Undecided, CHECK_THRESHOLD, DISCOUNT_FIGURE, DISCOUNT_NAME,
};

use crate::engine::PathSamples;
use crate::stats::{quantile_of_sorted, summarize, QuantileEstimate, QUANTILE_PROBABILITIES};

/// Closed-form figures of one state at one date, where known.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct ClosedFigures {
    pub mean: Option<f64>,
    pub variance: Option<f64>,
    /// P(X < threshold) from the closed-form law.
    pub below: Option<f64>,
}

/// Simulated figures against closed-form ones. The z-scores use the extrapolated figures
/// and their standard errors when the scheme is discretised and step doubling ran.
#[derive(Clone, Debug, PartialEq)]
pub struct ClosedFormComparison {
    pub mean: f64,
    pub variance: f64,
    /// (simulated − closed form) / standard error.
    pub z_mean: f64,
    pub z_variance: f64,
    pub below: Option<f64>,
    pub z_below: Option<f64>,
}

/// The discretisation bias of a discretised scheme, estimated by step doubling: the same
/// paths on the grid of every other step give F(Δ) and F(2Δ); for a scheme of weak order
/// one F(Δ) ≈ F + cΔ, so the bias of F(Δ) is F(2Δ) − F(Δ), and 2F(Δ) − F(2Δ) removes it (Richardson
/// extrapolation; Kloeden & Platen 1992, Numerical Solution of Stochastic Differential
/// Equations, §15.3; Talay & Tubaro 1990, Stochastic Analysis and Applications 8(4)).
#[derive(Clone, Debug, PartialEq)]
pub struct BiasEstimate {
    pub mean: f64,
    pub variance: f64,
    pub mean_extrapolated: f64,
    pub mean_extrapolated_se: f64,
    pub variance_extrapolated: f64,
    pub variance_extrapolated_se: f64,
}

/// P(X < threshold) with its standard error √(p(1 − p)/N).
#[derive(Clone, Debug, PartialEq)]
pub struct BelowEstimate {
    pub threshold: f64,
    pub probability: f64,
    pub standard_error: f64,
    /// With step doubling on a discretised scheme: (bias, extrapolated, its se).
    pub bias: Option<(f64, f64, f64)>,
}

/// The zero-coupon bond price P(0, t) = E[exp(−∫₀ᵗ r ds)] of a `discount` line, estimated
/// along the paths (the integral by the trapezoid rule on the step grid).
#[derive(Clone, Debug, PartialEq)]
pub struct DiscountEstimate {
    pub price: f64,
    pub standard_error: f64,
    /// Weak order of the estimate in the step (2 over exact factors, 1 over discretised
    /// ones); Richardson extrapolation uses it.
    pub order: u32,
    /// With step doubling: (bias, extrapolated, its se).
    pub bias: Option<(f64, f64, f64)>,
    /// The curve's price at the same maturity, where the calculus gives it.
    pub closed_form: Option<f64>,
    pub z: Option<f64>,
}

/// The figures of one state at one reporting date.
#[derive(Clone, Debug, PartialEq)]
pub struct StateResult {
    pub name: String,
    /// The scheme, in words ("exact (noncentral chi-square)", "Euler–Maruyama").
    pub scheme: String,
    pub mean: f64,
    pub mean_se: f64,
    pub variance: f64,
    pub variance_se: f64,
    /// At [`QUANTILE_PROBABILITIES`].
    pub quantiles: Vec<QuantileEstimate>,
    /// Paths whose value was not a finite number (left out of the figures).
    pub dropped_paths: usize,
    /// Discretised schemes with step doubling only.
    pub bias: Option<BiasEstimate>,
    pub below: Option<BelowEstimate>,
    pub closed_form: Option<ClosedFormComparison>,
}

/// Every state's figures at one date.
#[derive(Clone, Debug, PartialEq)]
pub struct DateResult {
    /// Clock units.
    pub at: f64,
    pub states: Vec<StateResult>,
    /// With a `discount` line: the bond price maturing at this date.
    pub discount: Option<DiscountEstimate>,
}

/// Quantile bands of each state over the time grid, for a fan chart.
#[derive(Clone, Debug, PartialEq)]
pub struct Bands {
    pub times: Vec<f64>,
    /// `quantiles[state][time]` at [`QUANTILE_PROBABILITIES`].
    pub quantiles: Vec<Vec<[f64; 5]>>,
    /// Number of paths the bands are taken from.
    pub paths: usize,
}

/// Everything `sdeck simulate` reports.
#[derive(Clone, Debug, PartialEq)]
pub struct SimulationResult {
    /// The last reporting date, clock units.
    pub at: f64,
    /// The model's clock unit.
    pub clock_unit: String,
    pub paths: usize,
    pub steps: usize,
    pub seed: u64,
    /// One entry per reporting date, ascending.
    pub dates: Vec<DateResult>,
    /// The figures at the last date (the same as `dates.last()`).
    pub states: Vec<StateResult>,
    pub bands: Option<Bands>,
    pub warnings: Vec<String>,
}

/// The (fine, coarse) values of the paths where both are finite.
fn finite_pairs(fine: &[f64], coarse: &[f64]) -> Vec<(f64, f64)> {
    fine.iter()
        .zip(coarse)
        .filter(|(f, c)| f.is_finite() && c.is_finite())
        .map(|(f, c)| (*f, *c))
        .collect()
}

/// Paired figures of a fine and a coarse sample (same paths).
fn bias_estimate(fine: &[f64], coarse: &[f64]) -> BiasEstimate {
    let pairs = finite_pairs(fine, coarse);
    let n = pairs.len() as f64;
    let mean = |values: &mut dyn Iterator<Item = f64>| values.sum::<f64>() / n;
    let mf = mean(&mut pairs.iter().map(|p| p.0));
    let mc = mean(&mut pairs.iter().map(|p| p.1));
    let unbiased = n / (n - 1.0);
    let vf = mean(&mut pairs.iter().map(|p| (p.0 - mf).powi(2))) * unbiased;
    let vc = mean(&mut pairs.iter().map(|p| (p.1 - mc).powi(2))) * unbiased;
    let me = 2.0 * mf - mc;
    let ve = 2.0 * vf - vc;
    // Standard errors from the per-path values of the extrapolated figures (for the
    // variance, its influence function (x − m)² − v; Serfling 1980, §6.3).
    let se_of = |values: &mut dyn Iterator<Item = f64>, centre: f64| -> f64 {
        let sum = values.map(|x| (x - centre).powi(2)).sum::<f64>();
        (sum / (n - 1.0) / n).sqrt()
    };
    let mean_se = se_of(&mut pairs.iter().map(|p| 2.0 * p.0 - p.1), me);
    let variance_se = se_of(
        &mut pairs
            .iter()
            .map(|p| 2.0 * ((p.0 - mf).powi(2) - vf) - ((p.1 - mc).powi(2) - vc)),
        0.0,
    );
    BiasEstimate {
        mean: mc - mf,
        variance: vc - vf,
        mean_extrapolated: me,
        mean_extrapolated_se: mean_se,
        variance_extrapolated: ve,
        variance_extrapolated_se: variance_se,
    }
}

/// Richardson extrapolation of a mean over paired fine and coarse values (the same paths
/// at steps Δ and 2Δ) for a scheme of weak order `order`: F(Δ) ≈ F + cΔᵖ, so the bias of
/// F(Δ) is (F(2Δ) − F(Δ))/(2ᵖ − 1) and F(Δ) + (F(Δ) − F(2Δ))/(2ᵖ − 1) removes it.
/// Returns (bias, extrapolated, standard error of the extrapolated mean from its per-path
/// values).
fn richardson(pairs: &[(f64, f64)], order: u32) -> (f64, f64, f64) {
    let m = pairs.len() as f64;
    let weight = 1.0 / (2f64.powi(order as i32) - 1.0);
    let fine = pairs.iter().map(|p| p.0).sum::<f64>() / m;
    let coarse = pairs.iter().map(|p| p.1).sum::<f64>() / m;
    let per_path = |p: &(f64, f64)| p.0 + weight * (p.0 - p.1);
    let extrapolated = pairs.iter().map(per_path).sum::<f64>() / m;
    let spread = pairs
        .iter()
        .map(|p| (per_path(p) - extrapolated).powi(2))
        .sum::<f64>();
    (
        weight * (coarse - fine),
        extrapolated,
        (spread / (m - 1.0) / m).sqrt(),
    )
}

/// The bond price of every path at one date, with its bias by step doubling.
fn discount_estimate(fine: &[f64], coarse: Option<&[f64]>, order: u32) -> DiscountEstimate {
    let summary = summarize(fine);
    let bias = coarse
        .filter(|_| summary.count > 1)
        .map(|coarse| richardson(&finite_pairs(fine, coarse), order));
    DiscountEstimate {
        price: summary.mean,
        standard_error: summary.mean_se,
        order,
        bias,
        closed_form: None,
        z: None,
    }
}

fn below_estimate(fine: &[f64], coarse: Option<&[f64]>, threshold: f64) -> BelowEstimate {
    let finite: Vec<f64> = fine.iter().copied().filter(|x| x.is_finite()).collect();
    let n = finite.len() as f64;
    let p = finite.iter().filter(|x| **x < threshold).count() as f64 / n;
    let standard_error = if n > 1.0 {
        (p * (1.0 - p) / n).sqrt()
    } else {
        f64::NAN
    };
    let bias = coarse.map(|coarse| {
        let pairs: Vec<(f64, f64)> = fine
            .iter()
            .zip(coarse)
            .filter(|(f, c)| f.is_finite() && c.is_finite())
            .map(|(f, c)| {
                (
                    f64::from(u8::from(*f < threshold)),
                    f64::from(u8::from(*c < threshold)),
                )
            })
            .collect();
        richardson(&pairs, 1)
    });
    BelowEstimate {
        threshold,
        probability: p,
        standard_error,
        bias,
    }
}

impl SimulationResult {
    /// Summarises raw samples.
    pub fn from_samples(samples: &PathSamples) -> SimulationResult {
        SimulationResult::from_samples_below(samples, &[])
    }

    /// Summarises raw samples, with P(X < threshold) for the states given a threshold
    /// (`thresholds[state]`, declaration order; shorter slices leave the rest out).
    pub fn from_samples_below(
        samples: &PathSamples,
        thresholds: &[Option<f64>],
    ) -> SimulationResult {
        let mut warnings = samples.warnings.clone();
        if samples.paths < 2 {
            warnings.push(
                "standard errors need at least 2 paths: they are left out (null in JSON), and --check cannot decide"
                    .to_string(),
            );
        }
        let mut dates = Vec::with_capacity(samples.dates.len());
        for (d, at) in samples.dates.iter().enumerate() {
            let per_state = samples.values.get(d).map_or(&[][..], Vec::as_slice);
            let states: Vec<StateResult> = per_state
                .iter()
                .enumerate()
                .map(|(i, values)| state_result(samples, d, i, values, thresholds, &mut warnings))
                .collect();
            dates.push(DateResult {
                at: *at,
                states,
                discount: date_discount(samples, d, &mut warnings),
            });
        }
        let bands = bands_of(samples);
        SimulationResult {
            at: samples.at,
            clock_unit: samples.clock_unit.clone(),
            paths: samples.paths,
            steps: samples.steps,
            seed: samples.seed,
            states: dates.last().map(|d| d.states.clone()).unwrap_or_default(),
            dates,
            bands,
            warnings,
        }
    }

    /// Attaches closed-form `(mean, variance)` per state at the last date (declaration
    /// order; `None` where unknown) and computes the z-scores.
    pub fn attach_closed_forms(&mut self, closed_forms: &[Option<(f64, f64)>]) {
        let figures: Vec<ClosedFigures> = closed_forms
            .iter()
            .map(|c| ClosedFigures {
                mean: c.map(|c| c.0),
                variance: c.map(|c| c.1),
                below: None,
            })
            .collect();
        let last = self.dates.len().saturating_sub(1);
        self.attach_closed_figures(last, &figures);
    }

    /// Attaches the closed-form figures of date `date` (index into `dates`).
    pub fn attach_closed_figures(&mut self, date: usize, figures: &[ClosedFigures]) {
        let paths = (self.paths as f64).max(1.0);
        let Some(entry) = self.dates.get_mut(date) else {
            return;
        };
        for (state, closed) in entry.states.iter_mut().zip(figures) {
            let (Some(mean), Some(variance)) = (closed.mean, closed.variance) else {
                state.closed_form = None;
                continue;
            };
            let (m, m_se, v, v_se) = match &state.bias {
                Some(b) => (
                    b.mean_extrapolated,
                    b.mean_extrapolated_se,
                    b.variance_extrapolated,
                    b.variance_extrapolated_se,
                ),
                None => (state.mean, state.mean_se, state.variance, state.variance_se),
            };
            let z_below = match (&state.below, closed.below) {
                (Some(below), Some(p)) => {
                    // The standard error under the closed form guards against a sample
                    // that happens to have no path below a small probability.
                    let null_se = (p * (1.0 - p) / paths).sqrt();
                    let (estimate, se) = match below.bias {
                        Some((_, extrapolated, se)) => (extrapolated, se),
                        None => (below.probability, below.standard_error),
                    };
                    Some(z_score(estimate, p, se.max(null_se), rounding(estimate, p)))
                }
                _ => None,
            };
            state.closed_form = Some(ClosedFormComparison {
                mean,
                variance,
                z_mean: z_score(m, mean, m_se, rounding(m, mean)),
                z_variance: z_score(
                    v,
                    variance,
                    v_se,
                    rounding(v, variance) + rounding(m, mean).powi(2),
                ),
                below: closed.below.filter(|_| state.below.is_some()),
                z_below,
            });
        }
        if date + 1 == self.dates.len() {
            self.states = self.dates[date].states.clone();
        }
    }
}

impl SimulationResult {
    /// Attaches the curve's bond price maturing at date `date` (index into `dates`) and
    /// computes the z-score of the simulated price (extrapolated where the step doubling
    /// estimated the bias).
    pub fn attach_closed_price(&mut self, date: usize, price: Option<f64>) {
        let Some(estimate) = self.dates.get_mut(date).and_then(|d| d.discount.as_mut()) else {
            return;
        };
        estimate.closed_form = price;
        estimate.z = price.map(|p| {
            let (simulated, se) = match estimate.bias {
                Some((_, extrapolated, se)) => (extrapolated, se),
                None => (estimate.price, estimate.standard_error),
            };
            z_score(simulated, p, se, rounding(simulated, p))
        });
    }
}

/// The relative rounding allowed between a simulated figure and its closed form: a path
/// of many steps and a closed form compute the same number by different roundings (a
/// state without volatility has a standard error of zero, or of rounding noise).
const ROUNDING: f64 = 1e-9;

/// The rounding allowed for a figure of the size of `a` and `b`.
fn rounding(a: f64, b: f64) -> f64 {
    ROUNDING * a.abs().max(b.abs())
}

/// (simulated − expected) / se, with the rounding allowance added to the standard error
/// in quadrature; 0 when both agree exactly (a deterministic state), NaN when the
/// standard error is undefined (too few paths).
fn z_score(simulated: f64, expected: f64, standard_error: f64, rounding: f64) -> f64 {
    if standard_error.is_nan() {
        return f64::NAN;
    }
    let difference = simulated - expected;
    let allowed = standard_error.hypot(if rounding.is_finite() { rounding } else { 0.0 });
    if allowed > 0.0 {
        difference / allowed
    } else if difference == 0.0 {
        0.0
    } else {
        f64::INFINITY.copysign(difference)
    }
}

/// The figures of state `i` at date `d` (`values`: its samples there), with a warning for
/// paths that did not stay finite.
fn state_result(
    samples: &PathSamples,
    d: usize,
    i: usize,
    values: &[f64],
    thresholds: &[Option<f64>],
    warnings: &mut Vec<String>,
) -> StateResult {
    let summary = summarize(values);
    let name = samples.state_names.get(i).cloned().unwrap_or_default();
    let dropped_paths = values.len() - summary.count;
    if dropped_paths > 0 {
        warnings.push(format!(
            "{dropped_paths} of {} paths of `{name}` at t = {} did not stay finite and are left out of its figures; \
             try more steps",
            values.len(),
            format_number(samples.dates[d])
        ));
    }
    let coarse = samples
        .coarse
        .as_ref()
        .filter(|_| samples.discretised.get(i).copied().unwrap_or(false))
        .and_then(|c| c.get(d))
        .and_then(|c| c.get(i))
        .map(Vec::as_slice);
    StateResult {
        name,
        scheme: samples.schemes.get(i).cloned().unwrap_or_default(),
        mean: summary.mean,
        mean_se: summary.mean_se,
        variance: summary.variance,
        variance_se: summary.variance_se,
        quantiles: summary.quantiles,
        dropped_paths,
        bias: coarse
            .filter(|_| summary.count > 1)
            .map(|c| bias_estimate(values, c)),
        below: thresholds
            .get(i)
            .copied()
            .flatten()
            .filter(|_| summary.count > 0)
            .map(|q| below_estimate(values, coarse, q)),
        closed_form: None,
    }
}

/// The bond price at date `d`, with a warning if a discount factor did not stay finite.
fn date_discount(
    samples: &PathSamples,
    d: usize,
    warnings: &mut Vec<String>,
) -> Option<DiscountEstimate> {
    let discount = samples.discount.as_ref().and_then(|discount| {
        let fine = discount.values.get(d)?;
        let coarse = discount
            .coarse
            .as_ref()
            .and_then(|c| c.get(d))
            .map(Vec::as_slice);
        Some(discount_estimate(fine, coarse, discount.order))
    });
    if let Some(estimate) = &discount {
        if !estimate.price.is_finite() && samples.paths > 0 {
            warnings.push(format!(
                "the discount factor at t = {} did not stay finite on every path; try more steps",
                format_number(samples.dates[d])
            ));
        }
    }
    discount
}

/// The quantile bands of every state on the band grid, if one was recorded.
fn bands_of(samples: &PathSamples) -> Option<Bands> {
    let states_count = samples.state_names.len();
    (!samples.band_times.is_empty()).then(|| Bands {
        times: samples.band_times.clone(),
        quantiles: (0..states_count)
            .map(|i| {
                samples
                    .band_values
                    .iter()
                    .map(|per_state| {
                        let mut sorted: Vec<f64> = per_state
                            .get(i)
                            .map(|v| v.iter().copied().filter(|x| x.is_finite()).collect())
                            .unwrap_or_default();
                        sorted.sort_by(f64::total_cmp);
                        QUANTILE_PROBABILITIES.map(|p| quantile_of_sorted(&sorted, p))
                    })
                    .collect()
            })
            .collect(),
        paths: samples
            .band_values
            .first()
            .and_then(|s| s.first())
            .map_or(0, Vec::len),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn z_scores_handle_deterministic_states() {
        assert_eq!(z_score(1.0, 1.0, 0.0, 0.0), 0.0);
        assert_eq!(z_score(1.5, 1.0, 0.0, 0.0), f64::INFINITY);
        assert_eq!(z_score(1.2, 1.0, 0.1, 0.0), 1.9999999999999996);
        // A standard error of rounding noise and a difference of rounding: agreement.
        let (simulated, expected) = (0.367_879_441_171_442_4, 0.367_879_441_171_442_3);
        let z = z_score(simulated, expected, 1e-18, rounding(simulated, expected));
        assert!(z.abs() < 1e-3, "{z}");
        // Undefined standard error: no z.
        assert!(z_score(1.0, 1.0, f64::NAN, 0.0).is_nan());
    }
}
