//! Wilson loops along straight κ lines and band-edge statistics of every sampled κ point.
//!
//! A line is the set κ = base + (s/L) e_axis, s = 0…L−1. The Wilson loop is the ordered
//! product of the unitary parts of the overlaps M_s = U_s† E U_{s+1} of the occupied
//! eigenvectors U_s, closed with U_L = U_0 (periodic gauge). E = 1 in the periodic convention;
//! with orbital positions τ, E = diag(exp(−2πi τ_axis / L)) gives centres in the
//! tight-binding convention. Hybrid Wannier centres are x = θ/2π mod 1 with θ = −arg λ(W)
//! (the Berry phase, so a band on an orbital at τ has x = τ).

use crate::error::{CoreError, CoreResult};
use crate::exec::guided::map_guided;
use crate::exec::kept::with_kept;
use crate::linalg::eigen::{eigh_many_into, eigh_occupied_many_into, eigh_reference_into};
use crate::linalg::matrix::{
    matmul, overlap, unitarise, unitarise_2x2, unitarise_reference, unitary_phases,
};
use crate::zone::bloch::BlochSource;
use crate::{fmadd, C64};
use rayon::prelude::*;
use std::f64::consts::TAU;

/// Memory budget for the Hamiltonians of one batch of κ points.
const BATCH_BYTES: usize = 32 << 20;

/// κ points per batch of a batch source (a Python callback) for n×n Hamiltonians (`nn` = n²)
/// of a `dim`-dimensional model: as many as [`BATCH_BYTES`] hold, but at least 2^dim (the
/// TRIMs stay one batch, and a huge model is still asked for several points per call), in
/// multiples of four (the eigensolvers take four κ points at a time, so a set split into
/// batches gives the same values as one batch).
pub fn batch_points(nn: usize, dim: usize) -> usize {
    let fit = BATCH_BYTES / (nn * 16).max(1);
    fit.max(1 << dim).div_ceil(4) * 4
}

/// Band-edge statistics over a set of κ points at a given filling.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BandStats {
    /// smallest E_filling − E_{filling−1} (direct gap) and where it was found
    pub min_direct: f64,
    pub min_direct_at: [f64; 3],
    /// highest occupied and lowest empty energy (indirect gap = bottom_empty − top_occ)
    pub top_occ: f64,
    pub bottom_empty: f64,
    /// lowest and highest eigenvalue (for the bandwidth)
    pub e_min: f64,
    pub e_max: f64,
}

impl Default for BandStats {
    fn default() -> Self {
        Self {
            min_direct: f64::INFINITY,
            min_direct_at: [0.0; 3],
            top_occ: f64::NEG_INFINITY,
            bottom_empty: f64::INFINITY,
            e_min: f64::INFINITY,
            e_max: f64::NEG_INFINITY,
        }
    }
}

impl BandStats {
    /// Test helper: every statistic within `tol` of `want`, and the gap found at the same κ.
    #[cfg(test)]
    pub(crate) fn assert_close(&self, want: &BandStats, tol: f64, what: &str) {
        for (a, b) in [
            (self.min_direct, want.min_direct),
            (self.top_occ, want.top_occ),
            (self.bottom_empty, want.bottom_empty),
            (self.e_min, want.e_min),
            (self.e_max, want.e_max),
        ] {
            assert!((a - b).abs() <= tol, "{what}: {a} vs {b}");
        }
        assert_eq!(self.min_direct_at, want.min_direct_at, "{what}");
    }

    pub fn add(&mut self, e: &[f64], filling: usize, kappa: &[f64]) {
        let gap = e[filling] - e[filling - 1];
        if gap < self.min_direct {
            self.min_direct = gap;
            self.min_direct_at = [0.0; 3];
            self.min_direct_at[..kappa.len()].copy_from_slice(kappa);
        }
        self.top_occ = self.top_occ.max(e[filling - 1]);
        self.bottom_empty = self.bottom_empty.min(e[filling]);
        self.e_min = self.e_min.min(e[0]);
        self.e_max = self.e_max.max(e[e.len() - 1]);
    }
    pub fn merge(&mut self, o: &BandStats) {
        if o.min_direct < self.min_direct {
            self.min_direct = o.min_direct;
            self.min_direct_at = o.min_direct_at;
        }
        self.top_occ = self.top_occ.max(o.top_occ);
        self.bottom_empty = self.bottom_empty.min(o.bottom_empty);
        self.e_min = self.e_min.min(o.e_min);
        self.e_max = self.e_max.max(o.e_max);
    }
    pub fn indirect(&self) -> f64 {
        self.bottom_empty - self.top_occ
    }
    pub fn bandwidth(&self) -> f64 {
        self.e_max - self.e_min
    }
}

