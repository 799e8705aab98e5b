//! `sdeck check PATH...`: check files and folders, print the findings, set the exit status.
//!
//! With `--fix`, the preferred fix of every finding is applied to each file first (see
//! `fixing.rs`), and the report says what remains.
//!
//! Exit status: 0 when nothing fails, 1 when a finding fails under the deny level (errors,
//! or warnings too with `--deny warnings` or `[check] deny = "warnings"`) or when `--fix`
//! left a file unwritten because its fixes overlap, 2 when a path
//! cannot be read, a project file is broken, a report cannot be written, or the command
//! line is wrong.

use crate::files::{self, SourceText, Target};
use crate::fixing::{fix_file, FixOutcome};
use crate::{github, junit, render, sarif};
use clap::{Args, ValueEnum};
use codespan_reporting::term::termcolor::{
    BufferedStandardStream, ColorChoice, NoColor, WriteColor,
};
use rayon::prelude::*;
use sdeck_checks::{check, FileCheck, RuleSettings};
use sdeck_diagnostics::{rules, Diagnostic, Severity};
use sdeck_project::{DenyLevel, Project, ProjectCache};
use sdeck_syntax::LineIndex;
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::Arc;

/// The report formats, for standard output (`--format`) and files (`--output`).
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// Source snippets with underlines, for people.
    Human,
    /// One JSON document: `{"version": 1, "files": N, "diagnostics": [...]}`.
    Json,
    /// SARIF 2.1.0, the OASIS interchange format for static analysis results.
    Sarif,
    /// Workflow annotation lines (`::error file=...,line=...::message`).
    Github,
    /// JUnit XML, one test case per checked file.
    Junit,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Deny {
    /// Fail on errors only (the default).
    Errors,
    /// Fail on warnings too.
    Warnings,
}

/// One `--output FORMAT=FILE`.
#[derive(Clone, Debug)]
pub struct OutputTarget {
    pub format: Format,
    pub file: PathBuf,
}

fn parse_output(text: &str) -> Result<OutputTarget, String> {
    let Some((format, file)) = text.split_once('=') else {
        return Err(format!(
            "`{text}` names no format: write FORMAT=FILE, e.g. `sarif=report.sarif`"
        ));
    };
    let format = Format::from_str(format.trim(), true).map_err(|_| {
        format!("`{format}` is not a format; use human, json, sarif, github or junit")
    })?;
    if file.is_empty() {
        return Err(format!("`{text}` names no file"));
    }
    Ok(OutputTarget {
        format,
        file: PathBuf::from(file),
    })
}

#[derive(Args)]
pub struct CheckArgs {
    /// Model files or folders; `-` reads one model from standard input.
    paths: Vec<PathBuf>,
    /// Format of the report on standard output.
    #[arg(long, value_enum, default_value_t = Format::Human)]
    format: Format,
    /// Also write a report to a file, as FORMAT=FILE (e.g. `sarif=report.sarif`);
    /// repeat for several reports from one run. FILE `-` is standard output, in place of
    /// the `--format` report.
    #[arg(long = "output", value_name = "FORMAT=FILE", value_parser = parse_output)]
    outputs: Vec<OutputTarget>,
    /// Which findings make the exit status 1 [default: the project's `[check] deny`, else
    /// errors].
    #[arg(long, value_enum)]
    deny: Option<Deny>,
    /// Read the model from standard input and check it as if it were saved at this path:
    /// the path is shown in reports and chooses the project file.
    #[arg(long, value_name = "PATH")]
    stdin_name: Option<PathBuf>,
    /// Exit 0 when the folders named hold no model file (by default that is exit 2: a
    /// run that checks nothing is usually a wrong path).
    #[arg(long)]
    allow_empty: bool,
    /// Apply the preferred fix of every finding to the files, then report what remains.
    /// A file whose fixes overlap is left as it was, the clash is named, and the exit
    /// status is at least 1. Standard input is not fixed.
    #[arg(long)]
    fix: bool,
}

