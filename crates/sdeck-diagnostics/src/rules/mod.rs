//! The catalogue: one file per rule, its text the manual (`sdeck explain`, docs/rules.md, hover).

mod bound_violated;
mod correlation_not_psd;
mod correlation_range;
mod dimension_mismatch;
mod discount_measure;
mod duplicate_name;
mod duplicate_term;
mod expectation_failed;
mod factor_domain;
mod feller_condition;
mod missing_equation;
mod moment_explosion;
mod no_factor;
mod not_mean_reverting;
mod syntax;
mod unit_scale;
mod unknown_name;
mod unused;
mod unused_suppression;

pub use bound_violated::BOUND_VIOLATED;
pub use correlation_not_psd::CORRELATION_NOT_PSD;
pub use correlation_range::CORRELATION_RANGE;
pub use dimension_mismatch::DIMENSION_MISMATCH;
pub use discount_measure::DISCOUNT_MEASURE;
pub use duplicate_name::DUPLICATE_NAME;
pub use duplicate_term::DUPLICATE_TERM;
pub use expectation_failed::EXPECTATION_FAILED;
pub use factor_domain::FACTOR_DOMAIN;
pub use feller_condition::FELLER_CONDITION;
pub use missing_equation::MISSING_EQUATION;
pub use moment_explosion::MOMENT_EXPLOSION;
pub use no_factor::NO_FACTOR;
pub use not_mean_reverting::NOT_MEAN_REVERTING;
pub use syntax::SYNTAX;
pub use unit_scale::UNIT_SCALE;
pub use unknown_name::UNKNOWN_NAME;
pub use unused::UNUSED;
pub use unused_suppression::UNUSED_SUPPRESSION;

use crate::Rule;

/// Every rule, in the order the manual lists them.
pub static ALL: &[&Rule] = &[
    &SYNTAX,
    &UNKNOWN_NAME,
    &DUPLICATE_NAME,
    &MISSING_EQUATION,
    &NO_FACTOR,
    &DUPLICATE_TERM,
    &DIMENSION_MISMATCH,
    &BOUND_VIOLATED,
    &CORRELATION_RANGE,
    &CORRELATION_NOT_PSD,
    &FELLER_CONDITION,
    &FACTOR_DOMAIN,
    &NOT_MEAN_REVERTING,
    &MOMENT_EXPLOSION,
    &DISCOUNT_MEASURE,
    &UNUSED,
    &UNIT_SCALE,
    &EXPECTATION_FAILED,
    &UNUSED_SUPPRESSION,
];

/// The rule called `name`, if there is one.
pub fn by_name(name: &str) -> Option<&'static Rule> {
    ALL.iter().copied().find(|rule| rule.name == name)
}

/// The rule whose name is closest to a misspelt `name`, when one is close enough to be a
/// slip of the keyboard (edit distance at most 2, or a third of the name's length).
pub fn closest(name: &str) -> Option<&'static Rule> {
    crate::closest_word(name, ALL.iter().map(|rule| rule.name)).and_then(by_name)
}

#[cfg(test)]
mod tests {
    #[test]
    fn a_slip_finds_the_rule_and_a_stranger_finds_none() {
        assert_eq!(
            super::closest("feler-condition").map(|r| r.name),
            Some("feller-condition")
        );
        assert_eq!(
            super::closest("unused-supression").map(|r| r.name),
            Some("unused-suppression")
        );
        assert_eq!(super::closest("Unused").map(|r| r.name), Some("unused"));
        assert!(super::closest("volatility").is_none());
    }

    /// Every manual page has the same three sections, in order, each with text.
    #[test]
    fn every_explanation_has_the_three_sections_in_order() {
        for rule in super::ALL {
            let headings: Vec<&str> = rule
                .explanation
                .lines()
                .filter(|l| l.starts_with('#'))
                .collect();
            assert_eq!(
                headings,
                ["## Finds", "## Why a reviewer cares", "## How to mend"],
                "{}",
                rule.name
            );
            for section in rule.explanation.split("## ").skip(1) {
                let body = section.split_once('\n').map_or("", |(_, b)| b);
                assert!(!body.trim().is_empty(), "{}: empty section", rule.name);
            }
        }
    }
}
