//! Small dense complex matrices stored row-major in flat slices: products, the unitary part of
//! an overlap matrix, and the eigenphases of a unitary matrix.

use crate::eigen::{eigh, eigh_into};
use crate::error::{CoreError, CoreResult};
use crate::C64;
use nalgebra::DMatrix;

/// `c = a · b` for an (m×k) `a` and a (k×n) `b`.
pub fn matmul(a: &[C64], b: &[C64], c: &mut [C64], m: usize, k: usize, n: usize) {
    for i in 0..m {
        let row = &mut c[i * n..(i + 1) * n];
        row.iter_mut().for_each(|x| *x = C64::new(0.0, 0.0));
        for l in 0..k {
            let ail = a[i * k + l];
            let brow = &b[l * n..(l + 1) * n];
            for (x, &blj) in row.iter_mut().zip(brow) {
                *x += ail * blj;
            }
        }
    }
}

/// Overlap `m[a][b] = Σ_i conj(u[i][a]) v[i][b]` of the first `cols` columns of two (rows×ld)
/// column-stacked sets of vectors (eigenvectors are columns, stored row-major with stride `ld`).
pub fn overlap(u: &[C64], v: &[C64], rows: usize, ld: usize, cols: usize, m: &mut [C64]) {
    m[..cols * cols].iter_mut().for_each(|x| *x = C64::new(0.0, 0.0));
    for i in 0..rows {
        let ur = &u[i * ld..i * ld + cols];
        let vr = &v[i * ld..i * ld + cols];
        for (a, ua) in ur.iter().enumerate() {
            let uc = ua.conj();
            let mrow = &mut m[a * cols..(a + 1) * cols];
            for (x, &vb) in mrow.iter_mut().zip(vr) {
                *x += uc * vb;
            }
        }
    }
}

/// Replace the square matrix `m` (n×n) by its unitary polar factor U = m (m†m)^{-1/2}, which
/// equals W V† of the singular value decomposition m = W Σ V†. Returns the smallest singular
/// value, so callers can tell a near-singular overlap (states changing too fast) from a good one.
pub fn unitarise(m: &mut [C64], n: usize) -> CoreResult<f64> {
    if n == 1 {
        let r = m[0].norm();
        if r == 0.0 {
            return Ok(0.0);
        }
        m[0] /= r;
        return Ok(r);
    }
    // m†m = V Λ V†  →  (m†m)^{-1/2} = V Λ^{-1/2} V†
    let mut mtm = vec![C64::new(0.0, 0.0); n * n];
    for a in 0..n {
        for b in 0..n {
            let mut s = C64::new(0.0, 0.0);
            for i in 0..n {
                s += m[i * n + a].conj() * m[i * n + b];
            }
            mtm[a * n + b] = s;
        }
    }
    let (lam, v) = eigh(&mtm, n)?;
    let smin = lam[0].max(0.0).sqrt();
    if smin <= 1e-14 * lam[n - 1].max(1e-300).sqrt() {
        return Ok(0.0);
    }
    // inv_sqrt = V diag(λ^{-1/2}) V†
    let mut inv_sqrt = vec![C64::new(0.0, 0.0); n * n];
    for a in 0..n {
        for b in 0..n {
            let mut s = C64::new(0.0, 0.0);
            for (k, &l) in lam.iter().enumerate() {
                s += v[a * n + k] * v[b * n + k].conj() / l.sqrt();
            }
            inv_sqrt[a * n + b] = s;
        }
    }
    let orig = m.to_vec();
    matmul(&orig, &inv_sqrt, m, n, n, n);
    Ok(smin)
}

/// Eigenphases θ ∈ (−π, π] of a unitary n×n matrix, ascending.
///
/// n = 1 and 2 use closed forms; larger n a complex Schur decomposition. Since the input is
/// unitary the Schur form is diagonal and its diagonal holds the eigenvalues.
pub fn unitary_phases(w: &[C64], n: usize) -> CoreResult<Vec<f64>> {
    let mut out = match n {
        0 => Vec::new(),
        1 => vec![w[0].arg()],
        2 => {
            let half_tr = (w[0] + w[3]) * 0.5;
            let det = w[0] * w[3] - w[1] * w[2];
            let root = (half_tr * half_tr - det).sqrt();
            vec![(half_tr + root).arg(), (half_tr - root).arg()]
        }
        _ => {
            let mat = DMatrix::from_row_slice(n, n, w);
            // Deflation threshold well above rounding: a Wilson loop is unitary only to
            // ~1e-15, and a (near-)identity loop's rounding noise cannot be iterated below
            // that; phases are needed to ~1e-10 at most.
            let schur = mat.try_schur(1e-13, 10_000).ok_or_else(|| {
                CoreError::NoConvergence("Schur decomposition of a Wilson loop".into())
            })?;
            let (_, t) = schur.unpack();
            (0..n).map(|i| t[(i, i)].arg()).collect()
        }
    };
    if out.iter().any(|x| !x.is_finite()) {
        return Err(CoreError::NoConvergence(
            "non-finite Wilson-loop eigenphase".into(),
        ));
    }
    out.sort_by(|a, b| a.total_cmp(b));
    Ok(out)
}

