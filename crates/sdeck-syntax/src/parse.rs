//! The parser: pest over each statement piece, then our own tree with byte spans.
//!
//! pest stops at the first error of its input, so the file is cut into statements first
//! ([`crate::split`]) and every piece is parsed on its own: a bad statement yields one
//! `syntax` diagnostic and parsing resumes at the next one. Before pest sees a piece, a
//! cheap scan checks its size, its brackets and its nesting depth, so that no input can
//! exhaust the stack or give a confusing message for an unclosed bracket.

// A statement that fails yields exactly one diagnostic, built once and moved out; boxing
// it would add an allocation on the error path and change nothing on the good one.
#![allow(clippy::result_large_err)]

use crate::ast::*;
use crate::split::{is_ident_char, is_ident_start, split, RETIRED_KEYWORDS};
use pest::error::{ErrorVariant, InputLocation};
use pest::iterators::Pair;
use pest::Parser;
use sdeck_diagnostics::{rules, Diagnostic, Span, TextEdit};

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

/// Two slips for an equation: `dr/dt = ...` (an ordinary differential equation's
/// notation) and `d r = ...` (a space inside the differential). Each is a `syntax` error
/// that gives the form `dr = DRIFT dt + VOL dW`, with a fix where the mend is mechanical.
fn misshapen_equation(src: &str, offset: usize) -> Result<()> {
    let lead = src.len() - src.trim_start().len();
    let code = src.split('#').next().unwrap_or("").trim_end();
    let body = &code[lead..];
    let name_end = |text: &str| {
        text.char_indices()
            .find(|&(_, c)| !is_ident_char(c))
            .map(|(i, _)| i)
            .unwrap_or(text.len())
    };
    let Some(after_d) = body.strip_prefix('d') else {
        return Ok(());
    };
    let form = |name: &str| format!("an equation is written `d{name} = DRIFT dt + VOL dW`");
    // `d r = ...`
    let spaced = after_d.trim_start_matches([' ', '\t']);
    if spaced.len() < after_d.len() {
        let n = name_end(spaced);
        let name = &spaced[..n];
        if n > 0 && spaced[n..].trim_start().starts_with('=') {
            let gap = offset + lead + 1..offset + lead + 1 + (after_d.len() - spaced.len());
            return Err(syntax_error(
                offset + lead..offset + lead + 1 + (after_d.len() - spaced.len()) + n,
                format!(
                    "`d {name}` has a space inside the differential: {}",
                    form(name)
                ),
            )
            .with_help(format!("write `d{name}` without the space"))
            .with_fix(
                format!("Write `d{name}`"),
                vec![TextEdit {
                    span: gap,
                    new_text: String::new(),
                }],
            ));
        }
        return Ok(());
    }
    // `dr/dt = ...`
    let n = name_end(after_d);
    let name = &after_d[..n];
    let rest = after_d[n..].trim_start();
    let Some(over) = rest.strip_prefix('/') else {
        return Ok(());
    };
    let Some(after_dt) = over.trim_start().strip_prefix("dt") else {
        return Ok(());
    };
    let Some(rhs) = after_dt.trim_start().strip_prefix('=') else {
        return Ok(());
    };
    let lhs_end = code.len() - rhs.len();
    let mut error = syntax_error(
        offset + lead..offset + lhs_end - 1,
        format!(
            "`d{name}/dt = ...` is not how sdeck writes an equation: {}",
            form(name)
        ),
    )
    .with_help(format!(
        "the drift is the coefficient of `dt` and each shock gets its own term: `d{name} = kappa * (theta - {name}) dt + vol dW`"
    ));
    let drift = rhs.trim();
    if !drift.is_empty() {
        error = error.with_fix(
            format!("Write `d{name} = (...) dt`"),
            vec![TextEdit {
                span: offset + lead..offset + code.len(),
                new_text: format!("d{name} = ({drift}) dt"),
            }],
        );
    }
    Err(error)
}

/// Which end of a bound a value is.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Side {
    Lower,
    Upper,
}

/// When the statement starts with a keyword of the first version of the language
/// (`state`, `noise`): the `syntax` diagnostic naming the new word, with a fix that
/// rewrites it, the new word, and the statement with the new word in place.
fn retired_keyword(src: &str, offset: usize) -> Option<(Diagnostic, &'static str, String)> {
    let word_len = src
        .char_indices()
        .find(|&(_, c)| !is_ident_char(c))
        .map_or(src.len(), |(i, _)| i);
    let word = &src[..word_len];
    let &(old, new) = RETIRED_KEYWORDS.iter().find(|(old, _)| *old == word)?;
    let rest = &src[word_len..];
    let first_line = rest.lines().next().unwrap_or("").trim();
    let example = if first_line.chars().count() <= 40 {
        format!("`{new} {first_line}`")
    } else {
        format!("`{new} ...`")
    };
    let diagnostic = syntax_error(
        offset..offset + word_len,
        format!("`{old}` is now `{new}`: write {example}"),
    )
    .with_help(
        "language v2 renamed two keywords: a factor is declared with `factor` (was `state`) \
         and a shock with `shock` (was `noise`); everything else about the statement stays",
    )
    .with_fix(
        format!("Write `{new}` for `{old}`"),
        vec![TextEdit {
            span: offset..offset + word_len,
            new_text: new.to_string(),
        }],
    );
    Some((diagnostic, new, format!("{new}{rest}")))
}

