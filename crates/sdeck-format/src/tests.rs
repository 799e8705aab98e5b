//! Tests of the formatter: canonical spacing, alignment, comments, idempotence, and that
//! broken or unusual text is never damaged.

use super::{format, Outcome};

fn formatted(source: &str) -> String {
    match format(source) {
        Outcome::Formatted(text) => text,
        other => panic!("expected formatted text, got {other:?} for:\n{source}"),
    }
}

#[test]
fn canonical_spacing_of_every_statement_kind() {
    let source = "model   m\nclock year\nhorizon 6   month\nunit EUR\nparam k=2[ 1 / year ]>0\n\
shock W,V\ncorr W , V = -0.3\nlet half=k/2\nfactor x=1[EUR]\n\
dx=-k*x*dt+0.1*sqrt( x )dW-0.2 dV\nexpect mean( x ,1 year )in[ 0 ,2 ]\n";
    let expected = "model m\nclock year\nhorizon 6 month\nunit EUR\nparam k = 2 [1/year] > 0\n\
shock W, V\ncorr W V = -0.3\nlet half = k / 2\nfactor x = 1 [EUR]\n\
dx = -k * x dt + 0.1 * sqrt(x) dW - 0.2 dV\nexpect mean(x, 1 year) in [0, 2]\n";
    assert_eq!(formatted(source), expected);
}

#[test]
fn consecutive_declarations_align_by_column_and_comments_align_per_block() {
    let source = "param kappa = 1.8 [1/year] > 0 # speed\nparam level = 3.2% >= 0 # level\n\
param vol = 6bp [1/sqrt(day)] > 0 # vol\n\nshock W # shock\n";
    let expected = "\
param kappa = 1.8  [1/year]      > 0   # speed
param level = 3.2%               >= 0  # level
param vol   = 6bp  [1/sqrt(day)] > 0   # vol

shock W  # shock
";
    assert_eq!(formatted(source), expected);
}

#[test]
fn greek_names_align_by_characters_not_bytes() {
    let source = "param κ = 1 [1/year]\nparam level = 2\n";
    let expected = "param κ     = 1 [1/year]\nparam level = 2\n";
    assert_eq!(formatted(source), expected);
}

#[test]
fn own_line_comments_and_single_blank_lines_are_kept() {
    let source =
        "# header 🚀 ünïcode\n\n\n\nshock W\n   # indented note\nfactor x = 0\ndx = 0.1 dW\n";
    let expected = "# header 🚀 ünïcode\n\nshock W\n# indented note\nfactor x = 0\ndx = 0.1 dW\n";
    assert_eq!(formatted(source), expected);
}

#[test]
fn a_multi_line_equation_keeps_its_breaks_between_terms_and_its_comments() {
    let source = "shock W, B\nfactor x = 0\ndx = -0.5*x  dt   # pull\n  +0.1 dW  # push\n        -  0.2*x dB\n";
    let expected = "shock W, B\nfactor x = 0\ndx = -0.5 * x dt  # pull\n     + 0.1 dW     # push\n     - 0.2 * x dB\n";
    assert_eq!(formatted(source), expected);
    // Formatting it again changes nothing.
    assert_eq!(formatted(expected), expected);
}

#[test]
fn a_multi_line_equation_without_comments_keeps_its_breaks() {
    let source = "shock W\nfactor x = 0\ndx = -0.5 * x dt\n+ 0.1 dW\n";
    assert_eq!(
        formatted(source),
        "shock W\nfactor x = 0\ndx = -0.5 * x dt\n     + 0.1 dW\n"
    );
}

#[test]
fn a_break_right_after_the_equals_sign_starts_the_terms_on_the_next_line() {
    let source = "shock W\nfactor r = 0\ndr =   # the short rate\n 0.8*(0.03 - r) dt + 0.01 dW\n";
    assert_eq!(
        formatted(source),
        "shock W\nfactor r = 0\ndr =  # the short rate\n     0.8 * (0.03 - r) dt + 0.01 dW\n"
    );
}

#[test]
fn a_break_inside_a_term_joins_it_or_keeps_it_as_written_with_a_comment() {
    // Without comments the statement is joined; with one it is kept as written, since
    // a line break inside a term has no canonical place.
    let source = "shock W\nfactor x = 0\ndx = -0.5 *\n x dt + 0.1 dW\n";
    assert_eq!(
        formatted(source),
        "shock W\nfactor x = 0\ndx = -0.5 * x dt + 0.1 dW\n"
    );
    let source = "shock W\nfactor x = 0\ndx = -0.5 *   # pull\n x dt + 0.1 dW\n";
    assert_eq!(formatted(source), source);
    // A comment on a line of its own inside the equation: kept as written too.
    let source = "shock W\nfactor x = 0\ndx = -0.5 * x dt\n  # the shock\n  + 0.1 dW\n";
    assert_eq!(formatted(source), source);
}

#[test]
fn text_with_syntax_errors_is_left_alone() {
    let source = "param k = = 2\nfactor x = 1\n";
    assert!(matches!(format(source), Outcome::SyntaxErrors { count } if count >= 1));
}

