//! A declaration that does not parse gets its syntax error and nothing more: its uses are
//! not reported as undeclared (with a guess at some other name), nor its equation as
//! naming no factor, while a genuine misspelling next to it still is.

use sdeck_semantics::analyze;

/// (line, rule) of every finding.
fn findings(text: &str) -> Vec<(usize, &'static str)> {
    let a = analyze(text, "test");
    let mut out: Vec<(usize, &'static str)> = a
        .diagnostics
        .iter()
        .map(|d| {
            (
                text[..d.span.start].matches('\n').count() + 1,
                d.rule.name(),
            )
        })
        .collect();
    out.sort();
    out
}

#[test]
fn only_the_syntax_error_is_reported_for_a_declaration_that_did_not_parse() {
    let text = "param k = 1e999 [1/year]\n\
                param vol = 1% [1/sqrt(year)] >\n\
                shock W, \n\
                factor x = 0.1 [[\n\
                dx = -k * x dt + vol dW\n";
    assert_eq!(
        findings(text),
        vec![(1, "syntax"), (2, "syntax"), (3, "syntax"), (4, "syntax")]
    );
}

#[test]
fn a_misspelling_beside_a_broken_declaration_is_still_reported() {
    let text = "param kappa = 1e999 [1/year]\n\
                param vol = 1% [1/sqrt(year)]\n\
                shock W1, W2\n\
                factor x = 0.1\n\
                dx = -kapa * x dt + vol dW1\n";
    let found = findings(text);
    assert!(found.contains(&(1, "syntax")), "{found:?}");
    let a = analyze(text, "test");
    let unknown: Vec<&str> = a
        .diagnostics
        .iter()
        .filter(|d| d.rule.name() == "unknown-name")
        .map(|d| &text[d.span.clone()])
        .collect();
    assert_eq!(unknown, ["kapa"], "{:?}", a.diagnostics);
}