/// Size, bracket and nesting checks that run before pest.
fn precheck(src: &str, offset: usize) -> Result<()> {
    let mut code_bytes = 0usize;
    // (opening bracket, offset, whether it opens an interval after `in`, which either
    // closing bracket may end: `in [0, 1)`).
    let mut stack: Vec<(char, usize, bool)> = Vec::new();
    let mut in_comment = false;
    // `a ^ b ^ c` nests to the right in the grammar: bound it like brackets.
    let mut powers = 0usize;
    for (i, c) in src.char_indices() {
        if in_comment {
            in_comment = c != '\n' && c != '\r';
            continue;
        }
        code_bytes += c.len_utf8();
        match c {
            '#' => in_comment = true,
            '^' => {
                powers += 1;
                if powers > MAX_NESTING {
                    return Err(syntax_error(
                        offset + i..offset + i + 1,
                        format!("more than {MAX_NESTING} `^` in one statement"),
                    )
                    .with_help("split the expression with `let` definitions"));
                }
            }
            '(' | '[' => {
                stack.push((c, i, opens_interval(&src[..i])));
                if stack.len() > MAX_NESTING {
                    return Err(syntax_error(
                        offset + i..offset + i + 1,
                        format!("brackets nest deeper than {MAX_NESTING} levels"),
                    )
                    .with_help("split the expression with `let` definitions"));
                }
            }
            ')' | ']' => match stack.pop() {
                Some((open, at, interval)) if !interval && matching(open) != c => {
                    return Err(syntax_error(
                        offset + i..offset + i + 1,
                        format!(
                            "`{c}` does not close the `{open}` opened here; `{}` expected",
                            matching(open)
                        ),
                    )
                    .with_label(format!("`{}` expected", matching(open)))
                    .with_related(
                        offset + at..offset + at + 1,
                        format!("`{open}` opened here"),
                    ));
                }
                Some(_) => {}
                None => {
                    return Err(syntax_error(
                        offset + i..offset + i + 1,
                        format!("`{c}` closes nothing"),
                    )
                    .with_help("remove it, or add the opening bracket it was meant to close"));
                }
            },
            _ => {}
        }
    }
    if code_bytes > MAX_STATEMENT_BYTES {
        let end = src
            .char_indices()
            .map(|(i, _)| i)
            .find(|&i| i >= 40)
            .unwrap_or(src.len());
        return Err(syntax_error(
            offset..offset + end,
            format!(
                "this statement is {code_bytes} bytes long; statements of up to {MAX_STATEMENT_BYTES} bytes are read"
            ),
        )
        .with_help("a statement ends where the next line starts with a keyword or `dNAME =`"));
    }
    if let Some(&(open, at, _)) = stack.last() {
        let what = if open == '[' {
            "the unit or interval"
        } else {
            "the parenthesis"
        };
        return Err(syntax_error(
            offset + at..offset + at + 1,
            format!("`{}` expected to close {what} opened here", matching(open)),
        )
        .with_label(format!("`{open}` opened here and never closed"))
        .with_help(format!(
            "add `{}` before the end of the statement",
            matching(open)
        )));
    }
    Ok(())
}

/// Whether the text before a bracket ends with the keyword `in`.
fn opens_interval(before: &str) -> bool {
    let trimmed = before.trim_end();
    trimmed
        .strip_suffix("in")
        .is_some_and(|head| !head.chars().next_back().is_some_and(is_ident_char))
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

fn matching(open: char) -> char {
    match open {
        '(' => ')',
        '[' => ']',
        _ => open,
    }
}

fn describe_rule(rule: Rule) -> Option<&'static str> {
    Some(match rule {
        Rule::name | Rule::name_or_function | Rule::juxtaposed | Rule::declaration => "a name",
        Rule::number | Rule::signed_number | Rule::quantity | Rule::quantity_atom => "a number",
        Rule::literal_value => "a value",
        Rule::minus => "`-`",
        Rule::add_op => "`+` or `-`",
        Rule::mul_op | Rule::unit_op => "`*` or `/`",
        Rule::expr | Rule::product | Rule::unary | Rule::power | Rule::call | Rule::paren => {
            "an expression"
        }
        Rule::unit_expr
        | Rule::unit_term
        | Rule::unit_one
        | Rule::unit_sqrt
        | Rule::unit_paren
        | Rule::unit_name
        | Rule::bare_unit => "a unit",
        Rule::bracket_unit => "a unit in `[...]`",
        Rule::bound => "a bound such as `> 0` or `in [0, 1]`",
        Rule::compare_op => "a comparison (`<`, `<=`, `>`, `>=`)",
        Rule::open_end => "`[` or `(`",
        Rule::close_end => "`]` or `)`",
        Rule::bound_value | Rule::infinity => "a number or `inf`",
        Rule::condition => "a condition such as `< 6 month` or `in [a, b]`",
        Rule::threshold => "a comparison of a factor with a level, e.g. `r < 0`",
        Rule::side_op => "`<` or `>`",
        Rule::differential => "`dNAME`",
        Rule::eq_terms | Rule::eq_term => "a term such as `kappa * x dt` or `vol dW`",
        Rule::integer | Rule::natural | Rule::unit_exponent => "an integer exponent",
        Rule::EOI => "the end of the statement",
        Rule::measure_name => "`risk-neutral` or `real-world`",
        Rule::statement
        | Rule::model_stmt
        | Rule::clock_stmt
        | Rule::horizon_stmt
        | Rule::unit_stmt
        | Rule::param_stmt
        | Rule::factor_stmt
        | Rule::shock_stmt
        | Rule::corr_stmt
        | Rule::let_stmt
        | Rule::expect_stmt
        | Rule::measure_stmt
        | Rule::discount_stmt
        | Rule::kw_measure
        | Rule::kw_discount
        | Rule::equation
        | Rule::keyword => "a statement (a keyword such as `param`, or `dNAME =`)",
        _ => return None,
    })
}

