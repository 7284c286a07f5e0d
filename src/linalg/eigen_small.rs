//! Size-specialised Hermitian eigensolver for 2 ≤ n ≤ 16: Householder reduction to a real
//! symmetric tridiagonal matrix, then implicit QR steps with Wilkinson shifts.
//!
//! Everything runs in real arithmetic on split real/imaginary arrays of fixed size (one
//! instantiation per n), so loops unroll, nothing touches the heap and LLVM can vectorise the
//! row updates. Steps:
//!
//! 1. Householder: n − 2 reflections H_k = 1 − τ_k v_k v_k† bring the Hermitian part of H to a
//!    Hermitian tridiagonal T_c = Q_H† H Q_H, Q_H = H_0 H_1 ⋯ (only v_k and τ_k are kept).
//! 2. A diagonal phase D (d_0 = 1, d_{k+1} = d_k b_k/|b_k| for the sub-diagonal b_k) makes the
//!    sub-diagonal real and non-negative: T = D†T_cD.
//! 3. Implicit symmetric QR steps with a Wilkinson shift on the unreduced bottom block, each a
//!    chase of real Givens rotations accumulated into a real orthogonal Z. An off-diagonal e_i
//!    is set to zero when |e_i| ≤ ε‖T‖ (normwise: it moves an eigenvalue by at most ε‖H‖, the
//!    accuracy asked for; a relative test per pair of diagonal entries cost ~5 % more
//!    instructions and is not needed for it). Each sweep runs on a block whose size is a
//!    compile-time constant up to 8 (`chase::<N, M>`), so it unrolls and stays in registers;
//!    larger blocks (n = 9…16) take the same loop with a run-time length (`chase_any`).
//! 4. Eigenvector k is Q_H D Z e_k, formed only on request ([`SmallEigen::vector`]) by
//!    applying D and the reflections backwards to column k of Z: half the work of carrying the
//!    complex Q through the rotations, and callers that want only the occupied vectors pay only
//!    for those.
//!
//! The method is normwise backward stable (Golub & Van Loan, *Matrix Computations*, 4th ed.,
//! §8.3 — handbook fact): eigenvalues to a few ε‖H‖, residuals ‖Hv − λv‖ of a few ε‖H‖ and
//! orthonormality to a few ε, also for degenerate and clustered spectra (the eigenvectors are
//! columns of a product of unitary transforms, never solved for). A matrix whose Frobenius
//! norm² is outside [1e-200, 1e200] (where squares could under- or overflow) is first scaled
//! by a power of two (exact); non-finite input or an iteration that does not converge in
//! 30 n steps returns `None`, and the caller runs Jacobi or the large-matrix solver.

use crate::fmadd;

/// Result of [`Work::solve`]: eigenvalues (unsorted) and the factors Q_H, D, Z of the eigenvectors.
pub(crate) struct SmallEigen<const N: usize> {
    pub vals: [f64; N],
    /// Householder vectors (row k: v_k, nonzero from index k + 1) and factors τ_k
    vr: [[f64; N]; N],
    vi: [[f64; N]; N],
    tau: [f64; N],
    /// the diagonal phase D
    phr: [f64; N],
    phi: [f64; N],
    /// Zᵀ: row k is column k of the real orthogonal Z
    zt: [[f64; N]; N],
}

impl<const N: usize> SmallEigen<N> {
    /// Indices of the eigenvalues in ascending order.
    #[inline(always)]
    pub fn order(&self) -> [usize; N] {
        let mut order: [usize; N] = std::array::from_fn(|k| k);
        for i in 1..N {
            let mut j = i;
            while j > 0 && self.vals[order[j - 1]] > self.vals[order[j]] {
                order.swap(j - 1, j);
                j -= 1;
            }
        }
        order
    }

    /// Unit eigenvector of `vals[k]` (real and imaginary parts): Q_H D Z e_k.
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    pub fn vector(&self, k: usize) -> ([f64; N], [f64; N]) {
        let z = &self.zt[k];
        let mut xr: [f64; N] = std::array::from_fn(|i| self.phr[i] * z[i]);
        let mut xi: [f64; N] = std::array::from_fn(|i| self.phi[i] * z[i]);
        // x ← H_j x = x − τ_j v_j (v_j† x), last reflection first
        for j in (0..N.saturating_sub(2)).rev() {
            let (v_r, v_i) = (&self.vr[j], &self.vi[j]);
            let (mut sr, mut si) = (0.0, 0.0);
            for i in j + 1..N {
                sr += v_r[i] * xr[i] + v_i[i] * xi[i];
                si += v_r[i] * xi[i] - v_i[i] * xr[i];
            }
            sr *= self.tau[j];
            si *= self.tau[j];
            for i in j + 1..N {
                xr[i] -= v_r[i] * sr - v_i[i] * si;
                xi[i] -= v_r[i] * si + v_i[i] * sr;
            }
        }
        (xr, xi)
    }
}

