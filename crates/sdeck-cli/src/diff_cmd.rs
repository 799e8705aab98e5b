//! `sdeck diff OLD NEW` and `sdeck diff --since REV [PATH...]`: what a change of a model's
//! text does to its derived law. The old texts of `--since` come from the git command line.

use clap::{Args, ValueEnum};
use sdeck_report::diff::{diff, to_json, to_markdown, to_text, ModelDiff, Side};
use std::path::{Path, PathBuf};
use std::process::{Command, ExitCode};

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Format {
    Text,
    Markdown,
    Json,
}

#[derive(Args)]
pub struct DiffArgs {
    /// OLD.sde NEW.sde; with --since, the files or folders to compare (default: all).
    paths: Vec<PathBuf>,
    /// Compare every model changed since this git revision (working tree against REV).
    #[arg(long, value_name = "REV")]
    since: Option<String>,
    #[arg(long, value_enum, default_value_t = Format::Text)]
    format: Format,
    /// Exit 1 when any derived figure moves by more than PCT per cent (or appears,
    /// vanishes, or leaves zero).
    #[arg(long, value_name = "PCT")]
    max_change: Option<f64>,
}

/// One version of a model, checked under the rule settings of the project of `path`.
fn side(path: &Path, text: String) -> Result<Side, String> {
    let settings = crate::files::settings_of(path)?;
    let source = crate::files::from_bytes(path.display().to_string(), text.into_bytes());
    let shown = source.text.clone();
    let (_, check) = crate::check::check_source(source, &settings);
    Ok(Side::new(&shown, &check))
}

fn read_side(path: &Path) -> Result<Side, String> {
    let source = crate::files::read(path)?;
    side(path, source.text)
}

fn git(root: Option<&Path>, args: &[&str]) -> Result<Vec<u8>, String> {
    let mut command = Command::new("git");
    if let Some(root) = root {
        command.current_dir(root);
    }
    let out = command
        .args(args)
        .output()
        .map_err(|e| format!("cannot run git: {e}; --since needs git on the PATH"))?;
    if !out.status.success() {
        return Err(format!(
            "git {} failed: {}",
            args.join(" "),
            String::from_utf8_lossy(&out.stderr).trim()
        ));
    }
    Ok(out.stdout)
}

/// Every model changed between `rev` and the working tree under `paths`.
fn since(rev: &str, paths: &[PathBuf]) -> Result<Vec<ModelDiff>, String> {
    let top = git(None, &["rev-parse", "--show-toplevel"])?;
    let root = PathBuf::from(String::from_utf8_lossy(&top).trim());
    let here =
        std::env::current_dir().map_err(|e| format!("cannot read the current folder: {e}"))?;
    let mut args: Vec<String> = ["diff", "--name-status", "--no-renames", "-z", rev, "--"]
        .iter()
        .map(|s| s.to_string())
        .collect();
    if paths.is_empty() {
        args.push(here.display().to_string());
    }
    args.extend(paths.iter().map(|p| here.join(p).display().to_string()));
    let arg_refs: Vec<&str> = args.iter().map(String::as_str).collect();
    let listing = git(Some(&root), &arg_refs)?;
    let fields: Vec<String> = listing
        .split(|b| *b == 0)
        .map(|f| String::from_utf8_lossy(f).into_owned())
        .collect();
    let mut projects = sdeck_project::ProjectCache::new();
    let mut out = Vec::new();
    for pair in fields.chunks(2) {
        let [status, name] = pair else { continue };
        if !name.ends_with(".sde") {
            continue;
        }
        let path = root.join(name);
        let shown = path
            .strip_prefix(&here)
            .map_or_else(|_| name.clone(), |p| p.display().to_string());
        let excluded = projects
            .project_for(&path)
            .map_err(crate::files::describe_project_error)?
            .is_some_and(|p| p.is_excluded(&path));
        if excluded {
            continue;
        }
        let old = if status.starts_with('A') {
            None
        } else {
            let text = git(Some(&root), &["show", &format!("{rev}:{name}")])?;
            Some(side(&path, String::from_utf8_lossy(&text).into_owned())?)
        };
        let new = if status.starts_with('D') {
            None
        } else {
            Some(read_side(&path)?)
        };
        out.push(diff(&shown, old.as_ref(), new.as_ref()));
    }
    Ok(out)
}

pub fn run(args: DiffArgs) -> ExitCode {
    let diffs = match &args.since {
        Some(rev) => since(rev, &args.paths),
        None => match args.paths.as_slice() {
            [old, new] => read_side(old).and_then(|o| {
                let n = read_side(new)?;
                Ok(vec![diff(&new.display().to_string(), Some(&o), Some(&n))])
            }),
            _ => Err("give two files (sdeck diff OLD.sde NEW.sde) or a revision \
                      (sdeck diff --since REV [PATH...])"
                .to_string()),
        },
    };
    let diffs = match diffs {
        Ok(d) => d,
        Err(message) => {
            eprintln!("sdeck: {message}");
            return ExitCode::from(2);
        }
    };
    if let Some(pct) = args.max_change {
        if !(pct.is_finite() && pct >= 0.0) {
            eprintln!("sdeck: --max-change must be a percentage, 0 or more");
            return ExitCode::from(2);
        }
    }
    match args.format {
        Format::Text => out!("{}", to_text(&diffs)),
        Format::Markdown => out!("{}", to_markdown(&diffs)),
        Format::Json => match serde_json::to_string_pretty(&to_json(&diffs)) {
            Ok(text) => outln!("{text}"),
            Err(e) => {
                eprintln!("sdeck: cannot write the diff: {e}");
                return ExitCode::from(2);
            }
        },
    }
    if let Some(pct) = args.max_change {
        let over: Vec<String> = diffs
            .iter()
            .flat_map(|d| {
                d.exceeding(pct)
                    .into_iter()
                    .map(move |f| format!("{}: {} {}", d.path, f.factor, f.figure))
            })
            .collect();
        if !over.is_empty() {
            eprintln!(
                "sdeck: {} figure(s) moved by more than {pct}%: {}",
                over.len(),
                over.join(", ")
            );
            return ExitCode::from(1);
        }
    }
    ExitCode::SUCCESS
}
