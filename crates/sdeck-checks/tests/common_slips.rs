//! Messages for slips people commonly make (docs/language.md, section 6): each names the
//! form that was meant, offers a fix, and the fixed model checks clean.

use sdeck_checks::{check, RuleSettings};

fn findings(text: &str) -> Vec<sdeck_diagnostics::Diagnostic> {
    check(text, "slips", &RuleSettings::default()).diagnostics
}

fn apply_first_fix(text: &str, d: &sdeck_diagnostics::Diagnostic) -> String {
    let mut out = text.to_string();
    let edit = &d.fixes[0].edits[0];
    out.replace_range(edit.span.clone(), &edit.new_text);
    out
}

const HEAD: &str = "param kappa = 1.2 [1/year] > 0\nparam theta = 3%\n\
                    param vol = 1% [1/sqrt(year)] > 0\nshock W\nfactor r = 2%\n";

#[test]
fn a_name_followed_by_a_parenthesis_is_read_as_a_missing_product() {
    let text = format!("{HEAD}dr = kappa(theta - r) dt + vol dW\n");
    let found = findings(&text);
    // One finding: `kappa` is not also called unused, nor `theta`.
    assert_eq!(found.len(), 1, "{found:?}");
    assert_eq!(found[0].rule.name(), "syntax");
    assert_eq!(
        found[0].message,
        "a name followed by `(`: did you mean `kappa * (theta - r)`?"
    );
    assert_eq!(&text[found[0].span.clone()], "kappa");
    let fixed = apply_first_fix(&text, &found[0]);
    assert!(fixed.contains("dr = kappa * (theta - r) dt"), "{fixed}");
    assert!(findings(&fixed).is_empty(), "{:?}", findings(&fixed));
}

#[test]
fn ln_points_to_log() {
    let text = format!("{HEAD}let gap = ln(1 + r)\ndr = kappa * (theta - r) * gap dt + vol dW\n");
    let found = findings(&text);
    assert_eq!(found.len(), 1, "{found:?}");
    assert_eq!(found[0].rule.name(), "unknown-name");
    assert!(found[0].message.contains("`log`"), "{}", found[0].message);
    let fixed = apply_first_fix(&text, &found[0]);
    assert!(fixed.contains("let gap = log(1 + r)"), "{fixed}");
    assert!(findings(&fixed).is_empty(), "{:?}", findings(&fixed));
}

#[test]
fn another_unknown_function_is_still_unknown() {
    let text = format!("{HEAD}dr = kappa * (theta - tanh(r)) dt + vol dW\n");
    let found = findings(&text);
    assert_eq!(found.len(), 1, "{found:?}");
    assert_eq!(found[0].message, "unknown function `tanh`");
}

#[test]
fn an_ordinary_differential_equation_gives_the_form_of_an_equation() {
    let text = format!("{HEAD}dr/dt = kappa * (theta - r)\n");
    let found = findings(&text);
    let syntax: Vec<_> = found.iter().filter(|d| d.rule.name() == "syntax").collect();
    assert_eq!(syntax.len(), 1, "{found:?}");
    assert_eq!(
        syntax[0].message,
        "`dr/dt = ...` is not how sdeck writes an equation: an equation is written `dr = DRIFT dt + VOL dW`"
    );
    // Not also "factor `r` has no equation".
    assert!(
        !found.iter().any(|d| d.rule.name() == "missing-equation"),
        "{found:?}"
    );
    let fixed = apply_first_fix(&text, syntax[0]);
    assert!(fixed.contains("dr = (kappa * (theta - r)) dt\n"), "{fixed}");
    let after = findings(&fixed);
    assert!(after.iter().all(|d| d.rule.name() == "unused"), "{after:?}");
}

#[test]
fn a_space_inside_the_differential_gives_the_form_of_an_equation() {
    let text = format!("{HEAD}d r = kappa * (theta - r) dt + vol dW\n");
    let found = findings(&text);
    assert_eq!(found.len(), 1, "{found:?}");
    assert_eq!(
        found[0].message,
        "`d r` has a space inside the differential: an equation is written `dr = DRIFT dt + VOL dW`"
    );
    let fixed = apply_first_fix(&text, &found[0]);
    assert!(fixed.contains("\ndr = kappa"), "{fixed}");
    assert!(findings(&fixed).is_empty(), "{:?}", findings(&fixed));
}

#[test]
fn an_undeclared_shock_close_to_a_declared_one_is_suggested() {
    let text = format!("{HEAD}dr = kappa * (theta - r) dt + vol dB\n");
    let found = findings(&text);
    let unknown: Vec<_> = found
        .iter()
        .filter(|d| d.rule.name() == "unknown-name")
        .collect();
    assert_eq!(unknown.len(), 1, "{found:?}");
    assert!(
        unknown[0]
            .help
            .as_deref()
            .is_some_and(|h| h.starts_with("did you mean `dW`?")),
        "{:?}",
        unknown[0]
    );
    let fixed = apply_first_fix(&text, unknown[0]);
    assert!(fixed.contains("vol dW\n"), "{fixed}");
    assert!(findings(&fixed).is_empty(), "{:?}", findings(&fixed));
}
