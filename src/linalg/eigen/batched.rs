//! The entry points for several independent matrices at once: pairs (`eigen_small`'s
//! interleaved solve), four in the lanes of `eigen_quad`, and any number (`eigh_many_into`,
//! `eigh_occupied_many_into`: a Wilson line's κ points). See the notes of `eigen`.

use super::*;

/// [`eigh_into`] for two independent matrices of the same size (`h[p]` → `evals[p]`,
/// `vecs[p]`): where both take the Householder + QR path (2 ≤ n ≤ `SMALL_MAX_N`, not the
/// Kramers closed form) the two are solved together (`eigen_small::solve_pair`, interleaved
/// so one's division chain runs while the other's waits), with the same results as two
/// single calls. Independent κ points (TRIMs, gap grids) come in such pairs.
pub fn eigh_pair_into(
    h: [&[C64]; 2],
    n: usize,
    evals: [&mut [f64]; 2],
    vecs: [&mut [C64]; 2],
) -> CoreResult<()> {
    let [e0, e1] = evals;
    let [v0, v1] = vecs;
    check_sizes(h[0], n, e0, v0)?;
    check_sizes(h[1], n, e1, v1)?;
    let done = match n {
        2 => pair_full::<2>(h, [&mut *e0, &mut *e1], [&mut *v0, &mut *v1]),
        3 => pair_full::<3>(h, [&mut *e0, &mut *e1], [&mut *v0, &mut *v1]),
        4 => {
            let kramers = [
                eigen_small::two_level4::<2, 4>(h[0], e0, v0),
                eigen_small::two_level4::<2, 4>(h[1], e1, v1),
            ];
            match kramers {
                [true, true] => [true, true],
                [false, true] => [small_full::<4>(h[0], e0, v0), true],
                [true, false] => [true, small_full::<4>(h[1], e1, v1)],
                [false, false] => pair_full::<4>(h, [&mut *e0, &mut *e1], [&mut *v0, &mut *v1]),
            }
        }
        5 => pair_full::<5>(h, [&mut *e0, &mut *e1], [&mut *v0, &mut *v1]),
        6 => pair_full::<6>(h, [&mut *e0, &mut *e1], [&mut *v0, &mut *v1]),
        7 => pair_full::<7>(h, [&mut *e0, &mut *e1], [&mut *v0, &mut *v1]),
        8 => pair_full::<8>(h, [&mut *e0, &mut *e1], [&mut *v0, &mut *v1]),
        _ => [false, false],
    };
    for (p, (e, v)) in [(e0, v0), (e1, v1)].into_iter().enumerate() {
        if !done[p] {
            eigh_into(h[p], n, e, v)?;
        }
    }
    Ok(())
}

/// [`eigh_occupied_into`] for two independent matrices of the same size (a Wilson line's κ
/// points s and s + 1): the Kramers closed form first for each, then the paired
/// Householder + QR where both need it, the single paths for what is left. `work` (n × n) is
/// scratch for the fallbacks.
pub fn eigh_occupied_pair_into(
    h: [&[C64]; 2],
    n: usize,
    nocc: usize,
    evals: [&mut [f64]; 2],
    occ: [&mut [C64]; 2],
    work: &mut [C64],
) -> CoreResult<()> {
    let [e0, e1] = evals;
    let [o0, o1] = occ;
    check_sizes(h[0], n, e0, work)?;
    check_sizes(h[1], n, e1, work)?;
    if nocc > n || o0.len() < n * nocc || o1.len() < n * nocc {
        return Err(CoreError::Internal(
            "eigh_occupied_pair_into: buffer too small".into(),
        ));
    }
    let done = match n {
        2 => pair_occupied::<2>(h, nocc, [&mut *e0, &mut *e1], [&mut *o0, &mut *o1]),
        3 => pair_occupied::<3>(h, nocc, [&mut *e0, &mut *e1], [&mut *o0, &mut *o1]),
        4 => {
            let kramers = match nocc {
                2 => [
                    eigen_small::two_level4::<1, 2>(h[0], e0, o0),
                    eigen_small::two_level4::<1, 2>(h[1], e1, o1),
                ],
                0 => [
                    eigen_small::two_level4::<0, 0>(h[0], e0, o0),
                    eigen_small::two_level4::<0, 0>(h[1], e1, o1),
                ],
                _ => [false, false],
            };
            match kramers {
                [true, true] => [true, true],
                [false, true] => [small_occupied::<4>(h[0], nocc, e0, o0), true],
                [true, false] => [true, small_occupied::<4>(h[1], nocc, e1, o1)],
                [false, false] => {
                    pair_occupied::<4>(h, nocc, [&mut *e0, &mut *e1], [&mut *o0, &mut *o1])
                }
            }
        }
        5 => pair_occupied::<5>(h, nocc, [&mut *e0, &mut *e1], [&mut *o0, &mut *o1]),
        6 => pair_occupied::<6>(h, nocc, [&mut *e0, &mut *e1], [&mut *o0, &mut *o1]),
        7 => pair_occupied::<7>(h, nocc, [&mut *e0, &mut *e1], [&mut *o0, &mut *o1]),
        8 => pair_occupied::<8>(h, nocc, [&mut *e0, &mut *e1], [&mut *o0, &mut *o1]),
        _ => [false, false],
    };
    for (p, (e, o)) in [(e0, o0), (e1, o1)].into_iter().enumerate() {
        if !done[p] {
            eigh_occupied_into(h[p], n, nocc, e, o, work)?;
        }
    }
    Ok(())
}

