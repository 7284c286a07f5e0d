//! Four independent Hermitian N×N eigendecompositions advanced together, one matrix per lane
//! of `[f64; 4]` arrays (one AVX2 register each in an x86-64-v3 build, two SSE2 registers in
//! a baseline build): the method of `eigen_small` — Householder reduction to a real
//! tridiagonal, implicit QR with Wilkinson shifts, eigenvectors Q_H D Z e_k formed on request
//! — written without a branch that depends on one lane's data.
//!
//! Why: a generic 4×4 is a serial chain of ~18 Givens rotations (a division and a square root
//! each, then updates that wait on them); one matrix at a time leaves the core mostly idle,
//! and two at a time (`eigen_small::solve_pair`) fill only part of the gap. Four chains side
//! by side share each packed division and square root, and the compiler keeps every step in
//! vector registers.
//!
//! How the lanes stay independent without branches:
//! - Householder: a column whose part below the sub-diagonal has norm² ≤ 1e-290 (zero, or
//!   negligible: every lane is scaled to Frobenius norm² ≥ 1e-200) gets τ = 0, the identity
//!   reflection, chosen by a select; the other lanes reflect as usual.
//! - QR: at every step each off-diagonal e_k with |e_k| ≤ ε‖T‖ (that lane's ‖T‖) is set to
//!   zero, exactly as `eigen_small` deflates. A rotation k (plane k, k+1) is *active* in a
//!   lane when e_k ≠ 0 and k lies in the lane's bottom unreduced block [lo, hi]; the sweep
//!   runs every rotation k = 0…N−2 in every lane, and an inactive one is fed (x, z) = (1, 0),
//!   so c = 1, s = 0: it leaves d, e and Z unchanged bit for bit — no 0/0 for a converged
//!   block. The bulge starts at the first active k (x = d_lo − μ, z = e_lo) and μ is the
//!   Wilkinson shift of the block's trailing 2×2, both picked by selects. The steps repeat
//!   until no lane has an active rotation; each lane thus goes through the blocks, shifts
//!   and rotations of a one-matrix solve (up to rounding: a few more products are fused
//!   here, so results differ from `eigen_small`'s in the last bits).
//! - Sorting and eigenvectors: a compare-exchange network sorts the eigenvalues of each lane
//!   and swaps the columns of Z with them; vector k is formed in all lanes at once.
//!
//! Keeping it packed: the lanes are plain `[f64; 4]` arrays and closures over the lane index
//! (no `unsafe`, no intrinsics); LLVM's vectoriser turns them into packed instructions only
//! where nothing gets in its way, and three things did (callgrind, generic 4×4, instructions
//! per matrix 2340 → 1590 in all): the sweep and the reflections stay rolled loops at N = 4
//! (long bodies), which kept d and e on the stack, a store and a reload on the chain of every
//! rotation — they are written out by [`unrolled!`]; eigenvectors scattered to the callers'
//! buffers in the loop that forms them were formed one lane at a time — they are formed
//! first, then scattered; and the sort network's selects on integer masks were done in
//! integer registers lane by lane — it selects on float compares. Measured numbers are in
//! the notes of `eigen`.
//!
//! The method is normwise backward stable as in `eigen_small` (Golub & Van Loan, *Matrix
//! Computations*, 4th ed., §8.3); identity rotations add no error. A lane whose input is not
//! finite, whose iteration does not converge in 30 N steps or whose result is not finite is
//! reported as declined (its caller runs the one-matrix paths, which give the error or the
//! Jacobi fallback); the other lanes are unaffected. The zero matrix converges at once
//! (identity eigenvectors), which also makes it the filler for unused lanes.

use crate::{fmadd, C64};

/// Matrices per group.
pub(crate) const LANES: usize = 4;

/// One value per lane.
type L = [f64; LANES];
/// One flag per lane: all bits set (true) or none; selects on these are bit operations,
/// which the compiler turns into packed and/andnot/or or blends. (`[bool; 4]` masks gave
/// the same speed, but code that valgrind 3.19 cannot run: a register form of vmovq.)
type Mask = [u64; LANES];

