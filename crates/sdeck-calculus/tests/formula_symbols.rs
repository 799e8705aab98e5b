//! The letters a formula adds to the model's names (integration variable, moment
//! functions, matrices of a linear system) never coincide with a name of the model.

use sdeck_calculus::{derive, formulas, Formulas};
use sdeck_semantics::analyze;
use sdeck_semantics::FactorId;

fn formulas_of(source: &str) -> Vec<(String, Formulas)> {
    let analysis = analyze(source, "symbols");
    assert!(!analysis.has_errors(), "{:#?}", analysis.diagnostics);
    let model = analysis.model;
    let derivation = derive(&model);
    (0..model.factors.len())
        .map(|i| {
            (
                model.factors[i].name.clone(),
                formulas(&model, &derivation, FactorId::new(i)),
            )
        })
        .collect()
}

fn all_text(f: &Formulas) -> String {
    [
        &f.solution,
        &f.mean,
        &f.variance,
        &f.autocovariance,
        &f.transition,
        &f.stationary,
    ]
    .iter()
    .filter_map(|t| t.as_deref())
    .collect::<Vec<_>>()
    .join("\n")
}

#[test]
fn a_factor_named_s_gets_another_integration_variable() {
    let source = "
model names
param k = 0.5 [1/year]
param vol = 1% [1/sqrt(year)]
shock W
factor s = 1%
ds = -k*s dt + vol dW
";
    let f = &formulas_of(source)[0].1;
    let cov = f.autocovariance.as_deref().unwrap_or_default();
    assert_eq!(
        cov,
        "Cov(s(u), s(t)) = vol²·(e^(−k·(t − u)) − e^(−k·(t + u)))/(2·k), u ≤ t"
    );
    let transition = f.transition.as_deref().unwrap_or_default();
    assert!(
        transition.starts_with("s(t) | s(u) ~ Normal(s(u)·e^(−k·(t − u))"),
        "{transition}"
    );
}

#[test]
fn without_a_collision_the_usual_letters_stay() {
    let source = "
model names
param k = 0.5 [1/year]
param vol = 1% [1/sqrt(year)]
shock W
factor x = 1%
dx = -k*x dt + vol dW
";
    let f = &formulas_of(source)[0].1;
    assert_eq!(
        f.autocovariance.as_deref().unwrap_or_default(),
        "Cov(x(s), x(t)) = vol²·(e^(−k·(t − s)) − e^(−k·(t + s)))/(2·k), s ≤ t"
    );
}

#[test]
fn the_square_root_scale_avoids_a_parameter_named_c() {
    let source = "
model names
param c = 0.5 [1/year]
param level = 4%
param vol = 10% [1/sqrt(year)]
shock W
factor v = 4%
dv = c*(level - v) dt + vol*sqrt(v) dW
";
    let f = &formulas_of(source)[0].1;
    let transition = f.transition.as_deref().unwrap_or_default();
    assert!(transition.starts_with("2h·v(t) | v(s)"), "{transition}");
    assert!(transition.contains(", h = 2·c/"), "{transition}");
}

#[test]
fn moment_equations_avoid_factors_named_m_and_v() {
    let source = "
model names
param k = 0.5 [1/year]
param vol = 10% [1/sqrt(year)]
param g = 20% [1/sqrt(year)]
shock W
shock B
factor m = 1
factor v = 1
dm = -k*m dt + (vol + g*m) dW
dv = -k*v dt + vol dB
";
    let f = &formulas_of(source)[0].1;
    let mean = f.mean.as_deref().unwrap_or_default();
    let variance = f.variance.as_deref().unwrap_or_default();
    assert!(
        !variance.contains("v′(t)") && !variance.contains("v(t)"),
        "{variance}"
    );
    assert!(variance.starts_with("w′(t) = "), "{variance}");
    assert!(!mean.contains("m′(t)"), "{mean}");
}

#[test]
fn a_linear_system_names_its_matrices_apart_from_the_model() {
    let source = "
model names
param A = 0.5 [1/year]
param b = 0.2 [1/year]
param L = 1% [1/sqrt(year)]
param R = 2% [1/sqrt(year)]
shock W
shock B
corr W, B = 0.3
factor X = 1%
factor y = 2%
dX = -A*X dt + L dW
dy = (b*X - b*y) dt + R dB
";
    let all = formulas_of(source);
    let (_, f) = all.iter().find(|(name, _)| name == "y").expect("factor y");
    let text = all_text(f);
    assert_eq!(
        f.stationary.as_deref().unwrap_or_default(),
        "Normal(−K⁻¹·a, P) with K·P + P·Kᵀ + G·C·Gᵀ = 0",
        "{text}"
    );
    let solution = f.solution.as_deref().unwrap_or_default();
    assert!(solution.starts_with("Y(t) = e^(K·t)·Y₀"), "{solution}");
}

#[test]
fn a_linear_system_prints_its_matrices_as_numbers_in_its_letters() {
    // ds = b(t0 − s) dt + L dW, dX = A(s − t0 − X) dt + R dB with b = 0.9, A = 1.4,
    // t0 = 2.5%, L = 0.8%, R = 0.5%, corr(W, B) = 0.35: drift matrix ((−b, 0), (A, −A)),
    // constant (b·t0, −A·t0), loadings diag(L, R).
    let source = "
model names
param b = 0.9 [1/year]
param A = 1.4 [1/year]
param L = 0.8% [1/sqrt(year)]
param R = 0.5% [1/sqrt(year)]
param t0 = 2.5%
shock W
shock B
corr W, B = 0.35
factor s = 3%
factor X = 1%
ds = b * (t0 - s) dt + L dW
dX = A * (s - t0 - X) dt + R dB
";
    let all = formulas_of(source);
    let (_, f) = all.iter().find(|(name, _)| name == "X").expect("factor X");
    assert_eq!(
        f.matrices.as_deref(),
        Some(
            "K = ((−0.9, 0), (1.4, −1.4)); a = (0.0225, −0.035); \
             G = ((0.008, 0), (0, 0.005)); C = ((1, 0.35), (0.35, 1))"
        )
    );
}