/// Working state of one Householder + QR solve, kept in place (owned by the caller, reused
/// across calls; nothing large is moved — returning the factors by value cost a memcpy per
/// solve once two solves were interleaved).
pub(crate) struct Work<const N: usize> {
    /// the result once [`Work::solve`] or [`solve_pair`] returned true
    pub out: SmallEigen<N>,
    /// Hermitian part on split arrays, reduced in place
    ar: [[f64; N]; N],
    ai: [[f64; N]; N],
    /// the real tridiagonal matrix: diagonal d, off-diagonal e
    d: [f64; N],
    e: [f64; N],
    /// ε‖T‖: the deflation threshold
    small: f64,
    /// last row of the block still to converge
    hi: usize,
    iterations: usize,
    /// power of two the eigenvalues are scaled back by
    unscale: f64,
}

/// After loading a matrix.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Loaded {
    /// reduce and iterate
    Reduce,
    /// the zero matrix: identity eigenvectors, zero eigenvalues (done)
    Zero,
    /// NaN or ±∞ in the input
    Declined,
}

/// What the QR iteration does next on one matrix.
#[derive(Clone, Copy)]
enum Next {
    /// a sweep on the unreduced block lo..=hi with shift mu
    Sweep {
        lo: usize,
        mu: f64,
    },
    Converged,
    /// too many iterations
    Failed,
}

impl<const N: usize> Work<N> {
    pub fn new() -> Self {
        Work {
            out: SmallEigen {
                vals: [0.0; N],
                vr: [[0.0; N]; N],
                vi: [[0.0; N]; N],
                tau: [0.0; N],
                phr: [1.0; N],
                phi: [0.0; N],
                zt: [[0.0; N]; N],
            },
            ar: [[0.0; N]; N],
            ai: [[0.0; N]; N],
            d: [0.0; N],
            e: [0.0; N],
            small: 0.0,
            hi: 0,
            iterations: 0,
            unscale: 1.0,
        }
    }

    /// Householder + implicit QR for the Hermitian part of the row-major N×N `h`; the result
    /// is in `self.out`. False when the input is not finite or the iteration did not converge
    /// (the caller runs Jacobi).
    #[inline(always)]
    pub fn solve(&mut self, h: &[crate::C64]) -> bool {
        match self.load(h) {
            Loaded::Reduce => {}
            Loaded::Zero => return true,
            Loaded::Declined => return false,
        }
        for k in 0..N.saturating_sub(2) {
            self.reflect(k);
        }
        self.tridiagonal();
        self.iterate()
    }

    /// Hermitian part on split arrays, factors reset. Far from norm 1 (where squares could
    /// under- or overflow) the matrix is scaled by a power of two — exact — and the
    /// eigenvalues scaled back at the end.
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn load(&mut self, h: &[crate::C64]) -> Loaded {
        let (ar, ai) = (&mut self.ar, &mut self.ai);
        let mut total = 0.0;
        for i in 0..N {
            for j in 0..N {
                let (x, y) = (h[i * N + j], h[j * N + i]);
                ar[i][j] = 0.5 * (x.re + y.re);
                ai[i][j] = 0.5 * (x.im - y.im);
                total += ar[i][j] * ar[i][j] + ai[i][j] * ai[i][j];
            }
        }
        let out = &mut self.out;
        out.vals = [0.0; N];
        out.tau = [0.0; N];
        out.phr = [1.0; N];
        out.phi = [0.0; N];
        out.zt = [[0.0; N]; N];
        for k in 0..N {
            out.zt[k][k] = 1.0;
        }
        self.unscale = 1.0;
        if !(1e-200..=1e200).contains(&total) {
            let big = ar
                .iter()
                .chain(ai.iter())
                .flatten()
                .fold(0.0f64, |m, x| m.max(x.abs()));
            if total.is_nan() || !big.is_finite() {
                return Loaded::Declined;
            }
            if big == 0.0 {
                return Loaded::Zero;
            }
            let e = big.log2().round() as i32;
            self.unscale = 2f64.powi(e);
            let scale = 2f64.powi(-e);
            for row in ar.iter_mut().chain(ai.iter_mut()) {
                for x in row.iter_mut() {
                    *x *= scale;
                }
            }
        }
        Loaded::Reduce
    }

