//! The report of one model as data: built once from the analysis, rendered by every face.

use sdeck_calculus::affine::WorkBudget;
use sdeck_calculus::laws::{law_within, LawKind, LAW_WORK};
use sdeck_calculus::{
    expectation_value, moments_at, state_figures, Derivation, Family, Formulas, Method, Moments,
    StateFigures,
};
use sdeck_semantics::{Expectation, FactorId, Interval, Model};

/// The probabilities at which quantiles are reported.
pub const QUANTILE_LEVELS: [f64; 5] = [0.01, 0.05, 0.5, 0.95, 0.99];

/// One quantile of a factor's law.
#[derive(Clone, Debug, PartialEq)]
pub struct Quantile {
    pub probability: f64,
    /// `None` when the law is not known.
    pub value: Option<f64>,
}

/// The probability that a factor stays below a level.
#[derive(Clone, Debug, PartialEq)]
pub struct Below {
    pub level: f64,
    /// P(X ≤ level); `None` when the law is not known.
    pub probability: Option<f64>,
}

/// Which quantiles and levels the figures are asked for.
#[derive(Clone, Debug, PartialEq)]
pub struct Levels {
    /// Probabilities strictly between 0 and 1.
    pub quantiles: Vec<f64>,
    /// `(factor, level)` pairs.
    pub below: Vec<(FactorId, f64)>,
    /// Whether the quantiles of a law known only through its transform are asked too:
    /// each is a numerical inversion, too slow for a face that answers every keystroke.
    pub quantiles_by_inversion: bool,
}

impl Default for Levels {
    fn default() -> Self {
        Levels {
            quantiles: QUANTILE_LEVELS.to_vec(),
            below: Vec::new(),
            quantiles_by_inversion: true,
        }
    }
}

/// The figures of one factor at one time (clock units).
#[derive(Clone, Debug, PartialEq)]
pub struct Figures {
    pub at: f64,
    pub mean: Option<f64>,
    pub variance: Option<f64>,
    /// The time from which the variance is infinite, when it explodes.
    pub variance_infinite_from: Option<f64>,
    pub sd: Option<f64>,
    /// The law at `at` when it is known (its name, `LawKind::as_str`, is what the faces
    /// print: `normal`, `lognormal`, `noncentral-chi-square`, `fourier`).
    pub law: Option<LawKind>,
    /// At the asked probabilities ([`QUANTILE_LEVELS`] by default).
    pub quantiles: Vec<Quantile>,
    /// At the asked levels of this factor.
    pub below: Vec<Below>,
    /// The probability that the factor's sign at `at` differs from its sign at 0, when
    /// its law is Gaussian (a law that allows a sign change) and it starts away from 0.
    pub sign_change: Option<f64>,
    /// Which of these figures are exact (closed form or exact moment equations).
    pub exact: Exactness,
}

/// Per figure, whether it is exact: from a closed form or exact moment equations, not
/// from a numerical inversion or an approximation. An unknown figure is not exact.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Exactness {
    pub mean: bool,
    pub variance: bool,
    /// The quantiles and the probabilities below levels: exact for a law in closed form
    /// (normal, lognormal, noncentral chi-square), not for a Fourier inversion.
    pub law: bool,
}

impl Figures {
    /// The quantile at probability `p` (one of those asked).
    pub fn quantile(&self, p: f64) -> Option<f64> {
        self.quantiles
            .iter()
            .find(|q| q.probability == p)
            .and_then(|q| q.value)
    }

    /// Whether every asked quantile is known.
    pub fn quantiles_known(&self) -> bool {
        !self.quantiles.is_empty() && self.quantiles.iter().all(|q| q.value.is_some())
    }
}

/// The stationary law of a factor.
#[derive(Clone, Debug, PartialEq)]
pub struct StationaryLaw {
    /// In words, e.g. "Normal(θ, σ²/(2κ))".
    pub law: String,
    pub mean: f64,
    pub variance: f64,
    pub sd: f64,
}

