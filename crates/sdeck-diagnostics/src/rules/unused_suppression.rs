//! The `unused-suppression` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const UNUSED_SUPPRESSION: Rule = Rule {
    id: RuleId::UnusedSuppression,
    name: "unused-suppression",
    default_severity: Severity::Warning,
    summary: "A suppression comment that suppresses nothing.",
    explanation: include_str!("unused_suppression.md"),
    flawed: include_str!("unused_suppression.flawed.sde"),
    fixed: include_str!("unused_suppression.fixed.sde"),
};
