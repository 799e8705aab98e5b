//! ln I_ν(z), the logarithm of the modified Bessel function of the first kind, for ν > −1
//! and z > 0, without forming I_ν(z) itself (it overflows past z ≈ 709), and its scaled
//! form ln(e^{−z} I_ν(z)), which a density subtracts large terms from without losing
//! digits to cancellation.
//!
//! Two evaluations, each used where it converges fast to full precision:
//! - the power series I_ν(z) = Σ_k (z/2)^{2k+ν} / (k! Γ(k+ν+1)) (Abramowitz & Stegun 1964,
//!   9.6.10), summed in log space outwards from its largest term;
//! - for z ≥ max(30, 2ν²), Hankel's asymptotic expansion
//!   I_ν(z) ~ e^z / √(2πz) Σ_k (−1)^k a_k(ν) / z^k with
//!   a_k = Π_{j=1..k} (4ν² − (2j−1)²) / (k! 8^k) (A&S 9.7.1), truncated before its smallest
//!   term; there the terms fall by at least a factor 4 at first and the smallest is
//!   below e^{−2z}.

use statrs::function::gamma::{digamma, ln_gamma};

/// Terms below this fraction of the largest are dropped.
const NEGLIGIBLE: f64 = 1e-18;

/// ln I_ν(z); NaN when ν ≤ −1, z < 0 or either is not finite; −∞ at z = 0 for ν > 0.
pub fn ln_bessel_i(nu: f64, z: f64) -> f64 {
    ln_bessel_i_scaled(nu, z) + z
}

/// ln(e^{−z} I_ν(z)), the logarithm of the exponentially scaled function (scipy's `ive`).
pub fn ln_bessel_i_scaled(nu: f64, z: f64) -> f64 {
    if !(nu.is_finite() && z.is_finite()) || nu <= -1.0 || z < 0.0 {
        return f64::NAN;
    }
    if z == 0.0 {
        return if nu == 0.0 {
            0.0
        } else if nu > 0.0 {
            f64::NEG_INFINITY
        } else {
            f64::INFINITY
        };
    }
    if z >= 30.0_f64.max(2.0 * nu * nu) {
        hankel(nu, z)
    } else {
        series(nu, z)
    }
}

fn series(nu: f64, z: f64) -> f64 {
    let half = z / 2.0;
    let ln_half = half.ln();
    let q = half * half;
    // The largest term: k (k + ν) ≈ (z/2)².
    let peak = ((-nu + (nu * nu + z * z).sqrt()) / 2.0).floor().max(0.0);
    let ln_peak = (2.0 * peak + nu) * ln_half - ln_gamma(peak + 1.0) - ln_gamma(peak + nu + 1.0);
    // The terms besides the largest (which is 1 after scaling), kept apart so that
    // ln(1 + rest) keeps its digits when rest is tiny (small z).
    let mut rest = 0.0;
    // Upwards: t_{k+1}/t_k = (z/2)² / ((k+1)(k+ν+1)).
    let mut term = 1.0;
    let mut k = peak;
    loop {
        term *= q / ((k + 1.0) * (k + nu + 1.0));
        rest += term;
        k += 1.0;
        if term < NEGLIGIBLE * (1.0 + rest) {
            break;
        }
    }
    // Downwards: t_{k−1}/t_k = k (k+ν) / (z/2)².
    let mut term = 1.0;
    let mut k = peak;
    while k >= 1.0 {
        term *= k * (k + nu) / q;
        rest += term;
        k -= 1.0;
        if term < NEGLIGIBLE * (1.0 + rest) {
            break;
        }
    }
    ln_peak - z + rest.ln_1p()
}