/// One checked file with what the outputs need.
pub struct Checked {
    pub source: SourceText,
    /// Sorted by position.
    pub diagnostics: Vec<Diagnostic>,
    /// 1-based (line, column) of each diagnostic's start and end; columns count characters.
    pub positions: Vec<render::Place>,
    /// The deny level that decides whether this file fails.
    pub deny: Deny,
}

impl Checked {
    /// Whether a diagnostic fails the check under this file's deny level.
    pub fn fails(&self, d: &Diagnostic) -> bool {
        match self.deny {
            Deny::Errors => d.severity == Severity::Error,
            Deny::Warnings => d.severity >= Severity::Warning,
        }
    }

    /// Whether any diagnostic of this file fails the check.
    pub fn failed(&self) -> bool {
        self.diagnostics.iter().any(|d| self.fails(d))
    }
}

/// Checks one text: the analysis plus the report of invalid UTF-8, and the analysis
/// itself for the commands that go on to use it.
pub fn check_source(source: SourceText, settings: &RuleSettings) -> (Checked, FileCheck) {
    let result = check(&source.text, &files::stem(&source.path), settings);
    let diagnostics = result.diagnostics.clone();
    (locate(source, diagnostics, settings), result)
}

/// Checks one text for its findings alone: the analysis is dropped as soon as they are
/// out, so a run over many files (or one large file) holds only findings.
pub fn check_findings(source: SourceText, settings: &RuleSettings) -> Checked {
    // The block ends the analysis (syntax tree, model, derivation) here, before the
    // findings are sorted and located: a field moved out of a struct leaves the rest
    // alive to the end of the scope otherwise.
    let diagnostics = {
        let result = check(&source.text, &files::stem(&source.path), settings);
        result.diagnostics
    };
    locate(source, diagnostics, settings)
}

/// Adds the report of invalid UTF-8 and sorts the findings by their place in the text.
fn locate(
    source: SourceText,
    mut diagnostics: Vec<Diagnostic>,
    settings: &RuleSettings,
) -> Checked {
    if let Some(at) = source.invalid_utf8_at {
        let end = source
            .text
            .get(at..)
            .and_then(|rest| rest.char_indices().nth(1))
            .map(|(i, _)| at + i)
            .unwrap_or(source.text.len());
        let diagnostic = Diagnostic::new(
            &rules::SYNTAX,
            at..end,
            format!("the file is not valid UTF-8 (first bad byte at offset {at}); it was read with the bad bytes replaced"),
        )
        .with_help("save the file as UTF-8");
        if settings
            .severity(rules::SYNTAX.id, rules::SYNTAX.default_severity)
            .is_some()
        {
            diagnostics.insert(0, diagnostic);
        }
    }
    let index = LineIndex::new(&source.text);
    // Each position computed once and sorted with its finding; the sort is stable, so
    // findings at one place keep the order of the analysis.
    let mut located: Vec<_> = diagnostics
        .into_iter()
        .map(|d| (render::position(&source.text, &index, &d), d))
        .collect();
    located.sort_by_key(|(position, _)| *position);
    let (positions, diagnostics) = located.into_iter().unzip();
    Checked {
        source,
        diagnostics,
        positions,
        deny: Deny::Errors,
    }
}

fn deny_for(cli: Option<Deny>, project: Option<&Project>) -> Deny {
    match (cli, project.and_then(|p| p.deny)) {
        (Some(deny), _) => deny,
        (None, Some(DenyLevel::Warnings)) => Deny::Warnings,
        (None, Some(DenyLevel::Errors)) | (None, None) => Deny::Errors,
    }
}

fn check_target(target: &Target, cli_deny: Option<Deny>) -> Result<Checked, String> {
    let source = files::read(&target.path)?;
    Ok(finish_one(source, target.project.as_deref(), cli_deny))
}

