//! End-to-end tests of `sdeck diff`: exact old and new figures (the same as `sdeck
//! moments` of each file), a comment-only change, the `--max-change` gate, `--since`
//! against a git revision, and the JSON shape.

use serde_json::Value;
use std::path::Path;
mod common;
use common::{root as repo, run as sdeck};

fn sdeck_in(dir: &Path, args: &[&str]) -> (Option<i32>, String, String) {
    let out = common::run_in(dir, args);
    (out.code, out.stdout, out.stderr)
}

fn demo(name: &str) -> String {
    std::fs::read_to_string(repo().join("demo-models").join(name)).unwrap_or_else(|e| panic!("{e}"))
}

/// The demo short-rate model with a faster speed of mean reversion.
fn faster(dir: &Path) -> String {
    let text = demo("ou_short_rate.sde");
    assert!(text.contains("param kappa = 0.9  [1/year]"));
    let path = dir.join("faster.sde");
    std::fs::write(
        &path,
        text.replace("param kappa = 0.9 ", "param kappa = 1.35"),
    )
    .unwrap_or_else(|e| panic!("{e}"));
    path.to_string_lossy().into_owned()
}

fn figure<'a>(json: &'a Value, factor: &str, figure: &str) -> &'a Value {
    json["models"][0]["figures"]
        .as_array()
        .and_then(|a| {
            a.iter()
                .find(|f| f["factor"] == factor && f["figure"] == figure)
        })
        .unwrap_or(&Value::Null)
}

fn half_life_line(moments_text: &str) -> String {
    moments_text
        .lines()
        .find_map(|l| l.trim().strip_prefix("half-life = "))
        .and_then(|l| l.split(' ').next())
        .unwrap_or("missing")
        .to_string()
}

#[test]
fn a_changed_speed_reports_the_exact_old_and_new_figures() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let new = faster(dir.path());
    let old = "demo-models/ou_short_rate.sde";
    let (code, out, err) = sdeck(&["diff", old, &new, "--format", "json"]);
    assert_eq!(code, Some(0), "{err}");
    let json: Value = serde_json::from_str(&out).unwrap_or_else(|e| panic!("{e}: {out}"));
    let keys: Vec<&String> = json["models"][0]
        .as_object()
        .map(|o| o.keys().collect())
        .unwrap_or_default();
    assert_eq!(keys, ["path", "status", "params", "figures", "diagnostics"]);
    assert_eq!(json["models"][0]["status"], "changed");
    assert_eq!(
        json["models"][0]["params"],
        serde_json::json!([{"name": "kappa", "old": 0.9, "new": 1.35}])
    );
    let (_, old_moments, _) = sdeck(&["moments", old, "--format", "json"]);
    let (_, new_moments, _) = sdeck(&["moments", &new, "--format", "json"]);
    let old_moments: Value = serde_json::from_str(&old_moments).unwrap_or(Value::Null);
    let new_moments: Value = serde_json::from_str(&new_moments).unwrap_or(Value::Null);
    let mean = figure(&json, "r", "mean");
    assert_eq!(mean["old"], old_moments["factors"][0]["mean"]);
    assert_eq!(mean["new"], new_moments["factors"][0]["mean"]);
    let (old_m, new_m) = (
        mean["old"].as_f64().unwrap_or(f64::NAN),
        mean["new"].as_f64().unwrap_or(f64::NAN),
    );
    // serde_json's default reader may be one ulp off on long decimals: compare closely.
    let relative = mean["relative_change"].as_f64().unwrap_or(f64::NAN);
    assert!((relative - (new_m - old_m) / old_m.abs()).abs() < 1e-15);
    // Half-life: ln 2 / kappa (Vasicek 1977), and the same text `sdeck moments` prints.
    let half = figure(&json, "r", "half_life");
    let (old_h, new_h) = (
        half["old"].as_f64().unwrap_or(f64::NAN),
        half["new"].as_f64().unwrap_or(f64::NAN),
    );
    assert!((old_h - 2f64.ln() / 0.9).abs() < 1e-15);
    assert!((new_h - 2f64.ln() / 1.35).abs() < 1e-15);
    let (_, old_text, _) = sdeck(&["moments", old]);
    let (_, new_text, _) = sdeck(&["moments", &new]);
    let (_, diff_text, _) = sdeck(&["diff", old, &new]);
    let wanted = format!(
        "r half_life: {} → {}",
        half_life_line(&old_text),
        half_life_line(&new_text)
    );
    assert!(diff_text.contains(&wanted), "{wanted} not in\n{diff_text}");
    assert!(diff_text.contains("kappa: 0.9 [1/year]"), "{diff_text}");
    // A faster reversion shortens the half-life below the pinned [8, 10.5] months.
    assert!(diff_text
        .contains("expectation `expect halflife(r) in [8 month, 10.5 month]`: holds → fails"));
    let introduced = &json["models"][0]["diagnostics"]["introduced"];
    assert_eq!(introduced[0]["rule"], "expectation-failed");
}

