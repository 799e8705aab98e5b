//! The result of a simulation: per-state figures with standard errors, the comparison
//! with closed forms, the JSON and text renderings, and the `--check` verdict.

use crate::engine::PathSamples;
use crate::stats::{quantile_of_sorted, summarize, QuantileEstimate, QUANTILE_PROBABILITIES};
use serde_json::{json, Map, Value};
use std::fmt::Write as _;

/// A figure disagrees with its closed form when |z| exceeds this (`--check`).
pub const CHECK_THRESHOLD: f64 = 4.0;

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

/// One figure whose simulated value is too far from its closed form.
#[derive(Clone, Debug, PartialEq)]
pub struct Disagreement {
    pub state: String,
    /// "mean", "variance" or "P(x < q)".
    pub figure: String,
    /// Clock units.
    pub at: f64,
    pub simulated: f64,
    pub closed_form: f64,
    pub standard_error: f64,
    pub z: f64,
}

impl std::fmt::Display for Disagreement {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{} of `{}` at t = {}: simulated {} ± {} but the closed form gives {} (z = {:.2}, beyond ±{})",
            self.figure,
            self.state,
            format_number(self.at),
            format_number(self.simulated),
            format_number(self.standard_error),
            format_number(self.closed_form),
            self.z,
            CHECK_THRESHOLD
        )
    }
}

/// A figure the run cannot judge: too few paths, or a discretisation bias as large as the
/// standard error while the difference is large.
#[derive(Clone, Debug, PartialEq)]
pub struct Undecided {
    pub state: String,
    pub figure: String,
    pub at: f64,
    pub reason: String,
    /// Steps that would bring the bias estimate to half the standard error.
    pub steps_needed: Option<usize>,
}

impl std::fmt::Display for Undecided {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{} of `{}` at t = {}: this run cannot decide: {}",
            self.figure,
            self.state,
            format_number(self.at),
            self.reason
        )?;
        if let Some(steps) = self.steps_needed {
            write!(f, "; run again with --steps {steps} or more")?;
        }
        Ok(())
    }
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
                .map(|(i, values)| {
                    let summary = summarize(values);
                    let name = samples.state_names.get(i).cloned().unwrap_or_default();
                    let dropped_paths = values.len() - summary.count;
                    if dropped_paths > 0 {
                        warnings.push(format!(
                            "{dropped_paths} of {} paths of `{name}` at t = {} did not stay finite and are left out of its figures; \
                             try more steps",
                            values.len(),
                            format_number(*at)
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
                })
                .collect();
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
                        format_number(*at)
                    ));
                }
            }
            dates.push(DateResult {
                at: *at,
                states,
                discount,
            });
        }
        let states_count = samples.state_names.len();
        let bands = (!samples.band_times.is_empty()).then(|| Bands {
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
        });
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

/// One compared figure: the estimate compared (extrapolated where there is a bias
/// estimate), its closed form and standard error, the z-score, the bias estimate and the
/// standard error of the figure itself.
struct Figure {
    name: String,
    simulated: f64,
    closed_form: f64,
    standard_error: f64,
    z: f64,
    bias: Option<f64>,
    figure_se: f64,
    /// Weak order of the scheme: the bias falls as the step to this power.
    order: u32,
}

