//! toposweep core: Bloch Hamiltonians on κ grids, Hermitian eigensolvers, Wilson loops,
//! hybrid Wannier centre flow, Z2 indices, Fu–Kane parity and band gaps.
//!
//! Every module except `python` is a pure numerical kernel without PyO3 types, so it can be
//! unit-tested with `cargo test --no-default-features` and benchmarked on its own.
//!
//! Folders by concern, each using only those below it (its `mod.rs` says which; `make lint`
//! checks it with `.ci/check_layout.py`):
//!
//! | folder | holds | uses |
//! |---|---|---|
//! | `python` | the binding, the only PyO3 code | everything below |
//! | `point` | one parameter point: first pass, gap search and proof, results as columns | topology, zone, linalg, exec |
//! | `topology` | Wilson loops, centre flow, planes, lattice Z2, parity, indices | zone, linalg, exec |
//! | `zone` | Bloch sums, `BlochSource`, the variation bound | linalg, exec |
//! | `linalg` | eigensolvers, dense products, overlaps, polar factors | — |
//! | `exec` | pools, the shared task list, per-thread scratch | — |
//!
//! At the top, usable by all: `error` (the one error enum), `sampling` (a point's settings),
//! and this file (`C64`, `fmadd`).

pub mod error;
pub mod exec;
pub mod linalg;
pub mod point;
pub mod sampling;
#[cfg(test)]
mod test_rng;
pub mod topology;
pub mod zone;

#[cfg(feature = "python")]
mod python;

pub use error::{CoreError, CoreResult};
pub use num_complex::Complex64 as C64;

/// a·b + c, fused into one rounding where the build targets FMA (x86-64-v3: the Makefile's
/// default on machines that have it), plain otherwise — Rust never fuses by itself, and a
/// software `mul_add` would be far slower than the two operations. Used in the innermost
/// loops of the 4-band kernels; every fast path stays compared with its reference to 1e-10.
#[inline(always)]
pub(crate) fn fmadd(a: f64, b: f64, c: f64) -> f64 {
    if cfg!(target_feature = "fma") {
        a.mul_add(b, c)
    } else {
        a * b + c
    }
}
