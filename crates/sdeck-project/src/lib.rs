//! The project file `sdeck.toml`: which project governs a path, and what it says.
//!
//! One resolver for every face of sdeck (the CLI and the language server call the same
//! functions), so a model is checked with the same settings wherever it is opened.
//!
//! - The project that governs a path is the **nearest** `sdeck.toml` at or above it: the
//!   file's own folder first, then each parent. Files are not merged: the nearest wins.
//! - `[rules]` maps rule names to `off`, `hint`, `info`, `warning` or `error`.
//! - `[files]` has `include` and `exclude`, lists of globs relative to the folder of the
//!   `sdeck.toml`. A path is excluded when it matches an `exclude` glob, or when `include`
//!   is given and it matches none of its globs. This holds for paths named explicitly too,
//!   so a pre-commit hook that passes every changed file behaves like a folder run.
//! - `[check] deny = "warnings" | "errors"` is the default of `sdeck check --deny`.
//! - An unknown table, key, rule name or level is an error naming the file and the key.
//!
//! ```
//! let dir = std::env::temp_dir().join(format!("sdeck-project-doc-{}", std::process::id()));
//! std::fs::create_dir_all(dir.join("flawed")).unwrap();
//! std::fs::write(
//!     dir.join("sdeck.toml"),
//!     "[rules]\nunused = \"off\"\n\n[files]\nexclude = [\"flawed/**\"]\n",
//! )
//! .unwrap();
//! let project = sdeck_project::find_project(&dir.join("rate.sde")).unwrap().unwrap();
//! assert!(project.is_excluded(&dir.join("flawed/feller.sde")));
//! assert!(!project.is_excluded(&dir.join("rate.sde")));
//! assert_eq!(
//!     project.settings.levels.get(&sdeck_diagnostics::RuleId::Unused),
//!     Some(&sdeck_checks::RuleLevel::Off)
//! );
//! std::fs::remove_dir_all(&dir).unwrap();
//! ```

use globset::{Glob, GlobBuilder, GlobSet, GlobSetBuilder};
use sdeck_checks::{Plausibility, RuleLevel, RuleSettings};
use sdeck_diagnostics::{rules, Severity};
use std::collections::HashMap;
use std::fmt;
use std::path::{Component, Path, PathBuf};
use std::sync::Arc;

/// The name of the project file.
pub const PROJECT_FILE_NAME: &str = "sdeck.toml";

/// Which findings make `sdeck check` exit with status 1.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum DenyLevel {
    /// Errors only (the default).
    Errors,
    /// Errors and warnings.
    Warnings,
}

/// A project file that could not be read or understood.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ProjectError {
    /// The `sdeck.toml` at fault.
    pub file: PathBuf,
    /// What is wrong, naming the key where there is one.
    pub message: String,
}

impl fmt::Display for ProjectError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.file.display(), self.message)
    }
}

impl std::error::Error for ProjectError {}

/// A parsed `sdeck.toml`.
#[derive(Clone, Debug)]
pub struct Project {
    /// The `sdeck.toml` itself (absolute, `.` and `..` removed).
    pub file: PathBuf,
    /// The folder that holds it; globs are relative to it.
    pub root: PathBuf,
    /// The per-rule levels of `[rules]`.
    pub settings: RuleSettings,
    /// `[check] deny`, when given.
    pub deny: Option<DenyLevel>,
    /// `[files] include`; `None` when absent (everything is included).
    include: Option<GlobSet>,
    /// `[files] exclude`.
    exclude: GlobSet,
}

impl Project {
    /// Reads and parses the project file at `file`.
    pub fn load(file: &Path) -> Result<Project, ProjectError> {
        let file = absolute(file);
        let text = std::fs::read_to_string(&file).map_err(|e| ProjectError {
            file: file.clone(),
            message: format!("cannot read the project file: {e}"),
        })?;
        let root = file.parent().map(Path::to_path_buf).unwrap_or_default();
        Project::parse(&text, file, root)
    }

