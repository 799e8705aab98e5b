//! `sdeck simulate FILE`: an independent Monte Carlo cross-check of the derived law.

use crate::moments::{load_sound_model, parse_below, time_option};
use clap::{Args, ValueEnum};
use sdeck_report::charts::stack;
use sdeck_report::review::{closed_bands, fan_charts};
use sdeck_semantics::Model;
use sdeck_simulate::{
    render_text, simulate_and_compare_below, to_json, verdicts, SimulationOptions, SimulationResult,
};
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
    /// Time steps between 0 and the last reporting date.
    #[arg(long, default_value_t = 100)]
    steps: usize,
    /// Reporting dates, comma-separated: numbers in clock units or times with a unit
    /// ("3 month,6 month,1 year"); 0 is today, where every path is at its start.
    /// Default: the model's horizon.
    #[arg(long, allow_hyphen_values = true)]
    at: Option<String>,
    /// Estimate P(X < q) at each date, e.g. `--below r=0` or `--below r=0,v=1%`
    /// (values in the factor's units as the model stores them; `%` and `bp` accepted).
    #[arg(long, value_name = "FACTOR=VALUE")]
    below: Vec<String>,
    /// Seed of the random streams; the same seed gives the same numbers whatever the
    /// thread count.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Worker threads (default: all cores).
    #[arg(long)]
    threads: Option<usize>,
    #[arg(long, value_enum, default_value_t = Format::Text)]
    format: Format,
    /// Exit 1 when a simulated figure is more than 4 standard errors from its closed form
    /// (for discretised schemes: the extrapolated figure, and only when the bias estimate
    /// is below the standard error; otherwise the run says it cannot decide). With a
    /// `discount` line the bond price at each date is compared with the curve.
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

/// The reporting dates of `--at`, in clock units.
fn dates_option(text: Option<&str>, model: &Model) -> Result<Vec<f64>, ExitCode> {
    let Some(text) = text else {
        return Ok(Vec::new());
    };
    text.split(',')
        .map(|part| time_option(Some(part.trim()), model))
        .collect()
}

/// `--below` settings: one optional threshold per factor, declaration order, read as
/// `moments --below` reads them.
fn thresholds_option(parts: &[String], model: &Model) -> Result<Vec<Option<f64>>, ExitCode> {
    let mut thresholds = vec![None; model.factors.len()];
    for part in parts {
        let levels = parse_below(part, model).map_err(|message| {
            eprintln!("sdeck: --below: {message}");
            ExitCode::from(2)
        })?;
        for (factor, level) in levels {
            thresholds[factor.index()] = Some(level);
        }
    }
    Ok(thresholds)
}

/// Memory the simulation may keep: most of what the machine has available now.
fn memory_limit() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib.saturating_mul(1024) / 10 * 8)
}

pub fn run(args: SimulateArgs) -> ExitCode {
    if let Err(code) = check_sizes(&args) {
        return code;
    }
    let result = match load_sound_model(&args.file, "nothing is simulated") {
        Ok((_, r)) => r,
        Err(code) => return code,
    };
    let model = &result.analysis.model;
    let dates = match dates_option(args.at.as_deref(), model) {
        Ok(d) => d,
        Err(code) => return code,
    };
    let thresholds = match thresholds_option(&args.below, model) {
        Ok(t) => t,
        Err(code) => return code,
    };
    let options = SimulationOptions {
        paths: args.paths,
        steps: args.steps,
        at: None,
        dates,
        seed: args.seed,
        threads: args.threads,
        progress: Some(crate::progress_bar::on_terminal()),
        band_times: if args.plot.is_some() { 100 } else { 0 },
        step_doubling: true,
        memory_limit: memory_limit(),
    };
    let simulated =
        match simulate_and_compare_below(model, &result.derivation, &options, &thresholds) {
            Ok(r) => r,
            Err(e) => {
                eprintln!("sdeck: {e}");
                return ExitCode::from(2);
            }
        };
    for warning in &simulated.warnings {
        eprintln!("sdeck: note: {warning}");
    }
    if let Err(code) = write_report(&simulated, args.format) {
        return code;
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
        return report_check(&simulated);
    }
    ExitCode::SUCCESS
}

/// Refuses zero sizes and runs past [`MAX_PATH_STEPS`] before anything is read.
fn check_sizes(args: &SimulateArgs) -> Result<(), ExitCode> {
    if args.paths == 0 || args.steps == 0 {
        eprintln!("sdeck: --paths and --steps must be at least 1");
        return Err(ExitCode::from(2));
    }
    let path_steps = args.paths.checked_mul(args.steps);
    if path_steps.is_none_or(|n| n > MAX_PATH_STEPS) {
        eprintln!(
            "sdeck: --paths {} × --steps {} is more than {MAX_PATH_STEPS} path steps; \
             nothing is simulated (use fewer paths or steps)",
            args.paths, args.steps
        );
        return Err(ExitCode::from(2));
    }
    Ok(())
}

/// The report on standard output, as JSON or text.
fn write_report(simulated: &SimulationResult, format: Format) -> Result<(), ExitCode> {
    match format {
        Format::Json => match serde_json::to_string_pretty(&to_json(simulated)) {
            Ok(text) => outln!("{text}"),
            Err(e) => {
                eprintln!("sdeck: cannot write the report: {e}");
                return Err(ExitCode::from(2));
            }
        },
        Format::Text => {
            out!("{}", render_text(simulated));
            outln!("\n{}", crate::CAUTION);
        }
    }
    Ok(())
}

/// The verdicts of `--check` on standard error: 1 on a disagreement, success otherwise.
fn report_check(simulated: &SimulationResult) -> ExitCode {
    let (disagreements, undecided) = verdicts(simulated);
    for u in &undecided {
        eprintln!("sdeck: undecided: {u}");
    }
    for d in &disagreements {
        eprintln!("sdeck: disagreement: {d}");
    }
    if !disagreements.is_empty() {
        return ExitCode::from(1);
    }
    let compared = simulated
        .dates
        .iter()
        .flat_map(|d| &d.states)
        .filter(|s| s.closed_form.is_some())
        .count();
    let prices = simulated
        .dates
        .iter()
        .filter_map(|d| d.discount.as_ref())
        .filter(|p| p.closed_form.is_some())
        .count();
    let prices = if prices > 0 {
        format!(", {prices} bond prices compared with the curve")
    } else {
        String::new()
    };
    eprintln!(
        "sdeck: check: no disagreement ({compared} factor-dates compared with closed forms{prices}, {} figures undecided)",
        undecided.len()
    );
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
        progress: None,
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
