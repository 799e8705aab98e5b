//! Standard normals in bulk: random bits drawn from the counter-based stream in one call,
//! then turned into normals by the Box–Muller transform (Box & Muller 1958, Annals of
//! Mathematical Statistics 29(2)) written so that the compiler vectorises it: logarithm,
//! sine and cosine are short polynomials on reduced arguments, with no branch and no call.
//!
//! A pair of normals takes one 64-bit word, so the generator's output, the larger part of
//! the cost, is half a word per normal. The top 40 bits give the radius R = √(−2 ln U) with
//! U = 1 − k·2⁻⁴⁰ ∈ (0, 1], so |Z| reaches 7.4 (P(|Z| > 7.4) ≈ 10⁻¹³). The low 24 bits give
//! the angle on a lattice of 2²⁴ points evenly spread over the circle (two bits for the
//! quadrant, 22 for the angle within it, centred on each cell). On such a lattice the means
//! of cos(jθ) and sin(jθ) vanish exactly for 0 < j < 2²⁴, so every moment of (Z₁, Z₂) of
//! order below 2²⁴ is the same as with a continuous angle given the radius.
//!
//! The transform is compiled for the vector units of the machine (AVX-512, AVX2, NEON) and
//! chosen at run time; every thread of a run takes the same version, so results do not
//! depend on the thread count.

use crate::bytecode::{Lanes, LANES};
use rand::{Rng, RngCore};

/// ln 2, split so that k·LN2_HIGH is exact for |k| < 2¹¹ (the split of fdlibm's `e_log.c`;
/// Tang 1989, ACM TOMS 15(2)).
const LN2_HIGH: f64 = f64::from_bits(0x3FE6_2E42_FEE0_0000);
const LN2_LOW: f64 = f64::from_bits(0x3DEA_39EF_3579_3C76);
const SQRT_2: f64 = std::f64::consts::SQRT_2;
const EXPONENT_ONE: u64 = 0x3FF0_0000_0000_0000;
const MANTISSA: u64 = 0x000F_FFFF_FFFF_FFFF;
/// 2⁵² as a double: adding an integer below 2⁵² to it puts the integer in the low bits.
const TWO_52: f64 = 4_503_599_627_370_496.0;

/// A number in [1, 2) from the low 52 bits of `bits`.
#[inline(always)]
fn one_to_two(bits: u64) -> f64 {
    f64::from_bits(EXPONENT_ONE | (bits & MANTISSA))
}

/// a·b + c, fused where the selected target has FMA (one rounding instead of two).
#[inline(always)]
fn madd<const FMA: bool>(a: f64, b: f64, c: f64) -> f64 {
    if FMA {
        a.mul_add(b, c)
    } else {
        a * b + c
    }
}

/// ln x for x in (0, 1], x normal (the radius word never gives a subnormal):
/// x = 2^e · m with m in [√½, √2), ln m = 2 atanh(s) with s = (m − 1)/(m + 1), |s| ≤ 0.172,
/// summed to s¹⁵ (the next term is below 5·10⁻¹³; normals need no more, see the module
/// notes on the lattice of the angle).
#[inline(always)]
fn ln_unit<const FMA: bool>(x: f64) -> f64 {
    let bits = x.to_bits();
    let biased = bits >> 52;
    let mantissa = one_to_two(bits);
    let large = mantissa > SQRT_2;
    let m = if large { 0.5 * mantissa } else { mantissa };
    // The exponent as a double without an integer conversion (no packed form on AVX2).
    let e = f64::from_bits(TWO_52.to_bits() | biased) - (TWO_52 + 1023.0)
        + if large { 1.0 } else { 0.0 };
    let s = (m - 1.0) / (m + 1.0);
    let z = s * s;
    // 2 atanh(s) = 2 s Σ z^k / (2k + 1), k = 0..7.
    let mut sum = 1.0 / 15.0;
    sum = madd::<FMA>(sum, z, 1.0 / 13.0);
    sum = madd::<FMA>(sum, z, 1.0 / 11.0);
    sum = madd::<FMA>(sum, z, 1.0 / 9.0);
    sum = madd::<FMA>(sum, z, 1.0 / 7.0);
    sum = madd::<FMA>(sum, z, 1.0 / 5.0);
    sum = madd::<FMA>(sum, z, 1.0 / 3.0);
    let two_s = 2.0 * s;
    let ln_m = madd::<FMA>(two_s * z, sum, two_s);
    madd::<FMA>(e, LN2_HIGH, madd::<FMA>(e, LN2_LOW, ln_m))
}