    /// Parses the text of a project file; `file` is named in errors, `root` anchors the
    /// globs.
    pub fn parse(text: &str, file: PathBuf, root: PathBuf) -> Result<Project, ProjectError> {
        let fail = |message: String| ProjectError {
            file: file.clone(),
            message,
        };
        let table: toml::Table = text.parse().map_err(|e: toml::de::Error| {
            fail(format!("not valid TOML: {}", e.to_string().trim_end()))
        })?;
        let mut settings = RuleSettings::default();
        let mut deny = None;
        let mut include = None;
        let mut exclude = GlobSet::empty();
        for (key, value) in &table {
            match key.as_str() {
                "rules" => {
                    let plausibility = settings.plausibility;
                    settings = parse_rules(value).map_err(fail)?;
                    settings.plausibility = plausibility;
                }
                "plausibility" => settings.plausibility = parse_plausibility(value).map_err(fail)?,
                "files" => {
                    let files = value
                        .as_table()
                        .ok_or_else(|| fail("`files` must be a table: write `[files]`".to_string()))?;
                    for (key, value) in files {
                        match key.as_str() {
                            "include" => include = Some(parse_globs("files.include", value).map_err(fail)?),
                            "exclude" => exclude = parse_globs("files.exclude", value).map_err(fail)?,
                            other => {
                                return Err(fail(format!(
                                    "unknown key `files.{other}`; the keys of [files] are `include` and `exclude`"
                                )))
                            }
                        }
                    }
                }
                "check" => {
                    let check = value
                        .as_table()
                        .ok_or_else(|| fail("`check` must be a table: write `[check]`".to_string()))?;
                    for (key, value) in check {
                        match key.as_str() {
                            "deny" => deny = Some(parse_deny(value).map_err(fail)?),
                            other => {
                                return Err(fail(format!(
                                    "unknown key `check.{other}`; the only key of [check] is `deny`"
                                )))
                            }
                        }
                    }
                }
                other => {
                    return Err(fail(format!(
                        "unknown key `{other}`; a project file has the tables [rules], [files], [check] \
                         and [plausibility]"
                    )))
                }
            }
        }
        Ok(Project {
            file,
            root,
            settings,
            deny,
            include,
            exclude,
        })
    }

    /// Whether `path` is left out of checks by `[files]`: it matches an `exclude` glob, or
    /// `include` is given and it matches none. A path outside the project's folder is
    /// never excluded by it.
    pub fn is_excluded(&self, path: &Path) -> bool {
        let path = absolute(path);
        let Ok(relative) = path.strip_prefix(&self.root) else {
            return false;
        };
        // A glob naming a folder (`flawed`, `flawed/`) excludes what lies under it, as
        // does `flawed/**`: test the path and each of its parent folders.
        let mut candidate = Some(relative);
        while let Some(part) = candidate {
            if part.as_os_str().is_empty() {
                break;
            }
            if self.exclude.is_match(part) {
                return true;
            }
            candidate = part.parent();
        }
        match &self.include {
            Some(include) => !include.is_match(relative),
            None => false,
        }
    }

    /// Whether a folder is left out of a folder search by this project's `exclude` (the
    /// project of the folder's parent decides: a folder's own sdeck.toml governs what is
    /// inside it, not whether it is searched). `include` applies to files only.
    pub fn excludes_folder(&self, folder: &Path) -> bool {
        let folder = absolute(folder);
        match folder.strip_prefix(&self.root) {
            Ok(relative) if !relative.as_os_str().is_empty() => self.exclude.is_match(relative),
            _ => false,
        }
    }

    /// Whether `[check] deny = "warnings"`: warnings make `sdeck check` fail.
    pub fn deny_warnings(&self) -> bool {
        self.deny == Some(DenyLevel::Warnings)
    }
}

fn parse_rules(value: &toml::Value) -> Result<RuleSettings, String> {
    let table = value
        .as_table()
        .ok_or_else(|| "`rules` must be a table: write `[rules]`".to_string())?;
    let mut settings = RuleSettings::default();
    for (name, level) in table {
        let Some(rule) = rules::by_name(name) else {
            let hint = rules::closest(name)
                .map(|r| format!("did you mean `{}`? ", r.name))
                .unwrap_or_default();
            return Err(format!(
                "unknown rule `rules.{name}`; {hint}`sdeck explain` lists the rules"
            ));
        };
        let text = level.as_str().ok_or_else(|| {
            format!("`rules.{name}` must be a string: \"off\", \"hint\", \"info\", \"warning\" or \"error\"")
        })?;
        let level = match text {
            "off" => RuleLevel::Off,
            other => match Severity::parse(other) {
                Some(severity) => RuleLevel::On(severity),
                None => {
                    return Err(format!(
                        "`rules.{name} = \"{other}\"` is not a level; write \"off\", \"hint\", \"info\", \"warning\" or \"error\""
                    ))
                }
            },
        };
        settings.levels.insert(rule.id, level);
    }
    Ok(settings)
}