#[inline(always)]
fn lanes(f: impl Fn(usize) -> f64) -> L {
    [f(0), f(1), f(2), f(3)]
}

#[inline(always)]
fn splat(x: f64) -> L {
    [x; LANES]
}

#[inline(always)]
fn masks(f: impl Fn(usize) -> bool) -> Mask {
    let m = |p| if f(p) { u64::MAX } else { 0 };
    [m(0), m(1), m(2), m(3)]
}

/// `a` where `m` is set, `b` elsewhere.
#[inline(always)]
fn select(m: Mask, a: L, b: L) -> L {
    lanes(|p| f64::from_bits((a[p].to_bits() & m[p]) | (b[p].to_bits() & !m[p])))
}

#[inline(always)]
fn and(a: Mask, b: Mask) -> Mask {
    [a[0] & b[0], a[1] & b[1], a[2] & b[2], a[3] & b[3]]
}

#[inline(always)]
fn and_not(a: Mask, b: Mask) -> Mask {
    [a[0] & !b[0], a[1] & !b[1], a[2] & !b[2], a[3] & !b[3]]
}

#[inline(always)]
fn or(a: Mask, b: Mask) -> Mask {
    [a[0] | b[0], a[1] | b[1], a[2] | b[2], a[3] | b[3]]
}

#[inline(always)]
fn any(m: Mask) -> bool {
    (m[0] | m[1] | m[2] | m[3]) != 0
}

/// `$body` for `$k` = 0, 1, … below `$n` (at most 7: `Quad` is for N ≤ 8) as straight-line
/// code. Left to itself LLVM keeps the QR sweep and the reflections rolled at N = 4 (their
/// bodies are long); a rolled sweep kept d and e on the stack, a store and a reload on the
/// chain of every rotation.
macro_rules! unrolled {
    ($n:expr, $k:ident => $body:expr) => {{
        unrolled!(@ $n, $k, $body, 0, 1, 2, 3, 4, 5, 6)
    }};
    (@ $n:expr, $k:ident, $body:expr, $($i:literal),*) => {{
        $(
            if $i < $n {
                let $k: usize = $i;
                $body;
            }
        )*
    }};
}

/// Working state and result of four N×N solves ([`Quad::solve`]).
pub(crate) struct Quad<const N: usize> {
    /// eigenvalues, ascending in each lane once solved: `vals[k][p]`
    pub vals: [L; N],
    /// Householder vectors (row k: v_k, nonzero from index k + 1) and factors τ_k
    vr: [[L; N]; N],
    vi: [[L; N]; N],
    tau: [L; N],
    /// the diagonal phase D
    phr: [L; N],
    phi: [L; N],
    /// Zᵀ: row k is column k of the real orthogonal Z (sorted with `vals`)
    zt: [[L; N]; N],
    /// Hermitian part on split arrays, reduced in place
    ar: [[L; N]; N],
    ai: [[L; N]; N],
    /// the real tridiagonal matrix
    d: L1<N>,
    e: L1<N>,
    /// power of two the eigenvalues are scaled back by
    unscale: L,
}

/// N values per lane.
type L1<const N: usize> = [L; N];

impl<const N: usize> Quad<N> {
    pub fn new() -> Self {
        Quad {
            vals: [splat(0.0); N],
            vr: [[splat(0.0); N]; N],
            vi: [[splat(0.0); N]; N],
            tau: [splat(0.0); N],
            phr: [splat(1.0); N],
            phi: [splat(0.0); N],
            zt: [[splat(0.0); N]; N],
            ar: [[splat(0.0); N]; N],
            ai: [[splat(0.0); N]; N],
            d: [splat(0.0); N],
            e: [splat(0.0); N],
            unscale: splat(1.0),
        }
    }

    /// Householder + implicit QR for the Hermitian parts of the row-major N×N `h[p]`, one per
    /// lane. True where lane p is solved (eigenvalues in `vals`, vectors via [`Quad::vector`]);
    /// false where its input is not finite or its iteration did not converge (and everywhere
    /// if a slice is shorter than N², never as called).
    pub fn solve(&mut self, h: [&[C64]; LANES]) -> [bool; LANES] {
        const { assert!(2 <= N && N <= 8, "Quad is written for 2 ≤ N ≤ 8") };
        let Some(mut good) = self.load(h) else {
            return [false; LANES];
        };
        unrolled!(N - 2, k => self.reflect(k));
        let small = self.tridiagonal();
        good = and_not(good, self.iterate(small));
        self.finish(good)
    }

