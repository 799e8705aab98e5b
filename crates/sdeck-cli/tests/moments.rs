//! End-to-end tests of `sdeck moments`: the exact JSON shape, figures against published
//! closed forms, the `--at` option, and refusals.

use assert_cmd::Command;
use serde_json::Value;
mod common;
use common::root as repo;

fn moments_text(args: &[&str]) -> (Option<i32>, String, String) {
    let mut with_command = vec!["moments"];
    with_command.extend_from_slice(args);
    common::run(&with_command)
}

fn moments(args: &[&str]) -> (Option<i32>, Value, String) {
    let (code, stdout, stderr) = moments_text(args);
    (
        code,
        serde_json::from_str(&stdout).unwrap_or(Value::Null),
        stderr,
    )
}

fn write_model(dir: &tempfile::TempDir, name: &str, text: &str) -> String {
    let path = dir.path().join(name);
    std::fs::write(&path, text).unwrap_or_else(|e| panic!("{e}"));
    path.to_string_lossy().into_owned()
}

#[test]
fn json_has_exactly_the_documented_shape() {
    let (code, json, _) = moments(&["demo-models/two_factor_rates.sde", "--format", "json"]);
    assert_eq!(code, Some(0));
    let keys: Vec<&String> = json
        .as_object()
        .map(|o| o.keys().collect())
        .unwrap_or_default();
    assert_eq!(keys, ["model", "clock", "at", "factors", "covariance"]);
    let states = json["factors"].as_array().cloned().unwrap_or_default();
    assert_eq!(states.len(), 2);
    for s in &states {
        let keys: Vec<&String> = s
            .as_object()
            .map(|o| o.keys().collect())
            .unwrap_or_default();
        assert_eq!(
            keys,
            [
                "name",
                "family",
                "mean",
                "variance",
                "variance_infinite_from",
                "sd",
                "law",
                "quantiles",
                "below",
                "halflife",
                "stationary",
                "exact",
                "outside_domain",
                "formulas"
            ]
        );
        let f: Vec<&String> = s["formulas"]
            .as_object()
            .map(|o| o.keys().collect())
            .unwrap_or_default();
        assert_eq!(f, ["solution", "mean", "variance"]);
    }
    let cov = json["covariance"].as_array().cloned().unwrap_or_default();
    assert_eq!(cov.len(), 2);
    assert_eq!(cov[0][1], cov[1][0]);
    assert_eq!(cov[0][0], states[0]["variance"]);
}

#[test]
fn an_ornstein_uhlenbeck_state_matches_vasicek() {
    // Vasicek 1977, J. Financial Economics 5: E[r_t] = θ + (r0 − θ)e^(−κt),
    // Var[r_t] = σ²(1 − e^(−2κt))/(2κ).
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let file = write_model(
        &dir,
        "vasicek.sde",
        "param kappa = 0.9 [1/year]\nparam theta = 3.1%\nparam sigma = 0.9% [1/sqrt(year)]\n\
         shock W\nfactor r = 2.2%\ndr = kappa * (theta - r) dt + sigma dW\n",
    );
    let (code, json, _) = moments(&[&file, "--at", "18 month", "--format", "json"]);
    assert_eq!(code, Some(0));
    let (kappa, theta, sigma, r0, t) = (0.9f64, 0.031, 0.009, 0.022, 1.5);
    let mean = theta + (r0 - theta) * (-kappa * t).exp();
    let var = sigma * sigma * (1.0 - (-2.0 * kappa * t).exp()) / (2.0 * kappa);
    assert_eq!(json["at"].as_f64(), Some(1.5));
    assert_eq!(json["factors"][0]["family"], "ornstein-uhlenbeck");
    assert!((json["factors"][0]["mean"].as_f64().unwrap_or(0.0) - mean).abs() < 1e-15);
    assert!((json["factors"][0]["variance"].as_f64().unwrap_or(0.0) - var).abs() < 1e-17);
    for figure in ["mean", "variance", "sd", "quantiles", "below"] {
        assert_eq!(json["factors"][0]["exact"][figure], true, "{figure}");
    }
    // ln 2/κ; Normal(θ, σ²/(2κ)) (Vasicek 1977).
    let halflife = json["factors"][0]["halflife"].as_f64().unwrap();
    assert!((halflife - std::f64::consts::LN_2 / kappa).abs() < 1e-15);
    let stationary = &json["factors"][0]["stationary"];
    assert_eq!(stationary["mean"].as_f64(), Some(theta));
    let v = stationary["variance"].as_f64().unwrap();
    assert!((v - sigma * sigma / (2.0 * kappa)).abs() < 1e-18, "{v}");
}

