//! Tests of the server's features on analysed text: hover figures against published
//! closed forms, quick fixes that make their diagnostic disappear, rename, tokens, and the
//! panic guard. The protocol itself is tested end to end in tests/lsp.

use crate::analysis::Analyzed;
use crate::documents::{PositionEncoding, TextSnapshot};
use sdeck_syntax::{LineCol, LineIndex};
use std::sync::Arc;
use tower_lsp::lsp_types::{
    CodeActionOrCommand, HoverContents, MarkupKind, Position, Range, TextEdit, Url, WorkspaceEdit,
};

const UTF16: PositionEncoding = PositionEncoding::Utf16;

fn analyzed(text: &str) -> Analyzed {
    Analyzed::compute(TextSnapshot {
        text: text.to_string(),
        version: 1,
        project: Arc::new(crate::analysis::ProjectSettings::default()),
        stem: "test_model".to_string(),
    })
}

fn uri() -> Url {
    Url::parse("file:///tmp/test_model.sde").expect("a valid URI")
}

/// The protocol position of the first occurrence of `needle` (plus `after` chars).
fn position_of(text: &str, needle: &str, after: usize) -> Position {
    let offset = text.find(needle).expect("needle in text") + after;
    let index = LineIndex::new(text);
    let lc = index.line_col(text, offset, sdeck_syntax::Encoding::Utf16);
    Position {
        line: lc.line,
        character: lc.col,
    }
}

fn whole(text: &str) -> Range {
    let index = LineIndex::new(text);
    let end = index.line_col(text, text.len(), sdeck_syntax::Encoding::Utf16);
    Range {
        start: Position::default(),
        end: Position {
            line: end.line,
            character: end.col,
        },
    }
}

/// Applies the edits of a workspace edit to `text` (edits do not overlap).
fn apply(text: &str, edit: &WorkspaceEdit) -> String {
    let index = LineIndex::new(text);
    let mut edits: Vec<&TextEdit> = edit
        .changes
        .iter()
        .flat_map(|c| c.values())
        .flatten()
        .collect();
    let offset = |p: Position| {
        index.offset(
            text,
            LineCol {
                line: p.line,
                col: p.character,
            },
            sdeck_syntax::Encoding::Utf16,
        )
    };
    edits.sort_by_key(|e| std::cmp::Reverse(offset(e.range.start)));
    let mut out = text.to_string();
    for e in edits {
        out.replace_range(offset(e.range.start)..offset(e.range.end), &e.new_text);
    }
    out
}

fn hover_text(a: &Analyzed, position: Position) -> String {
    match crate::hover::hover(a, UTF16, position, MarkupKind::Markdown).map(|h| h.contents) {
        Some(HoverContents::Markup(m)) => m.value,
        other => panic!("no markdown hover: {other:?}"),
    }
}

/// The number in the row `| label | number ... |` of a hover table.
fn row_value(markdown: &str, label: &str) -> f64 {
    let prefix = format!("| {label} | ");
    let line = markdown
        .lines()
        .find(|l| l.starts_with(&prefix))
        .expect("row present");
    line[prefix.len()..]
        .split_whitespace()
        .next()
        .and_then(|x| x.parse().ok())
        .expect("a number")
}

const VASICEK: &str = "model larkspur_short_rate\nclock year\nhorizon 2 year\n\
param kappa = 0.5% [1/day] > 0  # speed\nparam theta = 3%\nparam sigma = 1% [1/sqrt(year)] > 0\n\
shock W\nfactor r = 1%\ndr = kappa * (theta - r) dt + sigma dW\n";

#[test]
fn an_analysis_whose_text_turns_stale_is_given_up() {
    let snapshot = |text: &str| TextSnapshot {
        text: text.to_string(),
        version: 1,
        project: Arc::new(crate::analysis::ProjectSettings::default()),
        stem: "test_model".to_string(),
    };
    assert!(Analyzed::compute_unless_stale(snapshot(VASICEK), &|| true, Arc::default()).is_none());
    let full = Analyzed::compute_unless_stale(snapshot(VASICEK), &|| false, Arc::default())
        .expect("analysed");
    assert_eq!(
        full.check.diagnostics,
        analyzed(VASICEK).check.diagnostics,
        "never stale: the same analysis as compute"
    );
}