    /// Householder reflection k: column k below the sub-diagonal to zero, in place.
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn reflect(&mut self, k: usize) {
        let (ar, ai) = (&mut self.ar, &mut self.ai);
        let s = k + 1; // first row of the reflected block
        let mut sigma = 0.0;
        for i in s + 1..N {
            sigma += ar[i][k] * ar[i][k] + ai[i][k] * ai[i][k];
        }
        if sigma == 0.0 {
            return; // already tridiagonal in this column (τ_k = 0: H_k = 1)
        }
        let (x0r, x0i) = (ar[s][k], ai[s][k]);
        let a2 = x0r * x0r + x0i * x0i;
        let (ax0, xnorm) = (a2.sqrt(), (a2 + sigma).sqrt()); // independent: side by side
                                                             // phase of x0 (1 when x0 = 0), so v0 = x0 + phase·‖x‖ has no cancellation
        let (pr, pi) = if ax0 > 0.0 {
            (x0r / ax0, x0i / ax0)
        } else {
            (1.0, 0.0)
        };
        let (vr, vi) = (&mut self.out.vr[k], &mut self.out.vi[k]);
        vr[s] = pr * (ax0 + xnorm);
        vi[s] = pi * (ax0 + xnorm);
        for i in s + 1..N {
            vr[i] = ar[i][k];
            vi[i] = ai[i][k];
        }
        let tau = 2.0 / ((ax0 + xnorm) * (ax0 + xnorm) + sigma);
        self.out.tau[k] = tau;
        // p = τ B v (B the trailing block, Hermitian)
        let mut p_r = [0.0f64; N];
        let mut p_i = [0.0f64; N];
        for i in s..N {
            let (mut sr, mut si) = (0.0, 0.0);
            for j in s..N {
                sr += ar[i][j] * vr[j] - ai[i][j] * vi[j];
                si += ar[i][j] * vi[j] + ai[i][j] * vr[j];
            }
            p_r[i] = tau * sr;
            p_i[i] = tau * si;
        }
        // K = (τ/2) v†p is real; w = p − K v
        let mut kk = 0.0;
        for i in s..N {
            kk += vr[i] * p_r[i] + vi[i] * p_i[i];
        }
        kk *= 0.5 * tau;
        let mut wr = [0.0f64; N];
        let mut wi = [0.0f64; N];
        for i in s..N {
            wr[i] = p_r[i] - kk * vr[i];
            wi[i] = p_i[i] - kk * vi[i];
        }
        // B ← H B H = B − v w† − w v†
        for i in s..N {
            for j in s..N {
                ar[i][j] -= vr[i] * wr[j] + vi[i] * wi[j] + wr[i] * vr[j] + wi[i] * vi[j];
                ai[i][j] -= vi[i] * wr[j] - vr[i] * wi[j] + wi[i] * vr[j] - wr[i] * vi[j];
            }
        }
        // the sub-diagonal entry of column k becomes α = −phase·‖x‖
        ar[s][k] = -pr * xnorm;
        ai[s][k] = -pi * xnorm;
    }

    /// The real tridiagonal matrix: diagonal d, off-diagonal e (≥ 0 until the QR steps),
    /// phases D; the deflation threshold; QR starts on the whole matrix.
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn tridiagonal(&mut self) {
        let (ar, ai, out) = (&self.ar, &self.ai, &mut self.out);
        let (d, e) = (&mut self.d, &mut self.e);
        let mut tnorm = 0.0f64;
        for k in 0..N {
            d[k] = ar[k][k];
            tnorm = tnorm.max(d[k].abs());
        }
        e[N - 1] = 0.0;
        for k in 0..N - 1 {
            let (br, bi) = (ar[k + 1][k], ai[k + 1][k]);
            let ab = (br * br + bi * bi).sqrt();
            e[k] = ab;
            tnorm = tnorm.max(ab);
            let (mut pr, mut pi) = (out.phr[k], out.phi[k]);
            if ab > 0.0 {
                let (ur, ui) = (br / ab, bi / ab);
                (pr, pi) = (pr * ur - pi * ui, pr * ui + pi * ur);
            }
            out.phr[k + 1] = pr;
            out.phi[k + 1] = pi;
        }
        self.small = f64::EPSILON * tnorm;
        self.hi = N - 1;
        self.iterations = 0;
    }

