//! Unit tests of `eigen_quad`: the four lanes against the reference Jacobi for every
//! 2 ≤ n ≤ 8, lane independence and declined lanes. (A file of their own to keep
//! `eigen_quad.rs` about the kernel.)

use super::*;
use crate::linalg::eigen::tests::{eigh_reference, pairing_cases, random_hermitian};
use crate::linalg::eigen::{
    eigh_many_into, eigh_occupied_many_into, eigh_occupied_quad_into, eigh_quad_into, QUAD_MAX_N,
};
use crate::CoreError;

const Z: C64 = C64::new(0.0, 0.0);

/// A decomposition of the n×n `h` (eigenvalues `e`, the first `m` vectors as columns of
/// `v`, stride `ld`) against the reference Jacobi, to the accuracy of a backward-stable
/// solver (`scale` = ‖H‖₂ = max |λ|): eigenvalues within 1e-14 ‖H‖, residuals
/// ‖Hv − λv‖ ≤ 1e-13 ‖H‖, V†V = 1 within 1e-14, and the projector onto the lowest j
/// vectors within 1e-14 ‖H‖/gap + 1e-14 of the reference's wherever the gap
/// λ_j − λ_{j−1} > 1e-8 ‖H‖ (the Davis–Kahan bound for perturbations of size ε‖H‖).
fn check_against_reference(
    h: &[C64],
    n: usize,
    e: &[f64],
    v: &[C64],
    m: usize,
    ld: usize,
    what: &str,
) {
    let (er, vr) = eigh_reference(h, n);
    let scale = er[0].abs().max(er[n - 1].abs());
    for k in 0..n {
        let off = (e[k] - er[k]).abs();
        assert!(
            off <= 1e-14 * scale,
            "{what}: eigenvalue {k} off by {off:e}"
        );
    }
    for k in 0..m {
        let res: f64 = (0..n)
            .map(|i| {
                let hv: C64 = (0..n).map(|j| h[i * n + j] * v[j * ld + k]).sum();
                (hv - v[i * ld + k] * e[k]).norm_sqr()
            })
            .sum();
        assert!(res.sqrt() <= 1e-13 * scale, "{what}: residual {k} {res:e}");
        for l in 0..m {
            let d: C64 = (0..n).map(|i| v[i * ld + k].conj() * v[i * ld + l]).sum();
            let want = if k == l { 1.0 } else { 0.0 };
            assert!((d - want).norm() <= 1e-14, "{what}: V†V {k} {l}");
        }
    }
    for j in 1..=m.min(n - 1) {
        let gap = er[j] - er[j - 1];
        if gap <= 1e-8 * scale {
            continue;
        }
        let tol = 1e-14 * scale / gap + 1e-14;
        for a in 0..n {
            for b in 0..n {
                let p: C64 = (0..j).map(|k| v[a * ld + k] * v[b * ld + k].conj()).sum();
                let p0: C64 = (0..j).map(|k| vr[a * n + k] * vr[b * n + k].conj()).sum();
                assert!((p - p0).norm() <= tol, "{what}: projector {j}");
            }
        }
    }
}

/// Four cases of one n in the lanes, through the full and (every filling) the
/// occupied-only entries, against the reference Jacobi.
fn check_group(cases: &[Vec<C64>], idx: [usize; 4], n: usize, occupied: bool) {
    let hs: [&[C64]; 4] = std::array::from_fn(|p| &cases[idx[p]][..]);
    let mut e = vec![vec![0.0; n]; 4];
    let mut v = vec![vec![Z; n * n]; 4];
    let (ev, vv) = (e.iter_mut(), v.iter_mut());
    let ev: Vec<&mut [f64]> = ev.map(|x| &mut x[..]).collect();
    let vv: Vec<&mut [C64]> = vv.map(|x| &mut x[..]).collect();
    let (Ok(ev), Ok(vv)) = (<[_; 4]>::try_from(ev), <[_; 4]>::try_from(vv)) else {
        unreachable!()
    };
    eigh_quad_into(hs, n, ev, vv).unwrap();
    for p in 0..4 {
        let what = format!("n={n} cases {idx:?} lane {p}");
        check_against_reference(hs[p], n, &e[p], &v[p], n, n, &what);
    }
    if !occupied {
        return;
    }
    for nocc in 0..=n {
        let mut o = vec![vec![Z; n * nocc]; 4];
        let mut work = vec![Z; n * n];
        let ev: Vec<&mut [f64]> = e.iter_mut().map(|x| &mut x[..]).collect();
        let ov: Vec<&mut [C64]> = o.iter_mut().map(|x| &mut x[..]).collect();
        let (Ok(ev), Ok(ov)) = (<[_; 4]>::try_from(ev), <[_; 4]>::try_from(ov)) else {
            unreachable!()
        };
        eigh_occupied_quad_into(hs, n, nocc, ev, ov, &mut work).unwrap();
        for p in 0..4 {
            let what = format!("n={n} cases {idx:?} lane {p} nocc {nocc}");
            check_against_reference(hs[p], n, &e[p], &o[p], nocc, nocc, &what);
        }
    }
}

