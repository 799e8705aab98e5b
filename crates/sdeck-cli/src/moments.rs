//! `sdeck moments FILE`: the family, closed forms, moments and law of every factor,
//! rendered from the report data of `sdeck-report`.

use crate::files;
use clap::{Args, ValueEnum};
use sdeck_checks::FileCheck;
use sdeck_diagnostics::{RuleId, Severity};
use sdeck_report::moments::{moments_json, moments_text};
use sdeck_report::{Levels, ModelReport};
use sdeck_semantics::{FactorId, Model};
use sdeck_syntax::numbers::scaled_number;
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
    /// ("6 month", "2 year"); 0 is today. Default: the model's horizon.
    #[arg(long, allow_hyphen_values = true)]
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

/// `--quantiles`: probabilities strictly between 0 and 1.
pub fn parse_probabilities(text: &str) -> Result<Vec<f64>, String> {
    text.split(',')
        .map(|piece| match scaled_number(piece).ok() {
            Some(p) if p > 0.0 && p < 1.0 => Ok(p),
            _ => Err(format!(
                "`{}` is not a probability: write one between 0 and 1, e.g. `5%` or `0.05`",
                piece.trim()
            )),
        })
        .collect()
}

/// `--below`: (factor, level) pairs.
pub fn parse_below(text: &str, model: &Model) -> Result<Vec<(FactorId, f64)>, String> {
    text.split(',')
        .map(|piece| {
            let (name, value) = piece
                .split_once('=')
                .ok_or_else(|| format!("`{}` is not NAME=VALUE, e.g. `r=0`", piece.trim()))?;
            let factor = model.factor_id(name.trim()).ok_or_else(|| {
                format!(
                    "`{}` is not a factor of the model (its factors: {})",
                    name.trim(),
                    model.factor_list()
                )
            })?;
            let level = scaled_number(value).map_err(|error| {
                format!(
                    "{} (write e.g. 0, -0.5, 2% or 25bp)",
                    error.describe(value.trim())
                )
            })?;
            Ok((factor, level))
        })
        .collect()
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
/// its diagnostics go to stderr and the exit status is returned. Gives the text read and
/// the analysis.
pub fn load_sound_model(path: &Path, doing: &str) -> Result<(String, FileCheck), ExitCode> {
    let source = match files::read(path) {
        Ok(s) => s,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return Err(ExitCode::from(2));
        }
    };
    let settings = match files::settings_of(path) {
        Ok(settings) => settings,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return Err(ExitCode::from(2));
        }
    };
    let text = source.text.clone();
    let (checked, result) = crate::check::check_source(source, &settings);
    let errors: Vec<_> = checked
        .diagnostics
        .iter()
        .filter(|d| d.severity == Severity::Error && d.rule != RuleId::ExpectationFailed)
        .cloned()
        .collect();
    if !errors.is_empty() {
        let mut err = codespan_reporting::term::termcolor::StandardStream::stderr(
            crate::color_choice(std::io::IsTerminal::is_terminal(&std::io::stderr())),
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
    Ok((text, result))
}

/// The `--at` option in clock units: the horizon when absent. Zero (today) is a time;
/// a negative time is refused with the value in the message.
pub fn time_option(text: Option<&str>, model: &Model) -> Result<f64, ExitCode> {
    let Some(text) = text else {
        return Ok(model.horizon);
    };
    match parse_time(text, model) {
        Ok(t) if t.is_finite() && t >= 0.0 => Ok(t),
        Ok(t) if t < 0.0 => {
            eprintln!(
                "sdeck: --at `{}` is in the past: give a time from now, 0 (today) or later, \
                 e.g. `--at 0` or `--at 6 month`",
                text.trim()
            );
            Err(ExitCode::from(2))
        }
        Ok(_) => {
            eprintln!(
                "sdeck: --at `{}` is not a finite time: give a time from now, e.g. `--at 6 month`",
                text.trim()
            );
            Err(ExitCode::from(2))
        }
        Err(message) => {
            eprintln!("sdeck: {message}");
            Err(ExitCode::from(2))
        }
    }
}

pub fn run(args: MomentsArgs) -> ExitCode {
    let (source, result) = match load_sound_model(&args.file, "no moments are derived") {
        Ok(r) => r,
        Err(code) => return code,
    };
    let model = &result.analysis.model;
    let t = match time_option(args.at.as_deref(), model) {
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
    let levels = Levels {
        quantiles: probabilities,
        below,
        ..Levels::default()
    };
    let report = ModelReport::build_with(model, &result.derivation, &source, t, &levels);
    let output = match args.format {
        Format::Json => serde_json::to_string_pretty(&moments_json(&report)).unwrap_or_default(),
        Format::Text => moments_text(&report, crate::CAUTION),
    };
    outln!("{output}");
    ExitCode::SUCCESS
}
