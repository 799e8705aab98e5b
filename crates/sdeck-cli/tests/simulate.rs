//! End-to-end tests of `sdeck simulate`: the closed-form cross-check on the demo models,
//! reproducibility across thread counts, and the fan chart.

use assert_cmd::Command;
use std::path::{Path, PathBuf};

fn repo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn sdeck() -> Command {
    let mut cmd = Command::cargo_bin("sdeck").unwrap_or_else(|e| panic!("no binary: {e}"));
    cmd.current_dir(repo());
    cmd
}

#[test]
fn every_demo_model_with_a_closed_form_passes_the_cross_check() {
    for name in [
        "ou_short_rate",
        "cir_funding_rate",
        "gbm_share_price",
        "abm_credit_spread",
        "two_factor_rates",
        "stochastic_variance_index",
    ] {
        let out = sdeck()
            .args([
                "simulate",
                &format!("demo-models/{name}.sde"),
                "--paths",
                "40000",
            ])
            .args(["--steps", "50", "--check", "--format", "json"])
            .output()
            .unwrap_or_else(|e| panic!("{e}"));
        assert!(
            out.status.success(),
            "{name}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let json: serde_json::Value =
            serde_json::from_slice(&out.stdout).unwrap_or(serde_json::Value::Null);
        let states = json["factors"].as_array().cloned().unwrap_or_default();
        assert!(!states.is_empty(), "{name}");
        for s in states {
            // Every state of these models has a closed form to compare with.
            assert!(s["closed_form"]["z_mean"].is_number(), "{name}: {s}");
        }
    }
}

#[test]
fn the_same_seed_gives_identical_json_on_one_and_two_threads() {
    let run = |threads: &str| {
        sdeck()
            .args([
                "simulate",
                "demo-models/cubic_power_spread.sde",
                "--paths",
                "5000",
            ])
            .args(["--seed", "42", "--threads", threads, "--format", "json"])
            .output()
            .map(|o| o.stdout)
            .unwrap_or_default()
    };
    let one = run("1");
    assert!(!one.is_empty());
    assert_eq!(one, run("2"));
}

#[test]
fn check_fails_and_names_the_figure_when_simulation_and_closed_form_disagree() {
    // dx = 20 (1 − x) dt + 0.1 x dW is linear with multiplicative noise: no exact sampler,
    // so Euler–Maruyama runs; with one step over a year from x0 = 2 its mean is
    // 2 + 20·(1 − 2) = −18, while the closed form is 1 + e^(−20). The cross-check must
    // catch that.
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let file = dir.path().join("stiff.sde");
    std::fs::write(
        &file,
        "param k = 20 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nshock W\nfactor x = 2\n\
         dx = k * (1 - x) dt + v * x dW\n",
    )
    .unwrap_or(());
    let bad = sdeck()
        .arg("simulate")
        .arg(&file)
        .args(["--paths", "2000", "--steps", "1", "--check"])
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(bad.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("mean of `x`"));
    // With fine steps the same model passes.
    let good = sdeck()
        .arg("simulate")
        .arg(&file)
        .args(["--paths", "20000", "--steps", "2000", "--check"])
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    assert!(
        good.status.success(),
        "{}",
        String::from_utf8_lossy(&good.stderr)
    );
}

#[test]
fn the_fan_chart_is_well_formed_svg() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let svg = dir.path().join("fan.svg");
    let status = sdeck()
        .args([
            "simulate",
            "demo-models/cir_funding_rate.sde",
            "--paths",
            "2000",
        ])
        .arg("--plot")
        .arg(&svg)
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false);
    assert!(status);
    let text = std::fs::read_to_string(&svg).unwrap_or_default();
    let doc = roxmltree::Document::parse(&text).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(doc.root_element().tag_name().name(), "svg");
}

#[test]
fn a_model_with_errors_is_not_simulated() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let file = dir.path().join("broken.sde");
    std::fs::write(&file, "shock W\nfactor x = 1\ndx = -k * x dt + 0.1 dW\n").unwrap_or(());
    let out = sdeck()
        .arg("simulate")
        .arg(&file)
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not declared"));
}
