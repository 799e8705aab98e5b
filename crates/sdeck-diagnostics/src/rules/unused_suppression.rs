//! The `unused-suppression` rule.

use crate::{Rule, Severity};

pub const UNUSED_SUPPRESSION: Rule = Rule {
    name: "unused-suppression",
    default_severity: Severity::Warning,
    summary: "A suppression comment that suppresses nothing.",
    explanation: include_str!("unused_suppression.md"),
    flawed: include_str!("unused_suppression.flawed.sde"),
    fixed: include_str!("unused_suppression.fixed.sde"),
};
