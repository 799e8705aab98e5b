//! The parser recovers at statement starts, reports one clear error per bad statement,
//! and survives hostile input (deep nesting, huge lines, NUL bytes) without panicking.

use sdeck_syntax::ast::{Differential, Sign, StatementKind};
use sdeck_syntax::{parse, Encoding, LineIndex};

fn error_lines(text: &str) -> Vec<(u32, String)> {
    let file = parse(text);
    let index = LineIndex::new(text);
    file.diagnostics
        .iter()
        .map(|d| {
            (
                index.line_col(text, d.span.start, Encoding::Chars).line + 1,
                d.message.clone(),
            )
        })
        .collect()
}

#[test]
fn a_missing_bracket_and_an_unclosed_parenthesis_are_both_reported() {
    let text = "param kappa = 1.8 [1/year > 0\nparam level = 3%\nshock W\n\
                let gap = (level - 1\nfactor r = 2%\ndr = kappa * (level - r) dt + 0.01 dW\n";
    let errors = error_lines(text);
    assert_eq!(errors.len(), 2, "{errors:?}");
    assert_eq!(errors[0].0, 1);
    assert!(
        errors[0].1.contains("`]` expected to close"),
        "{}",
        errors[0].1
    );
    assert_eq!(errors[1].0, 4);
    assert!(
        errors[1].1.contains("`)` expected to close"),
        "{}",
        errors[1].1
    );
    // The statements between and after still parse.
    assert_eq!(parse(text).statements.len(), 4);
}

#[test]
fn the_error_points_at_the_opening_bracket() {
    let text = "param vol = 6bp [1/sqrt(day) > 0\n";
    let file = parse(text);
    assert_eq!(file.diagnostics.len(), 1);
    assert_eq!(&text[file.diagnostics[0].span.clone()], "[");
}

#[test]
fn every_bad_statement_gets_one_error_and_the_rest_is_kept() {
    let text = "param a = \nparam b = 2\nfactor x = 1 >\nshock W\ndx = -b * x dt + dW\n";
    let file = parse(text);
    assert_eq!(file.diagnostics.len(), 2);
    assert_eq!(file.statements.len(), 3);
}

#[test]
fn both_product_forms_of_a_differential_parse_alike() {
    let with_star = parse("dx = k * x * dt + v * dW\n");
    let juxtaposed = parse("dx = k * x dt + v dW\n");
    assert!(with_star.diagnostics.is_empty() && juxtaposed.diagnostics.is_empty());
    let terms = |f: &sdeck_syntax::ast::SourceFile| match &f.statements[0].kind {
        StatementKind::Equation(eq) => eq
            .terms
            .iter()
            .map(|t| (t.sign, matches!(t.differential, Differential::Time(_))))
            .collect::<Vec<_>>(),
        _ => Vec::new(),
    };
    assert_eq!(
        terms(&with_star),
        vec![(Sign::Plus, true), (Sign::Plus, false)]
    );
    assert_eq!(terms(&with_star), terms(&juxtaposed));
}

#[test]
fn percent_and_basis_points_are_exact() {
    let file = parse("param a = 3.5%\nparam b = 25bp\nparam c = 1e-3\nparam d = -0.1%\n");
    let values: Vec<f64> = file
        .statements
        .iter()
        .filter_map(|s| match &s.kind {
            StatementKind::Param(d) => d.literal().map(|n| n.value),
            _ => None,
        })
        .collect();
    assert_eq!(values, vec![0.035, 0.0025, 0.001, -0.001]);
}

#[test]
fn a_term_without_differential_is_reported_and_the_equation_kept() {
    let file = parse("dx = -k * x + v dW\n");
    assert_eq!(file.diagnostics.len(), 1);
    assert!(file.diagnostics[0].message.contains("no differential"));
    assert_eq!(file.statements.len(), 1);
}

#[test]
fn reserved_names_cannot_be_declared() {
    let errors = error_lines("param pi = 3\nparam t = 1\nparam dt = 1\n");
    assert_eq!(errors.len(), 3);
}

#[test]
fn deep_nesting_is_an_error_not_a_stack_overflow() {
    let text = format!("let x = {}1{}\n", "(".repeat(10_000), ")".repeat(10_000));
    let errors = error_lines(&text);
    assert_eq!(errors.len(), 1);
    assert!(errors[0].1.contains("nest deeper"));
}

#[test]
fn a_two_megabyte_line_is_an_error() {
    let text = format!("let x = {}1\nparam y = 2\n", "1 + ".repeat(500_000));
    let file = parse(&text);
    assert_eq!(file.diagnostics.len(), 1);
    assert!(file.diagnostics[0].message.contains("bytes long"));
    assert_eq!(file.statements.len(), 1);
}