/// The verdict on every compared figure: disagreements and figures the run cannot judge.
/// A figure of a discretised scheme disagrees only when its extrapolated value is more
/// than [`CHECK_THRESHOLD`] standard errors from the closed form *and* the bias estimate
/// is below the standard error; a large difference with a large bias cannot be judged.
pub fn verdicts(result: &SimulationResult) -> (Vec<Disagreement>, Vec<Undecided>) {
    let mut disagreements = Vec::new();
    let mut undecided = Vec::new();
    for date in &result.dates {
        for state in &date.states {
            let Some(closed) = &state.closed_form else {
                continue;
            };
            let bias = state.bias.as_ref();
            let mut figures = vec![
                Figure {
                    name: "mean".into(),
                    simulated: bias.map_or(state.mean, |b| b.mean_extrapolated),
                    closed_form: closed.mean,
                    standard_error: bias.map_or(state.mean_se, |b| b.mean_extrapolated_se),
                    z: closed.z_mean,
                    bias: bias.map(|b| b.mean),
                    figure_se: state.mean_se,
                    order: 1,
                },
                Figure {
                    name: "variance".into(),
                    simulated: bias.map_or(state.variance, |b| b.variance_extrapolated),
                    closed_form: closed.variance,
                    standard_error: bias.map_or(state.variance_se, |b| b.variance_extrapolated_se),
                    z: closed.z_variance,
                    bias: bias.map(|b| b.variance),
                    figure_se: state.variance_se,
                    order: 1,
                },
            ];
            if let (Some(below), Some(p), Some(z)) = (&state.below, closed.below, closed.z_below) {
                figures.push(Figure {
                    name: format!("P({} < {})", state.name, format_number(below.threshold)),
                    simulated: below.bias.map_or(below.probability, |b| b.1),
                    closed_form: p,
                    standard_error: below.bias.map_or(below.standard_error, |b| b.2),
                    z,
                    bias: below.bias.map(|b| b.0),
                    figure_se: below.standard_error,
                    order: 1,
                });
            }
            for figure in figures {
                judge(
                    figure,
                    &state.name,
                    date.at,
                    result.steps,
                    &mut disagreements,
                    &mut undecided,
                );
            }
        }
        if let Some(discount) = &date.discount {
            if let (Some(price), Some(z)) = (discount.closed_form, discount.z) {
                let figure = Figure {
                    name: DISCOUNT_FIGURE.into(),
                    simulated: discount.bias.map_or(discount.price, |b| b.1),
                    closed_form: price,
                    standard_error: discount.bias.map_or(discount.standard_error, |b| b.2),
                    z,
                    bias: discount.bias.map(|b| b.0),
                    figure_se: discount.standard_error,
                    order: discount.order,
                };
                judge(
                    figure,
                    DISCOUNT_NAME,
                    date.at,
                    result.steps,
                    &mut disagreements,
                    &mut undecided,
                );
            }
        }
    }
    (disagreements, undecided)
}

/// What a verdict on the bond price calls the figure and its "state".
pub const DISCOUNT_FIGURE: &str = "bond price P(0, t)";
pub const DISCOUNT_NAME: &str = "discount";

/// The verdict on one figure: agreement (nothing), a disagreement, or undecided.
fn judge(
    figure: Figure,
    state: &str,
    at: f64,
    steps: usize,
    disagreements: &mut Vec<Disagreement>,
    undecided: &mut Vec<Undecided>,
) {
    let Figure {
        name: figure,
        simulated,
        closed_form,
        standard_error,
        z,
        bias,
        figure_se,
        order,
    } = figure;
    if z.is_nan() || standard_error.is_nan() {
        undecided.push(Undecided {
            state: state.to_string(),
            figure,
            at,
            reason: "its standard error needs at least 2 paths with finite values".to_string(),
            steps_needed: None,
        });
        return;
    }
    if z.abs() <= CHECK_THRESHOLD {
        return;
    }
    match bias {
        Some(bias) if bias.is_nan() || bias.abs() >= figure_se => {
            let ratio = 2.0 * bias.abs() / figure_se.max(f64::MIN_POSITIVE);
            let steps_needed = (steps as f64 * ratio.powf(1.0 / f64::from(order.max(1)))).ceil();
            undecided.push(Undecided {
                state: state.to_string(),
                figure,
                at,
                reason: format!(
                    "the difference from the closed form is {:.1} standard errors, but the discretisation bias \
                     of {} steps ({}) is not below the standard error ({})",
                    z.abs(),
                    steps,
                    format_number(bias),
                    format_number(figure_se)
                ),
                steps_needed: (steps_needed.is_finite() && steps_needed < 1e12)
                    .then(|| (steps_needed as usize).next_multiple_of(2)),
            });
        }
        _ => disagreements.push(Disagreement {
            state: state.to_string(),
            figure,
            at,
            simulated,
            closed_form,
            standard_error,
            z,
        }),
    }
}

/// The figures that disagree with their closed forms (empty: all agree or cannot be
/// judged; see [`verdicts`]). States without a closed form are not checked.
pub fn check(result: &SimulationResult) -> Vec<Disagreement> {
    verdicts(result).0
}

/// A JSON number, or null when not finite (JSON has no NaN).
fn number(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else {
        Value::Null
    }
}

/// The key of a probability in the JSON output: "0.01", "0.5", ...
fn probability_key(p: f64) -> String {
    format!("{p}")
}

