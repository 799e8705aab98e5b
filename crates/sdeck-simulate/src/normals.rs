//! Standard normals in bulk by the ziggurat method (G. Marsaglia & W. W. Tsang 2000, "The
//! Ziggurat Method for Generating Random Variables", Journal of Statistical Software 5(8)),
//! with 256 layers and a signed uniform drawn independently of the layer (J. A. Doornik
//! 2005, "An Improved Ziggurat Method to Generate Normal Random Samples").
//!
//! One 64-bit word per normal: the low 8 bits pick the layer i, bit 8 the sign, the top 52
//! bits a uniform u in [0, 1). The candidate is x = u·xᵢ; it is accepted at once when
//! u < xᵢ₊₁/xᵢ (x lies inside the layer's core, under the curve). That test needs no
//! logarithm, exponential or division, so a chunk of 64 candidates is a short loop the
//! compiler vectorises (compiled for AVX-512, AVX2 or NEON, chosen at run time). About
//! 1.5% of the candidates fail it; each is finished one at a time with the full algorithm
//! (the wedge test against exp(−x²/2), the tail beyond r by Marsaglia's 1964 method, and a
//! fresh draw after a rejection) from the block's scalar generator. The order of the
//! lanes fixes the order of those draws, so a block's normals depend on its stream alone.

use crate::bytecode::{Lanes, LANES};
use crate::streams::BlockStream;
use rand::RngCore;
use std::sync::LazyLock;

/// Layers of the ziggurat.
const LAYERS: usize = 256;
/// Where the tail begins, and the area of each layer under f(x) = exp(−x²/2), for 256
/// layers (Marsaglia & Tsang 2000, section 4).
const TAIL_START: f64 = 3.654_152_885_361_009;
const LAYER_AREA: f64 = 4.928_673_233_99e-3;

const EXPONENT_ONE: u64 = 0x3FF0_0000_0000_0000;

/// x₀ > x₁ = r > … > x₂₅₅ > x₂₅₆ = 0; x₀ = v/f(r) is the width of the base layer's
/// rectangle of equal area. `ratio[i]` = xᵢ₊₁/xᵢ, `density[i]` = f(xᵢ).
pub struct Tables {
    pub x: [f64; LAYERS + 1],
    ratio: [f64; LAYERS],
    density: [f64; LAYERS + 1],
}

fn density(x: f64) -> f64 {
    (-0.5 * x * x).exp()
}

fn build_tables() -> Tables {
    let mut x = [0.0; LAYERS + 1];
    x[0] = LAYER_AREA / density(TAIL_START);
    x[1] = TAIL_START;
    for i in 2..LAYERS {
        // Layer i − 1 spans f(xᵢ₋₁) to f(xᵢ) over the width xᵢ₋₁, with area v.
        x[i] = (-2.0 * (LAYER_AREA / x[i - 1] + density(x[i - 1])).ln()).sqrt();
    }
    x[LAYERS] = 0.0;
    let mut ratio = [0.0; LAYERS];
    for (i, r) in ratio.iter_mut().enumerate() {
        *r = x[i + 1] / x[i];
    }
    let mut f = [0.0; LAYERS + 1];
    for (value, xi) in f.iter_mut().zip(&x) {
        *value = density(*xi);
    }
    Tables {
        x,
        ratio,
        density: f,
    }
}

/// The tables, built once per process.
pub static TABLES: LazyLock<Tables> = LazyLock::new(build_tables);

/// A uniform in (0, 1) from the scalar generator: 53 bits, centred on its lattice cell.
fn open_unit(rng: &mut impl RngCore) -> f64 {
    ((rng.next_u64() >> 11) as f64 + 0.5) * (1.0 / 9_007_199_254_740_992.0)
}

/// The layer, the uniform in [0, 1) and the sign of one word.
#[inline(always)]
fn split(word: u64) -> (usize, f64, bool) {
    let layer = (word & 0xFF) as usize;
    let uniform = f64::from_bits(EXPONENT_ONE | (word >> 12)) - 1.0;
    (layer, uniform, (word >> 8) & 1 == 1)
}

