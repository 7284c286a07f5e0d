//! Dense Hermitian eigensolvers.
//!
//! Small matrices (n ≤ `SMALL_MAX_N` = 16) — the 2–16 band models that dominate sweeps — take
//! a size-specialised, allocation-free path (`eigh_into`):
//! - n = 4 first tries `eigen_small::two_level4`, a closed form for spectra with two levels of
//!   equal multiplicity (Kramers-degenerate bands, i.e. every model with time reversal and
//!   inversion), checked numerically (|A² − r²| ≤ 1e-14 r² entrywise) and skipped when the
//!   structure is absent (a generic matrix is refused after its row norms).
//! - Otherwise `eigen_small`: Householder reduction to a real tridiagonal matrix and implicit QR
//!   with Wilkinson shifts, in real arithmetic on fixed-size split re/im arrays (see that
//!   module). Measured per matrix (`cargo bench … -- eigen`; callgrind on random matrices): a
//!   generic 4×4 in ~4100 instructions / ~0.9 µs, 8×8 ~27 000 / ~5 µs, against ~8500 /
//!   1.0–1.5 µs and ~97 000 / 9–15 µs for the size-specialised Jacobi below (the dynamic
//!   reference Jacobi: ~16 700 and ~155 000). The 4×4 is latency-bound (≈18 serial
//!   Givens rotations of ~7 QR steps, each a division → update chain): built for x86-64-v3
//!   (AVX2 + FMA, the Makefile's default) it needs ~3400 instructions and still ~0.6–0.7 µs
//!   one at a time.
//! - Independent matrices in pairs (`eigh_pair_into`, `eigh_occupied_pair_into`; 2 ≤ n ≤ 8):
//!   `eigen_small::solve_pair` reduces and sweeps two matrices in one loop body so one's
//!   division chain runs while the other's waits; results equal two single solves bit for
//!   bit. Measured (interleaved A/B, `-- solo-4` / `-- pair-4`, shared machine): generic 4×4
//!   ~0.89 → ~0.76 µs per matrix (callgrind ~4400 → ~4500 instructions per matrix: more
//!   bookkeeping, fewer stalls); 8×8 ~4.0–4.2 → ~3.2–3.6 µs (~25 900 → ~25 700
//!   instructions), 6×6 ~2.0 → ~1.6 µs. Since the four-lane solve below they serve what is
//!   left over of a group of four and n = 9…16. Tried and dropped: a branch-free search for
//!   the unreduced block (bit mask of the off-diagonals; half the mispredicted branches in
//!   cachegrind's model, but ~15 % slower single solves: the predicted branches let the next
//!   sweep start before the deflation test resolves).
//! - Independent matrices four at a time (`eigh_quad_into`, `eigh_occupied_quad_into`;
//!   2 ≤ n ≤ `QUAD_MAX_N` = 8): `eigen_quad` runs the same Householder + implicit QR with one
//!   matrix per lane of `[f64; 4]` arrays (an AVX2 register in the v3 build), branch-free —
//!   each lane its own unreduced block, shift and deflation, chosen by selects; rotations
//!   outside a lane's block are exact identities. Results are not bit-identical to the single
//!   solve (another order of the same rounding steps) but as accurate (tests against the
//!   reference Jacobi below and in `eigen_quad`). The line and batch entries
//!   (`eigh_occupied_many_into`, `eigh_many_into`) take their matrices four at a time, three
//!   left over too (with a zero filler), the rest in a pair or alone: a Wilson line solves
//!   all its κ points in one call, so do the bulk gap grid lines, the lattice mesh rows,
//!   `wilson::evaluate_points` (TRIMs) and `gap_search::gaps_at` (eigenvalues only).
//!   Measured on random matrices, v3 build (interleaved, `-- solo-4` / `-- pair-4` /
//!   `-- quad-4`, best / median of 8 rounds on the shared 2.1 GHz machine): generic 4×4
//!   0.64 / 0.65 µs one at a time, 0.45 / 0.49 µs in pairs, **0.27 / 0.29 µs** four at a
//!   time; callgrind per matrix 3420 / 3710 / 1590 instructions. Other n (callgrind, pairs →
//!   lanes): 3: 1706 → 978, 5: 6329 → 4282, 6: 10 848 → 6833, 7: 16 142 → 10 793,
//!   8: 20 652 → 14 472. In a baseline (SSE2) build the lanes take two registers and no FMA:
//!   4×4 pairs → lanes 4610 → 3810 instructions per matrix, 0.46 / 0.49 → 0.40 / 0.44 µs
//!   (best / median, same rounds) — still ahead of the pairs, by less. With a Kramers-degenerate
//!   group the closed form is tried first, until it first declines (see `lanes`).
//! - The size-specialised cyclic Jacobi (`jacobi_fixed::<N>`, `[[C64; N]; N]`, one
//!   instantiation per n, rotations in round-robin order, only the two rotated columns updated
//!   and mirrored) remains for warm starts and as the fallback when the Householder path
//!   declines (Frobenius norm² outside [1e-200, 1e200], no convergence); `eigh_jacobi_into`
//!   exposes it for benchmarks.
//!
//! `eigh_occupied_into` is the Wilson-line entry: all eigenvalues, but only the lowest `nocc`
//! vectors, written straight into the n × nocc layout the overlaps use. For a half-filled
//! Kramers 4×4 it forms one projector's vectors instead of two (callgrind per call: ~870
//! instructions, against ~1300 for the full closed form, ~2000 for the closed form before this
//! rewrite and ~2900 for the fixed-size Jacobi on the same Dirac-matrix H; ~810 per κ point of
//! a Wilson–Dirac line; 3 points at 40 × 41 × 6: 102 M → 64 M instructions in total).
//!
//! Non-finite input: the fast paths decline on their own (a NaN or infinite entry makes the
//! norm they test NaN or infinite), so the entrywise finiteness test runs only before the
//! fallbacks and is not paid per κ point.
//!
//! `eigh_warm_into` starts Jacobi from a guess of the eigenvectors — the previous κ point of a
//! Wilson loop — so A = G†HG is nearly diagonal; measured, it does not pay at 40 κ per loop and
//! the Wilson lines do not use it.
//! The straightforward dynamic-size Jacobi (`eigh_reference_into`, n ≤ 16) is kept as the
//! reference the fast paths are tested against. Larger matrices (n > 16, or 9…16 if the
//! Householder path declines) use faer's Hermitian eigensolver when the crate is built with
//! the `faer` feature (the Python build is; see `FAER_MIN_N` for why from n = 9), and
//! nalgebra's Householder tridiagonalisation + implicit QL (`SymmetricEigen`) otherwise:
//! measured per matrix, faer is 1.7× (n = 32) and 2.3× (n = 64) faster.
//!
//! Layout: `h` is row-major n×n; eigenvalues come out ascending and eigenvector k is column k
//! of the row-major `vecs` (component i at `vecs[i * n + k]`).

