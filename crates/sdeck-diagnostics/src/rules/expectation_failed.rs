//! The `expectation-failed` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const EXPECTATION_FAILED: Rule = Rule {
    id: RuleId::ExpectationFailed,
    name: "expectation-failed",
    default_severity: Severity::Error,
    summary: "A pinned expectation on a derived figure does not hold.",
    explanation: include_str!("expectation_failed.md"),
    flawed: include_str!("expectation_failed.flawed.sde"),
    fixed: include_str!("expectation_failed.fixed.sde"),
};