#[test]
fn at_accepts_clock_units_and_time_units_alike() {
    let (_, in_months, _) = moments(&[
        "demo-models/ou_short_rate.sde",
        "--at",
        "6 month",
        "--format",
        "json",
    ]);
    let (_, in_years, _) = moments(&[
        "demo-models/ou_short_rate.sde",
        "--at",
        "0.5",
        "--format",
        "json",
    ]);
    assert_eq!(in_months["at"].as_f64(), Some(0.5));
    assert_eq!(in_months["factors"], in_years["factors"]);
    // A quarter is a year/4 and an hour a day/24: common practice, no source.
    for (at, years) in [("2 quarter", 0.5), ("[quarter]", 0.25), ("876 hour", 0.1)] {
        let at = if at.starts_with('[') {
            format!("1 {at}")
        } else {
            at.to_string()
        };
        let (code, json, stderr) = moments(&[
            "demo-models/ou_short_rate.sde",
            "--at",
            &at,
            "--format",
            "json",
        ]);
        assert_eq!(code, Some(0), "{at}: {stderr}");
        let got = json["at"].as_f64().unwrap_or(f64::NAN);
        assert!((got - years).abs() < 1e-15, "{at}: {got}");
    }
    let (code, _, stderr) = moments(&["demo-models/ou_short_rate.sde", "--at", "6 parsec"]);
    assert_eq!(code, Some(2));
    assert!(stderr.contains("not a time unit"));
}

#[test]
fn figures_that_are_not_known_are_null() {
    let (code, json, _) = moments(&["demo-models/cubic_power_spread.sde", "--format", "json"]);
    assert_eq!(code, Some(0));
    let general: Vec<&Value> = json["factors"]
        .as_array()
        .map(|a| a.iter().filter(|s| s["family"] == "general").collect())
        .unwrap_or_default();
    assert!(!general.is_empty());
    for s in general {
        assert!(s["mean"].is_null() && s["variance"].is_null());
        assert_eq!(s["exact"]["mean"], false);
        assert_eq!(s["exact"]["variance"], false);
    }
}

#[test]
fn a_model_with_errors_is_refused_with_its_diagnostics() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let file = write_model(
        &dir,
        "broken.sde",
        "shock W\nfactor x = 1\ndx = -kappa * x dt + 0.1 dW\n",
    );
    let (code, _, stderr) = moments(&[&file]);
    assert_eq!(code, Some(1));
    assert!(stderr.contains("`kappa` is not declared"), "{stderr}");
}

#[test]
fn text_output_names_the_family_and_the_formulas() {
    let out = Command::cargo_bin("sdeck")
        .unwrap_or_else(|e| panic!("{e}"))
        .current_dir(repo())
        .args(["moments", "demo-models/cir_funding_rate.sde"])
        .output()
        .unwrap_or_else(|e| panic!("{e}"));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("square-root"));
    assert!(text.contains("noncentral χ²"));
    assert!(text.contains("Gamma("));
    assert!(text.contains("Caution"));
}

#[test]
fn laws_quantiles_and_probabilities_below_levels() {
    let (code, json, _) = moments(&[
        "tests/reference/models/affine_alderley_vasicek_rate.sde",
        "--format",
        "json",
        "--quantiles",
        "1%,0.5",
        "--below",
        "r=0,r=2%",
    ]);
    assert_eq!(code, Some(0));
    let r = &json["factors"][0];
    assert_eq!(r["law"], "normal");
    // Vasicek 1977 at t = 1: mean θ + (r₀ − θ)e^{−κ}, variance σ²(1 − e^{−2κ})/(2κ); the
    // normal law's 1% point and P(r < 0) from scipy.stats.norm (tests/reference).
    let (kappa, theta, sigma, r0) = (0.8f64, 0.04f64, 0.015f64, 0.025f64);
    let mean = theta + (r0 - theta) * (-kappa).exp();
    let sd = (sigma * sigma * (1.0 - (-2.0 * kappa).exp()) / (2.0 * kappa)).sqrt();
    assert!((r["sd"].as_f64().unwrap_or(0.0) - sd).abs() < 1e-15);
    let quantiles = r["quantiles"].as_array().cloned().unwrap_or_default();
    assert_eq!(quantiles.len(), 2);
    assert_eq!(quantiles[0]["p"].as_f64(), Some(0.01));
    assert!((quantiles[0]["value"].as_f64().unwrap_or(0.0) - 0.008614684978747046).abs() < 1e-12);
    assert!((quantiles[1]["value"].as_f64().unwrap_or(0.0) - mean).abs() < 1e-15);
    let below = r["below"].as_array().cloned().unwrap_or_default();
    assert_eq!(below.len(), 2);
    assert_eq!(below[0]["value"].as_f64(), Some(0.0));
    assert!(
        (below[0]["probability"].as_f64().unwrap_or(0.0) - 0.0008461456890931849).abs() < 1e-12
    );
    assert_eq!(below[1]["value"].as_f64(), Some(0.02));
}