#[test]
fn hover_on_a_state_shows_the_vasicek_moments_at_the_horizon() {
    let a = analyzed(VASICEK);
    let md = hover_text(&a, position_of(VASICEK, "dr =", 1));
    assert!(md.contains("ornstein-uhlenbeck"), "{md}");
    // Vasicek 1977, J. Financial Economics 5, eq. (27)-(28): mean θ + (r0 − θ)e^{−κt},
    // variance σ²(1 − e^{−2κt})/(2κ); κ = 0.005 × 365 a year, t = 2 years.
    let (kappa, theta, sigma, r0, t) = (0.005 * 365.0, 0.03, 0.01, 0.01, 2.0);
    let mean = theta + (r0 - theta) * f64::exp(-kappa * t);
    let variance = sigma * sigma * (1.0 - f64::exp(-2.0 * kappa * t)) / (2.0 * kappa);
    // Four significant digits: within half a unit of the fourth.
    assert!((row_value(&md, "mean") / mean - 1.0).abs() < 5e-4, "{md}");
    assert!(
        (row_value(&md, "variance") / variance - 1.0).abs() < 5e-4,
        "{md}"
    );
    assert!((row_value(&md, "sd") / variance.sqrt() - 1.0).abs() < 5e-4);
    // Half-life ln 2 / κ (common practice, no source), in days as κ is written per day.
    assert!((row_value(&md, "half-life") / (2f64.ln() / 0.005) - 1.0).abs() < 5e-4);
    assert!(md.contains("| half-life | 138.6 day |"), "{md}");
    // The figures come before the formulas.
    assert!(md.find("| mean |") < md.find("solution"), "{md}");
}

#[test]
fn hover_on_a_param_shows_its_clock_value_bound_description_and_half_life() {
    let a = analyzed(VASICEK);
    let md = hover_text(&a, position_of(VASICEK, "kappa *", 2));
    assert!(md.contains("= 1.825 [1/year]"), "{md}");
    assert!(md.contains("bound: `> 0`"), "{md}");
    assert!(md.contains("_speed_"), "{md}");
    // Half-life ln 2 / κ (common practice, no source), in the unit κ is written in.
    assert!(md.contains("half-life 138.6 day"), "{md}");
}

#[test]
fn hover_on_a_noise_lists_its_correlations_and_on_a_unit_its_scale() {
    let text = "shock W, V\ncorr W V = 0.4\nparam k = 2 [1/month]\nfactor x = 0\n\
dx = -k * x dt + 0.1 [1/sqrt(year)] dW\n";
    let text = text.replace(" [1/sqrt(year)]", "");
    let a = analyzed(&text);
    let md = hover_text(&a, position_of(&text, "W,", 0));
    assert!(md.contains("ρ(W, V) = 0.4"), "{md}");
    let md = hover_text(&a, position_of(&text, "month", 1));
    assert!(md.contains("1 month = 0.0833333 year"), "{md}");
}

#[test]
fn inlay_hints_show_conversion_half_life_and_stationary_sd() {
    let a = analyzed(VASICEK);
    let labels: Vec<String> = crate::hints::inlay_hints(&a, UTF16, whole(VASICEK))
        .into_iter()
        .map(|h| match h.label {
            tower_lsp::lsp_types::InlayHintLabel::String(s) => s,
            other => format!("{other:?}"),
        })
        .collect();
    assert!(
        labels.contains(&"= 1.825 [1/year]".to_string()),
        "{labels:?}"
    );
    // Half-life ln 2 / κ = 138.63 days (common practice, no source), in days as κ is
    // written per day, four significant digits.
    assert!(
        labels.contains(&"half-life 138.6 day".to_string()),
        "{labels:?}"
    );
    // Stationary sd σ/√(2κ) (Vasicek 1977, as t → ∞).
    let sd = 0.01 / (2.0f64 * 1.825).sqrt();
    let shown = labels
        .iter()
        .find_map(|l| l.strip_prefix("stationary sd "))
        .expect("sd hint");
    assert!((shown.parse::<f64>().unwrap_or(0.0) / sd - 1.0).abs() < 1e-5);
}

#[test]
fn a_half_life_of_a_speed_in_clock_units_reads_in_the_most_readable_unit() {
    // ln 2 / κ (common practice, no source): κ = 9.125 a year gives 0.07596 year = 27.73
    // days; κ = 1.2 a year gives 0.5776 year = 6.931 months; κ = 0.05 a year 13.86 years.
    for (kappa, shown) in [
        ("9.125", "half-life 27.73 day"),
        ("1.2", "half-life 6.931 month"),
        ("0.05", "half-life 13.86 year"),
    ] {
        let text = format!(
            "clock year\nhorizon 1 year\nparam kappa = {kappa} [1/year]\nparam sigma = 1% [1/sqrt(year)]\n\
shock W\nfactor r = 1%\ndr = -kappa * r dt + sigma dW\n"
        );
        let a = analyzed(&text);
        let labels: Vec<String> = crate::hints::inlay_hints(&a, UTF16, whole(&text))
            .into_iter()
            .filter_map(|h| match h.label {
                tower_lsp::lsp_types::InlayHintLabel::String(s) => Some(s),
                _ => None,
            })
            .collect();
        assert!(labels.contains(&shown.to_string()), "{kappa}: {labels:?}");
        let md = hover_text(&a, position_of(&text, "kappa *", 2));
        assert!(md.contains(shown), "{kappa}: {md}");
    }
}

