//! `sdeck fmt [--check | --diff] PATH...`: formats model files in place with the one
//! formatter the language server also uses. A file with syntax errors is never changed.
//! `sdeck fmt -` formats standard input to standard output (for editors and hooks).

use clap::Args;
use sdeck_format::Outcome;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Args)]
pub struct FmtArgs {
    /// Model files or folders (searched recursively for *.sde); `-` formats standard
    /// input to standard output.
    #[arg(required = true)]
    paths: Vec<PathBuf>,
    /// Change nothing; list the files that are not formatted and exit 1 if any.
    #[arg(long)]
    check: bool,
    /// Change nothing; print what formatting would change as a unified diff and exit 1
    /// if anything would.
    #[arg(long, conflicts_with = "check")]
    diff: bool,
}

/// The unified diff from `old` to `new` of the file shown as `name`, with three lines
/// of context.
fn unified_diff(name: &str, old: &str, new: &str) -> String {
    similar::TextDiff::from_lines(old, new)
        .unified_diff()
        .context_radius(3)
        .header(
            &format!("{name} (as written)"),
            &format!("{name} (formatted)"),
        )
        .to_string()
}

/// `sdeck fmt -`: standard input to standard output. A text that cannot be formatted is
/// written back unchanged (an editor piping through the command loses nothing) and the
/// reason goes to stderr with exit status 2.
fn run_stdin(args: &FmtArgs) -> ExitCode {
    if args.paths.len() > 1 {
        eprintln!("sdeck: `-` (standard input) cannot be formatted beside other paths");
        return ExitCode::from(2);
    }
    let source = match crate::files::read_stdin("<stdin>") {
        Ok(s) => s,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return ExitCode::from(2);
        }
    };
    if source.invalid_utf8_at.is_some() {
        eprintln!("sdeck: standard input is not UTF-8 text; nothing formatted");
        return ExitCode::from(2);
    }
    let text = source.text;
    let formatted = match sdeck_format::format(&text) {
        Outcome::Formatted(formatted) => formatted,
        Outcome::SyntaxErrors { count } => {
            eprintln!(
                "sdeck: standard input has {count} syntax error{}; written back unchanged",
                if count == 1 { "" } else { "s" }
            );
            if !args.check && !args.diff {
                out!("{text}");
            }
            return ExitCode::from(2);
        }
        Outcome::Refused { reason } => {
            eprintln!("sdeck: standard input written back unchanged: {reason}");
            if !args.check && !args.diff {
                out!("{text}");
            }
            return ExitCode::from(2);
        }
    };
    let changed = formatted != text;
    if args.check {
        if changed {
            outln!("<stdin>: not formatted");
        }
    } else if args.diff {
        out!("{}", unified_diff("<stdin>", &text, &formatted));
    } else {
        out!("{formatted}");
        return ExitCode::SUCCESS;
    }
    if changed {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    }
}

pub fn run(args: FmtArgs) -> ExitCode {
    if args.paths.iter().any(|p| p.as_os_str() == "-") {
        return run_stdin(&args);
    }
    // The same discovery as `sdeck check`: hidden folders skipped, the project's exclusions
    // honoured, a broken project file an error.
    let mut projects = sdeck_project::ProjectCache::new();
    let paths = match crate::files::collect(&args.paths, &mut projects) {
        Ok(targets) => targets.into_iter().map(|t| t.path).collect::<Vec<_>>(),
        Err(message) => {
            eprintln!("sdeck: {message}");
            return ExitCode::from(2);
        }
    };
    if paths.is_empty() && !args.paths.iter().any(|p| p.is_dir()) {
        let shown: Vec<String> = args
            .paths
            .iter()
            .map(|p| format!("`{}`", p.display()))
            .collect();
        eprintln!(
            "sdeck: nothing formatted: the project file (sdeck.toml) excludes {}",
            shown.join(", ")
        );
    }
    let mut unformatted = 0;
    let mut failed = 0;
    for path in &paths {
        let done = match read_model_text(path) {
            Ok(text) => format_one(&args, path, &text),
            Err(message) => {
                eprintln!("sdeck: {message}");
                Done::Failed
            }
        };
        match done {
            Done::AsIs => {}
            Done::Unformatted => unformatted += 1,
            Done::Failed => failed += 1,
            Done::UnformattedUnwritten => {
                unformatted += 1;
                failed += 1;
            }
        }
    }
    if failed > 0 {
        ExitCode::from(2)
    } else if (args.check || args.diff) && unformatted > 0 {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    }
}

/// What became of one file.
enum Done {
    /// Formatted already (or left as it was).
    AsIs,
    /// Not formatted: reported, shown as a diff or rewritten.
    Unformatted,
    /// Not formatted, and rewriting it failed.
    UnformattedUnwritten,
    /// Unreadable, too large, not UTF-8, or not formattable.
    Failed,
}

/// The text of a model file; the message when it is too large, not UTF-8 or unreadable.
fn read_model_text(path: &std::path::Path) -> Result<String, String> {
    let shown = path.display();
    let bytes = std::fs::File::open(path).and_then(crate::files::read_bounded);
    if let Ok(bytes) = &bytes {
        if bytes.len() > sdeck_syntax::MAX_FILE_BYTES {
            return Err(format!(
                "`{shown}` is larger than the {} MiB a model file may hold; left unchanged",
                sdeck_syntax::MAX_FILE_BYTES >> 20
            ));
        }
    }
    match bytes.map(String::from_utf8) {
        Ok(Ok(text)) => Ok(text),
        Ok(Err(_)) => Err(format!("`{shown}` is not UTF-8 text; left unchanged")),
        Err(e) => Err(format!("cannot read `{shown}`: {e}")),
    }
}

/// Formats one file's `text`: reports it (`--check`), prints the diff (`--diff`) or
/// rewrites the file.
fn format_one(args: &FmtArgs, path: &std::path::Path, text: &str) -> Done {
    let shown = path.display();
    match sdeck_format::format(text) {
        Outcome::Formatted(formatted) if formatted == text => Done::AsIs,
        Outcome::Formatted(formatted) => {
            if args.check {
                outln!("{shown}: not formatted");
            } else if args.diff {
                out!("{}", unified_diff(&shown.to_string(), text, &formatted));
            } else if let Err(e) = std::fs::write(path, formatted) {
                eprintln!("sdeck: cannot write `{shown}`: {e}");
                return Done::UnformattedUnwritten;
            } else {
                outln!("{shown}: formatted");
            }
            Done::Unformatted
        }
        Outcome::SyntaxErrors { count } => {
            eprintln!(
                "sdeck: `{shown}` has {count} syntax error{}; left unchanged (`sdeck check` shows them)",
                if count == 1 { "" } else { "s" }
            );
            Done::Failed
        }
        Outcome::Refused { reason } => {
            eprintln!("sdeck: `{shown}` left unchanged: {reason}");
            Done::Failed
        }
    }
}
