//! End-to-end reproducers of hostile input: each test is the smallest input that once
//! corrupted text, hung, flooded the terminal or checked nothing without saying so.

use std::path::Path;
mod common;
use common::{sdeck, status, stderr, stdout, write};

// ------------------------------------------------------------------ line breaks

#[test]
fn fmt_keeps_crlf_and_calls_a_formatted_crlf_file_formatted() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("crlf.sde");
    let formatted = "param k = 2  # speed\r\nparam v = 1\r\n";
    write(&file, formatted);
    let out = sdeck()
        .arg("fmt")
        .arg("--check")
        .arg(&file)
        .output()
        .unwrap();
    assert_eq!(status(&out), 0, "{}{}", stdout(&out), stderr(&out));

    write(&file, "param  k=2 # speed\r\nparam v=1\r\n");
    let out = sdeck().arg("fmt").arg(&file).output().unwrap();
    assert_eq!(status(&out), 0, "{}", stderr(&out));
    assert_eq!(std::fs::read_to_string(&file).unwrap(), formatted);
}

fn demo(name: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../demo-models")
        .join(name)
}

// ------------------------------------------------------------- unbounded work

#[test]
fn a_path_step_count_past_the_limit_is_refused_before_starting() {
    // Once ran for hours.
    let out = sdeck()
        .args(["simulate", "--steps", "1000000000000"])
        .arg(demo("cir_funding_rate.sde"))
        .timeout(std::time::Duration::from_secs(60))
        .output()
        .unwrap();
    assert_eq!(status(&out), 2, "{}", stderr(&out));
    assert!(
        stderr(&out).contains("10000000000 path steps"),
        "{}",
        stderr(&out)
    );
    assert!(stdout(&out).is_empty());
}

#[test]
fn a_file_past_the_size_limit_is_refused_with_one_error() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("huge.sde");
    let mut text = String::from("param a = 1\n");
    while text.len() <= 4 << 20 {
        text.push_str("# a long comment line that repeats until the file is too large\n");
    }
    write(&file, &text);
    let out = sdeck().arg("check").arg(&file).output().unwrap();
    assert_eq!(status(&out), 1, "{}", stderr(&out));
    let shown = stdout(&out);
    assert!(shown.contains("4 MiB"), "{shown}");
    assert!(shown.contains("1 error"), "{shown}");
}

// ------------------------------------------------------------- human output

#[test]
fn control_characters_of_the_file_are_printed_escaped() {
    // An ESC sequence in a comment once reached the terminal raw, even with NO_COLOR.
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("esc.sde");
    write(&file, "param a = 1 # \u{1b}[31mred\u{1b}[0m\u{7}\n");
    let out = sdeck()
        .arg("check")
        .arg(&file)
        .env("NO_COLOR", "1")
        .output()
        .unwrap();
    let shown = stdout(&out);
    assert!(
        !shown.contains('\u{1b}') && !shown.contains('\u{7}'),
        "{shown:?}"
    );
    assert!(shown.contains("\\u{1b}[31mred\\u{1b}[0m\\u{7}"), "{shown}");
    // The caret still points at `a` (column 7), past nothing that moved.
    assert!(shown.contains(":1:7"), "{shown}");
}

#[test]
fn findings_on_one_line_are_capped_and_the_rest_counted() {
    // 400 unknown names on one line: each snippet reprinted the whole line.
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("crowded.sde");
    let line = format!("let x = {}\n", vec!["zz"; 400].join(" + "));
    write(&file, &line);
    let out = sdeck().arg("check").arg(&file).output().unwrap();
    let shown = stdout(&out);
    assert!(shown.len() < 20 * line.len(), "{} bytes", shown.len());
    // 400 unknown names and the unused `x`, three shown.
    assert!(shown.contains("398 more findings on this line"), "{shown}");
    assert!(shown.contains("400 errors"), "{shown}");
    // JSON keeps every finding.
    let out = sdeck()
        .args(["check", "--format", "json"])
        .arg(&file)
        .output()
        .unwrap();
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(report["diagnostics"].as_array().map(Vec::len), Some(401));
}