/// The pairing cases of `eigen` (random, clustered and exactly degenerate spectra,
/// already reduced, all-equal, zero, scaled to 1e150, and for n = 4 Kramers-degenerate
/// ones) in the four lanes: for n = 4 every multiset of four of them, for the other
/// n ≤ `QUAD_MAX_N` every window of four consecutive ones and four other spacings.
#[test]
fn quads_match_reference_on_pairing_cases() {
    let cases = pairing_cases(4);
    let c = cases.len();
    let mut groups = 0;
    for a in 0..c {
        for b in a..c {
            for d in b..c {
                for f in d..c {
                    check_group(&cases, [a, b, d, f], 4, (a + b + d + f) % 5 == 0);
                    groups += 1;
                }
            }
        }
    }
    assert!(groups > 1000);
    for n in (2..=QUAD_MAX_N).filter(|&n| n != 4) {
        let cases = pairing_cases(n);
        let c = cases.len();
        for a in 0..c {
            for step in 1..=5 {
                let idx = [a, (a + step) % c, (a + 2 * step) % c, (a + 3 * step) % c];
                check_group(&cases, idx, n, step == 1);
            }
        }
    }
}

/// H = U Λ U† with Λ as in the clustered-spectrum test of `eigen` (pairs or triples split
/// by 1e-6, 1e-10, 1e-14, exactly degenerate, all equal, scaled by 1e±120), four random
/// U in the four lanes, every n ≤ `QUAD_MAX_N`.
#[test]
fn quads_accurate_on_clustered_spectra() {
    for n in 2..=QUAD_MAX_N {
        for delta in [1e-6, 1e-10, 1e-14, 0.0, -1.0, 1e120, 1e-120] {
            let hs: Vec<Vec<C64>> = (0..4u64)
                .map(|seed| {
                    let u_seed = 9100 + 31 * seed + n as u64;
                    let (_, u) = eigh_reference(&random_hermitian(n, u_seed), n);
                    let base = random_hermitian(n, 7100 + 13 * seed + n as u64);
                    let mut lam: Vec<f64> = (0..n).map(|k| 2.0 * base[k * (n + 1)].re).collect();
                    if (0.0..=1e-6).contains(&delta) {
                        for k in 1..n {
                            let lead = if seed < 2 { k - k % 2 } else { k - k % 3 };
                            lam[k] = lam[lead] + delta * (k - lead) as f64;
                        }
                    } else if delta == -1.0 {
                        lam = vec![0.3; n];
                    } else {
                        lam.iter_mut().for_each(|x| *x *= delta);
                    }
                    let mut h = vec![Z; n * n];
                    for i in 0..n {
                        for j in 0..n {
                            for k in 0..n {
                                h[i * n + j] += u[i * n + k] * lam[k] * u[j * n + k].conj();
                            }
                        }
                    }
                    h
                })
                .collect();
            check_group(&hs, [0, 1, 2, 3], n, false);
        }
    }
}

