//! The complex Jacobi eigensolvers: the size-specialised cyclic one (`jacobi_fixed::<N>`,
//! warm starts and the fallback of the fast paths) and the straightforward dynamic-size one
//! (`jacobi`, the reference the fast paths are tested against). See the notes of `eigen`.

use super::{sort_pairs, JACOBI_MAX_N, SMALL_MAX_N};
use crate::error::{CoreError, CoreResult};
use crate::C64;

const MAX_SWEEPS: usize = 60;

/// One complex Jacobi rotation J = D R that annihilates a[p][q]:
/// J[p][p] = c, J[p][q] = s, J[q][p] = −s e^{−iφ}, J[q][q] = c e^{−iφ} with e^{iφ} = a_pq/|a_pq|.
#[derive(Clone, Copy)]
struct Rot {
    active: bool,
    c: f64,
    s: f64,
    jqp: C64,
    jqq: C64,
    /// t·|a_pq|: a_pp decreases and a_qq increases by this much
    shift: f64,
}

impl Rot {
    const IDLE: Rot = Rot {
        active: false,
        c: 1.0,
        s: 0.0,
        jqp: C64::new(0.0, 0.0),
        jqq: C64::new(1.0, 0.0),
        shift: 0.0,
    };

    #[inline(always)]
    fn annihilating(apq: C64, app: f64, aqq: f64, tol: f64) -> Rot {
        let mag2 = apq.norm_sqr();
        if mag2 == 0.0 || mag2 <= tol * 1e-4 {
            return Rot::IDLE;
        }
        let mag = mag2.sqrt();
        let ph_c = apq.conj() / mag; // e^{−iφ}
        let tau = (aqq - app) / (2.0 * mag);
        let t = if tau >= 0.0 {
            1.0 / (tau + (1.0 + tau * tau).sqrt())
        } else {
            -1.0 / (-tau + (1.0 + tau * tau).sqrt())
        };
        let c = 1.0 / (1.0 + t * t).sqrt();
        let s = t * c;
        Rot {
            active: true,
            c,
            s,
            jqp: -ph_c * s,
            jqq: ph_c * c,
            shift: t * mag,
        }
    }
}

/// Round-robin schedules of all pairs (p < q) for n = 0…`JACOBI_MAX_N`: rounds of n/2 disjoint
/// pairs (n − 1 rounds for even n, n rounds for odd n, where one index sits out each round).
pub(super) const SCHEDULE: [[(u8, u8); 32]; JACOBI_MAX_N + 1] = {
    let mut all = [[(0u8, 0u8); 32]; JACOBI_MAX_N + 1];
    let mut n = 2;
    while n <= JACOBI_MAX_N {
        // circle method on m = n (even) or n + 1 (odd, index n is a dummy) players
        let m = if n % 2 == 0 { n } else { n + 1 };
        let mut idx = 0;
        let mut r = 0;
        while r < m - 1 {
            let mut k = 0;
            while k < m / 2 {
                let (x, y) = if k == 0 {
                    (m - 1, r)
                } else {
                    ((r + k) % (m - 1), (r + m - 1 - k) % (m - 1))
                };
                if x < n && y < n {
                    let (p, q) = if x < y { (x, y) } else { (y, x) };
                    all[n][idx] = (p as u8, q as u8);
                    idx += 1;
                }
                k += 1;
            }
            r += 1;
        }
        n += 1;
    }
    all
};

