//! The catalogue, built from the one list of rules (`list.rs`): each rule's identity,
//! name, default severity and summary. Its manual and examples sit beside the rule's
//! module, in `crates/sdeck-checks/src/rules/NAME.md` (`sdeck_checks::manual`).

mod list;

use crate::{Rule, Severity};
use serde::{Serialize, Serializer};
use std::fmt;

/// Declares the catalogue from the one list of rules, `list.rs` (which `sdeck-checks`
/// reads too, for its registry and manuals, through [`for_each_rule!`](crate::for_each_rule)): each line gives a rule's identity, its constant, the
/// name of its module, its name, default severity and summary. The
/// list's order is the manual's order, the order of [`ALL`] and of [`RuleId`], so that
/// `ALL[id as usize]` is the rule of `id`.
macro_rules! rules {
    ($(
        $variant:ident => $constant:ident, $module:ident, $name:literal, $severity:ident,
        $summary:literal $(, $checked:ident)?;
    )*) => {
        $(
            #[doc = $summary]
            pub const $constant: Rule = Rule {
                id: RuleId::$variant,
                name: $name,
                default_severity: Severity::$severity,
                summary: $summary,
            };
        )*

        /// The identity of a rule: what a diagnostic, a suppression comment and a project
        /// setting name. Compared, hashed and ordered as a value (the order is the
        /// catalogue's); its text is [`RuleId::name`].
        #[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
        pub enum RuleId {
            $($variant,)*
        }

        /// Every rule, in the order the manual lists them; indexed by [`RuleId`].
        pub static ALL: &[&Rule] = &[$(&$constant,)*];

        impl RuleId {
            /// Every identity, in catalogue order.
            pub const ALL: &'static [RuleId] = &[$(RuleId::$variant,)*];
        }
    };
}

crate::for_each_rule!(rules);

impl RuleId {
    /// The rule's entry in the catalogue.
    pub fn rule(self) -> &'static Rule {
        ALL[self as usize]
    }

    /// The kebab-case name shown in every output format.
    pub fn name(self) -> &'static str {
        self.rule().name
    }

    /// The position of the rule in the catalogue (SARIF's rule index).
    pub fn index(self) -> usize {
        self as usize
    }
}

impl fmt::Display for RuleId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl Serialize for RuleId {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        serializer.serialize_str(self.name())
    }
}

/// The rule called `name`, if there is one. Only text a user typed is looked up by name
/// (a suppression comment, a project setting, `sdeck explain NAME`).
pub fn by_name(name: &str) -> Option<&'static Rule> {
    ALL.iter().copied().find(|rule| rule.name == name)
}

/// The rule whose name is closest to a misspelt `name`, when one is close enough to be a
/// slip of the keyboard (edit distance at most 2, or a third of the name's length).
pub fn closest(name: &str) -> Option<&'static Rule> {
    crate::closest_word(name, ALL.iter().map(|rule| rule.name)).and_then(by_name)
}

#[cfg(test)]
mod tests {
    use super::{RuleId, ALL};

    /// The identity of each rule is its place in the catalogue, both ways.
    #[test]
    fn every_identity_indexes_its_own_rule() {
        assert_eq!(ALL.len(), RuleId::ALL.len());
        for (index, rule) in ALL.iter().enumerate() {
            assert_eq!(rule.id.index(), index, "{}", rule.name);
            assert_eq!(RuleId::ALL[index], rule.id, "{}", rule.name);
            assert_eq!(rule.id.name(), rule.name);
            assert_eq!(rule.id.to_string(), rule.name);
        }
        let names: std::collections::HashSet<&str> = ALL.iter().map(|r| r.name).collect();
        assert_eq!(names.len(), ALL.len(), "two rules share a name");
    }

    #[test]
    fn a_slip_finds_the_rule_and_a_stranger_finds_none() {
        assert_eq!(
            super::closest("feler-condition").map(|r| r.name),
            Some("feller-condition")
        );
        assert_eq!(
            super::closest("unused-supression").map(|r| r.name),
            Some("unused-suppression")
        );
        assert_eq!(super::closest("Unused").map(|r| r.name), Some("unused"));
        assert!(super::closest("volatility").is_none());
    }
}
