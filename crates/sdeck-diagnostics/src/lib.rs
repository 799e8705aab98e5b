//! Diagnostics and the catalogue of rules, shared by every layer of sdeck.
//!
//! A [`Diagnostic`] is built once, by the layer that can decide it (syntax, semantics,
//! checks), and rendered by the faces (CLI, language server) without re-deciding anything.
//! Every diagnostic names a [`Rule`]; the rules come from one list (`rules/list.rs`),
//! each with its manual beside it, the text that `sdeck explain`, docs/rules.md and the
//! server all show.
//!
//! ```
//! use sdeck_diagnostics::{rules, Diagnostic, Severity};
//! let d = Diagnostic::new(&rules::UNUSED, 10..15, "parameter `beta` is never used");
//! assert_eq!(d.rule, rules::RuleId::Unused);
//! assert_eq!(d.rule.name(), "unused");
//! assert_eq!(d.severity, Severity::Warning);
//! ```

mod apply;
pub mod rules;

use std::borrow::Cow;

pub use apply::{apply_fixes, FixConflict};
pub use rules::RuleId;

use serde::Serialize;
use std::fmt;
use std::ops::Range;

/// A byte range in the source text.
pub type Span = Range<usize>;

/// How serious a diagnostic is. Ordered from least to most serious.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    Hint,
    Info,
    Warning,
    Error,
}

impl Severity {
    pub fn as_str(self) -> &'static str {
        match self {
            Severity::Hint => "hint",
            Severity::Info => "info",
            Severity::Warning => "warning",
            Severity::Error => "error",
        }
    }

    /// Parses `hint`, `info`, `warning` or `error`.
    pub fn parse(text: &str) -> Option<Severity> {
        match text {
            "hint" => Some(Severity::Hint),
            "info" => Some(Severity::Info),
            "warning" => Some(Severity::Warning),
            "error" => Some(Severity::Error),
            _ => None,
        }
    }
}

impl fmt::Display for Severity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// The edit distance behind every suggestion sdeck makes (names, units, rules): the
/// optimal-string-alignment distance of `strsim`, where an insertion, a deletion, a
/// substitution and a swap of two adjacent characters each cost 1 (`yaer` is 1 from
/// `year`). Characters, not bytes: `κ` is 1 from `k`.
pub fn edit_distance(left: &str, right: &str) -> usize {
    strsim::osa_distance(left, right)
}

/// The candidate closest to `word` by edit distance, when it is close enough to be a
/// typing slip: at most 2 edits, or a third of the longer word's length. Case is ignored.
/// Ties go to the first candidate.
pub fn closest_word<'c>(
    word: &str,
    candidates: impl IntoIterator<Item = &'c str>,
) -> Option<&'c str> {
    closest_within(word, candidates, Case::Ignored, |word, candidate| {
        (word.max(candidate) / 3).max(2)
    })
}

/// Whether [`closest_within`] tells `Rate` from `rate`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Case {
    /// Compared as written: a difference of case costs an edit.
    Kept,
    /// Compared in lower case.
    Ignored,
}

/// The one routine behind every "did you mean": the candidate at the smallest
/// [`edit_distance`] from `word`, if that distance is at most `limit(word's length,
/// candidate's length)` (lengths in characters). Ties go to the first candidate.
pub fn closest_within<'c>(
    word: &str,
    candidates: impl IntoIterator<Item = &'c str>,
    case: Case,
    limit: impl Fn(usize, usize) -> usize,
) -> Option<&'c str> {
    let word = match case {
        Case::Kept => word.to_string(),
        Case::Ignored => word.to_lowercase(),
    };
    let length = word.chars().count();
    let mut best: Option<(usize, &'c str)> = None;
    for candidate in candidates {
        let distance = match case {
            Case::Kept => edit_distance(&word, candidate),
            Case::Ignored => edit_distance(&word, &candidate.to_lowercase()),
        };
        if distance <= limit(length, candidate.chars().count())
            && best.is_none_or(|(d, _)| distance < d)
        {
            best = Some((distance, candidate));
        }
    }
    best.map(|(_, c)| c)
}

