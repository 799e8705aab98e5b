//! Compares derived figures with tests/reference/expected.json, computed independently
//! in Python (numpy, scipy, sympy; see tests/reference/README.md for each method).

use sdeck_calculus::{derive, moments_at, Family};
use serde_json::Value;
use std::path::PathBuf;

fn workspace_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn number(value: &Value) -> Option<f64> {
    value.as_f64()
}

/// |ours − reference| ≤ tolerance · scale, or both absent.
fn check(
    failures: &mut Vec<String>,
    what: String,
    ours: Option<f64>,
    reference: Option<f64>,
    scale: f64,
    tolerance: f64,
) {
    match (ours, reference) {
        (None, None) => {}
        (Some(a), Some(b)) => {
            let allowed = tolerance * scale.abs().max(f64::MIN_POSITIVE);
            // NaN must fail too, hence the positive test.
            let agrees = (a - b).abs() <= allowed;
            if !agrees {
                failures.push(format!(
                    "{what}: ours {a:e}, reference {b:e}, gap {:e} > {allowed:e}",
                    (a - b).abs()
                ));
            }
        }
        (a, b) => failures.push(format!("{what}: ours {a:?}, reference {b:?}")),
    }
}

/// Every covariance entry on the scale sd_i · sd_j of the reference.
fn check_covariance(
    failures: &mut Vec<String>,
    what: &str,
    ours: &[Vec<Option<f64>>],
    reference: &Value,
    tolerance: f64,
) {
    let rows = reference.as_array().expect("covariance");
    let sd = |i: usize| {
        rows.get(i)
            .and_then(|r| r.get(i))
            .and_then(Value::as_f64)
            .unwrap_or(0.0)
            .max(0.0)
            .sqrt()
    };
    for (i, row) in rows.iter().enumerate() {
        for (j, value) in row.as_array().expect("row").iter().enumerate() {
            check(
                failures,
                format!("{what} covariance[{i}][{j}]"),
                ours.get(i).and_then(|r| r.get(j)).copied().flatten(),
                number(value),
                sd(i) * sd(j),
                tolerance,
            );
        }
    }
}

#[test]
fn figures_agree_with_the_independent_reference() {
    let root = workspace_root();
    let text = std::fs::read_to_string(root.join("tests/reference/expected.json"))
        .expect("tests/reference/expected.json is committed");
    let expected: Value = serde_json::from_str(&text).expect("valid JSON");
    let models = expected["models"].as_array().expect("a list of models");
    assert!(
        models.len() >= 12,
        "the reference covers at least twelve models"
    );
    let mut failures = Vec::new();
    for entry in models {
        let file = entry["file"].as_str().expect("file");
        let source = std::fs::read_to_string(root.join(file)).expect("model file");
        let stem = file
            .rsplit('/')
            .next()
            .unwrap_or(file)
            .trim_end_matches(".sde");
        let analysis = sdeck_semantics::analyze(&source, stem);
        assert!(
            !analysis.has_errors(),
            "{file} analyses without errors: {:?}",
            analysis.diagnostics
        );
        let model = &analysis.model;
        let derivation = derive(model);
        let at = entry["at"].as_f64().expect("at");
        let tolerance = entry["tolerance"].as_f64().expect("tolerance");
        let moments = moments_at(model, &derivation, at);
        let states = entry["factors"].as_array().expect("factors");
        assert_eq!(states.len(), model.factors.len(), "{file}: factor count");
        let sd: Vec<f64> = states
            .iter()
            .map(|s| number(&s["variance"]).unwrap_or(0.0).max(0.0).sqrt())
            .collect();
        for (i, reference) in states.iter().enumerate() {
            let name = reference["name"].as_str().unwrap_or("?");
            let law = &derivation.states[i];
            let family = reference["family"].as_str().unwrap_or("?");
            // A state that depends on no other keeps its own family even when other states
            // depend on it; the reference labels it by the system instead.
            let decoupled_in_system =
                family == Family::LinearSystem.as_str() && law.depends_on.is_empty();
            if law.family.as_str() != family && !decoupled_in_system {
                failures.push(format!(
                    "{file} {name}: family {} vs {family}",
                    law.family.as_str()
                ));
            }
            let mean_ref = number(&reference["mean"]);
            let var_ref = number(&reference["variance"]);
            let mean_scale = mean_ref.unwrap_or(0.0).abs().max(sd[i]);
            check(
                &mut failures,
                format!("{file} {name} mean"),
                moments.mean[i],
                mean_ref,
                mean_scale,
                tolerance,
            );
            check(
                &mut failures,
                format!("{file} {name} variance"),
                moments.variance[i],
                var_ref,
                var_ref.unwrap_or(1.0),
                tolerance,
            );
            let half_life_ref = number(&reference["half_life"]);
            check(
                &mut failures,
                format!("{file} {name} half-life"),
                law.half_life,
                half_life_ref,
                half_life_ref.unwrap_or(1.0),
                tolerance,
            );
            let stationary_mean_ref = number(&reference["stationary_mean"]);
            let stationary_var_ref = number(&reference["stationary_variance"]);
            let stationary_sd = stationary_var_ref.unwrap_or(0.0).max(0.0).sqrt();
            check(
                &mut failures,
                format!("{file} {name} stationary mean"),
                law.stationary.as_ref().map(|s| s.mean),
                stationary_mean_ref,
                stationary_mean_ref.unwrap_or(0.0).abs().max(stationary_sd),
                tolerance,
            );
            check(
                &mut failures,
                format!("{file} {name} stationary variance"),
                law.stationary.as_ref().map(|s| s.variance),
                stationary_var_ref,
                stationary_var_ref.unwrap_or(1.0),
                tolerance,
            );
        }
        check_covariance(
            &mut failures,
            &format!("{file} at {at}"),
            &moments.covariance,
            &entry["covariance"],
            tolerance,
        );
        // Models with schedules are also pinned at further times (the half-day ramp
        // of the Kestrel model before, inside and after its knots).
        for other in entry["also_at"].as_array().into_iter().flatten() {
            let at = other["at"].as_f64().expect("at");
            let moments = moments_at(model, &derivation, at);
            let means = other["mean"].as_array().expect("mean");
            let covariance = other["covariance"].as_array().expect("covariance");
            for (i, mean) in means.iter().enumerate() {
                let sd = covariance[i][i].as_f64().unwrap_or(0.0).max(0.0).sqrt();
                let reference = number(mean);
                check(
                    &mut failures,
                    format!("{file} mean[{i}] at {at}"),
                    moments.mean[i],
                    reference,
                    reference.unwrap_or(0.0).abs().max(sd),
                    tolerance,
                );
            }
            check_covariance(
                &mut failures,
                &format!("{file} at {at}"),
                &moments.covariance,
                &other["covariance"],
                tolerance,
            );
        }
    }
    assert!(
        failures.is_empty(),
        "{} disagreements:\n{}",
        failures.len(),
        failures.join("\n")
    );
}
