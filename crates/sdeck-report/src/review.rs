//! The review document of one model as data: the report on the horizon, the figures on a
//! time grid, the diagnostics located, and the Monte Carlo cross-check.

use crate::curve_chart::yield_curve_svg;
use crate::data::{figures_at, time_grid, Figures, ModelReport};
use sdeck_calculus::curve::{curve, Curve};
use sdeck_checks::FileCheck;
use sdeck_diagnostics::{RuleId, Severity};
use sdeck_simulate::{simulate_and_compare, SimulationOptions, SimulationResult};
use sdeck_syntax::{Encoding, LineIndex};

/// A diagnostic where a person finds it.
#[derive(Clone, Debug, PartialEq)]
pub struct Finding {
    /// 1-based.
    pub line: usize,
    /// 1-based, in characters.
    pub column: usize,
    pub severity: Severity,
    pub rule: &'static str,
    pub message: String,
    pub help: Option<String>,
}

/// The closed-form law on the simulation's band grid, per factor.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct ClosedBands {
    pub mean: Vec<Option<f64>>,
    pub low: Vec<Option<f64>>,
    pub median: Vec<Option<f64>>,
    pub high: Vec<Option<f64>>,
}

/// The Monte Carlo cross-check of the review.
#[derive(Clone, Debug, PartialEq)]
pub struct CrossCheck {
    pub result: SimulationResult,
    /// Per factor, on `result.bands.times`.
    pub closed: Vec<ClosedBands>,
}

/// Everything the review document shows of one model.
#[derive(Clone, Debug, PartialEq)]
pub struct Review {
    pub path: String,
    pub source: String,
    /// SHA-256 of the file's text, hex.
    pub hash: String,
    pub findings: Vec<Finding>,
    /// `None` when the model has errors: no figure is derived from it.
    pub report: Option<ModelReport>,
    /// The figures of every factor at [`time_grid`] of the horizon: `[time][factor]`.
    pub grid: Vec<Vec<Figures>>,
    pub cross_check: Option<CrossCheck>,
    /// Why there is no cross-check, when there is none.
    pub cross_check_note: Option<String>,
    /// The zero-coupon curve at [`sdeck_calculus::curve::DEFAULT_MATURITIES`] when the model has a
    /// `discount` line: the curve, or why it could not be derived.
    pub curve: Option<Result<CurveReview, String>>,
}

/// The yield curve of a model with a `discount` line, as the review shows it.
#[derive(Clone, Debug, PartialEq)]
pub struct CurveReview {
    pub curve: Curve,
    /// Years per clock unit, to state maturities in years.
    pub years_per_clock: f64,
    /// The chart of zero yields and forwards (inline SVG).
    pub svg: String,
}

/// How the review is made.
#[derive(Clone, Debug)]
pub struct ReviewOptions {
    /// Simulated paths; 0 skips the simulation.
    pub paths: usize,
    pub seed: u64,
    pub threads: Option<usize>,
}

impl Default for ReviewOptions {
    fn default() -> Self {
        ReviewOptions {
            paths: 20_000,
            seed: 1,
            threads: None,
        }
    }
}

