//! Checks of the numeric engines (linear Gaussian systems, polynomial moments, ODE and
//! quadrature) against closed forms and independent reference values, each with its source.

use nalgebra::{DMatrix, DVector};
use sdeck_calculus::linear_system::{
    eigenvalues, is_stable, matrix_exponential, solve_lyapunov, AffineGaussian,
};
use sdeck_calculus::ode::{integrate, integrate_through, quad, OdeError};
use sdeck_calculus::polynomial::{PolynomialSystem, MAX_BASIS_SIZE};

/// |got − want| ≤ tolerance · max(|want|, floor): relative, with a floor for values near 0.
fn assert_close(got: f64, want: f64, tolerance: f64, what: &str) {
    let scale = want.abs().max(1e-300);
    assert!(
        (got - want).abs() <= tolerance * scale,
        "{what}: got {got:e}, want {want:e}, relative error {:e}",
        (got - want).abs() / scale
    );
}

fn assert_matrix_close(got: &DMatrix<f64>, want: &DMatrix<f64>, tolerance: f64, what: &str) {
    assert_eq!(got.shape(), want.shape(), "{what}: shapes");
    // Relative to the largest entry: off-diagonal covariances may be tiny against the diagonal.
    let scale = want.amax().max(1e-300);
    let error = (got - want).amax();
    assert!(
        error <= tolerance * scale,
        "{what}: max error {error:e} against scale {scale:e}\ngot {got}\nwant {want}"
    );
}

fn one_state_ou(speed: f64, level: f64, vol: f64) -> AffineGaussian {
    AffineGaussian::new(
        DMatrix::from_element(1, 1, -speed),
        DVector::from_element(1, speed * level),
        DMatrix::from_element(1, 1, vol),
        DMatrix::identity(1, 1),
    )
    .unwrap()
}

// ---------------------------------------------------------------------------------------
// Linear Gaussian systems
// ---------------------------------------------------------------------------------------

/// Vasicek 1977 (J. Financial Economics 5, 177–188, §4; equation numbers not recalled):
/// for dr = κ(θ − r) dt + σ dW, E[r_t] = θ + (r₀ − θ) e^{−κt},
/// Var r_t = σ²(1 − e^{−2κt})/(2κ), Cov(r_s, r_t) = σ² e^{−κ(t−s)}(1 − e^{−2κs})/(2κ),
/// stationary law Normal(θ, σ²/(2κ)).
#[test]
fn one_state_matches_vasicek() {
    let (speed, level, vol, start) = (1.8, 0.032, 0.0115, 0.0275);
    let system = one_state_ou(speed, level, vol);
    let x0 = DVector::from_element(1, start);
    for t in [0.0, 1e-4, 0.25, 1.0, 5.0, 40.0] {
        let decay = (-speed * t).exp();
        let mean = level + (start - level) * decay;
        let variance = vol * vol * (1.0 - (-2.0 * speed * t).exp()) / (2.0 * speed);
        assert_close(system.mean_at(&x0, t)[0], mean, 1e-12, "Vasicek mean");
        if t > 0.0 {
            assert_close(
                system.covariance_at(t)[(0, 0)],
                variance,
                1e-12,
                "Vasicek variance",
            );
        } else {
            assert_eq!(system.covariance_at(t)[(0, 0)], 0.0);
        }
    }
    let (s, t) = (0.4, 1.3);
    let autocovariance =
        vol * vol * (-speed * (t - s)).exp() * (1.0 - (-2.0 * speed * s).exp()) / (2.0 * speed);
    assert_close(
        system.cross_covariance(s, t)[(0, 0)],
        autocovariance,
        1e-12,
        "Vasicek autocovariance",
    );
    // Cov(X_t, X_s) for s < t is the same number for one state.
    assert_close(
        system.cross_covariance(t, s)[(0, 0)],
        autocovariance,
        1e-12,
        "Vasicek autocovariance, reversed",
    );
    assert_close(
        system.stationary_mean().unwrap()[0],
        level,
        1e-14,
        "Vasicek stationary mean",
    );
    assert_close(
        system.stationary_covariance().unwrap()[(0, 0)],
        vol * vol / (2.0 * speed),
        1e-14,
        "Vasicek stationary variance",
    );
}

/// Diagonal A = diag(−a₀, −a₁), any Q: P_ij(t) = ∫₀ᵗ e^{−a_i s} Q_ij e^{−a_j s} ds
/// = Q_ij (1 − e^{−(a_i + a_j)t})/(a_i + a_j) (integrated by hand).
#[test]
fn diagonal_two_state_covariance_matches_hand_integral() {
    let rates = [0.7, 3.1];
    let loadings = DMatrix::from_row_slice(2, 2, &[0.3, 0.0, 0.05, 0.4]);
    let corr = DMatrix::from_row_slice(2, 2, &[1.0, -0.6, -0.6, 1.0]);
    let system = AffineGaussian::new(
        DMatrix::from_diagonal(&DVector::from_vec(vec![-rates[0], -rates[1]])),
        DVector::from_vec(vec![0.01, -0.02]),
        loadings.clone(),
        corr.clone(),
    )
    .unwrap();
    let q = &loadings * &corr * loadings.transpose();
    for t in [0.01, 0.5, 2.0, 25.0] {
        let covariance = system.covariance_at(t);
        for i in 0..2 {
            for j in 0..2 {
                let total_rate = rates[i] + rates[j];
                let expected = q[(i, j)] * (1.0 - (-total_rate * t).exp()) / total_rate;
                assert_close(
                    covariance[(i, j)],
                    expected,
                    1e-12,
                    &format!("P[{i},{j}]({t})"),
                );
            }
        }
    }
}