/// (cos x, sin x) for |x| ≤ π/4: Taylor series to x¹² and x¹³ (the next terms are below
/// 4·10⁻¹³).
#[inline(always)]
fn cos_sin_reduced<const FMA: bool>(x: f64) -> (f64, f64) {
    let z = x * x;
    let mut sin = 1.0 / 6_227_020_800.0; // 1/13!
    sin = madd::<FMA>(sin, z, -1.0 / 39_916_800.0); // −1/11!
    sin = madd::<FMA>(sin, z, 1.0 / 362_880.0); // 1/9!
    sin = madd::<FMA>(sin, z, -1.0 / 5_040.0); // −1/7!
    sin = madd::<FMA>(sin, z, 1.0 / 120.0); // 1/5!
    sin = madd::<FMA>(sin, z, -1.0 / 6.0); // −1/3!
    let sin = madd::<FMA>(x * z, sin, x);
    let mut cos = 1.0 / 479_001_600.0; // 1/12!
    cos = madd::<FMA>(cos, z, -1.0 / 3_628_800.0); // −1/10!
    cos = madd::<FMA>(cos, z, 1.0 / 40_320.0); // 1/8!
    cos = madd::<FMA>(cos, z, -1.0 / 720.0); // −1/6!
    cos = madd::<FMA>(cos, z, 1.0 / 24.0); // 1/4!
    cos = madd::<FMA>(cos, z, -0.5);
    let cos = madd::<FMA>(z, cos, 1.0);
    (cos, sin)
}

/// One Box–Muller pair from one random word.
#[inline(always)]
fn pair<const FMA: bool>(word: u64) -> (f64, f64) {
    // U in (0, 1]: 2 − [1, 2), from the top 40 bits.
    let u = 2.0 - f64::from_bits(EXPONENT_ONE | ((word >> 24) << 12));
    let radius = (-2.0 * ln_unit::<FMA>(u)).sqrt();
    // Bits 0..22: the angle within the quadrant, at the centre of its lattice cell.
    let cell = f64::from_bits(EXPONENT_ONE | ((word & 0x3F_FFFF) << 30));
    let x = (cell - 1.5 + HALF_CELL) * std::f64::consts::FRAC_PI_2;
    let (c, s) = cos_sin_reduced::<FMA>(x);
    // Bits 22, 23: rotate (cos x, sin x) by quadrant·π/2: (c, s), (−s, c), (−c, −s), (s, −c).
    let quadrant = (word >> 22) & 3;
    let swap = quadrant & 1 == 1;
    let (first, second) = if swap { (s, c) } else { (c, s) };
    let first_sign = ((quadrant >> 1) ^ (quadrant & 1)) << 63;
    let second_sign = (quadrant >> 1) << 63;
    (
        radius * f64::from_bits(first.to_bits() ^ first_sign),
        radius * f64::from_bits(second.to_bits() ^ second_sign),
    )
}

/// Half the width of a lattice cell of the angle, in units of a quadrant: 2⁻²³.
const HALF_CELL: f64 = 1.0 / 8_388_608.0;

/// Box–Muller over whole slices: word i gives `out[i]` (cosine half) and `out[h + i]`
/// (sine half), h = `out.len() / 2` = `words.len()`.
#[multiversion::multiversion(targets(
    "x86_64+avx512f+avx512dq+avx512vl",
    "x86_64+avx2+fma",
    "x86_64+sse4.1",
    "aarch64+neon"
))]
fn transform(words: &[u64], out: &mut [f64]) {
    if multiversion::target::target_cfg_f!(target_feature = "fma") {
        transform_with::<true>(words, out);
    } else {
        transform_with::<false>(words, out);
    }
}

#[inline(always)]
fn transform_with<const FMA: bool>(words: &[u64], out: &mut [f64]) {
    let half = (out.len() / 2).min(words.len());
    let (cosines, sines) = out[..2 * half].split_at_mut(half);
    for ((c, s), w) in cosines.iter_mut().zip(sines.iter_mut()).zip(&words[..half]) {
        let (z1, z2) = pair::<FMA>(*w);
        *c = z1;
        *s = z2;
    }
}

/// Fills `out` with independent standard normals drawn from `rng`, using `words` (any
/// length; grown once if too short) as working memory for the random words. An odd
/// length draws one pair more and drops its second half.
#[inline]
pub fn fill_normals<R: RngCore + ?Sized>(rng: &mut R, words: &mut Vec<u64>, out: &mut [f64]) {
    let n = out.len();
    let pairs = n / 2;
    if words.len() < pairs {
        words.resize(pairs, 0);
    }
    if pairs > 0 {
        rng.fill(&mut words[..pairs]);
        transform(&words[..pairs], &mut out[..2 * pairs]);
    }
    if n % 2 == 1 {
        out[n - 1] = pair::<false>(rng.next_u64()).0;
    }
}

