//! Standard normals in bulk by the ziggurat method (G. Marsaglia & W. W. Tsang 2000, "The
//! Ziggurat Method for Generating Random Variables", Journal of Statistical Software 5(8)),
//! with 1024 layers and a signed uniform drawn independently of the layer (J. A. Doornik
//! 2005, "An Improved Ziggurat Method to Generate Normal Random Samples").
//!
//! One 64-bit word per normal: the low 10 bits pick the layer i, bit 10 the sign, the top
//! 52 bits a uniform u in [0, 1) (OR-ed into the mantissa of 1.0, then 1.0 subtracted: no
//! integer-to-float conversion). The candidate is x = u·xᵢ; it is accepted at once when
//! u < xᵢ₊₁/xᵢ (x lies inside the layer's core, under the curve). That test needs no
//! logarithm, exponential or division, so a chunk of 64 candidates is a short loop the
//! compiler vectorises; xᵢ and xᵢ₊₁/xᵢ sit side by side in one 16-byte entry, so a
//! candidate touches one cache line of a 16 KiB table that stays in L1. With 1024 layers
//! 0.43% of the candidates fail the fast test (1.49% with 256); they are collected as a
//! bit mask during the vector pass and finished afterwards, one at a time, with the full
//! algorithm (the wedge test against exp(−x²/2), the tail beyond r by Marsaglia's 1964
//! method, and a fresh draw after a rejection) from the block's scalar generator. The
//! order of the lanes fixes the order of those draws, so a block's normals depend on its
//! stream alone, and the code is the same whichever instruction set runs it
//! ([`crate::isa`]).

use crate::bytecode::{Lanes, LANES};
use crate::isa::Isa;
use crate::streams::BlockStream;
use rand::RngCore;
use std::sync::LazyLock;

/// Layers of the ziggurat.
const LAYERS: usize = 1024;
/// Bits of the word that pick the layer; the next bit is the sign.
const LAYER_BITS: u32 = 10;
/// Where the tail begins, r, and the area v of each layer under f(x) = exp(−x²/2), for
/// 1024 layers: the root of Marsaglia & Tsang's closing condition (section 4: the layers
/// built down from the base, each of area v = r·f(r) + ∫_r^∞ f, must leave a top layer of
/// area v), found by bisection with scipy.stats.norm.sf for the tail. The same procedure
/// at 256 layers gives their published r = 3.6541528853610088 and v = 4.92867323399e-3.
/// The tests below check both conditions against statrs.
const TAIL_START: f64 = 4.038_849_846_109_504;
const LAYER_AREA: f64 = 1.226_324_646_353_089e-3;

const EXPONENT_ONE: u64 = 0x3FF0_0000_0000_0000;

/// x₀ > x₁ = r > … > x₁₀₂₃ > x₁₀₂₄ = 0; x₀ = v/f(r) is the width of the base layer's
/// rectangle of equal area. `fast[i]` = (xᵢ, xᵢ₊₁/xᵢ), `density[i]` = f(xᵢ).
#[repr(C, align(64))]
pub struct Tables {
    fast: [[f64; 2]; LAYERS],
    pub x: [f64; LAYERS + 1],
    density: [f64; LAYERS + 1],
}

fn density(x: f64) -> f64 {
    (-0.5 * x * x).exp()
}

/// The edge above x of a layer of area `area` whose rectangle spans f(x) to f(next) over
/// the width x.
fn next_edge(x: f64, area: f64) -> f64 {
    (-2.0 * (area / x + density(x)).ln()).sqrt()
}

fn build_tables() -> Box<Tables> {
    let mut x = [0.0; LAYERS + 1];
    x[0] = LAYER_AREA / density(TAIL_START);
    x[1] = TAIL_START;
    for i in 2..LAYERS {
        x[i] = next_edge(x[i - 1], LAYER_AREA);
    }
    x[LAYERS] = 0.0;
    let mut fast = [[0.0; 2]; LAYERS];
    for (i, entry) in fast.iter_mut().enumerate() {
        *entry = [x[i], x[i + 1] / x[i]];
    }
    let mut f = [0.0; LAYERS + 1];
    for (value, xi) in f.iter_mut().zip(&x) {
        *value = density(*xi);
    }
    Box::new(Tables {
        fast,
        x,
        density: f,
    })
}

/// The tables, built once per process.
pub static TABLES: LazyLock<Box<Tables>> = LazyLock::new(build_tables);

/// A uniform in (0, 1) from the scalar generator: 53 bits, centred on its lattice cell.
fn open_unit(rng: &mut impl RngCore) -> f64 {
    ((rng.next_u64() >> 11) as f64 + 0.5) * (1.0 / 9_007_199_254_740_992.0)
}

/// The layer, the uniform in [0, 1) and the sign of one word.
#[inline(always)]
fn split(word: u64) -> (usize, f64, bool) {
    let layer = (word & (LAYERS as u64 - 1)) as usize;
    let uniform = f64::from_bits(EXPONENT_ONE | (word >> 12)) - 1.0;
    (layer, uniform, (word >> LAYER_BITS) & 1 == 1)
}

