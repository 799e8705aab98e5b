//! `sdeck`: the command-line face of the analysis. It reads files, calls the one analysis
//! entry point (`sdeck_checks::check`) and renders the result; it decides nothing itself.

/// `print!` that ends quietly when the reader of standard output has gone (`| head`):
/// the rest of the output is dropped and the command keeps its exit status.
macro_rules! out {
    ($($arg:tt)*) => { $crate::write_stdout(format_args!($($arg)*)) };
}

/// `println!` with the behaviour of [`out!`].
macro_rules! outln {
    () => { $crate::write_stdout(format_args!("\n")) };
    ($($arg:tt)*) => { $crate::write_stdout(format_args!("{}\n", format_args!($($arg)*))) };
}

mod allocator;
mod check;
mod curve_cmd;
mod diff_cmd;
mod files;
mod fit_cmd;
mod fit_data;
mod fixing;
mod fmt_cmd;
mod github;
mod junit;
mod lsp_cmd;
mod moments;
mod progress_bar;
mod render;
mod report_cmd;
mod sarif;
mod simulate_cmd;

use clap::{Parser, Subcommand};

use std::process::ExitCode;

const CAUTION: &str = sdeck_report::CAUTION;

#[derive(Parser)]
#[command(
    name = "sdeck",
    version,
    about = "Checks stochastic differential equation model files and derives their laws",
    long_about = "sdeck checks model files (.sde) that describe systems of Itô stochastic \
differential equations: names, units, bounds, correlations, the Feller condition, mean \
reversion. It derives closed-form solutions and moments, and cross-checks them by Monte Carlo.",
    after_help = CAUTION
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
    /// Colour in the human report and in the findings printed on stderr: `auto` colours a
    /// terminal unless NO_COLOR is set.
    #[arg(long, global = true, value_enum, default_value_t = ColorWhen::Auto)]
    color: ColorWhen,
}

/// When to colour output for people.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum ColorWhen {
    /// On a terminal, unless the NO_COLOR environment variable is set.
    Auto,
    /// Always, even into a pipe or file (and despite NO_COLOR).
    Always,
    /// Never.
    Never,
}

/// The `--color` of this run, set once at start.
static COLOR: std::sync::OnceLock<ColorWhen> = std::sync::OnceLock::new();

/// The colour choice for a stream: `terminal` says whether it is a terminal.
pub(crate) fn color_choice(terminal: bool) -> codespan_reporting::term::termcolor::ColorChoice {
    use codespan_reporting::term::termcolor::ColorChoice;
    match COLOR.get().copied().unwrap_or(ColorWhen::Auto) {
        ColorWhen::Always => ColorChoice::Always,
        ColorWhen::Never => ColorChoice::Never,
        // termcolor's `Auto` honours NO_COLOR and TERM=dumb.
        ColorWhen::Auto if terminal => ColorChoice::Auto,
        ColorWhen::Auto => ColorChoice::Never,
    }
}

#[derive(Subcommand)]
enum Command {
    /// Check model files or folders (searched recursively for *.sde).
    Check(check::CheckArgs),
    /// Derive the family, closed forms and moments of each state of a model.
    Moments(moments::MomentsArgs),
    /// Zero-coupon prices, yields and forwards of the model's `discount` rate.
    Curve(curve_cmd::CurveArgs),
    /// Cross-check the derived law by Monte Carlo simulation.
    Simulate(simulate_cmd::SimulateArgs),
    /// Estimate the model's parameters from a time series by exact maximum likelihood.
    #[command(after_help = fit_cmd::CAUTION)]
    Fit(fit_cmd::FitArgs),
    /// Write the review document of models: derivation, figures, charts (HTML or Markdown).
    Report(report_cmd::ReportArgs),
    /// What a change of model text does to the derived law (two files, or --since REV).
    Diff(diff_cmd::DiffArgs),
    /// Format model files in place (aligned declarations, canonical spacing).
    Fmt(fmt_cmd::FmtArgs),
    /// Serve the Language Server Protocol on stdin/stdout, for editors.
    Lsp(lsp_cmd::LspArgs),
    /// Print the manual of a rule, or list every rule.
    Explain {
        /// The rule's name (kebab-case); omit to list all rules.
        rule: Option<String>,
        /// Print the whole rule manual in Markdown (the text of docs/rules.md).
        #[arg(long, conflicts_with = "rule")]
        markdown: bool,
    },
}

/// Set once standard output cannot be written any more.
static STDOUT_GONE: std::sync::atomic::AtomicBool = std::sync::atomic::AtomicBool::new(false);

/// Writes to standard output. A closed pipe ends the output quietly; any other error is
/// said once on stderr.
pub(crate) fn write_stdout(args: std::fmt::Arguments) {
    use std::io::Write;
    use std::sync::atomic::Ordering;
    if STDOUT_GONE.load(Ordering::Relaxed) {
        return;
    }
    let mut stdout = std::io::stdout().lock();
    if let Err(e) = stdout.write_fmt(args).and_then(|()| stdout.flush()) {
        STDOUT_GONE.store(true, Ordering::Relaxed);
        if e.kind() != std::io::ErrorKind::BrokenPipe {
            eprintln!("sdeck: cannot write to standard output: {e}");
        }
    }
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    let _ = COLOR.set(cli.color);
    match cli.command {
        Command::Check(args) => check::run(args),
        Command::Moments(args) => moments::run(args),
        Command::Curve(args) => curve_cmd::run(args),
        Command::Simulate(args) => simulate_cmd::run(args),
        Command::Fit(args) => fit_cmd::run(args),
        Command::Report(args) => report_cmd::run(args),
        Command::Diff(args) => diff_cmd::run(args),
        Command::Fmt(args) => fmt_cmd::run(args),
        Command::Lsp(args) => lsp_cmd::run(args),
        Command::Explain { rule, markdown } => explain(rule.as_deref(), markdown),
    }
}

fn explain(rule: Option<&str>, markdown: bool) -> ExitCode {
    use sdeck_diagnostics::rules;
    if markdown {
        // The whole manual, as docs/rules.md holds it (clap refuses a rule beside it).
        out!("{}", render::rules_markdown());
        return ExitCode::SUCCESS;
    }
    match rule {
        None => {
            let width = rules::ALL.iter().map(|r| r.name.len()).max().unwrap_or(0);
            for r in rules::ALL {
                outln!(
                    "{:width$}  {:7}  {}",
                    r.name,
                    r.default_severity.as_str(),
                    r.summary
                );
            }
            ExitCode::SUCCESS
        }
        Some(name) => match rules::by_name(name) {
            Some(r) => {
                out!("{}", render::explain_text(r));
                ExitCode::SUCCESS
            }
            None => {
                match rules::closest(name) {
                    Some(close) => eprintln!(
                        "sdeck: no rule is called `{name}`; did you mean `{}`? (`sdeck explain` lists them)",
                        close.name
                    ),
                    None => {
                        eprintln!("sdeck: no rule is called `{name}`; `sdeck explain` lists them")
                    }
                }
                ExitCode::from(2)
            }
        },
    }
}