/// Everything the report says about one factor.
#[derive(Clone, Debug, PartialEq)]
pub struct FactorReport {
    pub name: String,
    /// The unit as written (`EUR`), if any.
    pub unit: Option<String>,
    pub description: Option<String>,
    /// Initial value in clock units.
    pub initial: f64,
    pub family: Family,
    /// Why it is in that family, in words.
    pub reason: String,
    pub method: Method,
    pub formulas: Formulas,
    /// Whether the figures are exact (closed form or exact moment equations).
    pub exact: bool,
    /// Why the family's figures do not apply (a start or parameters outside its
    /// domain); the figures are then unknown.
    pub outside_domain: Option<String>,
    /// Clock units.
    pub half_life: Option<f64>,
    pub stationary: Option<StationaryLaw>,
    /// At the report's time.
    pub figures: Figures,
}

/// One parameter as written and in clock units.
#[derive(Clone, Debug, PartialEq)]
pub struct ParamRow {
    pub name: String,
    /// The value as written (`3.2%`, `6bp`, `0.9`).
    pub written_text: String,
    /// The value in the declared unit.
    pub written: f64,
    /// The unit as written, without brackets.
    pub unit: Option<String>,
    /// In clock units.
    pub value: f64,
    /// The bound in clock units, e.g. `> 0`, `[0, 1]`.
    pub bound: Option<String>,
    pub description: Option<String>,
}

/// One `expect` line and its derived value.
#[derive(Clone, Debug, PartialEq)]
pub struct ExpectationRow {
    /// The statement as written.
    pub text: String,
    /// 1-based line of the statement.
    pub line: usize,
    /// The factor; empty for a figure of the curve (`price`, `yield`, `forward`).
    pub factor: String,
    /// The figure's keyword (`mean`, `halflife`, `prob`, `yield`, ...).
    pub figure: &'static str,
    /// The time of a time-dependent figure (clock units).
    pub at: Option<f64>,
    /// The admissible values, in clock units, e.g. `[0.03, 0.0315]`.
    pub admissible: String,
    pub value: Option<f64>,
    /// Whether the value lies in the admissible interval; `None` when there is no value.
    pub holds: Option<bool>,
}

/// The report of one model at one time.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelReport {
    pub model: String,
    pub clock: String,
    /// Clock units.
    pub horizon: f64,
    /// The time of [`FactorReport::figures`] and the matrices, clock units.
    pub at: f64,
    pub params: Vec<ParamRow>,
    pub factors: Vec<FactorReport>,
    /// At `at`, declaration order.
    pub covariance: Vec<Vec<Option<f64>>>,
    pub correlation: Vec<Vec<Option<f64>>>,
    pub expectations: Vec<ExpectationRow>,
}

/// The figures of every factor at time `t`, with the default quantiles.
pub fn figures_at(model: &Model, derivation: &Derivation, t: f64) -> Vec<Figures> {
    figures_with(model, derivation, t, &Levels::default())
}

/// The figures of every factor at time `t`, with the quantiles and levels asked.
pub fn figures_with(
    model: &Model,
    derivation: &Derivation,
    t: f64,
    levels: &Levels,
) -> Vec<Figures> {
    let moments = moments_at(model, derivation, t);
    let work = WorkBudget::new(LAW_WORK);
    model
        .factors
        .ids()
        .map(|i| figures_of(model, derivation, i, t, levels, column(&moments, i), &work))
        .collect()
}

/// The figures of factor `i` alone at time `t`, with the quantiles and levels asked: the
/// cost of that factor, whatever the size of the model.
pub fn factor_figures(
    model: &Model,
    derivation: &Derivation,
    i: FactorId,
    t: f64,
    levels: &Levels,
) -> Figures {
    let state = state_figures(model, derivation, i, t);
    figures_of(
        model,
        derivation,
        i,
        t,
        levels,
        state,
        &WorkBudget::new(LAW_WORK),
    )
}

/// Factor `i`'s part of the figures of the whole model.
fn column(moments: &Moments, id: FactorId) -> StateFigures {
    let i = id.index();
    StateFigures {
        mean: moments.mean.get(i).copied().flatten(),
        variance: moments.variance.get(i).copied().flatten(),
        exact: moments.exact.get(i).copied().unwrap_or(false),
        variance_infinite_from: moments.variance_infinite_from.get(i).copied().flatten(),
    }
}