fn parse_globs(key: &str, value: &toml::Value) -> Result<GlobSet, String> {
    let list = value
        .as_array()
        .ok_or_else(|| format!("`{key}` must be a list of globs, e.g. [\"flawed/**\"]"))?;
    let mut builder = GlobSetBuilder::new();
    for item in list {
        let text = item
            .as_str()
            .ok_or_else(|| format!("`{key}` must hold strings, found {item}"))?;
        let invalid = |e: globset::Error| format!("`{key}`: the glob \"{text}\" is not valid: {e}");
        let (glob, folder) = compile_glob(text).map_err(invalid)?;
        builder.add(glob);
        if let Some(folder) = folder {
            builder.add(folder);
        }
    }
    builder
        .build()
        .map_err(|e| format!("`{key}`: the globs cannot be compiled: {e}"))
}

/// One glob of `[files]`: `*` and `?` stay within a path segment, `**` crosses them. A
/// leading `./` and a trailing `/` are dropped so `./flawed/` means the folder `flawed`.
/// For `DIR/**` the folder `DIR` itself is returned too, so a folder search can skip it
/// without entering it.
fn compile_glob(text: &str) -> Result<(Glob, Option<Glob>), globset::Error> {
    let trimmed = text.trim();
    let trimmed = trimmed.strip_prefix("./").unwrap_or(trimmed);
    let trimmed = trimmed.trim_end_matches('/');
    let build = |pattern: &str| {
        GlobBuilder::new(pattern)
            .literal_separator(true)
            .backslash_escape(true)
            .build()
    };
    let folder = match trimmed.strip_suffix("/**") {
        Some(prefix) if !prefix.is_empty() => Some(build(prefix)?),
        _ => None,
    };
    Ok((build(trimmed)?, folder))
}

fn parse_deny(value: &toml::Value) -> Result<DenyLevel, String> {
    match value.as_str() {
        Some("errors") => Ok(DenyLevel::Errors),
        Some("warnings") => Ok(DenyLevel::Warnings),
        Some(other) => Err(format!(
            "`check.deny = \"{other}\"` is not a level; write \"errors\" or \"warnings\""
        )),
        None => Err("`check.deny` must be the string \"errors\" or \"warnings\"".to_string()),
    }
}

/// The absolute form of `path`, with `.` and `..` removed lexically (symbolic links are
/// not followed, so a path keeps the project of the folder it is written under).
pub fn absolute(path: &Path) -> PathBuf {
    let joined = if path.is_absolute() {
        path.to_path_buf()
    } else {
        match std::env::current_dir() {
            Ok(dir) => dir.join(path),
            Err(_) => path.to_path_buf(),
        }
    };
    let mut out = PathBuf::new();
    for component in joined.components() {
        match component {
            Component::CurDir => {}
            Component::ParentDir => {
                out.pop();
            }
            other => out.push(other),
        }
    }
    out
}

/// The folder where the search for `start`'s project begins: `start` itself when it is
/// a folder, otherwise the folder that holds it (the file need not exist: an unsaved
/// buffer or `--stdin-name` is governed by the folder it would be saved in).
fn search_start(start: &Path) -> PathBuf {
    let start = absolute(start);
    if start.is_dir() {
        start
    } else {
        start.parent().map(Path::to_path_buf).unwrap_or(start)
    }
}

/// The project that governs `start` (a file or a folder): the nearest `sdeck.toml` at or
/// above it. `Ok(None)` when there is none; an error when the nearest one is broken.
pub fn find_project(start: &Path) -> Result<Option<Project>, ProjectError> {
    let folder = search_start(start);
    for dir in folder.ancestors() {
        let candidate = dir.join(PROJECT_FILE_NAME);
        if candidate.is_file() {
            return Project::load(&candidate).map(Some);
        }
    }
    Ok(None)
}

/// The rule settings for `path`: those of its project, or the defaults when there is no
/// project file, or when the nearest one is broken (call [`find_project`] to learn why).
pub fn settings_for(path: &Path) -> RuleSettings {
    match find_project(path) {
        Ok(Some(project)) => project.settings,
        Ok(None) | Err(_) => RuleSettings::default(),
    }
}