/// The figures of one state as JSON.
fn state_json(state: &StateResult) -> Value {
    let mut quantiles = Map::new();
    let mut quantiles_se = Map::new();
    for q in &state.quantiles {
        quantiles.insert(probability_key(q.probability), number(q.value));
        quantiles_se.insert(probability_key(q.probability), number(q.standard_error));
    }
    let closed_form = match &state.closed_form {
        Some(c) => json!({
            "mean": number(c.mean),
            "variance": number(c.variance),
            "z_mean": number(c.z_mean),
            "z_variance": number(c.z_variance),
            "below": c.below.map_or(Value::Null, number),
            "z_below": c.z_below.map_or(Value::Null, number),
        }),
        None => Value::Null,
    };
    let bias = match &state.bias {
        Some(b) => json!({
            "mean": number(b.mean),
            "variance": number(b.variance),
            "mean_extrapolated": number(b.mean_extrapolated),
            "mean_extrapolated_se": number(b.mean_extrapolated_se),
            "variance_extrapolated": number(b.variance_extrapolated),
            "variance_extrapolated_se": number(b.variance_extrapolated_se),
        }),
        None => Value::Null,
    };
    let below = match &state.below {
        Some(b) => json!({
            "threshold": number(b.threshold),
            "probability": number(b.probability),
            "se": number(b.standard_error),
            "bias": b.bias.map_or(Value::Null, |x| number(x.0)),
            "extrapolated": b.bias.map_or(Value::Null, |x| number(x.1)),
            "extrapolated_se": b.bias.map_or(Value::Null, |x| number(x.2)),
        }),
        None => Value::Null,
    };
    json!({
        "name": state.name,
        "scheme": state.scheme,
        "mean": number(state.mean),
        "mean_se": number(state.mean_se),
        "variance": number(state.variance),
        "variance_se": number(state.variance_se),
        "quantiles": quantiles,
        "quantiles_se": quantiles_se,
        "bias": bias,
        "below": below,
        "closed_form": closed_form,
    })
}

/// The bond price of one date as JSON.
fn discount_json(discount: &DiscountEstimate) -> Value {
    json!({
        "price": number(discount.price),
        "se": number(discount.standard_error),
        "order": discount.order,
        "bias": discount.bias.map_or(Value::Null, |x| number(x.0)),
        "extrapolated": discount.bias.map_or(Value::Null, |x| number(x.1)),
        "extrapolated_se": discount.bias.map_or(Value::Null, |x| number(x.2)),
        "closed_form": discount.closed_form.map_or(Value::Null, number),
        "z": discount.z.map_or(Value::Null, number),
    })
}

/// The JSON report: `{"paths", "steps", "seed", "clock", "dates": [{"at", "factors":
/// [{"name", "scheme", "mean", "mean_se", "variance", "variance_se", "quantiles": {"0.01":
/// ..}, "quantiles_se": {..}, "bias": {..} | null, "below": {..} | null, "closed_form":
/// {..} | null}], "discount": {"price", "se", "order", "bias", "extrapolated",
/// "extrapolated_se", "closed_form", "z"} | null}], "notes": [..]}`. Numbers that are not
/// finite are null.
pub fn to_json(result: &SimulationResult) -> Value {
    let dates: Vec<Value> = result
        .dates
        .iter()
        .map(|date| {
            json!({
                "at": number(date.at),
                "factors": date.states.iter().map(state_json).collect::<Vec<_>>(),
                "discount": date.discount.as_ref().map_or(Value::Null, discount_json),
            })
        })
        .collect();
    json!({
        "paths": result.paths,
        "steps": result.steps,
        "seed": result.seed,
        "clock": result.clock_unit,
        "dates": dates,
        "notes": result.warnings,
    })
}

/// A number with 6 significant digits, plain or scientific as fits.
pub fn format_number(x: f64) -> String {
    if !x.is_finite() {
        return format!("{x}");
    }
    if x == 0.0 {
        return "0".to_string();
    }
    let magnitude = x.abs().log10().floor();
    if (-4.0..6.0).contains(&magnitude) {
        let decimals = (5.0 - magnitude).max(0.0) as usize;
        let text = format!("{x:.decimals$}");
        if text.contains('.') {
            text.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            text
        }
    } else {
        format!("{x:.5e}")
    }
}

/// A number for the text report: "n/a" when not finite.
fn shown(x: f64) -> String {
    if x.is_finite() {
        format_number(x)
    } else {
        "n/a".to_string()
    }
}