    /// Hermitian parts on split arrays, factors reset; lanes far from norm 1 scaled by a power
    /// of two (exact) as in `eigen_small`. Lanes with a NaN or infinite entry are zeroed (they
    /// then run as the zero matrix) and cleared in the returned mask.
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn load(&mut self, h: [&[C64]; LANES]) -> Option<Mask> {
        let hs = [
            h[0].get(..N * N)?,
            h[1].get(..N * N)?,
            h[2].get(..N * N)?,
            h[3].get(..N * N)?,
        ];
        self.tau = [splat(0.0); N];
        self.phr = [splat(1.0); N];
        self.phi = [splat(0.0); N];
        self.zt = [[splat(0.0); N]; N];
        for k in 0..N {
            self.zt[k][k] = splat(1.0);
        }
        self.unscale = splat(1.0);
        let (ar, ai, unscale) = (&mut self.ar, &mut self.ai, &mut self.unscale);
        let mut diag = splat(0.0);
        let mut off = splat(0.0);
        for i in 0..N {
            // (0 · Im h_ii: NaN for a NaN or infinite imaginary part, which then declines)
            let re = lanes(|p| hs[p][i * N + i].re + 0.0 * hs[p][i * N + i].im);
            ar[i][i] = re;
            ai[i][i] = splat(0.0);
            diag = lanes(|p| fmadd(re[p], re[p], diag[p]));
            for j in i + 1..N {
                let (x, y) = (|p: usize| hs[p][i * N + j], |p: usize| hs[p][j * N + i]);
                let re = lanes(|p| 0.5 * (x(p).re + y(p).re));
                let im = lanes(|p| 0.5 * (x(p).im - y(p).im));
                ar[i][j] = re;
                ai[i][j] = im;
                ar[j][i] = re;
                ai[j][i] = lanes(|p| -im[p]);
                off = lanes(|p| fmadd(re[p], re[p], fmadd(im[p], im[p], off[p])));
            }
        }
        let total = lanes(|p| fmadd(2.0, off[p], diag[p]));
        let mut good = [u64::MAX; LANES];
        if total.iter().all(|t| (1e-200..=1e200).contains(t)) {
            return Some(good);
        }
        // rare: some lane is zero, tiny, huge or not finite — lane by lane
        for p in 0..LANES {
            if (1e-200..=1e200).contains(&total[p]) {
                continue;
            }
            let big = (0..N * N).fold(0.0f64, |m, x| {
                m.max(ar[x / N][x % N][p].abs())
                    .max(ai[x / N][x % N][p].abs())
            });
            let scale = if total[p].is_nan() || !big.is_finite() {
                good[p] = 0;
                0.0
            } else if big == 0.0 {
                1.0
            } else {
                let e = big.log2().round() as i32;
                unscale[p] = 2f64.powi(e);
                2f64.powi(-e)
            };
            for x in 0..N * N {
                ar[x / N][x % N][p] *= scale;
                ai[x / N][x % N][p] *= scale;
            }
            if scale == 0.0 {
                // (0 · NaN is NaN: set, not scaled)
                for x in 0..N * N {
                    ar[x / N][x % N][p] = 0.0;
                    ai[x / N][x % N][p] = 0.0;
                }
            }
        }
        Some(good)
    }