/// Eigenvalues of a Hermitian matrix, ascending (thin wrapper used by the parity kernel).
pub fn hermitian_eigenvalues(h: &[C64], n: usize) -> CoreResult<Vec<f64>> {
    let mut e = vec![0.0; n];
    let mut v = vec![C64::new(0.0, 0.0); n * n];
    eigh_into(h, n, &mut e, &mut v)?;
    Ok(e)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rand_matrix(n: usize, seed: u64) -> Vec<C64> {
        let mut s = seed;
        let mut next = || {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            ((s >> 11) as f64) / ((1u64 << 53) as f64) - 0.5
        };
        (0..n * n).map(|_| C64::new(next(), next())).collect()
    }

    #[test]
    fn unitarise_gives_unitary_matrix() {
        for n in 1..6 {
            let mut m = rand_matrix(n, 7 + n as u64);
            let smin = unitarise(&mut m, n).unwrap();
            assert!(smin > 0.0);
            let mut p = vec![C64::new(0.0, 0.0); n * n];
            overlap(&m, &m, n, n, n, &mut p);
            for a in 0..n {
                for b in 0..n {
                    let want = if a == b { 1.0 } else { 0.0 };
                    assert!((p[a * n + b] - want).norm() < 1e-12);
                }
            }
        }
    }

    #[test]
    fn phases_of_diagonal_unitary_after_basis_change() {
        for n in 1..7 {
            let phases: Vec<f64> = (0..n).map(|i| -2.5 + 0.9 * i as f64).collect();
            let mut q = rand_matrix(n, 99 + n as u64);
            unitarise(&mut q, n).unwrap();
            // w = q diag(e^{iθ}) q†
            let mut w = vec![C64::new(0.0, 0.0); n * n];
            for a in 0..n {
                for b in 0..n {
                    for (k, &t) in phases.iter().enumerate() {
                        w[a * n + b] += q[a * n + k] * C64::from_polar(1.0, t) * q[b * n + k].conj();
                    }
                }
            }
            let got = unitary_phases(&w, n).unwrap();
            for (g, t) in got.iter().zip(&phases) {
                assert!((g - t).abs() < 1e-10, "n={n}: {got:?} vs {phases:?}");
            }
        }
    }

    #[test]
    fn phases_of_identity_with_rounding_noise() {
        // A 4×4 Wilson loop of a random 8-orbital model (tests/random_models.py, seed 0) on a
        // line where the occupied states do not wind: the identity up to ~3e-15 of rounding.
        // The Schur iteration cannot push such noise below 1e-15 and used to give up.
        let raw: [(f64, f64); 16] = [
            (1.000000000000001, 6.730727086790012e-16),
            (-8.862675133711195e-16, -4.0679265511656126e-16),
            (-1.3357370765021415e-16, -6.418476861114186e-16),
            (1.809967106747301e-15, 3.443426099813962e-16),
            (-2.076857024031764e-15, 1.7867651802561113e-16),
            (1.0000000000000002, 1.0477729794899915e-15),
            (2.3999899290139126e-15, 5.238864897449957e-16),
            (1.2043317731968983e-15, -7.066423184445836e-16),
            (8.430756093247282e-16, -1.48318857196017e-15),
            (6.2363308961366215e-16, -1.8388068845354155e-16),
            (1.000000000000001, -1.4432899320127035e-15),
            (2.9282132274488504e-15, 7.216449660063518e-16),
            (-3.3545215216701507e-16, 2.5413698923060224e-16),
            (-7.26415455565288e-16, -8.900486684476627e-16),
            (-2.581268532253489e-15, 3.885780586188048e-16),
            (1.0000000000000033, 4.579669976578771e-16),
        ];
        let w: Vec<C64> = raw.iter().map(|&(re, im)| C64::new(re, im)).collect();
        let got = unitary_phases(&w, 4).unwrap();
        assert!(got.iter().all(|t| t.abs() < 1e-12), "{got:?}");
    }
}
