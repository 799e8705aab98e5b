//! The parser: pest over each statement piece, then our own tree with byte spans.
//!
//! pest stops at the first error of its input, so the file is cut into statements first
//! ([`crate::split`]) and every piece is parsed on its own: a bad statement yields one
//! `syntax` diagnostic and parsing resumes at the next one. Before pest sees a piece, a
//! cheap scan checks its size, its brackets and its nesting depth, so that no input can
//! exhaust the stack or give a confusing message for an unclosed bracket.
//!
//! The parts, in the order a piece meets them: [`precheck`] (size, brackets, nesting, the
//! misshapen equation and the retired keyword, before pest), [`pest_errors`] (pest's
//! error as a diagnostic), then the [`Builder`] that turns pest's pairs into the tree:
//! [`statements`] (the dispatch, declarations, equations and their terms), [`expressions`],
//! [`quantities`] (numbers, units, exponents, bounds) and [`expectations`].

// A statement that fails yields exactly one diagnostic, built once and moved out; boxing
// it would add an allocation on the error path and change nothing on the good one.
#![allow(clippy::result_large_err)]

mod expectations;
mod expressions;
mod pest_errors;
mod precheck;
mod quantities;
mod statements;

use crate::ast::*;
use crate::split::split;
use pest::iterators::Pair;
use pest::Parser;
use pest_errors::convert_pest_error;
use precheck::{misshapen_equation, precheck, retired_keyword};
use sdeck_diagnostics::{rules, Diagnostic, Span};

#[derive(pest_derive::Parser)]
#[grammar = "../../../grammar/sdeck.pest"]
struct StatementParser;

/// The longest statement read, in bytes of code.
pub const MAX_STATEMENT_BYTES: usize = 1 << 20;
/// The largest file read: 4 MiB. Real models are a few kilobytes; past this size a file
/// is refused whole, with one `syntax` error, before anything is built from it.
pub const MAX_FILE_BYTES: usize = 4 << 20;
/// The deepest nesting of brackets and parentheses read.
pub const MAX_NESTING: usize = 64;
/// The most expression nodes one statement may hold.
pub const MAX_NODES: usize = 2000;

pub use crate::vocabulary::RESERVED_NAMES;

type Result<T> = std::result::Result<T, Diagnostic>;

/// Parses a whole file. Never fails: statements that do not parse are reported in
/// [`SourceFile::diagnostics`] and left out of [`SourceFile::statements`].
///
/// ```
/// let file = sdeck_syntax::parse("param kappa = 1.8 [1/year] > 0\nparam theta = 3.2%\n");
/// assert_eq!(file.statements.len(), 2);
/// assert!(file.diagnostics.is_empty());
/// ```
pub fn parse(text: &str) -> SourceFile {
    if text.len() > MAX_FILE_BYTES {
        return SourceFile {
            statements: Vec::new(),
            comments: Vec::new(),
            diagnostics: vec![syntax_error(
                0..0,
                format!(
                    "the file is {} bytes, more than the {} MiB a model file may hold; \
                     nothing in it is checked",
                    text.len(),
                    MAX_FILE_BYTES >> 20
                ),
            )
            .with_help("split the model into smaller files")],
            unparsed: std::iter::once(0..text.len()).collect(),
        };
    }
    let (pieces, comments) = split(text);
    let mut file = SourceFile {
        statements: Vec::with_capacity(pieces.len()),
        comments,
        diagnostics: Vec::new(),
        unparsed: Vec::new(),
    };
    for piece in pieces {
        let mut soft = Vec::new();
        match parse_piece(text, piece.span.clone(), &mut soft) {
            Ok(kind) => file.statements.push(Statement {
                kind,
                span: piece.span,
                description: piece.description,
            }),
            Err(diagnostic) => {
                file.unparsed.push(piece.span.clone());
                file.diagnostics.push(diagnostic);
            }
        }
        file.unparsed.extend(soft.iter().map(|d| d.span.clone()));
        file.diagnostics.append(&mut soft);
    }
    file
}