    /// Householder reflection k in every lane (see `eigen_small::Work::reflect`); τ_k = 0 where
    /// the column below the sub-diagonal is already (negligibly) zero.
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn reflect(&mut self, k: usize) {
        let (ar, ai) = (&mut self.ar, &mut self.ai);
        let s = k + 1;
        let mut sigma = splat(0.0);
        for i in s + 1..N {
            sigma = lanes(|p| {
                fmadd(
                    ar[i][k][p],
                    ar[i][k][p],
                    fmadd(ai[i][k][p], ai[i][k][p], sigma[p]),
                )
            });
        }
        // 1e-290, not 0: below it τ = 2/den could overflow. Such entries are ≤ 1e-145 in a lane
        // of norm ≥ 1e-100 (after `load`), so leaving them out of T is a backward error of at
        // most 1e-45 relative
        let apply = masks(|p| sigma[p] > 1e-290);
        let (x0r, x0i) = (ar[s][k], ai[s][k]);
        let a2 = lanes(|p| fmadd(x0r[p], x0r[p], x0i[p] * x0i[p]));
        let ax0 = lanes(|p| a2[p].sqrt());
        let xnorm = lanes(|p| (a2[p] + sigma[p]).sqrt());
        // phase of x0 (1 where x0 = 0), so v0 = x0 + phase·‖x‖ has no cancellation
        let nonzero = masks(|p| ax0[p] > 0.0);
        let pr = select(nonzero, lanes(|p| x0r[p] / ax0[p]), splat(1.0));
        let pi = select(nonzero, lanes(|p| x0i[p] / ax0[p]), splat(0.0));
        let top = lanes(|p| ax0[p] + xnorm[p]);
        let (vr, vi) = (&mut self.vr[k], &mut self.vi[k]);
        vr[s] = lanes(|p| pr[p] * top[p]);
        vi[s] = lanes(|p| pi[p] * top[p]);
        for i in s + 1..N {
            vr[i] = ar[i][k];
            vi[i] = ai[i][k];
        }
        let tau = select(
            apply,
            lanes(|p| 2.0 / fmadd(top[p], top[p], sigma[p])),
            splat(0.0),
        );
        self.tau[k] = tau;
        // p = τ B v (B the trailing block, Hermitian)
        let mut p_r = [splat(0.0); N];
        let mut p_i = [splat(0.0); N];
        for i in s..N {
            let (mut sr, mut si) = (splat(0.0), splat(0.0));
            for j in s..N {
                let (a, b, x, y) = (ar[i][j], ai[i][j], vr[j], vi[j]);
                sr = lanes(|p| fmadd(a[p], x[p], fmadd(-b[p], y[p], sr[p])));
                si = lanes(|p| fmadd(a[p], y[p], fmadd(b[p], x[p], si[p])));
            }
            p_r[i] = lanes(|p| tau[p] * sr[p]);
            p_i[i] = lanes(|p| tau[p] * si[p]);
        }
        // K = (τ/2) v†p is real; w = p − K v
        let mut kk = splat(0.0);
        for i in s..N {
            kk = lanes(|p| fmadd(vr[i][p], p_r[i][p], fmadd(vi[i][p], p_i[i][p], kk[p])));
        }
        kk = lanes(|p| kk[p] * 0.5 * tau[p]);
        let mut wr = [splat(0.0); N];
        let mut wi = [splat(0.0); N];
        for i in s..N {
            wr[i] = lanes(|p| fmadd(-kk[p], vr[i][p], p_r[i][p]));
            wi[i] = lanes(|p| fmadd(-kk[p], vi[i][p], p_i[i][p]));
        }
        // B ← H B H = B − v w† − w v†
        for i in s..N {
            for j in s..N {
                let (a, b) = (ar[i][j], ai[i][j]);
                ar[i][j] = lanes(|p| {
                    let t = fmadd(vr[i][p], wr[j][p], vi[i][p] * wi[j][p]);
                    a[p] - fmadd(wr[i][p], vr[j][p], fmadd(wi[i][p], vi[j][p], t))
                });
                ai[i][j] = lanes(|p| {
                    let t = fmadd(vi[i][p], wr[j][p], -(vr[i][p] * wi[j][p]));
                    b[p] - fmadd(wi[i][p], vr[j][p], fmadd(-wr[i][p], vi[j][p], t))
                });
            }
        }
        // the sub-diagonal entry of column k becomes α = −phase·‖x‖ (unchanged where τ = 0)
        ar[s][k] = select(apply, lanes(|p| -pr[p] * xnorm[p]), x0r);
        ai[s][k] = select(apply, lanes(|p| -pi[p] * xnorm[p]), x0i);
    }