fn actions(a: &Analyzed, text: &str) -> Vec<tower_lsp::lsp_types::CodeAction> {
    crate::actions::code_actions(a, UTF16, &uri(), whole(text))
        .into_iter()
        .filter_map(|c| match c {
            CodeActionOrCommand::CodeAction(a) => Some(a),
            CodeActionOrCommand::Command(_) => None,
        })
        .collect()
}

fn rules_of(text: &str) -> Vec<&'static str> {
    analyzed(text)
        .check
        .diagnostics
        .iter()
        .map(|d| d.rule.name())
        .collect()
}

#[test]
fn the_feller_quick_fixes_reach_the_boundary() {
    let text = "clock year\nparam kappa = 0.5 [1/year] > 0\nparam level = 2% >= 0\n\
param vol = 20% [1/sqrt(year)] > 0\nshock W\nfactor r = 1.8% >= 0\n\
dr = kappa * (level - r) dt + vol * sqrt(r) dW\n";
    assert!(rules_of(text).contains(&"feller-condition"));
    let a = analyzed(text);
    let all = actions(&a, text);
    let raise = all
        .iter()
        .find(|c| c.title.starts_with("Raise `kappa`"))
        .expect("raise");
    let lower = all
        .iter()
        .find(|c| c.title.starts_with("Lower `vol`"))
        .expect("lower");
    // Boundary: 2κθ = σ² (Feller 1951; common practice): κ = 0.04 / 0.04 = 1,
    // σ = sqrt(2 × 0.5 × 0.02) = 14.1421%, written with the three digits of the
    // diagnostic's help, rounded towards the safe side: 14.1%.
    let raised = apply(text, raise.edit.as_ref().expect("edit"));
    let kappa: f64 = raised
        .split("param kappa = ")
        .nth(1)
        .and_then(|rest| rest.split_whitespace().next())
        .and_then(|x| x.parse().ok())
        .expect("a number");
    // 2 × 1 × 0.02 falls a rounding short of 0.2² in floating point, so the speed goes
    // one step of the third digit further.
    assert!((1.0..=1.01).contains(&kappa), "{raised}");
    assert!(!rules_of(&raised).contains(&"feller-condition"));
    let lowered = apply(text, lower.edit.as_ref().expect("edit"));
    assert!(lowered.contains("param vol = 14.1%"), "{lowered}");
    assert!(!rules_of(&lowered).contains(&"feller-condition"));
    // The help names the same numbers, and the message does not repeat it.
    let feller = a
        .check
        .diagnostics
        .iter()
        .find(|d| d.rule.name() == "feller-condition")
        .expect("feller");
    let help = feller.help.clone().unwrap_or_default();
    assert!(
        help.contains(&format!("raise kappa to at least {kappa} [1/year]")),
        "{help}"
    );
    assert!(
        help.contains("lower vol to at most 0.141 [1/sqrt(year)]"),
        "{help}"
    );
    assert!(!feller.message.contains("raise"), "{}", feller.message);
}

#[test]
fn the_nearest_correlation_fix_clears_the_psd_error() {
    let text = "shock A, B, C\ncorr A B = 0.9\ncorr B C = 0.9\ncorr A C = -0.9\n\
factor x = 0\ndx = 0.1 dA + 0.1 dB + 0.1 dC\n";
    assert!(rules_of(text).contains(&"correlation-not-psd"));
    let a = analyzed(text);
    let fix = actions(&a, text)
        .into_iter()
        .find(|c| c.title.contains("nearest correlation"))
        .expect("fix offered");
    let fixed = apply(text, fix.edit.as_ref().expect("edit"));
    assert!(
        !rules_of(&fixed).contains(&"correlation-not-psd"),
        "{fixed}"
    );
    assert_eq!(fixed.matches("corr").count(), 3, "{fixed}");
}