#[test]
fn quantities_and_schedules_print_with_canonical_spacing() {
    let source = "let p = step( t,2%,6[ month ],3% )# policy\n\
let q = ramp(t , 1[quarter],0[1/year],1[year]+12 [hour], 0.4%[ 1 / year ])\n";
    let expected = "let p = step(t, 2%, 6 [month], 3%)  # policy\n\
let q = ramp(t, 1 [quarter], 0 [1/year], 1 [year] + 12 [hour], 0.4% [1/year])\n";
    assert_eq!(formatted(source), expected);
}

#[test]
fn parentheses_bounds_and_units_keep_their_meaning() {
    let source = "unit EUR\nparam a = 1 [EUR/(year*day)] in (-inf, 5]\nparam b = 2 in [0, 1)\n\
let c = (a - (b - 1))^2 / -b\n";
    let out = formatted(source);
    assert!(out.contains("[EUR/(year*day)]"), "{out}");
    assert!(out.contains("<= 5"), "{out}");
    assert!(out.contains("in [0, 1)"), "{out}");
    assert!(out.contains("let c = (a - (b - 1))^2 / -b"), "{out}");
}

/// The demo models and the examples of the rule manuals (the `sde` blocks of
/// `crates/sdeck-checks/src/rules/*.md`), each with where it comes from.
fn sample_models() -> Vec<(std::path::PathBuf, String)> {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
    let mut out = Vec::new();
    for (folder, extension) in [
        ("demo-models", "sde"),
        ("crates/sdeck-checks/src/rules", "md"),
    ] {
        let Ok(entries) = std::fs::read_dir(root.join(folder)) else {
            continue;
        };
        for entry in entries.flatten() {
            let path = entry.path();
            if path.extension().is_none_or(|x| x != extension) {
                continue;
            }
            let Ok(text) = std::fs::read_to_string(&path) else {
                continue;
            };
            if extension == "sde" {
                out.push((path, text));
                continue;
            }
            for block in text.split("```sde\n").skip(1) {
                let model = block.split("```").next().unwrap_or("");
                out.push((path.clone(), model.to_string()));
            }
        }
    }
    out
}

#[test]
fn formatting_is_idempotent_on_the_demo_models_and_rule_examples() {
    let mut seen = 0;
    let models = sample_models();
    assert!(
        models.len() >= 40,
        "demo models and rule examples: {}",
        models.len()
    );
    for (path, source) in models {
        match format(&source) {
            Outcome::Formatted(once) => {
                seen += 1;
                assert_eq!(
                    format(&once),
                    Outcome::Formatted(once.clone()),
                    "{}",
                    path.display()
                );
                // Meaning is kept: the same statements and comments parse back.
                let before = sdeck_syntax::parse(&source);
                let after = sdeck_syntax::parse(&once);
                assert_eq!(before.statements.len(), after.statements.len());
                assert_eq!(
                    before.comments.len(),
                    after.comments.len(),
                    "{}",
                    path.display()
                );
            }
            Outcome::SyntaxErrors { .. } => {}
            Outcome::Refused { reason } => panic!("{}: refused: {reason}", path.display()),
        }
    }
    assert!(seen >= 5, "only {seen} models were formatted");
}

#[test]
fn empty_and_comment_only_files() {
    assert_eq!(formatted(""), "");
    assert_eq!(formatted("# only a note"), "# only a note\n");
}

/// What a file means, without positions (names, values in clock units, resolved
/// expressions, bounds, correlations, horizon, clock, measure and discount).
fn meaning(source: &str) -> String {
    sdeck_semantics::meaning(&sdeck_semantics::analyze(source, "m").model)
}

#[test]
fn formatting_keeps_the_meaning_of_the_demo_models() {
    for (path, source) in sample_models() {
        if let Outcome::Formatted(once) = format(&source) {
            assert_eq!(meaning(&source), meaning(&once), "{}", path.display());
        }
    }
}

mod random_models {
    use super::{format, meaning, Outcome};
    use proptest::prelude::*;

