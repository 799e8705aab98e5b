//! Each rule's manual and examples, in one Markdown page beside the rule's module,
//! `rules/NAME.md`: the sections `## Finds`, `## Why a reviewer cares` and `## How to
//! mend`, then `## Example` with two fenced `sde` blocks, a flawed model on which the rule
//! fires exactly once (and nothing else fires) and the same model mended (nothing fires).
//! `sdeck explain`, docs/rules.md and SARIF render it; the tests run both examples.

use sdeck_diagnostics::RuleId;

/// A rule's manual page, split.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Manual {
    /// What the rule finds, why a reviewer cares and how to mend it, in prose (Markdown)
    /// under the headings `## Finds`, `## Why a reviewer cares` and `## How to mend`.
    pub explanation: &'static str,
    /// A small model on which the rule fires exactly once.
    pub flawed: &'static str,
    /// The same model, mended; the rule does not fire.
    pub fixed: &'static str,
}

const EXAMPLE: &str = "\n## Example\n";
const FENCE: &str = "```sde\n";
const FENCE_END: &str = "```";

/// The manual of `rule`, from its page `rules/NAME.md`.
pub fn manual(rule: RuleId) -> Manual {
    split(super::PAGES[rule.index()])
}

/// A page cut at `## Example` and at its two `sde` blocks; a part that is missing is
/// empty (the tests hold every page to the form).
fn split(page: &'static str) -> Manual {
    let (explanation, example) = page.split_once(EXAMPLE).unwrap_or((page, ""));
    let mut blocks = example
        .split(FENCE)
        .skip(1)
        .map(|block| block.find(FENCE_END).map_or(block, |end| &block[..end]));
    Manual {
        explanation: explanation.trim_end_matches('\n'),
        flawed: blocks.next().unwrap_or(""),
        fixed: blocks.next().unwrap_or(""),
    }
}

#[cfg(test)]
mod tests {
    use super::{manual, split};
    use sdeck_diagnostics::rules::ALL;

    /// Every manual page has the same three sections, in order, each with text, then an
    /// example with two models.
    #[test]
    fn every_page_has_the_three_sections_in_order_and_two_examples() {
        for rule in ALL {
            let page = manual(rule.id);
            let headings: Vec<&str> = page
                .explanation
                .lines()
                .filter(|l| l.starts_with('#'))
                .collect();
            assert_eq!(
                headings,
                ["## Finds", "## Why a reviewer cares", "## How to mend"],
                "{}",
                rule.name
            );
            for section in page.explanation.split("## ").skip(1) {
                let body = section.split_once('\n').map_or("", |(_, b)| b);
                assert!(!body.trim().is_empty(), "{}: empty section", rule.name);
            }
            for (what, model) in [("flawed", page.flawed), ("fixed", page.fixed)] {
                assert!(
                    model.ends_with('\n') && model.lines().count() >= 3,
                    "{}: no {what} example",
                    rule.name
                );
            }
        }
    }

    #[test]
    fn a_page_splits_at_its_example_and_fences() {
        let page = "## Finds\n\nx\n\n## Example\n\nFlawed:\n\n```sde\na\nb\n```\n\nMended:\n\n```sde\nc\n```\n";
        let m = split(page);
        assert_eq!(m.explanation, "## Finds\n\nx");
        assert_eq!((m.flawed, m.fixed), ("a\nb\n", "c\n"));
        let bare = split("## Finds\n\nx\n");
        assert_eq!(
            (bare.explanation, bare.flawed, bare.fixed),
            ("## Finds\n\nx", "", "")
        );
    }
}
