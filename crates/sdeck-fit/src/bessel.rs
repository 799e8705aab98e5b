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

use statrs::function::gamma::ln_gamma;

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

    #[test]
    fn bad_arguments_give_nan() {
        assert!(ln_bessel_i(-1.5, 2.0).is_nan());
        assert!(ln_bessel_i(1.0, -2.0).is_nan());
        assert!(ln_bessel_i(f64::NAN, 2.0).is_nan());
        assert_eq!(ln_bessel_i(0.0, 0.0), 0.0);
        assert_eq!(ln_bessel_i_scaled(0.0, 0.0), 0.0);
    }
}