#[test]
fn a_finding_on_a_very_long_line_shows_an_excerpt_not_the_line() {
    // One finding on a 20,000-character line printed the whole line.
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("wide.sde");
    let padding = "+ 1 ".repeat(40);
    let line = format!("let x = 1 {padding}+ zz  # {}\n", "a".repeat(20_000));
    write(&file, &line);
    let out = sdeck().arg("check").arg(&file).output().unwrap();
    let shown = stdout(&out);
    assert!(shown.len() < 2_000, "{} bytes:\n{shown}", shown.len());
    assert!(shown.contains("zz"), "{shown}");
    // Where it is, the line's length, the finding in its context and carets under it.
    let column = line.find("zz").unwrap() + 1;
    assert!(shown.contains(&format!("wide.sde:1:{column}")), "{shown}");
    let length = line.chars().count() - 1;
    assert!(
        shown.contains(&format!("the line has {length} characters")),
        "{shown}"
    );
    assert!(
        shown.contains("…1 + 1 + 1 + 1 + 1 + 1 + 1 + 1 + 1 + 1 + zz  # aaaa"),
        "{shown}"
    );
    let excerpt = shown.lines().find(|l| l.contains("+ zz  #")).unwrap();
    let carets = shown.lines().find(|l| l.trim() == "^^").unwrap();
    let column_of = |line: &str, at: usize| line[..at].chars().count();
    assert_eq!(
        column_of(carets, carets.find('^').unwrap()),
        column_of(excerpt, excerpt.find("zz").unwrap()),
        "{shown}"
    );
}

#[test]
fn an_empty_model_is_a_finding_not_a_silent_pass() {
    // An empty file, comments alone, or parameters without a factor once passed clean.
    let dir = tempfile::tempdir().unwrap();
    for (name, text, said) in [
        ("empty.sde", "", "the file holds no statement"),
        (
            "comments.sde",
            "# nothing yet\n",
            "the file holds no statement",
        ),
        (
            "params.sde",
            "model m\nparam a = 1\n",
            "the model declares no factor",
        ),
    ] {
        let file = dir.path().join(name);
        write(&file, text);
        let out = sdeck()
            .args(["check", "--format", "json"])
            .arg(&file)
            .output()
            .unwrap();
        let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        let found = &report["diagnostics"];
        assert_eq!(found[0]["rule"], "no-factor", "{name}: {found}");
        assert_eq!(found[0]["severity"], "warning", "{name}");
        assert!(
            found[0]["message"].as_str().unwrap().contains(said),
            "{name}: {found}"
        );
        assert_eq!(found[0]["range"]["start"]["line"], 1, "{name}");
    }
}

// ------------------------------------------------------------- simulate --check

const NO_VOLATILITY: &str = "clock year\nhorizon 1 year\nparam k = 1.3 [1/year]\n\
param v = 0 [1/sqrt(year)]\nshock W\nfactor x = 2\ndx = -k * x dt + v dW\n";

#[test]
fn simulate_check_agrees_with_a_closed_form_without_volatility() {
    // Rounding alone once gave z = 22.6 or z = inf.
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("still.sde");
    write(&file, NO_VOLATILITY);
    for paths in ["1000", "2"] {
        let out = sdeck()
            .args(["simulate", "--check", "--paths", paths])
            .arg(&file)
            .output()
            .unwrap();
        assert_eq!(status(&out), 0, "{paths} paths: {}", stderr(&out));
    }
}

#[test]
fn one_path_has_no_standard_errors() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("still.sde");
    write(&file, NO_VOLATILITY);
    let out = sdeck()
        .args(["simulate", "--paths", "1", "--format", "json"])
        .arg(&file)
        .output()
        .unwrap();
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let factor = &report["dates"][0]["factors"][0];
    assert!(factor["variance"].is_null(), "{factor}");
    assert!(factor["variance_se"].is_null(), "{factor}");
    assert!(factor["mean_se"].is_null(), "{factor}");
}

// ------------------------------------------------------------- runs that check nothing