fn hankel(nu: f64, z: f64) -> f64 {
    let mu = 4.0 * nu * nu;
    let inverse = 1.0 / (8.0 * z);
    let mut sum = 1.0;
    let mut term = 1.0_f64;
    for (k, reciprocal) in RECIPROCALS.iter().enumerate() {
        let odd = 2.0 * k as f64 + 1.0;
        let next = -term * (mu - odd * odd) * inverse * reciprocal;
        if next.abs() >= term.abs() || next == 0.0 {
            break;
        }
        sum += next;
        term = next;
        if term.abs() < NEGLIGIBLE {
            break;
        }
    }
    // −½ ln(2πz) + ln(sum) with one logarithm.
    0.5 * (sum * sum / (2.0 * std::f64::consts::PI * z)).ln()
}

/// Λ(ν, z) = ln(e^{−z} I_ν(z)) with its first and second partial derivatives in ν and z,
/// for the analytic gradient and Hessian of the square-root likelihood.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct ScaledLogBessel {
    pub value: f64,
    pub d_nu: f64,
    pub d_z: f64,
    pub d_nu_nu: f64,
    pub d_nu_z: f64,
    pub d_z_z: f64,
}

/// [`ln_bessel_i_scaled`] with its derivatives, from the same two evaluations each
/// differentiated term by term: in the power series the derivative of the log of a term
/// in ν is ln(z/2) − ψ(k+ν+1) and in z is (2k+ν)/z, so the derivatives of the log of the
/// sum are means and covariances of these under the terms' weights (A&S 6.3.5 and 6.4.6
/// carry ψ and ψ′ from the largest term to its neighbours); in Hankel's expansion each
/// term is a polynomial in μ = 4ν² times z^{−k}. NaN outside the domain of the value.
pub fn ln_bessel_i_scaled_derivatives(nu: f64, z: f64) -> ScaledLogBessel {
    if !(nu.is_finite() && z.is_finite()) || nu <= -1.0 || z <= 0.0 {
        return ScaledLogBessel {
            value: f64::NAN,
            ..ScaledLogBessel::default()
        };
    }
    if z >= 30.0_f64.max(2.0 * nu * nu) {
        hankel_derivatives(nu, z)
    } else {
        series_derivatives(nu, z)
    }
}

/// Weighted sums over the terms of the power series, relative to the largest term: `du`
/// is the ν-derivative of the log of a term minus that of the largest, `dk` its index
/// minus the largest's.
#[derive(Default)]
struct Moments {
    weight: f64,
    du: f64,
    dk: f64,
    du_du: f64,
    du_dk: f64,
    dk_dk: f64,
    trigamma: f64,
}

impl Moments {
    fn add(&mut self, w: f64, du: f64, dk: f64, trigamma: f64) {
        self.weight += w;
        self.du += w * du;
        self.dk += w * dk;
        self.du_du += w * du * du;
        self.du_dk += w * du * dk;
        self.dk_dk += w * dk * dk;
        self.trigamma += w * trigamma;
    }
}

