//! End-to-end tests of `sdeck check` and `sdeck explain`: exit statuses, the exact JSON
//! shape, SARIF (validated against the OASIS schema), JUnit, annotation lines, standard
//! input, several reports in one run, project files, and the generated rule manual.

use serde_json::Value;
use std::path::Path;
mod common;
use common::{root, sdeck, status, stderr, stdout, write};

fn json_of(output: &std::process::Output) -> Value {
    serde_json::from_slice(&output.stdout)
        .unwrap_or_else(|e| panic!("not JSON ({e}): {}", stdout(output)))
}

/// The keys of a JSON object, sorted (key order is not part of the format).
fn keys(value: &Value) -> Vec<String> {
    let mut keys: Vec<String> = value
        .as_object()
        .map(|o| o.keys().cloned().collect())
        .unwrap_or_default();
    keys.sort();
    keys
}

/// A sound Ornstein–Uhlenbeck model (the first example of docs/language.md), with room
/// for extra lines at the end.
const SOUND_MODEL: &str = "\
# Harrowgate Mutual, asset-liability desk: the policy rate of the Federation of Tallisand.
model harrowgate_policy_rate
clock year
horizon 6 month
param kappa = 0.9  [1/year]       > 0
param theta = 3.1%
param sigma = 0.9% [1/sqrt(year)] > 0
shock W
factor r = 2.2%
dr = kappa * (theta - r) dt + sigma dW
";

/// A square-root model whose Feller condition fails: one warning, no error.
const FELLER_MODEL: &str = "\
# Fenmarch Cooperative Bank, treasury: a funding rate with too much volatility.
model fenmarch_funding
param kappa = 0.5  [1/year]       > 0
param level = 2%                  >= 0
param vol   = 20%  [1/sqrt(year)] > 0
shock W
factor r = 1.8% >= 0
dr = kappa * (level - r) dt + vol * sqrt(r) dW
";

// ---------------------------------------------------------------- exit statuses

#[test]
fn a_clean_model_exits_0() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("rate.sde");
    write(&file, SOUND_MODEL);
    let out = sdeck().arg("check").arg(&file).output().unwrap();
    assert_eq!(status(&out), 0, "{}", stdout(&out));
    assert!(stdout(&out).contains("1 file checked: 0 errors, 0 warnings, 0 hints"));
}

