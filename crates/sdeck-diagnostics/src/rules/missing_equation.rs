//! The `missing-equation` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const MISSING_EQUATION: Rule = Rule {
    id: RuleId::MissingEquation,
    name: "missing-equation",
    default_severity: Severity::Error,
    summary: "A factor has no equation, or an equation names no factor.",
    explanation: include_str!("missing_equation.md"),
    flawed: include_str!("missing_equation.flawed.sde"),
    fixed: include_str!("missing_equation.fixed.sde"),
};
