//! The `no-factor` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const NO_FACTOR: Rule = Rule {
    id: RuleId::NoFactor,
    name: "no-factor",
    default_severity: Severity::Warning,
    summary: "The model declares no factor, so nothing is derived or checked beyond its names.",
    explanation: include_str!("no_factor.md"),
    flawed: include_str!("no_factor.flawed.sde"),
    fixed: include_str!("no_factor.fixed.sde"),
};