/// Normals for one chunk of [`LANES`] paths from [`LANES`]/2 words, no allocation.
#[inline]
pub fn fill_normals_chunk<R: RngCore + ?Sized>(
    rng: &mut R,
    words: &mut [u64; LANES / 2],
    out: &mut Lanes,
) {
    rng.fill(&mut words[..]);
    transform(&words[..], &mut out[..]);
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use statrs::distribution::{ContinuousCDF, Normal};

    #[test]
    fn logarithm_matches_the_standard_library() {
        // Across the whole range the radius word can give, 2⁻⁵² to 1.
        let mut worst: f64 = 0.0;
        let mut x = 1.0f64;
        while x > 1e-16 {
            for factor in [1.0, 0.999_999, 0.75, 0.707, 0.708, 0.6, 0.500_000_1] {
                let y = x * factor;
                let error = (ln_unit::<false>(y) - y.ln()).abs() / y.ln().abs().max(1e-300);
                if y < 1.0 {
                    worst = worst.max(error);
                }
            }
            x *= 0.37;
        }
        assert!(worst < 1e-12, "relative error {worst}");
        assert_eq!(ln_unit::<false>(1.0), 0.0);
    }

    #[test]
    fn sine_and_cosine_match_the_standard_library() {
        for i in 0..=1000 {
            let x = (i as f64 / 1000.0 - 0.5) * std::f64::consts::FRAC_PI_2;
            let (c, s) = cos_sin_reduced::<false>(x);
            assert!((c - x.cos()).abs() < 1e-12, "cos {x}");
            assert!((s - x.sin()).abs() < 1e-12, "sin {x}");
        }
    }

    #[test]
    fn quadrants_cover_the_circle() {
        // The four quadrant bits with the same reduced angle give the four rotations of
        // one point: angles x, x + π/2, x + π, x + 3π/2.
        // Angle cell 2²⁰ of 2²²: x = (1.25 − 1.5 + 2⁻²³)·π/2; radius word U = 0.5.
        let low = 1u64 << 20;
        let radius_bits = 1u64 << 39 << 24;
        let r = (-2.0 * 0.5f64.ln()).sqrt();
        let x = (-0.25 + HALF_CELL) * std::f64::consts::FRAC_PI_2;
        for q in 0..4u64 {
            let angle = x + q as f64 * std::f64::consts::FRAC_PI_2;
            let (z1, z2) = pair::<false>(radius_bits | (q << 22) | low);
            assert!((z1 - r * angle.cos()).abs() < 1e-15, "q {q}: {z1}");
            assert!((z2 - r * angle.sin()).abs() < 1e-15, "q {q}: {z2}");
        }
    }

    #[test]
    fn normals_pass_kolmogorov_smirnov_against_statrs_and_have_unit_moments() {
        // Critical value of √n·D at level 0.001 is 1.95 (asymptotic Kolmogorov law;
        // from memory of the standard tables).
        let n = 200_001; // odd: the last value takes the single-value path
        let mut rng = ChaCha8Rng::seed_from_u64(19);
        let mut bits = Vec::new();
        let mut sample = vec![0.0; n];
        fill_normals(&mut rng, &mut bits, &mut sample);
        assert!(sample.iter().all(|x| x.is_finite()));
        let mean = sample.iter().sum::<f64>() / n as f64;
        let second = sample.iter().map(|x| x * x).sum::<f64>() / n as f64;
        let fourth = sample.iter().map(|x| x.powi(4)).sum::<f64>() / n as f64;
        // se of the mean 1/√n, of E[Z²] √(2/n), of E[Z⁴] √(96/n) (moments 3 and 105).
        let root_n = (n as f64).sqrt();
        assert!((mean * root_n).abs() < 5.0, "mean {mean}");
        assert!(
            ((second - 1.0) * root_n / 2f64.sqrt()).abs() < 5.0,
            "E[Z²] {second}"
        );
        assert!(
            ((fourth - 3.0) * root_n / 96f64.sqrt()).abs() < 5.0,
            "E[Z⁴] {fourth}"
        );
        let reference = Normal::new(0.0, 1.0).unwrap();
        sample.sort_by(f64::total_cmp);
        let d = sample
            .iter()
            .enumerate()
            .map(|(i, x)| {
                let f = reference.cdf(*x);
                (f - i as f64 / n as f64)
                    .abs()
                    .max(((i + 1) as f64 / n as f64 - f).abs())
            })
            .fold(0.0, f64::max);
        assert!(d * root_n < 1.95, "D = {d}");
        // Pairs are uncorrelated: the cosine and sine halves of one chunk.
        let mut chunk = [0.0; LANES];
        let mut words = [0u64; LANES / 2];
        let mut cross = 0.0;
        let rounds = 20_000;
        for _ in 0..rounds {
            fill_normals_chunk(&mut rng, &mut words, &mut chunk);
            cross += (0..32).map(|i| chunk[i] * chunk[i + 32]).sum::<f64>();
        }
        let correlation = cross / (rounds * 32) as f64;
        assert!(
            (correlation * ((rounds * 32) as f64).sqrt()).abs() < 5.0,
            "{correlation}"
        );
    }
}