    /// Deflate at the bottom, find the unreduced block ending at `hi` and its Wilkinson shift.
    #[inline(always)]
    fn next(&mut self) -> Next {
        let (d, e, small) = (&self.d, &mut self.e, self.small);
        while self.hi > 0 {
            let hi = self.hi;
            if e[hi - 1].abs() <= small {
                e[hi - 1] = 0.0;
                self.hi -= 1;
                continue;
            }
            // start of the unreduced block ending at hi
            let mut lo = hi - 1;
            while lo > 0 && e[lo - 1].abs() > small {
                lo -= 1;
            }
            if lo > 0 {
                e[lo - 1] = 0.0;
            }
            self.iterations += 1;
            if self.iterations > 30 * N {
                return Next::Failed;
            }
            // Wilkinson shift: the eigenvalue m ∓ √(δ² + b²) of the trailing 2×2 closer to
            // d[hi] (m the mean, δ half the difference of its diagonal). Written without the
            // usual division: its cancellation costs ε‖T‖ in the shift, which any shift may
            // have (every step is an exact rotation whatever the shift); it shortens the chain
            // per step.
            let delta = 0.5 * (d[hi - 1] - d[hi]);
            let b = e[hi - 1];
            let root = (delta * delta + b * b).sqrt();
            let mean = 0.5 * (d[hi - 1] + d[hi]);
            let mu = if delta >= 0.0 {
                mean - root
            } else {
                mean + root
            };
            return Next::Sweep { lo, mu };
        }
        Next::Converged
    }

    /// One sweep on the block lo..=hi, its size a compile-time constant (unrolled, in
    /// registers).
    #[inline(always)]
    fn sweep(&mut self, lo: usize, mu: f64) -> bool {
        let end = self.hi + 1;
        let (db, eb, zb) = (
            &mut self.d[lo..end],
            &mut self.e[lo..end],
            &mut self.out.zt[lo..end],
        );
        match end - lo {
            2 => chase::<N, 2>(db, eb, zb, mu),
            3 => chase::<N, 3>(db, eb, zb, mu),
            4 => chase::<N, 4>(db, eb, zb, mu),
            5 => chase::<N, 5>(db, eb, zb, mu),
            6 => chase::<N, 6>(db, eb, zb, mu),
            7 => chase::<N, 7>(db, eb, zb, mu),
            8 => chase::<N, 8>(db, eb, zb, mu),
            _ => chase_any(db, eb, zb, mu),
        }
    }

    /// This sweep and `other`'s (a block of the same size) in one loop body.
    #[inline(always)]
    fn sweep_with(&mut self, lo: usize, mu: f64, other: &mut Self, lo_b: usize, mu_b: f64) -> bool {
        let (end, end_b) = (self.hi + 1, other.hi + 1);
        let (da, ea, za) = (
            &mut self.d[lo..end],
            &mut self.e[lo..end],
            &mut self.out.zt[lo..end],
        );
        let (db, eb, zb) = (
            &mut other.d[lo_b..end_b],
            &mut other.e[lo_b..end_b],
            &mut other.out.zt[lo_b..end_b],
        );
        match end - lo {
            2 => chase_pair::<N, 2>([da, db], [ea, eb], [za, zb], [mu, mu_b]),
            3 => chase_pair::<N, 3>([da, db], [ea, eb], [za, zb], [mu, mu_b]),
            4 => chase_pair::<N, 4>([da, db], [ea, eb], [za, zb], [mu, mu_b]),
            5 => chase_pair::<N, 5>([da, db], [ea, eb], [za, zb], [mu, mu_b]),
            6 => chase_pair::<N, 6>([da, db], [ea, eb], [za, zb], [mu, mu_b]),
            7 => chase_pair::<N, 7>([da, db], [ea, eb], [za, zb], [mu, mu_b]),
            8 => chase_pair::<N, 8>([da, db], [ea, eb], [za, zb], [mu, mu_b]),
            // above 8 one sweep is long enough to overlap with the other on its own
            _ => chase_any(da, ea, za, mu) && chase_any(db, eb, zb, mu_b),
        }
    }

    /// The rest of the QR iteration alone, then [`Work::finish`].
    #[inline(always)]
    fn iterate(&mut self) -> bool {
        loop {
            match self.next() {
                Next::Sweep { lo, mu } => {
                    if !self.sweep(lo, mu) {
                        return false;
                    }
                }
                Next::Converged => return self.finish(),
                Next::Failed => return false,
            }
        }
    }

    /// Eigenvalues scaled back into `out`; false if any is not finite.
    #[inline(always)]
    fn finish(&mut self) -> bool {
        if self.d.iter().any(|x| !x.is_finite()) {
            return false;
        }
        self.out.vals = self.d.map(|x| x * self.unscale);
        true
    }
}

