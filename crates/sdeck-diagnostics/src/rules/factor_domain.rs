//! The `factor-domain` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const FACTOR_DOMAIN: Rule = Rule {
    id: RuleId::FactorDomain,
    name: "factor-domain",
    default_severity: Severity::Warning,
    summary: "A factor can leave its declared domain, or the domain of sqrt/log applied to it.",
    explanation: include_str!("factor_domain.md"),
    flawed: include_str!("factor_domain.flawed.sde"),
    fixed: include_str!("factor_domain.fixed.sde"),
};