/// [`eigh_into`] for four independent matrices of the same size (`h[p]` → `evals[p]`,
/// `vecs[p]`). 2 ≤ n ≤ `QUAD_MAX_N`: the Kramers closed form where it applies (n = 4), then
/// the others together in the lanes of `eigen_quad` when three or four are left (a zero
/// matrix fills a free lane), as a pair or alone otherwise. Other n: two
/// [`eigh_pair_into`]. The results may differ from single solves in the last bits (another
/// order of the same operations).
pub fn eigh_quad_into(
    h: [&[C64]; 4],
    n: usize,
    evals: [&mut [f64]; 4],
    vecs: [&mut [C64]; 4],
) -> CoreResult<()> {
    let [e0, e1, e2, e3] = evals;
    let [v0, v1, v2, v3] = vecs;
    if !(2..=QUAD_MAX_N).contains(&n) {
        eigh_pair_into([h[0], h[1]], n, [e0, e1], [v0, v1])?;
        return eigh_pair_into([h[2], h[3]], n, [e2, e3], [v2, v3]);
    }
    let (mut evals, mut vecs) = ([e0, e1, e2, e3], [v0, v1, v2, v3]);
    for p in 0..4 {
        check_sizes(h[p], n, evals[p], vecs[p])?;
    }
    // the closed form until it first declines (see `lanes`)
    let mut done = [false; 4];
    for p in 0..4 {
        if n != 4 {
            break;
        }
        done[p] = eigen_small::two_level4::<2, 4>(h[p], evals[p], vecs[p]);
        if !done[p] {
            break;
        }
    }
    if done.iter().filter(|&&d| !d).count() >= 3 {
        lanes(h, n, &mut done, n, n, &mut evals, &mut vecs);
    }
    let (left, count) = not_done(&done);
    if let [a, b] = left[..count] {
        let (lo_e, hi_e) = evals.split_at_mut(b);
        let (lo_v, hi_v) = vecs.split_at_mut(b);
        return eigh_pair_into(
            [h[a], h[b]],
            n,
            [&mut *lo_e[a], &mut *hi_e[0]],
            [&mut *lo_v[a], &mut *hi_v[0]],
        );
    }
    for &p in &left[..count] {
        eigh_into(h[p], n, evals[p], vecs[p])?;
    }
    Ok(())
}