    /// The real tridiagonal matrix (diagonal d, off-diagonal e ≥ 0, e_{N−1} = 0), the phases
    /// D; returns the deflation threshold ε‖T‖ per lane.
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn tridiagonal(&mut self) -> L {
        let (ar, ai) = (&self.ar, &self.ai);
        let mut tnorm = splat(0.0);
        for k in 0..N {
            self.d[k] = ar[k][k];
            tnorm = lanes(|p| tnorm[p].max(ar[k][k][p].abs()));
        }
        self.e[N - 1] = splat(0.0);
        for k in 0..N - 1 {
            let (br, bi) = (ar[k + 1][k], ai[k + 1][k]);
            let ab = lanes(|p| fmadd(br[p], br[p], bi[p] * bi[p]).sqrt());
            self.e[k] = ab;
            tnorm = lanes(|p| tnorm[p].max(ab[p]));
            let (pr, pi) = (self.phr[k], self.phi[k]);
            let (ur, ui) = (lanes(|p| br[p] / ab[p]), lanes(|p| bi[p] / ab[p]));
            let nonzero = masks(|p| ab[p] > 0.0);
            self.phr[k + 1] = select(
                nonzero,
                lanes(|p| fmadd(pr[p], ur[p], -(pi[p] * ui[p]))),
                pr,
            );
            self.phi[k + 1] = select(nonzero, lanes(|p| fmadd(pr[p], ui[p], pi[p] * ur[p])), pi);
        }
        lanes(|p| f64::EPSILON * tnorm[p])
    }

    /// Implicit QR steps until no lane has an unreduced block left; returns the lanes still
    /// unreduced after 30 N steps (not converged).
    #[inline(always)]
    fn iterate(&mut self, small: L) -> Mask {
        let (mut d, mut e) = (self.d, self.e);
        let mut failed = [0u64; LANES];
        for step in 0..=30 * N {
            // deflation: negligible off-diagonals to exact zeros (NaN counts as negligible:
            // the lane then ends with non-finite values and is declined in `finish`)
            let mut nonzero = [[0u64; LANES]; N];
            for k in 0..N - 1 {
                nonzero[k] = masks(|p| e[k][p].abs() > small[p]);
                e[k] = select(nonzero[k], e[k], splat(0.0));
            }
            // active rotations: the nonzero e_k of the lowest unreduced block, scanning up
            // from the bottom (`closed` once a zero follows a nonzero)
            let mut active = [[0u64; LANES]; N];
            let (mut found, mut closed) = ([0u64; LANES], [0u64; LANES]);
            let mut left = [0u64; LANES];
            for k in (0..N - 1).rev() {
                active[k] = and_not(nonzero[k], closed);
                closed = or(closed, and_not(found, nonzero[k]));
                found = or(found, nonzero[k]);
                left = or(left, active[k]);
            }
            if !any(left) {
                break;
            }
            if step == 30 * N {
                failed = left;
                break;
            }
            // Wilkinson shift of the block's trailing 2×2 (the highest active rotation's
            // plane), written as in `eigen_small`
            let (mut dm, mut dh, mut b) = (splat(0.0), splat(0.0), splat(0.0));
            for k in 0..N - 1 {
                dm = select(active[k], d[k], dm);
                dh = select(active[k], d[k + 1], dh);
                b = select(active[k], e[k], b);
            }
            let delta = lanes(|p| 0.5 * (dm[p] - dh[p]));
            let root = lanes(|p| fmadd(delta[p], delta[p], b[p] * b[p]).sqrt());
            let mean = lanes(|p| 0.5 * (dm[p] + dh[p]));
            let mu = select(
                masks(|p| delta[p] >= 0.0),
                lanes(|p| mean[p] - root[p]),
                lanes(|p| mean[p] + root[p]),
            );
            self.chase(&mut d, &mut e, &active, mu);
        }
        (self.d, self.e) = (d, e);
        failed
    }

    /// One implicit QR sweep per lane over rotations k = 0…N−2, the inactive ones the
    /// identity (see the module notes; the arithmetic per rotation is `eigen_small::chase`'s).
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn chase(&mut self, d: &mut L1<N>, e: &mut L1<N>, active: &[Mask; N], mu: L) {
        let zt = &mut self.zt;
        let mut bulge = (splat(1.0), splat(0.0));
        unrolled!(N - 1, k => rotation(k, d, e, zt, active, mu, &mut bulge));
    }