/// One Wilson-loop line.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LineSpec {
    pub base: [f64; 3],
    pub axis: usize,
}

#[derive(Clone, Debug)]
pub struct LineResult {
    /// hybrid Wannier centres in [0, 1), ascending
    pub centres: Vec<f64>,
    pub stats: BandStats,
    /// smallest singular value of any overlap on the line (≈ 0: states change too fast)
    pub min_singular: f64,
    /// smallest over the loop's steps of the larger direct gap at the step's two ends (what
    /// the Davis–Kahan bound of the step's turn needs: `fine_line`)
    pub min_step_gap: f64,
    /// false when the loop could not be resolved to the gap (`fine_line`): its centres are
    /// not to be trusted
    pub resolved: bool,
    /// the even loop's eigenvalues and occupied vectors, kept for a small model so that a line
    /// resolved to the gap later (`fine_line::resolve_line`) starts from them instead of
    /// solving the same κ points again (see [`KEEP_SAMPLES_BELOW`])
    pub samples: Option<LineSamples>,
}

/// Eigenvalues (L × n) and occupied vectors (L × n × nocc, row-major) of a loop's L even κ
/// points s/L.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct LineSamples {
    pub e: Vec<f64>,
    pub occ: Vec<C64>,
}

/// A line keeps its [`LineSamples`] when L · n · nocc is under this (64 KiB of vectors a line:
/// ~8 MiB for the 126 initial lines of a 3D point). Most lines of a typical point are resolved
/// (`fine_line`: the hopping-norm bound of a loop step is rarely under a third of the gap), and
/// without them each was solved twice: a counting build put the repeated solves at ~40 % of a
/// Kane–Mele point's line solves (benches/RESULTS.md).
pub const KEEP_SAMPLES_BELOW: usize = 4096;

/// Evaluate many lines in parallel. `positions` (one reduced coordinate per orbital along each
/// axis, indexed `[axis * norb + orbital]`) switches to the tight-binding convention.
///
/// A source that builds H itself gives each line to a worker as one task of a guided list
/// ([`evaluate_line`]); one that prefers batches (a Python callback) is asked for the H of many
/// lines at once, and their eigenvectors and Wilson loops are then computed in parallel.
pub fn evaluate_lines(
    src: &dyn BlochSource,
    lines: &[LineSpec],
    loop_points: usize,
    filling: usize,
    positions: Option<&[f64]>,
) -> CoreResult<Vec<LineResult>> {
    let (dim, n) = (src.dim(), src.norb());
    let nn = n * n;
    if loop_points < 2 {
        return Err(CoreError::InvalidInput(
            "loop_points must be at least 2".into(),
        ));
    }
    if !src.prefers_batches() {
        return map_guided(
            lines.len(),
            || (),
            |_, i| evaluate_line(src, &lines[i], loop_points, filling, positions),
        );
    }
    let per_line = (loop_points * nn * 16).max(1);
    let chunk = (BATCH_BYTES / per_line).max(1);
    let mut out = Vec::with_capacity(lines.len());
    let mut kappa = Vec::new();
    let mut h = Vec::new();
    for group in lines.chunks(chunk) {
        kappa.clear();
        for l in group {
            line_kappa(l, loop_points, dim, &mut kappa);
        }
        h.resize(group.len() * loop_points * nn, C64::new(0.0, 0.0));
        src.fill(&kappa, &mut h)?;
        let res: CoreResult<Vec<LineResult>> = group
            .par_iter()
            .enumerate()
            .map_init(LineScratch::default, |scratch, (i, l)| {
                let hl = &h[i * loop_points * nn..(i + 1) * loop_points * nn];
                let kl = &kappa[i * loop_points * dim..(i + 1) * loop_points * dim];
                let w = line_weights(l, loop_points, n, positions);
                wilson_line_in(
                    scratch,
                    hl,
                    kl,
                    dim,
                    n,
                    filling,
                    w.as_deref(),
                    Kernels::Fast,
                )
            })
            .collect();
        out.extend(res?);
    }
    Ok(out)
}