#[test]
fn the_nearest_correlation_fix_rewrites_a_correlation_parameter_and_leaves_expressions() {
    // `corr A B = rho`: the parameter's value is rewritten.
    let text = "param rho = 0.9 in [-1, 1]\nshock A, B, C\ncorr A B = rho\ncorr B C = 0.9\n\
corr A C = -0.9\nfactor x = 0\ndx = 0.1 dA + 0.1 dB + 0.1 dC\n";
    assert!(rules_of(text).contains(&"correlation-not-psd"));
    let a = analyzed(text);
    let fix = actions(&a, text)
        .into_iter()
        .find(|c| c.title.contains("nearest correlation"))
        .expect("fix offered");
    let fixed = apply(text, fix.edit.as_ref().expect("edit"));
    assert!(fixed.contains("corr A B = rho\n"), "{fixed}");
    assert!(!fixed.contains("param rho = 0.9 "), "{fixed}");
    assert!(
        !rules_of(&fixed).contains(&"correlation-not-psd"),
        "{fixed}"
    );
    // `corr A B = rho * 1`: no quick fix can rewrite an expression; the diagnostic says so.
    let text = text.replace("corr A B = rho", "corr A B = rho * 1");
    let a = analyzed(&text);
    assert!(!actions(&a, &text)
        .iter()
        .any(|c| c.title.contains("nearest correlation")));
    let psd = a
        .check
        .diagnostics
        .iter()
        .find(|d| d.rule.name() == "correlation-not-psd")
        .expect("still reported");
    assert!(
        psd.notes
            .iter()
            .any(|n| n.contains("no quick fix rewrites an expression")),
        "{psd:?}"
    );
}

#[test]
fn hover_on_a_param_written_as_an_expression_shows_its_value() {
    let text = "param theta = 3%\nparam stress = theta + 150bp\nshock W\nfactor r = stress\n\
dr = (theta - r) * 1 [1/year] dt + 1% [1/sqrt(year)] dW\n";
    let a = analyzed(text);
    let shown = hover_text(&a, Position::new(1, 8));
    assert!(shown.contains("`theta + 150bp`"), "{shown}");
    assert!(shown.contains("value 0.045"), "{shown}");
    let shown = hover_text(&a, Position::new(3, 8));
    assert!(shown.contains("initial value `stress` = 0.045"), "{shown}");
}

#[test]
fn a_semantic_fix_becomes_a_quick_fix_that_removes_its_diagnostic() {
    let text = "param k = 1 [1/year]\nfactor x = 0\ndx = -k * x dt + 0.1 dW\n";
    assert!(rules_of(text).contains(&"unknown-name"));
    let a = analyzed(text);
    let fix = actions(&a, text)
        .into_iter()
        .find(|c| c.title.contains("shock W"))
        .expect("declare-shock fix");
    assert!(fix.diagnostics.as_ref().is_some_and(|d| !d.is_empty()));
    let fixed = apply(text, fix.edit.as_ref().expect("edit"));
    assert!(!rules_of(&fixed).contains(&"unknown-name"), "{fixed}");
}

#[test]
fn a_retired_keyword_is_rewritten_by_its_quick_fixes() {
    let text = "param k = 1 [1/year] > 0\nparam v = 0.1 [1/sqrt(year)]\nnoise W\nstate x = 0\n\
                dx = -k * x dt + v dW\n";
    assert_eq!(rules_of(text), ["syntax", "syntax"]);
    let a = analyzed(text);
    let mut fixed = text.to_string();
    for old in ["state", "noise"] {
        let a = analyzed(&fixed);
        let fix = actions(&a, &fixed)
            .into_iter()
            .find(|c| c.title.contains(&format!("for `{old}`")))
            .expect("rewrite offered");
        fixed = apply(&fixed, fix.edit.as_ref().expect("edit"));
    }
    assert!(actions(&a, text).len() >= 2);
    assert_eq!(
        fixed,
        "param k = 1 [1/year] > 0\nparam v = 0.1 [1/sqrt(year)]\nshock W\nfactor x = 0\n\
         dx = -k * x dt + v dW\n"
    );
    assert!(rules_of(&fixed).is_empty(), "{fixed}");
}

#[test]
fn the_moments_refactor_inserts_a_comment_and_changes_nothing_else() {
    let a = analyzed(VASICEK);
    let insert = actions(&a, VASICEK)
        .into_iter()
        .find(|c| c.title.starts_with("Insert the derived moments"))
        .expect("refactor");
    let out = apply(VASICEK, insert.edit.as_ref().expect("edit"));
    assert!(out.contains("# r: ornstein-uhlenbeck\n"), "{out}");
    assert!(out.contains("# at t = 2 year: mean"), "{out}");
    assert_eq!(rules_of(&out), rules_of(VASICEK));
}