/// Two independent N×N solves advanced together (results in `work[p].out`, true where solved):
/// the Householder reflections of both in one loop, then the QR sweeps of both in one loop
/// body — when both unreduced blocks have the same size, rotation k of each in the same
/// iteration ([`chase_pair`]). Each keeps its own deflation, shifts and convergence; once one
/// is done the other goes on alone. The results equal two [`Work::solve`] calls bit for bit
/// (the same operations on each matrix, only interleaved): while one rotation waits on its
/// division and square root the other's arithmetic runs.
#[inline(always)]
pub(crate) fn solve_pair<const N: usize>(
    h: [&[crate::C64]; 2],
    work: [&mut Work<N>; 2],
) -> [bool; 2] {
    let [wa, wb] = work;
    let (la, lb) = (wa.load(h[0]), wb.load(h[1]));
    if la != Loaded::Reduce || lb != Loaded::Reduce {
        // one of them is already decided: the other alone
        let single = |w: &mut Work<N>, l: Loaded| match l {
            Loaded::Reduce => {
                for k in 0..N.saturating_sub(2) {
                    w.reflect(k);
                }
                w.tridiagonal();
                w.iterate()
            }
            Loaded::Zero => true,
            Loaded::Declined => false,
        };
        return [single(wa, la), single(wb, lb)];
    }
    for k in 0..N.saturating_sub(2) {
        wa.reflect(k);
        wb.reflect(k);
    }
    wa.tridiagonal();
    wb.tridiagonal();
    loop {
        match (wa.next(), wb.next()) {
            (Next::Sweep { lo: la, mu: ma }, Next::Sweep { lo: lb, mu: mb }) => {
                if wa.hi - la == wb.hi - lb {
                    if !wa.sweep_with(la, ma, wb, lb, mb) {
                        return [false, false]; // (only on slice sizes: never, as called)
                    }
                } else {
                    // blocks of different sizes: one sweep after the other (still
                    // independent, the CPU overlaps what its window holds)
                    let (oa, ob) = (wa.sweep(la, ma), wb.sweep(lb, mb));
                    if !oa || !ob {
                        return [oa && wa.iterate(), ob && wb.iterate()];
                    }
                }
            }
            (Next::Sweep { lo, mu }, rb) => {
                let b = matches!(rb, Next::Converged) && wb.finish();
                return [wa.sweep(lo, mu) && wa.iterate(), b];
            }
            (ra, Next::Sweep { lo, mu }) => {
                let a = matches!(ra, Next::Converged) && wa.finish();
                return [a, wb.sweep(lo, mu) && wb.iterate()];
            }
            (ra, rb) => {
                return [
                    matches!(ra, Next::Converged) && wa.finish(),
                    matches!(rb, Next::Converged) && wb.finish(),
                ];
            }
        }
    }
}

/// One implicit QR sweep with shift `mu` on an unreduced M×M block (diagonal `d`, off-diagonal
/// `e[..M-1]`, rows of Zᵀ `zt`): rotations G in the planes (k, k+1) chase the bulge down,
/// T ← GᵀTG, Z ← ZG. Returns false only if the slices do not have M entries (never, as called).
// Index loops read like the matrix algebra they implement.
#[allow(clippy::needless_range_loop)]
#[inline(always)]
fn chase<const N: usize, const M: usize>(
    d: &mut [f64],
    e: &mut [f64],
    zt: &mut [[f64; N]],
    mu: f64,
) -> bool {
    let (Ok(d), Ok(e), Ok(zt)) = (
        <&mut [f64; M]>::try_from(d),
        <&mut [f64; M]>::try_from(e),
        <&mut [[f64; N]; M]>::try_from(zt),
    ) else {
        return false;
    };
    let (mut dl, mut el) = (*d, *e);
    let mut x = dl[0] - mu;
    let mut z = el[0];
    for k in 0..M - 1 {
        // r > 0 in an unreduced block: the first z is e[lo] ≠ 0; later z = −s·e[k+1] vanishes
        // only with s = 0, and then x = e[k] ≠ 0. (Were it ever 0, the NaNs would end in the
        // caller's Jacobi fallback, not in a result.)
        // c², s² and cs for T come from 1/r² (a division), c and s for Z and the bulge from
        // 1/r = r·(1/r²): the square root runs beside the division instead of before it, so
        // the chain to the next rotation (x = e[k]) waits for the division only
        let (xx, zz) = (x * x, z * z);
        let r2 = xx + zz;
        let inv2 = 1.0 / r2;
        let r = r2.sqrt();
        let inv = r * inv2;
        let (c, s) = (x * inv, -z * inv);
        if k > 0 {
            el[k - 1] = r;
        }
        let (a, b, dd) = (dl[k], el[k], dl[k + 1]);
        let (cc, ss, cs) = (xx * inv2, zz * inv2, -(x * z) * inv2);
        dl[k] = fmadd(a, cc, fmadd(-2.0 * b, cs, dd * ss));
        dl[k + 1] = fmadd(a, ss, fmadd(2.0 * b, cs, dd * cc));
        el[k] = fmadd(a - dd, cs, b * (cc - ss));
        if k + 2 < M {
            let f = el[k + 1];
            z = -s * f;
            el[k + 1] = c * f;
            x = el[k];
        }
        for m in 0..N {
            let (zk, zk1) = (zt[k][m], zt[k + 1][m]);
            zt[k][m] = fmadd(c, zk, -s * zk1);
            zt[k + 1][m] = fmadd(s, zk, c * zk1);
        }
    }
    *d = dl;
    *e = el;
    true
}

