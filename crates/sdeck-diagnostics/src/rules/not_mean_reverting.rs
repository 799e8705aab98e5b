//! The `not-mean-reverting` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const NOT_MEAN_REVERTING: Rule = Rule {
    id: RuleId::NotMeanReverting,
    name: "not-mean-reverting",
    default_severity: Severity::Warning,
    summary: "A linear drift that pushes away from its level (explosive).",
    explanation: include_str!("not_mean_reverting.md"),
    flawed: include_str!("not_mean_reverting.flawed.sde"),
    fixed: include_str!("not_mean_reverting.fixed.sde"),
};