#[test]
fn an_exploding_variance_is_infinite_from_a_time() {
    let (code, json, _) = moments(&[
        "tests/reference/models/affine_fallow_explosive_variance.sde",
        "--format",
        "json",
    ]);
    assert_eq!(code, Some(0));
    let s = &json["factors"][0];
    assert_eq!(s["family"], "exponential-affine");
    assert_eq!(s["law"], "fourier");
    // E[S_t] = S₀e^{μt} whatever the variance does; E[S²] explodes at the time of
    // Andersen & Piterbarg 2007 (3.6734 years, tests/reference/expected.json).
    assert!((s["mean"].as_f64().unwrap_or(0.0) - 100.0 * (0.15f64).exp()).abs() < 1e-9);
    assert!(s["variance"].is_null() && s["sd"].is_null());
    assert!((s["variance_infinite_from"].as_f64().unwrap_or(0.0) - 3.673379275490512).abs() < 1e-8);
    let (code, text, _) =
        moments_text(&["tests/reference/models/affine_fallow_explosive_variance.sde"]);
    assert_eq!(code, Some(0));
    assert!(text.contains("infinite (from t = 3.67338 year)"), "{text}");
}

#[test]
fn bad_quantile_and_below_options_are_refused() {
    let model = "tests/reference/models/affine_alderley_vasicek_rate.sde";
    for (option, value, says) in [
        ("--quantiles", "150%", "not a probability"),
        (
            "--below",
            "q=0",
            "not a factor of the model (its factors: r)",
        ),
        ("--below", "r", "NAME=VALUE"),
        ("--below", "r=inf", "`inf` is not a number"),
    ] {
        let (code, _, stderr) = moments(&[model, option, value]);
        assert_eq!(code, Some(2), "{option} {value}");
        assert!(stderr.contains(says), "{stderr}");
        // `simulate --below` reads the option with the same words.
        if option == "--below" {
            let (code, _, stderr) =
                common::run(&["simulate", model, "--paths", "10", option, value]);
            assert_eq!(code, Some(2), "simulate {option} {value}");
            assert!(stderr.contains(says), "simulate: {stderr}");
        }
    }
}

#[test]
fn below_levels_are_read_as_the_language_reads_numbers() {
    // 0.07% is the double nearest 0.0007 in a model and in an option alike (0.07 / 100
    // would be 0.0007000000000000001); the JSON carries the level as read.
    let model = "tests/reference/models/affine_alderley_vasicek_rate.sde";
    let (code, json, stderr) = moments(&[model, "--format", "json", "--below", "r=0.07%"]);
    assert_eq!(code, Some(0), "{stderr}");
    let text = json.to_string();
    assert!(
        text.contains("0.0007") && !text.contains("0.0007000000000000001"),
        "{text}"
    );
}

#[test]
fn text_and_json_carry_the_same_figures() {
    let (code, json, _) = moments(&["demo-models/ou_short_rate.sde", "--format", "json"]);
    assert_eq!(code, Some(0));
    let (_, text, _) = moments_text(&["demo-models/ou_short_rate.sde"]);
    let f = &json["factors"][0];
    let shown = |x: &Value| sdeck_units::number::plain(x.as_f64().unwrap());
    for (label, value) in [("sd        = ", &f["sd"]), ("half-life = ", &f["halflife"])] {
        assert!(
            text.contains(&format!("{label}{}", shown(value))),
            "{label}: {text}"
        );
    }
    let st = &f["stationary"];
    assert!(
        text.contains(&format!(
            "(mean {}, variance {}, sd ",
            shown(&st["mean"]),
            shown(&st["variance"])
        )),
        "{text}"
    );
    assert!(text.contains(st["law"].as_str().unwrap()), "{text}");
    assert!(text.contains("exact     = all figures"), "{text}");
}

#[test]
fn figures_outside_a_family_domain_are_null_with_the_reason() {
    let dir = tempfile::tempdir().unwrap_or_else(|e| panic!("{e}"));
    let body = |start: &str, level: &str| {
        format!(
            "param kappa = 0.5 [1/year] > 0\nparam level = {level}\n\
             param vol = 10% [1/sqrt(year)] > 0\nshock W\nfactor r = {start}\n\
             dr = kappa * (level - r) dt + vol * sqrt(r) dW\n"
        )
    };
    for (name, start, level, reason) in [
        ("below.sde", "-1%", "2%", "starts at -0.01"),
        ("dof.sde", "1%", "-2%", "4·κθ/σ² = -4, are negative"),
    ] {
        let file = write_model(&dir, name, &body(start, level));
        let (code, json, stderr) = moments(&[&file, "--format", "json"]);
        assert_eq!(code, Some(0), "{stderr}");
        let f = &json["factors"][0];
        assert_eq!(f["family"], "square-root");
        for figure in ["mean", "variance", "sd", "law", "stationary", "halflife"] {
            assert!(f[figure].is_null(), "{name}: {figure} = {}", f[figure]);
        }
        assert!(f["quantiles"][0]["value"].is_null());
        let why = f["outside_domain"].as_str().unwrap_or_default();
        assert!(why.contains(reason), "{name}: {why}");
        let (_, text, _) = moments_text(&[&file]);
        assert!(text.contains("not defined: "), "{text}");
        assert!(text.contains("Var[r(t)] = not known"), "{text}");
    }
}