use crate::error::{CoreError, CoreResult};
use crate::linalg::eigen_quad;
use crate::linalg::eigen_small;
use crate::C64;

/// Largest size handled by the Jacobi path.
pub const JACOBI_MAX_N: usize = 8;
/// Largest size handled by the fixed-size Householder + QR path (`eigen_small`). From 9 to 16
/// it replaces the large-matrix solvers: per matrix 14 µs vs 24 µs (nalgebra) at n = 12 and
/// 29 µs vs 47 µs at n = 16, eigenvector residuals ~5e-15 where nalgebra's reach 1e-10
/// (random matrices, `--no-default-features`; faer's are below 1e-14, see `FAER_MIN_N`).
pub const SMALL_MAX_N: usize = 16;
/// Largest size solved four at a time in lanes (`eigen_quad`; above it, pairs).
pub const QUAD_MAX_N: usize = 8;

pub(super) fn check_buffers(h: &[C64], n: usize, evals: &[f64], vecs: &[C64]) -> CoreResult<()> {
    check_sizes(h, n, evals, vecs)?;
    check_finite(h, n)
}

fn check_sizes(h: &[C64], n: usize, evals: &[f64], vecs: &[C64]) -> CoreResult<()> {
    if h.len() < n * n || evals.len() < n || vecs.len() < n * n {
        return Err(CoreError::Internal("eigh_into: buffer too small".into()));
    }
    Ok(())
}

