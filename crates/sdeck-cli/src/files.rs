//! Finding model files and reading them as text, reporting what cannot be read.

use std::path::{Path, PathBuf};

/// A model file read from disk.
pub struct SourceText {
    /// The path as shown in outputs.
    pub path: String,
    /// The text; invalid UTF-8 is replaced (and reported through `invalid_utf8_at`).
    pub text: String,
    /// The byte offset of the first invalid UTF-8 sequence, if any.
    pub invalid_utf8_at: Option<usize>,
}

/// Expands files and folders into the list of model files, sorted per argument.
pub fn collect(paths: &[PathBuf]) -> Result<Vec<PathBuf>, String> {
    let mut out = Vec::new();
    for path in paths {
        let meta = std::fs::metadata(path)
            .map_err(|e| format!("cannot read `{}`: {e}", path.display()))?;
        if meta.is_dir() {
            let mut found: Vec<PathBuf> = walkdir::WalkDir::new(path)
                .follow_links(true)
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

/// Reads a file; text that is not UTF-8 is kept (lossily) and the offset reported.
pub fn read(path: &Path) -> Result<SourceText, String> {
    let bytes =
        std::fs::read(path).map_err(|e| format!("cannot read `{}`: {e}", path.display()))?;
    Ok(from_bytes(display(path), bytes))
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