/// Size-specialised cyclic Jacobi (see the module notes). Same rotations and the same
/// convergence test as [`jacobi`]; `guess` (if any) sets the starting basis.
// Index loops read like the matrix algebra they implement; iterator forms obscure p/q symmetry.
#[allow(clippy::needless_range_loop)]
#[inline(always)]
pub(super) fn jacobi_fixed<const N: usize>(
    h: &[C64],
    guess: Option<&[C64]>,
    evals: &mut [f64],
    vecs: &mut [C64],
) -> CoreResult<()> {
    let zero = C64::new(0.0, 0.0);
    let mut a = [[zero; N]; N];
    // symmetrise: use the Hermitian part so round-off in the input cannot bias the result
    for i in 0..N {
        for j in 0..N {
            a[i][j] = (h[i * N + j] + h[j * N + i].conj()) * 0.5;
        }
    }
    let total: f64 = a.iter().flatten().map(|z| z.norm_sqr()).sum();
    // v[k] is eigenvector k (stored by columns of V as rows here, so a rotation touches two
    // contiguous rows)
    let mut v = [[zero; N]; N];
    match guess {
        None => {
            for (k, row) in v.iter_mut().enumerate() {
                row[k] = C64::new(1.0, 0.0);
            }
        }
        Some(g) => {
            for k in 0..N {
                for i in 0..N {
                    v[k][i] = g[i * N + k];
                }
            }
            // A ← G† A G, G's columns are v[k]
            let mut ag = [[zero; N]; N];
            for i in 0..N {
                for k in 0..N {
                    let mut s = zero;
                    for j in 0..N {
                        s += a[i][j] * v[k][j];
                    }
                    ag[i][k] = s;
                }
            }
            for k in 0..N {
                for l in k..N {
                    let mut s = zero;
                    for i in 0..N {
                        s += v[k][i].conj() * ag[i][l];
                    }
                    a[k][l] = s;
                    a[l][k] = s.conj();
                }
                a[k][k].im = 0.0;
            }
        }
    }
    let tol = (f64::EPSILON * f64::EPSILON) * total.max(f64::MIN_POSITIVE);
    let mut converged = false;
    for _ in 0..MAX_SWEEPS {
        let mut off = 0.0;
        for p in 0..N {
            for q in p + 1..N {
                off += a[p][q].norm_sqr();
            }
        }
        if off <= tol {
            converged = true;
            break;
        }
        // Tournament (round-robin) order: the pairs of one round are disjoint, so their
        // rotation parameters — the sqrt/div chain that dominates at small n — depend only on
        // entries no other rotation of the round touches and can be computed together, letting
        // the CPU overlap them. Applying them one after the other is then exactly the
        // sequential cyclic method in this order.
        let sched = &SCHEDULE[N];
        let per_round = N / 2;
        for round in 0..N - 1 + (N % 2) {
            let pairs = &sched[round * per_round..(round + 1) * per_round];
            let mut rot = [Rot::IDLE; JACOBI_MAX_N / 2];
            for (r, &(p, q)) in rot.iter_mut().zip(pairs) {
                *r = Rot::annihilating(
                    a[p as usize][q as usize],
                    a[p as usize][p as usize].re,
                    a[q as usize][q as usize].re,
                    tol,
                );
            }
            for (r, &(p, q)) in rot.iter().zip(pairs) {
                if !r.active {
                    continue;
                }
                let (p, q) = (p as usize, q as usize);
                let (c, s, jqp, jqq) = (r.c, r.s, r.jqp, r.jqq);
                let (app, aqq) = (a[p][p].re, a[q][q].re);
                // columns p, q of A J for the rows k ≠ p, q; rows p, q follow by Hermiticity
                for k in 0..N {
                    if k == p || k == q {
                        continue;
                    }
                    let akp = a[k][p];
                    let akq = a[k][q];
                    let np = akp * c + akq * jqp;
                    let nq = akp * s + akq * jqq;
                    a[k][p] = np;
                    a[k][q] = nq;
                    a[p][k] = np.conj();
                    a[q][k] = nq.conj();
                }
                a[p][q] = zero;
                a[q][p] = zero;
                a[p][p] = C64::new(app - r.shift, 0.0);
                a[q][q] = C64::new(aqq + r.shift, 0.0);
                for i in 0..N {
                    let vp = v[p][i];
                    let vq = v[q][i];
                    v[p][i] = vp * c + vq * jqp;
                    v[q][i] = vp * s + vq * jqq;
                }
            }
        }
    }
    if !converged {
        return Err(CoreError::NoConvergence(format!(
            "Jacobi eigensolver, n = {N}, after {MAX_SWEEPS} sweeps"
        )));
    }
    // sort ascending (insertion sort on an index array), then write columns
    let mut order = [0usize; N];
    for (k, o) in order.iter_mut().enumerate() {
        *o = k;
    }
    for i in 1..N {
        let mut j = i;
        while j > 0 && a[order[j - 1]][order[j - 1]].re > a[order[j]][order[j]].re {
            order.swap(j - 1, j);
            j -= 1;
        }
    }
    for (k, &o) in order.iter().enumerate() {
        evals[k] = a[o][o].re;
        for i in 0..N {
            vecs[i * N + k] = v[o][i];
        }
    }
    Ok(())
}

