//! Tests of suppression comments (docs/language.md, section 9): each form, reasons,
//! several rules, unknown rules and directives, and the reports of suppressions that
//! silence nothing.

use sdeck_checks::{check, RuleSettings};
use sdeck_syntax::{Encoding, LineIndex};

/// (1-based line, rule) of every diagnostic, in output order.
fn fired(text: &str) -> Vec<(u32, &'static str)> {
    let result = check(text, "suppression_test", &RuleSettings::default());
    let index = LineIndex::new(text);
    result
        .diagnostics
        .iter()
        .map(|d| {
            (
                index.line_col(text, d.span.start, Encoding::Chars).line + 1,
                d.rule.name(),
            )
        })
        .collect()
}

/// The diagnostics of one rule with their messages and the text their span covers.
fn reports<'a>(text: &'a str, rule: &str) -> Vec<(String, &'a str)> {
    check(text, "suppression_test", &RuleSettings::default())
        .diagnostics
        .into_iter()
        .filter(|d| d.rule.name() == rule)
        .map(|d| (d.message.clone(), text.get(d.span.clone()).unwrap_or("")))
        .collect()
}

/// A sound model with one unused parameter (`level_stress`, line 6) and a Feller
/// violation (the equation, line 11). Lines are numbered in the comments.
const BASE: &str = "\
model larrowmere_rates
clock year
param kappa = 0.5  [1/year]       > 0
param level = 2%                  >= 0
param vol   = 20%  [1/sqrt(year)] > 0
param level_stress = 5.5%
shock W
factor r = 1.8% >= 0
# (line 9)
# (line 10)
dr = kappa * (level - r) dt + vol * sqrt(r) dW
";

