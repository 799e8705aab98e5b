//! The instruction set the hot loops run on, chosen once at run time.
//!
//! The release build targets baseline x86-64 (SSE2), so 64-lane loops run in 128-bit
//! vectors. Where the processor has AVX2, each step of a block (generator, ziggurat, Euler
//! step) is compiled a second time with AVX2 enabled and that copy runs instead: the same
//! source, inlined into a function with `#[target_feature(enable = "avx2")]`. FMA is left off on
//! purpose: Rust never fuses a multiply and an add on its own, so every floating-point
//! operation rounds exactly as in the baseline copy and the results are bit-identical
//! whichever copy runs (a test compares them).

/// An instruction set the hot loops are compiled for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Isa {
    /// The build's own target (SSE2 on x86-64).
    Baseline,
    /// AVX2 on x86-64 (and nothing else: with BMI2 enabled as well, the compiler turns the
    /// generator's vector rotations into scalar ones, which measured slower).
    Avx2,
}

impl Isa {
    /// The best instruction set of this machine.
    pub fn detected() -> Isa {
        if avx2_present() {
            Isa::Avx2
        } else {
            Isa::Baseline
        }
    }

    /// Every instruction set this machine can run, baseline first.
    pub fn available() -> Vec<Isa> {
        let mut out = vec![Isa::Baseline];
        if avx2_present() {
            out.push(Isa::Avx2);
        }
        out
    }

    /// Runs `work` compiled for this instruction set: `work` and what it inlines take its
    /// vector instructions. `Avx2` on a machine without AVX2 runs the baseline copy (with
    /// the same results), so no choice is unsafe.
    #[inline(always)]
    pub fn run<R>(self, work: impl FnOnce() -> R) -> R {
        match self {
            #[cfg(target_arch = "x86_64")]
            Isa::Avx2 if avx2_present() => {
                // SAFETY: the processor has AVX2 (checked just above).
                unsafe { run_avx2(work) }
            }
            _ => work(),
        }
    }
}

#[cfg(target_arch = "x86_64")]
fn avx2_present() -> bool {
    std::arch::is_x86_feature_detected!("avx2")
}

#[cfg(not(target_arch = "x86_64"))]
fn avx2_present() -> bool {
    false
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
#[inline]
unsafe fn run_avx2<R>(work: impl FnOnce() -> R) -> R {
    work()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn detection_is_among_the_available_sets_and_baseline_always_runs() {
        let available = Isa::available();
        assert_eq!(available[0], Isa::Baseline);
        assert!(available.contains(&Isa::detected()));
        assert_eq!(Isa::Baseline.run(|| 2 + 2), 4);
        // Asking for AVX2 is safe everywhere: without it the baseline copy runs.
        assert_eq!(Isa::Avx2.run(|| 3 * 3), 9);
    }
}