/// The text report: per date, one block per state with figures, standard errors, the
/// bias estimate and the closed forms.
pub fn render_text(result: &SimulationResult) -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "simulated {} paths, {} steps to t = {} {}, seed {}",
        result.paths,
        result.steps,
        format_number(result.at),
        result.clock_unit,
        result.seed
    );
    let several = result.dates.len() > 1;
    for date in &result.dates {
        if several {
            let _ = writeln!(out);
            let _ = writeln!(out, "t = {} {}", format_number(date.at), result.clock_unit);
        }
        for state in &date.states {
            let _ = writeln!(out);
            let _ = writeln!(out, "{}  ({})", state.name, state.scheme);
            let line = |out: &mut String, label: &str, value: f64, se: f64| {
                let _ = writeln!(out, "  {:<10} {:>14} ± {}", label, shown(value), shown(se));
            };
            line(&mut out, "mean", state.mean, state.mean_se);
            line(&mut out, "variance", state.variance, state.variance_se);
            for q in &state.quantiles {
                line(
                    &mut out,
                    &format!("q({})", q.probability),
                    q.value,
                    q.standard_error,
                );
            }
            if let Some(below) = &state.below {
                line(
                    &mut out,
                    &format!("P(< {})", format_number(below.threshold)),
                    below.probability,
                    below.standard_error,
                );
                if let Some((bias, extrapolated, se)) = below.bias {
                    let _ = writeln!(
                        out,
                        "  {:<10} bias {}, extrapolated {} ± {}",
                        "",
                        shown(bias),
                        shown(extrapolated),
                        shown(se)
                    );
                }
            }
            if let Some(bias) = &state.bias {
                let _ = writeln!(
                    out,
                    "  step doubling: bias of the mean {}, of the variance {}; extrapolated mean {} ± {}, variance {} ± {}",
                    shown(bias.mean),
                    shown(bias.variance),
                    shown(bias.mean_extrapolated),
                    shown(bias.mean_extrapolated_se),
                    shown(bias.variance_extrapolated),
                    shown(bias.variance_extrapolated_se)
                );
            }
            if let Some(closed) = &state.closed_form {
                let _ = write!(
                    out,
                    "  closed form: mean {} (z = {}), variance {} (z = {})",
                    shown(closed.mean),
                    shown_z(closed.z_mean),
                    shown(closed.variance),
                    shown_z(closed.z_variance)
                );
                if let (Some(p), Some(z)) = (closed.below, closed.z_below) {
                    let _ = write!(out, ", P {} (z = {})", shown(p), shown_z(z));
                }
                let _ = writeln!(out);
            }
        }
        if let Some(discount) = &date.discount {
            render_discount(&mut out, discount);
        }
    }
    for warning in &result.warnings {
        let _ = writeln!(out);
        let _ = write!(out, "note: {warning}");
    }
    if !result.warnings.is_empty() {
        let _ = writeln!(out);
    }
    out
}

/// The text block of the bond price at one date.
fn render_discount(out: &mut String, discount: &DiscountEstimate) {
    let _ = writeln!(out);
    let _ = writeln!(
        out,
        "{DISCOUNT_NAME}  (E[exp(-integral of r dt)], the integral by the trapezoid rule on the step grid, weak order {})",
        discount.order
    );
    let _ = writeln!(
        out,
        "  {:<10} {:>14} ± {}",
        "P(0, t)",
        shown(discount.price),
        shown(discount.standard_error)
    );
    if let Some((bias, extrapolated, se)) = discount.bias {
        let _ = writeln!(
            out,
            "  step doubling: bias {}; extrapolated {} ± {}",
            shown(bias),
            shown(extrapolated),
            shown(se)
        );
    }
    if let (Some(price), Some(z)) = (discount.closed_form, discount.z) {
        let _ = writeln!(
            out,
            "  curve: P(0, t) {} (z = {})",
            shown(price),
            shown_z(z)
        );
    }
}

fn shown_z(z: f64) -> String {
    if z.is_finite() {
        format!("{z:.2}")
    } else if z.is_nan() {
        "n/a".to_string()
    } else if z > 0.0 {
        "+inf".to_string()
    } else {
        "-inf".to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_print_with_six_significant_digits() {
        assert_eq!(format_number(0.0321234567), "0.0321235");
        assert_eq!(format_number(1234.5), "1234.5");
        assert_eq!(format_number(1.0), "1");
        assert_eq!(format_number(2.5e-7), "2.50000e-7");
        assert_eq!(format_number(0.0), "0");
        assert_eq!(format_number(f64::NAN), "NaN");
    }

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