/// A singular, coupled drift: X' = r (the integral of a Vasicek rate), r as in Vasicek 1977.
/// By hand: E[X_t] = θt + (r₀ − θ)(1 − e^{−κt})/κ,
/// Var X_t = σ²/κ² [t − 2(1 − e^{−κt})/κ + (1 − e^{−2κt})/(2κ)],
/// Cov(X_t, r_t) = σ²(1 − e^{−κt})²/(2κ²) (the integrated Ornstein–Uhlenbeck process).
#[test]
fn integrated_rate_with_singular_drift() {
    let (speed, level, vol, start) = (0.9, 0.03, 0.012, 0.02);
    let system = AffineGaussian::new(
        DMatrix::from_row_slice(2, 2, &[0.0, 1.0, 0.0, -speed]),
        DVector::from_vec(vec![0.0, speed * level]),
        DMatrix::from_row_slice(2, 1, &[0.0, vol]),
        DMatrix::identity(1, 1),
    )
    .unwrap();
    let x0 = DVector::from_vec(vec![0.0, start]);
    for t in [0.1, 1.0, 10.0, 200.0] {
        let decay = (-speed * t).exp();
        let mean = level * t + (start - level) * (1.0 - decay) / speed;
        let variance = vol * vol / (speed * speed)
            * (t - 2.0 * (1.0 - decay) / speed + (1.0 - decay * decay) / (2.0 * speed));
        let cross = vol * vol * (1.0 - decay).powi(2) / (2.0 * speed * speed);
        assert_close(system.mean_at(&x0, t)[0], mean, 1e-12, "integrated mean");
        let covariance = system.covariance_at(t);
        // At t = 0.1 the variance is a difference of nearly equal terms; 1e-9 there.
        let tolerance = if t < 1.0 { 1e-9 } else { 1e-11 };
        assert_close(
            covariance[(0, 0)],
            variance,
            tolerance,
            "integrated variance",
        );
        assert_close(
            covariance[(0, 1)],
            cross,
            1e-11,
            "integrated cross covariance",
        );
    }
    assert!(!system.is_stable());
    assert!(system.stationary_covariance().is_none());
    assert!(system.stationary_mean().is_none());
}

/// A = 0: Brownian motion with drift, mean x₀ + b t, covariance Q t (common practice, no source).
#[test]
fn zero_drift_matrix_is_brownian_motion() {
    let loadings = DMatrix::from_row_slice(2, 1, &[0.2, -0.1]);
    let system = AffineGaussian::new(
        DMatrix::zeros(2, 2),
        DVector::from_vec(vec![0.05, 1.0]),
        loadings.clone(),
        DMatrix::identity(1, 1),
    )
    .unwrap();
    let x0 = DVector::from_vec(vec![1.0, -2.0]);
    let t = 3.5;
    let mean = system.mean_at(&x0, t);
    assert_close(mean[0], 1.0 + 0.05 * t, 1e-14, "drifting mean 0");
    assert_close(mean[1], -2.0 + t, 1e-14, "drifting mean 1");
    let expected = &loadings * loadings.transpose() * t;
    assert_matrix_close(&system.covariance_at(t), &expected, 1e-14, "Q t");
    assert!(system.stationary_covariance().is_none());
}

/// Gardiner, Handbook of Stochastic Methods, §4.4.6 (the 2×2 formula, from memory; checked
/// against scipy.linalg.solve_continuous_lyapunov): for dx = −A x dt + B dW the stationary
/// covariance is σ = [det(A) BBᵀ + (A − tr(A) I) BBᵀ (A − tr(A) I)ᵀ] / (2 tr(A) det(A)).
#[test]
fn two_state_lyapunov_matches_gardiner_formula() {
    let a_gardiner = DMatrix::from_row_slice(2, 2, &[1.3, 0.4, -0.7, 0.9]);
    let b = DMatrix::from_row_slice(2, 2, &[0.5, 0.1, 0.2, 0.3]);
    let d = &b * b.transpose();
    let trace = a_gardiner.trace();
    let determinant =
        a_gardiner[(0, 0)] * a_gardiner[(1, 1)] - a_gardiner[(0, 1)] * a_gardiner[(1, 0)];
    let shifted = &a_gardiner - DMatrix::identity(2, 2) * trace;
    let expected =
        (&d * determinant + &shifted * &d * shifted.transpose()) / (2.0 * trace * determinant);
    let system =
        AffineGaussian::new(-a_gardiner, DVector::zeros(2), b, DMatrix::identity(2, 2)).unwrap();
    let stationary = system.stationary_covariance().unwrap();
    assert_matrix_close(&stationary, &expected, 1e-13, "Gardiner 2×2");
    // The same figures from scipy.linalg.solve_continuous_lyapunov(-A, -BBᵀ).
    assert_close(stationary[(0, 0)], 0.08068965517241379, 1e-8, "scipy P00");
    assert_close(stationary[(0, 1)], 0.06275862068965517, 1e-8, "scipy P01");
    assert_close(stationary[(1, 1)], 0.12103448275862069, 1e-8, "scipy P11");
}

/// A 3-state non-normal system with complex eigenvalues and two correlated noises.
/// Reference values from scipy 1.17: mean by scipy.linalg.expm plus
/// scipy.integrate.quad_vec of e^{As} b; P(t) by quad_vec of e^{As} Q e^{Aᵀs};
/// stationary P by scipy.linalg.solve_continuous_lyapunov; eigenvalues by numpy.linalg.eigvals.
fn three_state_system() -> AffineGaussian {
    AffineGaussian::new(
        DMatrix::from_row_slice(3, 3, &[-0.5, 2.0, 0.0, 0.0, -1.2, 0.8, 0.3, 0.0, -2.0]),
        DVector::from_vec(vec![0.1, -0.2, 0.05]),
        DMatrix::from_row_slice(3, 2, &[0.2, 0.0, 0.1, 0.3, 0.0, 0.25]),
        DMatrix::from_row_slice(2, 2, &[1.0, -0.4, -0.4, 1.0]),
    )
    .unwrap()
}

