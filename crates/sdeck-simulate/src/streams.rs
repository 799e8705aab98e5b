//! The random stream of one block of paths: xoshiro256++ (Blackman & Vigna 2021,
//! "Scrambled linear pseudorandom number generators", ACM Transactions on Mathematical
//! Software 47(4)) run in [`STREAM_LANES`] independent lanes held as structure of arrays,
//! so that one pass of the generator is a handful of vector instructions, plus one scalar
//! xoshiro256++ for the variates drawn one at a time (noncentral chi-square steps, the rare
//! rejections of the normal sampler).
//!
//! Every lane and the scalar generator are seeded by SplitMix64 from the run's seed and the
//! block's index, as the generator's authors advise for seeding xoshiro (the seeds of
//! different blocks are different SplitMix64 outputs; with a period of 2²⁵⁶ − 1 per lane,
//! overlapping sequences are out of reach: common practice, no source). The stream of a
//! block depends on the seed and the block alone, never on the thread that runs it.
//!
//! Lane `k` is the same sequence as `rand_xoshiro::Xoshiro256PlusPlus` seeded with its
//! four words (a test compares them), so the arithmetic here is checked against the
//! reference implementation.

use crate::bytecode::LANES;
use rand::{RngCore, SeedableRng};
use rand_xoshiro::{SplitMix64, Xoshiro256PlusPlus};

/// Independent generator lanes advanced together: four 256-bit vectors on AVX2.
pub const STREAM_LANES: usize = 16;

/// The random stream of one block of paths.
#[derive(Clone, Debug)]
pub struct BlockStream {
    s0: [u64; STREAM_LANES],
    s1: [u64; STREAM_LANES],
    s2: [u64; STREAM_LANES],
    s3: [u64; STREAM_LANES],
    scalar: Xoshiro256PlusPlus,
}

/// SplitMix64's output function (a bijection of 64-bit words), used to spread the seed.
fn mix(mut z: u64) -> u64 {
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The four state words of lane `lane` of block `block` under `seed` (also the seed of
/// `Xoshiro256PlusPlus::from_seed` for the same sequence).
fn lane_words(splitmix: &mut SplitMix64) -> [u64; 4] {
    let mut words = [0u64; 4];
    for word in &mut words {
        *word = splitmix.next_u64();
    }
    // An all-zero state is the one fixed point of xoshiro; SplitMix64 never gives four
    // zeros in a row, but a state must not be zero whatever happens.
    if words == [0; 4] {
        words[0] = 1;
    }
    words
}

fn seed_bytes(words: [u64; 4]) -> [u8; 32] {
    let mut bytes = [0u8; 32];
    for (chunk, word) in bytes.chunks_exact_mut(8).zip(words) {
        chunk.copy_from_slice(&word.to_le_bytes());
    }
    bytes
}

impl BlockStream {
    /// The stream of block `block` of a run seeded with `seed`.
    pub fn new(seed: u64, block: u64) -> BlockStream {
        let mut splitmix = SplitMix64::seed_from_u64(mix(seed).wrapping_add(block));
        let mut stream = BlockStream {
            s0: [0; STREAM_LANES],
            s1: [0; STREAM_LANES],
            s2: [0; STREAM_LANES],
            s3: [0; STREAM_LANES],
            scalar: Xoshiro256PlusPlus::from_seed(seed_bytes(lane_words(&mut splitmix))),
        };
        for lane in 0..STREAM_LANES {
            let [a, b, c, d] = lane_words(&mut splitmix);
            (
                stream.s0[lane],
                stream.s1[lane],
                stream.s2[lane],
                stream.s3[lane],
            ) = (a, b, c, d);
        }
        stream
    }

    /// The generator for variates drawn one at a time.
    pub fn scalar(&mut self) -> &mut Xoshiro256PlusPlus {
        &mut self.scalar
    }

    /// Fills `out` with the next words of the lanes: word `j` comes from lane
    /// `j % STREAM_LANES`. Always inlined, so that it takes the vector instructions of the
    /// function it is called from.
    #[inline(always)]
    pub fn fill(&mut self, out: &mut [u64; LANES]) {
        for chunk in out.chunks_exact_mut(STREAM_LANES) {
            for (lane, word) in chunk.iter_mut().enumerate() {
                let (s0, s1, s2, s3) = (self.s0[lane], self.s1[lane], self.s2[lane], self.s3[lane]);
                *word = s0.wrapping_add(s3).rotate_left(23).wrapping_add(s0);
                let t = s1 << 17;
                let s2 = s2 ^ s0;
                let s3 = s3 ^ s1;
                self.s1[lane] = s1 ^ s2;
                self.s0[lane] = s0 ^ s3;
                self.s2[lane] = s2 ^ t;
                self.s3[lane] = s3.rotate_left(45);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_lane_is_the_reference_xoshiro256_plus_plus() {
        let mut stream = BlockStream::new(2026, 17);
        let mut splitmix = SplitMix64::seed_from_u64(mix(2026).wrapping_add(17));
        let mut scalar = Xoshiro256PlusPlus::from_seed(seed_bytes(lane_words(&mut splitmix)));
        let mut lanes: Vec<Xoshiro256PlusPlus> = (0..STREAM_LANES)
            .map(|_| Xoshiro256PlusPlus::from_seed(seed_bytes(lane_words(&mut splitmix))))
            .collect();
        let mut out = [0u64; LANES];
        for _ in 0..5 {
            stream.fill(&mut out);
            for (j, word) in out.iter().enumerate() {
                assert_eq!(*word, lanes[j % STREAM_LANES].next_u64(), "word {j}");
            }
        }
        assert_eq!(stream.scalar().next_u64(), scalar.next_u64());
    }

    #[test]
    fn blocks_and_seeds_give_different_streams() {
        let first = |seed, block| {
            let mut out = [0u64; LANES];
            BlockStream::new(seed, block).fill(&mut out);
            out
        };
        assert_eq!(first(1, 0), first(1, 0));
        assert_ne!(first(1, 0), first(1, 1));
        assert_ne!(first(1, 0), first(2, 0));
        // The lanes of one block differ from each other.
        let words = first(5, 3);
        for a in 0..STREAM_LANES {
            for b in 0..a {
                assert_ne!(words[a], words[b]);
            }
        }
    }
}