/// One line of a source that builds H itself (`BlochSource::fill_line`: cheap, so built where
/// it is used, cache-resident, with no batch buffer), in the buffers its thread keeps (see
/// [`LineBuffers`]). `positions` as for [`evaluate_lines`].
pub fn evaluate_line(
    src: &dyn BlochSource,
    l: &LineSpec,
    loop_points: usize,
    filling: usize,
    positions: Option<&[f64]>,
) -> CoreResult<LineResult> {
    let (dim, n) = (src.dim(), src.norb());
    with_line_buffers(|b| {
        b.kappa.clear();
        line_kappa(l, loop_points, dim, &mut b.kappa);
        // (fill_line writes every entry: the old contents need no zeroing)
        b.h.resize(loop_points * n * n, C64::new(0.0, 0.0));
        src.fill_line(&l.base[..dim], l.axis, loop_points, &mut b.h)?;
        let w = line_weights(l, loop_points, n, positions);
        let mut r = wilson_line_in(
            &mut b.scratch,
            &b.h,
            &b.kappa,
            dim,
            n,
            filling,
            w.as_deref(),
            Kernels::Fast,
        )?;
        // (the fast kernels solve the whole line at once: the scratch holds every κ point)
        if positions.is_none() && loop_points * n * filling < KEEP_SAMPLES_BELOW {
            r.samples = Some(LineSamples {
                e: b.scratch.e[..loop_points * n].to_vec(),
                occ: b.scratch.ahead[..loop_points * n * filling].to_vec(),
            });
        }
        Ok(r)
    })
}

/// The κ points of a line (L × dim), appended to `kappa`.
fn line_kappa(l: &LineSpec, loop_points: usize, dim: usize, kappa: &mut Vec<f64>) {
    for s in 0..loop_points {
        let mut k = l.base;
        k[l.axis] = s as f64 / loop_points as f64;
        kappa.extend_from_slice(&k[..dim]);
    }
}

/// The phases exp(−2πi τ/L) of the orbitals along a line's axis (tight-binding convention),
/// or None (periodic convention).
fn line_weights(
    l: &LineSpec,
    loop_points: usize,
    n: usize,
    positions: Option<&[f64]>,
) -> Option<Vec<C64>> {
    positions.map(|p| {
        p[l.axis * n..(l.axis + 1) * n]
            .iter()
            .map(|&t| C64::from_polar(1.0, -TAU * t / loop_points as f64))
            .collect()
    })
}

/// Which kernels a Wilson line uses: the production path, or the straightforward one that the
/// fast path is tested against (cold-start dynamic Jacobi, allocating polar factor).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kernels {
    /// size-specialised eigensolver (the line's κ points in one `eigh_occupied_many_into`:
    /// four at a time in lanes for a generic 4×4, pairs for other n),
    /// closed-form or stack-buffer polar factors, no allocation inside the loop
    Fast,
    /// [`Kernels::Fast`] with κ points s, s + 1 solved together (the pairing before the
    /// four-lane solve; kept for benchmarks and tests)
    FastPairs,
    /// [`Kernels::Fast`] one κ point at a time (what the grouped solves are tested against)
    FastSingle,
    /// reference kernels at every κ point
    Reference,
}

/// Wilson loop of one line from its L Hamiltonians (`h`: L×n×n) at κ points `kappa` (L×dim),
/// with the given kernels (fresh buffers; the engine reuses a worker's, [`wilson_line_in`]).
#[allow(clippy::too_many_arguments)]
pub fn wilson_line_with(
    h: &[C64],
    kappa: &[f64],
    dim: usize,
    n: usize,
    nocc: usize,
    weight: Option<&[C64]>,
    kernels: Kernels,
) -> CoreResult<LineResult> {
    let mut scratch = LineScratch::default();
    wilson_line_in(&mut scratch, h, kappa, dim, n, nocc, weight, kernels)
}

/// The buffers of one Wilson line, kept by a worker from one line to the next: allocating
/// them per line was ~5 % of a 4-band point's instructions (malloc/free of a dozen small
/// vectors, 246 lines per point) once the kernels had become fast.
#[derive(Default)]
pub struct LineScratch {
    /// eigenvalues and occupied vectors of the κ points solved together
    e: Vec<f64>,
    ahead: Vec<C64>,
    v: Vec<C64>,
    first: Vec<C64>,
    prev: Vec<C64>,
    scaled: Vec<C64>,
    w: Vec<C64>,
    m: Vec<C64>,
    tmp: Vec<C64>,
}