#[test]
fn rename_changes_the_declaration_and_every_use_including_differentials() {
    let text = "shock W\nfactor x = 0\ndx = 0.1 dW\n";
    let a = analyzed(text);
    let edit = crate::navigation::rename(&a, UTF16, &uri(), position_of(text, "W", 0), "Z")
        .expect("valid name")
        .expect("an edit");
    assert_eq!(apply(text, &edit), "shock Z\nfactor x = 0\ndx = 0.1 dZ\n");
    let edit = crate::navigation::rename(&a, UTF16, &uri(), position_of(text, "dx", 1), "σ_x")
        .expect("valid")
        .expect("edit");
    assert_eq!(
        apply(text, &edit),
        "shock W\nfactor σ_x = 0\ndσ_x = 0.1 dW\n"
    );
    for bad in ["exp", "param", "1x", "x y", "W"] {
        let r = crate::navigation::rename(&a, UTF16, &uri(), position_of(text, "x =", 0), bad);
        assert!(r.is_err(), "{bad} accepted");
    }
}

#[test]
fn definition_and_references_find_the_declaration_and_uses() {
    let a = analyzed(VASICEK);
    let at_use = position_of(VASICEK, "theta -", 1);
    let def = crate::navigation::definition(&a, UTF16, &uri(), at_use).expect("found");
    assert_eq!(def.range.start, position_of(VASICEK, "theta =", 0));
    let refs = crate::navigation::references(&a, UTF16, &uri(), at_use, true).expect("found");
    assert_eq!(refs.len(), 2);
    let symbols = crate::navigation::document_symbols(&a, UTF16);
    assert_eq!(symbols.len(), 5);
}

#[test]
fn semantic_tokens_are_ordered_single_line_and_typed() {
    let text =
        "# κ model 🚀\nparam κ = 2 [1/year]\nshock W\nfactor x = 0\ndx = -κ * exp(x) dt + 0.1 dW\n";
    let a = analyzed(text);
    let tokens = crate::tokens::semantic_tokens(&a, UTF16, None);
    assert!(tokens.len() >= 10, "{tokens:?}");
    // The first token is the comment, 12 UTF-16 units long (🚀 counts two).
    assert_eq!(
        (tokens[0].delta_line, tokens[0].length, tokens[0].token_type),
        (0, 12, 1)
    );
    // Line 1: `param` keyword, then κ declared as a parameter.
    assert_eq!(
        (
            tokens[1].delta_line,
            tokens[1].delta_start,
            tokens[1].token_type
        ),
        (1, 0, 0)
    );
    assert_eq!(
        (
            tokens[2].delta_start,
            tokens[2].length,
            tokens[2].token_type,
            tokens[2].token_modifiers_bitset
        ),
        (6, 1, 3, 1)
    );
}

#[test]
fn completion_inside_brackets_offers_units_only() {
    let text = "unit EUR\nparam k = 1 [\n";
    let a = analyzed(text);
    let items = crate::completion::complete(&a, UTF16, position_of(text, "[", 1)).items;
    let labels: Vec<&str> = items.iter().map(|i| i.label.as_str()).collect();
    assert!(labels.contains(&"day") && labels.contains(&"EUR"));
    assert!(!labels.contains(&"param"));
    let items = crate::completion::complete(
        &a,
        UTF16,
        Position {
            line: 2,
            character: 0,
        },
    )
    .items;
    assert!(items.iter().any(|i| i.label == "shock"));
}

#[test]
fn completion_of_a_large_model_is_narrowed_by_the_typed_word_and_capped() {
    // 400 parameters: with nothing typed the answer is capped and marked incomplete; the
    // typed letters narrow it to the names that hold them in order.
    let mut text = String::from("shock W\nfactor x = 0\n");
    for k in 0..400 {
        text.push_str(&format!("param kappa_{k} = 1 [1/year]\n"));
    }
    text.push_str("param theta = 2%\ndx = ");
    let a = analyzed(&text);
    let end = Position {
        line: text.matches('\n').count() as u32,
        character: 5,
    };
    let all = crate::completion::complete(&a, UTF16, end);
    assert!(all.is_incomplete);
    assert_eq!(all.items.len(), 200);
    text.push_str("th");
    let a = analyzed(&text);
    let narrowed = crate::completion::complete(
        &a,
        UTF16,
        Position {
            character: 7,
            ..end
        },
    );
    assert!(!narrowed.is_incomplete);
    let labels: Vec<&str> = narrowed.items.iter().map(|i| i.label.as_str()).collect();
    assert!(labels.contains(&"theta"), "{labels:?}");
    assert!(!labels.iter().any(|l| l.starts_with("kappa")), "{labels:?}");
    text.push_str(" + kappa_39");
    let a = analyzed(&text);
    let numbered = crate::completion::complete(
        &a,
        UTF16,
        Position {
            character: 7 + " + kappa_39".len() as u32,
            ..end
        },
    );
    let labels: Vec<&str> = numbered.items.iter().map(|i| i.label.as_str()).collect();
    assert!(
        labels.contains(&"kappa_39") && labels.contains(&"kappa_390"),
        "{labels:?}"
    );
    assert!(!labels.contains(&"kappa_4"), "{labels:?}");
}

