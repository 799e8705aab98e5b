//! The `duplicate-name` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const DUPLICATE_NAME: Rule = Rule {
    id: RuleId::DuplicateName,
    name: "duplicate-name",
    default_severity: Severity::Error,
    summary: "A name is declared twice.",
    explanation: include_str!("duplicate_name.md"),
    flawed: include_str!("duplicate_name.flawed.sde"),
    fixed: include_str!("duplicate_name.fixed.sde"),
};