/// [`eigh_occupied_into`] for four independent matrices of the same size (a Wilson line's κ
/// points s … s + 3): as [`eigh_quad_into`], with the occupied-only closed form and only
/// the lowest `nocc` vectors formed. `work` (n × n) is scratch for the fallbacks.
pub fn eigh_occupied_quad_into(
    h: [&[C64]; 4],
    n: usize,
    nocc: usize,
    evals: [&mut [f64]; 4],
    occ: [&mut [C64]; 4],
    work: &mut [C64],
) -> CoreResult<()> {
    let [e0, e1, e2, e3] = evals;
    let [o0, o1, o2, o3] = occ;
    if !(2..=QUAD_MAX_N).contains(&n) {
        eigh_occupied_pair_into([h[0], h[1]], n, nocc, [e0, e1], [o0, o1], work)?;
        return eigh_occupied_pair_into([h[2], h[3]], n, nocc, [e2, e3], [o2, o3], work);
    }
    let (mut evals, mut occ) = ([e0, e1, e2, e3], [o0, o1, o2, o3]);
    for p in 0..4 {
        check_sizes(h[p], n, evals[p], work)?;
        if nocc > n || occ[p].len() < n * nocc {
            return Err(CoreError::Internal(
                "eigh_occupied_quad_into: buffer too small".into(),
            ));
        }
    }
    // the closed form until it first declines (see `lanes`)
    let mut done = [false; 4];
    for p in 0..4 {
        if n != 4 {
            break;
        }
        done[p] = match nocc {
            2 => eigen_small::two_level4::<1, 2>(h[p], evals[p], occ[p]),
            0 => eigen_small::two_level4::<0, 0>(h[p], evals[p], occ[p]),
            _ => false,
        };
        if !done[p] {
            break;
        }
    }
    if done.iter().filter(|&&d| !d).count() >= 3 {
        lanes(h, n, &mut done, nocc, nocc, &mut evals, &mut occ);
    }
    let (left, count) = not_done(&done);
    if let [a, b] = left[..count] {
        let (lo_e, hi_e) = evals.split_at_mut(b);
        let (lo_o, hi_o) = occ.split_at_mut(b);
        return eigh_occupied_pair_into(
            [h[a], h[b]],
            n,
            nocc,
            [&mut *lo_e[a], &mut *hi_e[0]],
            [&mut *lo_o[a], &mut *hi_o[0]],
            work,
        );
    }
    for &p in &left[..count] {
        eigh_occupied_into(h[p], n, nocc, evals[p], occ[p], work)?;
    }
    Ok(())
}

/// The indices p with `!done[p]`, ascending, and how many there are.
fn not_done(done: &[bool; 4]) -> ([usize; 4], usize) {
    let (mut left, mut count) = ([0; 4], 0);
    for (p, _) in done.iter().enumerate().filter(|(_, &d)| !d) {
        left[count] = p;
        count += 1;
    }
    (left, count)
}

/// The 4-lane solve of the n×n matrices not yet `done` (called when three or four are left;
/// the others' lanes run the zero matrix, which converges at once): eigenvalues and the lowest
/// `count` vectors (row stride `ld`) written for the solved lanes, which are marked done.
/// Lanes that decline stay not done (the caller's single paths then decide).
///
/// The callers try the Kramers closed form only until it first declines: its refusal costs
/// ~180 instructions per matrix (it builds A = H − d0 before it can test A² = r²), more
/// than a tenth of a lane's share of the solve (~1600 at n = 4), and a line of a model
/// without inversion is generic except at its TRIMs; a Kramers-degenerate matrix in a lane
/// is solved as accurately, only without the shortcut.
fn lanes(
    h: [&[C64]; 4],
    n: usize,
    done: &mut [bool; 4],
    count: usize,
    ld: usize,
    evals: &mut [&mut [f64]; 4],
    out: &mut [&mut [C64]; 4],
) {
    match n {
        2 => lanes_of::<2>(h, done, count, ld, evals, out),
        3 => lanes_of::<3>(h, done, count, ld, evals, out),
        4 => lanes_of::<4>(h, done, count, ld, evals, out),
        5 => lanes_of::<5>(h, done, count, ld, evals, out),
        6 => lanes_of::<6>(h, done, count, ld, evals, out),
        7 => lanes_of::<7>(h, done, count, ld, evals, out),
        8 => lanes_of::<8>(h, done, count, ld, evals, out),
        _ => {} // (not called: the pairs and single solves take the rest)
    }
}