/// [`chase`] on two independent blocks of the same size M, rotation k of both in one loop body
/// (the same operations on each as [`chase`], so the same results bit for bit): the two
/// division → update chains run side by side, stored as lanes `[a, b]` so the compiler can
/// take both in one packed instruction. The loop body has no branches (it is then unrolled):
/// the writes that [`chase`] skips at the ends of the block go to the off-diagonal entry
/// after the block, e[hi] (zero: `hi` is the end of an unreduced block), restored at the end.
// Index loops read like the matrix algebra they implement.
#[allow(clippy::needless_range_loop)]
#[inline(always)]
fn chase_pair<const N: usize, const M: usize>(
    d: [&mut [f64]; 2],
    e: [&mut [f64]; 2],
    zt: [&mut [[f64; N]]; 2],
    mu: [f64; 2],
) -> bool {
    let [d0, d1] = d;
    let [e0, e1] = e;
    let [z0, z1] = zt;
    let (Ok(d0), Ok(d1), Ok(e0), Ok(e1), Ok(z0), Ok(z1)) = (
        <&mut [f64; M]>::try_from(d0),
        <&mut [f64; M]>::try_from(d1),
        <&mut [f64; M]>::try_from(e0),
        <&mut [f64; M]>::try_from(e1),
        <&mut [[f64; N]; M]>::try_from(z0),
        <&mut [[f64; N]; M]>::try_from(z1),
    ) else {
        return false;
    };
    #[inline(always)]
    fn lanes(f: impl Fn(usize) -> f64) -> [f64; 2] {
        [f(0), f(1)]
    }
    let mut dl: [[f64; 2]; M] = std::array::from_fn(|i| [d0[i], d1[i]]);
    let mut el: [[f64; 2]; M] = std::array::from_fn(|i| [e0[i], e1[i]]);
    let tail = el[M - 1];
    let mut x = lanes(|p| dl[0][p] - mu[p]);
    let mut z = el[0];
    for k in 0..M - 1 {
        // (see `chase` for the order of the operations)
        let (xx, zz) = (lanes(|p| x[p] * x[p]), lanes(|p| z[p] * z[p]));
        let r2 = lanes(|p| xx[p] + zz[p]);
        let inv2 = lanes(|p| 1.0 / r2[p]);
        let r = lanes(|p| r2[p].sqrt());
        let inv = lanes(|p| r[p] * inv2[p]);
        let c = lanes(|p| x[p] * inv[p]);
        let s = lanes(|p| -z[p] * inv[p]);
        el[if k > 0 { k - 1 } else { M - 1 }] = r; // (k = 0: into e[hi], restored below)
        let (a, b, dd) = (dl[k], el[k], dl[k + 1]);
        let cc = lanes(|p| xx[p] * inv2[p]);
        let ss = lanes(|p| zz[p] * inv2[p]);
        let cs = lanes(|p| -(x[p] * z[p]) * inv2[p]);
        dl[k] = lanes(|p| fmadd(a[p], cc[p], fmadd(-2.0 * b[p], cs[p], dd[p] * ss[p])));
        dl[k + 1] = lanes(|p| fmadd(a[p], ss[p], fmadd(2.0 * b[p], cs[p], dd[p] * cc[p])));
        el[k] = lanes(|p| fmadd(a[p] - dd[p], cs[p], b[p] * (cc[p] - ss[p])));
        // the bulge; in the last step (k = M − 2) this reads and writes e[hi] only
        let f = el[k + 1];
        z = lanes(|p| -s[p] * f[p]);
        el[k + 1] = lanes(|p| c[p] * f[p]);
        x = el[k];
        for (zp, p) in [(&mut *z0, 0), (&mut *z1, 1)] {
            for m in 0..N {
                let (zk, zk1) = (zp[k][m], zp[k + 1][m]);
                zp[k][m] = fmadd(c[p], zk, -s[p] * zk1);
                zp[k + 1][m] = fmadd(s[p], zk, c[p] * zk1);
            }
        }
    }
    el[M - 1] = tail;
    for i in 0..M {
        (d0[i], d1[i]) = (dl[i][0], dl[i][1]);
        (e0[i], e1[i]) = (el[i][0], el[i][1]);
    }
    true
}