#[test]
fn three_state_system_matches_scipy_reference() {
    let system = three_state_system();
    let x0 = DVector::from_vec(vec![1.0, 0.5, -0.3]);
    let mean = system.mean_at(&x0, 1.7);
    let expected_mean = [
        0.7442000686140292,
        -0.02551183752035432,
        0.14164818057346257,
    ];
    for (i, want) in expected_mean.iter().enumerate() {
        assert_close(mean[i], *want, 1e-10, &format!("mean {i}"));
    }
    let expected_covariance = DMatrix::from_row_slice(
        3,
        3,
        &[
            0.13704706752179466,
            0.0515172758223239,
            0.02444110687295328,
            0.0515172758223239,
            0.04830766949373064,
            0.02858322235215725,
            0.02444110687295328,
            0.02858322235215725,
            0.01861448305315697,
        ],
    );
    assert_matrix_close(
        &system.covariance_at(1.7),
        &expected_covariance,
        1e-10,
        "P(1.7)",
    );
    let expected_cross = DMatrix::from_row_slice(
        3,
        3,
        &[
            0.03168718357883355,
            0.00612069800412115,
            0.00477633662245456,
            0.04285219639980805,
            0.0132479873023631,
            0.00727574225095754,
            0.0250534882687903,
            0.00855177392430889,
            0.00440959308810231,
        ],
    );
    assert_matrix_close(
        &system.cross_covariance(0.6, 1.7),
        &expected_cross,
        1e-10,
        "Cov(X_0.6, X_1.7)",
    );
    // Cov(X_t, X_s) is the transpose of Cov(X_s, X_t).
    assert_matrix_close(
        &system.cross_covariance(1.7, 0.6),
        &expected_cross.transpose(),
        1e-10,
        "Cov(X_1.7, X_0.6)",
    );
    let expected_stationary = DMatrix::from_row_slice(
        3,
        3,
        &[
            0.4287310606060605,
            0.09718276515151504,
            0.07227982954545453,
            0.09718276515151504,
            0.055693418560606,
            0.03604012784090908,
            0.07227982954545453,
            0.03604012784090908,
            0.02646697443181819,
        ],
    );
    assert_matrix_close(
        &system.stationary_covariance().unwrap(),
        &expected_stationary,
        1e-12,
        "stationary P",
    );
    let stationary_mean = system.stationary_mean().unwrap();
    // The mean forgets x₀: slowest rate 0.223, e^{−0.223·200} ≈ 4e-20.
    let late_mean = system.mean_at(&x0, 200.0);
    for i in 0..3 {
        assert_close(late_mean[i], stationary_mean[i], 1e-12, "mean at t = 200");
    }
    for (i, want) in [
        -0.6666666666666667,
        -0.21666666666666667,
        -0.07500000000000001,
    ]
    .iter()
    .enumerate()
    {
        assert_close(
            stationary_mean[i],
            *want,
            1e-13,
            &format!("stationary mean {i}"),
        );
    }
    let values = eigenvalues(&system.a);
    let expected_values = [
        (-0.22336340054018908, 0.0),
        (-1.738318299729904, 0.4491059068040717),
        (-1.738318299729904, -0.4491059068040717),
    ];
    for ((re, im), (want_re, want_im)) in values.iter().zip(expected_values.iter()) {
        assert_close(*re, *want_re, 1e-12, "eigenvalue real part");
        assert!(
            (im - want_im).abs() < 1e-12,
            "eigenvalue imaginary part {im}"
        );
    }
}

/// Van Loan's P(t) tends to the Lyapunov solution as t → ∞ for a stable A (the integral
/// ∫₀^∞ e^{As} Q e^{Aᵀs} ds solves A P + P Aᵀ + Q = 0; common practice, no source).
/// The second system is stiff and non-normal (eigenvalues −0.01 and −100).
#[test]
fn van_loan_tends_to_lyapunov() {
    let three = three_state_system();
    // Slowest rate 0.223: e^{−2·0.223·80} ≈ 3e-16.
    assert_matrix_close(
        &three.covariance_at(80.0),
        &three.stationary_covariance().unwrap(),
        1e-12,
        "3-factor limit",
    );
    let stiff = AffineGaussian::new(
        DMatrix::from_row_slice(2, 2, &[-0.01, 5.0, 0.0, -100.0]),
        DVector::zeros(2),
        DMatrix::from_row_slice(2, 2, &[0.1, 0.0, 0.0, 2.0]),
        DMatrix::identity(2, 2),
    )
    .unwrap();
    // scipy.integrate.quad_vec of e^{As} Q e^{Aᵀs} over [0, t].
    for (t, p00, p01, p11) in [
        (
            1.0,
            0.01965329712047333,
            0.0009999000099990174,
            0.02000000000000002,
        ),
        (
            10.0,
            0.18113736656361146,
            0.000999900009999018,
            0.02000000000000002,
        ),
    ] {
        let covariance = stiff.covariance_at(t);
        assert_close(covariance[(0, 0)], p00, 1e-11, "stiff P00");
        assert_close(covariance[(0, 1)], p01, 1e-11, "stiff P01");
        assert_close(covariance[(1, 1)], p11, 1e-11, "stiff P11");
    }
    let limit = stiff.stationary_covariance().unwrap();
    // e^{−2·0.01·2500} ≈ 2e-22.
    let covariance = stiff.covariance_at(2500.0);
    for i in 0..2 {
        for j in 0..2 {
            assert_close(
                covariance[(i, j)],
                limit[(i, j)],
                1e-10,
                &format!("stiff P[{i},{j}]"),
            );
        }
    }
    // The limit is the exact solution of the Lyapunov equation.
    let residual = &stiff.a * &limit + &limit * stiff.a.transpose() + stiff.noise_covariance();
    assert!(
        residual.amax() < 1e-12 * limit.amax(),
        "residual {residual}"
    );
}

/// e^{At} for the damped oscillator A = [[0, 1], [−ω², −2ζω]] against its eigenvalues
/// −ζω ± iω√(1 − ζ²) (common practice, no source), and the exponential against nalgebra's
/// own `exp()` on a handful of matrices (agreement of two implementations).
#[test]
fn eigenvalues_and_exponential_agree_with_known_forms() {
    let (omega, zeta) = (2.0, 0.25);
    let a = DMatrix::from_row_slice(2, 2, &[0.0, 1.0, -omega * omega, -2.0 * zeta * omega]);
    let values = eigenvalues(&a);
    let imaginary = omega * (1.0 - zeta * zeta).sqrt();
    assert_close(values[0].0, -zeta * omega, 1e-13, "oscillator real part");
    assert_close(values[0].1, imaginary, 1e-13, "oscillator imaginary part");
    assert_close(values[1].1, -imaginary, 1e-13, "conjugate");
    assert!(is_stable(&a));
    assert!(!is_stable(&DMatrix::from_row_slice(
        2,
        2,
        &[0.1, 0.0, 0.0, -1.0]
    )));
    assert!(!is_stable(&DMatrix::zeros(2, 3)));
    // A singular drift (a rate and its running integral, rotated so the zero eigenvalue is
    // not on the diagonal) is not stable, though Schur returns its zero eigenvalue as −4e-17.
    let rotation = DMatrix::from_row_slice(2, 2, &[0.6, -0.8, 0.8, 0.6]);
    let singular =
        &rotation * DMatrix::from_row_slice(2, 2, &[0.0, 1.0, 0.0, -0.3]) * rotation.transpose();
    assert!(!is_stable(&singular));

    for (scale, matrix) in [
        (0.01, a.clone()),
        (1.0, a.clone()),
        (7.0, a.clone()),
        (3.0, three_state_system().a),
    ] {
        let scaled = &matrix * scale;
        let ours = matrix_exponential(&scaled);
        let theirs = scaled.clone().exp();
        assert_matrix_close(&ours, &theirs, 1e-12, "exp against nalgebra");
    }
}

