//! `sdeck check --fix`: applies the preferred fix of every finding of a file and writes
//! the file, or writes nothing when two of those fixes overlap.

use crate::files::{self, Target};
use sdeck_checks::{check, RuleSettings};
use sdeck_diagnostics::{apply_fixes, Diagnostic, Fix, FixConflict};
use sdeck_syntax::{Encoding, LineIndex};

/// What `--fix` did to one file.
pub enum FixOutcome {
    /// The file was rewritten with this many fixes (0: nothing to fix, nothing written).
    Fixed(usize),
    /// Nothing was written; the reason names the fixes that clash.
    Refused(String),
}

/// Fixes one file on disk. An error is a file that cannot be read or written.
pub fn fix_file(target: &Target) -> Result<FixOutcome, String> {
    let source = files::read(&target.path)?;
    if let Some(at) = source.invalid_utf8_at {
        return Ok(FixOutcome::Refused(format!(
            "the file is not valid UTF-8 (first bad byte at offset {at}); fixing it would \
             replace the bad bytes"
        )));
    }
    let default_settings = RuleSettings::default();
    let settings = target
        .project
        .as_ref()
        .map_or(&default_settings, |p| &p.settings);
    let result = check(&source.text, &files::stem(&source.path), settings);
    let chosen: Vec<(&Diagnostic, &Fix)> = result
        .diagnostics
        .iter()
        .filter_map(|d| Some((d, d.fixes.iter().find(|f| f.preferred)?)))
        .collect();
    if chosen.is_empty() {
        return Ok(FixOutcome::Fixed(0));
    }
    let fixes: Vec<&Fix> = chosen.iter().map(|(_, fix)| *fix).collect();
    match apply_fixes(&source.text, &fixes) {
        Ok(text) => {
            std::fs::write(&target.path, text)
                .map_err(|e| format!("cannot write `{}`: {e}", source.path))?;
            Ok(FixOutcome::Fixed(chosen.len()))
        }
        Err(conflict) => {
            let index = LineIndex::new(&source.text);
            let describe = |i: usize| match chosen.get(i) {
                Some((d, fix)) => {
                    let line = index
                        .line_col(&source.text, d.span.start, Encoding::Chars)
                        .line
                        + 1;
                    format!("\"{}\" ({} on line {line})", fix.title, d.rule)
                }
                None => "a fix".to_string(),
            };
            let reason = match conflict {
                FixConflict::Overlap { first, second } if first == second => {
                    format!("the edits of the fix {} overlap", describe(first))
                }
                FixConflict::Overlap { first, second } => format!(
                    "the fix {} overlaps the fix {}",
                    describe(first),
                    describe(second)
                ),
                FixConflict::OutsideText { fix } => {
                    format!("the fix {} edits outside the text", describe(fix))
                }
            };
            Ok(FixOutcome::Refused(reason))
        }
    }
}
