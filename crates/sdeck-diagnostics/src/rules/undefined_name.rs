//! The `undefined-name` rule.

use crate::{Rule, Severity};

pub const UNDEFINED_NAME: Rule = Rule {
    name: "undefined-name",
    default_severity: Severity::Error,
    summary: "A name is used but never declared.",
    explanation: include_str!("undefined_name.md"),
    flawed: include_str!("undefined_name.flawed.sde"),
    fixed: include_str!("undefined_name.fixed.sde"),
};