#[test]
fn lyapunov_rejects_shape_mismatch() {
    assert!(solve_lyapunov(&DMatrix::zeros(2, 2), &DMatrix::zeros(3, 3)).is_none());
    // A and −A share the eigenvalue 0: the Kronecker system is singular.
    assert!(solve_lyapunov(&DMatrix::zeros(2, 2), &DMatrix::identity(2, 2)).is_none());
}

// ---------------------------------------------------------------------------------------
// Polynomial diffusions
// ---------------------------------------------------------------------------------------

/// dr = κ(θ − r) dt + σ √r dW: drift κθ − κ r, C(r) = σ² r.
fn square_root(speed: f64, level: f64, vol: f64) -> PolynomialSystem {
    PolynomialSystem::new(
        DVector::from_element(1, speed * level),
        DMatrix::from_element(1, 1, -speed),
        DMatrix::zeros(1, 1),
        vec![DMatrix::from_element(1, 1, vol * vol)],
        Vec::new(),
    )
    .unwrap()
}

/// Cox, Ingersoll & Ross 1985 (Econometrica 53, eq. (19), from memory):
/// E[r_t] = θ + (r₀ − θ) e^{−κt},
/// Var r_t = r₀ (σ²/κ)(e^{−κt} − e^{−2κt}) + θ (σ²/(2κ)) (1 − e^{−κt})².
/// Raw moments 3 and 4 from the noncentral chi-square transition (CIR 1985 eq. (18)) via
/// scipy.stats.ncx2.moment(n, 4κθ/σ², r₀e^{−κt}/c, scale = c), c = σ²(1 − e^{−κt})/(4κ).
/// Stationary Gamma(shape 2κθ/σ², scale σ²/(2κ)) (CIR 1985 eq. (20)):
/// E[r^n] = scaleⁿ Π_{j<n} (shape + j).
#[test]
fn square_root_moments_match_cir() {
    let (speed, level, vol, start, t) = (1.8, 0.032, 0.15, 0.0275, 0.5);
    let system = square_root(speed, level, vol);
    let table = system.moments_at(&DVector::from_element(1, start), t, 4);
    let decay = (-speed * t).exp();
    let mean = level + (start - level) * decay;
    let variance = start * vol * vol / speed * (decay - decay * decay)
        + level * vol * vol / (2.0 * speed) * (1.0 - decay).powi(2);
    assert_close(table.mean(0).unwrap(), mean, 1e-12, "CIR mean");
    assert_close(table.variance(0).unwrap(), variance, 1e-10, "CIR variance");
    assert_close(
        table.raw(&[1]).unwrap(),
        0.030170436531167303,
        1e-12,
        "ncx2 m1",
    );
    assert_close(
        table.raw(&[2]).unwrap(),
        0.0010636239819389328,
        1e-12,
        "ncx2 m2",
    );
    assert_close(
        table.raw(&[3]).unwrap(),
        4.27896820923013e-05,
        1e-10,
        "ncx2 m3",
    );
    assert_close(
        table.raw(&[4]).unwrap(),
        1.9306814983197206e-06,
        1e-10,
        "ncx2 m4",
    );

    let stationary = system.stationary_moments(4).unwrap();
    let shape = 2.0 * speed * level / (vol * vol);
    let scale = vol * vol / (2.0 * speed);
    let mut gamma_moment = 1.0;
    for n in 1..=4u32 {
        gamma_moment *= scale * (shape + f64::from(n - 1));
        assert_close(
            stationary.raw(&[n]).unwrap(),
            gamma_moment,
            1e-12,
            &format!("stationary Gamma moment {n}"),
        );
    }
}

/// dX = μ X dt + σ X dW: E[X_t^k] = x₀^k exp(kμt + k(k − 1)σ²t/2) (lognormal moments;
/// common practice, no source). No stationary law for μ > 0.
#[test]
fn geometric_moments_are_lognormal() {
    let (drift, vol, start, t) = (0.07, 0.35, 42.0, 2.5);
    let system = PolynomialSystem::from_affine_loadings(
        DVector::zeros(1),
        DMatrix::from_element(1, 1, drift),
        &DMatrix::zeros(1, 1),
        &[DMatrix::from_element(1, 1, vol)],
        &DMatrix::identity(1, 1),
    )
    .unwrap();
    let table = system.moments_at(&DVector::from_element(1, start), t, 4);
    for k in 1..=4u32 {
        let kf = f64::from(k);
        let expected =
            start.powi(k as i32) * (kf * drift * t + kf * (kf - 1.0) * vol * vol * t / 2.0).exp();
        assert_close(
            table.raw(&[k]).unwrap(),
            expected,
            1e-11,
            &format!("E[X^{k}]"),
        );
    }
    assert!(system.stationary_moments(2).is_none());
}