    /// Statements of a valid model, as token lists; spacing is chosen by the test.
    fn statements() -> Vec<Vec<&'static str>> {
        vec![
            vec!["model", "quarry_bank"],
            vec!["clock", "year"],
            vec!["horizon", "6", "month"],
            vec!["unit", "EUR"],
            vec![
                "param", "κ", "=", "0.5%", "[", "1", "/", "day", "]", ">", "0",
            ],
            vec![
                "param", "level", "=", "2", "[", "EUR", "]", "in", "[", "0", ",", "10", ")",
            ],
            vec![
                "param", "vol", "=", "3bp", "[", "EUR", "/", "sqrt", "(", "bday", ")", "]", ">=",
                "0",
            ],
            // Declared values and correlations as constant expressions of parameters.
            vec![
                "param", "stressed", "=", "level", "+", "50bp", "[", "EUR", "]", "*", "(", "1",
                "-", "0.5", ")", "in", "[", "0", ",", "100", "]",
            ],
            vec!["param", "rho", "=", "-0.25", "in", "[", "-1", ",", "1", "]"],
            vec!["shock", "W", ",", "V", ",", "U"],
            vec![
                "corr", "W", ",", "V", "=", "rho", "*", "(", "1", "-", "0.2", ")",
            ],
            vec!["corr", "V", "U", "=", "-", "0.25"],
            vec![
                "let", "target", "=", "(", "level", "-", "-", "1", ")", "*", "exp", "(", "-", "κ",
                "^", "2", "*", "t", ")", "/", "2",
            ],
            // Schedules of time and quantities inside expressions.
            vec![
                "let", "path", "=", "step", "(", "t", ",", "2", "[", "EUR", "]", ",", "6", "[",
                "month", "]", ",", "level", ",", "1", "[", "year", "]", "+", "12", "[", "hour",
                "]", ",", "3", "[", "EUR", "]", ")",
            ],
            vec![
                "let", "glide", "=", "ramp", "(", "t", ",", "1", "[", "quarter", "]", ",", "0",
                "[", "EUR", "]", ",", "2", "[", "quarter", "]", ",", "level", ")", "+", "max", "(",
                "t", "-", "1", "[", "year", "]", ",", "0", "[", "year", "]", ")", "*", "level",
                "/", "1", "[", "year", "]",
            ],
            vec!["factor", "x", "=", "stressed", "-", "1", "[", "EUR", "]"],
            vec![
                "dx", "=", "κ", "*", "(", "level", "-", "x", ")", "*", "dt", "+", "vol", "dW", "-",
                "0.1", "*", "vol", "*", "dV",
            ],
            vec![
                "expect", "mean", "(", "x", ",", "1", "year", ")", ">", "0", "[", "EUR", "]",
            ],
            vec![
                "expect", "prob", "(", "x", ">", "1.5", "[", "EUR", "]", ",", "6", "month", ")",
                "<", "90%",
            ],
            vec![
                "expect", "quantile", "(", "x", ",", "99%", ",", "1", "quarter", ")", "in", "(",
                "0", ",", "5", "[", "EUR", "]", "]",
            ],
            vec!["expect", "yield", "(", "10", "year", ")", ">=", "25bp"],
        ]
    }

    fn render(gaps: &[usize], comments: &[bool]) -> String {
        let mut out = String::new();
        let mut k = 0;
        for (si, tokens) in statements().iter().enumerate() {
            for (ti, token) in tokens.iter().enumerate() {
                if ti > 0 {
                    let gap = gaps.get(k).copied().unwrap_or(1);
                    k += 1;
                    // Juxtaposed words need a space; elsewhere any spacing is allowed.
                    let words = |t: &str| {
                        t.chars()
                            .next()
                            .is_some_and(|c| c.is_alphanumeric() || c == '_' || c == '-')
                    };
                    let needs_space = words(token) && words(tokens[ti - 1]);
                    let n = if needs_space { gap.max(1) } else { gap };
                    out.extend(std::iter::repeat_n(' ', n));
                }
                out.push_str(token);
            }
            if comments.get(si).copied().unwrap_or(false) {
                out.push_str(&format!("   # note {si} κ 🚀"));
            }
            out.push('\n');
            if si % 4 == 3 {
                out.push('\n');
            }
        }
        out
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn any_spacing_formats_to_the_same_meaning_and_comments(
            gaps in proptest::collection::vec(0usize..4, 300),
            comments in proptest::collection::vec(any::<bool>(), 24),
        ) {
            let source = render(&gaps, &comments);
            let Outcome::Formatted(once) = format(&source) else {
                return Err(TestCaseError::fail(format!("not formatted:\n{source}")));
            };
            prop_assert_eq!(meaning(&source), meaning(&once));
            prop_assert_eq!(format(&once), Outcome::Formatted(once.clone()));
            let count = |t: &str| t.matches("# note").count();
            prop_assert_eq!(count(&source), count(&once));
        }
    }
}

#[test]
fn a_crlf_file_keeps_crlf_and_a_formatted_one_is_unchanged() {
    let source = "param  k=2 # speed\r\nparam  v = 1\r\n";
    let expected = "param k = 2  # speed\r\nparam v = 1\r\n";
    assert_eq!(formatted(source), expected);
    assert_eq!(formatted(expected), expected);
}

#[test]
fn a_lone_cr_file_keeps_its_lines_and_its_breaks() {
    // A lone CR ends a line: two statements, not one long broken one.
    let source = "param a=1\rparam b=2 # two\r";
    assert_eq!(formatted(source), "param a = 1\rparam b = 2  # two\r");
}

#[test]
fn infinite_bounds_on_the_wrong_side_are_printed_as_written() {
    // `>= inf` admits no value; rewriting it as `in (-inf, inf)` would erase that.
    for source in [
        "param a = 1 [1/year] >= inf\n",
        "param a = 1 [1/year] < -inf\n",
        "param a = 1 [1/year] in [inf, -inf]\n",
    ] {
        assert_eq!(formatted(source), source);
    }
}
