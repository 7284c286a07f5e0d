//! The large-matrix eigensolvers: faer's (built with the `faer` feature, as the Python build
//! is) and nalgebra's Householder tridiagonalisation + implicit QL. See the notes of `eigen`.

#[cfg(feature = "faer")]
use super::check_buffers;
use super::{sort_pairs, JACOBI_MAX_N};
use crate::error::{CoreError, CoreResult};
use crate::C64;
use nalgebra::DMatrix;

/// Smallest n the large-matrix solvers serve (when built with the `faer` feature, as the Python
/// build is, that is faer): n > `SMALL_MAX_N`, and 9…16 when the fixed-size path declines. faer
/// rather than nalgebra: worst of 100 random and Kramers-degenerate matrices at n = 10…24
/// (`cargo bench --no-default-features --features faer --bench kernels -- dense`), faer's
/// eigenvector residuals ‖Hv − λv‖ stay below 1e-14 while nalgebra's reach 1e-11 to 4e-8.
pub const FAER_MIN_N: usize = JACOBI_MAX_N + 1;

#[cfg(feature = "faer")]
pub(super) fn large(h: &[C64], n: usize, evals: &mut [f64], vecs: &mut [C64]) -> CoreResult<()> {
    if n < FAER_MIN_N {
        return householder(h, n, evals, vecs);
    }
    faer_eigen(h, n, evals, vecs)
}

/// faer's Hermitian eigensolver at any n (benchmarks compare it with the other paths).
#[cfg(feature = "faer")]
pub fn eigh_faer_into(h: &[C64], n: usize, evals: &mut [f64], vecs: &mut [C64]) -> CoreResult<()> {
    check_buffers(h, n, evals, vecs)?;
    faer_eigen(h, n, evals, vecs)
}

#[cfg(feature = "faer")]
fn faer_eigen(h: &[C64], n: usize, evals: &mut [f64], vecs: &mut [C64]) -> CoreResult<()> {
    let m = faer::Mat::<C64>::from_fn(n, n, |i, j| (h[i * n + j] + h[j * n + i].conj()) * 0.5);
    let eig = m
        .self_adjoint_eigen(faer::Side::Lower)
        .map_err(|_| CoreError::NoConvergence(format!("faer Hermitian eigensolver, n = {n}")))?;
    crate::linalg::dense::leave_wide_simd();
    let (s, u) = (eig.S().column_vector(), eig.U());
    for i in 0..n {
        evals[i] = s[i].re;
        for k in 0..n {
            vecs[i * n + k] = u[(i, k)];
        }
    }
    sort_pairs(n, evals, &mut vecs[..n * n]);
    Ok(())
}

#[cfg(not(feature = "faer"))]
pub(super) fn large(h: &[C64], n: usize, evals: &mut [f64], vecs: &mut [C64]) -> CoreResult<()> {
    householder(h, n, evals, vecs)
}

pub(super) fn householder(
    h: &[C64],
    n: usize,
    evals: &mut [f64],
    vecs: &mut [C64],
) -> CoreResult<()> {
    let m = DMatrix::from_fn(n, n, |i, j| (h[i * n + j] + h[j * n + i].conj()) * 0.5);
    let eig = nalgebra::linalg::SymmetricEigen::try_new(m, 1e-15, 0)
        .ok_or_else(|| CoreError::NoConvergence(format!("Householder eigensolver, n = {n}")))?;
    for i in 0..n {
        evals[i] = eig.eigenvalues[i];
        for k in 0..n {
            vecs[i * n + k] = eig.eigenvectors[(i, k)];
        }
    }
    sort_pairs(n, evals, &mut vecs[..n * n]);
    Ok(())
}