/// Two correlated geometric processes: ln X_i are jointly Gaussian with means
/// ln x_i + (μ_i − σ_i²/2)t and covariance ρ_ij σ_i σ_j t, so
/// E[X₀^a X₁^b] = exp(a m₀ + b m₁ + ½(a²σ₀² + b²σ₁² + 2abρσ₀σ₁)t)
/// (lognormal moment generating function; common practice, no source).
#[test]
fn correlated_geometric_cross_moments() {
    let drifts = [0.03, -0.02];
    let vols = [0.2, 0.45];
    let rho = -0.35;
    let starts = [1.5, 0.8];
    let t = 1.25;
    let s1 = vec![
        DMatrix::from_row_slice(2, 2, &[vols[0], 0.0, 0.0, 0.0]),
        DMatrix::from_row_slice(2, 2, &[0.0, 0.0, 0.0, vols[1]]),
    ];
    let system = PolynomialSystem::from_affine_loadings(
        DVector::zeros(2),
        DMatrix::from_diagonal(&DVector::from_vec(drifts.to_vec())),
        &DMatrix::zeros(2, 2),
        &s1,
        &DMatrix::from_row_slice(2, 2, &[1.0, rho, rho, 1.0]),
    )
    .unwrap();
    let table = system.moments_at(&DVector::from_vec(starts.to_vec()), t, 4);
    let log_means: Vec<f64> = (0..2)
        .map(|i| starts[i].ln() + (drifts[i] - vols[i] * vols[i] / 2.0) * t)
        .collect();
    for (a, b) in [(1u32, 1u32), (2, 1), (1, 3), (2, 2), (0, 4)] {
        let (af, bf) = (f64::from(a), f64::from(b));
        let log_variance = (af * af * vols[0] * vols[0]
            + bf * bf * vols[1] * vols[1]
            + 2.0 * af * bf * rho * vols[0] * vols[1])
            * t;
        let expected = (af * log_means[0] + bf * log_means[1] + 0.5 * log_variance).exp();
        assert_close(
            table.raw(&[a, b]).unwrap(),
            expected,
            1e-11,
            &format!("E[X0^{a} X1^{b}]"),
        );
    }
}

/// Log-price with square-root variance (the Heston 1993 dynamics, Review of Financial
/// Studies 6): dY = (μ − v/2) dt + √v dW₁, dv = κ(θ − v) dt + ξ√v dW₂, d⟨W₁, W₂⟩ = ρ dt.
/// C(Y, v) = v [[1, ρξ], [ρξ, ξ²]] is linear in v. E[Y_t] = Y₀ + μt − ½∫₀ᵗ E[v_s] ds
/// = Y₀ + μt − ½[θt + (v₀ − θ)(1 − e^{−κt})/κ] with the CIR mean of v (CIR 1985 eq. (19));
/// E[v_t] and Var v_t as in CIR 1985 eq. (19).
#[test]
fn log_price_with_square_root_variance() {
    let (drift, speed, level, vol_of_var, rho) = (0.04, 2.5, 0.05, 0.6, -0.7);
    let (log_price, variance0, t) = (4.6, 0.09, 0.75);
    let system = PolynomialSystem::new(
        DVector::from_vec(vec![drift, speed * level]),
        DMatrix::from_row_slice(2, 2, &[0.0, -0.5, 0.0, -speed]),
        DMatrix::zeros(2, 2),
        vec![
            DMatrix::zeros(2, 2),
            DMatrix::from_row_slice(
                2,
                2,
                &[
                    1.0,
                    rho * vol_of_var,
                    rho * vol_of_var,
                    vol_of_var * vol_of_var,
                ],
            ),
        ],
        Vec::new(),
    )
    .unwrap();
    let table = system.moments_at(&DVector::from_vec(vec![log_price, variance0]), t, 4);
    let decay = (-speed * t).exp();
    let expected_log_mean =
        log_price + drift * t - 0.5 * (level * t + (variance0 - level) * (1.0 - decay) / speed);
    assert_close(
        table.mean(0).unwrap(),
        expected_log_mean,
        1e-12,
        "E[log price]",
    );
    let expected_variance_mean = level + (variance0 - level) * decay;
    assert_close(
        table.mean(1).unwrap(),
        expected_variance_mean,
        1e-12,
        "E[v]",
    );
    let expected_variance_variance = variance0 * vol_of_var * vol_of_var / speed
        * (decay - decay * decay)
        + level * vol_of_var * vol_of_var / (2.0 * speed) * (1.0 - decay).powi(2);
    assert_close(
        table.variance(1).unwrap(),
        expected_variance_variance,
        1e-10,
        "Var v",
    );
    // The log-price does not revert: no stationary law.
    assert!(system.stationary_moments(2).is_none());
}

/// With constant diffusion the polynomial engine must reproduce the Gaussian engine, and a
/// Gaussian has fourth central moment 3σ⁴ and third 0 (common practice, no source).
#[test]
fn constant_diffusion_is_gaussian() {
    let gaussian = three_state_system();
    let q = gaussian.noise_covariance();
    let polynomial = PolynomialSystem::new(
        gaussian.b.clone(),
        gaussian.a.clone(),
        q,
        Vec::new(),
        Vec::new(),
    )
    .unwrap();
    let x0 = DVector::from_vec(vec![1.0, 0.5, -0.3]);
    let t = 1.7;
    let table = polynomial.moments_at(&x0, t, 4);
    let mean = gaussian.mean_at(&x0, t);
    let covariance = gaussian.covariance_at(t);
    for i in 0..3 {
        assert_close(
            table.mean(i).unwrap(),
            mean[i],
            1e-12,
            "mean vs Gaussian engine",
        );
        for j in 0..3 {
            let got = table.covariance(i, j).unwrap();
            assert!(
                (got - covariance[(i, j)]).abs() < 1e-12 * covariance.amax(),
                "covariance ({i}, {j}): {got} vs {}",
                covariance[(i, j)]
            );
        }
        let mut alpha = [0u32; 3];
        alpha[i] = 4;
        let variance = covariance[(i, i)];
        assert_close(
            table.central(&alpha).unwrap(),
            3.0 * variance * variance,
            1e-8,
            "Gaussian fourth central moment",
        );
        alpha[i] = 3;
        let third = table.central(&alpha).unwrap();
        assert!(
            third.abs() < 1e-10 * variance.powf(1.5),
            "third central moment {third}"
        );
    }
    let stationary = polynomial.stationary_moments(2).unwrap();
    let lyapunov = gaussian.stationary_covariance().unwrap();
    assert_matrix_close(
        &stationary.covariance_matrix().unwrap(),
        &lyapunov,
        1e-12,
        "stationary covariance vs Lyapunov",
    );
}