/// The fast paths (`fast_full`, `fast_occupied`) need no separate test: a NaN or infinite entry
/// makes their norm (r² or ‖H‖²) NaN or infinite, and they decline; this runs before the
/// fallbacks and gives the error its message.
fn check_finite(h: &[C64], n: usize) -> CoreResult<()> {
    if h[..n * n]
        .iter()
        .any(|z| !z.re.is_finite() || !z.im.is_finite())
    {
        return Err(CoreError::InvalidInput(
            "Hamiltonian contains NaN or infinity".into(),
        ));
    }
    Ok(())
}

/// Eigen-decomposition into caller-provided buffers (`evals`: n, `vecs`: n*n).
pub fn eigh_into(h: &[C64], n: usize, evals: &mut [f64], vecs: &mut [C64]) -> CoreResult<()> {
    check_sizes(h, n, evals, vecs)?;
    if fast_full(h, n, evals, vecs) {
        return Ok(());
    }
    check_finite(h, n)?;
    if n <= JACOBI_MAX_N {
        fixed_dispatch(h, n, None, evals, vecs)
    } else {
        large(h, n, evals, vecs)
    }
}

/// All eigenvalues (ascending, `evals`: n) and only the eigenvectors of the lowest `nocc`
/// into `occ` (n × nocc, row-major: component i of vector k at `occ[i * nocc + k]`), the
/// layout a Wilson line consumes. `work` (n × n) is scratch for the paths that form every
/// vector. Writes directly and skips the unoccupied vectors where that pays: the Kramers closed
/// form (n = 4, nocc = 2: one projector instead of two) and the Householder + QR path (the
/// vectors are formed one by one at the end).
pub fn eigh_occupied_into(
    h: &[C64],
    n: usize,
    nocc: usize,
    evals: &mut [f64],
    occ: &mut [C64],
    work: &mut [C64],
) -> CoreResult<()> {
    check_sizes(h, n, evals, work)?;
    if nocc > n || occ.len() < n * nocc {
        return Err(CoreError::Internal(
            "eigh_occupied_into: buffer too small".into(),
        ));
    }
    let done = match n {
        2 => small_occupied::<2>(h, nocc, evals, occ),
        3 => small_occupied::<3>(h, nocc, evals, occ),
        4 => {
            (nocc == 2 && eigen_small::two_level4::<1, 2>(h, evals, occ))
                || (nocc == 0 && eigen_small::two_level4::<0, 0>(h, evals, occ))
                || small_occupied::<4>(h, nocc, evals, occ)
        }
        5 => small_occupied::<5>(h, nocc, evals, occ),
        6 => small_occupied::<6>(h, nocc, evals, occ),
        7 => small_occupied::<7>(h, nocc, evals, occ),
        8 => small_occupied::<8>(h, nocc, evals, occ),
        9 => small_occupied::<9>(h, nocc, evals, occ),
        10 => small_occupied::<10>(h, nocc, evals, occ),
        11 => small_occupied::<11>(h, nocc, evals, occ),
        12 => small_occupied::<12>(h, nocc, evals, occ),
        13 => small_occupied::<13>(h, nocc, evals, occ),
        14 => small_occupied::<14>(h, nocc, evals, occ),
        15 => small_occupied::<15>(h, nocc, evals, occ),
        16 => small_occupied::<16>(h, nocc, evals, occ),
        _ => false,
    };
    if done {
        return Ok(());
    }
    check_finite(h, n)?;
    if n <= JACOBI_MAX_N {
        fixed_dispatch(h, n, None, evals, work)?;
    } else {
        large(h, n, evals, work)?;
    }
    for i in 0..n {
        occ[i * nocc..(i + 1) * nocc].copy_from_slice(&work[i * n..i * n + nocc]);
    }
    Ok(())
}