/// The buffers of a thread's Wilson lines — the line's κ, its H and the [`LineScratch`] —
/// kept from one line to the next and from one call to the next. Buffers made per rayon split
/// (`map_init`) were made again at every steal, cold. A scratch build of the kernel harness
/// that timed every line (1500 calls on one thread and on two, in pairs; five runs of each
/// build, alternated) put the two workers' line time at 6 % above one worker's with buffers per
/// split and 4 % with buffers kept (medians), and the Wilson–Dirac point's threads gain at
/// 1.75× and 1.79×.
#[derive(Default)]
struct LineBuffers {
    kappa: Vec<f64>,
    h: Vec<C64>,
    scratch: LineScratch,
}

thread_local! {
    static LINE_BUFFERS: std::cell::Cell<LineBuffers> =
        std::cell::Cell::new(LineBuffers::default());
}

/// `f` on this thread's [`LineBuffers`] (see [`with_kept`]; kept while the line's H is at most
/// `KEPT_SCRATCH_BYTES`).
fn with_line_buffers<T>(f: impl FnOnce(&mut LineBuffers) -> T) -> T {
    with_kept(
        &LINE_BUFFERS,
        |b| b.h.capacity() * std::mem::size_of::<C64>(),
        f,
    )
}

/// `buf` as `len` zeros (the state a freshly allocated buffer would have), keeping its memory.
fn zeroed<T: Copy + Default>(buf: &mut Vec<T>, len: usize) -> &mut Vec<T> {
    buf.clear();
    buf.resize(len, T::default());
    buf
}

/// `buf` with `len` entries, keeping its memory and (up to `len`) its old contents: only for
/// buffers that are written in full before they are read.
fn sized<T: Copy + Default>(buf: &mut Vec<T>, len: usize) -> &mut Vec<T> {
    buf.resize(len, T::default());
    buf
}

/// [`wilson_line_with`] on a worker's reused buffers.
#[allow(clippy::too_many_arguments)]
pub fn wilson_line_in(
    scratch: &mut LineScratch,
    h: &[C64],
    kappa: &[f64],
    dim: usize,
    n: usize,
    nocc: usize,
    weight: Option<&[C64]>,
    kernels: Kernels,
) -> CoreResult<LineResult> {
    let nn = n * n;
    let l = h.len() / nn;
    // no buffer is allocated inside the loop over κ; each starts zeroed, as if new
    let LineScratch {
        e,
        ahead,
        v,
        first,
        prev,
        scaled,
        w,
        m,
        tmp,
    } = scratch;
    // κ points solved together, then taken in order: the whole line in one call (four at a
    // time inside; one call per group of four cost ~5 % more instructions on a Wilson–Dirac
    // point in slicing and dispatch), or pairs, or one at a time
    let group = match kernels {
        Kernels::Fast => l.max(1),
        Kernels::FastPairs => 2,
        Kernels::FastSingle | Kernels::Reference => 1,
    };
    let no = n * nocc;
    // (written in full by the solver before they are read: sized, not zeroed — zeroing the
    // whole line's buffers was a memset per line)
    let (e, ahead) = (sized(e, group * n), sized(ahead, group * no));
    let v = zeroed(v, nn);
    let (first, prev) = (zeroed(first, no), zeroed(prev, no));
    let scaled = zeroed(scaled, if weight.is_some() { n * nocc } else { 0 });
    let (w, m, tmp) = (
        zeroed(w, nocc * nocc),
        zeroed(m, nocc * nocc),
        zeroed(tmp, nocc * nocc),
    );
    for a in 0..nocc {
        w[a * nocc + a] = C64::new(1.0, 0.0);
    }
    let mut stats = BandStats::default();
    let mut min_singular = f64::INFINITY;
    let (mut first_gap, mut prev_gap, mut min_step_gap) = (0.0, 0.0, f64::INFINITY);
    let mut step = |from: &[C64], to: &[C64], w: &mut Vec<C64>| -> CoreResult<f64> {
        if nocc == 2 && weight.is_none() && kernels != Kernels::Reference {
            return Ok(pair_step(from, to, w));
        }
        match weight {
            None => overlap(from, to, n, nocc, nocc, m),
            Some(wt) => {
                for (idx, x) in scaled.iter_mut().enumerate() {
                    *x = to[idx] * wt[idx / nocc];
                }
                overlap(from, scaled, n, nocc, nocc, m);
            }
        }
        let s = match kernels {
            Kernels::Fast | Kernels::FastPairs | Kernels::FastSingle => unitarise(m, nocc)?,
            Kernels::Reference => unitarise_reference(m, nocc)?,
        };
        tmp.copy_from_slice(w);
        matmul(tmp, m, w, nocc, nocc, nocc);
        Ok(s)
    };
    let mut s = 0;
    while s < l {
        let g = group.min(l - s);
        let hs = &h[s * nn..(s + g) * nn];
        if kernels == Kernels::Reference {
            eigh_reference_into(hs, n, e, v)?;
            for i in 0..n {
                ahead[i * nocc..(i + 1) * nocc].copy_from_slice(&v[i * n..i * n + nocc]);
            }
        } else {
            // only the occupied vectors, written straight into `ahead`. A warm start from
            // the previous κ point (`eigh_warm_into`) was measured to cost more than it saves
            // at 40 points per loop (Wilson–Dirac: 198 vs 160 M instructions per 3 parameter
            // points; the G†HG transform outweighs the sweeps saved when neighbouring κ
            // points are 2π/40 apart), so the cold solvers are the production path.
            eigh_occupied_many_into(hs, n, nocc, &mut e[..g * n], &mut ahead[..g * no], v)?;
        }
        for j in 0..g {
            let to = &ahead[j * no..(j + 1) * no];
            let ej = &e[j * n..(j + 1) * n];
            stats.add(ej, nocc, &kappa[(s + j) * dim..(s + j + 1) * dim]);
            let gap = ej[nocc] - ej[nocc - 1];
            if s + j == 0 {
                first_gap = gap;
            } else {
                min_step_gap = min_step_gap.min(gap.max(prev_gap));
            }
            prev_gap = gap;
            if s + j == 0 {
                first.copy_from_slice(to);
            } else {
                let from = if j == 0 {
                    &prev[..]
                } else {
                    &ahead[(j - 1) * no..j * no]
                };
                min_singular = min_singular.min(step(from, to, w)?);
            }
        }
        prev.copy_from_slice(&ahead[(g - 1) * no..g * no]);
        s += g;
    }
    min_singular = min_singular.min(step(prev, first, w)?);
    min_step_gap = min_step_gap.min(prev_gap.max(first_gap));
    let centres = loop_centres(w, nocc, min_singular)?;
    Ok(LineResult {
        centres,
        stats,
        min_singular,
        min_step_gap,
        resolved: true,
        samples: None,
    })
}

