//! End-to-end tests of the command-line details a user meets on the first day: times
//! before now, today as a date, the nearest rule name, formatting standard input and
//! showing a diff, the severity words, colour, annotation lines and SARIF fingerprints.

use assert_cmd::Command;
use serde_json::Value;
use std::path::Path;
mod common;
use common::{root, sdeck, status, stderr, stdout};

const OU: &str = "demo-models/ou_short_rate.sde";

#[test]
fn a_negative_time_is_refused_in_our_words() {
    for command in ["moments", "simulate"] {
        let out = sdeck().args([command, OU, "--at", "-1"]).output().unwrap();
        assert_eq!(status(&out), 2, "{command}: {}", stderr(&out));
        let said = stderr(&out);
        assert!(
            said.contains("--at `-1` is in the past"),
            "{command}: {said}"
        );
        assert!(!said.contains("-- -1"), "{command}: {said}");
    }
}

#[test]
fn simulate_at_zero_reports_the_start_as_moments_does() {
    let out = sdeck()
        .args([
            "simulate", OU, "--at", "0", "--paths", "64", "--format", "json", "--check",
        ])
        .output()
        .unwrap();
    assert_eq!(status(&out), 0, "{}", stderr(&out));
    let report: Value = serde_json::from_slice(&out.stdout).unwrap();
    let factor = &report["dates"][0]["factors"][0];
    assert_eq!(report["dates"][0]["at"], 0.0);
    // r starts at 2.2%; every path is there, as `moments --at 0` says.
    let mean = factor["mean"].as_f64().unwrap();
    assert!((mean - 0.022).abs() < 1e-15, "{mean}");
    assert!(factor["variance"].as_f64().unwrap().abs() < 1e-30);
    let moments = sdeck()
        .args(["moments", OU, "--at", "0", "--format", "json"])
        .output()
        .unwrap();
    assert_eq!(status(&moments), 0, "{}", stderr(&moments));
    let text = stdout(&moments);
    assert!(text.contains("0.022"), "{text}");
}

#[test]
fn explain_suggests_the_nearest_rule() {
    let out = sdeck()
        .args(["explain", "feller-conditon"])
        .output()
        .unwrap();
    assert_eq!(status(&out), 2);
    assert!(
        stderr(&out).contains("did you mean `feller-condition`?"),
        "{}",
        stderr(&out)
    );
    let out = sdeck().args(["explain", "volatility"]).output().unwrap();
    assert!(!stderr(&out).contains("did you mean"), "{}", stderr(&out));
}

const UNFORMATTED: &str = "shock W\nfactor x=1\ndx = -0.5*x dt\n   + 0.2 dW\n";
// The equation keeps its break between terms, its continuation under its first term.
const FORMATTED: &str = "shock W\nfactor x = 1\ndx = -0.5 * x dt\n     + 0.2 dW\n";

#[test]
fn fmt_dash_formats_standard_input_to_standard_output() {
    let out = sdeck()
        .args(["fmt", "-"])
        .write_stdin(UNFORMATTED)
        .output()
        .unwrap();
    assert_eq!(status(&out), 0, "{}", stderr(&out));
    assert_eq!(stdout(&out), FORMATTED);
    // A text with a syntax error comes back unchanged, the reason on stderr.
    let broken = "dx = (1 +\n";
    let out = sdeck()
        .args(["fmt", "-"])
        .write_stdin(broken)
        .output()
        .unwrap();
    assert_eq!(status(&out), 2);
    assert_eq!(stdout(&out), broken);
    assert!(stderr(&out).contains("syntax error"), "{}", stderr(&out));
    // --check on standard input prints nothing to format and exits 1.
    let out = sdeck()
        .args(["fmt", "--check", "-"])
        .write_stdin(UNFORMATTED)
        .output()
        .unwrap();
    assert_eq!(status(&out), 1);
    assert_eq!(stdout(&out), "<stdin>: not formatted\n");
}