/// [`lanes`] for one size.
fn lanes_of<const N: usize>(
    h: [&[C64]; 4],
    done: &mut [bool; 4],
    count: usize,
    ld: usize,
    evals: &mut [&mut [f64]; 4],
    out: &mut [&mut [C64]; 4],
) {
    let zero = [C64::new(0.0, 0.0); QUAD_MAX_N * QUAD_MAX_N];
    let lanes: [&[C64]; 4] = std::array::from_fn(|p| if done[p] { &zero[..] } else { h[p] });
    let mut quad = eigen_quad::Quad::<N>::new();
    let solved = quad.solve(lanes);
    let which: [bool; 4] = std::array::from_fn(|p| !done[p] && solved[p]);
    quad.write(which, count, ld, evals, out);
    for p in 0..4 {
        done[p] |= which[p];
    }
}

/// [`eigh_into`] for k consecutive matrices (`h`: k × n × n; `evals`: k × n; `vecs`:
/// k × n × n), four at a time with [`eigh_quad_into`], the rest in a pair and alone:
/// isolated κ points (TRIMs, gap grids of batch sources).
pub fn eigh_many_into(h: &[C64], n: usize, evals: &mut [f64], vecs: &mut [C64]) -> CoreResult<()> {
    let nn = n * n;
    let k = h.len() / nn.max(1);
    if evals.len() < k * n || vecs.len() < k * nn {
        return Err(CoreError::Internal(
            "eigh_many_into: buffer too small".into(),
        ));
    }
    let mut p = 0;
    while p < k {
        let g = (k - p).min(4);
        let hs = &h[p * nn..(p + g) * nn];
        let (es, vs) = (
            &mut evals[p * n..(p + g) * n],
            &mut vecs[p * nn..(p + g) * nn],
        );
        if g == 4 {
            eigh_quad_into(split4(hs, nn), n, split4_mut(es, n), split4_mut(vs, nn))?;
        } else if g >= 2 {
            let (e01, v01) = (split2(&mut es[..2 * n], n), split2(&mut vs[..2 * nn], nn));
            eigh_pair_into([&hs[..nn], &hs[nn..2 * nn]], n, e01, v01)?;
        }
        if g % 2 == 1 {
            let (j0, j1) = (g - 1, g);
            eigh_into(
                &hs[j0 * nn..j1 * nn],
                n,
                &mut es[j0 * n..j1 * n],
                &mut vs[j0 * nn..j1 * nn],
            )?;
        }
        p += g;
    }
    Ok(())
}

/// The first two blocks of `len` entries of `buf`.
fn split2<T>(buf: &mut [T], len: usize) -> [&mut [T]; 2] {
    let (a, b) = buf.split_at_mut(len);
    [a, &mut b[..len]]
}

