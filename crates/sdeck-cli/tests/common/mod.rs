//! Helpers shared by the end-to-end tests of the `sdeck` binary: where the repository is,
//! running the binary, and reading what it printed.

// Each test binary includes this module and uses only some of it.
#![allow(dead_code)]

use assert_cmd::Command;
use std::path::{Path, PathBuf};

/// The repository root (two folders above this crate).
pub fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .ancestors()
        .nth(2)
        .map(Path::to_path_buf)
        .unwrap_or_default()
}

/// `sdeck` run from the repository root.
pub fn sdeck() -> Command {
    let mut command = Command::cargo_bin("sdeck").unwrap_or_else(|e| panic!("no binary: {e}"));
    command.current_dir(root());
    command
}

/// What one run printed and its exit status (`None` when ended by a signal).
pub struct Run {
    pub code: Option<i32>,
    pub stdout: String,
    pub stderr: String,
}

/// Runs `sdeck ARGS` in `dir`.
pub fn run_in(dir: &Path, args: &[&str]) -> Run {
    let out = Command::cargo_bin("sdeck")
        .unwrap_or_else(|e| panic!("no binary: {e}"))
        .current_dir(dir)
        .args(args)
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    Run {
        code: out.status.code(),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Runs `sdeck ARGS` from the repository root: (status, stdout, stderr).
pub fn run(args: &[&str]) -> (Option<i32>, String, String) {
    let out = run_in(&root(), args);
    (out.code, out.stdout, out.stderr)
}

/// The exit status, -1 when the process was ended by a signal.
pub fn status(output: &std::process::Output) -> i32 {
    output.status.code().unwrap_or(-1)
}

pub fn stdout(output: &std::process::Output) -> String {
    String::from_utf8_lossy(&output.stdout).into_owned()
}

pub fn stderr(output: &std::process::Output) -> String {
    String::from_utf8_lossy(&output.stderr).into_owned()
}

/// Writes a file, creating its folders.
pub fn write(path: &Path, text: &str) {
    if let Some(parent) = path.parent() {
        std::fs::create_dir_all(parent).unwrap_or_else(|e| panic!("{e}"));
    }
    std::fs::write(path, text).unwrap_or_else(|e| panic!("{e}"));
}
