//! The `moment-explosion` rule.

use super::RuleId;
use crate::{Rule, Severity};

pub const MOMENT_EXPLOSION: Rule = Rule {
    id: RuleId::MomentExplosion,
    name: "moment-explosion",
    default_severity: Severity::Warning,
    summary: "A price whose variance becomes infinite before the horizon.",
    explanation: include_str!("moment_explosion.md"),
    flawed: include_str!("moment_explosion.flawed.sde"),
    fixed: include_str!("moment_explosion.fixed.sde"),
};
