//! toposweep core: Bloch Hamiltonians on κ grids, Hermitian eigensolvers, Wilson loops,
//! hybrid Wannier centre flow, Z2 indices, Fu–Kane parity and band gaps.
//!
//! Every module except `python` is a pure numerical kernel without PyO3 types, so it can be
//! unit-tested with `cargo test --no-default-features` and benchmarked on its own.

pub mod bloch;
pub mod cancel;
pub mod columns;
pub mod decided_flow;
pub mod dense;
pub mod eigen;
mod eigen_quad;
mod eigen_small;
pub mod engine;
pub mod error;
pub mod fine_line;
pub mod first_pass;
pub mod flow;
pub mod gap_proof;
pub mod gap_search;
pub mod guided;
pub mod indices;
mod kept;
pub mod lattice_z2;
pub mod matrix;
pub mod parity;
pub mod plane_flows;
pub mod pools;
#[cfg(test)]
mod test_rng;
pub mod variation;
pub mod wilson;

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