fn finish_one(source: SourceText, project: Option<&Project>, cli_deny: Option<Deny>) -> Checked {
    let default_settings = RuleSettings::default();
    let settings = project.map(|p| &p.settings).unwrap_or(&default_settings);
    let mut checked = check_findings(source, settings);
    checked.deny = deny_for(cli_deny, project);
    checked
}

/// The stack of each checking thread. The analysis recurses over expression trees; the
/// parser bounds their size per statement, but a chain of a few thousand unary minuses or
/// powers still needs more than the 2 MiB a worker thread gets by default (and more than
/// the 8 MiB of the main thread in a debug build). The space is reserved, not used: only
/// the pages a deep model touches are ever mapped.
const CHECK_STACK_BYTES: usize = 256 << 20;

/// The pool that checks files: one thread per core, each with [`CHECK_STACK_BYTES`].
fn checking_pool() -> Option<rayon::ThreadPool> {
    rayon::ThreadPoolBuilder::new()
        .stack_size(CHECK_STACK_BYTES)
        .thread_name(|i| format!("sdeck-check-{i}"))
        .build()
        .ok()
}

pub fn run(args: CheckArgs) -> ExitCode {
    match checking_pool() {
        Some(pool) => pool.install(|| run_in_pool(args)),
        None => run_in_pool(args),
    }
}

fn run_in_pool(args: CheckArgs) -> ExitCode {
    let mut projects = ProjectCache::new();
    let reads_stdin = match arguments_agree(&args) {
        Ok(reads_stdin) => reads_stdin,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return ExitCode::from(2);
        }
    };
    let Some(targets) = targets(&args, &mut projects, reads_stdin) else {
        return ExitCode::from(2);
    };
    let (mut unreadable, fixes_refused) = if args.fix {
        apply_fixes(&targets)
    } else {
        (false, false)
    };
    let mut checked: Vec<Checked> = Vec::with_capacity(targets.len() + 1);
    if reads_stdin {
        match check_stdin(&args, &mut projects) {
            Ok(one) => checked.extend(one),
            Err(message) => {
                eprintln!("sdeck: {message}");
                return ExitCode::from(2);
            }
        }
    }
    let results: Vec<Result<Checked, String>> = targets
        .par_iter()
        .map(|target| check_target(target, args.deny))
        .collect();
    for result in results {
        match result {
            Ok(c) => checked.push(c),
            Err(message) => {
                eprintln!("sdeck: {message}");
                unreadable = true;
            }
        }
    }
    // Stable: a path named twice keeps both entries, in argument order.
    checked.sort_by(|a, b| a.source.path.cmp(&b.source.path));

    let unwritten = write_reports(&args, &checked);
    if unreadable || unwritten {
        ExitCode::from(2)
    } else if fixes_refused || checked.iter().any(Checked::failed) {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    }
}

/// Whether the command line makes sense as a whole (what clap cannot tell): `Ok` with
/// whether standard input is read, or the message of exit 2.
fn arguments_agree(args: &CheckArgs) -> Result<bool, String> {
    let reads_stdin = args.paths.iter().any(|p| p.as_os_str() == "-")
        || (args.paths.is_empty() && args.stdin_name.is_some());
    if args.paths.is_empty() && args.stdin_name.is_none() {
        return Err("name the files or folders to check, or `-` with `--stdin-name PATH` to read standard input".to_string());
    }
    if args.stdin_name.is_some() && !reads_stdin {
        return Err("`--stdin-name` names standard input, which is read only when `-` is among the paths (or no path is given)".to_string());
    }
    if args.fix && reads_stdin {
        return Err(
            "`--fix` rewrites files; standard input cannot be fixed (name the file instead of `-`)"
                .to_string(),
        );
    }
    if args.paths.iter().filter(|p| p.as_os_str() == "-").count() > 1 {
        return Err("standard input can be read once: give `-` once".to_string());
    }
    // `--output FORMAT=-` is standard output; no two reports may go to one place.
    let mut destinations: Vec<PathBuf> = Vec::new();
    for output in &args.outputs {
        let destination = if output.file.as_os_str() == "-" {
            output.file.clone()
        } else {
            sdeck_project::absolute(&output.file)
        };
        if destinations.contains(&destination) {
            return Err(format!(
                "two reports would be written to `{}`; give each `--output` its own file",
                output.file.display()
            ));
        }
        destinations.push(destination);
    }
    Ok(reads_stdin)
}

