//! Writing estimates back into a model file: the number of each `param` declaration is
//! replaced in its declared unit and written style (plain, `%`, `bp`), rounded to two
//! digits below the standard error's first; the trailing comment (the parameter's
//! description) gains a note of when, from which data and with which standard error the
//! value was fitted, replacing an earlier such note. Everything else (other comments,
//! units, bounds) stays as written; a file in the formatter's layout is re-aligned by the
//! formatter.

use sdeck_semantics::{analyze, Model, ParamId};
use sdeck_syntax::ast::StatementKind;

/// One value to write, clock units.
#[derive(Clone, Debug, PartialEq)]
pub struct Rewrite {
    /// The parameter written.
    pub param: ParamId,
    pub value: f64,
    pub se: f64,
}

/// What the comment says besides the standard error.
#[derive(Clone, Debug, PartialEq)]
pub struct Note {
    /// YYYY-MM-DD.
    pub date: String,
    /// The data file as it should be named.
    pub data: String,
}

/// The word that opens the note; an earlier note starting with it is replaced.
const NOTE_START: &str = "fitted ";

/// `x` with enough decimals to show two digits of `se`, trailing zeros trimmed.
fn rounded(x: f64, se: f64, extra: i32) -> String {
    let decimals = if se.is_finite() && se > 0.0 {
        (1 - se.log10().floor() as i32 + extra).clamp(0, 17) as usize
    } else {
        (6 + extra).clamp(0, 17) as usize
    };
    let s = format!("{x:.decimals$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" {
        "0".to_string()
    } else {
        s
    }
}

/// The text of a number in the style of `original` (`%`, `bp` or plain).
fn styled(original: &str, written: f64, se: f64, extra: i32) -> String {
    if original.ends_with('%') {
        format!("{}%", rounded(written * 100.0, se * 100.0, extra))
    } else if original.ends_with("bp") {
        format!("{}bp", rounded(written * 10_000.0, se * 10_000.0, extra))
    } else {
        rounded(written, se, extra)
    }
}

/// The description with the note replaced or appended.
fn described(existing: Option<&str>, note: &str) -> String {
    let kept = existing.map(str::trim).map(|text| {
        if text.starts_with(NOTE_START) {
            ""
        } else if let Some(i) = text.find(&format!("; {NOTE_START}")) {
            &text[..i]
        } else {
            text
        }
    });
    match kept {
        Some(k) if !k.is_empty() => format!("{k}; {note}"),
        _ => note.to_string(),
    }
}

/// An edit of the source: the bytes replaced and their replacement.
type Edit = (std::ops::Range<usize>, String);

/// The rewritten file, or why nothing may be written (syntax errors, an estimate that
/// breaks a declared bound, a result that does not read back cleanly).
pub fn rewrite(
    source: &str,
    name: &str,
    model: &Model,
    rewrites: &[Rewrite],
    note: &Note,
) -> Result<String, String> {
    let before = analyze(source, name);
    if before.has_errors() {
        return Err("the model has errors".to_string());
    }
    let file = &before.file;
    let mut edits: Vec<Edit> = Vec::new();
    for r in rewrites {
        let p = model
            .params
            .by_id(r.param)
            .ok_or_else(|| "an estimate names no parameter of the model".to_string())?;
        if let Some(bound) = &p.bound {
            if !bound.contains(r.value) {
                return Err(format!(
                    "the estimate of {} ({} in its declared unit) breaks its declared bound",
                    p.name,
                    r.value / p.scale
                ));
            }
        }
        let statement = file
            .statements
            .iter()
            .find(|s| matches!(&s.kind, StatementKind::Param(d) if d.name.name == p.name))
            .ok_or_else(|| format!("the declaration of {} is not in the file", p.name))?;
        let StatementKind::Param(declaration) = &statement.kind else {
            continue;
        };
        let Some(number) = declaration.literal() else {
            return Err(format!(
                "{} is written as an expression of other parameters (`{}`); its value follows \
                 them and is not rewritten",
                p.name,
                source.get(declaration.value_span()).unwrap_or("").trim()
            ));
        };
        let (written, se) = (r.value / p.scale, r.se / p.scale);
        let original = number.text.as_str();
        let text = keeping_bound(original, written, se, p);
        edits.push(number_edit(source, number.span.clone(), text));
        let unit = p
            .unit_text
            .as_deref()
            .map(|u| format!(" [{u}]"))
            .unwrap_or_default();
        let note_text = format!(
            "{NOTE_START}{} from {}, se {}{unit}",
            note.date,
            note.data,
            styled(original, se, se, 0)
        );
        edits.extend(note_edit(source, file, &statement.span, &note_text));
    }
    let text = applied(source, edits)?;
    reads_back(&text, name, model, rewrites)?;
    Ok(text)
}

/// The text of the estimate `written` (declared unit) in the style of `original`, with
/// more decimals until the rounded value keeps the parameter's bound (0 for a `> 0`).
fn keeping_bound(original: &str, written: f64, se: f64, p: &sdeck_semantics::Param) -> String {
    let mut text = styled(original, written, se, 0);
    for extra in 1..12 {
        let value = sdeck_syntax::parse(&format!("param x = {text}\n"))
            .statements
            .first()
            .and_then(|s| match &s.kind {
                StatementKind::Param(d) => d.literal().map(|n| n.value * p.scale),
                _ => None,
            });
        if value.is_some_and(|v| p.bound.as_ref().is_none_or(|b| b.contains(v))) {
            break;
        }
        text = styled(original, written, se, extra);
    }
    text
}

/// The edit writing `text` over the number at `span`. It keeps the columns of a
/// hand-aligned file: the spaces after the number absorb the change of width (at least
/// one stays).
fn number_edit(source: &str, span: std::ops::Range<usize>, text: String) -> Edit {
    let after = &source[span.end..];
    let spaces = after.chars().take_while(|c| *c == ' ').count();
    let at_line_end = matches!(after[spaces..].chars().next(), None | Some('\n' | '\r'));
    let spaces = if at_line_end { 0 } else { spaces };
    let old_width = span.end - span.start + spaces;
    let padded = if spaces > 0 {
        let pad = old_width.saturating_sub(text.len()).max(1);
        format!("{text}{}", " ".repeat(pad))
    } else {
        text
    };
    (span.start..span.end + spaces, padded)
}

/// The edit writing the note into the trailing comment of the statement at `statement`
/// (after its description, replacing an earlier note), or a new comment; none when the
/// comment is a directive (`# sdeck: ...`, `# expect: ...`), which is not a description
/// and is left alone (a line holds one comment).
fn note_edit(
    source: &str,
    file: &sdeck_syntax::ast::SourceFile,
    statement: &std::ops::Range<usize>,
    note_text: &str,
) -> Option<Edit> {
    let line_end = source[statement.end..]
        .find('\n')
        .map(|i| statement.end + i)
        .unwrap_or(source.len());
    let trailing = file
        .comments
        .iter()
        .find(|c| c.trailing && c.span.start >= statement.end && c.span.start <= line_end);
    let directive = |text: &str| {
        let t = text.trim();
        ["sdeck:", "expect:", "expect-next-line:"]
            .iter()
            .any(|d| t.starts_with(d))
    };
    match trailing {
        Some(comment) if directive(&comment.text) => None,
        Some(comment) => {
            let text = described(Some(&comment.text), note_text);
            Some((comment.span.clone(), format!("# {text}")))
        }
        None => {
            let end = source[..line_end].trim_end_matches([' ', '\r']).len();
            Some((end..end, format!("  # {note_text}")))
        }
    }
}

/// `source` with the edits applied, re-laid out by the formatter if it was in its
/// layout before.
fn applied(source: &str, mut edits: Vec<Edit>) -> Result<String, String> {
    edits.sort_by_key(|edit| std::cmp::Reverse(edit.0.start));
    let mut text = source.to_string();
    for (span, replacement) in edits {
        if span.end > text.len() || !text.is_char_boundary(span.start) {
            return Err("an edit fell outside the file".to_string());
        }
        text.replace_range(span, &replacement);
    }
    let was_formatted =
        matches!(sdeck_format::format(source), sdeck_format::Outcome::Formatted(f) if f == source);
    if was_formatted {
        if let sdeck_format::Outcome::Formatted(f) = sdeck_format::format(&text) {
            text = f;
        }
    }
    Ok(text)
}

/// Whether the rewritten `text` analyses cleanly, still declares every rewritten
/// parameter, and each rounded value keeps its bound.
fn reads_back(text: &str, name: &str, model: &Model, rewrites: &[Rewrite]) -> Result<(), String> {
    let after = analyze(text, name);
    if after.has_errors() {
        return Err("the rewritten file would not analyse cleanly".to_string());
    }
    for r in rewrites {
        let Some(p) = model.params.by_id(r.param) else {
            continue;
        };
        let Some(new) = after.model.params.iter().find(|q| q.name == p.name) else {
            return Err(format!("{} would disappear from the file", p.name));
        };
        if new.bound.as_deref().is_some_and(|b| !b.contains(new.value)) {
            return Err(format!(
                "the rounded estimate of {} breaks its declared bound",
                p.name
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rounding_follows_the_standard_error() {
        assert_eq!(rounded(1.834_56, 0.21, 0), "1.83");
        assert_eq!(rounded(0.032_123_4, 0.0012, 0), "0.0321");
        assert_eq!(rounded(1234.7, 56.0, 0), "1235");
        assert_eq!(styled("3.2%", 0.034_56, 0.0021, 0), "3.46%");
        assert_eq!(styled("6bp", 0.000_612_3, 0.000_04, 0), "6.12bp");
    }

    #[test]
    fn an_earlier_note_is_replaced() {
        let note = "fitted 2026-01-02 from a.csv, se 0.1";
        assert_eq!(described(Some(" speed "), note), format!("speed; {note}"));
        assert_eq!(
            described(Some("speed; fitted 2025-01-01 from b.csv, se 0.3"), note),
            format!("speed; {note}")
        );
        assert_eq!(described(Some("fitted 2025-01-01 from b.csv"), note), note);
        assert_eq!(described(None, note), note);
    }

    #[test]
    fn values_and_notes_are_written_in_place() {
        let source = "model m\nclock year\nparam k = 2 [1/year] > 0  # speed\n\
                      param v = 30bp [1/sqrt(year)] > 0  # sdeck: allow unit-scale\n\
                      param l = 3%\nshock W\nfactor x = 1%\ndx = k * (l - x) dt + v dW\n";
        let analysis = analyze(source, "m");
        assert!(!analysis.has_errors(), "{:?}", analysis.diagnostics);
        let model = &analysis.model;
        let rewrites = [
            Rewrite {
                param: ParamId::new(0),
                value: 1.2345,
                se: 0.21,
            },
            Rewrite {
                param: ParamId::new(1),
                value: 0.004_567,
                se: 0.000_12,
            },
            Rewrite {
                param: ParamId::new(2),
                value: 0.021_23,
                se: 0.001,
            },
        ];
        let note = Note {
            date: "2026-12-02".to_string(),
            data: "x.csv".to_string(),
        };
        let text = rewrite(source, "m", model, &rewrites, &note).unwrap_or_else(|e| panic!("{e}"));
        assert!(text.contains("param k = 1.23 [1/year] > 0  # speed; fitted 2026-12-02 from x.csv, se 0.21 [1/year]\n"), "{text}");
        assert!(
            text.contains("param v = 45.7bp [1/sqrt(year)] > 0  # sdeck: allow unit-scale\n"),
            "{text}"
        );
        assert!(
            text.contains("param l = 2.12%  # fitted 2026-12-02 from x.csv, se 0.1%\n"),
            "{text}"
        );
        // A bound broken by the estimate: nothing.
        let broken = [Rewrite {
            param: ParamId::new(0),
            value: -1.0,
            se: 0.1,
        }];
        assert!(rewrite(source, "m", model, &broken, &note).is_err());
    }
}
