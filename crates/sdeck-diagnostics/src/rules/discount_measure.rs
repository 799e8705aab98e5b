//! The `discount-measure` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const DISCOUNT_MEASURE: Rule = Rule {
    id: RuleId::DiscountMeasure,
    name: "discount-measure",
    default_severity: Severity::Warning,
    summary: "A `discount` rate whose drifts are not stated to be risk-neutral.",
    explanation: include_str!("discount_measure.md"),
    flawed: include_str!("discount_measure.flawed.sde"),
    fixed: include_str!("discount_measure.fixed.sde"),
};