/// [`eigh_occupied_into`] for k consecutive matrices of a line (`h`: k × n × n; `evals`: k × n;
/// `occ`: k × n × nocc, empty for nocc = 0 — eigenvalues only), four at a time with
/// [`eigh_occupied_quad_into`] (three 4×4s left over too, a zero matrix filling the fourth
/// lane), the rest in a pair and alone: the κ points of a Wilson line,
/// the bulk gap grid and the lattice mesh rows. `work` (n × n) is scratch for the fallbacks.
pub fn eigh_occupied_many_into(
    h: &[C64],
    n: usize,
    nocc: usize,
    evals: &mut [f64],
    occ: &mut [C64],
    work: &mut [C64],
) -> CoreResult<()> {
    let (nn, no) = (n * n, n * nocc);
    let k = h.len() / nn.max(1);
    if evals.len() < k * n || occ.len() < k * no {
        return Err(CoreError::Internal(
            "eigh_occupied_many_into: buffer too small".into(),
        ));
    }
    if n == 0 {
        return Ok(());
    }
    // the groups of four by exact chunks (no index arithmetic per group: slicing each group
    // by hand cost ~150 instructions, ~3 % of a Wilson–Dirac point), then the rest
    let full = k / 4 * 4;
    let (h4, h_rest) = h[..k * nn].split_at(full * nn);
    let (e4, e_rest) = evals[..k * n].split_at_mut(full * n);
    let (o4, o_rest) = occ[..k * no].split_at_mut(full * no);
    for (j, (hg, eg)) in h4
        .chunks_exact(4 * nn)
        .zip(e4.chunks_exact_mut(4 * n))
        .enumerate()
    {
        let og = &mut o4[j * 4 * no..(j + 1) * 4 * no];
        let (hq, eq, oq) = (split4(hg, nn), split4_mut(eg, n), split4_mut(og, no));
        eigh_occupied_quad_into(hq, n, nocc, eq, oq, work)?;
    }
    let (hs, es, os, g) = (h_rest, e_rest, o_rest, k - full);
    if g == 3 && (2..=QUAD_MAX_N).contains(&n) && nocc <= n {
        // three left: the lanes with a zero matrix in the fourth (cheaper than a pair and a
        // single solve)
        const M: usize = QUAD_MAX_N * QUAD_MAX_N;
        let (zero, mut e_fill, mut o_fill) = (
            [C64::new(0.0, 0.0); M],
            [0.0; QUAD_MAX_N],
            [C64::new(0.0, 0.0); M],
        );
        let hq = [&hs[..nn], &hs[nn..2 * nn], &hs[2 * nn..3 * nn], &zero[..nn]];
        let (ea, e2) = es.split_at_mut(2 * n);
        let [e0, e1] = split2(ea, n);
        let (oa, o2) = os.split_at_mut(2 * no);
        let [o0, o1] = split2(oa, no);
        eigh_occupied_quad_into(
            hq,
            n,
            nocc,
            [e0, e1, e2, &mut e_fill[..n]],
            [o0, o1, o2, &mut o_fill[..no]],
            work,
        )?;
    } else {
        if g >= 2 {
            let (e01, o01) = (split2(&mut es[..2 * n], n), split2(&mut os[..2 * no], no));
            eigh_occupied_pair_into([&hs[..nn], &hs[nn..2 * nn]], n, nocc, e01, o01, work)?;
        }
        if g % 2 == 1 {
            let (j0, j1) = (g - 1, g);
            eigh_occupied_into(
                &hs[j0 * nn..j1 * nn],
                n,
                nocc,
                &mut es[j0 * n..j1 * n],
                &mut os[j0 * no..j1 * no],
                work,
            )?;
        }
    }
    Ok(())
}

/// The first four consecutive blocks of `len` entries of `buf`.
fn split4<T>(buf: &[T], len: usize) -> [&[T]; 4] {
    let (a, b) = buf.split_at(2 * len);
    let ((a0, a1), (b0, b1)) = (a.split_at(len), b.split_at(len));
    [a0, a1, b0, &b1[..len]]
}

/// [`split4`] of a mutable buffer.
fn split4_mut<T>(buf: &mut [T], len: usize) -> [&mut [T]; 4] {
    let (a, b) = buf.split_at_mut(2 * len);
    let ([a0, a1], [b0, b1]) = (split2(a, len), split2(b, len));
    [a0, a1, b0, b1]
}

/// Paired Householder + QR, every vector formed; `[false, _]` where a solve declined.
#[inline(always)]
fn pair_full<const N: usize>(
    h: [&[C64]; 2],
    evals: [&mut [f64]; 2],
    vecs: [&mut [C64]; 2],
) -> [bool; 2] {
    let (mut wa, mut wb) = (eigen_small::Work::<N>::new(), eigen_small::Work::<N>::new());
    let done = eigen_small::solve_pair::<N>(h, [&mut wa, &mut wb]);
    for (p, (e, v)) in evals.into_iter().zip(vecs).enumerate() {
        if done[p] {
            write_full(if p == 0 { &wa.out } else { &wb.out }, e, v);
        }
    }
    done
}

/// Paired Householder + QR, only the lowest `nocc` vectors formed.
#[inline(always)]
fn pair_occupied<const N: usize>(
    h: [&[C64]; 2],
    nocc: usize,
    evals: [&mut [f64]; 2],
    occ: [&mut [C64]; 2],
) -> [bool; 2] {
    let (mut wa, mut wb) = (eigen_small::Work::<N>::new(), eigen_small::Work::<N>::new());
    let done = eigen_small::solve_pair::<N>(h, [&mut wa, &mut wb]);
    for (p, (e, o)) in evals.into_iter().zip(occ).enumerate() {
        if done[p] {
            write_occupied(if p == 0 { &wa.out } else { &wb.out }, nocc, e, o);
        }
    }
    done
}
