//! End-to-end reproducers of hostile input: each test is the smallest input that once
//! corrupted text, hung, flooded the terminal or checked nothing without saying so.

use assert_cmd::Command;
use std::path::Path;

fn sdeck() -> Command {
    Command::cargo_bin("sdeck").unwrap()
}

fn status(output: &std::process::Output) -> i32 {
    output.status.code().unwrap_or(-1)
}

fn stdout(output: &std::process::Output) -> String {
    String::from_utf8_lossy(&output.stdout).into_owned()
}

fn stderr(output: &std::process::Output) -> String {
    String::from_utf8_lossy(&output.stderr).into_owned()
}

fn write(path: &Path, text: &str) {
    std::fs::write(path, text).unwrap();
}

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