/// Cyclic complex Jacobi. Each rotation J = D R (D a diagonal phase, R a real Givens rotation)
/// annihilates one off-diagonal pair; A ← J†AJ and V ← VJ.
pub(super) fn jacobi(h: &[C64], n: usize, evals: &mut [f64], vecs: &mut [C64]) -> CoreResult<()> {
    let mut a = [C64::new(0.0, 0.0); SMALL_MAX_N * SMALL_MAX_N];
    for i in 0..n {
        for j in 0..n {
            // symmetrise: use the Hermitian part so round-off in the input cannot bias the result
            a[i * n + j] = (h[i * n + j] + h[j * n + i].conj()) * 0.5;
        }
    }
    let v = &mut vecs[..n * n];
    v.iter_mut().for_each(|x| *x = C64::new(0.0, 0.0));
    for i in 0..n {
        v[i * n + i] = C64::new(1.0, 0.0);
    }
    let total: f64 = a[..n * n].iter().map(|z| z.norm_sqr()).sum();
    let tol = (f64::EPSILON * f64::EPSILON) * total.max(f64::MIN_POSITIVE);
    let mut converged = n <= 1;
    for _ in 0..MAX_SWEEPS {
        let mut off = 0.0;
        for p in 0..n {
            for q in p + 1..n {
                off += a[p * n + q].norm_sqr();
            }
        }
        if off <= tol {
            converged = true;
            break;
        }
        for p in 0..n {
            for q in p + 1..n {
                let apq = a[p * n + q];
                let mag = apq.norm();
                if mag == 0.0 || mag * mag <= tol * 1e-4 {
                    continue;
                }
                let phase = apq / mag; // e^{iφ}
                let app = a[p * n + p].re;
                let aqq = a[q * n + q].re;
                let tau = (aqq - app) / (2.0 * mag);
                let t = if tau >= 0.0 {
                    1.0 / (tau + (1.0 + tau * tau).sqrt())
                } else {
                    -1.0 / (-tau + (1.0 + tau * tau).sqrt())
                };
                let c = 1.0 / (1.0 + t * t).sqrt();
                let s = t * c;
                // J[p][p] = c, J[p][q] = s, J[q][p] = -s e^{-iφ}, J[q][q] = c e^{-iφ}
                let ph_c = phase.conj();
                let jqp = -ph_c * s;
                let jqq = ph_c * c;
                // columns: A ← A J
                for k in 0..n {
                    let akp = a[k * n + p];
                    let akq = a[k * n + q];
                    a[k * n + p] = akp * c + akq * jqp;
                    a[k * n + q] = akp * s + akq * jqq;
                }
                // rows: A ← J† A
                for k in 0..n {
                    let apk = a[p * n + k];
                    let aqk = a[q * n + k];
                    a[p * n + k] = apk * c + aqk * jqp.conj();
                    a[q * n + k] = apk * s + aqk * jqq.conj();
                }
                a[p * n + q] = C64::new(0.0, 0.0);
                a[q * n + p] = C64::new(0.0, 0.0);
                a[p * n + p] = C64::new(app - t * mag, 0.0);
                a[q * n + q] = C64::new(aqq + t * mag, 0.0);
                for k in 0..n {
                    let vkp = v[k * n + p];
                    let vkq = v[k * n + q];
                    v[k * n + p] = vkp * c + vkq * jqp;
                    v[k * n + q] = vkp * s + vkq * jqq;
                }
            }
        }
    }
    if !converged {
        return Err(CoreError::NoConvergence(format!(
            "Jacobi eigensolver, n = {n}, after {MAX_SWEEPS} sweeps"
        )));
    }
    for i in 0..n {
        evals[i] = a[i * n + i].re;
    }
    sort_pairs(n, evals, v);
    Ok(())
}