#[test]
fn an_empty_folder_is_exit_2_unless_allowed_and_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let out = sdeck().arg("check").arg(dir.path()).output().unwrap();
    assert_eq!(status(&out), 2, "{}", stdout(&out));
    assert!(
        stderr(&out).contains("no model files found under"),
        "{}",
        stderr(&out)
    );
    let out = sdeck()
        .args(["check", "--allow-empty"])
        .arg(dir.path())
        .output()
        .unwrap();
    assert_eq!(status(&out), 0, "{}", stderr(&out));
    assert!(stderr(&out).contains("no model files found under"));
}

#[cfg(unix)]
#[test]
fn a_folder_with_only_a_dangling_link_checks_nothing_and_says_so() {
    let dir = tempfile::tempdir().unwrap();
    std::os::unix::fs::symlink(dir.path().join("gone.sde"), dir.path().join("link.sde")).unwrap();
    let out = sdeck().arg("check").arg(dir.path()).output().unwrap();
    assert_eq!(status(&out), 2, "{}", stdout(&out));
    assert!(
        stderr(&out).contains("no model files found under"),
        "{}",
        stderr(&out)
    );
}

#[test]
fn a_named_file_the_project_excludes_is_said_on_stderr() {
    let dir = tempfile::tempdir().unwrap();
    write(
        &dir.path().join("sdeck.toml"),
        "[files]\nexclude = [\"skip.sde\"]\n",
    );
    write(&dir.path().join("skip.sde"), "param a = 1\n");
    let out = sdeck()
        .arg("check")
        .arg(dir.path().join("skip.sde"))
        .output()
        .unwrap();
    assert_eq!(status(&out), 0, "{}", stderr(&out));
    assert!(stderr(&out).contains("excludes"), "{}", stderr(&out));
}

#[test]
fn output_dash_is_stdout_and_one_path_twice_is_a_usage_error() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("m.sde");
    write(&file, "param a = 1 [1/year] >= inf\n");
    let out = sdeck()
        .current_dir(dir.path())
        .args(["check", "--output", "json=-"])
        .arg(&file)
        .output()
        .unwrap();
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(report["files"], 1);
    assert!(!dir.path().join("-").exists());
    let out = sdeck()
        .current_dir(dir.path())
        .args([
            "check",
            "--output",
            "json=r.json",
            "--output",
            "sarif=./r.json",
        ])
        .arg(&file)
        .output()
        .unwrap();
    assert_eq!(status(&out), 2);
    assert!(stderr(&out).contains("two reports"), "{}", stderr(&out));
    assert!(!dir.path().join("r.json").exists());
}

// ------------------------------------------------------------------ memory

/// The allocator returns freed memory at once and commits its arenas as they are used
/// (src/allocator.rs), read back by name from mimalloc's own verbose start-up report:
/// this proves the option numbers name the intended options and that they are set
/// before the first arena; the environment still overrides them.
#[cfg(feature = "fast-alloc")]
#[test]
fn allocator_returns_freed_memory_promptly() {
    let option = |text: &str, name: &str| -> Option<String> {
        let key = format!("option '{name}': ");
        let line = text.lines().find(|l| l.starts_with(&key))?;
        Some(line[key.len()..].trim().to_string())
    };
    let out = sdeck()
        .arg("--version")
        .env("MIMALLOC_VERBOSE", "1")
        .env_remove("MIMALLOC_PURGE_DELAY")
        .env_remove("MIMALLOC_ARENA_EAGER_COMMIT")
        .output()
        .unwrap();
    let report = stderr(&out);
    assert_eq!(
        option(&report, "purge_delay").as_deref(),
        Some("0"),
        "{report}"
    );
    assert_eq!(
        option(&report, "arena_eager_commit").as_deref(),
        Some("0"),
        "{report}"
    );

    let out = sdeck()
        .arg("--version")
        .env("MIMALLOC_VERBOSE", "1")
        .env("MIMALLOC_PURGE_DELAY", "25")
        .output()
        .unwrap();
    let report = stderr(&out);
    assert_eq!(
        option(&report, "purge_delay").as_deref(),
        Some("25"),
        "{report}"
    );
}