/// Householder + QR with only the lowest `nocc` vectors formed; false when it declines.
#[inline(always)]
fn small_occupied<const N: usize>(
    h: &[C64],
    nocc: usize,
    evals: &mut [f64],
    occ: &mut [C64],
) -> bool {
    let mut w = eigen_small::Work::<N>::new();
    if !w.solve(h) {
        return false;
    }
    write_occupied(&w.out, nocc, evals, occ);
    true
}

/// All eigenvalues ascending and the lowest `nocc` vectors (n × nocc) of a solution.
#[inline(always)]
fn write_occupied<const N: usize>(
    sol: &eigen_small::SmallEigen<N>,
    nocc: usize,
    evals: &mut [f64],
    occ: &mut [C64],
) {
    let order = sol.order();
    for (k, &o) in order.iter().enumerate() {
        evals[k] = sol.vals[o];
    }
    for (k, &o) in order[..nocc].iter().enumerate() {
        let (xr, xi) = sol.vector(o);
        for i in 0..N {
            occ[i * nocc + k] = C64::new(xr[i], xi[i]);
        }
    }
}

/// Like [`eigh_into`], starting from `guess` (n×n, columns ≈ eigenvectors, e.g. those of the
/// previous κ point on a loop). The guess is re-orthonormalised implicitly: any unitary guess
/// gives the exact decomposition; a poor guess only costs sweeps. For n > `JACOBI_MAX_N` the
/// guess is ignored.
pub fn eigh_warm_into(
    h: &[C64],
    n: usize,
    guess: &[C64],
    evals: &mut [f64],
    vecs: &mut [C64],
) -> CoreResult<()> {
    check_buffers(h, n, evals, vecs)?;
    if guess.len() < n * n {
        return Err(CoreError::Internal(
            "eigh_warm_into: guess too small".into(),
        ));
    }
    if n <= JACOBI_MAX_N {
        fixed_dispatch(h, n, Some(guess), evals, vecs)
    } else {
        large(h, n, evals, vecs)
    }
}

/// The straightforward path: dynamic-size cyclic Jacobi for n ≤ `SMALL_MAX_N`, nalgebra's
/// Householder above. Reference for tests and benchmarks of the fast paths (Jacobi up to 16:
/// nalgebra's eigenvectors are too rough to check the fast path against, residuals up to ~1e-8
/// seen at n = 14).
pub fn eigh_reference_into(
    h: &[C64],
    n: usize,
    evals: &mut [f64],
    vecs: &mut [C64],
) -> CoreResult<()> {
    check_buffers(h, n, evals, vecs)?;
    if n <= SMALL_MAX_N {
        jacobi(h, n, evals, vecs)
    } else {
        householder(h, n, evals, vecs)
    }
}

/// The size-specialised cyclic Jacobi alone (n ≤ `JACOBI_MAX_N`; no closed forms, no
/// Householder path): the previous production path, kept for benchmarks and as a second
/// reference.
pub fn eigh_jacobi_into(
    h: &[C64],
    n: usize,
    evals: &mut [f64],
    vecs: &mut [C64],
) -> CoreResult<()> {
    check_buffers(h, n, evals, vecs)?;
    if n <= JACOBI_MAX_N {
        fixed_dispatch(h, n, None, evals, vecs)
    } else {
        large(h, n, evals, vecs)
    }
}

/// nalgebra's Householder + QL path at any n (benchmarks compare it with the Jacobi paths).
pub fn eigh_householder_into(
    h: &[C64],
    n: usize,
    evals: &mut [f64],
    vecs: &mut [C64],
) -> CoreResult<()> {
    check_buffers(h, n, evals, vecs)?;
    householder(h, n, evals, vecs)
}

/// Allocating convenience wrapper: returns (eigenvalues, eigenvectors).
pub fn eigh(h: &[C64], n: usize) -> CoreResult<(Vec<f64>, Vec<C64>)> {
    let mut e = vec![0.0; n];
    let mut v = vec![C64::new(0.0, 0.0); n * n];
    eigh_into(h, n, &mut e, &mut v)?;
    Ok((e, v))
}