/// The files to check under the paths on disk, saying so when there are none; `None`
/// (after the message) for exit 2.
fn targets(
    args: &CheckArgs,
    projects: &mut ProjectCache,
    reads_stdin: bool,
) -> Option<Vec<Target>> {
    let disk_paths: Vec<PathBuf> = args
        .paths
        .iter()
        .filter(|p| p.as_os_str() != "-")
        .cloned()
        .collect();
    let targets = match files::collect(&disk_paths, projects) {
        Ok(t) => t,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return None;
        }
    };
    if targets.is_empty() && !reads_stdin {
        let shown: Vec<String> = disk_paths
            .iter()
            .map(|p| format!("`{}`", p.display()))
            .collect();
        let folders = disk_paths.iter().any(|p| p.is_dir());
        if folders {
            eprintln!(
                "sdeck: no model files found under {}{}",
                shown.join(", "),
                if args.allow_empty {
                    ""
                } else {
                    " (`--allow-empty` accepts that)"
                }
            );
            if !args.allow_empty {
                return None;
            }
        } else {
            eprintln!(
                "sdeck: nothing checked: the project file (sdeck.toml) excludes {}",
                shown.join(", ")
            );
        }
    }
    Some(targets)
}

/// `--fix`: applies each file's preferred fixes and says what it did. Returns whether a
/// file could not be read and whether one was left unwritten (its fixes overlap).
fn apply_fixes(targets: &[Target]) -> (bool, bool) {
    let (mut unreadable, mut refused) = (false, false);
    let outcomes: Vec<Result<FixOutcome, String>> = targets.par_iter().map(fix_file).collect();
    for (target, outcome) in targets.iter().zip(outcomes) {
        let path = files::display(&target.path);
        match outcome {
            Ok(FixOutcome::Fixed(0)) => {}
            Ok(FixOutcome::Fixed(n)) => {
                let fixes = if n == 1 { "fix" } else { "fixes" };
                eprintln!("sdeck: {path}: applied {n} {fixes}");
            }
            Ok(FixOutcome::Refused(reason)) => {
                eprintln!("sdeck: {path}: nothing written: {reason}");
                refused = true;
            }
            Err(message) => {
                eprintln!("sdeck: {message}");
                unreadable = true;
            }
        }
    }
    (unreadable, refused)
}

/// Checks standard input under `--stdin-name` (its project found from that name);
/// `None` when the project excludes the name. `Err` is the message of exit 2.
fn check_stdin(args: &CheckArgs, projects: &mut ProjectCache) -> Result<Option<Checked>, String> {
    let name = args
        .stdin_name
        .clone()
        .unwrap_or_else(|| PathBuf::from("<stdin>"));
    let project: Option<Arc<Project>> = projects
        .project_for(&name)
        .map_err(files::describe_project_error)?;
    let source = files::read_stdin(&files::display(&name))?;
    // An excluded name is excluded on standard input too: an editor or hook then
    // agrees with the folder run.
    if project.as_ref().is_some_and(|p| p.is_excluded(&name)) {
        return Ok(None);
    }
    Ok(Some(finish_one(source, project.as_deref(), args.deny)))
}