/// The figures of factor `i` at time `t` from its mean and variance, its law drawing
/// on `work` (shared by the factors of one report).
fn figures_of(
    model: &Model,
    derivation: &Derivation,
    i: FactorId,
    t: f64,
    levels: &Levels,
    state: StateFigures,
    work: &WorkBudget,
) -> Figures {
    let StateFigures {
        mean,
        variance,
        exact: exact_moments,
        variance_infinite_from,
    } = state;
    let start = model.factors.by_id(i).map_or(0.0, |s| s.initial);
    let law = law_within(model, derivation, i, t, work);
    let quantile_law = law
        .as_ref()
        .filter(|l| levels.quantiles_by_inversion || l.kind() != LawKind::Fourier);
    let quantiles: Vec<Quantile> = levels
        .quantiles
        .iter()
        .map(|&p| Quantile {
            probability: p,
            value: quantile_law
                .and_then(|l| l.quantile(p))
                .filter(|v| v.is_finite()),
        })
        .collect();
    let below: Vec<Below> = levels
        .below
        .iter()
        .filter(|(k, _)| *k == i)
        .map(|&(_, level)| Below {
            level,
            probability: law.as_ref().and_then(|l| l.cdf(level)),
        })
        .collect();
    // Only a law on the whole line lets the sign change (normal, or known through
    // its transform and putting mass below zero).
    let sign_change = law.as_ref().and_then(|law| {
        if !(law.kind().on_whole_line() && t > 0.0 && start != 0.0) {
            return None;
        }
        let below = law.cdf(0.0)?;
        let p = if start > 0.0 { below } else { 1.0 - below };
        (law.kind() == LawKind::Normal || p > 0.0).then_some(p)
    });
    let exact = Exactness {
        mean: exact_moments && mean.is_some(),
        variance: exact_moments && variance.is_some(),
        law: exact_moments && law.as_ref().is_some_and(|l| l.kind() != LawKind::Fourier),
    };
    Figures {
        exact,
        at: t,
        mean,
        variance,
        variance_infinite_from,
        sd: variance.filter(|v| *v >= 0.0).map(f64::sqrt),
        law: law.as_ref().map(|l| l.kind()),
        quantiles,
        below,
        sign_change,
    }
}

/// The times of the report's grid: 0, a quarter, half, three quarters of `end`, `end`.
pub fn time_grid(end: f64) -> [f64; 5] {
    [0.0, 0.25 * end, 0.5 * end, 0.75 * end, end]
}

/// An interval in clock units, e.g. `[0.03, 0.0315]`, `> 0`, `<= 1`.
pub fn interval_text(interval: &Interval) -> String {
    use sdeck_units::number::plain;
    match (interval.lower, interval.upper) {
        (None, None) => "any value".to_string(),
        (Some((v, true)), None) => format!(">= {}", plain(v)),
        (Some((v, false)), None) => format!("> {}", plain(v)),
        (None, Some((v, true))) => format!("<= {}", plain(v)),
        (None, Some((v, false))) => format!("< {}", plain(v)),
        (Some((a, ai)), Some((b, bi))) => format!(
            "{}{}, {}{}",
            if ai { "[" } else { "(" },
            plain(a),
            plain(b),
            if bi { "]" } else { ")" }
        ),
    }
}

/// The literal after `=` in a declaration (`3.2%` in `param level = 3.2% >= 0`).
fn value_as_written(source: &str, span: &std::ops::Range<usize>) -> Option<String> {
    let text = source.get(span.clone())?;
    let (_, after) = text.split_once('=')?;
    let literal: String = after
        .trim_start()
        .chars()
        .take_while(|c| !c.is_whitespace() && *c != '[' && *c != '#')
        .collect();
    (!literal.is_empty()).then_some(literal)
}

fn line_of(source: &str, offset: usize) -> usize {
    source
        .get(..offset.min(source.len()))
        .map_or(0, |s| s.matches('\n').count())
        + 1
}

fn expectation_row(
    model: &Model,
    derivation: &Derivation,
    source: &str,
    e: &Expectation,
) -> ExpectationRow {
    let time = e.at.unwrap_or(model.horizon);
    let value = expectation_value(model, derivation, e).ok();
    ExpectationRow {
        text: source.get(e.span.clone()).unwrap_or("").trim().to_string(),
        line: line_of(source, e.span.start),
        factor: e
            .state
            .and_then(|i| model.factors.by_id(i))
            .map(|s| s.name.clone())
            .unwrap_or_default(),
        figure: e.figure.keyword(),
        at: e.figure.takes_time().then_some(time),
        admissible: interval_text(&e.admissible),
        value,
        holds: value.map(|v| e.admissible.contains(v)),
    }
}