fn fixed_dispatch(
    h: &[C64],
    n: usize,
    guess: Option<&[C64]>,
    evals: &mut [f64],
    vecs: &mut [C64],
) -> CoreResult<()> {
    match n {
        0 => Ok(()),
        1 => {
            evals[0] = h[0].re;
            vecs[0] = C64::new(1.0, 0.0);
            Ok(())
        }
        2 => jacobi_fixed::<2>(h, guess, evals, vecs),
        3 => jacobi_fixed::<3>(h, guess, evals, vecs),
        4 => jacobi_fixed::<4>(h, guess, evals, vecs),
        5 => jacobi_fixed::<5>(h, guess, evals, vecs),
        6 => jacobi_fixed::<6>(h, guess, evals, vecs),
        7 => jacobi_fixed::<7>(h, guess, evals, vecs),
        8 => jacobi_fixed::<8>(h, guess, evals, vecs),
        _ => Err(CoreError::Internal(format!(
            "fixed Jacobi called with n = {n}"
        ))),
    }
}

/// The production paths for 2 ≤ n ≤ `SMALL_MAX_N`: the Kramers closed form (n = 4), then
/// Householder + QR. False when they decline (no two-level structure, norm out of range — also
/// for any NaN or infinite entry — or no convergence) or n is outside; the caller then runs
/// Jacobi (n ≤ 8) or the large-matrix solver.
fn fast_full(h: &[C64], n: usize, evals: &mut [f64], vecs: &mut [C64]) -> bool {
    match n {
        2 => small_full::<2>(h, evals, vecs),
        3 => small_full::<3>(h, evals, vecs),
        4 => eigen_small::two_level4::<2, 4>(h, evals, vecs) || small_full::<4>(h, evals, vecs),
        5 => small_full::<5>(h, evals, vecs),
        6 => small_full::<6>(h, evals, vecs),
        7 => small_full::<7>(h, evals, vecs),
        8 => small_full::<8>(h, evals, vecs),
        9 => small_full::<9>(h, evals, vecs),
        10 => small_full::<10>(h, evals, vecs),
        11 => small_full::<11>(h, evals, vecs),
        12 => small_full::<12>(h, evals, vecs),
        13 => small_full::<13>(h, evals, vecs),
        14 => small_full::<14>(h, evals, vecs),
        15 => small_full::<15>(h, evals, vecs),
        16 => small_full::<16>(h, evals, vecs),
        _ => false,
    }
}

/// Householder + implicit QR (`eigen_small`) with every vector formed.
#[inline(always)]
fn small_full<const N: usize>(h: &[C64], evals: &mut [f64], vecs: &mut [C64]) -> bool {
    let mut w = eigen_small::Work::<N>::new();
    if !w.solve(h) {
        return false;
    }
    write_full(&w.out, evals, vecs);
    true
}

/// Eigenvalues ascending and every vector (columns of the row-major N × N `vecs`).
#[inline(always)]
fn write_full<const N: usize>(
    sol: &eigen_small::SmallEigen<N>,
    evals: &mut [f64],
    vecs: &mut [C64],
) {
    for (k, &o) in sol.order().iter().enumerate() {
        evals[k] = sol.vals[o];
        let (xr, xi) = sol.vector(o);
        for i in 0..N {
            vecs[i * N + k] = C64::new(xr[i], xi[i]);
        }
    }
}

/// Sort eigenvalues ascending, permuting eigenvector columns alongside (insertion sort: n small).
pub(super) fn sort_pairs(n: usize, evals: &mut [f64], v: &mut [C64]) {
    for i in 1..n {
        let mut j = i;
        while j > 0 && evals[j - 1] > evals[j] {
            evals.swap(j - 1, j);
            for r in 0..n {
                v.swap(r * n + j - 1, r * n + j);
            }
            j -= 1;
        }
    }
}

mod batched;
mod jacobi;
mod large;

pub use batched::{
    eigh_many_into, eigh_occupied_many_into, eigh_occupied_pair_into, eigh_occupied_quad_into,
    eigh_pair_into, eigh_quad_into,
};

use jacobi::{jacobi, jacobi_fixed};
#[cfg(feature = "faer")]
pub use large::eigh_faer_into;
pub use large::FAER_MIN_N;
use large::{householder, large};

#[cfg(test)]
pub(crate) mod tests;