/// The token found at `pos`, described for a message, and its length in bytes.
fn describe_found(src: &str, pos: usize) -> (String, usize) {
    let rest = src.get(pos..).unwrap_or("");
    let Some(c) = rest.chars().next() else {
        return ("the end of the statement".to_string(), 0);
    };
    if is_ident_start(c) {
        let len = rest
            .char_indices()
            .find(|&(_, c)| !is_ident_char(c))
            .map(|(i, _)| i)
            .unwrap_or(rest.len());
        return (format!("`{}`", &rest[..len]), len);
    }
    if c.is_ascii_digit() {
        let len = rest
            .char_indices()
            .find(|&(_, c)| !(c.is_ascii_alphanumeric() || c == '.' || c == '%'))
            .map(|(i, _)| i)
            .unwrap_or(rest.len());
        return (format!("`{}`", &rest[..len]), len);
    }
    if c.is_control() {
        return (
            format!("the control character U+{:04X}", c as u32),
            c.len_utf8(),
        );
    }
    (format!("`{c}`"), c.len_utf8())
}

/// An `expect` line pinning `figure`, for help texts.
fn example(figure: Figure) -> &'static str {
    match figure {
        Figure::Mean => "expect mean(r, 1 year) in [2.9%, 3.3%]",
        Figure::Variance => "expect variance(r, 1 year) < 1e-4",
        Figure::Sd => "expect sd(r, 1 year) < 1%",
        Figure::Halflife => "expect halflife(r) in [6 month, 2 year]",
        Figure::StationaryMean => "expect stationary_mean(r) in [2%, 4%]",
        Figure::StationaryVariance => "expect stationary_variance(r) < 1e-4",
        Figure::StationarySd => "expect stationary_sd(r) < 1%",
        Figure::Prob => "expect prob(r < 0, 1 year) < 2%",
        Figure::Quantile => "expect quantile(r, 99%, 6 month) < 6%",
        Figure::Price => "expect price(10 year) > 0.7",
        Figure::Yield => "expect yield(10 year) in [2.5%, 4.5%]",
        Figure::Forward => "expect forward(5 year) < 6%",
    }
}

/// The shape of a statement, for the help line of a syntax error.
fn statement_help(src: &str) -> Option<&'static str> {
    let word: String = src.chars().take_while(|&c| is_ident_char(c)).collect();
    Some(match word.as_str() {
        "model" => "a model is named with `model NAME`",
        "clock" => "the clock is set with `clock UNIT`, e.g. `clock year`",
        "horizon" => "the horizon is `horizon NUMBER UNIT`, e.g. `horizon 6 month`",
        "unit" => "a unit is declared with `unit NAME`, e.g. `unit EUR`",
        "param" => "a parameter is `param NAME = NUMBER [UNIT] BOUND`, e.g. `param kappa = 1.8 [1/year] > 0`, or a constant expression of earlier parameters, e.g. `param stressed = theta + 150bp`",
        "factor" => "a factor is `factor NAME = NUMBER [UNIT] BOUND`, e.g. `factor r = 2.75% >= 0`",
        "shock" => "shocks are declared with `shock NAME, NAME`, e.g. `shock W1, W2`",
        "corr" => "a correlation is `corr NAME, NAME = VALUE`, a number or an expression of parameters, e.g. `corr W1, W2 = -0.4` or `corr W1, W2 = rho`",
        "let" => "a named expression is `let NAME = EXPR`",
        "measure" => "the measure is `measure risk-neutral` or `measure real-world`",
        "discount" => "the short rate is `discount EXPR`, affine in the factors, e.g. `discount r` or `discount x + y + phi`",
        "expect" => "an expectation is `expect FIGURE(ARGS) CONDITION`, e.g. `expect mean(r, 1 year) in [2.9%, 3.3%]`, `expect prob(r < 0, 1 year) < 2%`, `expect yield(10 year) in [2.5%, 4.5%]`",
        w if w.starts_with('d') && w.len() > 1 => {
            "an equation is `dX = DRIFT dt + VOL dW`, e.g. `dr = kappa * (level - r) dt + vol * sqrt(r) dW`"
        }
        _ => return None,
    })
}

/// `shift` is the number of bytes the renaming of a retired keyword added at the start
/// of `src` (see [`retired_keyword`]).
fn convert_pest_error(
    error: &pest::error::Error<Rule>,
    src: &str,
    offset: usize,
    shift: usize,
) -> Diagnostic {
    let pos = match error.location {
        InputLocation::Pos(p) => p,
        InputLocation::Span((s, _)) => s,
    };
    let (found, len) = describe_found(src, pos);
    let mut expected: Vec<&str> = match &error.variant {
        ErrorVariant::ParsingError { positives, .. } => {
            positives.iter().filter_map(|&r| describe_rule(r)).collect()
        }
        ErrorVariant::CustomError { .. } => Vec::new(),
    };
    expected.dedup();
    let mut unique: Vec<&str> = Vec::new();
    for e in expected {
        if !unique.contains(&e) {
            unique.push(e);
        }
    }
    let message = if unique.is_empty() {
        format!("unexpected {found}")
    } else {
        format!("expected {}, found {found}", join_or(&unique))
    };
    let start = offset + pos.saturating_sub(shift);
    let mut diagnostic = syntax_error(start..start + len, message);
    if let Some(help) = statement_help(src) {
        diagnostic = diagnostic.with_help(help);
    } else {
        diagnostic = diagnostic.with_help(
            "a statement starts with a keyword (model, clock, horizon, unit, param, factor, shock, corr, let, expect) or with `dNAME =`",
        );
    }
    diagnostic
}