/// dX = κ(θ − X) dt + σ X dW has an inverse-gamma stationary law with shape 1 + 2κ/σ² and
/// scale 2κθ/σ² (Nelson 1990, J. Econometrics 45, "ARCH models as diffusion
/// approximations", from memory): E[X^n] = scaleⁿ / Π_{j=1..n}(shape − j), finite only for
/// n < shape. The engine must give these and refuse orders whose moments diverge.
#[test]
fn stationary_moments_exist_only_below_the_tail_index() {
    let (speed, level, vol) = (3.0, 0.2, 0.8);
    let system = PolynomialSystem::from_affine_loadings(
        DVector::from_element(1, speed * level),
        DMatrix::from_element(1, 1, -speed),
        &DMatrix::zeros(1, 1),
        &[DMatrix::from_element(1, 1, vol)],
        &DMatrix::identity(1, 1),
    )
    .unwrap();
    let shape = 1.0 + 2.0 * speed / (vol * vol); // 10.375
    let scale = 2.0 * speed * level / (vol * vol);
    let table = system.stationary_moments(4).unwrap();
    let mut expected = 1.0;
    for n in 1..=4u32 {
        expected *= scale / (shape - f64::from(n));
        assert_close(
            table.raw(&[n]).unwrap(),
            expected,
            1e-12,
            &format!("inverse-gamma moment {n}"),
        );
    }
    // σ large: shape = 1 + 2·3/9 ≈ 1.67, so the second moment diverges.
    let heavy = PolynomialSystem::from_affine_loadings(
        DVector::from_element(1, speed * level),
        DMatrix::from_element(1, 1, -speed),
        &DMatrix::zeros(1, 1),
        &[DMatrix::from_element(1, 1, 3.0)],
        &DMatrix::identity(1, 1),
    )
    .unwrap();
    assert!(heavy.stationary_moments(1).is_some());
    assert!(heavy.stationary_moments(2).is_none());
}

/// A large level with a small spread: the moments are kept about the start (and about the
/// stationary mean), so the variance of a Vasicek process at level 10⁶ with σ = 0.01 keeps
/// its digits; Var = σ²(1 − e^{−2κt})/(2κ), stationary σ²/(2κ) (Vasicek 1977), fourth
/// central moment 3 Var² (Gaussian; common practice, no source).
///
/// What is left is the cancellation of the drift's displacement: started 3 away from the
/// level, E[(X − x₀)²] ≈ 5.8 holds a variance of 6·10⁻⁵, so about 5 digits go (hence 1e-10
/// there); the fourth moment is checked from a start at the level, where nothing cancels.
#[test]
fn polynomial_moments_keep_digits_at_large_levels() {
    let (speed, level, vol, t) = (0.8, 1e6, 0.01, 2.0);
    let system = PolynomialSystem::new(
        DVector::from_element(1, speed * level),
        DMatrix::from_element(1, 1, -speed),
        DMatrix::from_element(1, 1, vol * vol),
        Vec::new(),
        Vec::new(),
    )
    .unwrap();
    let decay = (-speed * t).exp();
    let variance = vol * vol * (1.0 - decay * decay) / (2.0 * speed);

    let displaced_start = level + 3.0;
    let table = system.moments_at(&DVector::from_element(1, displaced_start), t, 4);
    assert_close(
        table.mean(0).unwrap(),
        level + (displaced_start - level) * decay,
        1e-14,
        "mean",
    );
    assert_close(table.variance(0).unwrap(), variance, 1e-10, "variance");
    // Raw moments are large numbers, and still right to double precision.
    let mean = table.mean(0).unwrap();
    assert_close(
        table.raw(&[2]).unwrap(),
        mean * mean + variance,
        1e-14,
        "E[X²]",
    );

    let table = system.moments_at(&DVector::from_element(1, level), t, 4);
    assert_close(table.mean(0).unwrap(), level, 1e-15, "mean from the level");
    assert_close(
        table.variance(0).unwrap(),
        variance,
        1e-12,
        "variance from the level",
    );
    assert_close(
        table.central(&[4]).unwrap(),
        3.0 * variance * variance,
        1e-10,
        "fourth central moment",
    );

    let stationary = system.stationary_moments(4).unwrap();
    assert_close(stationary.mean(0).unwrap(), level, 1e-15, "stationary mean");
    assert_close(
        stationary.variance(0).unwrap(),
        vol * vol / (2.0 * speed),
        1e-12,
        "stationary variance",
    );
    let stationary_variance = vol * vol / (2.0 * speed);
    assert_close(
        stationary.central(&[4]).unwrap(),
        3.0 * stationary_variance * stationary_variance,
        1e-10,
        "stationary fourth central moment",
    );
}

#[test]
fn polynomial_basis_cap_is_an_error_not_a_hang() {
    let n = 12;
    let system = PolynomialSystem::new(
        DVector::zeros(n),
        DMatrix::identity(n, n) * -1.0,
        DMatrix::identity(n, n),
        Vec::new(),
        Vec::new(),
    )
    .unwrap();
    // C(12 + 4, 4) = 1820 monomials, above the cap (checked when compiling).
    const _: () = assert!(MAX_BASIS_SIZE < 1820);
    let result = system.try_moments_at(&DVector::zeros(n), 1.0, 4);
    assert!(matches!(result, Err(message) if message.contains("monomials")));
    assert!(system.stationary_moments(4).is_none());
}

// ---------------------------------------------------------------------------------------
// ODE integration and quadrature
// ---------------------------------------------------------------------------------------

/// y' = y, y(0) = 1 gives e^t (common practice, no source), forwards and backwards.
#[test]
fn integrator_reproduces_exponential() {
    let growth = |_: f64, y: &[f64], dy: &mut [f64]| dy[0] = y[0];
    let forward = integrate(growth, &[1.0], 0.0, 1.0, 1e-12, 1e-14).unwrap();
    assert_close(forward[0], std::f64::consts::E, 1e-10, "e");
    let backward = integrate(growth, &[std::f64::consts::E], 1.0, 0.0, 1e-12, 1e-14).unwrap();
    assert_close(backward[0], 1.0, 1e-10, "back to 1");
    let times = [0.5, 1.0, 2.0, 3.0];
    let path = integrate_through(growth, &[1.0], 0.0, &times, 1e-12, 1e-14).unwrap();
    for (t, y) in times.iter().zip(path.iter()) {
        assert_close(y[0], t.exp(), 1e-10, &format!("e^{t}"));
    }
    assert!(matches!(
        integrate_through(growth, &[1.0], 0.0, &[1.0, 0.5], 1e-8, 1e-10),
        Err(OdeError::InvalidInput(_))
    ));
}

