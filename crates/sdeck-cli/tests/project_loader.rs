//! Every command loads files and the project the same way: a broken `sdeck.toml` is
//! exit status 2 with the same message for each, and `sdeck fmt` finds files with the
//! discovery and the exclusions of `sdeck check`.

mod common;
use common::{run_in, write};
use std::path::Path;

/// A sound Ornstein–Uhlenbeck model with a discount rate.
const MODEL: &str = "\
model harbour_rate
clock year
horizon 1 year
measure risk-neutral
param kappa = 1.2 [1/year] > 0
param theta = 3%
param sigma = 1% [1/sqrt(year)] > 0
factor r = 2%
shock W
dr = kappa * (theta - r) dt + sigma dW
discount r
";

/// A model the formatter would change.
const UNFORMATTED: &str = "shock W\nfactor x=1\ndx = -0.5*x dt + 0.2 dW\n";

/// A folder holding `model.sde`, `data.csv` and a project file that is not TOML.
fn broken_project() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    write(&dir.path().join("model.sde"), MODEL);
    write(&dir.path().join("other.sde"), MODEL);
    write(
        &dir.path().join("data.csv"),
        "t,r\n0,0.02\n1,0.021\n2,0.022\n",
    );
    write(
        &dir.path().join("sdeck.toml"),
        "[rules\nunit-scale = \"off\"\n",
    );
    dir
}

/// The line of stderr that names the broken project file.
fn broken_line(stderr: &str) -> Option<&str> {
    stderr.lines().find(|l| l.contains("broken project file"))
}

#[test]
fn a_broken_project_file_is_exit_2_with_the_same_message_for_every_command() {
    let dir = broken_project();
    let commands: [&[&str]; 9] = [
        &["check", "model.sde"],
        &["check", "."],
        &["moments", "model.sde"],
        &["simulate", "model.sde", "--paths", "64"],
        &["curve", "model.sde"],
        &["fit", "model.sde", "data.csv"],
        &["report", "model.sde"],
        &["diff", "model.sde", "other.sde"],
        &["fmt", "model.sde"],
    ];
    let mut messages = Vec::new();
    for args in commands {
        let out = run_in(dir.path(), args);
        assert_eq!(out.code, Some(2), "sdeck {args:?}: {}", out.stderr);
        let Some(line) = broken_line(&out.stderr) else {
            panic!(
                "sdeck {args:?} does not name the broken project file: {}",
                out.stderr
            );
        };
        assert!(line.starts_with("sdeck: "), "{line}");
        messages.push(line.to_string());
    }
    assert!(
        messages.iter().all(|m| *m == messages[0]),
        "the message differs between commands: {messages:#?}"
    );
    // Nothing was formatted under a broken project.
    let kept = std::fs::read_to_string(dir.path().join("model.sde")).unwrap_or_default();
    assert_eq!(kept, MODEL);
}

#[test]
fn a_sound_project_file_lets_every_command_run() {
    let dir = broken_project();
    write(
        &dir.path().join("sdeck.toml"),
        "[rules]\nunit-scale = \"off\"\n",
    );
    for args in [
        &["check", "model.sde"][..],
        &["moments", "model.sde"],
        &["curve", "model.sde"],
        &["diff", "model.sde", "other.sde"],
        &["fmt", "model.sde"],
    ] {
        let out = run_in(dir.path(), args);
        assert_eq!(out.code, Some(0), "sdeck {args:?}: {}", out.stderr);
        assert!(broken_line(&out.stderr).is_none(), "{}", out.stderr);
    }
}

#[test]
fn fmt_honours_the_exclusions_and_skips_hidden_folders_as_check_does() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let root = dir.path();
    write(
        &root.join("sdeck.toml"),
        "[files]\nexclude = [\"vendor/**\", \"skip.sde\"]\n",
    );
    for name in [
        "kept.sde",
        "skip.sde",
        "vendor/theirs.sde",
        ".cache/hidden.sde",
    ] {
        write(&root.join(name), UNFORMATTED);
    }
    let check = run_in(root, &["check", "--format", "json", "."]);
    let fmt = run_in(root, &["fmt", "."]);
    assert_eq!(fmt.code, Some(0), "{}", fmt.stderr);
    assert_eq!(
        fmt.stdout.trim(),
        format!("{}: formatted", Path::new(".").join("kept.sde").display())
    );
    let read = |name: &str| std::fs::read_to_string(root.join(name)).unwrap_or_default();
    assert_ne!(read("kept.sde"), UNFORMATTED);
    for name in ["skip.sde", "vendor/theirs.sde", ".cache/hidden.sde"] {
        assert_eq!(read(name), UNFORMATTED, "{name} was formatted");
        assert!(
            !check
                .stdout
                .contains(name.rsplit('/').next().unwrap_or(name)),
            "check read {name}"
        );
    }
    assert!(check.stdout.contains("kept.sde"), "{}", check.stdout);
}

#[test]
fn a_named_file_the_project_excludes_is_left_alone_and_said_by_fmt_as_by_check() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    write(
        &dir.path().join("sdeck.toml"),
        "[files]\nexclude = [\"skip.sde\"]\n",
    );
    write(&dir.path().join("skip.sde"), UNFORMATTED);
    let check = run_in(dir.path(), &["check", "skip.sde"]);
    let fmt = run_in(dir.path(), &["fmt", "skip.sde"]);
    assert_eq!(
        (check.code, fmt.code),
        (Some(0), Some(0)),
        "{}{}",
        check.stderr,
        fmt.stderr
    );
    assert!(
        check.stderr.contains("excludes `skip.sde`"),
        "{}",
        check.stderr
    );
    assert!(fmt.stderr.contains("excludes `skip.sde`"), "{}", fmt.stderr);
    let kept = std::fs::read_to_string(dir.path().join("skip.sde")).unwrap_or_default();
    assert_eq!(kept, UNFORMATTED);
}