fn join_or(items: &[&str]) -> String {
    match items {
        [] => String::new(),
        [one] => (*one).to_string(),
        [init @ .., last] => format!("{} or {}", init.join(", "), last),
    }
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

    fn statement(&mut self, pair: Pair<Rule>) -> Result<StatementKind> {
        let rule = pair.as_rule();
        let span = self.span(&pair);
        let mut inner = pair.into_inner().filter(|p| !is_keyword_token(p.as_rule()));
        let mut next = || {
            inner
                .next()
                .ok_or_else(|| syntax_error(span.clone(), "incomplete statement"))
        };
        Ok(match rule {
            Rule::model_stmt => StatementKind::Model {
                name: self.ident(&next()?),
            },
            Rule::clock_stmt => StatementKind::Clock {
                unit: self.ident(&next()?),
            },
            Rule::horizon_stmt => StatementKind::Horizon {
                value: Box::new(self.quantity(next()?)?),
            },
            Rule::unit_stmt => StatementKind::Unit {
                name: self.declared_name(&next()?)?,
            },
            Rule::param_stmt => StatementKind::Param(self.declaration(next()?)?),
            Rule::factor_stmt => StatementKind::Factor(self.declaration(next()?)?),
            Rule::shock_stmt => {
                let mut names = Vec::new();
                for p in inner {
                    names.push(self.declared_name(&p)?);
                }
                StatementKind::Shock { names }
            }
            Rule::corr_stmt => {
                let first = self.ident(&next()?);
                let second = self.ident(&next()?);
                let value = self.expr(next()?)?;
                StatementKind::Corr {
                    first,
                    second,
                    value: Box::new(value),
                }
            }
            Rule::measure_stmt => StatementKind::Measure {
                name: self.ident(&next()?),
            },
            Rule::discount_stmt => StatementKind::Discount {
                rate: Box::new(self.expr(next()?)?),
            },
            Rule::let_stmt => StatementKind::Let {
                name: self.declared_name(&next()?)?,
                value: Box::new(self.expr(next()?)?),
            },
            Rule::expect_stmt => {
                let figure_pair = next()?;
                let mut rest: Vec<Pair<Rule>> = Vec::new();
                while let Ok(p) = next() {
                    rest.push(p);
                }
                let condition_pair = rest
                    .pop()
                    .ok_or_else(|| syntax_error(span.clone(), "a condition is expected"))?;
                let args_span = match (rest.first(), rest.last()) {
                    (Some(first), Some(last)) => self.span(first).start..self.span(last).end,
                    _ => span.clone(),
                };
                let condition = self.condition(condition_pair)?;
                StatementKind::Expect(Box::new(self.expectation(
                    figure_pair,
                    rest,
                    args_span,
                    condition,
                )?))
            }
            Rule::equation => {
                let lhs_pair = next()?;
                let lhs = self.span(&lhs_pair);
                let state = Ident {
                    name: lhs_pair.as_str()[1..].to_string(),
                    span: lhs.start + 1..lhs.end,
                };
                let terms = self.terms(next()?)?;
                StatementKind::Equation(Equation { state, lhs, terms })
            }
            _ => {
                return Err(syntax_error(span, "unrecognised statement"));
            }
        })
    }

    fn declaration(&mut self, pair: Pair<Rule>) -> Result<Declaration> {
        let span = self.span(&pair);
        let mut inner = pair.into_inner();
        let name_pair = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a name is expected"))?;
        let name = self.declared_name(&name_pair)?;
        let value_pair = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a value is expected"))?;
        let value = if value_pair.as_rule() == Rule::literal_value {
            let mut parts = value_pair.into_inner();
            let number_pair = parts
                .next()
                .ok_or_else(|| syntax_error(span.clone(), "a value is expected"))?;
            let number = self.signed_number(number_pair)?;
            let unit = match parts.next() {
                Some(p) if p.as_rule() == Rule::bracket_unit => Some(self.bracket_unit(p)?),
                _ => None,
            }
            .map(Box::new);
            DeclaredValue::Literal { number, unit }
        } else {
            DeclaredValue::Expr(Box::new(self.expr(value_pair)?))
        };
        let mut bound = None;
        for p in inner {
            if p.as_rule() == Rule::bound {
                bound = Some(Box::new(self.bound(p)?));
            }
        }
        Ok(Declaration { name, value, bound })
    }

    fn number_value(&self, text: &str, span: &Span) -> Result<f64> {
        let (body, shift) = if let Some(b) = text.strip_suffix('%') {
            (b, 2)
        } else if let Some(b) = text.strip_suffix("bp") {
            (b, 4)
        } else {
            (text, 0)
        };
        let (mantissa, exponent) = match body.find(['e', 'E']) {
            Some(i) => (&body[..i], &body[i + 1..]),
            None => (body, "0"),
        };
        let exponent: i64 = exponent.parse().map_err(|_| {
            syntax_error(
                span.clone(),
                format!("the exponent of `{text}` is out of range"),
            )
        })?;
        let exponent = exponent.saturating_sub(shift);
        let value: f64 = format!("{mantissa}e{exponent}")
            .parse()
            .map_err(|_| syntax_error(span.clone(), format!("`{text}` is not a number")))?;
        if !value.is_finite() {
            return Err(syntax_error(
                span.clone(),
                format!("`{text}` is too large to be a number"),
            ));
        }
        Ok(value)
    }

    fn signed_number(&mut self, pair: Pair<Rule>) -> Result<Number> {
        let span = self.span(&pair);
        let text: String = pair.as_str().split_whitespace().collect();
        let mut negative = false;
        let mut value = 0.0;
        for p in pair.into_inner() {
            match p.as_rule() {
                Rule::minus => negative = true,
                Rule::number => value = self.number_value(p.as_str(), &span)?,
                _ => {}
            }
        }
        Ok(Number {
            value: if negative { -value } else { value },
            text,
            span,
        })
    }

    fn plain_number(&mut self, pair: Pair<Rule>) -> Result<Number> {
        let span = self.span(&pair);
        let value = self.number_value(pair.as_str(), &span)?;
        Ok(Number {
            value,
            text: pair.as_str().to_string(),
            span,
        })
    }

    fn quantity(&mut self, pair: Pair<Rule>) -> Result<Quantity> {
        let span = self.span(&pair);
        let mut inner = pair.into_inner();
        let number_pair = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a number is expected"))?;
        let number = self.signed_number(number_pair)?;
        let unit = match inner.next() {
            Some(p) if p.as_rule() == Rule::bracket_unit => Some(self.bracket_unit(p)?),
            Some(p) => {
                let name_pair = p
                    .into_inner()
                    .next()
                    .ok_or_else(|| syntax_error(span.clone(), "a unit name is expected"))?;
                Some(UnitExpr::Name(self.ident(&name_pair)))
            }
            None => None,
        };
        Ok(Quantity { number, unit, span })
    }

    fn bracket_unit(&mut self, pair: Pair<Rule>) -> Result<UnitExpr> {
        let span = self.span(&pair);
        let inner = pair
            .into_inner()
            .next()
            .ok_or_else(|| syntax_error(span, "a unit is expected"))?;
        self.unit_expr(inner)
    }

    fn unit_expr(&mut self, pair: Pair<Rule>) -> Result<UnitExpr> {
        let mut inner = pair.into_inner();
        let first = inner.next();
        let mut acc = match first {
            Some(p) => self.unit_term(p)?,
            None => return Err(syntax_error(self.offset..self.offset, "a unit is expected")),
        };
        while let (Some(op), Some(rhs)) = (inner.next(), inner.next()) {
            let rhs = self.unit_term(rhs)?;
            let span = acc.span().start..rhs.span().end;
            self.count(&span)?;
            acc = if op.as_str() == "*" {
                UnitExpr::Mul {
                    lhs: Box::new(acc),
                    rhs: Box::new(rhs),
                    span,
                }
            } else {
                UnitExpr::Div {
                    lhs: Box::new(acc),
                    rhs: Box::new(rhs),
                    span,
                }
            };
        }
        Ok(acc)
    }

    fn unit_term(&mut self, pair: Pair<Rule>) -> Result<UnitExpr> {
        let span = self.span(&pair);
        self.count(&span)?;
        let mut inner = pair.into_inner();
        let atom = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a unit is expected"))?;
        let base = match atom.as_rule() {
            Rule::unit_one => UnitExpr::One {
                span: self.span(&atom),
            },
            Rule::unit_name => UnitExpr::Name(self.ident(&atom)),
            Rule::unit_sqrt => {
                let sqrt_span = self.span(&atom);
                let inner_pair = atom
                    .into_inner()
                    .next()
                    .ok_or_else(|| syntax_error(sqrt_span.clone(), "a unit is expected"))?;
                UnitExpr::Sqrt {
                    inner: Box::new(self.unit_expr(inner_pair)?),
                    span: sqrt_span,
                }
            }
            Rule::unit_paren => {
                let paren_span = self.span(&atom);
                let inner_pair = atom
                    .into_inner()
                    .next()
                    .ok_or_else(|| syntax_error(paren_span, "a unit is expected"))?;
                self.unit_expr(inner_pair)?
            }
            _ => return Err(syntax_error(span, "a unit is expected")),
        };
        match inner.next() {
            None => Ok(base),
            Some(exponent_pair) => {
                let exponent = self.exponent(exponent_pair)?;
                Ok(UnitExpr::Pow {
                    base: Box::new(base),
                    exponent,
                    span,
                })
            }
        }
    }

    fn exponent(&mut self, pair: Pair<Rule>) -> Result<Exponent> {
        let span = self.span(&pair);
        let mut num: Option<i64> = None;
        let mut den: i64 = 1;
        for p in pair.into_inner() {
            let parsed: i64 = p.as_str().parse().map_err(|_| {
                syntax_error(
                    span.clone(),
                    format!("exponent `{}` is out of range", p.as_str()),
                )
            })?;
            match p.as_rule() {
                Rule::integer => num = Some(parsed),
                _ => den = parsed,
            }
        }
        let num = num.ok_or_else(|| syntax_error(span.clone(), "an exponent is expected"))?;
        if den == 0 {
            return Err(syntax_error(span, "the exponent's denominator is zero"));
        }
        let g = gcd(num.unsigned_abs(), den.unsigned_abs()).max(1) as i64;
        Ok(Exponent {
            num: num / g,
            den: den / g,
        })
    }

    fn bound(&mut self, pair: Pair<Rule>) -> Result<Bound> {
        let span = self.span(&pair);
        let parts: Vec<Pair<Rule>> = pair
            .into_inner()
            .filter(|p| !is_keyword_token(p.as_rule()))
            .collect();
        let mut lower = None;
        let mut upper = None;
        match parts.as_slice() {
            [op, value] if op.as_rule() == Rule::compare_op => {
                let side = if op.as_str().starts_with('>') {
                    Side::Lower
                } else {
                    Side::Upper
                };
                let end = self.bound_value(value.clone(), side)?;
                match op.as_str() {
                    ">" => {
                        lower = end.map(|value| BoundEnd {
                            value,
                            inclusive: false,
                        })
                    }
                    ">=" => {
                        lower = end.map(|value| BoundEnd {
                            value,
                            inclusive: true,
                        })
                    }
                    "<" => {
                        upper = end.map(|value| BoundEnd {
                            value,
                            inclusive: false,
                        })
                    }
                    _ => {
                        upper = end.map(|value| BoundEnd {
                            value,
                            inclusive: true,
                        })
                    }
                }
            }
            [open, a, b, close] => {
                lower = self
                    .bound_value(a.clone(), Side::Lower)?
                    .map(|value| BoundEnd {
                        value,
                        inclusive: open.as_str() == "[",
                    });
                upper = self
                    .bound_value(b.clone(), Side::Upper)?
                    .map(|value| BoundEnd {
                        value,
                        inclusive: close.as_str() == "]",
                    });
            }
            _ => {
                return Err(syntax_error(
                    span,
                    "a bound such as `> 0` or `in [0, 1]` is expected",
                ))
            }
        }
        Ok(Bound { lower, upper, span })
    }

    /// A bound end; `None` for an infinite end on its own side (`-inf` below, `inf`
    /// above), which bounds nothing. An infinite end on the wrong side (`>= inf`,
    /// `< -inf`) is kept as an infinite number: it admits no value, which the analysis
    /// reports and the formatter prints as written.
    fn bound_value(&mut self, pair: Pair<Rule>, side: Side) -> Result<Option<Number>> {
        let span = self.span(&pair);
        let inner = pair
            .into_inner()
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a number or `inf` is expected"))?;
        match inner.as_rule() {
            Rule::infinity => {
                let text: String = inner.as_str().split_whitespace().collect();
                let negative = text.starts_with('-');
                if negative == (side == Side::Lower) {
                    return Ok(None);
                }
                Ok(Some(Number {
                    value: if negative {
                        f64::NEG_INFINITY
                    } else {
                        f64::INFINITY
                    },
                    text,
                    span,
                }))
            }
            _ => self.signed_number(inner).map(Some),
        }
    }

    /// The figure and arguments of an `expect` line. Each figure takes its own arguments
    /// (see [`Figure::form`]).
    fn expectation(
        &mut self,
        figure_pair: Pair<Rule>,
        args: Vec<Pair<Rule>>,
        args_span: Span,
        condition: Condition,
    ) -> Result<Expectation> {
        let figure_span = self.span(&figure_pair);
        let figure = Figure::from_keyword(figure_pair.as_str()).ok_or_else(|| {
            syntax_error(
                figure_span.clone(),
                format!(
                    "`{}` is not a figure that can be pinned",
                    figure_pair.as_str()
                ),
            )
            .with_help(
                "the figures are mean, variance, sd, halflife, stationary_mean, \
                 stationary_variance, stationary_sd, prob, quantile, price, yield and forward",
            )
        })?;
        let shape = |what: String| {
            syntax_error(args_span.clone(), what).with_help(format!(
                "write `{}`, e.g. `{}`",
                figure.form(),
                example(figure)
            ))
        };
        let mut x = Expectation {
            figure,
            figure_span,
            state: None,
            side: None,
            level: None,
            at: None,
            condition,
        };
        let rules: Vec<Rule> = args.iter().map(Pair::as_rule).collect();
        let mut args = args.into_iter();
        match (figure, rules.as_slice()) {
            (Figure::Prob, [Rule::threshold] | [Rule::threshold, Rule::quantity]) => {
                let threshold = args.next().map(Pair::into_inner);
                let mut parts = threshold.into_iter().flatten();
                let (Some(name), Some(op), Some(level)) =
                    (parts.next(), parts.next(), parts.next())
                else {
                    return Err(shape(
                        "a factor, `<` or `>` and a level are expected".into(),
                    ));
                };
                x.state = Some(self.ident(&name));
                x.side = Some(match op.as_str() {
                    "<" => crate::ast::Side::Below,
                    ">" => crate::ast::Side::Above,
                    other => {
                        return Err(syntax_error(
                            self.span(&op),
                            format!("`{other}` is not taken in `prob`"),
                        )
                        .with_help(format!(
                            "the laws are continuous, so the probability is the same with `{}`; write that",
                            &other[..1]
                        )))
                    }
                });
                x.level = Some(self.quantity(level)?);
            }
            (Figure::Prob, _) => {
                return Err(shape(
                    "`prob` takes a comparison of a factor with a level, then an optional time"
                        .into(),
                ))
            }
            (
                Figure::Quantile,
                [Rule::name, Rule::quantity] | [Rule::name, Rule::quantity, Rule::quantity],
            ) => {
                if let Some(name) = args.next() {
                    x.state = Some(self.ident(&name));
                }
                if let Some(p) = args.next() {
                    x.level = Some(self.quantity(p)?);
                }
            }
            (Figure::Quantile, _) => {
                return Err(shape(
                    "`quantile` takes a factor, a probability and an optional time".into(),
                ))
            }
            (Figure::Price | Figure::Yield | Figure::Forward, [Rule::quantity]) => {}
            (Figure::Price | Figure::Yield | Figure::Forward, _) => {
                return Err(shape(format!(
                    "`{}` belongs to the curve of the `discount` rate and takes one maturity",
                    figure.keyword()
                )))
            }
            (_, [Rule::name] | [Rule::name, Rule::quantity]) => {
                if let Some(name) = args.next() {
                    x.state = Some(self.ident(&name));
                }
            }
            (_, _) => {
                return Err(shape(format!(
                    "`{}` takes a factor{}",
                    figure.keyword(),
                    if figure.takes_time() {
                        " and an optional time"
                    } else {
                        ""
                    }
                )))
            }
        }
        if let Some(q) = args.next() {
            let q = self.quantity(q)?;
            if !figure.takes_time() {
                let state = x.state.as_ref().map_or("", |s| s.name.as_str());
                return Err(syntax_error(
                    q.span.clone(),
                    format!(
                        "`{}` does not depend on time and takes no time argument",
                        figure.keyword()
                    ),
                )
                .with_help(format!("write `{}({state})`", figure.keyword())));
            }
            x.at = Some(q);
        }
        Ok(x)
    }

    fn condition(&mut self, pair: Pair<Rule>) -> Result<Condition> {
        let span = self.span(&pair);
        let parts: Vec<Pair<Rule>> = pair
            .into_inner()
            .filter(|p| !is_keyword_token(p.as_rule()))
            .collect();
        match parts.as_slice() {
            [op, value] => {
                let op = match op.as_str() {
                    "<" => Comparison::Less,
                    "<=" => Comparison::LessEqual,
                    ">" => Comparison::Greater,
                    _ => Comparison::GreaterEqual,
                };
                Ok(Condition::Compare {
                    op,
                    value: self.quantity(value.clone())?,
                })
            }
            [open, a, b, close] => Ok(Condition::Within {
                lower: self.quantity(a.clone())?,
                lower_inclusive: open.as_str() == "[",
                upper: self.quantity(b.clone())?,
                upper_inclusive: close.as_str() == "]",
            }),
            _ => Err(syntax_error(
                span,
                "a condition such as `< 6 month` or `in [a, b]` is expected",
            )),
        }
    }

    fn expr(&mut self, pair: Pair<Rule>) -> Result<Expr> {
        let span = self.span(&pair);
        self.count(&span)?;
        match pair.as_rule() {
            Rule::expr => {
                let mut inner = pair.into_inner();
                let first = inner
                    .next()
                    .ok_or_else(|| syntax_error(span.clone(), "an expression is expected"))?;
                let mut acc = self.expr(first)?;
                while let (Some(op), Some(rhs)) = (inner.next(), inner.next()) {
                    let rhs = self.expr(rhs)?;
                    let op = if op.as_str() == "+" {
                        BinaryOp::Add
                    } else {
                        BinaryOp::Sub
                    };
                    acc = binary(op, acc, rhs);
                }
                Ok(acc)
            }
            Rule::product => {
                let factors = self.factors(pair)?;
                fold_product(factors).ok_or_else(|| syntax_error(span, "an expression is expected"))
            }
            Rule::unary => {
                let mut minus_spans = Vec::new();
                let mut operand = None;
                for p in pair.into_inner() {
                    if p.as_rule() == Rule::minus {
                        let minus = self.span(&p);
                        // Every minus is a node: `----…1` must not nest without limit.
                        self.count(&minus)?;
                        minus_spans.push(minus);
                    } else {
                        operand = Some(self.expr(p)?);
                    }
                }
                let mut acc = operand
                    .ok_or_else(|| syntax_error(span.clone(), "an expression is expected"))?;
                for m in minus_spans.into_iter().rev() {
                    let s = m.start..acc.span().end;
                    acc = Expr::Neg {
                        operand: Box::new(acc),
                        span: s,
                    };
                }
                Ok(acc)
            }
            Rule::power => {
                let mut inner = pair.into_inner();
                let base_pair = inner
                    .next()
                    .ok_or_else(|| syntax_error(span.clone(), "an expression is expected"))?;
                let base = self.expr(base_pair)?;
                match inner.next() {
                    Some(exp) => {
                        let exp = self.expr(exp)?;
                        Ok(binary(BinaryOp::Pow, base, exp))
                    }
                    None => Ok(base),
                }
            }
            Rule::number => Ok(Expr::Number(self.plain_number(pair)?)),
            Rule::quantity_atom => {
                let mut inner = pair.into_inner();
                let (Some(number_pair), Some(unit_pair)) = (inner.next(), inner.next()) else {
                    return Err(syntax_error(span, "a number with a unit is expected"));
                };
                let number = self.plain_number(number_pair)?;
                let unit = Some(self.bracket_unit(unit_pair)?);
                Ok(Expr::Quantity(Quantity { number, unit, span }))
            }
            Rule::name | Rule::name_or_function => Ok(Expr::Name(self.ident(&pair))),
            Rule::call => {
                let mut inner = pair.into_inner();
                let function_pair = inner
                    .next()
                    .ok_or_else(|| syntax_error(span.clone(), "a function name is expected"))?;
                let function = self.ident(&function_pair);
                let mut args = Vec::new();
                for p in inner {
                    args.push(self.expr(p)?);
                }
                Ok(Expr::Call {
                    function,
                    args,
                    span,
                })
            }
            Rule::paren => {
                let inner_pair = pair
                    .into_inner()
                    .next()
                    .ok_or_else(|| syntax_error(span.clone(), "an expression is expected"))?;
                Ok(Expr::Paren {
                    inner: Box::new(self.expr(inner_pair)?),
                    span,
                })
            }
            _ => Err(syntax_error(span, "an expression is expected")),
        }
    }

    /// The factors of a product with the operator before each (the first has `*`).
    fn factors(&mut self, pair: Pair<Rule>) -> Result<Vec<(BinaryOp, Expr)>> {
        let mut factors = Vec::new();
        let mut op = BinaryOp::Mul;
        for p in pair.into_inner() {
            if p.as_rule() == Rule::mul_op {
                op = if p.as_str() == "*" {
                    BinaryOp::Mul
                } else {
                    BinaryOp::Div
                };
            } else {
                factors.push((op, self.expr(p)?));
            }
        }
        Ok(factors)
    }

    fn terms(&mut self, pair: Pair<Rule>) -> Result<Vec<Term>> {
        let mut terms = Vec::new();
        let mut sign = Sign::Plus;
        for p in pair.into_inner() {
            match p.as_rule() {
                Rule::add_op => {
                    sign = if p.as_str() == "+" {
                        Sign::Plus
                    } else {
                        Sign::Minus
                    };
                }
                _ => {
                    // A term with no differential is reported and left out; the rest
                    // of the equation is still analysed.
                    match self.term(sign, p) {
                        Ok(term) => terms.push(term),
                        Err(e) if e.message == NO_DIFFERENTIAL => self.soft.push(e),
                        Err(e) => return Err(e),
                    }
                    sign = Sign::Plus;
                }
            }
        }
        Ok(terms)
    }

    fn term(&mut self, mut sign: Sign, pair: Pair<Rule>) -> Result<Term> {
        let span = self.span(&pair);
        let mut inner = pair.into_inner();
        let product = inner
            .next()
            .ok_or_else(|| syntax_error(span.clone(), "a term is expected"))?;
        let mut factors = self.factors(product)?;
        let juxtaposed = inner.next().and_then(|j| j.into_inner().next());
        let differential = if let Some(name_pair) = juxtaposed {
            let ident = self.ident(&name_pair);
            differential_of(&ident).ok_or_else(|| not_a_differential(&ident))?
        } else {
            let (op, last) = factors
                .pop()
                .ok_or_else(|| syntax_error(span.clone(), "a term is expected"))?;
            let (negated, bare) = strip_negations(&last);
            let differential = match bare {
                Expr::Name(ident) => differential_of(ident),
                _ => None,
            };
            let Some(differential) = differential else {
                return Err(syntax_error(
                    span.clone(),
                    NO_DIFFERENTIAL,
                )
                .with_label("a term ends with `dt` or `dW`")
                .with_help("end the term with `dt` for drift or `dW` for diffusion on the shock `W`, e.g. `kappa * (level - x) dt`"));
            };
            if op == BinaryOp::Div {
                return Err(
                    syntax_error(last.span(), "a differential cannot divide").with_help(
                        "write the differential as the last factor, multiplied: `vol * x dW`",
                    ),
                );
            }
            if negated {
                sign = match sign {
                    Sign::Plus => Sign::Minus,
                    Sign::Minus => Sign::Plus,
                };
            }
            differential
        };
        let coefficient = fold_product(factors);
        Ok(Term {
            sign,
            coefficient,
            differential,
            span,
        })
    }
}

