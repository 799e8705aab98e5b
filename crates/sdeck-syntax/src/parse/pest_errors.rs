//! pest's errors turned into `syntax` diagnostics that name what was expected.

use super::{syntax_error, Rule};
use crate::ast::Figure;
use crate::split::{is_ident_char, is_ident_start};
use pest::error::{ErrorVariant, InputLocation};
use sdeck_diagnostics::Diagnostic;

pub(super) fn describe_rule(rule: Rule) -> Option<&'static str> {
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
pub(super) fn describe_found(src: &str, pos: usize) -> (String, usize) {
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
pub(super) fn example(figure: Figure) -> &'static str {
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
pub(super) fn statement_help(src: &str) -> Option<&'static str> {
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
/// of `src` (see [`retired_keyword`](super::precheck::retired_keyword)).
pub(super) fn convert_pest_error(
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

pub(super) fn join_or(items: &[&str]) -> String {
    match items {
        [] => String::new(),
        [one] => (*one).to_string(),
        [init @ .., last] => format!("{} or {}", init.join(", "), last),
    }
}
