//! The `unused` rule.

use crate::{Rule, Severity};

pub const UNUSED: Rule = Rule {
    name: "unused",
    default_severity: Severity::Warning,
    summary: "A parameter, shock or let that nothing uses.",
    explanation: include_str!("unused.md"),
    flawed: include_str!("unused.flawed.sde"),
    fixed: include_str!("unused.fixed.sde"),
};
