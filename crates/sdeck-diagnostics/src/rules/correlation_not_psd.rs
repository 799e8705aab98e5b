//! The `correlation-not-psd` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const CORRELATION_NOT_PSD: Rule = Rule {
    id: RuleId::CorrelationNotPsd,
    name: "correlation-not-psd",
    default_severity: Severity::Error,
    summary: "The correlation matrix of the shocks is not positive semi-definite.",
    explanation: include_str!("correlation_not_psd.md"),
    flawed: include_str!("correlation_not_psd.flawed.sde"),
    fixed: include_str!("correlation_not_psd.fixed.sde"),
};