/// Finds projects for many paths, reading each folder's `sdeck.toml` once. For runs
/// over thousands of files in a few folders.
#[derive(Default)]
pub struct ProjectCache {
    by_folder: HashMap<PathBuf, Result<Option<Arc<Project>>, ProjectError>>,
}

impl ProjectCache {
    pub fn new() -> ProjectCache {
        ProjectCache::default()
    }

    /// The project that governs `path`, as [`find_project`] finds it.
    pub fn project_for(&mut self, path: &Path) -> Result<Option<Arc<Project>>, ProjectError> {
        let folder = search_start(path);
        self.for_folder(&folder)
    }

    /// The project that governs the files of `folder` (no check whether it is a folder).
    pub fn project_for_folder(
        &mut self,
        folder: &Path,
    ) -> Result<Option<Arc<Project>>, ProjectError> {
        self.for_folder(&absolute(folder))
    }

    fn for_folder(&mut self, folder: &Path) -> Result<Option<Arc<Project>>, ProjectError> {
        if let Some(known) = self.by_folder.get(folder) {
            return known.clone();
        }
        let candidate = folder.join(PROJECT_FILE_NAME);
        let found = if candidate.is_file() {
            Project::load(&candidate).map(|p| Some(Arc::new(p)))
        } else {
            match folder.parent() {
                Some(parent) => self.for_folder(parent),
                None => Ok(None),
            }
        };
        self.by_folder.insert(folder.to_path_buf(), found.clone());
        found
    }
}

/// `[plausibility]`: the thresholds of `implausible-value`. Volatilities and levels are
/// written `"200%"` or as a fraction (`2.0`); half-lives as `"1 day"`, `"100 year"`.
fn parse_plausibility(value: &toml::Value) -> Result<Plausibility, String> {
    let table = value
        .as_table()
        .ok_or_else(|| "`plausibility` must be a table: write `[plausibility]`".to_string())?;
    let mut limits = Plausibility::default();
    for (key, value) in table {
        let slot = match key.as_str() {
            "max-volatility" => &mut limits.max_volatility,
            "max-rate-level" => &mut limits.max_rate_level,
            "min-half-life" => &mut limits.min_half_life,
            "max-half-life" => &mut limits.max_half_life,
            other => {
                return Err(format!(
                    "unknown key `plausibility.{other}`; the keys of [plausibility] are \
                     `max-volatility`, `max-rate-level`, `min-half-life` and `max-half-life`"
                ))
            }
        };
        let parsed = if key.ends_with("half-life") {
            parse_duration(value)
        } else {
            parse_fraction(value)
        };
        *slot = parsed.map_err(|why| format!("`plausibility.{key}`: {why}"))?;
    }
    if limits.min_half_life > limits.max_half_life {
        return Err("`plausibility.min-half-life` is longer than `max-half-life`".to_string());
    }
    Ok(limits)
}

/// `"200%"`, `"150bp"` or a plain positive number (a fraction).
fn parse_fraction(value: &toml::Value) -> Result<f64, String> {
    let number = match value {
        toml::Value::Float(x) => Some(*x),
        toml::Value::Integer(n) => Some(*n as f64),
        toml::Value::String(text) => sdeck_syntax::numbers::scaled_number(text).ok(),
        _ => None,
    };
    number.filter(|x| x.is_finite() && *x > 0.0).ok_or_else(|| {
        "write a positive percentage such as \"200%\", or a fraction such as 2.0".to_string()
    })
}

/// `"1 day"`, `"100 year"`: a positive number and a time unit, in years.
fn parse_duration(value: &toml::Value) -> Result<f64, String> {
    let units = sdeck_units::time_units::TIME_UNITS.join(", ");
    let hint = || format!("write a positive number and a time unit ({units}), such as \"1 day\"");
    let text = value.as_str().ok_or_else(hint)?;
    let mut words = text.split_whitespace();
    let (Some(number), Some(unit), None) = (words.next(), words.next(), words.next()) else {
        return Err(hint());
    };
    let number: f64 = number.parse().map_err(|_| hint())?;
    let years = sdeck_units::time_units::time_unit_years(unit).ok_or_else(hint)?;
    let duration = number * years;
    (duration.is_finite() && duration > 0.0)
        .then_some(duration)
        .ok_or_else(hint)
}