#[test]
fn a_panic_becomes_an_error_response() {
    let r: tower_lsp::jsonrpc::Result<()> = crate::guard("a test", || panic!("boom"));
    let e = r.expect_err("an error");
    assert_eq!(e.code, tower_lsp::jsonrpc::ErrorCode::InternalError);
    assert!(e.message.contains("boom"));
    assert_eq!(crate::guard("a test", || 7).ok(), Some(7));
}

#[test]
fn features_do_not_panic_on_broken_or_empty_text() {
    for text in [
        "",
        "param",
        "dx = = dW\n",
        "factor x = 1 [\u{1F680}]\n",
        "shock W\ncorr W W = 2\n",
    ] {
        let a = analyzed(text);
        for line in 0..3 {
            for character in [0, 1, 5, 99] {
                let p = Position { line, character };
                let _ = crate::hover::hover(&a, UTF16, p, MarkupKind::Markdown);
                let _ = crate::hover::hover(&a, UTF16, p, MarkupKind::PlainText);
                let _ = crate::completion::complete(&a, UTF16, p);
                let _ = crate::navigation::prepare_rename(&a, UTF16, p);
            }
        }
        let _ = crate::hints::inlay_hints(&a, UTF16, whole(text));
        let _ = crate::actions::code_actions(&a, UTF16, &uri(), whole(text));
        let _ = crate::tokens::semantic_tokens(&a, UTF16, None);
    }
}

#[test]
fn the_feller_fix_writes_the_speed_in_its_declared_unit_and_style() {
    // kappa = 0.1% a day = 0.365 a year; boundary κ = σ²/(2θ) = 0.04/0.04 = 1 a year
    // (Feller 1951; common practice), which is 1/365 = 0.273973% a day.
    let text = "clock year\nparam kappa = 0.1% [1/day] > 0\nparam level = 2% >= 0\n\
param vol = 20% [1/sqrt(year)] > 0\nshock W\nfactor r = 1.8% >= 0\n\
dr = kappa * (level - r) dt + vol * sqrt(r) dW\n";
    let a = analyzed(text);
    let raise = actions(&a, text)
        .into_iter()
        .find(|c| c.title.starts_with("Raise `kappa`"))
        .expect("raise offered");
    let raised = apply(text, raise.edit.as_ref().expect("edit"));
    let written: f64 = raised
        .split("param kappa = ")
        .nth(1)
        .and_then(|rest| rest.split('%').next())
        .and_then(|x| x.parse().ok())
        .expect("a percentage");
    // 0.273973% rounded up to three digits, as the help writes it (0.00274 [1/day]).
    assert_eq!(written, 0.274, "{raised}");
    assert!(raised.contains("% [1/day]"), "{raised}");
    assert!(!rules_of(&raised).contains(&"feller-condition"), "{raised}");
}

#[test]
fn a_whole_text_edit_applied_by_the_document_store_gives_exactly_the_new_text() {
    // The range of a whole-document edit comes from `LineIndex`, the store applies it
    // with the rope: both must count lines alike (LF, CRLF, CR and nothing else), or the
    // edit ends early and the tail of the document is duplicated.
    use crate::documents::DocumentStore;
    for text in [
        "param a=1\rparam b=2\n",
        "param a=1\r\nparam b=2\r\n",
        "# note\u{2028}x\nparam a=1\u{85}\nparam b=2\r",
        "param a=1\u{b}\u{c}\rparam b=2",
    ] {
        let store = DocumentStore::default();
        store.open(uri(), text, 1, crate::analysis::ProjectSettings::default());
        let index = LineIndex::new(text);
        let range = crate::convert::Converter {
            text,
            index: &index,
            encoding: UTF16,
        }
        .range(&(0..text.len()));
        let change = tower_lsp::lsp_types::TextDocumentContentChangeEvent {
            range: Some(range),
            range_length: None,
            text: "new text\n".to_string(),
        };
        assert_eq!(store.apply(&uri(), 2, &[change], UTF16), Ok(()));
        let held = store.snapshot(&uri()).map(|s| s.text);
        assert_eq!(held.as_deref(), Some("new text\n"), "{text:?}");
    }
}