/// The full algorithm for a candidate that failed the fast test: wedge or tail test, and
/// new candidates from `rng` until one is accepted.
#[cold]
#[inline(never)]
fn finish(tables: &Tables, word: u64, rng: &mut impl RngCore) -> f64 {
    let mut word = word;
    loop {
        let (i, u, negative) = split(word);
        let [xi, ratio] = tables.fast[i];
        let accepted = if u < ratio {
            Some(u * xi)
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
            let x = u * xi;
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
#[inline(always)]
fn draw_chunk(
    tables: &Tables,
    stream: &mut BlockStream,
    words: &mut [u64; LANES],
    out: &mut Lanes,
) -> u64 {
    stream.fill(words);
    let mut failed = 0u64;
    for (lane, (z, word)) in out.iter_mut().zip(words.iter()).enumerate() {
        let (i, u, _) = split(*word);
        let [xi, ratio] = tables.fast[i];
        // The sign bit moved to bit 63 and XOR-ed in: no branch, no select.
        let sign = (*word >> LAYER_BITS) << 63;
        *z = f64::from_bits((u * xi).to_bits() ^ sign);
        failed |= u64::from(u >= ratio) << lane;
    }
    failed
}

/// Normals for one chunk of [`LANES`] paths, one word of the block's lanes each, no
/// allocation (`words` is working memory). Always inlined, so that it takes the
/// instruction set of the function it is called from; [`fill_normals_chunk`] is the
/// same with the choice made here.
#[inline(always)]
pub fn fill_normals_chunk_inline(
    stream: &mut BlockStream,
    words: &mut [u64; LANES],
    out: &mut Lanes,
) {
    let tables: &Tables = &TABLES;
    let mut failed = draw_chunk(tables, stream, words, out);
    while failed != 0 {
        let lane = failed.trailing_zeros() as usize;
        out[lane] = finish(tables, words[lane], stream.scalar());
        failed &= failed - 1;
    }
}

/// Normals for one chunk of [`LANES`] paths with the best instruction set of the machine
/// ([`fill_normals_chunk_inline`] run through [`Isa::run`]).
pub fn fill_normals_chunk(stream: &mut BlockStream, words: &mut [u64; LANES], out: &mut Lanes) {
    Isa::detected().run(
        #[inline(always)]
        || fill_normals_chunk_inline(stream, words, out),
    );
}

#[cfg(test)]
mod tests {
    use super::*;
    use statrs::distribution::{ChiSquared, ContinuousCDF, Normal};

    #[test]
    fn tables_close_at_the_top_with_the_published_constants() {
        // Every layer has area v, so the recursion from r must leave a top layer
        // (from f(x₁₀₂₃) to f(0) = 1 over the width x₁₀₂₃) of area v as well: a check of
        // r and v (a wrong r in the fifth digit leaves a top layer off by more than 1e-6).
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
        for (i, [xi, ratio]) in t.fast.iter().enumerate() {
            assert_eq!((*xi, *ratio), (t.x[i], t.x[i + 1] / t.x[i]));
        }
        // The share of candidates left to the slow path: the mean of 1 − xᵢ₊₁/xᵢ.
        let slow = t.fast.iter().map(|[_, ratio]| 1.0 - ratio).sum::<f64>() / LAYERS as f64;
        assert!((0.004..0.0045).contains(&slow), "slow share {slow}");
    }

    #[test]
    fn the_closing_condition_at_256_layers_gives_the_published_constants() {
        // The recursion of build_tables with Marsaglia & Tsang's 256-layer constants
        // (r = 3.6541528853610088, v = 4.92867323399e-3, their section 4) closes too.
        let (r, v) = (3.654_152_885_361_009, 4.928_673_233_99e-3);
        let mut x = r;
        for _ in 2..256 {
            x = next_edge(x, v);
        }
        assert!((x * (1.0 - density(x)) - v).abs() < 1e-9);
    }

    #[test]
    fn every_instruction_set_draws_the_same_bits() {
        let draw = |isa: Isa| {
            let mut stream = BlockStream::new(41, 3);
            let mut words = [0u64; LANES];
            let mut chunk = [0.0; LANES];
            let mut out = Vec::new();
            for _ in 0..2_000 {
                isa.run(|| fill_normals_chunk_inline(&mut stream, &mut words, &mut chunk));
                out.extend(chunk.iter().map(|z| z.to_bits()));
            }
            out
        };
        let baseline = draw(Isa::Baseline);
        for isa in Isa::available() {
            assert_eq!(draw(isa), baseline, "{isa:?}");
        }
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
        // The tail beyond r is drawn by the slow path: values beyond 4.04 appear, with the
        // right frequency (P(|Z| > r) = 5.37e-5).
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
