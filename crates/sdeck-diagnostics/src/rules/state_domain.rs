//! The `state-domain` rule.

use crate::{Rule, Severity};

pub const STATE_DOMAIN: Rule = Rule {
    name: "state-domain",
    default_severity: Severity::Warning,
    summary: "A state can leave its declared domain, or the domain of sqrt/log applied to it.",
    explanation: include_str!("state_domain.md"),
    flawed: include_str!("state_domain.flawed.sde"),
    fixed: include_str!("state_domain.fixed.sde"),
};