/// Hybrid Wannier centres x = −θ/2π mod 1 of a Wilson loop `w` (nocc × nocc), ascending; NaN
/// when an overlap along the loop was singular (`min_singular` = 0).
pub fn loop_centres(w: &[C64], nocc: usize, min_singular: f64) -> CoreResult<Vec<f64>> {
    let mut centres: Vec<f64> = if min_singular > 0.0 {
        // (the phases' own vector becomes the centres: one allocation per line, not two)
        let mut phases = unitary_phases(w, nocc)?;
        for t in &mut phases {
            *t = (-*t / TAU).rem_euclid(1.0);
        }
        phases
    } else {
        vec![f64::NAN; nocc]
    };
    centres.sort_by(|a, b| a.total_cmp(b));
    Ok(centres)
}

/// One step of a line with one occupied pair: W ← W · polar(F†T) for n × 2 row-major F, T
/// (the previous and current occupied vectors). The overlap is summed in real arithmetic (the
/// complex type's products cost shuffles on baseline x86-64), the 2×2 polar factor is the
/// closed form of `matrix`. Returns the smallest singular value of F†T (0: left as is).
#[inline(always)]
fn pair_step(from: &[C64], to: &[C64], w: &mut [C64]) -> f64 {
    let mut o = [0.0f64; 8]; // (re, im) of o00, o01, o10, o11
    for (f, t) in from.chunks_exact(2).zip(to.chunks_exact(2)) {
        let (f0r, f0i, f1r, f1i) = (f[0].re, f[0].im, f[1].re, f[1].im);
        let (t0r, t0i, t1r, t1i) = (t[0].re, t[0].im, t[1].re, t[1].im);
        // conj(f_a) t_b
        o[0] = fmadd(f0r, t0r, fmadd(f0i, t0i, o[0]));
        o[1] = fmadd(f0r, t0i, fmadd(-f0i, t0r, o[1]));
        o[2] = fmadd(f0r, t1r, fmadd(f0i, t1i, o[2]));
        o[3] = fmadd(f0r, t1i, fmadd(-f0i, t1r, o[3]));
        o[4] = fmadd(f1r, t0r, fmadd(f1i, t0i, o[4]));
        o[5] = fmadd(f1r, t0i, fmadd(-f1i, t0r, o[5]));
        o[6] = fmadd(f1r, t1r, fmadd(f1i, t1i, o[6]));
        o[7] = fmadd(f1r, t1i, fmadd(-f1i, t1r, o[7]));
    }
    let mut m = [
        C64::new(o[0], o[1]),
        C64::new(o[2], o[3]),
        C64::new(o[4], o[5]),
        C64::new(o[6], o[7]),
    ];
    let s = unitarise_2x2(&mut m);
    let (w0, w1, w2, w3) = (w[0], w[1], w[2], w[3]);
    w[0] = w0 * m[0] + w1 * m[2];
    w[1] = w0 * m[1] + w1 * m[3];
    w[2] = w2 * m[0] + w3 * m[2];
    w[3] = w2 * m[1] + w3 * m[3];
    s
}