#[test]
fn a_model_with_an_error_exits_1() {
    let out = sdeck()
        .args(["check", "demo-models/flawed/syntax.sde"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 1);
    assert!(stdout(&out).contains("error[syntax]"));
}

#[test]
fn warnings_fail_only_with_deny_warnings() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("funding.sde");
    write(&file, FELLER_MODEL);
    let out = sdeck().arg("check").arg(&file).output().unwrap();
    assert_eq!(status(&out), 0);
    assert!(stdout(&out).contains("warning[feller-condition]"));
    let out = sdeck()
        .arg("check")
        .arg(&file)
        .args(["--deny", "warnings"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 1);
    let out = sdeck()
        .arg("check")
        .arg(&file)
        .args(["--deny", "errors"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 0);
}

#[test]
fn an_unreadable_path_exits_2() {
    let out = sdeck()
        .args(["check", "demo-models/no-such-model.sde"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 2);
    assert!(
        stderr(&out).contains("no-such-model.sde"),
        "{}",
        stderr(&out)
    );
}

#[test]
fn usage_errors_exit_2() {
    for args in [
        vec!["check"],
        vec!["check", "--format", "pdf", "demo-models"],
        vec!["check", "--output", "report.sarif", "demo-models"],
        vec!["check", "--output", "yaml=report.yaml", "demo-models"],
        vec!["check", "--deny", "hints", "demo-models"],
        vec!["check", "-", "-"],
        vec!["check", "--stdin-name", "a.sde", "demo-models"],
        vec!["explain", "no-such-rule"],
    ] {
        let out = sdeck().args(&args).output().unwrap();
        assert_eq!(status(&out), 2, "{args:?}: {}", stderr(&out));
        assert!(!stderr(&out).is_empty(), "{args:?} says nothing");
    }
}

// ---------------------------------------------------------------- JSON

#[test]
fn json_has_the_exact_shape_sorted_with_character_columns() {
    let dir = tempfile::tempdir().unwrap();
    // Greek names before the unit: byte and character columns differ on line 2.
    let b = dir.path().join("b.sde");
    write(&b, "model b\nparam θκ = 1 [1/yr]\n");
    let a = dir.path().join("a.sde");
    write(&a, "param unused_one = 1\nparam unused_two = 2\n");
    // Arguments out of order: the output is sorted by file, then position.
    let out = sdeck()
        .arg("check")
        .arg(&b)
        .arg(&a)
        .args(["--format", "json"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 1);
    let value = json_of(&out);
    let top = keys(&value);
    assert_eq!(top, ["diagnostics", "files", "version"]);
    assert_eq!(value["version"], 1);
    assert_eq!(value["files"], 2);
    let diagnostics = value["diagnostics"].as_array().unwrap();
    for d in diagnostics {
        let entry = keys(d);
        assert_eq!(entry, ["file", "message", "range", "rule", "severity"]);
        let range = keys(&d["range"]);
        assert_eq!(range, ["end", "start"]);
        for end in ["start", "end"] {
            let place = keys(&d["range"][end]);
            assert_eq!(place, ["column", "line"]);
        }
    }
    let summary: Vec<(String, String, u64, u64, u64, u64)> = diagnostics
        .iter()
        .map(|d| {
            (
                Path::new(d["file"].as_str().unwrap())
                    .file_name()
                    .unwrap()
                    .to_string_lossy()
                    .into_owned(),
                d["rule"].as_str().unwrap().to_string(),
                d["range"]["start"]["line"].as_u64().unwrap(),
                d["range"]["start"]["column"].as_u64().unwrap(),
                d["range"]["end"]["line"].as_u64().unwrap(),
                d["range"]["end"]["column"].as_u64().unwrap(),
            )
        })
        .collect();
    let expected = [
        // A file of parameters alone checks nothing: said at its first statement.
        ("a.sde", "no-factor", 1, 1, 1, 21),
        ("a.sde", "unused", 1, 7, 1, 17),
        ("a.sde", "unused", 2, 7, 2, 17),
        // `θκ` is two characters (four bytes) from column 7.
        ("b.sde", "unused", 2, 7, 2, 9),
        // `yr` starts at character 17 (byte 19) of `param θκ = 1 [1/yr]`.
        ("b.sde", "unknown-name", 2, 17, 2, 19),
    ];
    let expected: Vec<(String, String, u64, u64, u64, u64)> = expected
        .iter()
        .map(|(f, r, a, b, c, d)| (f.to_string(), r.to_string(), *a, *b, *c, *d))
        .collect();
    assert_eq!(summary, expected);
    assert_eq!(diagnostics[0]["severity"], "warning");
    assert_eq!(diagnostics[4]["severity"], "error");
}

#[test]
fn a_missing_bracket_and_a_later_unclosed_parenthesis_are_both_reported() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("two.sde");
    write(
        &file,
        "model fenmarch_two_errors\n\
         param kappa = 0.9 [1/year > 0\n\
         param theta = 3.1%\n\
         param sigma = 0.9% [1/sqrt(year)] > 0\n\
         shock W\n\
         factor r = 2.2%\n\
         dr = kappa * (theta - r dt + sigma dW\n",
    );
    let out = sdeck()
        .arg("check")
        .arg(&file)
        .args(["--format", "json"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 1);
    let value = json_of(&out);
    let syntax_lines: Vec<u64> = value["diagnostics"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|d| d["rule"] == "syntax")
        .map(|d| d["range"]["start"]["line"].as_u64().unwrap())
        .collect();
    assert_eq!(syntax_lines, [2, 7], "{value:#}");
}

// ---------------------------------------------------------------- SARIF

/// Validates a SARIF file with the Python `jsonschema` package against the schema in
/// tests/schemas (see tests/cli/requirements.txt).
fn assert_valid_sarif(file: &Path) {
    let script = root().join("tests/cli/test_sarif.py");
    let out = std::process::Command::new("python3")
        .arg(&script)
        .arg(file)
        .output()
        .expect("python3 is needed to validate SARIF (tests/cli/requirements.txt)");
    assert!(
        out.status.success(),
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn sarif_is_valid_and_carries_rules_levels_and_places() {
    let out = sdeck()
        .args(["check", "--format", "sarif", "demo-models/flawed"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 1);
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("flawed.sarif");
    std::fs::write(&file, &out.stdout).unwrap();
    assert_valid_sarif(&file);

    let log = json_of(&out);
    assert_eq!(log["version"], "2.1.0");
    let run = &log["runs"][0];
    let rules = run["tool"]["driver"]["rules"].as_array().unwrap();
    assert_eq!(rules.len(), sdeck_rule_count());
    let feller = rules
        .iter()
        .find(|r| r["id"] == "feller-condition")
        .unwrap();
    assert_eq!(feller["defaultConfiguration"]["level"], "warning");
    assert!(feller["shortDescription"]["text"]
        .as_str()
        .unwrap()
        .contains("square-root"));
    assert!(feller["fullDescription"]["text"]
        .as_str()
        .unwrap()
        .contains("2·speed·level"));
    assert!(feller["help"]["text"].as_str().unwrap().contains("Mended:"));
    let results = run["results"].as_array().unwrap();
    let result = results
        .iter()
        .find(|r| r["ruleId"] == "feller-condition")
        .unwrap();
    assert_eq!(result["level"], "warning");
    let location = &result["locations"][0]["physicalLocation"];
    assert_eq!(
        location["artifactLocation"]["uri"],
        "demo-models/flawed/feller-condition.sde"
    );
    assert_eq!(location["region"]["startLine"], 22);
    assert_eq!(location["region"]["startColumn"], 1);
    assert_eq!(
        results[0]["ruleIndex"]
            .as_u64()
            .map(|i| rules[i as usize]["id"].clone()),
        Some(results[0]["ruleId"].clone())
    );
    let hints: Vec<&Value> = results
        .iter()
        .filter(|r| r["ruleId"] == "unit-scale")
        .collect();
    assert!(hints.iter().all(|r| r["level"] == "note"));
}

/// The catalogue's size, read from `sdeck explain` (one line per rule).
fn sdeck_rule_count() -> usize {
    let out = sdeck().arg("explain").output().unwrap();
    stdout(&out)
        .lines()
        .filter(|l| !l.trim().is_empty())
        .count()
}

#[test]
fn sarif_of_a_clean_run_is_valid_with_no_results() {
    let dir = tempfile::tempdir().unwrap();
    let model = dir.path().join("rate.sde");
    write(&model, SOUND_MODEL);
    let report = dir.path().join("clean.sarif");
    let out = sdeck()
        .arg("check")
        .arg(&model)
        .arg("--output")
        .arg(format!("sarif={}", report.display()))
        .output()
        .unwrap();
    assert_eq!(status(&out), 0);
    assert_valid_sarif(&report);
    let log: Value = serde_json::from_slice(&std::fs::read(&report).unwrap()).unwrap();
    assert_eq!(log["runs"][0]["results"].as_array().map(Vec::len), Some(0));
}

// ---------------------------------------------------------------- JUnit, annotations

#[test]
fn junit_is_well_formed_with_one_case_per_file() {
    let out = sdeck()
        .args(["check", "--format", "junit", "demo-models/flawed"])
        .output()
        .unwrap();
    let text = stdout(&out);
    let document = roxmltree::Document::parse(&text).unwrap_or_else(|e| panic!("{e}: {text}"));
    let cases: Vec<roxmltree::Node> = document
        .descendants()
        .filter(|n| n.has_tag_name("testcase"))
        .collect();
    let files = std::fs::read_dir(root().join("demo-models/flawed"))
        .unwrap()
        .filter(|e| {
            e.as_ref()
                .is_ok_and(|e| e.path().extension().is_some_and(|x| x == "sde"))
        })
        .count();
    assert_eq!(cases.len(), files);
    let suite = document
        .descendants()
        .find(|n| n.has_tag_name("testsuite"))
        .unwrap();
    assert_eq!(suite.attribute("tests"), Some(files.to_string().as_str()));
    let failed: Vec<&str> = cases
        .iter()
        .filter(|c| c.children().any(|n| n.has_tag_name("failure")))
        .filter_map(|c| c.attribute("name"))
        .collect();
    assert_eq!(
        suite.attribute("failures"),
        Some(failed.len().to_string().as_str())
    );
    // Errors fail a case; a file with only warnings passes under the default deny level.
    assert!(failed.contains(&"demo-models/flawed/syntax.sde"));
    assert!(!failed.contains(&"demo-models/flawed/feller-condition.sde"));
    // `<` in messages is escaped, and survives the round trip.
    let feller = cases
        .iter()
        .find(|c| c.attribute("name") == Some("demo-models/flawed/feller-condition.sde"))
        .unwrap();
    let out_text: String = feller.descendants().filter_map(|n| n.text()).collect();
    assert!(out_text.contains("0.02 < vol²"), "{out_text}");
}

#[test]
fn github_lines_follow_the_annotation_syntax() {
    let out = sdeck()
        .args([
            "check",
            "--format",
            "github",
            "demo-models/flawed/feller-condition.sde",
            "demo-models/flawed/syntax.sde",
        ])
        .output()
        .unwrap();
    assert_eq!(status(&out), 1);
    let text = stdout(&out);
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 5, "{text}");
    assert!(lines[0].starts_with(
        "::warning file=demo-models/flawed/feller-condition.sde,line=22,col=1,endLine=22,endColumn=47,title=feller-condition::2·kappa·level = 0.02"
    ), "{}", lines[0]);
    for line in &lines {
        let (head, message) = line
            .split_once("::")
            .and_then(|(_, rest)| rest.split_once("::"))
            .unwrap();
        let (command, properties) = head.split_once(' ').unwrap();
        assert!(["error", "warning", "notice"].contains(&command), "{line}");
        let keys: Vec<&str> = properties
            .split(',')
            .map(|p| p.split_once('=').unwrap().0)
            .collect();
        assert_eq!(
            keys,
            ["file", "line", "col", "endLine", "endColumn", "title"]
        );
        assert!(!message.contains('\n'));
    }
    assert!(
        lines[2].starts_with("::error file=demo-models/flawed/syntax.sde,line=3,col=17,"),
        "{}",
        lines[2]
    );
}

// ---------------------------------------------------------------- standard input

#[test]
fn stdin_is_checked_under_the_given_name_and_its_project() {
    let dir = tempfile::tempdir().unwrap();
    write(
        &dir.path().join("sdeck.toml"),
        "[rules]\nfeller-condition = \"error\"\n",
    );
    let name = dir.path().join("desk/funding.sde");
    // Neither the file nor its folder exists: the name alone places it.
    for args in [
        vec!["check", "-", "--stdin-name"],
        vec!["check", "--stdin-name"],
    ] {
        let out = sdeck()
            .args(&args)
            .arg(&name)
            .args(["--format", "json"])
            .write_stdin(FELLER_MODEL)
            .output()
            .unwrap();
        assert_eq!(status(&out), 1, "{args:?}: {}", stderr(&out));
        let value = json_of(&out);
        assert_eq!(value["files"], 1);
        assert_eq!(value["diagnostics"][0]["file"], name.display().to_string());
        assert_eq!(value["diagnostics"][0]["rule"], "feller-condition");
        assert_eq!(value["diagnostics"][0]["severity"], "error");
    }
    // The same text under a name outside the project keeps the default (warning).
    let out = sdeck()
        .args(["check", "-", "--stdin-name", "elsewhere/funding.sde"])
        .write_stdin(FELLER_MODEL)
        .output()
        .unwrap();
    assert_eq!(status(&out), 0);
    assert!(stdout(&out).contains("elsewhere/funding.sde"));
}

#[test]
fn stdin_under_an_excluded_name_is_not_checked() {
    let out = sdeck()
        .args([
            "check",
            "--stdin-name",
            "demo-models/flawed/../flawed/syntax.sde",
            "--format",
            "json",
        ])
        .write_stdin("model broken-name\n")
        .output()
        .unwrap();
    // demo-models/flawed has its own project, with no exclusion: checked.
    assert_eq!(status(&out), 1);
    let dir = tempfile::tempdir().unwrap();
    write(
        &dir.path().join("sdeck.toml"),
        "[files]\nexclude = [\"scratch/**\"]\n",
    );
    let out = sdeck()
        .arg("check")
        .arg("--stdin-name")
        .arg(dir.path().join("scratch/try.sde"))
        .args(["--format", "json"])
        .write_stdin("model broken-name\n")
        .output()
        .unwrap();
    assert_eq!(status(&out), 0);
    assert_eq!(json_of(&out)["files"], 0);
}

// ---------------------------------------------------------------- several reports

#[test]
fn one_run_writes_several_reports_and_stdout_keeps_its_format() {
    let dir = tempfile::tempdir().unwrap();
    let sarif = dir.path().join("report.sarif");
    let junit = dir.path().join("report.xml");
    let json = dir.path().join("report.json");
    let out = sdeck()
        .args([
            "check",
            "demo-models/flawed/unused.sde",
            "--format",
            "github",
        ])
        .arg("--output")
        .arg(format!("sarif={}", sarif.display()))
        .arg("--output")
        .arg(format!("junit={}", junit.display()))
        .arg("--output")
        .arg(format!("json={}", json.display()))
        .output()
        .unwrap();
    assert_eq!(status(&out), 0);
    assert!(stdout(&out).starts_with("::warning file=demo-models/flawed/unused.sde"));
    assert_valid_sarif(&sarif);
    let xml = std::fs::read_to_string(&junit).unwrap();
    assert!(roxmltree::Document::parse(&xml).is_ok());
    let value: Value = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    assert_eq!(value["diagnostics"].as_array().map(Vec::len), Some(3));
}

#[test]
fn an_unwritable_report_exits_2() {
    let out = sdeck()
        .args([
            "check",
            "demo-models/ou_short_rate.sde",
            "--output",
            "json=/nonexistent-folder/x/report.json",
        ])
        .output()
        .unwrap();
    assert_eq!(status(&out), 2);
    assert!(stderr(&out).contains("report.json"));
}

// ---------------------------------------------------------------- project files

#[test]
fn the_demo_models_pass_and_a_named_fixture_still_fires() {
    let out = sdeck()
        .args(["check", "demo-models", "--format", "json"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 0, "{}", stdout(&out));
    let value = json_of(&out);
    assert_eq!(value["files"], 9);
    let out = sdeck()
        .args([
            "check",
            "demo-models/flawed/feller-condition.sde",
            "--format",
            "json",
        ])
        .output()
        .unwrap();
    let value = json_of(&out);
    assert_eq!(value["files"], 1);
    assert_eq!(value["diagnostics"][0]["rule"], "feller-condition");
    // demo-models/sdeck.toml denies warnings; the fixture's own project does not.
    assert_eq!(status(&out), 0);
}

#[test]
fn a_severity_override_changes_the_exit_status() {
    let dir = tempfile::tempdir().unwrap();
    let model = dir.path().join("funding.sde");
    write(&model, FELLER_MODEL);
    let run = || sdeck().arg("check").arg(&model).output().unwrap();
    assert_eq!(status(&run()), 0);
    write(
        &dir.path().join("sdeck.toml"),
        "[rules]\nfeller-condition = \"error\"\n",
    );
    let out = run();
    assert_eq!(status(&out), 1);
    assert!(stdout(&out).contains("error[feller-condition]"));
    write(
        &dir.path().join("sdeck.toml"),
        "[rules]\nfeller-condition = \"off\"\n",
    );
    let out = run();
    assert_eq!(status(&out), 0);
    assert!(!stdout(&out).contains("feller-condition"));
    write(
        &dir.path().join("sdeck.toml"),
        "[check]\ndeny = \"warnings\"\n",
    );
    assert_eq!(status(&run()), 1);
    // The command line wins over the project's default.
    let out = sdeck()
        .arg("check")
        .arg(&model)
        .args(["--deny", "errors"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 0);
}

#[test]
fn a_broken_project_file_exits_2_naming_file_and_key() {
    let dir = tempfile::tempdir().unwrap();
    write(&dir.path().join("rate.sde"), SOUND_MODEL);
    write(
        &dir.path().join("sdeck.toml"),
        "[rules]\nfeller-condtion = \"error\"\n",
    );
    let out = sdeck().arg("check").arg(dir.path()).output().unwrap();
    assert_eq!(status(&out), 2);
    let message = stderr(&out);
    assert!(message.contains("sdeck.toml"), "{message}");
    assert!(message.contains("rules.feller-condtion"), "{message}");
    assert!(message.contains("feller-condition"), "{message}");
    write(
        &dir.path().join("sdeck.toml"),
        "[files]\nignore = [\"old/**\"]\n",
    );
    let out = sdeck()
        .arg("check")
        .arg(dir.path().join("rate.sde"))
        .output()
        .unwrap();
    assert_eq!(status(&out), 2);
    assert!(stderr(&out).contains("files.ignore"), "{}", stderr(&out));
}

#[test]
fn explicitly_named_files_are_still_excluded() {
    let dir = tempfile::tempdir().unwrap();
    write(
        &dir.path().join("sdeck.toml"),
        "[files]\nexclude = [\"drafts/**\", \"*.tmp.sde\"]\n",
    );
    write(&dir.path().join("drafts/a.sde"), "model broken-name\n");
    write(&dir.path().join("b.tmp.sde"), "model broken-name\n");
    write(&dir.path().join("c.sde"), SOUND_MODEL);
    let out = sdeck()
        .arg("check")
        .arg(dir.path().join("drafts/a.sde"))
        .arg(dir.path().join("b.tmp.sde"))
        .arg(dir.path().join("c.sde"))
        .args(["--format", "json"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 0, "{}", stdout(&out));
    assert_eq!(json_of(&out)["files"], 1);
    let out = sdeck()
        .arg("check")
        .arg(dir.path())
        .args(["--format", "json"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 0);
    assert_eq!(json_of(&out)["files"], 1);
}

#[test]
fn include_limits_a_folder_run() {
    let dir = tempfile::tempdir().unwrap();
    write(
        &dir.path().join("sdeck.toml"),
        "[files]\ninclude = [\"desk/**\"]\n",
    );
    write(&dir.path().join("desk/a.sde"), SOUND_MODEL);
    write(&dir.path().join("other/b.sde"), "model broken-name\n");
    let out = sdeck()
        .arg("check")
        .arg(dir.path())
        .args(["--format", "json"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 0);
    assert_eq!(json_of(&out)["files"], 1);
}

// ---------------------------------------------------------------- explain

#[test]
fn explain_prints_the_manual_with_both_examples() {
    let out = sdeck()
        .args(["explain", "feller-condition"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 0);
    let text = stdout(&out);
    assert!(text.starts_with("feller-condition (warning by default)"));
    // The manual's own headings, in this order.
    let at = |heading: &str| text.find(heading).unwrap_or(usize::MAX);
    let order = [
        at("\n## Finds\n"),
        at("\n## Why a reviewer cares\n"),
        at("\n## How to mend\n"),
        at("\n## Example\n\nFlawed:\n"),
        at("\nMended:\n"),
    ];
    assert!(order.windows(2).all(|w| w[0] < w[1]), "{order:?}\n{text}");
    assert!(order[4] < usize::MAX);
    let out = sdeck().arg("explain").output().unwrap();
    assert!(stdout(&out)
        .lines()
        .any(|l| l.starts_with("unused-suppression")));
}

#[test]
fn docs_rules_md_is_generated_from_the_catalogue_and_not_stale() {
    let out = sdeck().args(["explain", "--markdown"]).output().unwrap();
    assert_eq!(status(&out), 0);
    let committed = std::fs::read_to_string(root().join("docs/rules.md")).unwrap_or_default();
    assert!(
        committed == stdout(&out),
        "docs/rules.md is stale: run `cargo run -p sdeck-cli -- explain --markdown > docs/rules.md`"
    );
    for rule in ["syntax", "feller-condition", "unused-suppression"] {
        assert!(committed.contains(&format!("\n## {rule}\n")), "{rule}");
    }
}

// ---------------------------------------------------------------- expectations

/// Runs SOUND_MODEL with one extra `expect` line; returns the exit status and the rules
/// that fired, with their lines.
fn with_expectation(line: &str) -> (i32, Vec<(String, u64)>) {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("rate.sde");
    write(&file, &format!("{SOUND_MODEL}{line}\n"));
    let out = sdeck()
        .arg("check")
        .arg(&file)
        .args(["--format", "json"])
        .output()
        .unwrap();
    let value = json_of(&out);
    let fired = value["diagnostics"]
        .as_array()
        .unwrap()
        .iter()
        .map(|d| {
            (
                d["rule"].as_str().unwrap().to_string(),
                d["range"]["start"]["line"].as_u64().unwrap(),
            )
        })
        .collect();
    (status(&out), fired)
}

/// Figures of SOUND_MODEL (κ = 0.9/year, θ = 3.1%, σ = 0.9%/√year, r0 = 2.2%) from the
/// Ornstein–Uhlenbeck closed forms (Uhlenbeck & Ornstein 1930, Phys. Rev. 36, 823;
/// Vasicek 1977, J. Financial Economics 5, 177), evaluated with Python's math module:
/// mean(1y) = θ + (r0 − θ)e^{−κ} = 0.0273409; variance(1y) = σ²(1 − e^{−2κ})/(2κ)
/// = 3.75616e-5; sd(0.5y) = 0.00516763; sd(1.5y) = 0.00647887; half-life ln 2/κ
/// = 0.770164 year = 9.24196 month; stationary mean θ = 0.031, variance σ²/(2κ) = 4.5e-5,
/// sd 0.00670820 = 67.08bp.
const EXPECTATIONS: &[(&str, bool)] = &[
    ("expect mean(r, 1 year) in [2.73%, 2.74%]", true),
    ("expect mean(r, 1 year) in [2.74%, 2.75%]", false),
    ("expect mean(r, 12 month) > 273bp", true),
    ("expect mean(r, 12 month) > 274bp", false),
    ("expect variance(r, 1 year) in [3.75e-5, 3.76e-5]", true),
    ("expect variance(r, 1 year) < 3.75e-5", false),
    ("expect sd(r) < 52bp", true),
    ("expect sd(r) < 51bp", false),
    ("expect sd(r, 18 month) <= 0.65%", true),
    ("expect sd(r, 18 [month]) <= 0.64%", false),
    ("expect halflife(r) < 10 month", true),
    ("expect halflife(r) < 9 month", false),
    ("expect halflife(r) in [0.77 year, 0.771 year]", true),
    ("expect halflife(r) >= 40 week", true),
    ("expect halflife(r) >= 41 week", false),
    ("expect stationary_mean(r) in [3.1%, 3.1%]", true),
    ("expect stationary_mean(r) > 3.1%", false),
    ("expect stationary_variance(r) <= 4.6e-5", true),
    ("expect stationary_variance(r) <= 4.4e-5", false),
    ("expect stationary_sd(r) <= 68bp", true),
    ("expect stationary_sd(r) <= 67bp", false),
    ("expect stationary_sd(r) in (67bp, 68bp)", true),
];

#[test]
fn expectations_pass_and_fail_as_written() {
    let expect_line = SOUND_MODEL.lines().count() as u64 + 1;
    for (line, holds) in EXPECTATIONS {
        let (code, fired) = with_expectation(line);
        if *holds {
            assert_eq!(
                (code, fired.clone()),
                (0, vec![]),
                "{line} should hold: {fired:?}"
            );
        } else {
            assert_eq!(code, 1, "{line} should fail");
            assert_eq!(
                fired,
                vec![("expectation-failed".to_string(), expect_line)],
                "{line}"
            );
        }
    }
}

#[test]
fn expectations_on_a_price_take_its_unit() {
    // Geometric Brownian motion: mean S0·e^{μt}, variance S0²e^{2μt}(e^{σ²t} − 1)
    // (Glasserman 2004, Monte Carlo Methods in Financial Engineering, §3.2), with
    // S0 = 84, μ = 6%, σ = 25%: mean(1y) = 89.1943, variance(1y) = 513.093 (Python math).
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("price.sde");
    let model = "\
# Wrenmoor Exchange: a share price in Wrenmoor crowns.
model wrenmoor_share
unit WRC
param mu    = 6%  [1/year]       > 0
param sigma = 25% [1/sqrt(year)] > 0
shock W
factor S = 84 [WRC] > 0
dS = mu * S dt + sigma * S dW
";
    for (line, holds) in [
        ("expect mean(S, 1 year) in [89 WRC, 89.4 WRC]", true),
        ("expect mean(S, 1 year) > 89.2", false),
        (
            "expect variance(S, 1 year) in [513 [WRC^2], 513.2 [WRC^2]]",
            true,
        ),
        ("expect variance(S, 1 year) < 513 [WRC^2]", false),
        ("expect sd(S, 1 year) in [22.6 WRC, 22.7 WRC]", true),
    ] {
        write(&file, &format!("{model}{line}\n"));
        let out = sdeck().arg("check").arg(&file).output().unwrap();
        assert_eq!(
            status(&out),
            if holds { 0 } else { 1 },
            "{line}: {}",
            stdout(&out)
        );
    }
}

#[test]
fn expectations_wait_while_the_model_has_errors() {
    let (code, fired) = with_expectation("expect mean(r, 1 year) > 5%\nparam kappa = 1");
    assert_eq!(code, 1);
    assert!(
        fired.iter().all(|(rule, _)| rule != "expectation-failed"),
        "{fired:?}"
    );
    assert!(
        fired.iter().any(|(rule, _)| rule == "duplicate-name"),
        "{fired:?}"
    );
}

#[test]
fn a_file_reached_twice_is_checked_once() {
    let out = sdeck()
        .args([
            "check",
            "demo-models/flawed/unused.sde",
            "demo-models/flawed",
            "./demo-models/flawed/unused.sde",
            "--format",
            "json",
        ])
        .output()
        .unwrap();
    let value = json_of(&out);
    let flawed = std::fs::read_dir(root().join("demo-models/flawed"))
        .unwrap()
        .filter(|e| {
            e.as_ref()
                .is_ok_and(|e| e.path().extension().is_some_and(|x| x == "sde"))
        })
        .count();
    assert_eq!(value["files"], flawed);
    let unused = value["diagnostics"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|d| d["rule"] == "unused")
        .count();
    assert_eq!(unused, 3);
}

#[test]
fn hidden_folders_are_skipped_in_a_folder_search() {
    let dir = tempfile::tempdir().unwrap();
    write(&dir.path().join("models/a.sde"), SOUND_MODEL);
    write(
        &dir.path().join("models/.snapshots/old.sde"),
        "model broken-name\n",
    );
    write(&dir.path().join("models/notes.txt"), "model broken-name\n");
    let out = sdeck()
        .arg("check")
        .arg(dir.path().join("models"))
        .args(["--format", "json"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 0, "{}", stdout(&out));
    assert_eq!(json_of(&out)["files"], 1);
    // Named explicitly, a hidden folder and a file of any extension are checked.
    let out = sdeck()
        .arg("check")
        .arg(dir.path().join("models/.snapshots"))
        .arg(dir.path().join("models/notes.txt"))
        .args(["--format", "json"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 1);
    assert_eq!(json_of(&out)["files"], 2);
}
