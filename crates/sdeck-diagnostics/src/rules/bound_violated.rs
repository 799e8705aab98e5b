//! The `bound-violated` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const BOUND_VIOLATED: Rule = Rule {
    id: RuleId::BoundViolated,
    name: "bound-violated",
    default_severity: Severity::Error,
    summary: "A value lies outside its declared bound.",
    explanation: include_str!("bound_violated.md"),
    flawed: include_str!("bound_violated.flawed.sde"),
    fixed: include_str!("bound_violated.fixed.sde"),
};
