//! The verdict of `--check`: each figure with a closed form agrees, disagrees, or cannot
//! be judged by this run (too few paths, or a bias as large as the standard error).

use super::render::format_number;
use super::SimulationResult;

/// A figure disagrees with its closed form when |z| exceeds this (`--check`).
pub const CHECK_THRESHOLD: f64 = 4.0;

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
