//! `sdeck fmt [--check] PATH...`: formats model files in place with the one formatter
//! the language server also uses. A file with syntax errors is never changed.

use clap::Args;
use sdeck_format::Outcome;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Args)]
pub struct FmtArgs {
    /// Model files or folders (searched recursively for *.sde).
    #[arg(required = true)]
    paths: Vec<PathBuf>,
    /// Change nothing; list the files that are not formatted and exit 1 if any.
    #[arg(long)]
    check: bool,
}

pub fn run(args: FmtArgs) -> ExitCode {
    let paths = match collect(&args.paths) {
        Ok(p) => p,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return ExitCode::from(2);
        }
    };
    let mut unformatted = 0;
    let mut failed = 0;
    for path in &paths {
        let shown = path.display();
        let bytes = std::fs::File::open(path).and_then(crate::files::read_bounded);
        if let Ok(bytes) = &bytes {
            if bytes.len() > sdeck_syntax::MAX_FILE_BYTES {
                eprintln!(
                    "sdeck: `{shown}` is larger than the {} MiB a model file may hold; left \
                     unchanged",
                    sdeck_syntax::MAX_FILE_BYTES >> 20
                );
                failed += 1;
                continue;
            }
        }
        let text = match bytes.map(String::from_utf8) {
            Ok(Ok(text)) => text,
            Ok(Err(_)) => {
                eprintln!("sdeck: `{shown}` is not UTF-8 text; left unchanged");
                failed += 1;
                continue;
            }
            Err(e) => {
                eprintln!("sdeck: cannot read `{shown}`: {e}");
                failed += 1;
                continue;
            }
        };
        match sdeck_format::format(&text) {
            Outcome::Formatted(formatted) if formatted == text => {}
            Outcome::Formatted(formatted) => {
                unformatted += 1;
                if args.check {
                    outln!("{shown}: not formatted");
                } else if let Err(e) = std::fs::write(path, formatted) {
                    eprintln!("sdeck: cannot write `{shown}`: {e}");
                    failed += 1;
                } else {
                    outln!("{shown}: formatted");
                }
            }
            Outcome::SyntaxErrors { count } => {
                eprintln!(
                    "sdeck: `{shown}` has {count} syntax error{}; left unchanged (`sdeck check` shows them)",
                    if count == 1 { "" } else { "s" }
                );
                failed += 1;
            }
            Outcome::Refused { reason } => {
                eprintln!("sdeck: `{shown}` left unchanged: {reason}");
                failed += 1;
            }
        }
    }
    if failed > 0 {
        ExitCode::from(2)
    } else if args.check && unformatted > 0 {
        ExitCode::from(1)
    } else {
        ExitCode::SUCCESS
    }
}

/// Files as given, and every *.sde file under the folders given, sorted per folder.
fn collect(paths: &[PathBuf]) -> Result<Vec<PathBuf>, String> {
    let mut out = Vec::new();
    for path in paths {
        let meta = std::fs::metadata(path)
            .map_err(|e| format!("cannot read `{}`: {e}", path.display()))?;
        if meta.is_dir() {
            let mut found: Vec<PathBuf> = walkdir::WalkDir::new(path)
                .into_iter()
                .filter_map(Result::ok)
                .filter(|e| e.file_type().is_file())
                .map(|e| e.into_path())
                .filter(|p| p.extension().is_some_and(|x| x == "sde"))
                .collect();
            found.sort();
            out.extend(found);
        } else {
            out.push(path.clone());
        }
    }
    Ok(out)
}