impl ModelReport {
    /// Builds the report of `model` at time `at` (clock units). `source` is the model's
    /// text, from which the expectations are quoted.
    pub fn build(model: &Model, derivation: &Derivation, source: &str, at: f64) -> ModelReport {
        Self::build_with(model, derivation, source, at, &Levels::default())
    }

    /// [`ModelReport::build`] with the quantiles and levels asked.
    pub fn build_with(
        model: &Model,
        derivation: &Derivation,
        source: &str,
        at: f64,
        levels: &Levels,
    ) -> ModelReport {
        let moments = moments_at(model, derivation, at);
        let work = WorkBudget::new(LAW_WORK);
        let factors = model
            .factors
            .ids()
            .filter_map(|i| {
                let state = column(&moments, i);
                let figures = figures_of(model, derivation, i, at, levels, state, &work);
                FactorReport::from_figures(model, derivation, i, state.exact, figures)
            })
            .collect();
        let covariance = moments.covariance.clone();
        let correlation = covariance
            .iter()
            .enumerate()
            .map(|(i, row)| {
                row.iter()
                    .enumerate()
                    .map(|(j, c)| {
                        let vi = covariance.get(i)?.get(i).copied().flatten()?;
                        let vj = covariance.get(j)?.get(j).copied().flatten()?;
                        let c = (*c)?;
                        if i == j {
                            return (vi > 0.0).then_some(1.0);
                        }
                        (vi > 0.0 && vj > 0.0).then(|| (c / (vi * vj).sqrt()).clamp(-1.0, 1.0))
                    })
                    .collect()
            })
            .collect();
        ModelReport {
            model: model.name.clone(),
            clock: model.clock.unit.clone(),
            horizon: model.horizon,
            at,
            params: model
                .params
                .iter()
                .map(|p| ParamRow {
                    name: p.name.clone(),
                    written_text: value_as_written(source, &p.span)
                        .unwrap_or_else(|| sdeck_units::number::plain(p.written)),
                    written: p.written,
                    unit: p.unit_text.clone(),
                    value: p.value,
                    bound: p.bound.as_deref().map(interval_text),
                    description: p.description.clone(),
                })
                .collect(),
            factors,
            covariance,
            correlation,
            expectations: model
                .expectations
                .iter()
                .map(|e| expectation_row(model, derivation, source, e))
                .collect(),
        }
    }

    /// The factor called `name`.
    pub fn factor(&self, name: &str) -> Option<&FactorReport> {
        self.factors.iter().find(|f| f.name == name)
    }
}

impl FactorReport {
    /// The report of factor `i` alone at time `at` (clock units), with the quantiles and
    /// levels asked: what [`ModelReport::build_with`] says of it, at the cost of that
    /// factor (a hover on one factor of a large model derives that factor only).
    /// `None` when the model has no factor `i`.
    pub fn build(
        model: &Model,
        derivation: &Derivation,
        i: FactorId,
        at: f64,
        levels: &Levels,
    ) -> Option<FactorReport> {
        let state = state_figures(model, derivation, i, at);
        let work = WorkBudget::new(LAW_WORK);
        let figures = figures_of(model, derivation, i, at, levels, state, &work);
        Self::from_figures(model, derivation, i, state.exact, figures)
    }

    fn from_figures(
        model: &Model,
        derivation: &Derivation,
        i: FactorId,
        exact: bool,
        figures: Figures,
    ) -> Option<FactorReport> {
        let state = model.factors.by_id(i)?;
        let law = derivation.states.by_id(i)?;
        Some(FactorReport {
            name: state.name.clone(),
            unit: state.unit_text.clone(),
            description: state.description.clone(),
            initial: state.initial,
            family: law.family,
            reason: law.reason.clone(),
            method: law.method,
            formulas: sdeck_calculus::formulas(model, derivation, i),
            exact,
            outside_domain: law.outside_domain.clone(),
            half_life: law.half_life,
            stationary: law.stationary.as_ref().map(|s| StationaryLaw {
                law: s.law.clone(),
                mean: s.mean,
                variance: s.variance,
                sd: s.variance.max(0.0).sqrt(),
            }),
            figures,
        })
    }
}
