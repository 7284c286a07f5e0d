//! Small dense complex matrices stored row-major in flat slices: products, the unitary part of
//! an overlap matrix, and the eigenphases of a unitary matrix.

use crate::error::{CoreError, CoreResult};
use crate::linalg::dense::{product, product_loops, Op, View, DENSE_MIN_N};
use crate::linalg::eigen::{eigh, eigh_into, eigh_reference_into, JACOBI_MAX_N};
use crate::C64;

/// `c = a · b` for an (m×k) `a` and a (k×n) `b` (many occupied bands: `dense::product`).
pub fn matmul(a: &[C64], b: &[C64], c: &mut [C64], m: usize, k: usize, n: usize) {
    if m.min(k).min(n) >= DENSE_MIN_N {
        let (a, b) = (View::new(a, m, k, k), View::new(b, k, n, n));
        return product(c, n, a, Op::Plain, b, Op::Plain);
    }
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
    if cols >= DENSE_MIN_N {
        let (u, v) = (View::new(u, rows, cols, ld), View::new(v, rows, cols, ld));
        return product(m, cols, u, Op::Adjoint, v, Op::Plain);
    }
    m[..cols * cols]
        .iter_mut()
        .for_each(|x| *x = C64::new(0.0, 0.0));
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
/// value, so callers can tell a near-singular overlap (states changing too fast) from a good one;
/// when it is below 1e-14 × the largest, `m` is left alone and 0 is returned.
///
/// Fast paths: n = 1 and 2 in closed form (one Kramers pair is the most common occupied set),
/// n ≤ `JACOBI_MAX_N` on stack buffers with the size-specialised eigensolver; larger n allocate.
pub fn unitarise(m: &mut [C64], n: usize) -> CoreResult<f64> {
    match n {
        0 => Ok(1.0),
        1 => {
            let r = m[0].norm();
            if r == 0.0 {
                return Ok(0.0);
            }
            m[0] /= r;
            Ok(r)
        }
        2 => Ok(unitarise_2x2(m)),
        _ if n <= JACOBI_MAX_N => {
            const K: usize = JACOBI_MAX_N * JACOBI_MAX_N;
            let zero = C64::new(0.0, 0.0);
            let (mut mtm, mut v, mut w) = ([zero; K], [zero; K], [zero; K]);
            let mut lam = [0.0; JACOBI_MAX_N];
            polar_with(
                m,
                n,
                &mut mtm[..n * n],
                &mut lam[..n],
                &mut v[..n * n],
                &mut w[..n * n],
            )
        }
        _ => {
            let zero = C64::new(0.0, 0.0);
            let (mut mtm, mut v, mut w) = (vec![zero; n * n], vec![zero; n * n], vec![zero; n * n]);
            let mut lam = vec![0.0; n];
            polar_with(m, n, &mut mtm, &mut lam, &mut v, &mut w)
        }
    }
}

/// Closed-form polar factor of a 2×2 matrix. With s = |det M| = σ₁σ₂ and
/// t = √(‖M‖²_F + 2s) = σ₁ + σ₂: U = (M + (det M / s) adj(M)†) / t — for M = U S,
/// s (M†)⁻¹ = U s S⁻¹ and S + det(S) S⁻¹ = tr(S)·1 (Cayley–Hamilton for 2×2; common practice,
/// no source). Returns the smallest singular value s/σ₁ (0, M left as is, when M is singular
/// to 1e-14 relative).
#[inline]
pub(crate) fn unitarise_2x2(m: &mut [C64]) -> f64 {
    let (m00, m01, m10, m11) = (m[0], m[1], m[2], m[3]);
    let n2 = (m00.norm_sqr() + m11.norm_sqr()) + (m01.norm_sqr() + m10.norm_sqr());
    let det = m00 * m11 - m01 * m10;
    // |det| by sqrt(norm²) rather than libm's overflow-safe hypot: overlap entries are ≤ 1
    let s = det.norm_sqr().sqrt();
    let t2 = n2 + 2.0 * s;
    let t = t2.sqrt();
    let smax = 0.5 * (t + (t2 - 4.0 * s).max(0.0).sqrt());
    let smin = if smax > 0.0 { s / smax } else { 0.0 };
    if smin <= 1e-14 * smax.max(1e-300) {
        return 0.0;
    }
    // one division: f = 1/(s t), then 1/t = s f
    let f = 1.0 / (s * t);
    let (q, g) = (det * f, s * f);
    m[0] = m00 * g + q * m11.conj();
    m[1] = m01 * g - q * m10.conj();
    m[2] = m10 * g - q * m01.conj();
    m[3] = m11 * g + q * m00.conj();
    smin
}

/// Polar factor via the eigen-decomposition of m†m, with caller-provided scratch (n×n each):
/// m†m = V Λ V†, (m†m)^{-1/2} = V Λ^{-1/2} V†, U = m V Λ^{-1/2} V†. The three products go
/// through `dense::product` for many occupied bands, plain loops below.
fn polar_with(
    m: &mut [C64],
    n: usize,
    mtm: &mut [C64],
    lam: &mut [f64],
    v: &mut [C64],
    w: &mut [C64],
) -> CoreResult<f64> {
    let mul = if n >= DENSE_MIN_N {
        product
    } else {
        product_loops
    };
    fn view(a: &[C64], n: usize) -> View<'_> {
        View::new(a, n, n, n)
    }
    mul(mtm, n, view(m, n), Op::Adjoint, view(m, n), Op::Plain);
    eigh_into(mtm, n, lam, v)?;
    let smin = lam[0].max(0.0).sqrt();
    if smin <= 1e-14 * lam[n - 1].max(1e-300).sqrt() {
        return Ok(0.0);
    }
    // w = V Λ^{-1/2} (columns scaled), then mtm = m w and m = mtm V†
    for (row_w, row_v) in w.chunks_exact_mut(n).zip(v.chunks_exact(n)) {
        for ((x, &y), &l) in row_w.iter_mut().zip(row_v).zip(lam.iter()) {
            *x = y / l.sqrt();
        }
    }
    mul(mtm, n, view(m, n), Op::Plain, view(w, n), Op::Plain);
    mul(m, n, view(mtm, n), Op::Plain, view(v, n), Op::Adjoint);
    Ok(smin)
}