/// y₀' = y₁, y₁' = −y₀ from (1, 0): (cos t, −sin t); cos 10 = −0.8390715290764524,
/// −sin 10 = 0.5440211108893698 (numpy).
#[test]
fn integrator_reproduces_rotation() {
    let rotation = |_: f64, y: &[f64], dy: &mut [f64]| {
        dy[0] = y[1];
        dy[1] = -y[0];
    };
    let end = integrate(rotation, &[1.0, 0.0], 0.0, 10.0, 1e-12, 1e-14).unwrap();
    assert!((end[0] - (-0.8390715290764524)).abs() < 1e-10, "{}", end[0]);
    assert!((end[1] - 0.5440211108893698).abs() < 1e-10, "{}", end[1]);
}

/// A time-dependent mean equation m' = κ(θ(t) − m) with θ(t) = θ₀ + a sin ωt. By the
/// integrating factor (by hand): m(t) = θ₀ + (m₀ − θ₀)e^{−κt}
/// + κa [κ sin ωt − ω cos ωt + ω e^{−κt}] / (κ² + ω²).
#[test]
fn integrator_solves_time_dependent_mean() {
    let (speed, base, amplitude, frequency, start) =
        (1.4, 0.03, 0.01, 2.0 * std::f64::consts::PI, 0.05);
    let rhs = |t: f64, m: &[f64], dm: &mut [f64]| {
        dm[0] = speed * (base + amplitude * (frequency * t).sin() - m[0]);
    };
    for t in [0.3, 1.0, 4.25] {
        let got = integrate(rhs, &[start], 0.0, t, 1e-12, 1e-15).unwrap()[0];
        let decay = (-speed * t).exp();
        let expected = base
            + (start - base) * decay
            + speed
                * amplitude
                * (speed * (frequency * t).sin() - frequency * (frequency * t).cos()
                    + frequency * decay)
                / (speed * speed + frequency * frequency);
        assert_close(got, expected, 1e-10, &format!("m({t})"));
    }
}

/// The covariance equation P' = A P + P Aᵀ + Q, P(0) = 0, integrated by the ODE engine,
/// against the scipy reference P(1.7) of the 3-state system above.
#[test]
fn integrator_solves_covariance_equation() {
    let system = three_state_system();
    let a = system.a.clone();
    let q = system.noise_covariance();
    let rhs = |_: f64, p: &[f64], dp: &mut [f64]| {
        let p = DMatrix::from_column_slice(3, 3, p);
        let derivative = &a * &p + &p * a.transpose() + &q;
        dp.copy_from_slice(derivative.as_slice());
    };
    let end = integrate(rhs, &[0.0; 9], 0.0, 1.7, 1e-12, 1e-15).unwrap();
    let got = DMatrix::from_column_slice(3, 3, &end);
    assert_matrix_close(&got, &system.covariance_at(1.7), 1e-10, "ODE vs Van Loan");
    assert_close(got[(0, 0)], 0.13704706752179466, 1e-10, "ODE vs scipy P00");
}

/// ∫₀^π sin x dx = 2; ∫_{−∞}^{∞} e^{−x²} dx = √π; ∫₀¹ e^{−x²} dx = (√π/2) erf(1)
/// = 0.7468241328124269 (scipy.special.erf); ∫₀^∞ e^{−x} dx = 1; ∫₀¹ √x dx = 2/3;
/// ∫₀¹ ln x dx = −1 (common practice, no source).
#[test]
fn quadrature_matches_known_integrals() {
    let pi = std::f64::consts::PI;
    assert_close(quad(f64::sin, 0.0, pi, 1e-12).unwrap(), 2.0, 1e-10, "∫ sin");
    assert_close(
        quad(f64::sin, pi, 0.0, 1e-12).unwrap(),
        -2.0,
        1e-10,
        "reversed ∫ sin",
    );
    let gaussian = |x: f64| (-x * x).exp();
    assert_close(
        quad(gaussian, f64::NEG_INFINITY, f64::INFINITY, 1e-12).unwrap(),
        pi.sqrt(),
        1e-10,
        "∫ e^{-x²} over the line",
    );
    assert_close(
        quad(gaussian, 0.0, 1.0, 1e-12).unwrap(),
        0.7468241328124269,
        1e-12,
        "∫₀¹ e^{-x²}",
    );
    assert_close(
        quad(|x: f64| (-x).exp(), 0.0, f64::INFINITY, 1e-12).unwrap(),
        1.0,
        1e-10,
        "∫₀^∞ e^{-x}",
    );
    assert_close(
        quad(|x: f64| x.exp(), f64::NEG_INFINITY, 0.0, 1e-12).unwrap(),
        1.0,
        1e-10,
        "∫_{-∞}^0 e^{x}",
    );
    assert_close(
        quad(f64::sqrt, 0.0, 1.0, 1e-12).unwrap(),
        2.0 / 3.0,
        1e-10,
        "∫ √x",
    );
    assert_close(
        quad(f64::ln, 0.0, 1.0, 1e-11).unwrap(),
        -1.0,
        1e-10,
        "∫ ln x",
    );
    // An integral equal to zero converges through the absolute floor.
    assert!(quad(f64::sin, -pi, pi, 1e-12).unwrap().abs() < 1e-14);
    assert!(matches!(
        quad(|x: f64| 1.0 / x, -1.0, 1.0, 1e-12),
        Err(OdeError::NonFinite { .. }) | Err(OdeError::QuadratureNotConverged { .. })
    ));
}

// ---------------------------------------------------------------------------------------
// Hostile input: every public entry point answers (NaN, None or an error), never panics.
// ---------------------------------------------------------------------------------------

