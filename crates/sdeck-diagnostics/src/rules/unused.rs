//! The `unused` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const UNUSED: Rule = Rule {
    id: RuleId::Unused,
    name: "unused",
    default_severity: Severity::Warning,
    summary: "A parameter, shock or let that nothing uses.",
    explanation: include_str!("unused.md"),
    flawed: include_str!("unused.flawed.sde"),
    fixed: include_str!("unused.fixed.sde"),
};
