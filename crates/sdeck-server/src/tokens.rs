//! Semantic tokens: keywords, comments, numbers, functions, units and every declared name
//! by its kind, encoded relative to the previous token as the protocol asks.

use crate::analysis::Analyzed;
use crate::documents::PositionEncoding;
use sdeck_diagnostics::Span;
use sdeck_semantics::SymbolKind;
use sdeck_syntax::ast::{DeclaredValue, Expr, Statement, StatementKind, UnitExpr};
use tower_lsp::lsp_types::{
    Range, SemanticToken, SemanticTokenModifier, SemanticTokenType, SemanticTokensLegend,
};

const KEYWORD: u32 = 0;
const COMMENT: u32 = 1;
const NUMBER: u32 = 2;
const PARAMETER: u32 = 3;
const VARIABLE: u32 = 4;
const EVENT: u32 = 5;
const TYPE: u32 = 6;
const FUNCTION: u32 = 7;
const MACRO: u32 = 8;
/// Modifier bit: the token declares its name.
const DECLARATION: u32 = 1;

pub fn legend() -> SemanticTokensLegend {
    SemanticTokensLegend {
        token_types: vec![
            SemanticTokenType::KEYWORD,
            SemanticTokenType::COMMENT,
            SemanticTokenType::NUMBER,
            SemanticTokenType::PARAMETER,
            SemanticTokenType::VARIABLE,
            SemanticTokenType::EVENT,
            SemanticTokenType::TYPE,
            SemanticTokenType::FUNCTION,
            SemanticTokenType::MACRO,
        ],
        token_modifiers: vec![SemanticTokenModifier::DECLARATION],
    }
}

fn kind_type(kind: SymbolKind) -> u32 {
    match kind {
        SymbolKind::Param => PARAMETER,
        SymbolKind::Factor => VARIABLE,
        SymbolKind::Shock => EVENT,
        SymbolKind::Let => MACRO,
        SymbolKind::Unit => TYPE,
    }
}

/// The tokens of the whole document, or of `range`: the version's token spans are found
/// once, and a request costs the tokens it returns.
pub fn semantic_tokens(
    a: &Analyzed,
    encoding: PositionEncoding,
    range: Option<Range>,
) -> Vec<SemanticToken> {
    let all = a.tokens.get_or_init(|| token_spans(a));
    let converter = a.converter(encoding);
    let part = match range {
        None => all.as_slice(),
        Some(range) => {
            let (start, end) = (converter.offset(range.start), converter.offset(range.end));
            let first = all.partition_point(|(span, _, _)| span.end <= start);
            let last = all.partition_point(|(span, _, _)| span.start < end);
            all.get(first..last.max(first)).unwrap_or(&[])
        }
    };
    encode(a, encoding, part)
}

/// Every token span of the version, sorted, without overlaps or empty spans.
fn token_spans(a: &Analyzed) -> Vec<(Span, u32, u32)> {
    let analysis = &a.check.analysis;
    let kind_of: std::collections::HashMap<usize, SymbolKind> = analysis
        .symbols
        .iter()
        .map(|s| (s.name_span.start, s.kind))
        .collect();
    let mut spans: Vec<(Span, u32, u32)> = Vec::new();
    for c in &analysis.file.comments {
        spans.push((c.span.clone(), COMMENT, 0));
    }
    for s in &analysis.symbols {
        spans.push((s.name_span.clone(), kind_type(s.kind), DECLARATION));
    }
    for r in &analysis.references {
        if let Some(kind) = kind_of.get(&r.declaration.start) {
            spans.push((r.span.clone(), kind_type(*kind), 0));
        }
    }
    for statement in &analysis.file.statements {
        statement_spans(statement, &mut spans);
        let keyword_len = statement.kind.keyword().map_or(0, str::len);
        if keyword_len > 0 {
            let start = statement.span.start;
            // The word as written: a retired keyword (`state`) is shorter than its
            // replacement, and is still coloured as the keyword it stands for.
            let written = a.text.get(start..).map_or(keyword_len, |rest| {
                rest.find(|c: char| !(c.is_alphanumeric() || c == '_'))
                    .unwrap_or(rest.len())
            });
            spans.push((start..start + written, KEYWORD, 0));
        }
    }
    spans.sort_by_key(|(span, _, _)| (span.start, span.end));
    let mut last_end = 0usize;
    spans.retain(|(span, _, _)| {
        let keep = span.start >= last_end && span.end > span.start && span.end <= a.text.len();
        if keep {
            last_end = span.end;
        }
        keep
    });
    spans
}