/// The full algorithm for a candidate that failed the fast test: wedge or tail test, and
/// new candidates from `rng` until one is accepted.
#[cold]
fn finish(tables: &Tables, word: u64, rng: &mut impl RngCore) -> f64 {
    let mut word = word;
    loop {
        let (i, u, negative) = split(word);
        let accepted = if u < tables.ratio[i] {
            Some(u * tables.x[i])
        } else if i == 0 {
            // The tail beyond r (Marsaglia 1964; Marsaglia & Tsang 2000, section 3).
            loop {
                let a = -open_unit(rng).ln() / TAIL_START;
                let b = -open_unit(rng).ln();
                if 2.0 * b >= a * a {
                    break Some(TAIL_START + a);
                }
            }
        } else {
            let x = u * tables.x[i];
            let height = tables.density[i + 1]
                + open_unit(rng) * (tables.density[i] - tables.density[i + 1]);
            (height < density(x)).then_some(x)
        };
        match accepted {
            Some(x) if negative => return -x,
            Some(x) => return x,
            None => word = rng.next_u64(),
        }
    }
}

/// The fast test over a chunk: candidates to `out`, a bit per lane that failed.
#[multiversion::multiversion(targets(
    "x86_64+avx512f+avx512dq+avx512vl",
    "x86_64+avx2+fma",
    "x86_64+sse4.1",
    "aarch64+neon"
))]
fn draw_chunk(stream: &mut BlockStream, words: &mut [u64; LANES], out: &mut Lanes) -> u64 {
    stream.fill(words);
    let tables: &Tables = &TABLES;
    let mut failed = 0u64;
    for (lane, (z, word)) in out.iter_mut().zip(words.iter()).enumerate() {
        let (i, u, negative) = split(*word);
        let x = u * tables.x[i];
        *z = if negative { -x } else { x };
        failed |= u64::from(u >= tables.ratio[i]) << lane;
    }
    failed
}

