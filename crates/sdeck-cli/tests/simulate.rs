//! End-to-end tests of `sdeck simulate`: the closed-form cross-check on the demo models,
//! reproducibility across thread counts, and the fan chart.

mod common;
use common::sdeck;

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
        let states = json["dates"][0]["factors"]
            .as_array()
            .cloned()
            .unwrap_or_default();
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
fn check_says_it_cannot_decide_when_the_bias_is_large_and_passes_with_fine_steps() {
    // dx = 20 (1 − x) dt + 0.1 x dW is linear with multiplicative noise: no exact sampler,
    // so Euler–Maruyama runs; with two steps over a year from x0 = 2 its mean is far from
    // the closed form 1 + e^(−20). Step doubling sees a bias far above the standard error,
    // so the run cannot decide: it says so, names the steps to use, and does not fail.
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let file = dir.path().join("stiff.sde");
    std::fs::write(
        &file,
        "param k = 20 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nshock W\nfactor x = 2\n\
         dx = k * (1 - x) dt + v * x dW\n",
    )
    .unwrap_or(());
    let coarse = sdeck()
        .arg("simulate")
        .arg(&file)
        .args(["--paths", "2000", "--steps", "2", "--check"])
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    let stderr = String::from_utf8_lossy(&coarse.stderr);
    assert_eq!(coarse.status.code(), Some(0), "{stderr}");
    assert!(stderr.contains("mean of `x`"), "{stderr}");
    assert!(stderr.contains("cannot decide"), "{stderr}");
    assert!(stderr.contains("--steps"), "{stderr}");
    // With fine steps the same model passes with no figure left undecided.
    let good = sdeck()
        .arg("simulate")
        .arg(&file)
        .args(["--paths", "20000", "--steps", "2000", "--check"])
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    let stderr = String::from_utf8_lossy(&good.stderr);
    assert!(good.status.success(), "{stderr}");
    assert!(stderr.contains("no disagreement"), "{stderr}");
}

#[test]
fn several_dates_and_probabilities_below_in_one_run() {
    let out = sdeck()
        .args([
            "simulate",
            "demo-models/ou_short_rate.sde",
            "--paths",
            "20000",
        ])
        .args([
            "--at",
            "3 month,6 month,1 year",
            "--below",
            "r=0",
            "--check",
        ])
        .args(["--format", "json"])
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let json: serde_json::Value =
        serde_json::from_slice(&out.stdout).unwrap_or(serde_json::Value::Null);
    let dates = json["dates"].as_array().cloned().unwrap_or_default();
    let at: Vec<f64> = dates.iter().filter_map(|d| d["at"].as_f64()).collect();
    assert_eq!(at, [0.25, 0.5, 1.0]);
    for date in &dates {
        let below = &date["factors"][0]["below"];
        assert_eq!(below["threshold"], 0.0);
        assert!(below["se"].is_number(), "{below}");
        assert!(date["factors"][0]["closed_form"]["below"].is_number());
    }
}

#[test]
fn degenerate_sizes_are_refused_or_reported_without_nan() {
    for args in [["--paths", "0"], ["--steps", "0"]] {
        let out = sdeck()
            .args(["simulate", "demo-models/ou_short_rate.sde"])
            .args(args)
            .output()
            .unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(out.status.code(), Some(2));
        assert!(String::from_utf8_lossy(&out.stderr).contains("at least 1"));
    }
    // Two billion paths of one step: few path steps, but more memory than the machine has.
    let out = sdeck()
        .args(["simulate", "demo-models/ou_short_rate.sde", "--steps", "1"])
        .args(["--paths", "2000000000"])
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("use at most"));
    let one = sdeck()
        .args(["simulate", "demo-models/ou_short_rate.sde", "--paths", "1"])
        .args(["--check", "--format", "json"])
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    assert!(one.status.success());
    let text = String::from_utf8_lossy(&one.stdout);
    assert!(!text.contains("NaN") && !text.contains("inf"), "{text}");
    let json: serde_json::Value = serde_json::from_slice(&one.stdout).unwrap_or_default();
    assert!(json["dates"][0]["factors"][0]["mean_se"].is_null());
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
