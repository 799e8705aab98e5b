//! `sdeck moments FILE`: the family, closed forms and moments of every state.

use crate::files;
use clap::{Args, ValueEnum};
use sdeck_calculus::{moments_at, Derivation, Moments};
use sdeck_checks::FileCheck;
use sdeck_diagnostics::Severity;
use sdeck_semantics::{fmt_num, Model};
use serde_json::{json, Value};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    Text,
    Json,
}

#[derive(Args)]
pub struct MomentsArgs {
    /// The model file.
    file: PathBuf,
    /// The time at which to report: a number in clock units, or a number with a time unit
    /// ("6 month", "2 year"). Default: the model's horizon.
    #[arg(long)]
    at: Option<String>,
    #[arg(long, value_enum, default_value_t = Format::Text)]
    format: Format,
    /// Probabilities of the quantiles to report, comma-separated ("1%,50%,0.99").
    #[arg(long, default_value = "1%,5%,50%,95%,99%")]
    quantiles: String,
    /// Levels whose probability of not being exceeded is reported, as NAME=VALUE pairs
    /// ("r=0,S=80").
    #[arg(long)]
    below: Option<String>,
}

/// A number as the language writes it: `0.5`, `2%`, `25bp`.
fn parse_level(text: &str) -> Option<f64> {
    let t = text.trim();
    let (number, scale) = if let Some(n) = t.strip_suffix('%') {
        (n, 0.01)
    } else if let Some(n) = t.strip_suffix("bp") {
        (n, 1e-4)
    } else {
        (t, 1.0)
    };
    number
        .trim()
        .parse::<f64>()
        .ok()
        .map(|v| v * scale)
        .filter(|v| v.is_finite())
}

/// `--quantiles`: probabilities strictly between 0 and 1.
pub fn parse_probabilities(text: &str) -> Result<Vec<f64>, String> {
    text.split(',')
        .map(|piece| match parse_level(piece) {
            Some(p) if p > 0.0 && p < 1.0 => Ok(p),
            _ => Err(format!(
                "`{}` is not a probability: write one between 0 and 1, e.g. `5%` or `0.05`",
                piece.trim()
            )),
        })
        .collect()
}

/// `--below`: (factor, level) pairs.
pub fn parse_below(text: &str, model: &Model) -> Result<Vec<(usize, f64)>, String> {
    text.split(',')
        .map(|piece| {
            let (name, value) = piece
                .split_once('=')
                .ok_or_else(|| format!("`{}` is not NAME=VALUE, e.g. `r=0`", piece.trim()))?;
            let index = model
                .factor_index(name.trim())
                .ok_or_else(|| format!("`{}` is not a factor of the model", name.trim()))?;
            let level =
                parse_level(value).ok_or_else(|| format!("`{}` is not a number", value.trim()))?;
            Ok((index, level))
        })
        .collect()
}

/// The law-based figures of every factor at one time: the law, quantiles and the
/// probabilities of staying below the asked levels.
pub struct LawFigures {
    pub law: Vec<Option<&'static str>>,
    pub quantiles: Vec<Vec<(f64, Option<f64>)>>,
    pub below: Vec<Vec<(f64, Option<f64>)>>,
}

pub fn law_figures(
    model: &Model,
    derivation: &Derivation,
    t: f64,
    probabilities: &[f64],
    below: &[(usize, f64)],
) -> LawFigures {
    let mut out = LawFigures {
        law: Vec::new(),
        quantiles: Vec::new(),
        below: Vec::new(),
    };
    for i in 0..model.factors.len() {
        let law = sdeck_calculus::laws::law_of(model, derivation, i, t);
        out.law.push(law.as_ref().map(|l| l.kind().as_str()));
        out.quantiles.push(
            probabilities
                .iter()
                .map(|&p| (p, law.as_ref().and_then(|l| l.quantile(p))))
                .collect(),
        );
        out.below.push(
            below
                .iter()
                .filter(|(k, _)| *k == i)
                .map(|&(_, q)| (q, law.as_ref().and_then(|l| l.cdf(q))))
                .collect(),
        );
    }
    out
}

/// Parses "0.5", "6 month", "6month", "18 [month]" into clock units.
pub fn parse_time(text: &str, model: &Model) -> Result<f64, String> {
    let t = text.trim();
    let split = t
        .find(|c: char| {
            !(c.is_ascii_digit() || c == '.' || c == 'e' || c == 'E' || c == '-' || c == '+')
        })
        .unwrap_or(t.len());
    // `e` may begin a unit name only after the number proper; retry without it.
    let (number, unit) = t.split_at(split);
    let value: f64 = number
        .trim()
        .parse()
        .map_err(|_| format!("`{text}` is not a time: write a number in clock units or a number with a time unit, e.g. `6 month`"))?;
    let unit = unit
        .trim()
        .trim_start_matches('[')
        .trim_end_matches(']')
        .trim();
    if unit.is_empty() {
        return Ok(value);
    }
    match sdeck_units::time_unit_years(unit) {
        Some(years) => Ok(value * years / model.clock.years),
        None => Err(format!(
            "`{unit}` is not a time unit; use one of {}",
            sdeck_units::TIME_UNITS.join(", ")
        )),
    }
}