/// Normals for one chunk of [`LANES`] paths, one word of the block's lanes each, no
/// allocation (`words` is working memory).
#[inline]
pub fn fill_normals_chunk(stream: &mut BlockStream, words: &mut [u64; LANES], out: &mut Lanes) {
    let mut failed = draw_chunk(stream, words, out);
    if failed != 0 {
        let tables: &Tables = &TABLES;
        while failed != 0 {
            let lane = failed.trailing_zeros() as usize;
            out[lane] = finish(tables, words[lane], stream.scalar());
            failed &= failed - 1;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use statrs::distribution::{ChiSquared, ContinuousCDF, Normal};

    #[test]
    fn tables_close_at_the_top_with_the_published_constants() {
        // Every layer has area v, so the recursion from r must leave a top layer
        // (from f(x₂₅₅) to f(0) = 1 over the width x₂₅₅) of area v as well: a check of r
        // and v as published by Marsaglia & Tsang.
        let t = &*TABLES;
        let top = t.x[LAYERS - 1] * (1.0 - t.density[LAYERS - 1]);
        assert!(
            (top - LAYER_AREA).abs() < 1e-9,
            "top layer {top} against {LAYER_AREA}"
        );
        // The base: the rectangle x₀·f(r) is the area of the base layer, the core under
        // f up to r plus the tail, ∫_r^∞ f = √(π/2)·erfc(r/√2).
        let normal = Normal::new(0.0, 1.0).unwrap();
        let tail = (2.0 * std::f64::consts::PI).sqrt() * normal.sf(TAIL_START);
        let base = TAIL_START * density(TAIL_START) + tail;
        assert!((base - LAYER_AREA).abs() < 1e-12, "base layer {base}");
        assert!(t.x.windows(2).all(|w| w[0] > w[1]));
    }

    fn sample(n_chunks: usize, seed: u64) -> Vec<f64> {
        let mut stream = BlockStream::new(seed, 0);
        let mut words = [0u64; LANES];
        let mut chunk = [0.0; LANES];
        let mut out = Vec::with_capacity(n_chunks * LANES);
        for _ in 0..n_chunks {
            fill_normals_chunk(&mut stream, &mut words, &mut chunk);
            out.extend_from_slice(&chunk);
        }
        out
    }

    #[test]
    fn normals_pass_kolmogorov_smirnov_against_statrs_and_have_unit_moments() {
        let mut sample = sample(4_000, 19); // 256,000 normals
        let n = sample.len();
        assert!(sample.iter().all(|x| x.is_finite()));
        let mean = sample.iter().sum::<f64>() / n as f64;
        let second = sample.iter().map(|x| x * x).sum::<f64>() / n as f64;
        let third = sample.iter().map(|x| x.powi(3)).sum::<f64>() / n as f64;
        let fourth = sample.iter().map(|x| x.powi(4)).sum::<f64>() / n as f64;
        // Standard errors: of the mean 1/√n, of E[Z²] √(2/n), of E[Z³] √(15/n), of E[Z⁴]
        // √(96/n) (normal moments 1, 3, 15, 105).
        let root_n = (n as f64).sqrt();
        assert!((mean * root_n).abs() < 5.0, "mean {mean}");
        assert!(
            ((second - 1.0) * root_n / 2f64.sqrt()).abs() < 5.0,
            "E[Z²] {second}"
        );
        assert!((third * root_n / 15f64.sqrt()).abs() < 5.0, "E[Z³] {third}");
        assert!(
            ((fourth - 3.0) * root_n / 96f64.sqrt()).abs() < 5.0,
            "E[Z⁴] {fourth}"
        );
        // Kolmogorov–Smirnov against statrs's normal CDF: √n·D above 1.95 has probability
        // 0.001 under the asymptotic Kolmogorov law (Smirnov 1948, Annals of Mathematical
        // Statistics 19(2), table of the limiting distribution).
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
        assert!(d * root_n < 1.95, "√n·D = {}", d * root_n);
    }

    #[test]
    fn tail_frequencies_beyond_three_and_four_sd_match_the_normal_law() {
        // 6.4 million normals; P(|Z| > 3) = 2.6998e-3 and P(|Z| > 4) = 6.3342e-5
        // (statrs here; scipy.stats.norm.sf gives the same digits). The counts are
        // binomial, so each is checked within 5 of its standard deviations.
        let sample = sample(100_000, 7);
        let n = sample.len() as f64;
        let normal = Normal::new(0.0, 1.0).unwrap();
        for (level, p) in [(3.0, 2.0 * normal.sf(3.0)), (4.0, 2.0 * normal.sf(4.0))] {
            let count = sample.iter().filter(|x| x.abs() > level).count() as f64;
            let sd = (n * p * (1.0 - p)).sqrt();
            assert!(
                (count - n * p).abs() < 5.0 * sd,
                "beyond {level} sd: {count} against {}",
                n * p
            );
        }
        // The tail beyond r is drawn by the slow path: values beyond 3.66 appear, with the
        // right frequency (P(|Z| > r) = 2.58e-4).
        let p = 2.0 * normal.sf(TAIL_START);
        let count = sample.iter().filter(|x| x.abs() > TAIL_START).count() as f64;
        assert!((count - n * p).abs() < 5.0 * (n * p).sqrt(), "{count}");
        // Both signs in the tails.
        assert!(sample.iter().any(|x| *x > 4.5) && sample.iter().any(|x| *x < -4.5));
    }

    #[test]
    fn a_fine_histogram_passes_the_chi_square_test() {
        // 80 bins of width 0.1 over [−4, 4] and the two tails: where a layer's wedge (the
        // part decided by the slow path) is sampled wrongly, bins drift by a percent or
        // more. Critical value at level 0.001 from statrs's chi-square quantile.
        let sample = sample(50_000, 23);
        let n = sample.len() as f64;
        let normal = Normal::new(0.0, 1.0).unwrap();
        let mut edges: Vec<f64> = (0..=80).map(|k| -4.0 + 0.1 * f64::from(k)).collect();
        edges.insert(0, f64::NEG_INFINITY);
        edges.push(f64::INFINITY);
        let mut counts = vec![0.0; edges.len() - 1];
        for x in &sample {
            let bin = edges.partition_point(|e| e <= x) - 1;
            counts[bin] += 1.0;
        }
        let statistic: f64 = counts
            .iter()
            .zip(edges.windows(2))
            .map(|(count, w)| {
                let expected = n * (normal.cdf(w[1]) - normal.cdf(w[0]));
                (count - expected).powi(2) / expected
            })
            .sum();
        let dof = (counts.len() - 1) as f64;
        let critical = ChiSquared::new(dof).unwrap().inverse_cdf(0.999);
        assert!(statistic < critical, "χ² = {statistic} against {critical}");
    }
}
