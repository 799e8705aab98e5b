//! The one loader of the commands: finding model files with the project that governs
//! each, and reading them as text, reporting what cannot be read. Every command goes
//! through it, so a broken `sdeck.toml` is the same error (exit status 2) for all, and
//! folders are searched with the same exclusions.

use sdeck_project::{Project, ProjectCache, ProjectError};
use std::collections::HashSet;
use std::io::Read;
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// A model file read from disk or from standard input.
pub struct SourceText {
    /// The path as shown in outputs.
    pub path: String,
    /// The text; invalid UTF-8 is replaced (and reported through `invalid_utf8_at`).
    pub text: String,
    /// The byte offset of the first invalid UTF-8 sequence, if any.
    pub invalid_utf8_at: Option<usize>,
}

/// A file to check and the project that governs it.
pub struct Target {
    pub path: PathBuf,
    pub project: Option<Arc<Project>>,
}

/// Expands files and folders into the model files to check, each with its project.
///
/// - A path named on the command line (file or folder) is governed by its nearest
///   `sdeck.toml`; a named file that this project excludes is dropped, so a hook that
///   passes changed files behaves like a run over the folder.
/// - A folder is searched recursively for `*.sde`. Each sub-folder is first tested
///   against the project of the folder that holds it: one it excludes is not entered,
///   whatever project files lie inside. Each file found is then tested against its own
///   (nearest) project. Hidden folders (`.git`, ...) are skipped. Files are sorted within
///   each argument.
/// - A file named explicitly is checked whatever its extension.
/// - A file reached twice is checked once, under the first path that reached it.
///
/// A path that does not exist or a broken project file is an error.
pub fn collect(paths: &[PathBuf], projects: &mut ProjectCache) -> Result<Vec<Target>, String> {
    let mut out = Vec::new();
    // A file reached twice (named, and found in a named folder) is checked once.
    let mut seen: HashSet<PathBuf> = HashSet::new();
    for path in paths {
        let meta = std::fs::metadata(path)
            .map_err(|e| format!("cannot read `{}`: {e}", path.display()))?;
        if !meta.is_dir() {
            let project = projects.project_for(path).map_err(describe_project_error)?;
            if !project.as_ref().is_some_and(|p| p.is_excluded(path))
                && seen.insert(sdeck_project::absolute(path))
            {
                out.push(Target {
                    path: path.clone(),
                    project,
                });
            }
            continue;
        }
        let mut broken: Option<ProjectError> = None;
        let mut found: Vec<(PathBuf, Option<Arc<Project>>)> = Vec::new();
        let walker = walkdir::WalkDir::new(path)
            .follow_links(true)
            .into_iter()
            .filter_entry(|entry| {
                if entry.depth() == 0 {
                    return true;
                }
                if !entry.file_type().is_dir() {
                    return true;
                }
                if is_hidden(entry.file_name()) {
                    return false;
                }
                let Some(parent) = entry.path().parent() else {
                    return true;
                };
                match projects.project_for_folder(parent) {
                    Ok(Some(project)) => !project.excludes_folder(entry.path()),
                    Ok(None) => true,
                    Err(error) => {
                        broken.get_or_insert(error);
                        false
                    }
                }
            });
        let mut files: Vec<PathBuf> = walker
            .filter_map(Result::ok)
            .filter(|e| e.file_type().is_file())
            .map(walkdir::DirEntry::into_path)
            .filter(|p| p.extension().is_some_and(|x| x == "sde"))
            .collect();
        if let Some(error) = broken {
            return Err(describe_project_error(error));
        }
        files.sort();
        for file in files {
            let folder = file.parent().unwrap_or(Path::new("."));
            let project = projects
                .project_for_folder(folder)
                .map_err(describe_project_error)?;
            if !project.as_ref().is_some_and(|p| p.is_excluded(&file))
                && seen.insert(sdeck_project::absolute(&file))
            {
                found.push((file, project));
            }
        }
        out.extend(
            found
                .into_iter()
                .map(|(path, project)| Target { path, project }),
        );
    }
    Ok(out)
}

fn is_hidden(name: &std::ffi::OsStr) -> bool {
    name.to_str()
        .is_some_and(|n| n.starts_with('.') && n != "." && n != "..")
}

/// The project that governs one file named on the command line (its nearest
/// `sdeck.toml`), for the commands that read one model. A broken project file is an error,
/// with the same message [`collect`] gives.
pub fn project_of(path: &Path) -> Result<Option<Arc<Project>>, String> {
    ProjectCache::new()
        .project_for(path)
        .map_err(describe_project_error)
}

/// The rule settings of one file named on the command line: its project's, or the
/// defaults when no project governs it. A broken project file is an error.
pub fn settings_of(path: &Path) -> Result<sdeck_checks::RuleSettings, String> {
    Ok(project_of(path)?
        .map(|project| project.settings.clone())
        .unwrap_or_default())
}

/// The message for a broken project file.
pub fn describe_project_error(error: ProjectError) -> String {
    format!("broken project file {error}")
}

/// Reads a file; text that is not UTF-8 is kept (lossily) and the offset reported.
/// At most one byte past [`sdeck_syntax::MAX_FILE_BYTES`] is read: enough for the
/// analysis to refuse the file, never a whole huge file in memory.
pub fn read(path: &Path) -> Result<SourceText, String> {
    let cannot = |e: std::io::Error| format!("cannot read `{}`: {e}", path.display());
    let file = std::fs::File::open(path).map_err(cannot)?;
    let size = file.metadata().map(|m| m.len()).unwrap_or(0);
    Ok(from_bytes(
        display(path),
        read_bounded_sized(file, size).map_err(cannot)?,
    ))
}

/// Reads standard input to its end (or just past the size limit), shown as `name`.
pub fn read_stdin(name: &str) -> Result<SourceText, String> {
    let bytes = read_bounded(std::io::stdin().lock())
        .map_err(|e| format!("cannot read standard input: {e}"))?;
    Ok(from_bytes(name.to_string(), bytes))
}

pub fn read_bounded(reader: impl Read) -> std::io::Result<Vec<u8>> {
    read_bounded_sized(reader, 0)
}

/// [`read_bounded`] into room for `expected` bytes (a file's size), so that reading a
/// large file does not grow the buffer by doubling.
pub fn read_bounded_sized(reader: impl Read, expected: u64) -> std::io::Result<Vec<u8>> {
    let limit = sdeck_syntax::MAX_FILE_BYTES as u64 + 1;
    // One byte more than the file, so that `read_to_end` sees the end without growing.
    let room = usize::try_from(expected.min(limit).saturating_add(1)).unwrap_or(0);
    let mut bytes = Vec::with_capacity(room);
    reader.take(limit).read_to_end(&mut bytes)?;
    Ok(bytes)
}

pub fn from_bytes(path: String, bytes: Vec<u8>) -> SourceText {
    match String::from_utf8(bytes) {
        Ok(text) => SourceText {
            path,
            text,
            invalid_utf8_at: None,
        },
        Err(e) => {
            let at = e.utf8_error().valid_up_to();
            let text = String::from_utf8_lossy(e.as_bytes()).into_owned();
            SourceText {
                path,
                text,
                invalid_utf8_at: Some(at),
            }
        }
    }
}

pub fn display(path: &Path) -> String {
    path.to_string_lossy().into_owned()
}

/// The model's default name: the file's stem.
pub fn stem(path: &str) -> String {
    Path::new(path)
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "model".to_string())
}