fn series_derivatives(nu: f64, z: f64) -> ScaledLogBessel {
    let half = z / 2.0;
    let ln_half = half.ln();
    let q = half * half;
    let peak = ((-nu + (nu * nu + z * z).sqrt()) / 2.0).floor().max(0.0);
    let ln_peak = (2.0 * peak + nu) * ln_half - ln_gamma(peak + 1.0) - ln_gamma(peak + nu + 1.0);
    let psi_peak = digamma(peak + nu + 1.0);
    let trigamma_peak = trigamma(peak + nu + 1.0);
    let mut m = Moments::default();
    m.add(1.0, 0.0, 0.0, trigamma_peak);
    // Upwards: ψ(x+1) = ψ(x) + 1/x, ψ′(x+1) = ψ′(x) − 1/x² with x = k + ν + 1.
    let (mut term, mut k, mut du, mut tri) = (1.0, peak, 0.0, trigamma_peak);
    loop {
        let x = k + nu + 1.0;
        term *= q / ((k + 1.0) * x);
        du -= 1.0 / x;
        tri -= 1.0 / (x * x);
        k += 1.0;
        m.add(term, du, k - peak, tri);
        if term < NEGLIGIBLE * m.weight {
            break;
        }
    }
    // Downwards: ψ(x−1) = ψ(x) − 1/(x−1), ψ′(x−1) = ψ′(x) + 1/(x−1)².
    let (mut term, mut k, mut du, mut tri) = (1.0, peak, 0.0, trigamma_peak);
    while k >= 1.0 {
        let x = k + nu;
        term *= k * x / q;
        du += 1.0 / x;
        tri += 1.0 / (x * x);
        k -= 1.0;
        m.add(term, du, k - peak, tri);
        if term < NEGLIGIBLE * m.weight {
            break;
        }
    }
    let w = m.weight;
    let (mean_du, mean_dk) = (m.du / w, m.dk / w);
    let var_du = (m.du_du / w - mean_du * mean_du).max(0.0);
    let var_dk = (m.dk_dk / w - mean_dk * mean_dk).max(0.0);
    let cov = m.du_dk / w - mean_du * mean_dk;
    // A term's log: (2k+ν) ln(z/2) − ln Γ(k+1) − ln Γ(k+ν+1).
    let mean_index = peak + mean_dk;
    ScaledLogBessel {
        value: ln_peak - z + (w - 1.0).ln_1p(),
        d_nu: ln_half - psi_peak + mean_du,
        d_z: (2.0 * mean_index + nu) / z - 1.0,
        d_nu_nu: var_du - m.trigamma / w,
        d_nu_z: 2.0 * cov / z + 1.0 / z,
        d_z_z: 4.0 * var_dk / (z * z) - (2.0 * mean_index + nu) / (z * z),
    }
}

fn hankel_derivatives(nu: f64, z: f64) -> ScaledLogBessel {
    let mu = 4.0 * nu * nu;
    let inverse = 1.0 / (8.0 * z);
    // Sums of the terms t_k and of their derivatives in μ (m), z (via −k t_k / z).
    let (mut s, mut s_m, mut s_mm, mut s_k, mut s_kk, mut s_km) = (1.0, 0.0, 0.0, 0.0, 0.0, 0.0);
    let (mut t, mut t_m, mut t_mm) = (1.0_f64, 0.0, 0.0);
    for (k, reciprocal) in RECIPROCALS.iter().enumerate() {
        let odd = 2.0 * k as f64 + 1.0;
        let factor = -inverse * reciprocal;
        let ratio = factor * (mu - odd * odd);
        let next = t * ratio;
        if next.abs() >= t.abs() || next == 0.0 {
            break;
        }
        t_mm = t_mm * ratio + 2.0 * t_m * factor;
        t_m = t_m * ratio + t * factor;
        t = next;
        let index = k as f64 + 1.0;
        s += t;
        s_m += t_m;
        s_mm += t_mm;
        s_k += index * t;
        s_kk += index * (index + 1.0) * t;
        s_km += index * t_m;
        if t.abs() < NEGLIGIBLE {
            break;
        }
    }
    // ∂S/∂z = −Σ k t_k / z, ∂²S/∂z² = Σ k(k+1) t_k / z², ∂²S/∂μ∂z = −Σ k ∂t_k/∂μ / z.
    let (a_m, a_z) = (s_m / s, -s_k / (z * s));
    let a_mm = s_mm / s - a_m * a_m;
    let a_zz = s_kk / (z * z * s) - a_z * a_z;
    let a_mz = -s_km / (z * s) - a_m * a_z;
    // μ = 4ν²: ∂/∂ν = 8ν ∂/∂μ.
    ScaledLogBessel {
        value: 0.5 * (s * s / (2.0 * std::f64::consts::PI * z)).ln(),
        d_nu: 8.0 * nu * a_m,
        d_z: -0.5 / z + a_z,
        d_nu_nu: 64.0 * nu * nu * a_mm + 8.0 * a_m,
        d_nu_z: 8.0 * nu * a_mz,
        d_z_z: 0.5 / (z * z) + a_zz,
    }
}

