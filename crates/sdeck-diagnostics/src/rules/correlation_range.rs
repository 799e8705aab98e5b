//! The `correlation-range` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const CORRELATION_RANGE: Rule = Rule {
    id: RuleId::CorrelationRange,
    name: "correlation-range",
    default_severity: Severity::Error,
    summary: "A correlation outside [-1, 1], or a shock correlated with itself.",
    explanation: include_str!("correlation_range.md"),
    flawed: include_str!("correlation_range.flawed.sde"),
    fixed: include_str!("correlation_range.fixed.sde"),
};