const NO_DIFFERENTIAL: &str = "this term has no differential";

/// `(negated an odd number of times, the expression without the negations)`.
fn strip_negations(mut expr: &Expr) -> (bool, &Expr) {
    let mut negated = false;
    while let Expr::Neg { operand, .. } = expr {
        negated = !negated;
        expr = operand;
    }
    (negated, expr)
}

fn differential_of(ident: &Ident) -> Option<Differential> {
    if ident.name == "dt" {
        return Some(Differential::Time(ident.span.clone()));
    }
    let rest = ident.name.strip_prefix('d')?;
    if rest.is_empty() || !rest.chars().next().is_some_and(is_ident_start) {
        return None;
    }
    Some(Differential::Shock {
        shock: Ident {
            name: rest.to_string(),
            span: ident.span.start + 1..ident.span.end,
        },
        token: ident.span.clone(),
    })
}

fn not_a_differential(ident: &Ident) -> Diagnostic {
    syntax_error(
        ident.span.clone(),
        format!("`{}` is not a differential", ident.name),
    )
    .with_help("a term ends with `dt` (drift) or `dW` (diffusion on the shock `W`); write `*` between the numbers and names you multiply")
}

fn binary(op: BinaryOp, lhs: Expr, rhs: Expr) -> Expr {
    let span = lhs.span().start..rhs.span().end;
    Expr::Binary {
        op,
        lhs: Box::new(lhs),
        rhs: Box::new(rhs),
        span,
    }
}

fn fold_product(factors: Vec<(BinaryOp, Expr)>) -> Option<Expr> {
    let mut iter = factors.into_iter();
    let (_, first) = iter.next()?;
    Some(iter.fold(first, |acc, (op, rhs)| binary(op, acc, rhs)))
}

fn gcd(mut a: u64, mut b: u64) -> u64 {
    while b != 0 {
        let r = a % b;
        a = b;
        b = r;
    }
    a
}
