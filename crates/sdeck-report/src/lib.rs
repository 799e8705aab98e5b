//! The derived law of a model as data, built once, and its renderings.
//!
//! [`ModelReport::build`] gathers, for one model at one time, everything a reviewer reads:
//! per factor the family and why, the formulas, the figures (mean, variance, sd,
//! quantiles, the probability of a sign change), the stationary law and the half-life;
//! the covariance and correlation matrices; the parameters as written and in clock
//! units; the expectations with their derived values. Every face renders this one value:
//! `sdeck moments` (text and JSON, [`moments`]), `sdeck report` (HTML and Markdown),
//! `sdeck diff`. Numbers are written by the one formatter, [`sdeck_units::number`].
//! Nothing here does IO or knows a protocol, so the language server's hover can render
//! the same data.
//!
//! ```
//! let source = "param kappa = 2 [1/year] > 0\nparam vol = 1% [1/sqrt(year)] > 0\n\
//!               shock W\nfactor r = 3%\ndr = -kappa * r dt + vol dW\n";
//! let check = sdeck_checks::check(source, "demo", &Default::default());
//! let model = &check.analysis.model;
//! let report = sdeck_report::ModelReport::build(model, &check.derivation, source, 1.0);
//! let r = &report.factors[0];
//! assert_eq!(r.family.as_str(), "ornstein-uhlenbeck");
//! assert!((r.figures.mean.unwrap_or(0.0) - 0.03 * (-2f64).exp()).abs() < 1e-15);
//! assert_eq!(r.half_life, Some(2f64.ln() / 2.0));
//! ```

pub mod charts;
pub mod curve_chart;
pub mod data;
pub mod diff;
pub mod html;
pub mod markdown;
pub mod mathml;
pub mod moments;
pub mod review;

pub use data::{
    factor_figures, figures_at, figures_with, time_grid, Below, ExpectationRow, FactorReport,
    Figures, Levels, ModelReport, ParamRow, Quantile, StationaryLaw, QUANTILE_LEVELS,
};

use sdeck_calculus::Formulas;

pub use review::{Review, ReviewOptions};

/// What the header of a document says besides the model: when and by what it was made.
#[derive(Clone, Debug, PartialEq)]
pub struct DocumentInfo {
    /// e.g. `2026-12-02`.
    pub date: String,
    /// e.g. `sdeck 0.1.0`.
    pub version: String,
}

/// The caution every report carries.
pub const CAUTION: &str = "Caution: derived figures hold only under the model's assumptions. \
Defer to your firm's model-validation practice and to local regulation before relying on them.";

/// The formulas that are known, labelled, in reading order.
pub fn formula_lines(f: &Formulas) -> Vec<(&'static str, &str)> {
    [
        ("solution", &f.solution),
        ("mean", &f.mean),
        ("variance", &f.variance),
        ("autocov.", &f.autocovariance),
        ("transition", &f.transition),
        ("stationary", &f.stationary),
        ("numbers", &f.matrices),
    ]
    .into_iter()
    .filter_map(|(label, text)| text.as_deref().map(|t| (label, t)))
    .collect()
}