#[test]
fn a_comment_or_layout_change_is_no_change_in_the_law() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let text = demo("cir_funding_rate.sde");
    let moved = text
        .replace(
            "param kappa = 1.6  [1/year]",
            "# a new note\nparam   kappa = 1.6 [1/year]",
        )
        .replace("# speed of mean reversion", "# how fast the rate returns");
    assert_ne!(moved, text);
    let path = dir.path().join("moved.sde");
    std::fs::write(&path, moved).unwrap_or_else(|e| panic!("{e}"));
    let new = path.to_string_lossy().into_owned();
    let old = "demo-models/cir_funding_rate.sde";
    let (code, out, _) = sdeck(&["diff", old, &new, "--max-change", "0"]);
    assert_eq!(code, Some(0));
    assert!(out.contains("no change in the derived law"), "{out}");
    let (_, json, _) = sdeck(&["diff", old, &new, "--format", "json"]);
    let json: Value = serde_json::from_str(&json).unwrap_or(Value::Null);
    assert_eq!(json["models"][0]["figures"], serde_json::json!([]));
    assert_eq!(json["models"][0]["params"], serde_json::json!([]));
    let (_, md, _) = sdeck(&["diff", old, &new, "--format", "markdown"]);
    assert!(md.contains("No change in the derived law."), "{md}");
}

#[test]
fn max_change_is_a_gate_on_the_largest_relative_move() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let new = faster(dir.path());
    let old = "demo-models/ou_short_rate.sde";
    // The half-life falls by a third: 33.3% exceeds 30 but not 34.
    let (code, _, err) = sdeck(&["diff", old, &new, "--max-change", "30"]);
    assert_eq!(code, Some(1));
    assert!(err.contains("r half_life"), "{err}");
    let (code, _, err) = sdeck(&["diff", old, &new, "--max-change", "34"]);
    assert_eq!(code, Some(0), "{err}");
    let (code, _, _) = sdeck(&["diff", old]);
    assert_eq!(code, Some(2));
}

fn git(dir: &Path, args: &[&str]) {
    let ok = std::process::Command::new("git")
        .current_dir(dir)
        .args(["-c", "user.name=t", "-c", "user.email=t@example.invalid"])
        .args(args)
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false);
    assert!(ok, "git {args:?}");
}

#[test]
fn since_compares_every_changed_model_with_the_revision() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let root = dir.path();
    git(root, &["init", "-q"]);
    std::fs::create_dir_all(root.join("models")).unwrap_or_else(|e| panic!("{e}"));
    let ou = demo("ou_short_rate.sde");
    std::fs::write(root.join("models/rate.sde"), &ou).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(root.join("models/gone.sde"), demo("gbm_share_price.sde"))
        .unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(root.join("models/notes.txt"), "not a model").unwrap_or_else(|e| panic!("{e}"));
    git(root, &["add", "."]);
    git(root, &["commit", "-q", "-m", "models"]);
    std::fs::write(
        root.join("models/rate.sde"),
        ou.replace("param kappa = 0.9 ", "param kappa = 1.35"),
    )
    .unwrap_or_else(|e| panic!("{e}"));
    std::fs::remove_file(root.join("models/gone.sde")).unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(root.join("models/new.sde"), demo("abm_credit_spread.sde"))
        .unwrap_or_else(|e| panic!("{e}"));
    std::fs::write(root.join("models/notes.txt"), "still not").unwrap_or_else(|e| panic!("{e}"));
    git(root, &["add", "models/new.sde"]);
    let (code, out, err) = sdeck_in(root, &["diff", "--since", "HEAD", "--format", "json"]);
    assert_eq!(code, Some(0), "{err}");
    let json: Value = serde_json::from_str(&out).unwrap_or_else(|e| panic!("{e}: {out}"));
    let statuses: Vec<(String, String)> = json["models"]
        .as_array()
        .map(|a| {
            a.iter()
                .map(|m| {
                    (
                        m["path"].as_str().unwrap_or("").to_string(),
                        m["status"].as_str().unwrap_or("").to_string(),
                    )
                })
                .collect()
        })
        .unwrap_or_default();
    assert_eq!(
        statuses,
        [
            ("models/gone.sde".to_string(), "removed".to_string()),
            ("models/new.sde".to_string(), "added".to_string()),
            ("models/rate.sde".to_string(), "changed".to_string()),
        ]
    );
    let rate = &json["models"][2];
    assert_eq!(rate["params"][0]["name"], "kappa");
    let (code, _, err) = sdeck_in(root, &["diff", "--since", "no-such-revision"]);
    assert_eq!(code, Some(2));
    assert!(err.contains("git"), "{err}");
}