/// Lanes are independent: a matrix gives the same bits in any lane, next to any other
/// matrices (converged lanes only see identity rotations, which change nothing), and a
/// NaN or infinite entry declines its own lane only.
fn lanes_are_independent_at<const N: usize>() {
    let cases = pairing_cases(N);
    let solve = |hs: [&[C64]; 4]| {
        let mut quad = Quad::<N>::new();
        let solved = quad.solve(hs);
        let mut e = [[0.0; N]; 4];
        let mut v = vec![vec![Z; N * N]; 4];
        let [e0, e1, e2, e3] = &mut e;
        let [v0, v1, v2, v3] = &mut v[..] else {
            unreachable!()
        };
        let (mut ev, mut vv) = ([&mut e0[..], e1, e2, e3], [&mut v0[..], v1, v2, v3]);
        quad.write(solved, N, N, &mut ev, &mut vv);
        (solved, e, v)
    };
    let zero = vec![Z; N * N];
    let mut bad = cases[1].clone();
    for (x, c) in cases.iter().enumerate() {
        for p in 0..4 {
            let mut alone: [&[C64]; 4] = [&zero, &zero, &zero, &zero];
            alone[p] = c;
            let (s0, e0, v0) = solve(alone);
            assert!(s0[p]);
            // among random matrices that need more steps, a NaN and an infinity
            for (q, pos) in [(0usize, N - 1), (1, N * N - 3), (2, 0)] {
                let mut mixed: [&[C64]; 4] = std::array::from_fn(|r| &cases[(x + r) % 4][..]);
                bad[pos] = if q == 1 {
                    C64::new(0.1, f64::INFINITY)
                } else {
                    C64::new(f64::NAN, 0.0)
                };
                let b = (p + 1 + q) % 4;
                mixed[b] = &bad;
                mixed[p] = c;
                let (s1, e1, v1) = solve(mixed);
                assert!(!s1[b], "N={N} case {x}: bad lane {b} solved");
                assert!(s1[p], "N={N} case {x} lane {p}");
                assert_eq!(e0[p].map(f64::to_bits), e1[p].map(f64::to_bits), "case {x}");
                assert_eq!(v0[p], v1[p], "N={N} case {x} lane {p}");
                bad[pos] = cases[1][pos];
            }
        }
    }
    // through the entries: an error, as for the single and paired calls
    bad[N + 1] = C64::new(f64::NAN, 0.0);
    let (mut e, mut v) = (vec![vec![0.0; N]; 4], vec![vec![Z; N * N]; 4]);
    let ev: Vec<&mut [f64]> = e.iter_mut().map(|x| &mut x[..]).collect();
    let vv: Vec<&mut [C64]> = v.iter_mut().map(|x| &mut x[..]).collect();
    let (Ok(ev), Ok(vv)) = (<[_; 4]>::try_from(ev), <[_; 4]>::try_from(vv)) else {
        unreachable!()
    };
    let hs: [&[C64]; 4] = [&cases[0], &cases[1], &bad, &cases[2]];
    let r = eigh_quad_into(hs, N, ev, vv);
    assert!(matches!(r, Err(CoreError::InvalidInput(_))));
}

#[test]
fn lanes_are_independent() {
    lanes_are_independent_at::<2>();
    lanes_are_independent_at::<3>();
    lanes_are_independent_at::<4>();
    lanes_are_independent_at::<6>();
    lanes_are_independent_at::<8>();
}

/// The line entries over k = 1…9 consecutive matrices (every remainder after the groups
/// of four: a pair, a single, three in the lanes with a zero filler), random matrices
/// (n = 4: a Kramers-degenerate one among them), every filling, against the reference
/// Jacobi.
#[test]
fn many_entries_cover_every_remainder() {
    for n in [3, 4, 6, 9] {
        let mut pool: Vec<Vec<C64>> = (0..9)
            .map(|s| random_hermitian(n, 5200 + s + 10 * n as u64))
            .collect();
        if n == 4 {
            pool[5] = pairing_cases(4).pop().unwrap(); // closed form (Dirac matrices)
        }
        for k in 1..=9 {
            let h: Vec<C64> = pool[..k].concat();
            let nn = n * n;
            let (mut e, mut v) = (vec![0.0; n * k], vec![Z; nn * k]);
            eigh_many_into(&h, n, &mut e, &mut v).unwrap();
            for j in 0..k {
                let what = format!("n={n} k={k} matrix {j}");
                let (ej, vj) = (&e[n * j..n * (j + 1)], &v[nn * j..nn * (j + 1)]);
                check_against_reference(&pool[j], n, ej, vj, n, n, &what);
            }
            for nocc in 0..=n {
                let no = n * nocc;
                let (mut e, mut o, mut work) = (vec![0.0; n * k], vec![Z; no * k], vec![Z; nn]);
                eigh_occupied_many_into(&h, n, nocc, &mut e, &mut o, &mut work).unwrap();
                for j in 0..k {
                    let what = format!("n={n} k={k} nocc={nocc} matrix {j}");
                    let (ej, oj) = (&e[n * j..n * (j + 1)], &o[no * j..no * (j + 1)]);
                    check_against_reference(&pool[j], n, ej, oj, nocc, nocc, &what);
                }
            }
        }
    }
}
