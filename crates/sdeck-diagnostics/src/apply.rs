//! Applying fixes to a text: every edit of every fix at once, or nothing when two edits
//! touch the same bytes (the order of their results would be a guess).

use crate::{Fix, Span};

/// Why a set of fixes was not applied. Fixes are named by their index in the slice given
/// to [`apply_fixes`].
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum FixConflict {
    /// An edit of fix `first` and an edit of fix `second` overlap (or insert at the same
    /// place); `first` may equal `second` when one fix's own edits overlap.
    Overlap { first: usize, second: usize },
    /// An edit of fix `fix` lies outside the text or splits a character.
    OutsideText { fix: usize },
}

/// The text with every edit of `fixes` applied, or the first conflict among them.
///
/// ```
/// use sdeck_diagnostics::{apply_fixes, Fix, FixConflict, TextEdit};
/// let fix = |span: std::ops::Range<usize>, text: &str| Fix {
///     title: String::new(),
///     edits: vec![TextEdit { span, new_text: text.to_string() }],
///     preferred: true,
/// };
/// let (a, b) = (fix(0..3, "one"), fix(4..7, "two"));
/// assert_eq!(apply_fixes("uno dos", &[&a, &b]), Ok("one two".to_string()));
/// let c = fix(2..5, "x");
/// assert_eq!(
///     apply_fixes("uno dos", &[&a, &c]),
///     Err(FixConflict::Overlap { first: 0, second: 1 })
/// );
/// ```
pub fn apply_fixes(text: &str, fixes: &[&Fix]) -> Result<String, FixConflict> {
    let mut edits: Vec<(&Span, &str, usize)> = Vec::new();
    for (index, fix) in fixes.iter().enumerate() {
        for edit in &fix.edits {
            let inside = edit.span.start <= edit.span.end && text.get(edit.span.clone()).is_some();
            if !inside {
                return Err(FixConflict::OutsideText { fix: index });
            }
            edits.push((&edit.span, edit.new_text.as_str(), index));
        }
    }
    edits.sort_by_key(|(span, _, index)| (span.start, span.end, *index));
    for pair in edits.windows(2) {
        let [(before, _, first), (after, _, second)] = pair else {
            continue;
        };
        // Two insertions at one place, or a replacement reaching into the next edit.
        let same_insertion_point =
            before.is_empty() && after.is_empty() && before.start == after.start;
        if before.end > after.start || same_insertion_point {
            return Err(FixConflict::Overlap {
                first: *first,
                second: *second,
            });
        }
    }
    let mut out = String::with_capacity(text.len());
    let mut at = 0;
    for (span, new_text, _) in edits {
        out.push_str(&text[at..span.start]);
        out.push_str(new_text);
        at = span.end;
    }
    out.push_str(&text[at..]);
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::TextEdit;

    fn fix(edits: &[(Span, &str)]) -> Fix {
        Fix {
            title: "t".to_string(),
            edits: edits
                .iter()
                .map(|(span, text)| TextEdit {
                    span: span.clone(),
                    new_text: text.to_string(),
                })
                .collect(),
            preferred: true,
        }
    }

    #[test]
    fn edits_apply_from_any_order_and_insertions_keep_their_place() {
        let a = fix(&[(6..6, "big "), (0..5, "hello")]);
        let b = fix(&[(10..11, "!")]);
        assert_eq!(
            apply_fixes("howdy cats.", &[&b, &a]),
            Ok("hello big cats!".to_string())
        );
        // An insertion where a replacement ends does not overlap it.
        let c = fix(&[(0..5, "hi"), (5..5, ",")]);
        assert_eq!(
            apply_fixes("howdy cats.", &[&c]),
            Ok("hi, cats.".to_string())
        );
    }

    #[test]
    fn overlapping_or_misplaced_edits_apply_nothing() {
        let a = fix(&[(0..5, "x")]);
        let b = fix(&[(4..6, "y")]);
        assert_eq!(
            apply_fixes("howdy cats", &[&a, &b]),
            Err(FixConflict::Overlap {
                first: 0,
                second: 1
            })
        );
        let c = fix(&[(3..3, "p")]);
        let d = fix(&[(3..3, "q")]);
        assert_eq!(
            apply_fixes("howdy cats", &[&c, &d]),
            Err(FixConflict::Overlap {
                first: 0,
                second: 1
            })
        );
        let e = fix(&[(8..20, "z")]);
        assert_eq!(
            apply_fixes("howdy cats", &[&a, &e]),
            Err(FixConflict::OutsideText { fix: 1 })
        );
        // A span that splits `κ` is outside the text's characters.
        let f = fix(&[(1..2, "k")]);
        assert_eq!(
            apply_fixes("κ", &[&f]),
            Err(FixConflict::OutsideText { fix: 0 })
        );
    }
}