/// Band statistics, per-point energies and per-point occupied eigenvectors (n × nocc each).
pub type PointSpectra = (BandStats, Vec<Vec<f64>>, Vec<Vec<C64>>);

/// Eigen-decomposition of isolated κ points (TRIMs, bulk gap grid): band statistics, and the
/// occupied eigenvectors (n × nocc each) when `keep_vectors`.
pub fn evaluate_points(
    src: &dyn BlochSource,
    kappa: &[f64],
    filling: usize,
    keep_vectors: bool,
) -> CoreResult<PointSpectra> {
    let (dim, n) = (src.dim(), src.norb());
    let nn = n * n;
    let npts = kappa.len() / dim;
    let chunk = batch_points(nn, dim);
    let mut stats = BandStats::default();
    let mut energies = Vec::new();
    let mut vectors = Vec::new();
    let mut h = Vec::new();
    for start in (0..npts).step_by(chunk) {
        let end = (start + chunk).min(npts);
        h.resize((end - start) * nn, C64::new(0.0, 0.0));
        src.fill(&kappa[start * dim..end * dim], &mut h)?;
        // four κ points per task, solved together (eigh_many_into); the rest in a pair and
        // alone
        // (eigenvalues k × n and eigenvectors k × n × n of a task's k κ points)
        let res: CoreResult<Vec<(Vec<f64>, Vec<C64>)>> = h
            .par_chunks(4 * nn)
            .map(|hk| {
                let g = hk.len() / nn;
                let (mut e, mut v) = (vec![0.0; g * n], vec![C64::new(0.0, 0.0); g * nn]);
                eigh_many_into(hk, n, &mut e, &mut v)?;
                Ok((e, v))
            })
            .collect();
        // (each task's κ points one after the other; copied out only where they are kept)
        let tasks = res?;
        let points = tasks
            .iter()
            .flat_map(|(e, v)| e.chunks_exact(n).zip(v.chunks_exact(nn)));
        for (i, (e, v)) in points.enumerate() {
            stats.add(e, filling, &kappa[(start + i) * dim..(start + i + 1) * dim]);
            if keep_vectors {
                let occ: Vec<C64> = (0..n)
                    .flat_map(|r| v[r * n..r * n + filling].to_vec())
                    .collect();
                vectors.push(occ);
                energies.push(e.to_vec());
            }
        }
    }
    Ok((stats, energies, vectors))
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::zone::bloch::Hoppings;

    pub(crate) fn random_model(n: usize, seed: u64) -> Hoppings {
        let mut rng = crate::test_rng::TestRng::new(seed);
        let mut next = || rng.uniform();
        let nn = n * n;
        let mut t = Vec::new();
        for _ in 0..4 {
            t.extend((0..nn).map(|_| C64::new(next(), next())));
        }
        // on-site block Hermitian with a spread of levels
        for i in 0..n {
            for j in 0..n {
                let x = (t[i * n + j] + t[j * n + i].conj()) * 0.5;
                t[i * n + j] = x + if i == j {
                    C64::new(i as f64, 0.0)
                } else {
                    C64::new(0.0, 0.0)
                };
            }
        }
        let r = vec![0, 0, 0, 1, 0, 0, 0, 1, 0, 0, 0, 1];
        Hoppings::new(3, n, 0, r, t, vec![-1; 4]).unwrap()
    }

    /// The fast kernels (warm-started fixed-size Jacobi, closed-form polar factors) against the
    /// straightforward ones on whole Wilson lines: centres and band statistics to 1e-10.
    #[test]
    fn fast_line_matches_reference() {
        for (n, nocc) in [(2, 1), (4, 2), (4, 1), (6, 2), (8, 4), (8, 3), (12, 6)] {
            let model = random_model(n, 17 * n as u64 + nocc as u64)
                .at(&[])
                .unwrap();
            for (axis, base) in [
                (0, [0.0, 0.3, 0.1]),
                (1, [0.5, 0.0, 0.77]),
                (2, [0.2, 0.9, 0.0]),
            ] {
                let lp = 30;
                let kappa: Vec<f64> = (0..lp)
                    .flat_map(|s| {
                        let mut k = base;
                        k[axis] = s as f64 / lp as f64;
                        k
                    })
                    .collect();
                let mut h = vec![C64::new(0.0, 0.0); lp * n * n];
                model.fill(&kappa, &mut h).unwrap();
                let fast = wilson_line_with(&h, &kappa, 3, n, nocc, None, Kernels::Fast).unwrap();
                let slow =
                    wilson_line_with(&h, &kappa, 3, n, nocc, None, Kernels::Reference).unwrap();
                for (a, b) in fast.centres.iter().zip(&slow.centres) {
                    assert!(
                        crate::topology::flow::circ_dist(*a, *b) < 1e-10,
                        "n={n}: {a} vs {b}"
                    );
                }
                let (fs, ss) = (fast.stats, slow.stats);
                for (a, b) in [
                    (fs.min_direct, ss.min_direct),
                    (fs.top_occ, ss.top_occ),
                    (fs.bottom_empty, ss.bottom_empty),
                    (fs.e_min, ss.e_min),
                    (fs.e_max, ss.e_max),
                ] {
                    assert!((a - b).abs() < 1e-10, "n={n}: {a} vs {b}");
                }
                assert!((fast.min_singular - slow.min_singular).abs() < 1e-10);
            }
        }
    }

    /// One worker's buffers reused across lines of different sizes, weighted and not, give
    /// what fresh buffers give, bit for bit (stale contents of a longer earlier line must not
    /// leak into a later one).
    #[test]
    fn reused_line_buffers_equal_fresh_ones() {
        let mut scratch = LineScratch::default();
        let lp = 12;
        for (n, nocc, weighted) in [(8, 4, false), (4, 2, false), (6, 2, true), (4, 1, false)] {
            let model = random_model(n, 5 * n as u64 + nocc as u64).at(&[]).unwrap();
            let kappa: Vec<f64> = (0..lp)
                .flat_map(|s| [0.2, s as f64 / lp as f64, 0.4])
                .collect();
            let mut h = vec![C64::new(0.0, 0.0); lp * n * n];
            model.fill(&kappa, &mut h).unwrap();
            let weight: Option<Vec<C64>> = weighted.then(|| {
                (0..n)
                    .map(|i| C64::from_polar(1.0, 0.3 * i as f64))
                    .collect()
            });
            let w = weight.as_deref();
            let fresh = wilson_line_with(&h, &kappa, 3, n, nocc, w, Kernels::Fast).unwrap();
            let reused =
                wilson_line_in(&mut scratch, &h, &kappa, 3, n, nocc, w, Kernels::Fast).unwrap();
            let bits = |r: &LineResult| {
                let mut v: Vec<u64> = r.centres.iter().map(|x| x.to_bits()).collect();
                v.extend([r.min_singular.to_bits(), r.stats.min_direct.to_bits()]);
                v.extend([r.stats.top_occ.to_bits(), r.stats.e_max.to_bits()]);
                v
            };
            assert_eq!(bits(&fresh), bits(&reused), "n={n}, nocc={nocc}");
        }
    }

    /// A thread's kept line buffers (`with_line_buffers`) carry nothing from one call to the
    /// next: lines of an 8-band model, then of a 4-band model with a shorter loop, then the
    /// 8-band lines again, all on one thread, give bit for bit what the first call gave on
    /// fresh buffers.
    #[test]
    fn kept_line_buffers_carry_nothing_between_calls() {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap();
        let big = random_model(8, 3).at(&[]).unwrap();
        let small = random_model(4, 4).at(&[]).unwrap();
        let lines: Vec<LineSpec> = (0..5)
            .map(|m| LineSpec {
                base: [0.1 * m as f64, 0.0, 0.35],
                axis: 1,
            })
            .collect();
        let bits = |r: &[LineResult]| -> Vec<u64> {
            r.iter()
                .flat_map(|l| {
                    l.centres
                        .iter()
                        .chain([&l.min_singular, &l.stats.min_direct])
                })
                .map(|x| x.to_bits())
                .collect()
        };
        pool.install(|| {
            // (fresh: this pool's thread has made no line before)
            let first = bits(&evaluate_lines(&big, &lines, 16, 4, None).unwrap());
            evaluate_lines(&small, &lines, 9, 2, None).unwrap();
            let again = bits(&evaluate_lines(&big, &lines, 16, 4, None).unwrap());
            assert_eq!(first, again);
        });
    }

    /// Grouped eigensolves along a line — four κ points at a time (`Kernels::Fast`; the
    /// four-lane solve for a generic 4×4, pairs for other n) and two at a time
    /// (`Kernels::FastPairs`) — against one κ point at a time, for loop lengths that leave
    /// every remainder (7 = 4 + 3, 30 = 7·4 + 2, 41 = 10·4 + 1): the paired solve is the same
    /// arithmetic as the single one, so it agrees exactly; the four-lane solve does the same
    /// operations in another order, so centres, band statistics and the smallest singular
    /// value agree to 1e-12 (measured differences are a few ε). Isolated points
    /// (`evaluate_points`, five: a group of four and one alone) against `eigh` per point:
    /// eigenvalues to 1e-13, occupied projectors to 1e-12 (gauge-free).
    #[test]
    fn grouped_solves_match_single_solves() {
        for (n, nocc) in [
            (2, 1),
            (3, 1),
            (4, 2),
            (4, 1),
            (4, 3),
            (6, 3),
            (8, 4),
            (10, 5),
        ] {
            let model = random_model(n, 91 * n as u64 + nocc as u64)
                .at(&[])
                .unwrap();
            for lp in [7usize, 30, 41] {
                let base = [0.1, 0.0, 0.35];
                let kappa: Vec<f64> = (0..lp)
                    .flat_map(|s| [base[0], s as f64 / lp as f64, base[2]])
                    .collect();
                let mut h = vec![C64::new(0.0, 0.0); lp * n * n];
                model.fill(&kappa, &mut h).unwrap();
                let line = |k| wilson_line_with(&h, &kappa, 3, n, nocc, None, k).unwrap();
                let single = line(Kernels::FastSingle);
                let paired = line(Kernels::FastPairs);
                assert_eq!(paired.centres, single.centres, "n={n}");
                assert_eq!(paired.stats, single.stats, "n={n}");
                assert_eq!(paired.min_singular, single.min_singular, "n={n}");
                let quad = line(Kernels::Fast);
                for (a, b) in quad.centres.iter().zip(&single.centres) {
                    assert!(
                        crate::topology::flow::circ_dist(*a, *b) <= 1e-12,
                        "n={n}: {a} vs {b}"
                    );
                }
                quad.stats
                    .assert_close(&single.stats, 1e-12, &format!("n={n}"));
                assert!((quad.min_singular - single.min_singular).abs() <= 1e-12);
            }
            let kappa: Vec<f64> = (0..5).flat_map(|s| [0.1 * s as f64, 0.3, 0.77]).collect();
            let (stats, energies, vectors) = evaluate_points(&model, &kappa, nocc, true).unwrap();
            assert_eq!(energies.len(), 5);
            let mut want = BandStats::default();
            for (i, k) in kappa.chunks_exact(3).enumerate() {
                let mut h = vec![C64::new(0.0, 0.0); n * n];
                model.fill(k, &mut h).unwrap();
                let (e, v) = crate::linalg::eigen::eigh(&h, n).unwrap();
                want.add(&e, nocc, k);
                for (a, b) in energies[i].iter().zip(&e) {
                    assert!((a - b).abs() <= 1e-13, "n={n} point {i}: {a} vs {b}");
                }
                let u = &vectors[i];
                for r in 0..n {
                    for c in 0..n {
                        let p: C64 = (0..nocc)
                            .map(|b| u[r * nocc + b] * u[c * nocc + b].conj())
                            .sum();
                        let p0: C64 = (0..nocc).map(|b| v[r * n + b] * v[c * n + b].conj()).sum();
                        assert!((p - p0).norm() <= 1e-12, "n={n} point {i}: projector");
                    }
                }
            }
            assert!((stats.min_direct - want.min_direct).abs() <= 1e-13);
            assert!((stats.top_occ - want.top_occ).abs() <= 1e-13);
            assert!((stats.bottom_empty - want.bottom_empty).abs() <= 1e-13);
            assert_eq!(stats.min_direct_at, want.min_direct_at);
        }
    }
}