fn syntax_error(span: Span, message: impl Into<String>) -> Diagnostic {
    Diagnostic::new(&rules::SYNTAX, span, message)
}

/// Parses one piece. Errors that spoil the whole statement are returned; errors confined
/// to one part (a term with no differential) go to `soft` and the rest is kept.
fn parse_piece(text: &str, span: Span, soft: &mut Vec<Diagnostic>) -> Result<StatementKind> {
    let original = &text[span.clone()];
    let offset = span.start;
    precheck(original, offset)?;
    misshapen_equation(original, offset)?;
    // A retired keyword is reported once, with a fix, and the statement is then read as
    // if the new word were written: one old word gives one error, not a cascade.
    let renamed = retired_keyword(original, offset);
    let (src, shift) = match &renamed {
        Some((diagnostic, new, rewritten)) => {
            soft.push(diagnostic.clone());
            let old_len = diagnostic.span.len();
            (rewritten.as_str(), new.len() - old_len)
        }
        None => (original, 0),
    };
    let mut pairs = StatementParser::parse(Rule::statement, src)
        .map_err(|error| convert_pest_error(&error, src, offset, shift))?;
    let statement = pairs
        .next()
        .ok_or_else(|| syntax_error(span.clone(), "empty statement"))?;
    let mut builder = Builder {
        offset,
        shift,
        nodes: 0,
        soft: Vec::new(),
    };
    let inner = statement
        .into_inner()
        .next()
        .ok_or_else(|| syntax_error(span.clone(), "empty statement"))?;
    let kind = builder.statement(inner);
    soft.append(&mut builder.soft);
    kind
}

/// Keyword tokens carry no information beyond the statement's own rule.
fn is_keyword_token(rule: Rule) -> bool {
    matches!(
        rule,
        Rule::kw_model
            | Rule::kw_clock
            | Rule::kw_horizon
            | Rule::kw_unit
            | Rule::kw_param
            | Rule::kw_factor
            | Rule::kw_shock
            | Rule::kw_corr
            | Rule::kw_let
            | Rule::kw_expect
            | Rule::kw_in
            | Rule::kw_measure
            | Rule::kw_discount
    )
}

/// Turns pest pairs into our tree, shifting spans by the piece's offset.
struct Builder {
    offset: usize,
    /// Bytes added at the start of the parsed text by renaming a retired keyword; every
    /// position after the keyword is moved back by this much.
    shift: usize,
    nodes: usize,
    /// Errors confined to one part of the statement.
    soft: Vec<Diagnostic>,
}

impl Builder {
    fn span(&self, pair: &Pair<Rule>) -> Span {
        let s = pair.as_span();
        self.offset + s.start().saturating_sub(self.shift)
            ..self.offset + s.end().saturating_sub(self.shift)
    }

    fn count(&mut self, span: &Span) -> Result<()> {
        self.nodes += 1;
        if self.nodes > MAX_NODES {
            return Err(syntax_error(
                span.clone(),
                format!("this statement holds more than {MAX_NODES} expression nodes"),
            )
            .with_help("split the expression with `let` definitions"));
        }
        Ok(())
    }

    fn ident(&self, pair: &Pair<Rule>) -> Ident {
        Ident {
            name: pair.as_str().to_string(),
            span: self.span(pair),
        }
    }

    fn declared_name(&self, pair: &Pair<Rule>) -> Result<Ident> {
        let ident = self.ident(pair);
        if RESERVED_NAMES.contains(&ident.name.as_str()) {
            return Err(syntax_error(
                ident.span.clone(),
                format!("`{}` is a reserved name and cannot be declared", ident.name),
            )
            .with_help("`t`, `pi`, `dt` and the function names exp, log, sqrt, abs, min, max, sin, cos, step, ramp are reserved; choose another name"));
        }
        Ok(ident)
    }
}