    /// Eigenvalues scaled back and sorted ascending per lane, the columns of Z with them;
    /// a lane is solved where `good` and every eigenvalue and entry of Z is finite.
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn finish(&mut self, good: Mask) -> [bool; LANES] {
        // Σ 0·x over the eigenvalues and Z: 0 where all are finite, NaN otherwise
        let mut probe = splat(0.0);
        for x in self.d.iter().chain(self.zt.iter().flatten()) {
            probe = lanes(|p| fmadd(x[p], 0.0, probe[p]));
        }
        let solved = [0, 1, 2, 3].map(|p| good[p] != 0 && probe[p] == 0.0);
        let (vals, zt, d, unscale) = (&mut self.vals, &mut self.zt, &self.d, self.unscale);
        for k in 0..N {
            vals[k] = lanes(|p| d[k][p] * unscale[p]);
        }
        // compare-exchange network, straight-line (insertion order: for i = 1…N−1 the pairs
        // (i−1, i), (i−2, i−1), …, (0, 1); N(N−1)/2 of them)
        unrolled!(N - 1, a => unrolled!(a + 1, b => {
            let j = a + 1 - b;
            // (selects on a float compare: as bit operations on `Mask`s the compiler swapped
            // these rows through integer registers, lane by lane)
            let swap = [0, 1, 2, 3].map(|p| vals[j - 1][p] > vals[j][p]);
            let pick = |m: [bool; LANES], a: L, b: L| lanes(|p| if m[p] { a[p] } else { b[p] });
            let (lo, hi) = (vals[j - 1], vals[j]);
            vals[j - 1] = pick(swap, hi, lo);
            vals[j] = pick(swap, lo, hi);
            for m in 0..N {
                let (lo, hi) = (zt[j - 1][m], zt[j][m]);
                zt[j - 1][m] = pick(swap, hi, lo);
                zt[j][m] = pick(swap, lo, hi);
            }
        }));
        solved
    }

    /// Unit eigenvector of `vals[k]` in every lane (real and imaginary parts, component i in
    /// `[i][p]`): Q_H D Z e_k, the reflections applied last first.
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    pub fn vector(&self, k: usize) -> (L1<N>, L1<N>) {
        let z = &self.zt[k];
        let (mut xr, mut xi) = ([splat(0.0); N], [splat(0.0); N]);
        for i in 0..N {
            xr[i] = lanes(|p| self.phr[i][p] * z[i][p]);
            xi[i] = lanes(|p| self.phi[i][p] * z[i][p]);
        }
        for j in (0..N.saturating_sub(2)).rev() {
            let (v_r, v_i, tau) = (&self.vr[j], &self.vi[j], self.tau[j]);
            let (mut sr, mut si) = (splat(0.0), splat(0.0));
            for i in j + 1..N {
                sr = lanes(|p| fmadd(v_r[i][p], xr[i][p], fmadd(v_i[i][p], xi[i][p], sr[p])));
                si = lanes(|p| fmadd(v_r[i][p], xi[i][p], fmadd(-v_i[i][p], xr[i][p], si[p])));
            }
            sr = lanes(|p| sr[p] * tau[p]);
            si = lanes(|p| si[p] * tau[p]);
            for i in j + 1..N {
                xr[i] = lanes(|p| xr[i][p] - fmadd(v_r[i][p], sr[p], -(v_i[i][p] * si[p])));
                xi[i] = lanes(|p| xi[i][p] - fmadd(v_r[i][p], si[p], v_i[i][p] * sr[p]));
            }
        }
        (xr, xi)
    }

