//! `sdeck check PATH...`: check files and folders, print the findings, set the exit status.

use crate::files::{self, SourceText};
use crate::render;
use clap::{Args, ValueEnum};
use codespan_reporting::term::termcolor::{ColorChoice, StandardStream};
use rayon::prelude::*;
use sdeck_checks::{check, FileCheck, RuleSettings};
use sdeck_diagnostics::{rules, Diagnostic, Severity};
use sdeck_syntax::LineIndex;
use serde_json::json;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    Human,
    Json,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Deny {
    /// Fail on errors only (the default).
    Errors,
    /// Fail on warnings too.
    Warnings,
}

#[derive(Args)]
pub struct CheckArgs {
    /// Model files or folders.
    #[arg(required = true)]
    paths: Vec<PathBuf>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Human)]
    format: Format,
    /// Which findings make the exit status 1.
    #[arg(long, value_enum, default_value_t = Deny::Errors)]
    deny: Deny,
}

/// One checked file with what the output needs.
pub struct Checked {
    pub source: SourceText,
    pub diagnostics: Vec<Diagnostic>,
}

/// Checks one text: the analysis plus the report of invalid UTF-8.
pub fn check_source(source: SourceText, settings: &RuleSettings) -> (Checked, FileCheck) {
    let result = check(&source.text, &files::stem(&source.path), settings);
    let mut diagnostics = result.diagnostics.clone();
    if let Some(at) = source.invalid_utf8_at {
        let end = source.text[at..]
            .char_indices()
            .nth(1)
            .map(|(i, _)| at + i)
            .unwrap_or(source.text.len());
        diagnostics.insert(
            0,
            Diagnostic::new(
                &rules::SYNTAX,
                at..end,
                format!("the file is not valid UTF-8 (first bad byte at offset {at}); it was read with the bad bytes replaced"),
            )
            .with_help("save the file as UTF-8"),
        );
    }
    (
        Checked {
            source,
            diagnostics,
        },
        result,
    )
}

pub fn run(args: CheckArgs) -> ExitCode {
    let paths = match files::collect(&args.paths) {
        Ok(p) => p,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return ExitCode::from(2);
        }
    };
    let settings = RuleSettings::default();
    let results: Vec<Result<Checked, String>> = paths
        .par_iter()
        .map(|path| files::read(path).map(|source| check_source(source, &settings).0))
        .collect();
    let mut checked = Vec::with_capacity(results.len());
    for r in results {
        match r {
            Ok(c) => checked.push(c),
            Err(message) => {
                eprintln!("sdeck: {message}");
                return ExitCode::from(2);
            }
        }
    }
    checked.sort_by(|a, b| a.source.path.cmp(&b.source.path));
    let output = match args.format {
        Format::Human => print_human(&checked),
        Format::Json => print_json(&checked),
    };
    if let Err(e) = output {
        if e.kind() != std::io::ErrorKind::BrokenPipe {
            eprintln!("sdeck: cannot write the report: {e}");
            return ExitCode::from(2);
        }
    }
    let fails = |d: &Diagnostic| match args.deny {
        Deny::Errors => d.severity == Severity::Error,
        Deny::Warnings => d.severity >= Severity::Warning,
    };
    if checked.iter().flat_map(|c| &c.diagnostics).any(fails) {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    }
}

fn print_human(checked: &[Checked]) -> std::io::Result<()> {
    let mut out = StandardStream::stdout(if std::io::IsTerminal::is_terminal(&std::io::stdout()) {
        ColorChoice::Auto
    } else {
        ColorChoice::Never
    });
    let mut counts = [0usize; 4];
    for c in checked {
        render::human(&mut out, &c.source.path, &c.source.text, &c.diagnostics)?;
        for d in &c.diagnostics {
            counts[d.severity as usize] += 1;
        }
    }
    use std::io::Write;
    writeln!(
        out,
        "{} file{} checked: {} error{}, {} warning{}, {} hint{}",
        checked.len(),
        if checked.len() == 1 { "" } else { "s" },
        counts[Severity::Error as usize],
        if counts[Severity::Error as usize] == 1 { "" } else { "s" },
        counts[Severity::Warning as usize],
        if counts[Severity::Warning as usize] == 1 { "" } else { "s" },
        counts[Severity::Hint as usize] + counts[Severity::Info as usize],
        if counts[Severity::Hint as usize] + counts[Severity::Info as usize] == 1 { "" } else { "s" },
    )
}

fn print_json(checked: &[Checked]) -> std::io::Result<()> {
    let mut entries = Vec::new();
    for c in checked {
        let index = LineIndex::new(&c.source.text);
        for d in &c.diagnostics {
            let located = render::locate(&c.source.path, &c.source.text, &index, d);
            entries.push(((located.start, located.end), render::json_entry(&located)));
        }
    }
    // Files are already in order; within a file, by position.
    let value = json!({
        "version": 1,
        "files": checked.len(),
        "diagnostics": entries.into_iter().map(|(_, v)| v).collect::<Vec<_>>(),
    });
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    serde_json::to_writer_pretty(&mut out, &value).map_err(std::io::Error::other)?;
    writeln!(out)
}