/// [`chase`] for blocks of any size (above 8: not unrolled, one instantiation per N only).
// Index loops read like the matrix algebra they implement.
#[allow(clippy::needless_range_loop)]
fn chase_any<const N: usize>(d: &mut [f64], e: &mut [f64], zt: &mut [[f64; N]], mu: f64) -> bool {
    let m = d.len();
    if m < 2 || e.len() < m || zt.len() < m {
        return false;
    }
    let mut x = d[0] - mu;
    let mut z = e[0];
    for k in 0..m - 1 {
        let (xx, zz) = (x * x, z * z);
        let r2 = xx + zz;
        let inv2 = 1.0 / r2;
        let r = r2.sqrt();
        let inv = r * inv2;
        let (c, s) = (x * inv, -z * inv);
        if k > 0 {
            e[k - 1] = r;
        }
        let (a, b, dd) = (d[k], e[k], d[k + 1]);
        let (cc, ss, cs) = (xx * inv2, zz * inv2, -(x * z) * inv2);
        d[k] = fmadd(a, cc, fmadd(-2.0 * b, cs, dd * ss));
        d[k + 1] = fmadd(a, ss, fmadd(2.0 * b, cs, dd * cc));
        e[k] = fmadd(a - dd, cs, b * (cc - ss));
        if k + 2 < m {
            let f = e[k + 1];
            z = -s * f;
            e[k + 1] = c * f;
            x = e[k];
        }
        let (lo, hi) = zt.split_at_mut(k + 1);
        for (p, q) in lo[k].iter_mut().zip(hi[0].iter_mut()) {
            let (zk, zk1) = (*p, *q);
            *p = fmadd(c, zk, -s * zk1);
            *q = fmadd(s, zk, c * zk1);
        }
    }
    true
}