/// The straightforward polar factor (allocating, eigen-decomposition of m†m by the reference
/// eigensolver at every n), kept as the reference for the fast paths of [`unitarise`].
pub fn unitarise_reference(m: &mut [C64], n: usize) -> CoreResult<f64> {
    if n == 1 {
        return unitarise(m, 1);
    }
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
    let mut lam = vec![0.0; n];
    let mut v = vec![C64::new(0.0, 0.0); n * n];
    eigh_reference_into(&mtm, n, &mut lam, &mut v)?;
    let smin = lam[0].max(0.0).sqrt();
    if smin <= 1e-14 * lam[n - 1].max(1e-300).sqrt() {
        return Ok(0.0);
    }
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
        _ => normal_phases(w, n)?,
    };
    if out.iter().any(|x| !x.is_finite()) {
        return Err(CoreError::NoConvergence(
            "non-finite Wilson-loop eigenphase".into(),
        ));
    }
    out.sort_by(|a, b| a.total_cmp(b));
    Ok(out)
}

/// Eigenphases of a unitary (hence normal) matrix using Hermitian eigensolvers only.
///
/// A general complex Schur iteration stalls on the clustered spectra that Kramers pairs and
/// weakly dispersing centres make common (seen with nalgebra's Schur on random 8–16 orbital
/// models), so it is not used. Instead: W is normal, so its eigenvectors also diagonalise the
/// Hermitian A = (W + W†)/2, whose eigenvalues are cos θ. Only where cos θ values coincide
/// (θ and −θ, or true degeneracies) is W not yet diagonal in A's eigenbasis; there the
/// Hermitian B = (W − W†)/2i (eigenvalues sin θ), projected on the cluster, separates them.
/// Each phase is read as arg(x† W x) of its final vector x: a residual mixing of size δ between
/// vectors of different clusters moves it by only O(δ²).
fn normal_phases(w_in: &[C64], n: usize) -> CoreResult<Vec<f64>> {
    const CLUSTER: f64 = 1e-7;
    let zero = C64::new(0.0, 0.0);
    // A loop is unitary only to the accuracy of its eigenvectors (~1e-9 for n > 8); that much
    // non-normality would split cos θ of a ±θ pair by more than CLUSTER and mix the pair. Its
    // own polar factor is exactly unitary and moves the phases only by that same ~1e-9.
    let mut w = w_in[..n * n].to_vec();
    unitarise(&mut w, n)?;
    let mut a = vec![zero; n * n];
    let mut b = vec![zero; n * n];
    for i in 0..n {
        for j in 0..n {
            let (x, y) = (w[i * n + j], w[j * n + i].conj());
            a[i * n + j] = (x + y) * 0.5;
            b[i * n + j] = (x - y) * C64::new(0.0, -0.5);
        }
    }
    let (ea, va) = eigh(&a, n)?;
    let column = |k: usize| -> Vec<C64> { (0..n).map(|i| va[i * n + k]).collect() };
    let phase_of = |x: &[C64]| -> C64 {
        let mut s = zero;
        for i in 0..n {
            let mut wx = zero;
            for j in 0..n {
                wx += w[i * n + j] * x[j];
            }
            s += x[i].conj() * wx;
        }
        s
    };
    let mut out = Vec::with_capacity(n);
    let mut start = 0;
    while start < n {
        let mut end = start + 1;
        while end < n && ea[end] - ea[end - 1] < CLUSTER {
            end += 1;
        }
        let cols: Vec<Vec<C64>> = (start..end).map(column).collect();
        if cols.len() == 1 {
            out.push(phase_of(&cols[0]).arg());
        } else {
            let k = cols.len();
            let mut bp = vec![zero; k * k];
            for p in 0..k {
                for q in 0..k {
                    let mut s = zero;
                    for i in 0..n {
                        let mut bx = zero;
                        for j in 0..n {
                            bx += b[i * n + j] * cols[q][j];
                        }
                        s += cols[p][i].conj() * bx;
                    }
                    bp[p * k + q] = s;
                }
            }
            let (_, ub) = eigh(&bp, k)?;
            for m in 0..k {
                let x: Vec<C64> = (0..n)
                    .map(|i| (0..k).map(|p| ub[p * k + m] * cols[p][i]).sum())
                    .collect();
                out.push(phase_of(&x).arg());
            }
        }
        start = end;
    }
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
        let mut rng = crate::test_rng::TestRng::new(seed);
        let mut next = || rng.uniform();
        (0..n * n).map(|_| C64::new(next(), next())).collect()
    }

    #[test]
    fn phases_with_mirror_pairs_and_kramers_clusters() {
        // θ and −θ share cos θ; Kramers-like exact doublets; a four-fold cluster at π
        let phases = [
            -2.0,
            2.0,
            0.7,
            0.7,
            -0.7,
            -0.7,
            std::f64::consts::PI,
            std::f64::consts::PI,
        ];
        let n = phases.len();
        let mut q: Vec<C64> = (0..n * n)
            .map(|i| C64::new(((i * 37 % 11) as f64).sin(), ((i * 17 % 7) as f64).cos()))
            .collect();
        unitarise(&mut q, n).unwrap();
        let mut w = vec![C64::new(0.0, 0.0); n * n];
        for a in 0..n {
            for b in 0..n {
                for (k, &t) in phases.iter().enumerate() {
                    w[a * n + b] += q[a * n + k] * C64::from_polar(1.0, t) * q[b * n + k].conj();
                }
            }
        }
        // compare on the circle: map both to [0, 2π) (π and −π are the same phase)
        let wrap = |x: f64| (x + 1e-9).rem_euclid(std::f64::consts::TAU);
        let mut got: Vec<f64> = unitary_phases(&w, n)
            .unwrap()
            .into_iter()
            .map(wrap)
            .collect();
        let mut want: Vec<f64> = phases.iter().map(|&t| wrap(t)).collect();
        got.sort_by(|a, b| a.total_cmp(b));
        want.sort_by(|a, b| a.total_cmp(b));
        for (g, t) in got.iter().zip(&want) {
            assert!((g - t).abs() < 1e-10, "{got:?} vs {want:?}");
        }
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
    fn fast_unitarise_matches_reference() {
        for n in 1..12 {
            for seed in 0..8 {
                let m0 = rand_matrix(n, 1000 + 31 * n as u64 + seed);
                let (mut a, mut b) = (m0.clone(), m0.clone());
                let sa = unitarise(&mut a, n).unwrap();
                let sb = unitarise_reference(&mut b, n).unwrap();
                assert!(
                    (sa - sb).abs() < 1e-12 * sb.max(1.0),
                    "n={n}: smin {sa} vs {sb}"
                );
                for (x, y) in a.iter().zip(&b) {
                    assert!((x - y).norm() < 1e-10, "n={n}: {x} vs {y}");
                }
            }
        }
        // a singular 2×2 overlap is reported, not divided by zero
        let mut z = vec![
            C64::new(1.0, 0.0),
            C64::new(2.0, 0.0),
            C64::new(2.0, 0.0),
            C64::new(4.0, 0.0),
        ];
        assert_eq!(unitarise(&mut z, 2).unwrap(), 0.0);
        assert_eq!(unitarise_reference(&mut z, 2).unwrap(), 0.0);
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
                        w[a * n + b] +=
                            q[a * n + k] * C64::from_polar(1.0, t) * q[b * n + k].conj();
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

    /// The eigenphases of the n×n unitary `raw` (row-major (re, im)) against `want`, sorted with
    /// −π counted as π; `want` are numpy.linalg.eigvals phases of the same matrix, rounded.
    fn assert_phases(raw: &[(f64, f64)], n: usize, want: &[f64]) {
        let w: Vec<C64> = raw.iter().map(|&(re, im)| C64::new(re, im)).collect();
        let got = unitary_phases(&w, n).unwrap();
        let pi = std::f64::consts::PI;
        let mut g: Vec<f64> = got
            .iter()
            .map(|&t| if t < -3.0 { t + 2.0 * pi } else { t })
            .collect();
        g.sort_by(|a, b| a.total_cmp(b));
        assert_eq!(g.len(), want.len());
        for (a, b) in g.iter().zip(want) {
            assert!((a - b).abs() < 1e-5, "{got:?}");
        }
    }

    #[test]
    fn phases_of_a_loop_that_is_unitary_only_to_1e_8() {
        // A 10×10 Wilson loop of a random 16-orbital model (tests/random_models.py, seed 1,
        // filling 10) as the core computed it: unitary only to 8e-8, with a four-fold cluster
        // of phases near 0. The Schur iteration stalled on it.
        #[rustfmt::skip]
        let raw: [(f64, f64); 100] = [
            (0.9809766718855251, -2.9462834303756137e-10),
            (8.755555959069627e-14, 2.6421999249702077e-10),
            (-0.010300623414686115, -0.003975384711589279),
            (-0.00343623695411253, -0.01819590593453687),
            (-0.0851566035499472, -0.009021914412879403),
            (-0.15028060506084526, 0.043232547333756234),
            (0.05127810871474843, -0.004642193552240998),
            (-0.04010894028514288, 0.027721235579132475),
            (-0.008443951001845794, 0.010720031121175692),
            (-0.005340204641279832, -0.013808841357640439),
            (-3.576826021375575e-11, 2.212163017735946e-10),
            (0.9809766720569773, 7.050750586474358e-10),
            (0.01848938254873912, 0.0010205053490906222),
            (-0.005291794397373508, -0.009690378684701068),
            (0.15507287732247999, -0.020142364028762204),
            (-0.07453299480258825, 0.04216486633423017),
            (-0.04874889990472527, 0.0008594077955083282),
            (-0.04436916929447241, 0.02612223661723451),
            (-0.006663060942142392, -0.013221406843951318),
            (-0.013614874979761049, -0.0009244133832152701),
            (-0.010300623270105648, 0.003975382953644738),
            (0.01848938282189829, -0.001020507356762748),
            (0.9754204100983476, 6.95487571352615e-10),
            (1.3529770165955938e-09, -1.6460787870568525e-10),
            (-0.197866961558519, 0.04114813841000092),
            (-0.0015182469552518785, 0.011416616069549081),
            (0.07414082141443187, -0.0170108660147356),
            (0.02600976112198442, -0.004195064674036459),
            (-0.0014984411152417156, 0.010947926941502203),
            (0.01764691673147785, -0.014114405232033403),
            (-0.0034362370308768406, 0.0181959054098388),
            (-0.005291793045724227, 0.00969037860258083),
            (-1.363042110414216e-09, -1.9015695868955876e-10),
            (0.97542041019263, 2.819408879267942e-10),
            (0.010562693395461668, -0.004590637589483766),
            (0.014686784968041041, 0.2015658802937333),
            (-0.00856129994222593, -0.02491606789979827),
            (0.019947782757561722, 0.07340515637729444),
            (0.000670503020521844, 0.02258717453729034),
            (-0.007372709099486336, 0.008230766498769323),
            (-0.08515660720871583, 0.009021914605894393),
            (0.15507287628660207, 0.020142361108927167),
            (-0.19786696375458057, -0.04114813280577043),
            (0.010562693043683336, 0.004590634931148126),
            (-0.6920241614799706, -3.31174166231683e-09),
            (-1.5394650146674516e-09, 5.726155415878686e-09),
            (0.6295834206183216, -0.0001382571758413967),
            (0.22598188879250986, -0.02434309477584103),
            (-0.0033860188164164516, -0.011155662271306599),
            (-0.012939758561625277, -3.127930893238526e-05),
            (-0.15028059475692296, -0.04323254694456631),
            (-0.07453298937886699, -0.042164854156383345),
            (-0.0015182447393767037, -0.011416637886029854),
            (0.014686781701614401, -0.20156587184187674),
            (1.0805564223340808e-09, 4.449279438720763e-09),
            (-0.6920241635820323, 3.0494211071058685e-09),
            (0.22601836521450627, -0.024002118775145548),
            (-0.6153705846114382, 0.1330200425667335),
            (0.011767462667946989, -0.005381933317252778),
            (0.001532694707854533, 0.011557063444045855),
            (0.05127810737295986, 0.004642194895747282),
            (-0.04874890112012513, -0.0008594068566616286),
            (0.07414082160429869, 0.017010865944529798),
            (-0.008561302130490826, 0.024916066735648636),
            (0.6295834204455788, 0.00013825079210482105),
            (0.22601835882875626, 0.024002138831995604),
            (0.734397612328214, -5.240386457563105e-10),
            (-7.681398931638425e-10, 4.108413978649601e-09),
            (-0.0014243211780695629, -0.023404701900060637),
            (-0.023519607064374663, 0.0035966804623284443),
            (-0.0401089375775768, -0.027721235745544505),
            (-0.04436916962242156, -0.02612223235288155),
            (0.026009764797113324, 0.004195056248164899),
            (0.019947781832439657, -0.07340515586754259),
            (0.22598189567339733, 0.02434310027805955),
            (-0.6153706074022893, -0.1330200479480274),
            (4.834327158964417e-10, 4.802087521463966e-09),
            (0.7343976126176454, -6.581367984230188e-10),
            (-0.02374777297683271, 0.0014667256710848972),
            (-0.003565463943572801, -0.02317532173985608),
            (0.00844395125890329, 0.010720031358644008),
            (0.006663060913294107, -0.013221406633772161),
            (0.001498441435421521, 0.010947926456285709),
            (-0.0006705032153142513, 0.02258717471513894),
            (0.0033860187251005596, -0.01115566193146197),
            (-0.011767462808124579, -0.005381933452432426),
            (0.0014243209624372369, -0.023404701372811913),
            (0.02374777339436173, 0.0014667259711676154),
            (0.998770533071746, -1.039468207689187e-12),
            (-6.875907621051169e-10, 6.512251293777638e-10),
            (0.00534020401278906, -0.013808840144167157),
            (0.013614874578108536, -0.0009244117762705912),
            (-0.017646913622324643, -0.014114405796281539),
            (0.007372707906135732, 0.008230766451491539),
            (0.012939757810441384, -3.127914208750967e-05),
            (-0.0015326956071979002, 0.011557064400756205),
            (0.023519605547704287, 0.003596681208331412),
            (0.003565464395447214, -0.023175321256395414),
            (-6.874800728695618e-10, -6.667588425823823e-10),
            (0.9987705310707126, -6.231498108320854e-11),
        ];
        let pi = std::f64::consts::PI;
        assert_phases(
            &raw,
            10,
            &[
                -0.04959, -0.04959, 0.0, 0.0, 0.0, 0.0, 0.04959, 0.04959, pi, pi,
            ],
        );
    }

    #[test]
    fn phases_of_a_loop_with_a_fourfold_cluster_at_minus_one() {
        // An 8×8 Wilson loop of a random 16-orbital model (tests/random_models.py, seed 302,
        // filling 8), unitary to 6e-14: the Schur iteration stalls at 1e-13 even after
        // re-unitarisation and needs the looser retry.
        #[rustfmt::skip]
        let raw: [(f64, f64); 64] = [
            (-0.9971554997488125, -3.0167985758155005e-12),
            (3.871264094880422e-12, 3.319532460867823e-12),
            (7.916874265875417e-06, -0.00018499701501775966),
            (-0.0007606603457545298, -0.00011409583963066587),
            (0.0020397498417925033, 0.0002712151169814873),
            (0.001240611320655994, -0.006858374985601232),
            (-0.06125751776687423, 0.027005134440021724),
            (-0.0037383796354574367, 0.033641293075945954),
            (-3.2089964027508765e-12, 2.0807663114763043e-12),
            (-0.9971554997477092, -1.986354426753399e-12),
            (0.000765097479519868, -7.90434812261167e-05),
            (-5.871473521384387e-07, 0.00018516540471058573),
            (-0.004421188450481018, 0.005387904676861926),
            (-0.0015279453683498846, -0.0013782307923243034),
            (-0.02940280582866498, -0.01676863415756066),
            (0.05787584776827137, -0.033647392410988367),
            (-7.916869724377522e-06, -0.00018499702124472105),
            (-0.0007650974896525388, -7.9043477570124e-05),
            (0.9997799583228616, -6.344655198762357e-12),
            (2.1895679171678173e-12, 1.589217655856203e-12),
            (0.0013508680604686898, -0.0014597646888462586),
            (-7.68197357000768e-05, 0.000351570548602841),
            (0.009369448584389352, 0.00923621005389334),
            (-0.014303791076556105, 0.007591520577848613),
            (0.0007606603575350108, -0.00011409583978494881),
            (5.871348431950879e-07, 0.00018516541319332653),
            (-3.056121924537719e-12, 1.4216321127030404e-12),
            (0.9997799583233669, 9.901570747128038e-12),
            (0.00020469396105213708, -0.0002959789282490904),
            (0.00014606264722714533, -0.0019835379992387487),
            (-0.014212438229082611, 0.007761199828845967),
            (0.0025519452381183062, 0.012906654029436302),
            (0.0020397498794814577, -0.00027121514340975667),
            (-0.004421188451466285, -0.005387904667094328),
            (-0.0013508679957355582, -0.0014597646789362264),
            (-0.00020469389696466675, -0.00029597889173892306),
            (-0.9814341513312438, 9.73482153720194e-12),
            (-1.7736608351730937e-12, 5.816772844641216e-12),
            (-0.027413697399429726, 0.1069623710868835),
            (-0.15316233628230763, -0.03284737265111539),
            (0.0012406112928176258, 0.006858375016248904),
            (-0.0015279453689924442, 0.001378230778601282),
            (7.681968480030218e-05, 0.00035157054495341567),
            (-0.000146062709463577, -0.0019835380244219588),
            (2.3185769710415416e-12, 8.629365993474691e-12),
            (-0.9814341513297083, -2.0574573403493723e-11),
            (-0.06791041035841211, -0.14115887259925938),
            (-0.09752846419044087, 0.051775074176742576),
            (-0.061257517763803324, -0.027005134434523403),
            (-0.029402805829243542, 0.01676863415939126),
            (-0.009369448585795062, 0.009236210061920361),
            (0.014212438224009829, 0.007761199836562493),
            (-0.027413697405204652, -0.10696237108810842),
            (-0.06791041036001606, 0.14115887259795487),
            (0.9783696094015584, -2.2142793593702206e-11),
            (1.6175283334973756e-11, 1.3202767004671934e-11),
            (-0.0037383796336698883, -0.0336412930781316),
            (0.057875847769097565, 0.03364739240985084),
            (0.014303791079621847, 0.007591520575815641),
            (-0.0025519452350213547, 0.012906654029085536),
            (-0.15316233627870032, 0.03284737265638481),
            (-0.09752846419191737, -0.05177507417951086),
            (-1.7973733612564047e-11, 1.2670081997456784e-11),
            (0.9783696094020498, -1.1319041732550661e-11),
        ];
        let pi = std::f64::consts::PI;
        assert_phases(
            &raw,
            8,
            &[-0.020979, -0.020979, 0.020979, 0.020979, pi, pi, pi, pi],
        );
    }
}