#[test]
fn diagnostics_after_a_lone_cr_are_on_their_own_line() {
    let text = "param a = 1\rparam b = 1 [1/year]\rparam a = 2\n";
    let a = analyzed(text);
    let converter = a.converter(UTF16);
    let lines: Vec<u32> = a
        .check
        .diagnostics
        .iter()
        .map(|d| converter.position(d.span.start).line)
        .collect();
    assert!(lines.contains(&2), "{lines:?}");
}

#[test]
fn hover_on_a_pinned_figure_gives_its_form_value_and_verdict() {
    let text = format!(
        "{VASICEK}discount r\nexpect prob(r < 0, 1 year) < 50%\nexpect yield(10 year) < 1%\n"
    );
    let a = analyzed(&text);
    let md = hover_text(&a, position_of(&text, "prob(", 1));
    assert!(md.starts_with("**prob** · the probability"), "{md}");
    assert!(md.contains("`prob(FACTOR < LEVEL[, TIME])"), "{md}");
    assert!(md.contains("% (as expected)"), "{md}");
    let md = hover_text(&a, position_of(&text, "yield(", 2));
    assert!(md.contains("`yield(MATURITY)`"), "{md}");
    assert!(md.contains("% (outside the expected values)"), "{md}");
}

#[test]
fn hover_shows_the_law_the_chance_of_a_negative_rate_and_the_curve() {
    let text = format!("{VASICEK}measure risk-neutral\ndiscount r\n");
    let a = analyzed(&text);
    let md = hover_text(&a, position_of(&text, "dr =", 1));
    assert!(md.contains("| law | normal |"), "{md}");
    // P(r < 0) at the horizon from the normal law of Vasicek 1977 (eq. 27-28).
    let (kappa, theta, sigma, r0, t) = (0.005 * 365.0, 0.03f64, 0.01f64, 0.01f64, 2.0);
    let mean = theta + (r0 - theta) * f64::exp(-kappa * t);
    let sd = (sigma * sigma * (1.0 - f64::exp(-2.0 * kappa * t)) / (2.0 * kappa)).sqrt();
    let below = statrs::distribution::ContinuousCDF::cdf(
        &statrs::distribution::Normal::new(mean, sd).expect("normal"),
        0.0,
    );
    assert!(
        (row_value(&md, "P(r < 0)") / below - 1.0).abs() < 5e-4,
        "{md}"
    );
    let md = hover_text(&a, position_of(&text, "discount", 2));
    assert!(md.contains("read as a rate per year"), "{md}");
    assert!(md.contains("Measure: risk-neutral"), "{md}");
    assert!(md.contains("| 10 year |"), "{md}");
}

#[test]
fn plain_hovers_have_no_markup_and_every_hover_fits_80_columns() {
    let text = format!("{VASICEK}measure risk-neutral\ndiscount r\n");
    let a = analyzed(&text);
    for (needle, shift) in [("dr =", 1), ("kappa *", 2), ("discount", 2), ("W\n", 0)] {
        let at = position_of(&text, needle, shift);
        for format in [MarkupKind::Markdown, MarkupKind::PlainText] {
            let Some(hover) = crate::hover::hover(&a, UTF16, at, format.clone()) else {
                panic!("no hover at {needle}");
            };
            let HoverContents::Markup(m) = hover.contents else {
                panic!("not markup");
            };
            assert_eq!(m.kind, format);
            assert!(
                m.value.lines().all(|l| l.chars().count() <= 80),
                "{}",
                m.value
            );
            if format == MarkupKind::PlainText {
                assert!(
                    !m.value.contains("**") && !m.value.contains('`'),
                    "{}",
                    m.value
                );
            }
        }
    }
}

#[test]
fn long_lines_break_at_spaces_and_keep_their_indent() {
    let text = format!("  {}\nshort\n", "word ".repeat(30).trim_end());
    let fitted = crate::hover::fit_columns(&text, 20);
    assert!(fitted.lines().all(|l| l.chars().count() <= 20), "{fitted}");
    assert!(
        fitted
            .lines()
            .skip(1)
            .take(3)
            .all(|l| l.starts_with("    word")),
        "{fitted}"
    );
    assert_eq!(
        fitted.split_whitespace().filter(|w| *w == "word").count(),
        30
    );
    assert!(fitted.ends_with("short\n"));
}