/// SHA-256 of `text`, lower-case hex.
pub fn content_hash(text: &str) -> String {
    use sha2::{Digest, Sha256};
    Sha256::digest(text.as_bytes())
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// The closed-form mean, 5%, median and 95% of every factor at `times`.
pub fn closed_bands(
    model: &sdeck_semantics::Model,
    derivation: &sdeck_calculus::Derivation,
    times: &[f64],
) -> Vec<ClosedBands> {
    use sdeck_calculus::laws::{law_of, LawKind};
    // A law known only through its transform costs a numerical inversion per quantile:
    // its band is drawn through about a dozen times, which its smooth curve allows.
    let stride = times.len().div_ceil(10).max(1);
    let mut bands = vec![ClosedBands::default(); model.factors.len()];
    for (k, t) in times.iter().enumerate() {
        let moments = sdeck_calculus::moments_at(model, derivation, *t);
        let sparse = k % stride != 0 && k + 1 != times.len();
        for (i, band) in bands.iter_mut().enumerate() {
            let law = law_of(model, derivation, sdeck_semantics::FactorId::new(i), *t)
                .filter(|l| !(sparse && l.kind() == LawKind::Fourier));
            let q = |p: f64| law.as_ref().and_then(|l| l.quantile(p));
            band.mean.push(moments.mean.get(i).copied().flatten());
            band.low.push(q(0.05));
            band.median.push(q(0.5));
            band.high.push(q(0.95));
        }
    }
    bands
}

/// The diagnostics of a check, located.
pub fn findings(source: &str, check: &FileCheck) -> Vec<Finding> {
    let index = LineIndex::new(source);
    check
        .diagnostics
        .iter()
        .map(|d| {
            let at = index.line_col(source, d.span.start, Encoding::Chars);
            Finding {
                line: at.line as usize + 1,
                column: at.col as usize + 1,
                severity: d.severity,
                rule: d.rule.name(),
                message: d.message.clone(),
                help: d.help.as_deref().map(str::to_owned),
            }
        })
        .collect()
}

impl Review {
    /// Builds the review of the model in `source` (read from `path`), checked as `check`.
    pub fn build(path: &str, source: &str, check: &FileCheck, options: &ReviewOptions) -> Review {
        let findings = findings(source, check);
        let broken = check
            .diagnostics
            .iter()
            .any(|d| d.severity == Severity::Error && d.rule != RuleId::ExpectationFailed);
        let mut review = Review {
            path: path.to_string(),
            source: source.to_string(),
            hash: content_hash(source),
            findings,
            report: None,
            grid: Vec::new(),
            cross_check: None,
            cross_check_note: None,
            curve: None,
        };
        if broken {
            return review;
        }
        let model = &check.analysis.model;
        let derivation = &check.derivation;
        review.report = Some(ModelReport::build(model, derivation, source, model.horizon));
        review.curve = model.discount.as_ref().map(|discount| {
            let maturities = sdeck_calculus::curve::default_maturities(model.clock.years);
            curve(model, &discount.rate, &maturities).map(|c| CurveReview {
                svg: yield_curve_svg(model, &c),
                years_per_clock: model.clock.years,
                curve: c,
            })
        });
        review.grid = time_grid(model.horizon)
            .iter()
            .map(|t| figures_at(model, derivation, *t))
            .collect();
        if options.paths == 0 {
            review.cross_check_note = Some("no simulation was asked for (--simulate 0)".into());
            return review;
        }
        let simulation = SimulationOptions {
            paths: options.paths,
            steps: 100,
            at: None,
            seed: options.seed,
            threads: options.threads,
            progress: None,
            band_times: 50,
            dates: Vec::new(),
            step_doubling: true,
            memory_limit: None,
        };
        match simulate_and_compare(model, derivation, &simulation) {
            Ok(result) => {
                let times = result
                    .bands
                    .as_ref()
                    .map(|b| b.times.clone())
                    .unwrap_or_default();
                review.cross_check = Some(CrossCheck {
                    closed: closed_bands(model, derivation, &times),
                    result,
                });
            }
            Err(e) => review.cross_check_note = Some(format!("the simulation failed: {e}")),
        }
        review
    }
}

/// One fan chart (SVG) per factor of a simulation with bands, the closed-form law drawn
/// over the simulated bands; `units[i]` is factor i's unit as written.
pub fn fan_charts(
    result: &SimulationResult,
    closed: &[ClosedBands],
    units: &[Option<String>],
) -> Vec<String> {
    let Some(bands) = &result.bands else {
        return Vec::new();
    };
    result
        .states
        .iter()
        .enumerate()
        .filter_map(|(i, state)| {
            let series = bands.quantiles.get(i)?;
            let c = closed.get(i)?;
            let chart = crate::charts::FanChart {
                factor: &state.name,
                unit: units.get(i).and_then(|u| u.as_deref()),
                clock: &result.clock_unit,
                paths_simulated: result.paths,
                paths_drawn: bands.paths,
                times: &bands.times,
                simulated: series,
                mean: &c.mean,
                low: &c.low,
                median: &c.median,
                high: &c.high,
            };
            Some(chart.svg())
        })
        .collect()
}
