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
    /// Write the first paths on the time grid as CSV in the form `sdeck fit` reads: a `t`
    /// column (clock units) and one column per factor (`NAME` for one path, `NAME.1`,
    /// `NAME.2`, ... for several), values in the factor's declared unit.
    #[arg(long, value_name = "FILE.csv")]
    export: Option<PathBuf>,
    /// How many paths --export writes.
    #[arg(long, value_name = "N", default_value_t = 1, requires = "export")]
    export_paths: usize,
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
    if let Some(path) = &args.export {
        if let Err(message) = export(path, model, &result.derivation, &options, args.export_paths) {
            eprintln!("sdeck: {message}");
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

/// Writes the first `count` paths of the same random streams (the first paths do not
/// depend on how many are simulated) at every step of the grid.
fn export(
    path: &std::path::Path,
    model: &sdeck_semantics::Model,
    derivation: &sdeck_calculus::Derivation,
    options: &SimulationOptions,
    count: usize,
) -> Result<(), String> {
    use sdeck_simulate::engine::{MAX_BAND_PATHS, MAX_BAND_TIMES};
    if count == 0 || count > MAX_BAND_PATHS.min(options.paths) {
        return Err(format!(
            "--export-paths must be between 1 and {} (and at most --paths)",
            MAX_BAND_PATHS
        ));
    }
    if options.steps > MAX_BAND_TIMES {
        return Err(format!(
            "--export writes at most {MAX_BAND_TIMES} steps; use --steps {MAX_BAND_TIMES} or \
             fewer"
        ));
    }
    let recording = SimulationOptions {
        paths: count,
        band_times: options.steps,
        progress: false,
        ..options.clone()
    };
    let plan = sdeck_simulate::plan(model, derivation);
    let samples =
        sdeck_simulate::simulate_paths(model, &plan, &recording).map_err(|e| e.to_string())?;
    let mut out = String::from("t");
    for state in &model.factors {
        for p in 0..count {
            if count == 1 {
                out.push_str(&format!(",{}", state.name));
            } else {
                out.push_str(&format!(",{}.{}", state.name, p + 1));
            }
        }
    }
    out.push('\n');
    for (time, per_state) in samples.band_times.iter().zip(&samples.band_values) {
        out.push_str(&format!("{time}"));
        for (state, values) in model.factors.iter().zip(per_state) {
            for value in values.iter().take(count) {
                out.push_str(&format!(",{}", value / state.scale));
            }
        }
        out.push('\n');
    }
    std::fs::write(path, out).map_err(|e| format!("cannot write `{}`: {e}", path.display()))
}