/// Writes the report to each `--output` file and to standard output; whether one could
/// not be written (exit 2). A closed standard output (a pager quit) is not an error.
fn write_reports(args: &CheckArgs, checked: &[Checked]) -> bool {
    let mut unwritten = false;
    for output in args.outputs.iter().filter(|o| o.file.as_os_str() != "-") {
        let written = std::fs::File::create(&output.file).and_then(|file| {
            let mut writer = std::io::BufWriter::new(file);
            write_report(output.format, checked, &mut NoColor::new(&mut writer))?;
            writer.flush()
        });
        if let Err(e) = written {
            eprintln!(
                "sdeck: cannot write the {} report to `{}`: {e}",
                format_name(output.format),
                output.file.display()
            );
            unwritten = true;
        }
    }
    let stdout_format = args
        .outputs
        .iter()
        .find(|o| o.file.as_os_str() == "-")
        .map(|o| o.format)
        .unwrap_or(args.format);
    let color = if stdout_format == Format::Human {
        crate::color_choice(std::io::IsTerminal::is_terminal(&std::io::stdout()))
    } else {
        ColorChoice::Never
    };
    // Buffered: a report of thousands of findings is written in large blocks, not a
    // system call per line.
    let mut stdout = BufferedStandardStream::stdout(color);
    let printed = write_report(stdout_format, checked, &mut stdout).and_then(|()| stdout.flush());
    if let Err(e) = printed {
        if e.kind() != std::io::ErrorKind::BrokenPipe {
            eprintln!("sdeck: cannot write the report: {e}");
            unwritten = true;
        }
    }
    unwritten
}

fn format_name(format: Format) -> &'static str {
    match format {
        Format::Human => "human",
        Format::Json => "json",
        Format::Sarif => "sarif",
        Format::Github => "github",
        Format::Junit => "junit",
    }
}

/// Writes one report of every checked file in `format`.
pub fn write_report(
    format: Format,
    checked: &[Checked],
    out: &mut dyn WriteColor,
) -> std::io::Result<()> {
    match format {
        Format::Human => write_human(checked, out),
        // Streamed: a closed pipe reaches the caller as the write's own error.
        Format::Json => write_json(&render::json_report(checked), out),
        Format::Sarif => write_json(&sarif::report(checked), out),
        Format::Github => out.write_all(github::report(checked).as_bytes()),
        Format::Junit => out.write_all(junit::report(checked).as_bytes()),
    }
}

fn write_json(value: &impl serde::Serialize, out: &mut dyn WriteColor) -> std::io::Result<()> {
    let mut buffered = std::io::BufWriter::new(out);
    // `From<serde_json::Error>` gives back the writer's own error (a closed pipe stays one).
    serde_json::to_writer_pretty(&mut buffered, value).map_err(std::io::Error::from)?;
    buffered.write_all(b"\n")?;
    buffered.flush()
}

fn plural(n: usize, word: &str) -> String {
    if n == 1 {
        format!("{n} {word}")
    } else {
        format!("{n} {word}s")
    }
}

fn write_human(checked: &[Checked], out: &mut dyn WriteColor) -> std::io::Result<()> {
    let mut errors = 0;
    let mut warnings = 0;
    let mut infos = 0;
    let mut hints = 0;
    for c in checked {
        render::human(out, &c.source.path, &c.source.text, &c.diagnostics)?;
        for d in &c.diagnostics {
            match d.severity {
                Severity::Error => errors += 1,
                Severity::Warning => warnings += 1,
                Severity::Info => infos += 1,
                Severity::Hint => hints += 1,
            }
        }
    }
    // Each level counted under its own name, the word its findings carry above; `info`
    // (a level only a project file sets) is counted only when there is one.
    let infos = if infos > 0 {
        format!(", {}", plural(infos, "info"))
    } else {
        String::new()
    };
    writeln!(
        out,
        "{} checked: {}, {}{infos}, {}",
        plural(checked.len(), "file"),
        plural(errors, "error"),
        plural(warnings, "warning"),
        plural(hints, "hint"),
    )
}
