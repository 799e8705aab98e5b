//! Snapshot tests of every finding of every flawed model: each fixture in
//! demo-models/flawed/ and each rule's flawed example (in its manual page
//! `crates/sdeck-checks/src/rules/NAME.md`, checked as read from standard input under
//! that page's name) has one snapshot holding what
//! `sdeck check` prints in plain text (rule, severity, message, related spans, help and
//! notes), the titles of the fixes each finding carries, and the file after each fix is
//! applied. A changed message or fix is then a reviewed diff of a `.snap` file.
//!
//! The harness lives with the CLI because the plain-text rendering is the CLI's; the
//! findings and fixes come from `sdeck_checks::check`, as in the binary. Snapshots are
//! committed under `tests/snapshots/`; a mismatch fails the test (no tool is needed to
//! run them; `INSTA_UPDATE=always cargo test -p sdeck-cli --test snapshots` rewrites them
//! after a deliberate change, to be reviewed with `git diff`).
//!
//! Each fix is also checked to clear its own finding and to introduce no other.

mod common;
use common::{root, sdeck};
use sdeck_checks::{check, RuleSettings};
use sdeck_diagnostics::{apply_fixes, rules, Diagnostic};
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::Path;

/// One flawed model: the path `sdeck check` shows (relative to the repository root), its
/// text, whether the text comes on standard input, and the name its snapshot goes by.
struct Flawed {
    path: String,
    text: String,
    stdin: bool,
    name: String,
}

/// Every flawed model: the fixtures (sorted), then each rule's flawed example in the
/// catalogue's order.
fn flawed_models() -> Vec<Flawed> {
    let folder = "demo-models/flawed";
    let entries =
        std::fs::read_dir(root().join(folder)).unwrap_or_else(|e| panic!("{folder}: {e}"));
    let mut names: Vec<String> = entries
        .filter_map(Result::ok)
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|name| name.ends_with(".sde"))
        .collect();
    names.sort();
    let mut out: Vec<Flawed> = names
        .into_iter()
        .map(|name| {
            let path = format!("{folder}/{name}");
            let text =
                std::fs::read_to_string(root().join(&path)).unwrap_or_else(|e| panic!("{e}"));
            let stem = name.trim_end_matches(".sde");
            Flawed {
                path,
                text,
                stdin: false,
                name: format!("fixture-{stem}"),
            }
        })
        .collect();
    for rule in rules::ALL {
        out.push(Flawed {
            path: format!(
                "crates/sdeck-checks/src/rules/{}.md",
                rule.name.replace('-', "_")
            ),
            text: sdeck_checks::manual(rule.id).flawed.to_string(),
            stdin: true,
            name: format!("rule-{}", rule.name),
        });
    }
    out
}

/// What `sdeck check --color never` prints for `model`, with the command line.
fn checked(model: &Flawed) -> String {
    let mut command = sdeck();
    if model.stdin {
        command
            .args([
                "check",
                "--color",
                "never",
                "--stdin-name",
                &model.path,
                "-",
            ])
            .write_stdin(model.text.as_bytes());
    } else {
        command.args(["check", "--color", "never", &model.path]);
    }
    let out = command.output().unwrap_or_else(|e| panic!("{e}"));
    let mut snap = String::new();
    let shown = if model.stdin {
        format!("--stdin-name {} -", model.path)
    } else {
        model.path.clone()
    };
    let _ = writeln!(snap, "$ sdeck check --color never {shown}");
    let _ = writeln!(snap, "exit status {}", out.status.code().unwrap_or(-1));
    snap.push_str(&String::from_utf8_lossy(&out.stdout));
    let stderr = String::from_utf8_lossy(&out.stderr);
    if !stderr.is_empty() {
        let _ = writeln!(snap, "--- stderr\n{stderr}");
    }
    snap
}

fn findings(text: &str, path: &str) -> Vec<Diagnostic> {
    let stem = Path::new(path)
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    check(text, &stem, &RuleSettings::default()).diagnostics
}

/// How many findings of each rule.
fn census(diagnostics: &[Diagnostic]) -> BTreeMap<&'static str, usize> {
    let mut out = BTreeMap::new();
    for d in diagnostics {
        *out.entry(d.rule.name()).or_insert(0) += 1;
    }
    out
}

/// The snapshot of one flawed model; fails (with every reason) when a fix does not clear
/// its finding or introduces another.
fn snapshot_of(model: &Flawed, problems: &mut Vec<String>) -> String {
    let (path, text) = (model.path.as_str(), model.text.as_str());
    let mut snap = checked(model);
    let before = findings(text, path);
    let before_census = census(&before);
    for (n, d) in before.iter().enumerate() {
        for (k, fix) in d.fixes.iter().enumerate() {
            let kind = if fix.preferred {
                "preferred"
            } else {
                "alternative"
            };
            let _ = writeln!(
                snap,
                "\n=== finding {} [{}], fix {} ({kind}): {}",
                n + 1,
                d.rule.name(),
                k + 1,
                fix.title
            );
            let fixed = match apply_fixes(text, &[fix]) {
                Ok(fixed) => fixed,
                Err(conflict) => {
                    problems.push(format!(
                        "{path}: fix `{}` cannot apply: {conflict:?}",
                        fix.title
                    ));
                    continue;
                }
            };
            snap.push_str(&fixed);
            let after = census(&findings(&fixed, path));
            let own = d.rule.name();
            if after.get(own).copied().unwrap_or(0) >= before_census[own] {
                problems.push(format!(
                    "{path}: fix `{}` leaves its `{own}` finding",
                    fix.title
                ));
            }
            for (rule, count) in &after {
                if *count > before_census.get(rule).copied().unwrap_or(0) {
                    problems.push(format!(
                        "{path}: fix `{}` of `{own}` introduces `{rule}`",
                        fix.title
                    ));
                }
            }
        }
    }
    snap
}

#[test]
fn every_flawed_model_matches_its_snapshot_and_every_fix_clears_its_finding() {
    let models = flawed_models();
    assert!(
        models.len() >= 30,
        "fixtures and rule examples: {}",
        models.len()
    );
    let mut problems = Vec::new();
    let mut snapshots = Vec::new();
    for model in &models {
        snapshots.push((model.name.clone(), snapshot_of(model, &mut problems)));
    }
    let with_fixes = snapshots
        .iter()
        .filter(|(_, s)| s.contains("\n=== finding"))
        .count();
    assert!(with_fixes > 0, "no flawed model carries a fix");
    assert!(
        problems.is_empty(),
        "fixes that do not clear their finding, or introduce another:\n{}",
        problems.join("\n")
    );
    let mut settings = insta::Settings::clone_current();
    settings.set_prepend_module_to_snapshot(false);
    settings.set_omit_expression(true);
    settings.bind(|| {
        for (name, snap) in &snapshots {
            insta::assert_snapshot!(name.as_str(), snap);
        }
    });
}
