//! `sdeck report FILE...`: the review document of each model, HTML or Markdown.

use clap::{Args, ValueEnum};
use sdeck_report::{DocumentInfo, Review, ReviewOptions};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    Html,
    Markdown,
}

#[derive(Args)]
pub struct ReportArgs {
    /// Model files, or folders searched recursively for *.sde.
    #[arg(required = true)]
    paths: Vec<PathBuf>,
    #[arg(long, value_enum, default_value_t = Format::Html)]
    format: Format,
    /// Write the document here instead of standard output.
    #[arg(long, short, value_name = "PATH")]
    output: Option<PathBuf>,
    /// Paths of the Monte Carlo cross-check and the fan charts; 0 skips the simulation.
    #[arg(long, value_name = "N", default_value_t = 20_000)]
    simulate: usize,
    /// Seed of the simulation's random streams.
    #[arg(long, default_value_t = 1)]
    seed: u64,
}

/// Today's date in UTC, `YYYY-MM-DD` (days to civil date after H. Hinnant's public
/// algorithm).
pub fn today() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs());
    let days = (secs / 86_400) as i64 + 719_468;
    let era = days.div_euclid(146_097);
    let doe = days.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!("{year:04}-{month:02}-{day:02}")
}

pub fn run(args: ReportArgs) -> ExitCode {
    let mut projects = sdeck_project::ProjectCache::new();
    let files = match crate::files::collect(&args.paths, &mut projects) {
        Ok(files) => files,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return ExitCode::from(2);
        }
    };
    if files.is_empty() {
        eprintln!("sdeck: no .sde file found in the paths given");
        return ExitCode::from(2);
    }
    let options = ReviewOptions {
        paths: args.simulate,
        seed: args.seed,
        threads: None,
    };
    let mut reviews = Vec::new();
    let default_settings = sdeck_checks::RuleSettings::default();
    for target in &files {
        let source = match crate::files::read(&target.path) {
            Ok(s) => s,
            Err(message) => {
                eprintln!("sdeck: {message}");
                return ExitCode::from(2);
            }
        };
        let settings = target
            .project
            .as_deref()
            .map_or(&default_settings, |p| &p.settings);
        let text = source.text.clone();
        let shown = source.path.clone();
        let (_, check) = crate::check::check_source(source, settings);
        reviews.push(Review::build(&shown, &text, &check, &options));
    }
    let info = DocumentInfo {
        date: today(),
        version: format!("sdeck {}", env!("CARGO_PKG_VERSION")),
    };
    let document = match args.format {
        Format::Html => sdeck_report::html::html(&reviews, &info),
        Format::Markdown => sdeck_report::markdown::markdown(&reviews, &info),
    };
    match &args.output {
        Some(path) => {
            if let Err(e) = std::fs::write(path, document) {
                eprintln!("sdeck: cannot write `{}`: {e}", path.display());
                return ExitCode::from(2);
            }
        }
        None => out!("{document}"),
    }
    ExitCode::SUCCESS
}
