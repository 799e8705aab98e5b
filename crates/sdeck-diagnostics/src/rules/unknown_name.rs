//! The `unknown-name` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const UNKNOWN_NAME: Rule = Rule {
    id: RuleId::UnknownName,
    name: "unknown-name",
    default_severity: Severity::Error,
    summary: "A name is used but never declared.",
    explanation: include_str!("unknown_name.md"),
    flawed: include_str!("unknown_name.flawed.sde"),
    fixed: include_str!("unknown_name.fixed.sde"),
};