fn with_line(line_number: usize, replacement: &str) -> String {
    BASE.lines()
        .enumerate()
        .map(|(i, l)| {
            if i + 1 == line_number {
                replacement.to_string()
            } else {
                l.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join("\n")
        + "\n"
}

#[test]
fn the_base_model_fires_both_rules() {
    assert_eq!(fired(BASE), vec![(6, "unused"), (11, "feller-condition")]);
}

#[test]
fn trailing_quiet_silences_its_statement() {
    let text = with_line(
        6,
        "param level_stress = 5.5%   # sdeck: quiet unused because read by the stress script",
    );
    assert_eq!(fired(&text), vec![(11, "feller-condition")]);
}

#[test]
fn trailing_quiet_without_a_reason_works_too() {
    let text = with_line(6, "param level_stress = 5.5%   # sdeck: quiet unused");
    assert_eq!(fired(&text), vec![(11, "feller-condition")]);
}

#[test]
fn standalone_quiet_silences_the_next_statement() {
    let text = with_line(
        10,
        "# sdeck: quiet feller-condition because zero is accepted, see risk memo 14",
    );
    assert_eq!(fired(&text), vec![(6, "unused")]);
}

#[test]
fn standalone_quiet_covers_every_line_of_a_multi_line_statement() {
    // The Feller report stands on the equation's first line; the suppression above the
    // statement covers it, and a suppression trailing the continuation line covers it too.
    let split = BASE.replace(
        "dr = kappa * (level - r) dt + vol * sqrt(r) dW\n",
        "dr = kappa * (level - r) dt\n     + vol * sqrt(r) dW\n",
    );
    assert_eq!(fired(&split), vec![(6, "unused"), (11, "feller-condition")]);
    let above = split.replace(
        "# (line 10)",
        "# sdeck: quiet feller-condition because accepted",
    );
    assert_eq!(fired(&above), vec![(6, "unused")]);
    let trailing = split.replace(
        "     + vol * sqrt(r) dW\n",
        "     + vol * sqrt(r) dW   # sdeck: quiet feller-condition because accepted\n",
    );
    assert_eq!(fired(&trailing), vec![(6, "unused")]);
}

#[test]
fn a_trailing_quiet_does_not_reach_the_next_statement() {
    // Line 5 carries the suppression; the unused parameter is on line 6.
    let text = with_line(
        5,
        "param vol   = 20%  [1/sqrt(year)] > 0   # sdeck: quiet unused",
    );
    assert_eq!(
        fired(&text),
        vec![
            (5, "unused-suppression"),
            (6, "unused"),
            (11, "feller-condition")
        ]
    );
}

#[test]
fn standalone_quiet_skips_blank_and_comment_lines_to_the_next_statement() {
    let text = with_line(
        9,
        "# sdeck: quiet feller-condition because the next statement is two lines down",
    );
    assert_eq!(fired(&text), vec![(6, "unused")]);
}

#[test]
fn several_rules_in_one_comment() {
    let text = BASE.replace(
        "param level_stress = 5.5%\n",
        "param level_stress = 5.5%   # sdeck: quiet unused, feller-condition because both\n",
    );
    // `unused` silences line 6; `feller-condition` silences nothing there.
    assert_eq!(
        fired(&text),
        vec![(6, "unused-suppression"), (11, "feller-condition")]
    );
    let message = reports(&text, "unused-suppression");
    assert_eq!(message.len(), 1);
    assert!(message[0].0.contains("`feller-condition`"), "{message:?}");
}

#[test]
fn begin_and_end_silence_the_lines_between() {
    let text = with_line(
        4,
        "# sdeck: quiet-begin unused, feller-condition because legacy block",
    )
    .replace("# (line 9)", "param level = 2%                  >= 0");
    // Line 4 now opens the range; `level` moves to line 9 (inside the range too).
    let text = text.replace("# (line 10)", "");
    let closed = format!("{text}# sdeck: quiet-end unused, feller-condition\n");
    assert_eq!(fired(&closed), vec![]);
    // After quiet-end the rule speaks again.
    let after = format!("{closed}param level_after = 1%\n");
    let lines = after.lines().count() as u32;
    assert_eq!(fired(&after), vec![(lines, "unused")]);
}

#[test]
fn an_open_begin_runs_to_the_end_of_the_file() {
    let text = with_line(
        9,
        "# sdeck: quiet-begin feller-condition because until the end",
    );
    assert_eq!(fired(&text), vec![(6, "unused")]);
}

#[test]
fn an_unused_range_is_reported_at_its_begin() {
    let text = with_line(
        9,
        "# sdeck: quiet-begin unused because nothing unused below",
    )
    .replace("dr = kappa", "# sdeck: quiet-end unused\ndr = kappa");
    assert_eq!(
        fired(&text),
        vec![
            (6, "unused"),
            (9, "unused-suppression"),
            (12, "feller-condition")
        ]
    );
}

#[test]
fn an_end_without_a_begin_is_reported() {
    let text = with_line(9, "# sdeck: quiet-end unused");
    let found = fired(&text);
    assert!(found.contains(&(9, "unused-suppression")), "{found:?}");
    let message = reports(&text, "unused-suppression");
    assert!(message[0].0.contains("closes no"), "{message:?}");
}

#[test]
fn quiet_file_silences_everywhere() {
    let text = with_line(
        1,
        "# sdeck: quiet-file unused, feller-condition because a scratch model",
    );
    assert_eq!(fired(&text), vec![]);
}

#[test]
fn quiet_file_that_silences_nothing_is_reported() {
    let text = with_line(9, "# sdeck: quiet-file factor-domain");
    assert_eq!(
        fired(&text),
        vec![
            (6, "unused"),
            (9, "unused-suppression"),
            (11, "feller-condition")
        ]
    );
}

#[test]
fn an_unknown_rule_is_reported_and_silences_nothing() {
    let text = with_line(
        6,
        "param level_stress = 5.5%   # sdeck: quiet unsued because misspelt",
    );
    assert_eq!(
        fired(&text),
        vec![
            (6, "unused"),
            (6, "unused-suppression"),
            (11, "feller-condition")
        ]
    );
    let report = reports(&text, "unused-suppression");
    assert!(
        report[0]
            .0
            .contains("`unsued` is not a rule; did you mean `unused`?"),
        "{report:?}"
    );
}

#[test]
fn a_misspelt_rule_gets_a_fix_to_the_nearest_name() {
    let text = with_line(
        10,
        "# sdeck: quiet feler-condition because zero is accepted",
    );
    let found = sdeck_checks::check(&text, "m", &RuleSettings::default());
    let d = found
        .diagnostics
        .iter()
        .find(|d| d.rule.name() == "unused-suppression")
        .expect("the misspelt name is reported");
    assert!(
        d.message.contains("did you mean `feller-condition`?"),
        "{}",
        d.message
    );
    let edit = &d.fixes[0].edits[0];
    let mut fixed = text.clone();
    fixed.replace_range(edit.span.clone(), &edit.new_text);
    assert!(fixed.contains("# sdeck: quiet feller-condition because"));
    assert_eq!(fired(&fixed), vec![(6, "unused")]);
}

#[test]
fn a_misspelt_rule_that_would_silence_nothing_gets_no_fix() {
    // `unused` does not fire on the statement after line 10: writing it would leave a
    // suppression that silences nothing, so only the message names the rule.
    let text = with_line(10, "# sdeck: quiet unsued because nothing is unused here");
    let found = sdeck_checks::check(&text, "m", &RuleSettings::default());
    let d = found
        .diagnostics
        .iter()
        .find(|d| d.rule.name() == "unused-suppression")
        .expect("the misspelt name is reported");
    assert!(
        d.message.contains("did you mean `unused`?"),
        "{}",
        d.message
    );
    assert!(d.fixes.is_empty(), "{:?}", d.fixes);
}

#[test]
fn a_known_rule_beside_an_unknown_one_still_silences() {
    let text = with_line(
        6,
        "param level_stress = 5.5%   # sdeck: quiet unused, unsued because one misspelt",
    );
    assert_eq!(
        fired(&text),
        vec![(6, "unused-suppression"), (11, "feller-condition")]
    );
    let report = reports(&text, "unused-suppression");
    assert_eq!(report.len(), 1, "{report:?}");
    assert!(report[0].0.contains("`unsued`"));
}

#[test]
fn an_unknown_directive_is_reported() {
    let text = with_line(9, "# sdeck: hush unused");
    let report = reports(&text, "unused-suppression");
    assert_eq!(report.len(), 1, "{report:?}");
    assert!(
        report[0].0.contains("`sdeck: hush` is not a directive"),
        "{report:?}"
    );
    // And it silences nothing.
    assert!(fired(&text).contains(&(6, "unused")));
}

#[test]
fn a_directive_naming_no_rule_is_reported() {
    for comment in [
        "# sdeck: quiet",
        "# sdeck: quiet because no rule, only a reason",
    ] {
        let text = with_line(9, comment);
        let report = reports(&text, "unused-suppression");
        assert_eq!(report.len(), 1, "{comment}: {report:?}");
        assert!(report[0].0.contains("names no rule"), "{report:?}");
    }
}

#[test]
fn the_report_points_at_the_rule_name() {
    // docs/language.md, section 11: `unused-suppression` is reported at the rule name.
    let text = with_line(
        9,
        "# sdeck: quiet factor-domain, feller-condition because one of two is stale",
    );
    let report = reports(&text, "unused-suppression");
    assert_eq!(report.len(), 1, "{report:?}");
    assert_eq!(report[0].1, "factor-domain");
    let text = with_line(9, "# sdeck: quiet unsued");
    assert_eq!(reports(&text, "unused-suppression")[0].1, "unsued");
}

#[test]
fn a_reason_may_hold_rule_names_and_commas() {
    let text = with_line(
        6,
        "param level_stress = 5.5%   # sdeck: quiet unused because not feller-condition, nor unused elsewhere",
    );
    assert_eq!(fired(&text), vec![(11, "feller-condition")]);
}

#[test]
fn ordinary_comments_and_other_prefixes_are_not_suppressions() {
    for comment in [
        "# sdeck quiet unused",
        "# note: sdeck: quiet unused",
        "# quiet unused",
    ] {
        let text = with_line(9, comment);
        assert_eq!(
            fired(&text),
            vec![(6, "unused"), (11, "feller-condition")],
            "{comment}"
        );
    }
}

#[test]
fn silenced_diagnostics_stay_silenced_under_project_levels() {
    // A project that raises a rule to error does not bring back a silenced finding.
    let mut settings = RuleSettings::default();
    settings.levels.insert(
        sdeck_diagnostics::RuleId::FellerCondition,
        sdeck_checks::RuleLevel::On(sdeck_diagnostics::Severity::Error),
    );
    let text = with_line(10, "# sdeck: quiet feller-condition because accepted");
    let result = check(&text, "suppression_test", &settings);
    assert!(result
        .diagnostics
        .iter()
        .all(|d| d.rule.name() != "feller-condition"));
    // Turning `unused-suppression` off hides the reports of stale suppressions.
    settings.levels.insert(
        sdeck_diagnostics::RuleId::UnusedSuppression,
        sdeck_checks::RuleLevel::Off,
    );
    let stale = with_line(9, "# sdeck: quiet-file factor-domain");
    let result = check(&stale, "suppression_test", &settings);
    assert!(result
        .diagnostics
        .iter()
        .all(|d| d.rule.name() != "unused-suppression"));
}

#[test]
fn a_reason_after_dashes_still_silences_but_is_reported_with_a_fix() {
    let text = with_line(
        10,
        "# sdeck: quiet feller-condition -- zero is accepted, see risk memo 14",
    );
    // The rule stays silenced; the `--` is the one report on that line.
    assert_eq!(
        fired(&text),
        vec![(6, "unused"), (10, "unused-suppression")]
    );
    let result = check(&text, "suppression_test", &RuleSettings::default());
    let report = result
        .diagnostics
        .iter()
        .find(|d| d.rule.name() == "unused-suppression")
        .expect("reported");
    assert_eq!(&text[report.span.clone()], "--");
    assert!(report.message.contains("`because`"), "{}", report.message);
    let edit = &report.fixes[0].edits[0];
    let mut fixed = text.clone();
    fixed.replace_range(edit.span.clone(), &edit.new_text);
    assert!(fixed.contains("# sdeck: quiet feller-condition because zero is accepted"));
    assert_eq!(fired(&fixed), vec![(6, "unused")]);
}

#[test]
fn because_ends_the_rule_list_only_as_a_whole_word() {
    // `becausal` is not `because`: it is read as a (misspelt) rule name.
    let text = with_line(10, "# sdeck: quiet feller-condition becausal");
    let report = reports(&text, "unused-suppression");
    assert_eq!(
        report,
        vec![("`becausal` is not a rule".to_string(), "becausal")]
    );
    // A comma before `because` is fine, and the reason may name rules freely.
    let text = with_line(10, "# sdeck: quiet feller-condition,because unused is fine");
    assert_eq!(fired(&text), vec![(6, "unused")]);
}

/// What fires on a model of parameters alone, less `no-factor` (which it also fires).
fn without_no_factor(text: &str) -> Vec<(u32, &'static str)> {
    fired(text)
        .into_iter()
        .filter(|(_, rule)| *rule != "no-factor")
        .collect()
}

/// Overlapping ranges of one rule: every range open on the finding's line is used (it
/// silences the finding); a range of that rule which closed before it silences nothing.
#[test]
fn overlapping_ranges_of_one_rule_are_all_used_and_a_closed_one_is_not() {
    let text = "\
model larrowmere_rates
clock year
# sdeck: quiet-begin unused because the first range
# sdeck: quiet-begin unused because the second range
param level_stress = 5.5%
# sdeck: quiet-end unused
# sdeck: quiet-end unused
# sdeck: quiet-begin unused because closed before the next finding
# sdeck: quiet-end unused
param spread_stress = 1.5%
";
    let found = without_no_factor(text);
    // Line 5's finding is silenced by both open ranges; line 10's is not silenced (its
    // range on lines 8-9 closed before it), and that range silenced nothing.
    assert_eq!(found, vec![(8, "unused-suppression"), (10, "unused")]);
}

/// A range opens and closes on the lines it names: a finding on its first or last line is
/// silenced, one on the line after is not.
#[test]
fn a_range_covers_its_first_and_last_lines_and_no_more() {
    let text = "\
model larrowmere_rates
clock year
param a_stress = 1%  # sdeck: quiet-begin unused because from here
param b_stress = 2%  # sdeck: quiet-end unused
param c_stress = 3%
";
    assert_eq!(without_no_factor(text), vec![(5, "unused")]);
}

/// Twenty thousand trailing `quiet` comments: each silences its own line and nothing is
/// reported (the sweep's answer is the same as one pass per comment would give).
#[test]
fn many_trailing_quiet_comments_each_silence_their_own_line() {
    let mut text = String::from("model larrowmere_rates\nclock year\n");
    for i in 0..20_000 {
        text.push_str(&format!("param p{i} = 1  # sdeck: quiet unused\n"));
    }
    text.push_str("param left_alone = 2\n");
    assert_eq!(without_no_factor(&text), vec![(20_003, "unused")]);
}
