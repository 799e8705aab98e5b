//! The global allocator, and how soon it gives freed memory back.
//!
//! mimalloc is fast on the analysis's many small allocations, but by default it keeps
//! freed memory for a second (ten for its arenas) and commits its arenas eagerly, so a
//! run that builds a large file's syntax tree, frees it and then writes the report holds
//! both at once: on 100,000 `param` lines that was a fifth more resident memory than the
//! heap needs (docs/benchmarks.md, memory per input byte). A command-line run lives for a
//! second and the language server for hours: both are better served by memory returned
//! at once. These become mimalloc's defaults, so `MIMALLOC_PURGE_DELAY` and
//! `MIMALLOC_ARENA_EAGER_COMMIT` in the environment still win, as mimalloc documents.
//!
//! `--no-default-features` builds the program with the system allocator instead, so
//! that a heap profiler (which sees the system allocator's calls) can be pointed at it.

#[cfg(feature = "fast-alloc")]
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

/// mimalloc's option numbers, from `mi_option_e` in the bundled include/mimalloc.h (the
/// same in its versions 2 and 3); the binding does not name these two. The test
/// `allocator_options` in tests/cli.rs reads them back by name from mimalloc's own
/// verbose start-up report.
#[cfg(feature = "fast-alloc")]
mod option {
    pub const ARENA_EAGER_COMMIT: libmimalloc_sys::mi_option_t = 4;
    pub const PURGE_DELAY: libmimalloc_sys::mi_option_t = 15;
}

/// Runs before `main` and before the first allocation, which reserves mimalloc's first
/// arena: freed memory goes back to the system at once, and arenas are committed as
/// they are used.
#[cfg(feature = "fast-alloc")]
#[ctor::ctor]
fn return_freed_memory_promptly() {
    // SAFETY: plain C calls with option numbers the library defines, made before any
    // thread starts (the library notes they are not thread-safe). A default is taken
    // only while mimalloc has not read its options, and the environment overrides it.
    unsafe {
        libmimalloc_sys::mi_option_set_default(option::PURGE_DELAY, 0);
        libmimalloc_sys::mi_option_set_default(option::ARENA_EAGER_COMMIT, 0);
    }
}