#[test]
fn hints_and_tokens_of_a_range_are_those_of_the_whole_within_it() {
    let a = analyzed(VASICEK);
    let line = |l: u32| Range {
        start: Position {
            line: l,
            character: 0,
        },
        end: Position {
            line: l,
            character: 200,
        },
    };
    let all = crate::hints::inlay_hints(&a, UTF16, whole(VASICEK));
    let on_kappa = crate::hints::inlay_hints(&a, UTF16, line(3));
    assert!(!on_kappa.is_empty());
    let shown = |hints: &[tower_lsp::lsp_types::InlayHint]| -> Vec<String> {
        hints
            .iter()
            .map(|h| format!("{:?} {:?}", h.position, h.label))
            .collect()
    };
    let kept: Vec<_> = all
        .iter()
        .filter(|h| h.position.line == 3)
        .cloned()
        .collect();
    assert_eq!(shown(&on_kappa), shown(&kept));
    // Tokens of line 3 alone: the first is delta-encoded from the start of the file.
    let part = crate::tokens::semantic_tokens(&a, UTF16, Some(line(3)));
    assert!(!part.is_empty());
    assert_eq!(part[0].delta_line, 3);
    assert!(part.iter().skip(1).all(|t| t.delta_line == 0));
}

/// Two spreads of the (fictional) Harrowgate Rates desk, with a comment on top.
fn two_spreads(comment: &str, kappa0: &str) -> String {
    format!(
        "# {comment}\nmodel harrowgate\nclock year\nhorizon 1 year\nshock M\n\
         param kappa0 = {kappa0} [1/year] > 0\nparam kappa1 = 0.8 [1/year] > 0\n\
         param vol = 1% [1/sqrt(year)] > 0\n\
         factor x0 = 2%\ndx0 = kappa0 * (3% - x0) dt + vol dM\n\
         factor x1 = 2%\ndx1 = kappa1 * (3% - x1) dt + vol dM\n\
         expect sd(x0) in [0.5%, 0.9%]\nexpect sd(x1) in [0.5%, 0.9%]\n"
    )
}

#[test]
fn a_later_version_takes_over_the_reports_of_factors_whose_content_is_the_same() {
    let memo = Arc::new(crate::analysis::DocumentMemo::default());
    let version = |text: &str, version: i32| {
        let snapshot = TextSnapshot {
            text: text.to_string(),
            version,
            project: Arc::new(crate::analysis::ProjectSettings::default()),
            stem: "harrowgate".to_string(),
        };
        Analyzed::compute_unless_stale(snapshot, &|| false, memo.clone()).expect("analysed")
    };
    let first = two_spreads("spreads", "0.5");
    let a = version(&first, 1);
    assert!(a.check.diagnostics.is_empty(), "{:?}", a.check.diagnostics);
    let x1 = hover_text(&a, position_of(&first, "dx1 =", 1));
    hover_text(&a, position_of(&first, "dx0 =", 1));
    let counts = a.memo_counts();
    assert_eq!((counts.reports, counts.reports_reused), (2, 0));
    assert_eq!(counts.checks.derivations, 1);
    // A comment: every span moves, no content does; the hovers are the same text.
    let commented = two_spreads("spreads of the desk, reviewed", "0.5");
    let b = version(&commented, 2);
    assert_eq!(hover_text(&b, position_of(&commented, "dx1 =", 1)), x1);
    let counts = b.memo_counts();
    assert_eq!((counts.reports, counts.reports_reused), (2, 1));
    assert_eq!(
        (counts.checks.derivations, counts.checks.derivations_reused),
        (1, 1)
    );
    // x0's speed: x1's report is taken over, x0's is built again and shows the new speed.
    let faster = two_spreads("spreads of the desk, reviewed", "0.6");
    let c = version(&faster, 3);
    assert_eq!(hover_text(&c, position_of(&faster, "dx1 =", 1)), x1);
    let x0 = hover_text(&c, position_of(&faster, "dx0 =", 1));
    assert_eq!(
        x0,
        hover_text(&analyzed(&faster), position_of(&faster, "dx0 =", 1))
    );
    let counts = c.memo_counts();
    assert_eq!((counts.reports, counts.reports_reused), (3, 2));
    // One expectation evaluated again (x0's), one taken over (x1's).
    assert_eq!(
        (
            counts.checks.expectations,
            counts.checks.expectations_reused
        ),
        (3, 3)
    );
}