#[test]
fn a_file_past_four_mebibytes_is_refused_whole() {
    let text = "param y = 2\n".repeat((4 << 20) / 12 + 1);
    let file = parse(&text);
    assert_eq!(file.diagnostics.len(), 1);
    assert!(file.diagnostics[0].message.contains("4 MiB"));
    assert!(file.statements.is_empty());
    // Just under the limit, every statement is read.
    let under = &text[..text.len() - 12 * 2];
    assert!(under.len() <= sdeck_syntax::MAX_FILE_BYTES);
    assert_eq!(parse(under).statements.len(), under.len() / 12);
}

#[test]
fn long_but_legal_chains_stop_at_the_node_limit() {
    let text = format!("let x = {}1\n", "1 + ".repeat(5_000));
    let errors = error_lines(&text);
    assert_eq!(errors.len(), 1);
    assert!(errors[0].1.contains("expression nodes"));
}

#[test]
fn nul_and_control_characters_are_named() {
    let errors = error_lines("param a = 1\u{0}\n");
    assert_eq!(errors.len(), 1);
    assert!(errors[0].1.contains("U+0000"), "{}", errors[0].1);
}

#[test]
fn greek_names_parse_and_columns_count_characters() {
    let text = "param κ = 1 [1/year]\nparam θ = 2 [1/year] > 0\nfactor σ = $\n";
    let file = parse(text);
    assert_eq!(file.statements.len(), 2);
    let d = &file.diagnostics[0];
    let index = LineIndex::new(text);
    let at = index.line_col(text, d.span.start, Encoding::Chars);
    assert_eq!((at.line, at.col), (2, 11));
}

#[test]
fn half_open_intervals_parse() {
    let file = parse("param a = 0.5 in [0, 1)\nparam b = 2 in (0, inf)\n");
    assert!(file.diagnostics.is_empty(), "{:?}", file.diagnostics);
}

#[test]
fn a_hundred_thousand_unary_minuses_hit_the_node_limit() {
    let text = format!("let m = {}1\n", "-".repeat(100_000));
    let errors = error_lines(&text);
    assert_eq!(errors.len(), 1);
    assert!(errors[0].1.contains("expression nodes"), "{}", errors[0].1);
}

#[test]
fn long_power_towers_are_an_error_not_a_stack_overflow() {
    let text = format!("let x = {}1\n", "2^".repeat(100_000));
    let errors = error_lines(&text);
    assert_eq!(errors.len(), 1);
    assert!(errors[0].1.contains("`^`"), "{}", errors[0].1);
}

/// A file in the first version's words: one error per retired keyword, naming the new
/// word, with a fix that rewrites it; the statements are still read, spans intact.
#[test]
fn retired_keywords_get_one_error_each_with_a_fix() {
    let text = "param k = 2 [1/year]\nnoise W, B\nstate   r = 2% >= 0 # rate\n\
                dr = -k * r dt + 0.01 dW + 0.01 dB\n";
    let file = parse(text);
    assert_eq!(file.diagnostics.len(), 2, "{:?}", file.diagnostics);
    let noise = &file.diagnostics[0];
    assert_eq!(&text[noise.span.clone()], "noise");
    assert_eq!(noise.message, "`noise` is now `shock`: write `shock W, B`");
    assert_eq!(noise.fixes.len(), 1);
    assert_eq!(noise.fixes[0].edits[0].span, noise.span);
    assert_eq!(noise.fixes[0].edits[0].new_text, "shock");
    let state = &file.diagnostics[1];
    assert_eq!(&text[state.span.clone()], "state");
    assert_eq!(
        state.message,
        "`state` is now `factor`: write `factor r = 2% >= 0`"
    );
    assert_eq!(state.fixes[0].edits[0].new_text, "factor");
    // Every statement is kept, read as if the new word were written.
    assert_eq!(file.statements.len(), 4);
    let StatementKind::Factor(declaration) = &file.statements[2].kind else {
        panic!("not a factor: {:?}", file.statements[2].kind);
    };
    assert_eq!(&text[declaration.name.span.clone()], "r");
    assert_eq!(&text[declaration.value_span()], "2%");
    let StatementKind::Shock { names } = &file.statements[1].kind else {
        panic!("not a shock: {:?}", file.statements[1].kind);
    };
    assert_eq!(&text[names[1].span.clone()], "B");
}

/// A second mistake in a statement with a retired keyword is reported at its own place.
#[test]
fn a_second_error_after_a_retired_keyword_keeps_its_position() {
    let text = "state r = 2% >\n";
    let file = parse(text);
    assert_eq!(file.diagnostics.len(), 2, "{:?}", file.diagnostics);
    assert_eq!(file.diagnostics[0].span.start, 14, "{:?}", file.diagnostics);
    assert_eq!(&text[file.diagnostics[1].span.clone()], "state");
}