/// Reads and checks a model for the commands that derive figures from it. A model with
/// errors (other than failed expectations, which are themselves figures) is refused:
/// its diagnostics go to stderr and the exit status is returned.
pub fn load_sound_model(path: &Path, doing: &str) -> Result<FileCheck, ExitCode> {
    let source = match files::read(path) {
        Ok(s) => s,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return Err(ExitCode::from(2));
        }
    };
    let settings = sdeck_project::settings_for(path);
    let (checked, result) = crate::check::check_source(source, &settings);
    let errors: Vec<_> = checked
        .diagnostics
        .iter()
        .filter(|d| d.severity == Severity::Error && d.rule != "expectation-failed")
        .cloned()
        .collect();
    if !errors.is_empty() {
        let mut err = codespan_reporting::term::termcolor::StandardStream::stderr(
            codespan_reporting::term::termcolor::ColorChoice::Never,
        );
        let _ = crate::render::human(
            &mut err,
            &checked.source.path,
            &checked.source.text,
            &errors,
        );
        eprintln!("sdeck: the model has errors; {doing} until they are mended");
        return Err(ExitCode::from(1));
    }
    Ok(result)
}

/// The `--at` option in clock units: the horizon when absent; `positive` refuses zero.
pub fn time_option(text: Option<&str>, model: &Model, positive: bool) -> Result<f64, ExitCode> {
    let Some(text) = text else {
        return Ok(model.horizon);
    };
    match parse_time(text, model) {
        Ok(t) if t.is_finite() && (t > 0.0 || (!positive && t == 0.0)) => Ok(t),
        Ok(_) => {
            let what = if positive {
                "a positive time"
            } else {
                "a time from now (not negative)"
            };
            eprintln!("sdeck: --at must be {what}");
            Err(ExitCode::from(2))
        }
        Err(message) => {
            eprintln!("sdeck: {message}");
            Err(ExitCode::from(2))
        }
    }
}

pub fn run(args: MomentsArgs) -> ExitCode {
    let result = match load_sound_model(&args.file, "no moments are derived") {
        Ok(r) => r,
        Err(code) => return code,
    };
    let model = &result.analysis.model;
    let t = match time_option(args.at.as_deref(), model, false) {
        Ok(t) => t,
        Err(code) => return code,
    };
    let probabilities = match parse_probabilities(&args.quantiles) {
        Ok(p) => p,
        Err(message) => {
            eprintln!("sdeck: --quantiles: {message}");
            return ExitCode::from(2);
        }
    };
    let below = match args.below.as_deref().map(|b| parse_below(b, model)) {
        None => Vec::new(),
        Some(Ok(b)) => b,
        Some(Err(message)) => {
            eprintln!("sdeck: --below: {message}");
            return ExitCode::from(2);
        }
    };
    let moments = moments_at(model, &result.derivation, t);
    let laws = law_figures(model, &result.derivation, t, &probabilities, &below);
    let output = match args.format {
        Format::Json => {
            serde_json::to_string_pretty(&moments_json(model, &result.derivation, &moments, &laws))
                .unwrap_or_default()
        }
        Format::Text => moments_text(model, &result.derivation, &moments, &laws),
    };
    outln!("{output}");
    ExitCode::SUCCESS
}

fn num(x: Option<f64>) -> Value {
    match x {
        Some(v) if v.is_finite() => json!(v),
        _ => Value::Null,
    }
}

pub fn moments_json(
    model: &Model,
    derivation: &Derivation,
    m: &Moments,
    laws: &LawFigures,
) -> Value {
    let states: Vec<Value> = model
        .factors
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let law = derivation.states.get(i);
            let variance = m.variance.get(i).copied().flatten();
            let pairs = |list: Option<&Vec<(f64, Option<f64>)>>, key: &str, value: &str| {
                Value::Array(
                    list.map(|l| {
                        l.iter()
                            .map(|(a, b)| json!({ key: a, value: num(*b) }))
                            .collect()
                    })
                    .unwrap_or_default(),
                )
            };
            json!({
                "name": s.name,
                "family": law.map(|l| l.family.as_str()),
                "mean": num(m.mean.get(i).copied().flatten()),
                "variance": num(variance),
                "variance_infinite_from": num(m.variance_infinite_from.get(i).copied().flatten()),
                "sd": num(variance.filter(|v| *v >= 0.0).map(f64::sqrt)),
                "law": laws.law.get(i).copied().flatten(),
                "quantiles": pairs(laws.quantiles.get(i), "p", "value"),
                "below": pairs(laws.below.get(i), "value", "probability"),
                "exact": m.exact.get(i).copied().unwrap_or(false),
                "formulas": {
                    "solution": law.and_then(|l| l.formulas.solution.clone()),
                    "mean": law.and_then(|l| l.formulas.mean.clone()),
                    "variance": law.and_then(|l| l.formulas.variance.clone()),
                },
            })
        })
        .collect();
    let covariance: Vec<Value> = m
        .covariance
        .iter()
        .map(|row| Value::Array(row.iter().map(|x| num(*x)).collect()))
        .collect();
    json!({
        "model": model.name,
        "clock": model.clock.unit,
        "at": m.at,
        "factors": states,
        "covariance": covariance,
    })
}

