//! The result of a simulation: per-state figures with standard errors, the comparison
//! with closed forms, the JSON and text renderings, and the `--check` verdict.

use crate::engine::PathSamples;
use crate::stats::{quantile_of_sorted, summarize, QuantileEstimate, QUANTILE_PROBABILITIES};
use serde_json::{json, Map, Value};
use std::fmt::Write as _;

/// A figure disagrees with its closed form when |z| exceeds this (`--check`).
pub const CHECK_THRESHOLD: f64 = 4.0;

/// Simulated figures against closed-form ones.
#[derive(Clone, Debug, PartialEq)]
pub struct ClosedFormComparison {
    pub mean: f64,
    pub variance: f64,
    /// (simulated − closed form) / standard error.
    pub z_mean: f64,
    pub z_variance: f64,
}

/// The figures of one state at the reporting time.
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
    pub closed_form: Option<ClosedFormComparison>,
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
    /// Clock units.
    pub at: f64,
    /// The model's clock unit.
    pub clock_unit: String,
    pub paths: usize,
    pub steps: usize,
    pub seed: u64,
    pub states: Vec<StateResult>,
    pub bands: Option<Bands>,
    pub warnings: Vec<String>,
}

/// One figure whose simulated value is too far from its closed form.
#[derive(Clone, Debug, PartialEq)]
pub struct Disagreement {
    pub state: String,
    /// "mean" or "variance".
    pub figure: &'static str,
    pub simulated: f64,
    pub closed_form: f64,
    pub standard_error: f64,
    pub z: f64,
}

impl std::fmt::Display for Disagreement {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        if self.z.is_nan() {
            return write!(
                f,
                "{} of `{}` cannot be compared with its closed form {}: the simulation gives \
                 {} with no standard error (too few paths)",
                self.figure,
                self.state,
                format_number(self.closed_form),
                format_number(self.simulated),
            );
        }
        write!(
            f,
            "{} of `{}`: simulated {} ± {} but the closed form gives {} (z = {:.2}, beyond ±{})",
            self.figure,
            self.state,
            format_number(self.simulated),
            format_number(self.standard_error),
            format_number(self.closed_form),
            self.z,
            CHECK_THRESHOLD
        )
    }
}

impl SimulationResult {
    /// Summarises raw samples.
    pub fn from_samples(samples: &PathSamples) -> SimulationResult {
        let mut warnings = samples.warnings.clone();
        let states: Vec<StateResult> = samples
            .finals
            .iter()
            .enumerate()
            .map(|(i, values)| {
                let summary = summarize(values);
                let name = samples.state_names.get(i).cloned().unwrap_or_default();
                let dropped_paths = values.len() - summary.count;
                if dropped_paths > 0 {
                    warnings.push(format!(
                        "{dropped_paths} of {} paths of `{name}` did not stay finite and are left out of its figures; \
                         try more steps",
                        values.len()
                    ));
                }
                StateResult {
                    name,
                    scheme: samples.schemes.get(i).cloned().unwrap_or_default(),
                    mean: summary.mean,
                    mean_se: summary.mean_se,
                    variance: summary.variance,
                    variance_se: summary.variance_se,
                    quantiles: summary.quantiles,
                    dropped_paths,
                    closed_form: None,
                }
            })
            .collect();
        let bands = (!samples.band_times.is_empty()).then(|| Bands {
            times: samples.band_times.clone(),
            quantiles: (0..states.len())
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
            states,
            bands,
            warnings,
        }
    }

    /// Attaches closed-form `(mean, variance)` per state (declaration order; `None` where
    /// unknown) and computes the z-scores.
    pub fn attach_closed_forms(&mut self, closed_forms: &[Option<(f64, f64)>]) {
        for (state, closed) in self.states.iter_mut().zip(closed_forms) {
            state.closed_form = closed.map(|(mean, variance)| ClosedFormComparison {
                mean,
                variance,
                z_mean: z_score(state.mean, mean, state.mean_se, rounding(state.mean, mean)),
                z_variance: z_score(
                    state.variance,
                    variance,
                    state.variance_se,
                    rounding(state.variance, variance) + rounding(state.mean, mean).powi(2),
                ),
            });
        }
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

/// The figures whose |z| exceeds [`CHECK_THRESHOLD`] (empty: all agree). States without a
/// closed form are not checked.
pub fn check(result: &SimulationResult) -> Vec<Disagreement> {
    let mut disagreements = Vec::new();
    for state in &result.states {
        let Some(closed) = &state.closed_form else {
            continue;
        };
        let figures = [
            (
                "mean",
                state.mean,
                closed.mean,
                state.mean_se,
                closed.z_mean,
            ),
            (
                "variance",
                state.variance,
                closed.variance,
                state.variance_se,
                closed.z_variance,
            ),
        ];
        for (figure, simulated, closed_form, standard_error, z) in figures {
            // A NaN z means the figure could not be compared: that is a disagreement too.
            if z.is_nan() || z.abs() > CHECK_THRESHOLD {
                disagreements.push(Disagreement {
                    state: state.name.clone(),
                    figure,
                    simulated,
                    closed_form,
                    standard_error,
                    z,
                });
            }
        }
    }
    disagreements
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

/// The JSON report:
/// `{"at", "paths", "steps", "seed", "factors": [{"name", "mean", "mean_se", "variance",
/// "variance_se", "quantiles": {"0.01": ..}, "quantiles_se": {..}, "closed_form": {..} | null}]}`.
pub fn to_json(result: &SimulationResult) -> Value {
    let states: Vec<Value> = result
        .states
        .iter()
        .map(|state| {
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
                }),
                None => Value::Null,
            };
            json!({
                "name": state.name,
                "mean": number(state.mean),
                "mean_se": number(state.mean_se),
                "variance": number(state.variance),
                "variance_se": number(state.variance_se),
                "quantiles": quantiles,
                "quantiles_se": quantiles_se,
                "closed_form": closed_form,
            })
        })
        .collect();
    json!({
        "at": number(result.at),
        "paths": result.paths,
        "steps": result.steps,
        "seed": result.seed,
        "factors": states,
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

/// The text report: one block per state with figures, standard errors and closed forms.
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
    for state in &result.states {
        let _ = writeln!(out);
        let _ = writeln!(out, "{}  ({})", state.name, state.scheme);
        let _ = writeln!(
            out,
            "  {:<10} {:>14} ± {}",
            "mean",
            format_number(state.mean),
            format_number(state.mean_se)
        );
        let _ = writeln!(
            out,
            "  {:<10} {:>14} ± {}",
            "variance",
            format_number(state.variance),
            format_number(state.variance_se)
        );
        for q in &state.quantiles {
            let label = format!("q({})", q.probability);
            let _ = writeln!(
                out,
                "  {:<10} {:>14} ± {}",
                label,
                format_number(q.value),
                format_number(q.standard_error)
            );
        }
        if let Some(closed) = &state.closed_form {
            let _ = writeln!(
                out,
                "  closed form: mean {} (z = {:.2}), variance {} (z = {:.2})",
                format_number(closed.mean),
                closed.z_mean,
                format_number(closed.variance),
                closed.z_variance
            );
        }
    }
    for warning in &result.warnings {
        let _ = writeln!(out);
        let _ = write!(out, "warning: {warning}");
    }
    if !result.warnings.is_empty() {
        let _ = writeln!(out);
    }
    out
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
