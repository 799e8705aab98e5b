//! The `dimension-mismatch` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const DIMENSION_MISMATCH: Rule = Rule {
    id: RuleId::DimensionMismatch,
    name: "dimension-mismatch",
    default_severity: Severity::Error,
    summary: "Dimensions disagree (drift, diffusion, sums, function arguments, bounds).",
    explanation: include_str!("dimension_mismatch.md"),
    flawed: include_str!("dimension_mismatch.flawed.sde"),
    fixed: include_str!("dimension_mismatch.fixed.sde"),
};
