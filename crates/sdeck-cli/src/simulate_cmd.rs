//! `sdeck simulate FILE`: an independent Monte Carlo cross-check of the derived law.

use crate::moments::{load_sound_model, time_option};
use clap::{Args, ValueEnum};
use sdeck_report::charts::stack;
use sdeck_report::review::{closed_bands, fan_charts};
use sdeck_simulate::{check, render_text, simulate_and_compare, to_json, SimulationOptions};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    Text,
    Json,
}

#[derive(Args)]
pub struct SimulateArgs {
    /// The model file.
    file: PathBuf,
    /// Number of simulated paths.
    #[arg(long, default_value_t = 100_000)]
    paths: usize,
    /// Time steps between 0 and the reporting time.
    #[arg(long, default_value_t = 100)]
    steps: usize,
    /// Reporting time: a number in clock units or with a time unit ("6 month").
    /// Default: the model's horizon.
    #[arg(long)]
    at: Option<String>,
    /// Seed of the random streams; the same seed gives the same numbers whatever the
    /// thread count.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Worker threads (default: all cores).
    #[arg(long)]
    threads: Option<usize>,
    #[arg(long, value_enum, default_value_t = Format::Text)]
    format: Format,
    /// Exit 1 when a simulated mean or variance is more than 4 standard errors from its
    /// closed form.
    #[arg(long)]
    check: bool,
    /// Write a fan chart of the simulated quantile bands (SVG).
    #[arg(long, value_name = "FILE.svg")]
    plot: Option<PathBuf>,
}

/// The most path steps (paths × steps) one run may take: ten billion, a hundred times the
/// default run. Past it a run would take hours; it is refused before it starts.
pub const MAX_PATH_STEPS: usize = 10_000_000_000;

pub fn run(args: SimulateArgs) -> ExitCode {
    let result = match load_sound_model(&args.file, "nothing is simulated") {
        Ok((_, r)) => r,
        Err(code) => return code,
    };
    let model = &result.analysis.model;
    let at = match args.at.as_deref() {
        None => None,
        Some(text) => match time_option(Some(text), model, true) {
            Ok(t) => Some(t),
            Err(code) => return code,
        },
    };
    if args.paths == 0 || args.steps == 0 {
        eprintln!("sdeck: --paths and --steps must be at least 1");
        return ExitCode::from(2);
    }
    let path_steps = args.paths.checked_mul(args.steps);
    if path_steps.is_none_or(|n| n > MAX_PATH_STEPS) {
        eprintln!(
            "sdeck: --paths {} × --steps {} is more than {MAX_PATH_STEPS} path steps; \
             nothing is simulated (use fewer paths or steps)",
            args.paths, args.steps
        );
        return ExitCode::from(2);
    }
    let options = SimulationOptions {
        paths: args.paths,
        steps: args.steps,
        at,
        seed: args.seed,
        threads: args.threads,
        progress: true,
        band_times: if args.plot.is_some() { 100 } else { 0 },
    };
    let simulated = match simulate_and_compare(model, &result.derivation, &options) {
        Ok(r) => r,
        Err(e) => {
            eprintln!("sdeck: {e}");
            return ExitCode::from(1);
        }
    };
    for warning in &simulated.warnings {
        eprintln!("sdeck: warning: {warning}");
    }
    match args.format {
        Format::Json => match serde_json::to_string_pretty(&to_json(&simulated)) {
            Ok(text) => outln!("{text}"),
            Err(e) => {
                eprintln!("sdeck: cannot write the report: {e}");
                return ExitCode::from(2);
            }
        },
        Format::Text => {
            out!("{}", render_text(&simulated));
            outln!("\n{}", crate::CAUTION);
        }
    }
    if let Some(path) = &args.plot {
        let times: Vec<f64> = simulated
            .bands
            .as_ref()
            .map(|b| b.times.clone())
            .unwrap_or_default();
        let closed = closed_bands(model, &result.derivation, &times);
        let units: Vec<Option<String>> =
            model.factors.iter().map(|s| s.unit_text.clone()).collect();
        let charts = fan_charts(&simulated, &closed, &units);
        if let Err(e) = std::fs::write(path, stack(&charts)) {
            eprintln!("sdeck: cannot write the chart `{}`: {e}", path.display());
            return ExitCode::from(2);
        }
    }
    if args.check {
        let disagreements = check(&simulated);
        if !disagreements.is_empty() {
            for d in &disagreements {
                eprintln!("sdeck: disagreement: {d}");
            }
            return ExitCode::from(1);
        }
    }
    ExitCode::SUCCESS
}