/// ψ′(x) for x > 0: the recurrence ψ′(x) = ψ′(x+1) + 1/x² up to x ≥ 12, then the
/// asymptotic series 1/x + 1/(2x²) + Σ B_{2k}/x^{2k+1} (A&S 6.4.6 and 6.4.12).
fn trigamma(x: f64) -> f64 {
    let mut x = x;
    let mut total = 0.0;
    while x < 12.0 {
        total += 1.0 / (x * x);
        x += 1.0;
    }
    let r = 1.0 / (x * x);
    // B2 = 1/6, B4 = −1/30, B6 = 1/42, B8 = −1/30, B10 = 5/66.
    let tail =
        r * (1.0 / 6.0 - r * (1.0 / 30.0 - r * (1.0 / 42.0 - r * (1.0 / 30.0 - r * 5.0 / 66.0))));
    total + (1.0 + 0.5 / x + tail) / x
}

/// 1/k for k = 1..64: the expansion multiplies instead of dividing in its inner loop.
const RECIPROCALS: [f64; 64] = {
    let mut table = [0.0; 64];
    let mut k = 0;
    while k < 64 {
        table[k] = 1.0 / (k as f64 + 1.0);
        k += 1;
    }
    table
};

#[cfg(test)]
mod tests {
    use super::*;

    /// (ν, z, ln I_ν(z)) from scipy 1.17.1: `np.log(scipy.special.ive(nu, z)) + z`
    /// (ive is the exponentially scaled Bessel function, Amos' algorithm).
    /// The scaled form is compared too, to the digits that the sum left.
    const SCIPY: [(f64, f64, f64); 14] = [
        (0.5, 0.1, -1.3754177876781688),
        (0.0, 0.001, 2.499999844061702e-07),
        (2.3, 5.0, 2.724139431728159),
        (7.25, 40.0, 36.57623416231119),
        (0.3, 120.0, 116.68798506392426),
        (12.0, 150.0, 146.0952289761599),
        (3.5, 800.0, 795.7312509213538),
        (40.0, 900.0, 894.790766460908),
        (1.2, 5000.0, 4994.822345859186),
        (0.0, 30000.0, 29993.92658930321),
        (-0.4, 2.0, 0.7832228394909322),
        (-0.4, 700.0, 695.805585630973),
        (25.0, 60.0, 51.85869226827387),
        (60.0, 3000.0, 2994.4778393380675),
    ];

    #[test]
    fn agrees_with_scipy_in_both_regimes() {
        for (nu, z, expected) in SCIPY {
            let got = ln_bessel_i(nu, z);
            let tolerance = 1e-13 * expected.abs().max(1.0);
            assert!(
                (got - expected).abs() <= tolerance,
                "ln I_{nu}({z}) = {got}, scipy {expected}"
            );
            let scaled = ln_bessel_i_scaled(nu, z);
            assert!(
                (scaled - (expected - z)).abs() <= tolerance,
                "scaled at ({nu}, {z})"
            );
        }
    }

    #[test]
    fn the_two_evaluations_meet_at_the_switch() {
        // Either side of z = max(30, 2ν²) the series and the expansion agree.
        for nu in [0.0, 0.5, 3.0, 4.5, 9.0] {
            let z = 30.0_f64.max(2.0 * nu * nu);
            let (s, h) = (series(nu, z), hankel(nu, z));
            assert!((s - h).abs() < 1e-13 * z, "ν = {nu}: {s} vs {h}");
        }
    }

    #[test]
    fn half_order_is_elementary() {
        // I_{1/2}(z) = sqrt(2/(πz)) sinh z (A&S 10.2.13).
        for z in [0.3, 4.0, 29.0, 31.0, 300.0] {
            let exact = (2.0 / (std::f64::consts::PI * z)).sqrt().ln()
                + z
                + (-(-2.0 * z).exp_m1() / 2.0).ln();
            let got = ln_bessel_i(0.5, z);
            assert!(
                (got - exact).abs() < 1e-13 * exact.abs().max(1.0),
                "{z}: {got} vs {exact}"
            );
        }
    }