/// One rule of the catalogue: its name, default severity and its manual.
#[derive(Debug)]
pub struct Rule {
    /// The rule's identity; its place in [`rules::ALL`].
    pub id: RuleId,
    /// Kebab-case name, shown in every output format.
    pub name: &'static str,
    pub default_severity: Severity,
    /// One line: when the rule fires. (Its manual and examples sit beside the rule's
    /// module: `sdeck_checks::manual`.)
    pub summary: &'static str,
}

/// A secondary location with its own message ("first declared here").
#[derive(Clone, Debug, PartialEq)]
pub struct Label {
    pub span: Span,
    pub message: String,
}

/// A text replacement that a quick fix applies.
#[derive(Clone, Debug, PartialEq)]
pub struct TextEdit {
    pub span: Span,
    pub new_text: String,
}

/// A named set of edits that mends (or refactors) the text.
#[derive(Clone, Debug, PartialEq)]
pub struct Fix {
    pub title: String,
    pub edits: Vec<TextEdit>,
    /// The fix to apply when nobody chooses (`sdeck check --fix`, an editor's "fix all"):
    /// the first fix of a diagnostic, unless it is a stub; the others are alternatives.
    pub preferred: bool,
}

/// A finding about a model file, located by byte spans.
#[derive(Clone, Debug, PartialEq)]
pub struct Diagnostic {
    pub rule: RuleId,
    pub severity: Severity,
    /// What is wrong, in one sentence.
    pub message: String,
    /// Where it is wrong.
    pub span: Span,
    /// Short text under the primary underline, if any.
    pub label: Option<String>,
    /// Related locations.
    pub related: Vec<Label>,
    /// How to mend it, in words: most rules say it in fixed words, held without a copy
    /// (a file can have 200,000 findings).
    pub help: Option<Cow<'static, str>>,
    /// Further facts (converted values, derived numbers).
    pub notes: Vec<String>,
    /// Machine-applicable fixes.
    pub fixes: Vec<Fix>,
}

impl Diagnostic {
    /// A diagnostic of `rule` at its default severity.
    pub fn new(rule: &'static Rule, span: Span, message: impl Into<String>) -> Diagnostic {
        Diagnostic {
            rule: rule.id,
            severity: rule.default_severity,
            message: message.into(),
            span,
            label: None,
            related: Vec::new(),
            help: None,
            notes: Vec::new(),
            fixes: Vec::new(),
        }
    }

    pub fn with_label(mut self, label: impl Into<String>) -> Self {
        self.label = Some(label.into());
        self
    }

    pub fn with_related(mut self, span: Span, message: impl Into<String>) -> Self {
        // Exact: a finding has one to three of each, and a file can have 200,000 findings
        // (the default growth would reserve four).
        self.related.reserve_exact(1);
        self.related.push(Label {
            span,
            message: message.into(),
        });
        self
    }

    pub fn with_help(mut self, help: impl Into<Cow<'static, str>>) -> Self {
        self.help = Some(help.into());
        self
    }

    pub fn with_note(mut self, note: impl Into<String>) -> Self {
        self.notes.reserve_exact(1);
        self.notes.push(note.into());
        self
    }

    /// Adds a fix; the first one added is the preferred one, later ones are alternatives.
    pub fn with_fix(mut self, title: impl Into<String>, edits: Vec<TextEdit>) -> Self {
        let preferred = self.fixes.is_empty();
        self.fixes.reserve_exact(1);
        self.fixes.push(Fix {
            title: title.into(),
            edits,
            preferred,
        });
        self
    }

    /// Adds a fix that a person must choose, never applied unattended: a stub that
    /// silences the finding without mending it (a `# TODO` placeholder).
    pub fn with_manual_fix(mut self, title: impl Into<String>, edits: Vec<TextEdit>) -> Self {
        self.fixes.push(Fix {
            title: title.into(),
            edits,
            preferred: false,
        });
        self
    }
}