/// The tokens of a statement's values: numbers, units, expressions, the `dt` of an
/// equation and the figure of an `expect` (its keyword aside).
fn statement_spans(statement: &Statement, spans: &mut Vec<(Span, u32, u32)>) {
    let unit = |u: &UnitExpr, spans: &mut Vec<(Span, u32, u32)>| {
        u.walk_names(&mut |ident| spans.push((ident.span.clone(), TYPE, 0)));
    };
    match &statement.kind {
        StatementKind::Model { .. }
        | StatementKind::Unit { .. }
        | StatementKind::Shock { .. }
        | StatementKind::Measure { .. } => {}
        StatementKind::Clock { unit: u } => {
            spans.push((u.span.clone(), TYPE, 0));
        }
        StatementKind::Horizon { value } => {
            spans.push((value.number.span.clone(), NUMBER, 0));
            if let Some(u) = &value.unit {
                unit(u, spans);
            }
        }
        StatementKind::Param(d) | StatementKind::Factor(d) => match &d.value {
            DeclaredValue::Literal { number, unit: u } => {
                spans.push((number.span.clone(), NUMBER, 0));
                if let Some(u) = u {
                    unit(u, spans);
                }
            }
            DeclaredValue::Expr(e) => expression(e, spans),
        },
        StatementKind::Corr { value, .. }
        | StatementKind::Let { value, .. }
        | StatementKind::Discount { rate: value } => expression(value, spans),
        StatementKind::Equation(eq) => {
            for term in &eq.terms {
                if let Some(c) = &term.coefficient {
                    expression(c, spans);
                }
                if let sdeck_syntax::ast::Differential::Time(span) = &term.differential {
                    spans.push((span.clone(), KEYWORD, 0));
                }
            }
        }
        StatementKind::Expect(e) => {
            spans.push((e.figure_span.clone(), FUNCTION, 0));
        }
    }
}

fn expression(e: &Expr, spans: &mut Vec<(Span, u32, u32)>) {
    e.walk(&mut |x| match x {
        Expr::Number(n) => spans.push((n.span.clone(), NUMBER, 0)),
        Expr::Quantity(q) => {
            spans.push((q.number.span.clone(), NUMBER, 0));
            if let Some(u) = &q.unit {
                u.walk_names(&mut |ident| spans.push((ident.span.clone(), TYPE, 0)));
            }
        }
        Expr::Call { function, .. } => spans.push((function.span.clone(), FUNCTION, 0)),
        _ => {}
    });
}

/// Delta-encodes sorted token spans, dropping those that span lines.
fn encode(
    a: &Analyzed,
    encoding: PositionEncoding,
    spans: &[(Span, u32, u32)],
) -> Vec<SemanticToken> {
    let converter = a.converter(encoding);
    let mut out = Vec::with_capacity(spans.len());
    let (mut prev_line, mut prev_col) = (0u32, 0u32);
    for (span, token_type, modifiers) in spans {
        let start = converter.position(span.start);
        let end = converter.position(span.end);
        if end.line != start.line {
            continue;
        }
        let delta_line = start.line - prev_line;
        let delta_start = if delta_line == 0 {
            start.character - prev_col
        } else {
            start.character
        };
        out.push(SemanticToken {
            delta_line,
            delta_start,
            length: end.character - start.character,
            token_type: *token_type,
            token_modifiers_bitset: *modifiers,
        });
        prev_line = start.line;
        prev_col = start.character;
    }
    out
}