#[test]
fn hostile_inputs_never_panic() {
    let awkward_numbers = [
        f64::NAN,
        f64::INFINITY,
        f64::NEG_INFINITY,
        -1.0,
        0.0,
        1e-300,
        1e300,
    ];
    // Empty systems.
    let empty = AffineGaussian::new(
        DMatrix::zeros(0, 0),
        DVector::zeros(0),
        DMatrix::zeros(0, 0),
        DMatrix::zeros(0, 0),
    )
    .unwrap();
    assert_eq!(empty.mean_at(&DVector::zeros(0), 1.0).len(), 0);
    assert_eq!(empty.covariance_at(1.0).shape(), (0, 0));
    let _ = empty.stationary_covariance();
    let _ = empty.stationary_mean();
    let _ = empty.cross_covariance(0.5, 1.0);
    assert!(eigenvalues(&DMatrix::zeros(0, 0)).is_empty());

    // Awkward coefficients placed straight in the public fields, and awkward times.
    let system = three_state_system();
    let x0 = DVector::from_vec(vec![1.0, 0.5, -0.3]);
    for &value in &awkward_numbers {
        let mut broken = system.clone();
        broken.a[(0, 1)] = value;
        let mean = broken.mean_at(&x0, 1.0);
        let covariance = broken.covariance_at(1.0);
        let _ = broken.cross_covariance(0.2, 3.0);
        let _ = broken.stationary_covariance();
        let _ = broken.stationary_mean();
        let _ = eigenvalues(&broken.a);
        let _ = matrix_exponential(&(&broken.a * value));
        if !value.is_finite() {
            assert!(mean.iter().all(|v| v.is_nan()), "mean with {value}");
            assert!(
                covariance.iter().all(|v| v.is_nan()),
                "covariance with {value}"
            );
        }
        let times = system.mean_at(&x0, value);
        let spreads = system.covariance_at(value);
        if !(value.is_finite() && value >= 0.0) {
            assert!(times.iter().all(|v| v.is_nan()), "mean at t = {value}");
            assert!(
                spreads.iter().all(|v| v.is_nan()),
                "covariance at t = {value}"
            );
        }
        let _ = system.cross_covariance(value, 1.0);
        let _ = system.cross_covariance(1.0, value);
    }

    // Polynomial systems.
    let constant_only = PolynomialSystem::new(
        DVector::zeros(0),
        DMatrix::zeros(0, 0),
        DMatrix::zeros(0, 0),
        Vec::new(),
        Vec::new(),
    )
    .unwrap();
    assert_eq!(
        constant_only
            .moments_at(&DVector::zeros(0), 1.0, 4)
            .values(),
        &[1.0]
    );
    assert!(constant_only.stationary_moments(3).is_some());
    let cir = square_root(1.8, 0.032, 0.15);
    for &value in &awkward_numbers {
        let table = cir.moments_at(&DVector::from_element(1, value), 1.0, 4);
        let _ = table.central(&[4]);
        let _ = cir.moments_at(&DVector::from_element(1, 0.03), value, 4);
        assert!(
            PolynomialSystem::new(
                DVector::from_element(1, value),
                DMatrix::from_element(1, 1, -1.0),
                DMatrix::zeros(1, 1),
                Vec::new(),
                Vec::new(),
            )
            .is_ok()
                == value.is_finite()
        );
    }
    let table = cir.moments_at(&DVector::from_element(1, 0.03), 1.0, 2);
    assert_eq!(table.raw(&[3]), None);
    assert_eq!(table.raw(&[1, 1]), None);
    assert_eq!(table.central(&[3]), None);
    assert_eq!(table.covariance(0, 5), None);

    // ODE and quadrature.
    for &value in &awkward_numbers {
        let _ = integrate(
            |_, y, dy| dy[0] = value * y[0],
            &[1.0],
            0.0,
            1.0,
            1e-8,
            1e-10,
        );
        let _ = integrate(|_, y, dy| dy[0] = y[0], &[value], 0.0, 1.0, 1e-8, 1e-10);
        let _ = integrate(|_, y, dy| dy[0] = y[0], &[1.0], 0.0, value, 1e-8, 1e-10);
        let _ = integrate(|_, y, dy| dy[0] = y[0], &[1.0], 0.0, 1.0, value, value);
        let _ = quad(|x| value * x, 0.0, 1.0, 1e-8);
        let _ = quad(|x| x, value, 1.0, 1e-8);
        let _ = quad(|x| x, 0.0, 1.0, value);
    }
    assert!(integrate(|_, _, _| {}, &[], 0.0, 1.0, 1e-8, 1e-10)
        .unwrap()
        .is_empty());
}

/// Agreement of two independent methods on many drawn systems (a fixed linear congruential
/// sequence, so the test is repeatable): Van Loan with doubling against Dormand–Prince on
/// P' = A P + P Aᵀ + Q, and the Lyapunov solution against its own equation.
#[test]
fn van_loan_agrees_with_moment_equations_on_drawn_systems() {
    let mut state: u64 = 0x5DEC_C0DE;
    let mut draw = move || {
        // Knuth's MMIX multiplier and increment (from memory); any full-period pair would do.
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (state >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    };
    for case in 0..24 {
        let n = 2 + case % 3;
        let m = 1 + case % 2;
        let a = DMatrix::from_fn(n, n, |i, j| {
            let entry = draw();
            if i == j {
                entry - 1.5
            } else {
                entry
            }
        });
        let loadings = DMatrix::from_fn(n, m, |_, _| 0.3 * draw());
        let rho = 0.9 * draw();
        let corr = if m == 2 {
            DMatrix::from_row_slice(2, 2, &[1.0, rho, rho, 1.0])
        } else {
            DMatrix::identity(1, 1)
        };
        let system = AffineGaussian::new(a.clone(), DVector::zeros(n), loadings, corr).unwrap();
        let q = system.noise_covariance();
        let t = 0.5 + 3.0 * (draw() + 1.0);
        let rhs = |_: f64, p: &[f64], dp: &mut [f64]| {
            let p = DMatrix::from_column_slice(n, n, p);
            let derivative = &a * &p + &p * a.transpose() + &q;
            dp.copy_from_slice(derivative.as_slice());
        };
        let integrated = integrate(rhs, &vec![0.0; n * n], 0.0, t, 1e-12, 1e-16).unwrap();
        let integrated = DMatrix::from_column_slice(n, n, &integrated);
        assert_matrix_close(
            &system.covariance_at(t),
            &integrated,
            1e-9,
            &format!("case {case}: Van Loan vs ODE"),
        );
        if let Some(stationary) = system.stationary_covariance() {
            let residual = &a * &stationary + &stationary * a.transpose() + &q;
            assert!(
                residual.amax() <= 1e-12 * q.amax().max(stationary.amax()),
                "case {case}: Lyapunov residual {residual}"
            );
        }
    }
}