    /// Lane p's eigenvalues into `evals[p]` and its lowest `count` vectors as the first
    /// columns of `out[p]` (row stride `ld`), for the lanes with `which[p]`. The caller has
    /// checked the lengths (N values, N·ld entries; `count` ≤ `ld`, ≤ N).
    // Index loops read like the matrix algebra they implement.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    pub fn write(
        &self,
        which: [bool; LANES],
        count: usize,
        ld: usize,
        evals: &mut [&mut [f64]; LANES],
        out: &mut [&mut [C64]; LANES],
    ) {
        for p in 0..LANES {
            if which[p] {
                for k in 0..N {
                    evals[p][k] = self.vals[k][p];
                }
            }
        }
        // every vector first (packed arithmetic, stored whole), then scattered lane by lane:
        // with the scattering stores in the same loop the compiler had done the vector
        // arithmetic one lane at a time (~600 instructions per group and vector)
        let (mut xr, mut xi) = ([[splat(0.0); N]; N], [[splat(0.0); N]; N]);
        for k in 0..count.min(N) {
            (xr[k], xi[k]) = self.vector(k);
        }
        let count = count.min(N).min(ld);
        for p in 0..LANES {
            if which[p] {
                for (i, row) in out[p].chunks_exact_mut(ld.max(1)).take(N).enumerate() {
                    for (k, x) in row[..count].iter_mut().enumerate() {
                        *x = C64::new(xr[k][i][p], xi[k][i][p]);
                    }
                }
            }
        }
    }
}

/// Rotation k of [`Quad::chase`] in every lane (plane k, k + 1; `bulge` = (x, z) carried from
/// rotation k − 1).
// Index loops read like the matrix algebra they implement.
#[allow(clippy::needless_range_loop)]
#[inline(always)]
fn rotation<const N: usize>(
    k: usize,
    d: &mut L1<N>,
    e: &mut L1<N>,
    zt: &mut [L1<N>; N],
    active: &[Mask; N],
    mu: L,
    bulge: &mut (L, L),
) {
    let (mut x, mut z) = *bulge;
    let act = active[k];
    // the bulge starts at the block's first rotation
    let start = if k == 0 {
        act
    } else {
        and_not(act, active[k - 1])
    };
    x = select(start, lanes(|p| d[k][p] - mu[p]), x);
    z = select(start, e[k], z);
    // inactive: (1, 0), so c = 1, s = 0 and nothing changes (never 0/0)
    x = select(act, x, splat(1.0));
    z = select(act, z, splat(0.0));
    let (xx, zz) = (lanes(|p| x[p] * x[p]), lanes(|p| z[p] * z[p]));
    let r2 = lanes(|p| xx[p] + zz[p]);
    let inv2 = lanes(|p| 1.0 / r2[p]);
    let r = lanes(|p| r2[p].sqrt());
    let inv = lanes(|p| r[p] * inv2[p]);
    let c = lanes(|p| x[p] * inv[p]);
    let s = lanes(|p| -z[p] * inv[p]);
    if k > 0 {
        // the previous rotation's bulge is gone: e_{k−1} = r inside the block
        e[k - 1] = select(and(act, active[k - 1]), r, e[k - 1]);
    }
    let (a, b, dd) = (d[k], e[k], d[k + 1]);
    let cc = lanes(|p| xx[p] * inv2[p]);
    let ss = lanes(|p| zz[p] * inv2[p]);
    let cs = lanes(|p| -(x[p] * z[p]) * inv2[p]);
    d[k] = lanes(|p| fmadd(a[p], cc[p], fmadd(-2.0 * b[p], cs[p], dd[p] * ss[p])));
    d[k + 1] = lanes(|p| fmadd(a[p], ss[p], fmadd(2.0 * b[p], cs[p], dd[p] * cc[p])));
    e[k] = lanes(|p| fmadd(a[p] - dd[p], cs[p], b[p] * (cc[p] - ss[p])));
    // the new bulge (e_{N−1} = 0, and e_hi = 0 at the end of a block: no bulge)
    let f = e[k + 1];
    z = lanes(|p| -s[p] * f[p]);
    e[k + 1] = lanes(|p| c[p] * f[p]);
    x = e[k];
    for m in 0..N {
        let (zk, zk1) = (zt[k][m], zt[k + 1][m]);
        zt[k][m] = lanes(|p| fmadd(c[p], zk[p], -s[p] * zk1[p]));
        zt[k + 1][m] = lanes(|p| fmadd(s[p], zk[p], c[p] * zk1[p]));
    }
    *bulge = (x, z);
}

#[cfg(test)]
mod tests;