fn or_unknown(x: Option<f64>) -> String {
    match x {
        Some(v) if v.is_finite() => fmt_num(v),
        _ => "not known".to_string(),
    }
}

pub fn moments_text(
    model: &Model,
    derivation: &Derivation,
    m: &Moments,
    laws: &LawFigures,
) -> String {
    let clock = &model.clock.unit;
    let mut s = format!(
        "model {}   clock {}   at t = {} {}\n",
        model.name,
        clock,
        fmt_num(m.at),
        clock
    );
    for (i, state) in model.factors.iter().enumerate() {
        let Some(law) = derivation.states.get(i) else {
            continue;
        };
        s.push_str(&format!("\n{}: {}\n", state.name, law.family.as_str()));
        s.push_str(&format!("  {:<11} {}\n", "why", law.reason));
        s.push_str(&format!("  {:<11} {}\n", "method", law.method.as_str()));
        let f = &law.formulas;
        for (label, text) in [
            ("solution", &f.solution),
            ("mean", &f.mean),
            ("variance", &f.variance),
            ("autocov.", &f.autocovariance),
            ("transition", &f.transition),
            ("stationary", &f.stationary),
        ] {
            if let Some(t) = text {
                s.push_str(&format!("  {label:<11} {t}\n"));
            }
        }
        let mean = m.mean.get(i).copied().flatten();
        let var = m.variance.get(i).copied().flatten();
        s.push_str(&format!(
            "  E[{}(t)]   = {}\n",
            state.name,
            or_unknown(mean)
        ));
        let infinite = m.variance_infinite_from.get(i).copied().flatten();
        match infinite {
            Some(from) => s.push_str(&format!(
                "  Var[{}(t)] = infinite (from t = {} {clock})\n",
                state.name,
                fmt_num(from)
            )),
            None => s.push_str(&format!("  Var[{}(t)] = {}\n", state.name, or_unknown(var))),
        }
        s.push_str(&format!(
            "  sd        = {}\n",
            if infinite.is_some() {
                "infinite".to_string()
            } else {
                or_unknown(var.filter(|v| *v >= 0.0).map(f64::sqrt))
            }
        ));
        if let Some(kind) = laws.law.get(i).copied().flatten() {
            s.push_str(&format!("  law       = {kind}\n"));
        }
        if let Some(quantiles) = laws.quantiles.get(i) {
            if !quantiles.is_empty() && quantiles.iter().all(|(_, q)| q.is_some()) {
                let parts: Vec<String> = quantiles
                    .iter()
                    .map(|(p, q)| format!("{}% {}", fmt_num(p * 100.0), or_unknown(*q)))
                    .collect();
                s.push_str(&format!("  quantiles = {}\n", parts.join(", ")));
            }
        }
        for (level, probability) in laws.below.get(i).map(Vec::as_slice).unwrap_or(&[]) {
            s.push_str(&format!(
                "  P({} < {}) = {}\n",
                state.name,
                fmt_num(*level),
                or_unknown(*probability)
            ));
        }
        if let Some(h) = law.half_life {
            s.push_str(&format!("  half-life = {} {clock}\n", fmt_num(h)));
        }
        if let Some(st) = &law.stationary {
            s.push_str(&format!(
                "  stationary: {} (mean {}, sd {})\n",
                st.law,
                fmt_num(st.mean),
                fmt_num(st.variance.max(0.0).sqrt())
            ));
        }
    }
    if model.factors.len() > 1 {
        s.push_str("\ncovariance at t:\n");
        let width = model
            .factors
            .iter()
            .map(|st| st.name.chars().count())
            .max()
            .unwrap_or(1)
            .max(12);
        s.push_str(&format!("  {:width$}", ""));
        for st in &model.factors {
            s.push_str(&format!(" {:>width$}", st.name));
        }
        s.push('\n');
        for (i, row) in m.covariance.iter().enumerate() {
            let name = model
                .factors
                .get(i)
                .map(|st| st.name.as_str())
                .unwrap_or("");
            s.push_str(&format!("  {name:width$}"));
            for x in row {
                s.push_str(&format!(" {:>width$}", or_unknown(*x)));
            }
            s.push('\n');
        }
    }
    s.push_str(&format!("\n{}\n", crate::CAUTION));
    s
}
