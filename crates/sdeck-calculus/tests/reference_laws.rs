//! Compares laws, bond prices and explosion times with the "laws" records of
//! tests/reference/expected.json, computed independently in Python (each record names
//! its source: Vasicek 1977, Cox, Ingersoll & Ross 1985, Brigo & Mercurio 2006,
//! Heston 1993 with scipy quadrature of the Gil-Pelaez integral, scipy.stats, Andersen &
//! Piterbarg 2007).

use num_complex::Complex64;
use sdeck_calculus::affine::{AffineSet, Rate};
use sdeck_calculus::{derive, laws};
use sdeck_semantics::Expr;
use serde_json::Value;
use std::path::PathBuf;

fn workspace_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../..")
}

#[test]
fn laws_and_bond_prices_agree_with_the_independent_reference() {
    let root = workspace_root();
    let text = std::fs::read_to_string(root.join("tests/reference/expected.json"))
        .expect("tests/reference/expected.json is committed");
    let expected: Value = serde_json::from_str(&text).expect("valid JSON");
    let records = expected["laws"].as_array().expect("a list of law records");
    assert!(records.len() >= 30, "the reference covers the laws");
    let mut failures = Vec::new();
    let mut checks = std::collections::BTreeSet::new();
    for record in records {
        let file = record["file"].as_str().expect("file");
        let check = record["check"].as_str().expect("check");
        checks.insert(check.to_string());
        let source = std::fs::read_to_string(root.join(file)).expect("model file");
        let analysis = sdeck_semantics::analyze(&source, "reference");
        assert!(!analysis.has_errors(), "{file}: {:?}", analysis.diagnostics);
        let model = &analysis.model;
        let derivation = derive(model);
        let reference = record["value"].as_f64().expect("value");
        let tolerance = record["tolerance"].as_f64().expect("tolerance");
        let at = record["at"].as_f64();
        let factor = record["factor"]
            .as_str()
            .map(|name| model.factor_id(name).expect("factor"));
        let argument = record["argument"].as_f64();
        let (ours, scale) = match check {
            "bond_price" => {
                let set = AffineSet::from_model(model).expect("affine");
                let names = record["rate"].as_array().expect("rate");
                let expr = names
                    .iter()
                    .filter_map(Value::as_str)
                    .map(|name| match model.factor_id(name) {
                        Some(i) => Expr::Factor(i),
                        None => Expr::Param(model.param_id(name).expect("name")),
                    })
                    .reduce(|a, b| Expr::Add(Box::new(a), Box::new(b)))
                    .expect("a rate");
                let rate = Rate::new(&set, &expr).expect("affine rate");
                let zero = vec![Complex64::new(0.0, 0.0); set.dimension()];
                let t = at.expect("maturity");
                let value = set.log_transform(&zero, &rate, t).map(|l| l.re.exp()).ok();
                (value, reference)
            }
            "cdf" => {
                let law =
                    laws::law_of(model, &derivation, factor.expect("factor"), at.expect("at"))
                        .expect("a known law");
                (law.cdf(argument.expect("level")), 1.0)
            }
            "quantile" => {
                let law =
                    laws::law_of(model, &derivation, factor.expect("factor"), at.expect("at"))
                        .expect("a known law");
                (law.quantile(argument.expect("probability")), reference)
            }
            "explosion_time" => {
                let set = AffineSet::from_model(model).expect("affine");
                let mut u = vec![0.0; set.dimension()];
                u[factor.expect("factor").index()] = argument.expect("moment");
                (set.explosion_time(&u, 50.0), reference)
            }
            other => panic!("unknown check {other}"),
        };
        match ours {
            Some(value) if (value - reference).abs() <= tolerance * scale.abs() => {}
            _ => failures.push(format!(
                "{file} {check} {:?} at {at:?}: ours {ours:?}, reference {reference}",
                argument
            )),
        }
    }
    assert_eq!(
        checks.into_iter().collect::<Vec<_>>(),
        ["bond_price", "cdf", "explosion_time", "quantile"]
    );
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