/// Closed form for a 4×4 Hermitian matrix whose spectrum is two doubly degenerate levels —
/// Kramers-degenerate bands, i.e. every 4-band model with time reversal and inversion
/// (Wilson–Dirac, Fu–Kane–Mele, BHZ). With d0 = tr H / 4 and A = H − d0, such a matrix
/// satisfies A² = r²·1 exactly, so the eigenvalues are d0 ∓ r and P∓ = (1 ∓ A/r)/2 project
/// onto the levels (common practice, no source). The test |(A²)_ij − r² δ_ij| ≤ 1e-14 r² for
/// every entry decides; the eigenvalues are then within ~1e-14 r of the true ones and the
/// projectors within ~1e-14. Row norms (the diagonal of A²) are compared first, so a generic
/// matrix is refused after ~60 instructions.
///
/// Eigenvectors come from Gram–Schmidt on two columns of each projector (the column with the
/// largest diagonal entry P_jj ≥ 1/2, then the one with the largest remainder), normalised by
/// their computed norms. `LEVELS` = 1 writes only the lower level (two vectors: the occupied
/// pair of a half-filled Kramers model), 2 writes both, 0 none (eigenvalues only); vector k
/// goes to column k of `out` (row stride `LD`). Returns false (nothing written) when the
/// structure is absent or a buffer is too short.
// Index loops read like the matrix algebra they implement.
#[allow(clippy::needless_range_loop)]
#[inline(always)]
pub(crate) fn two_level4<const LEVELS: usize, const LD: usize>(
    h: &[crate::C64],
    evals: &mut [f64],
    out: &mut [crate::C64],
) -> bool {
    let (Some(h), Some(evals), Some(out)) =
        (h.get(..16), evals.get_mut(..4), out.get_mut(..4 * LD))
    else {
        return false;
    };
    // (0 · Im h_ii is NaN for a NaN or infinite imaginary part, which the rest ignores: then
    // r² is NaN and the closed form declines)
    let d0 = 0.25 * (h[0].re + h[5].re + h[10].re + h[15].re)
        + 0.0 * (h[0].im + h[5].im + h[10].im + h[15].im);
    let mut ar = [[0.0f64; 4]; 4];
    let mut ai = [[0.0f64; 4]; 4];
    for i in 0..4 {
        ar[i][i] = h[i * 5].re - d0;
        for j in i + 1..4 {
            let (x, y) = (h[i * 4 + j], h[j * 4 + i]);
            let (re, im) = (0.5 * (x.re + y.re), 0.5 * (x.im - y.im));
            ar[i][j] = re;
            ai[i][j] = im;
            ar[j][i] = re;
            ai[j][i] = -im;
        }
    }
    // diagonal of A²: the squared row norms
    let mut rn = [0.0f64; 4];
    for i in 0..4 {
        for k in 0..4 {
            rn[i] = fmadd(ar[i][k], ar[i][k], fmadd(ai[i][k], ai[i][k], rn[i]));
        }
    }
    let r2 = 0.25 * (rn[0] + rn[1] + rn[2] + rn[3]);
    // (squares of the A² entries are compared below: keep them far from over- and underflow)
    if !(1e-150..=1e150).contains(&r2) {
        return false;
    }
    let lim = 1e-14 * r2;
    if rn.iter().any(|&x| (x - r2).abs() > lim) {
        return false;
    }
    // off-diagonal entries (A²)_ij = (a_ii + a_jj) a_ij + Σ_{k ≠ i, j} a_ik a_kj (a_ii real)
    for i in 0..3 {
        for j in i + 1..4 {
            let t = ar[i][i] + ar[j][j];
            let (mut sr, mut si) = (t * ar[i][j], t * ai[i][j]);
            for k in 0..4 {
                if k != i && k != j {
                    sr = fmadd(ar[i][k], ar[k][j], fmadd(-ai[i][k], ai[k][j], sr));
                    si = fmadd(ar[i][k], ai[k][j], fmadd(ai[i][k], ar[k][j], si));
                }
            }
            if fmadd(sr, sr, si * si) > lim * lim {
                return false;
            }
        }
    }
    let r = r2.sqrt();
    for (lev, sign) in [(0usize, -1.0f64), (1, 1.0)].into_iter().take(LEVELS) {
        let f = 0.5 * sign / r;
        // column j of P = δ_ij/2 + f a_ij
        #[inline(always)]
        fn column(
            ar: &[[f64; 4]; 4],
            ai: &[[f64; 4]; 4],
            f: f64,
            j: usize,
        ) -> ([f64; 4], [f64; 4]) {
            let (mut cr, mut ci) = ([0.0; 4], [0.0; 4]);
            for i in 0..4 {
                cr[i] = f * ar[i][j];
                ci[i] = f * ai[i][j];
            }
            cr[j] += 0.5;
            (cr, ci)
        }
        // first vector: the column with the largest P_jj, i.e. the largest sign·a_jj
        let mut j1 = 0;
        for j in 1..4 {
            if sign * ar[j][j] > sign * ar[j1][j1] {
                j1 = j;
            }
        }
        let (mut ur, mut ui) = column(&ar, &ai, f, j1);
        let n1: f64 = (0..4).map(|i| fmadd(ur[i], ur[i], ui[i] * ui[i])).sum();
        let inv = 1.0 / n1.sqrt();
        for i in 0..4 {
            ur[i] *= inv;
            ui[i] *= inv;
        }
        // second: the column with the largest norm left after removing u
        // (P_jj − |u_j|², exact for a projector)
        let mut j2 = usize::MAX;
        let mut best = f64::NEG_INFINITY;
        for j in 0..4 {
            let left = fmadd(f, ar[j][j], 0.5) - fmadd(ur[j], ur[j], ui[j] * ui[j]);
            if j != j1 && left > best {
                (j2, best) = (j, left);
            }
        }
        if j2 == usize::MAX || best <= 0.1 {
            return false; // cannot happen for a rank-2 projector (best ≥ 1/3); be safe
        }
        let (mut wr, mut wi) = column(&ar, &ai, f, j2);
        // w ← w − u (u†w), with the computed inner product
        let (mut cr, mut ci) = (0.0, 0.0);
        for i in 0..4 {
            cr = fmadd(ur[i], wr[i], fmadd(ui[i], wi[i], cr));
            ci = fmadd(ur[i], wi[i], fmadd(-ui[i], wr[i], ci));
        }
        for i in 0..4 {
            wr[i] = fmadd(-ur[i], cr, fmadd(ui[i], ci, wr[i]));
            wi[i] = fmadd(-ur[i], ci, fmadd(-ui[i], cr, wi[i]));
        }
        let n2: f64 = (0..4).map(|i| fmadd(wr[i], wr[i], wi[i] * wi[i])).sum();
        let inv = 1.0 / n2.sqrt();
        let (c0, c1) = (2 * lev, 2 * lev + 1);
        for i in 0..4 {
            out[i * LD + c0] = crate::C64::new(ur[i], ui[i]);
            out[i * LD + c1] = crate::C64::new(wr[i] * inv, wi[i] * inv);
        }
        evals[c0] = d0 + sign * r;
        evals[c1] = d0 + sign * r;
    }
    if LEVELS < 2 {
        evals[2] = d0 + r;
        evals[3] = d0 + r;
    }
    if LEVELS == 0 {
        evals[0] = d0 - r;
        evals[1] = d0 - r;
    }
    true
}
