//! The `feller-condition` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const FELLER_CONDITION: Rule = Rule {
    id: RuleId::FellerCondition,
    name: "feller-condition",
    default_severity: Severity::Warning,
    summary: "A square-root diffusion with 2·speed·level < vol²: zero is attainable.",
    explanation: include_str!("feller_condition.md"),
    flawed: include_str!("feller_condition.flawed.sde"),
    fixed: include_str!("feller_condition.fixed.sde"),
};