#[test]
fn fmt_diff_shows_the_change_and_changes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("m.sde");
    std::fs::write(&file, UNFORMATTED).unwrap();
    let out = sdeck()
        .arg("fmt")
        .arg("--diff")
        .arg(&file)
        .output()
        .unwrap();
    assert_eq!(status(&out), 1, "{}", stderr(&out));
    let diff = stdout(&out);
    assert!(
        diff.contains("-factor x=1\n-dx = -0.5*x dt\n-   + 0.2 dW\n"),
        "{diff}"
    );
    assert!(diff.contains("+factor x = 1\n"), "{diff}");
    assert!(
        diff.contains("+dx = -0.5 * x dt\n+     + 0.2 dW\n"),
        "{diff}"
    );
    assert!(diff.contains("@@ -1,4 +1,4 @@"), "{diff}");
    assert_eq!(std::fs::read_to_string(&file).unwrap(), UNFORMATTED);
    std::fs::write(&file, FORMATTED).unwrap();
    let out = sdeck()
        .arg("fmt")
        .arg("--diff")
        .arg(&file)
        .output()
        .unwrap();
    assert_eq!(status(&out), 0);
    assert_eq!(stdout(&out), "");
}

#[test]
fn each_level_is_shown_and_counted_under_its_own_word() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("sdeck.toml"),
        "[rules]\nunused = \"info\"\n",
    )
    .unwrap();
    let file = dir.path().join("m.sde");
    std::fs::copy(root().join("demo-models/flawed/unit-scale.sde"), &file).unwrap();
    let mut text = std::fs::read_to_string(&file).unwrap();
    text.push_str("param spare = 1\n");
    std::fs::write(&file, text).unwrap();
    let out = sdeck().arg("check").arg(&file).output().unwrap();
    let shown = stdout(&out);
    assert!(shown.contains("hint[unit-scale]"), "{shown}");
    assert!(shown.contains("info[unused]"), "{shown}");
    assert!(
        !shown.contains("help[") && !shown.contains("note["),
        "{shown}"
    );
    assert!(
        shown.contains("1 file checked: 0 errors, 0 warnings, 1 info, 2 hints"),
        "{shown}"
    );
}

#[test]
fn color_is_chosen_by_the_option() {
    let run = |choice: &str| {
        let out = sdeck()
            .args(["check", "--color", choice, "demo-models/flawed/unused.sde"])
            .output()
            .unwrap();
        stdout(&out)
    };
    assert!(run("always").contains("\u{1b}["));
    assert!(!run("never").contains("\u{1b}["));
    // Not a terminal: auto means none.
    assert!(!run("auto").contains("\u{1b}["));
}

#[test]
fn annotation_lines_carry_the_message_without_the_help() {
    let out = sdeck()
        .args([
            "check",
            "--format",
            "github",
            "demo-models/flawed/unused.sde",
        ])
        .output()
        .unwrap();
    let lines = stdout(&out);
    let line = lines.lines().next().unwrap();
    assert!(
        line.ends_with("::parameter `level_prev` is never used"),
        "{line}"
    );
    assert!(!line.contains("help"), "{line}");
}

#[test]
fn sarif_fingerprints_follow_a_finding_when_lines_move() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(root().join("demo-models/flawed/unused.sde")).unwrap();
    std::fs::write(dir.path().join("m.sde"), &text).unwrap();
    let sarif = |dir: &Path| -> Value {
        let out = Command::cargo_bin("sdeck")
            .unwrap()
            .current_dir(dir)
            .args(["check", "--format", "sarif", "m.sde"])
            .output()
            .unwrap();
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let before = sarif(dir.path());
    std::fs::write(
        dir.path().join("m.sde"),
        format!("# a new first line\n\n{text}"),
    )
    .unwrap();
    let after = sarif(dir.path());
    let result = |log: &Value| log["runs"][0]["results"][0].clone();
    assert_eq!(
        result(&after)["locations"][0]["physicalLocation"]["region"]["startLine"]
            .as_u64()
            .unwrap(),
        result(&before)["locations"][0]["physicalLocation"]["region"]["startLine"]
            .as_u64()
            .unwrap()
            + 2
    );
    let print = &result(&before)["partialFingerprints"]["findingHash/v1"];
    assert!(print.is_string(), "{}", result(&before));
    assert_eq!(
        print,
        &result(&after)["partialFingerprints"]["findingHash/v1"]
    );
    // Relative paths are resolved against the folder of the run.
    let artifact = &result(&before)["locations"][0]["physicalLocation"]["artifactLocation"];
    assert_eq!(artifact["uri"], "m.sde");
    assert_eq!(artifact["uriBaseId"], "SRCROOT");
    let base = before["runs"][0]["originalUriBaseIds"]["SRCROOT"]["uri"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(
        base.starts_with("file:///") && base.ends_with('/'),
        "{base}"
    );
}
