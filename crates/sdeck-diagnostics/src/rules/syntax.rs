//! The `syntax` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const SYNTAX: Rule = Rule {
    id: RuleId::Syntax,
    name: "syntax",
    default_severity: Severity::Error,
    summary: "The text does not parse.",
    explanation: include_str!("syntax.md"),
    flawed: include_str!("syntax.flawed.sde"),
    fixed: include_str!("syntax.fixed.sde"),
};
