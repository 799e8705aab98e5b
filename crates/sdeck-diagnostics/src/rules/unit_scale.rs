//! The `unit-scale` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const UNIT_SCALE: Rule = Rule {
    id: RuleId::UnitScale,
    name: "unit-scale",
    default_severity: Severity::Hint,
    summary: "A value is converted to the clock's units.",
    explanation: include_str!("unit_scale.md"),
    flawed: include_str!("unit_scale.flawed.sde"),
    fixed: include_str!("unit_scale.fixed.sde"),
};
