//! Quantities inside expressions, the bare zero, and the schedules `step` and `ramp`.
//! Day counts: ACT/365 Fixed, hour = day/24 (common practice, no source).

use sdeck_semantics::{analyze, Analysis};

/// (line, rule) of every diagnostic but `unused` and `unit-scale`.
fn rules_at_lines(text: &str) -> Vec<(usize, &'static str)> {
    let a = analyze(text, "test");
    let mut out: Vec<(usize, &'static str)> = a
        .diagnostics
        .iter()
        .filter(|d| d.rule.name() != "unit-scale" && d.rule.name() != "unused")
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

fn let_value(a: &Analysis, name: &str, t: f64) -> f64 {
    let params = a.model.param_values();
    a.model
        .lets
        .iter()
        .find(|l| l.name == name)
        .map(|l| l.value.eval(&params, &[], t))
        .unwrap_or(f64::NAN)
}

#[test]
fn a_number_with_a_bracketed_unit_is_a_quantity_in_an_expression() {
    let text = "let lag = max(t - 1 [year], 0 [year])\nlet drift = 2% + 0.4% [1/year] * t\n\
                let half_day = 12 [hour]\n";
    assert_eq!(rules_at_lines(text), vec![]);
    let a = analyze(text, "t");
    assert_eq!(let_value(&a, "lag", 0.5), 0.0);
    assert!((let_value(&a, "lag", 1.75) - 0.75).abs() < 1e-15);
    assert!((let_value(&a, "drift", 2.0) - 0.028).abs() < 1e-15);
    assert_eq!(let_value(&a, "half_day", 0.0), 0.5 / 365.0);
    // In a day clock the same quantities are converted to days.
    let daily = analyze(&format!("clock day\n{text}"), "t");
    assert_eq!(let_value(&daily, "half_day", 0.0), 0.5);
}

#[test]
fn a_bare_zero_has_no_dimension_of_its_own() {
    for (text, replacement) in [
        ("let lag = max(t - 1 [year], 0)\n", "0 [year]"),
        ("let lag = t - 0\n", "0 [year]"),
        ("param v = 1 [1/year]\nlet x = 0 + v\n", "0 [1/year]"),
        ("let x = step(t, 0, 6 [month], 2 [day])\n", "0 [year]"),
    ] {
        let a = analyze(text, "t");
        let mismatches: Vec<_> = a
            .diagnostics
            .iter()
            .filter(|d| d.rule.name() == "dimension-mismatch")
            .collect();
        assert_eq!(mismatches.len(), 1, "{text}: {:?}", a.diagnostics);
        let d = mismatches[0];
        assert_eq!(&text[d.span.clone()], "0", "{text}");
        let fix = d.fixes.first().map(|f| f.edits[0].new_text.clone());
        assert_eq!(fix.as_deref(), Some(replacement), "{text}");
        // The fix mends it.
        let mended = format!(
            "{}{}{}",
            &text[..d.span.start],
            replacement,
            &text[d.span.end..]
        );
        assert_eq!(rules_at_lines(&mended), vec![], "{mended}");
    }
    // A zero beside a dimensionless value is fine as it is.
    assert_eq!(rules_at_lines("let x = max(t / 1 [year], 0)\n"), vec![]);
}

#[test]
fn step_is_right_continuous_and_ramp_is_flat_outside_its_knots() {
    let text = "param p = 3%\n\
                let level = step(t, 2%, 6 [month], p, 1 [year] + 12 [hour], 2.5%)\n\
                let path = ramp(t, 1 [quarter], 1%, 2 [quarter], 2%, 1 [year], 0%)\n";
    assert_eq!(rules_at_lines(text), vec![]);
    let a = analyze(text, "t");
    let knot = 1.0 + 0.5 / 365.0;
    // Worked by hand.
    let cases = [
        ("level", 0.0, 0.02),
        ("level", 0.4999, 0.02),
        ("level", 0.5, 0.03),
        ("level", 1.0, 0.03),
        ("level", knot, 0.025),
        ("level", 9.0, 0.025),
        ("path", 0.0, 0.01),
        ("path", 0.25, 0.01),
        ("path", 0.375, 0.015),
        ("path", 0.5, 0.02),
        ("path", 0.75, 0.01),
        ("path", 1.0, 0.0),
        ("path", 3.0, 0.0),
    ];
    for (name, t, expected) in cases {
        let got = let_value(&a, name, t);
        assert!((got - expected).abs() < 1e-15, "{name}({t}) = {got}");
    }
}

#[test]
fn schedule_mistakes_are_reported_where_they_are() {
    let cases = [
        // Knots out of order: bound-violated at the knot that is not after the one before.
        (
            "let x = step(t, 1, 6 [month], 2, 3 [month], 3)\n",
            "3 [month]",
            "bound-violated",
        ),
        (
            "let x = ramp(t, 1 [year], 1, 1 [year], 2)\n",
            "1 [year]",
            "bound-violated",
        ),
        // A knot that is not a time, a first argument that is not one, values of two
        // dimensions.
        ("let x = step(t, 1, 0.5, 2)\n", "0.5", "dimension-mismatch"),
        (
            "let x = step(t / 1 [year], 1, 6 [month], 2)\n",
            "t / 1 [year]",
            "dimension-mismatch",
        ),
        (
            "let x = step(t, 1%, 6 [month], 2% [1/year])\n",
            "2% [1/year]",
            "dimension-mismatch",
        ),
        // A knot that moves.
        (
            "let x = step(t, 1, t + 1 [month], 2)\n",
            "t + 1 [month]",
            "bound-violated",
        ),
        // Wrong counts of arguments.
        (
            "let x = step(t, 1, 6 [month])\n",
            "step(t, 1, 6 [month])",
            "syntax",
        ),
        (
            "let x = ramp(t, 1 [month], 1)\n",
            "ramp(t, 1 [month], 1)",
            "syntax",
        ),
    ];
    for (text, at, rule) in cases {
        let a = analyze(text, "t");
        let found: Vec<_> = a
            .diagnostics
            .iter()
            .filter(|d| d.rule.name() != "unused")
            .map(|d| (d.rule.name(), &text[d.span.clone()]))
            .collect();
        assert_eq!(found, vec![(rule, at)], "{text}");
    }
    // A bare-number knot is mended by writing the clock unit.
    let a = analyze("let x = step(t, 1, 0.5, 2)\n", "t");
    let fix = a
        .diagnostics
        .iter()
        .find(|d| d.rule.name() == "dimension-mismatch")
        .and_then(|d| d.fixes.first())
        .map(|f| f.edits[0].new_text.clone());
    assert_eq!(fix.as_deref(), Some("0.5 [year]"));
}

#[test]
fn an_expectation_on_an_undeclared_factor_is_mended_only_by_a_factor() {
    let base = "param k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nshock W\nfactor r = 1\n\
                dr = -k * r dt + v dW\n";
    let fixes = |line: &str| {
        let text = format!("{base}{line}\n");
        let a = sdeck_semantics::analyze(&text, "t");
        let d = a
            .diagnostics
            .iter()
            .find(|d| d.rule.name() == "unknown-name")
            .cloned()
            .unwrap_or_else(|| panic!("{line}: {:?}", a.diagnostics));
        assert_eq!(
            d.message,
            format!(
                "factor `{}` is not declared",
                &line[12..14].trim_end_matches(',')
            )
        );
        d.fixes
            .iter()
            .map(|f| (f.title.clone(), f.edits[0].new_text.clone()))
            .collect::<Vec<_>>()
    };
    // A slip of the keyboard: the factor of that name.
    assert_eq!(
        fixes("expect mean(rr, 1 year) < 5"),
        vec![("Write `r`".to_string(), "r".to_string())]
    );
    // No factor is close: no parameter is offered, since none would mend it.
    assert!(fixes("expect mean(zz, 1 year) < 5").is_empty());
}