    /// The derivatives against central differences of the value (checked against scipy
    /// above) and ∂/∂z against the recurrence I′_ν = I_{ν+1} + (ν/z) I_ν (A&S 9.6.26).
    #[test]
    fn derivatives_agree_with_differences_and_the_recurrence() {
        let value = |nu: f64, z: f64| ln_bessel_i_scaled(nu, z);
        for (nu, z) in [
            (0.5, 0.1),
            (2.3, 5.0),
            (-0.4, 2.0),
            (7.25, 40.0),
            (25.0, 60.0),
            (11.0, 4000.0),
            (0.3, 120.0),
            (60.0, 3000.0),
            (3.0, 18.0),
        ] {
            let d = ln_bessel_i_scaled_derivatives(nu, z);
            assert!(
                (d.value - value(nu, z)).abs() < 1e-13 * z.max(1.0),
                "value at ({nu}, {z})"
            );
            let recurrence = (value(nu + 1.0, z) - value(nu, z)).exp() + nu / z - 1.0;
            // The recurrence subtracts numbers near 1: its own rounding is about 10⁻¹².
            assert!(
                (d.d_z - recurrence).abs() < 1e-9 * recurrence.abs() + 1e-11,
                "∂z at ({nu}, {z}): {} vs {recurrence}",
                d.d_z
            );
            let (hn, hz) = (1e-4 * nu.abs().max(0.1), 1e-4 * z);
            let dn = |n: f64, zz: f64| ln_bessel_i_scaled_derivatives(n, zz);
            let checks = [
                (
                    "ν",
                    d.d_nu,
                    (value(nu + hn, z) - value(nu - hn, z)) / (2.0 * hn),
                ),
                (
                    "νν",
                    d.d_nu_nu,
                    (dn(nu + hn, z).d_nu - dn(nu - hn, z).d_nu) / (2.0 * hn),
                ),
                (
                    "νz",
                    d.d_nu_z,
                    (dn(nu, z + hz).d_nu - dn(nu, z - hz).d_nu) / (2.0 * hz),
                ),
                (
                    "zz",
                    d.d_z_z,
                    (dn(nu, z + hz).d_z - dn(nu, z - hz).d_z) / (2.0 * hz),
                ),
            ];
            for (what, got, difference) in checks {
                assert!(
                    (got - difference).abs() < 1e-6 * difference.abs().max(1e-6),
                    "∂{what} at ({nu}, {z}): {got} vs {difference}"
                );
            }
        }
    }

    /// ψ′(1) = π²/6, ψ′(1/2) = π²/2 (A&S 6.4.2, 6.4.4), and ψ′(10.5) through the
    /// recurrence from ψ′(1/2).
    #[test]
    fn trigamma_matches_known_values() {
        let pi2 = std::f64::consts::PI.powi(2);
        assert!((trigamma(1.0) - pi2 / 6.0).abs() < 1e-14);
        assert!((trigamma(0.5) - pi2 / 2.0).abs() < 1e-14);
        let from_half = pi2 / 2.0 - (0..10).map(|k| 1.0 / (k as f64 + 0.5).powi(2)).sum::<f64>();
        assert!((trigamma(10.5) - from_half).abs() < 1e-14);
    }

    #[test]
    fn bad_arguments_give_nan() {
        assert!(ln_bessel_i(-1.5, 2.0).is_nan());
        assert!(ln_bessel_i(1.0, -2.0).is_nan());
        assert!(ln_bessel_i(f64::NAN, 2.0).is_nan());
        assert_eq!(ln_bessel_i(0.0, 0.0), 0.0);
        assert_eq!(ln_bessel_i_scaled(0.0, 0.0), 0.0);
    }
}
