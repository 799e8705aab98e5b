//! Fixture tests: every model in demo-models/flawed carries its expectations inline
//! (`# expect: RULE` on the line where RULE fires, `# expect-next-line: RULE` above it),
//! and nothing else may fire; the sound demo models raise no warning and no error; the
//! rule manual's flawed example fires its rule exactly once and its fixed example nothing.

use sdeck_checks::{check, RuleSettings};
use sdeck_diagnostics::{rules, Severity};
use sdeck_syntax::{Encoding, LineIndex};
use std::path::{Path, PathBuf};

fn repo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn models_in(dir: &Path) -> Vec<PathBuf> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
        .map(|rd| rd.filter_map(Result::ok).map(|e| e.path()).collect())
        .unwrap_or_default();
    files.retain(|p| p.extension().is_some_and(|x| x == "sde"));
    files.sort();
    files
}

/// (1-based line, rule) pairs that the markers of `text` expect, sorted.
fn expected_markers(text: &str) -> Vec<(u32, String)> {
    let mut out = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let Some(hash) = line.rfind('#') else {
            continue;
        };
        let comment = line[hash + 1..].trim();
        let (offset, list) = if let Some(rest) = comment.strip_prefix("expect-next-line:") {
            (2, rest)
        } else if let Some(rest) = comment.strip_prefix("expect:") {
            (1, rest)
        } else {
            continue;
        };
        for rule in list.split(',').map(str::trim).filter(|r| !r.is_empty()) {
            out.push((i as u32 + offset, rule.to_string()));
        }
    }
    out.sort();
    out
}

fn fired(text: &str, name: &str) -> Vec<(u32, String)> {
    let result = check(text, name, &RuleSettings::default());
    let index = LineIndex::new(text);
    let mut out: Vec<(u32, String)> = result
        .diagnostics
        .iter()
        .map(|d| {
            (
                index.line_col(text, d.span.start, Encoding::Chars).line + 1,
                d.rule.to_string(),
            )
        })
        .collect();
    out.sort();
    out
}

#[test]
fn every_flawed_fixture_fires_exactly_its_markers() {
    let files = models_in(&repo().join("demo-models/flawed"));
    assert!(files.len() >= 16, "one fixture per rule is expected");
    let mut failures = Vec::new();
    for path in &files {
        let text = std::fs::read_to_string(path).unwrap_or_default();
        let expected = expected_markers(&text);
        assert!(!expected.is_empty(), "{} has no markers", path.display());
        let got = fired(&text, "fixture");
        if got != expected {
            failures.push(format!(
                "{}:\n  expected {:?}\n  fired    {:?}",
                path.display(),
                expected,
                got
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn there_is_a_flawed_fixture_for_every_rule_and_it_fires_that_rule() {
    for rule in rules::ALL {
        let path = repo().join(format!("demo-models/flawed/{}.sde", rule.name));
        let text = std::fs::read_to_string(&path)
            .unwrap_or_else(|_| panic!("missing fixture {}", path.display()));
        assert!(
            fired(&text, rule.name).iter().any(|(_, r)| r == rule.name),
            "{} does not fire {}",
            path.display(),
            rule.name
        );
    }
}

#[test]
fn sound_demo_models_raise_no_warning_and_no_error() {
    let files = models_in(&repo().join("demo-models"));
    assert!(files.len() >= 6);
    for path in files {
        let text = std::fs::read_to_string(&path).unwrap_or_default();
        let result = check(&text, "demo", &RuleSettings::default());
        let loud: Vec<_> = result
            .diagnostics
            .iter()
            .filter(|d| d.severity >= Severity::Warning)
            .map(|d| format!("{}: {}", d.rule, d.message))
            .collect();
        assert!(loud.is_empty(), "{}: {:?}", path.display(), loud);
    }
}

#[test]
fn manual_examples_fire_their_rule_once_and_the_fixed_ones_nothing() {
    for rule in rules::ALL {
        let manual = sdeck_checks::manual(rule.id);
        let flawed = fired(manual.flawed, rule.name);
        assert_eq!(
            flawed.iter().map(|(_, r)| r.as_str()).collect::<Vec<_>>(),
            vec![rule.name],
            "the flawed example of {} should fire it exactly once and nothing else",
            rule.name
        );
        let fixed = fired(manual.fixed, rule.name);
        assert!(
            fixed.is_empty(),
            "the fixed example of {} fires {:?}",
            rule.name,
            fixed
        );
    }
}
