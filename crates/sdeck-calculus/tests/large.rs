//! Large models stay cheap: decoupled states keep their one-state laws whatever their
//! number, and a coupled system beyond the engines' size limit is reported as not known
//! instead of allocating n⁴ numbers.

use sdeck_calculus::{derive, moments_at, Family};
use sdeck_semantics::FactorId;

fn chain(n: usize, coupled: bool) -> String {
    let mut s = String::from(
        "param k = 1 [1/year]\nparam v = 0.1 [1/sqrt(year)]\nparam c = 0.1 [1/year]\nshock W\n",
    );
    for i in 0..n {
        s.push_str(&format!("factor x{i} = {}\n", i as f64 / n as f64));
    }
    for i in 0..n {
        let extra = if coupled && i > 0 {
            format!(" + c * x{}", i - 1)
        } else {
            String::new()
        };
        s.push_str(&format!("dx{i} = (-k * x{i}{extra}) dt + v dW\n"));
    }
    s
}

#[test]
fn many_decoupled_states_keep_their_closed_forms() {
    let analysis = sdeck_semantics::analyze(&chain(60, false), "wide");
    let derivation = derive(&analysis.model);
    let m = moments_at(&analysis.model, &derivation, 1.0);
    // Vasicek 1977: E[x(1)] = x0·e^(−k), Var = v²(1 − e^(−2k))/(2k); all share one noise.
    let x0 = 59.0 / 60.0;
    let mean = m.mean[59].unwrap_or(f64::NAN);
    assert!((mean - x0 * (-1f64).exp()).abs() < 1e-12);
    let var = 0.01 * (1.0 - (-2f64).exp()) / 2.0;
    assert!((m.variance[59].unwrap_or(f64::NAN) - var).abs() < 1e-14);
    // Same noise, same speed: perfectly correlated.
    let cov = m.covariance[0][59].unwrap_or(f64::NAN);
    assert!((cov - var).abs() < 1e-14, "{cov}");
}

#[test]
fn a_coupled_system_beyond_the_limit_is_general_and_says_why() {
    let analysis = sdeck_semantics::analyze(&chain(200, true), "tall");
    let derivation = derive(&analysis.model);
    let last = &derivation.states[199];
    assert_eq!(last.family, Family::General);
    assert!(last.reason.contains("more than"), "{}", last.reason);
    let m = moments_at(&analysis.model, &derivation, 1.0);
    assert!(m.mean[199].is_none());
    // The first state is decoupled and keeps its law.
    assert!(m.mean[0].is_some());
}

/// `n` Ornstein–Uhlenbeck states on one shared noise, speeds 0.5 + 0.01·i.
fn shared_noise(n: usize) -> String {
    let mut s = String::from("param v = 0.02 [1/sqrt(year)]\nshock M\n");
    for i in 0..n {
        s.push_str(&format!(
            "param k{i} = {} [1/year]\nfactor x{i} = 0.01\ndx{i} = k{i} * (0.03 - x{i}) dt + v dM\n",
            0.5 + 0.01 * i as f64
        ));
    }
    s
}

#[test]
fn figures_of_one_state_and_one_pair_in_a_large_model() {
    let n = 2000;
    let analysis = sdeck_semantics::analyze(&shared_noise(n), "wide");
    assert!(!analysis.has_errors(), "{:#?}", analysis.diagnostics);
    let model = &analysis.model;
    let derivation = derive(model);
    // No matrix of size states × states for a model this size, and nothing is coupled.
    assert!(derivation.drift_matrix.is_none());
    assert!(derivation.blocks.is_empty());
    let (i, j, t) = (1234, 77, 2.0);
    let (ki, kj) = (0.5 + 0.01 * i as f64, 0.5 + 0.01 * j as f64);
    // Vasicek 1977: mean 0.03 + (0.01 − 0.03)e^(−kt), variance v²(1 − e^(−2kt))/(2k).
    let figures = sdeck_calculus::state_moments(model, &derivation, FactorId::new(i), t);
    let mean = 0.03 + (0.01 - 0.03) * (-ki * t).exp();
    let variance = 0.0004 * (1.0 - (-2.0 * ki * t).exp()) / (2.0 * ki);
    assert!((figures.mean.unwrap_or(f64::NAN) - mean).abs() < 1e-15);
    assert!((figures.variance.unwrap_or(f64::NAN) - variance).abs() < 1e-16);
    // Two OU states on one noise: Cov = v²(1 − e^(−(ki + kj)t))/(ki + kj) (Itô's product
    // rule; Kloeden & Platen 1992, §4.2).
    let expected = 0.0004 * (1.0 - (-(ki + kj) * t).exp()) / (ki + kj);
    let cov = sdeck_calculus::covariance(model, &derivation, FactorId::new(i), FactorId::new(j), t)
        .unwrap_or(f64::NAN);
    assert!((cov - expected).abs() < 1e-16, "{cov} vs {expected}");
    assert_eq!(
        sdeck_calculus::covariance(model, &derivation, FactorId::new(j), FactorId::new(i), t),
        Some(cov)
    );
    assert_eq!(
        sdeck_calculus::covariance(model, &derivation, FactorId::new(i), FactorId::new(n), t),
        None
    );
}

#[test]
fn coupled_blocks_of_a_large_model_keep_their_drift_matrix() {
    // 40 decoupled states and one block of two: y follows x.
    let mut source = shared_noise(40);
    source.push_str(
        "param c = 0.3 [1/year]\nfactor x = 0\nfactor y = 0\n\
         dx = -k0 * x dt + v dM\ndy = (c * x - k1 * y) dt + v dM\n",
    );
    let analysis = sdeck_semantics::analyze(&source, "blocks");
    assert!(!analysis.has_errors(), "{:#?}", analysis.diagnostics);
    let derivation = derive(&analysis.model);
    assert_eq!(derivation.blocks.len(), 1);
    let block = &derivation.blocks[0];
    assert_eq!(block.states, vec![FactorId::new(40), FactorId::new(41)]);
    assert_eq!(
        block.drift_matrix,
        Some(vec![vec![-0.5, 0.0], vec![0.3, -0.51]])
    );
    // A triangular matrix has its diagonal as eigenvalues (common practice, no source).
    let mut eigen: Vec<f64> = block
        .drift_eigenvalues
        .clone()
        .unwrap_or_default()
        .iter()
        .map(|e| e.0)
        .collect();
    eigen.sort_by(f64::total_cmp);
    assert_eq!(eigen.len(), 2);
    assert!((eigen[0] + 0.51).abs() < 1e-14 && (eigen[1] + 0.5).abs() < 1e-14);
}
