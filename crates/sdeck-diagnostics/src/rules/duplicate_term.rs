//! The `duplicate-term` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const DUPLICATE_TERM: Rule = Rule {
    id: RuleId::DuplicateTerm,
    name: "duplicate-term",
    default_severity: Severity::Error,
    summary: "Two dt terms, or two terms for one shock, in one equation.",
    explanation: include_str!("duplicate_term.md"),
    flawed: include_str!("duplicate_term.flawed.sde"),
    fixed: include_str!("duplicate_term.fixed.sde"),
};
