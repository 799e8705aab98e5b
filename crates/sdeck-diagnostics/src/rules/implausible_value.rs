//! The `implausible-value` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const IMPLAUSIBLE_VALUE: Rule = Rule {
    id: RuleId::ImplausibleValue,
    name: "implausible-value",
    default_severity: Severity::Warning,
    summary: "A volatility, half-life, rate level or correlation a desk almost never means.",
    explanation: include_str!("implausible_value.md"),
    flawed: include_str!("implausible_value.flawed.sde"),
    fixed: include_str!("implausible_value.fixed.sde"),
};
