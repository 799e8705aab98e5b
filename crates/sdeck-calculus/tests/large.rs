//! Large models stay cheap: decoupled states keep their one-state laws whatever their
//! number, and a coupled system beyond the engines' size limit is reported as not known
//! instead of allocating n⁴ numbers.

use sdeck_calculus::{derive, moments_at, Family};

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
