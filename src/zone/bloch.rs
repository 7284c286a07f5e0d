//! Bloch Hamiltonians from the term/hopping representation.
//!
//! H(κ) = Σ_term c_term Σ_R [T e^{2πiκ·R} + (R ≠ 0) T† e^{-2πiκ·R}] (periodic convention, κ in
//! reduced coordinates). A parameter point fixes the coefficient vector c, so the hoppings are
//! first folded into one matrix per distinct R; a κ point then costs one sin/cos per R and a
//! few complex multiply-adds per matrix element.

use crate::error::{invalid, CoreResult};
use crate::exec::kept::with_kept;
use crate::linalg::eigen::eigh_occupied_many_into;
use crate::zone::variation::VariationBound;
use crate::{fmadd, C64};
use rayon::prelude::*;
use std::cell::Cell;
use std::collections::BTreeMap;
use std::f64::consts::TAU;
use std::sync::OnceLock;

/// Anything that yields H(κ) for a batch of κ points.
///
/// `kappa` holds n points × `dim` reduced coordinates (row-major); `out` receives n row-major
/// norb×norb matrices. Implementations are called with large batches, so a Python callback
/// can vectorise.
pub trait BlochSource: Sync {
    fn dim(&self) -> usize;
    fn norb(&self) -> usize;
    fn fill(&self, kappa: &[f64], out: &mut [C64]) -> CoreResult<()>;

    /// True when `fill` should get large batches (a Python callback); false when H(κ) is
    /// cheap to build anywhere, so each worker builds its own line right before using it
    /// (`fill_line`) and no batch buffer is needed.
    fn prefers_batches(&self) -> bool {
        true
    }

    /// A bound of how far H(κ) moves over a box of κ (certified gaps, loops resolved near a
    /// closing), or None when the source cannot give one.
    fn variation(&self) -> Option<&VariationBound> {
        None
    }

    /// A bound of ‖H(κ) − H(c)‖₂ over the box |κ_i − c_i| ≤ h_i made from the derivatives at
    /// its centre, tighter than [`variation`](Self::variation) on small boxes (see
    /// [`Bloch::local_variation`]); None when the source has none.
    fn local_variation(&self, _centre: &[f64], _half: &[f64; 3]) -> CoreResult<Option<f64>> {
        Ok(None)
    }

    /// H at the `points` κ points base + (s/points) e_axis, s = 0…points−1 (a Wilson loop),
    /// serially on the calling thread; `base[axis]` is ignored.
    fn fill_line(
        &self,
        base: &[f64],
        axis: usize,
        points: usize,
        out: &mut [C64],
    ) -> CoreResult<()> {
        self.fill_line_shifted(base, axis, points, 0.0, out)
    }

    /// [`fill_line`](Self::fill_line) at κ_axis = (s + shift)/points (the bulk gap grid takes
    /// shift = ½: its points avoid the TRIMs). The default builds the κ list and calls `fill`.
    fn fill_line_shifted(
        &self,
        base: &[f64],
        axis: usize,
        points: usize,
        shift: f64,
        out: &mut [C64],
    ) -> CoreResult<()> {
        let dim = self.dim();
        let mut kappa = Vec::with_capacity(points * dim);
        for s in 0..points {
            let mut k = [0.0; 3];
            k[..dim].copy_from_slice(&base[..dim]);
            k[axis] = (s as f64 + shift) / points as f64;
            kappa.extend_from_slice(&k[..dim]);
        }
        self.fill(&kappa, out)
    }
}

/// The hopping list of a tight-binding model: independent of the parameter values.
#[derive(Clone, Debug)]
pub struct Hoppings {
    pub dim: usize,
    pub norb: usize,
    pub nterms: usize,
    /// lattice vectors, nhop × dim
    pub r: Vec<i64>,
    /// hopping matrices, nhop × norb × norb (row-major)
    pub t: Vec<C64>,
    /// term index of each hopping; −1 for the fixed part (coefficient 1)
    pub term: Vec<i64>,
}

impl Hoppings {
    pub fn new(
        dim: usize,
        norb: usize,
        nterms: usize,
        r: Vec<i64>,
        t: Vec<C64>,
        term: Vec<i64>,
    ) -> CoreResult<Self> {
        if !(1..=3).contains(&dim) {
            return Err(invalid!("dim must be 1, 2 or 3, got {dim}"));
        }
        if norb == 0 {
            return Err(invalid!("norb must be positive"));
        }
        let nhop = term.len();
        if r.len() != nhop * dim || t.len() != nhop * norb * norb {
            return Err(invalid!(
                "hopping arrays disagree: {nhop} terms, {} R entries, {} T entries",
                r.len(),
                t.len()
            ));
        }
        if let Some(bad) = term.iter().find(|&&k| k < -1 || k >= nterms as i64) {
            return Err(invalid!("term index {bad} outside -1..{nterms}"));
        }
        if t.iter().any(|z| !z.re.is_finite() || !z.im.is_finite()) {
            return Err(invalid!("hopping matrix contains NaN or infinity"));
        }
        Ok(Self {
            dim,
            norb,
            nterms,
            r,
            t,
            term,
        })
    }

    /// Fold the hoppings for one coefficient vector into one matrix per distinct R.
    pub fn at(&self, coeff: &[f64]) -> CoreResult<Bloch> {
        if coeff.len() != self.nterms {
            return Err(invalid!(
                "expected {} term coefficients, got {}",
                self.nterms,
                coeff.len()
            ));
        }
        if coeff.iter().any(|c| !c.is_finite()) {
            return Err(invalid!("term coefficient is NaN or infinite"));
        }
        let nn = self.norb * self.norb;
        let mut by_r: BTreeMap<Vec<i64>, Vec<C64>> = BTreeMap::new();
        for (h, &k) in self.term.iter().enumerate() {
            let c = if k < 0 { 1.0 } else { coeff[k as usize] };
            if c == 0.0 {
                continue;
            }
            let key = self.r[h * self.dim..(h + 1) * self.dim].to_vec();
            let acc = by_r
                .entry(key)
                .or_insert_with(|| vec![C64::new(0.0, 0.0); nn]);
            for (a, &x) in acc.iter_mut().zip(&self.t[h * nn..(h + 1) * nn]) {
                *a += x * c;
            }
        }
        let mut onsite = vec![C64::new(0.0, 0.0); nn];
        let mut rs = Vec::new();
        let mut cos_part = Vec::new();
        let mut sin_part = Vec::new();
        let n = self.norb;
        for (key, m) in by_r {
            if key.iter().all(|&x| x == 0) {
                onsite = m;
            } else {
                rs.extend(key.iter().map(|&x| x as f64));
                // M e^{iφ} + M† e^{−iφ} = (M + M†) cos φ + i(M − M†) sin φ: two Hermitian
                // matrices scaled by real numbers, so a κ point is a real linear combination
                for i in 0..n {
                    for j in 0..n {
                        let (a, b) = (m[i * n + j], m[j * n + i].conj());
                        cos_part.push(a + b);
                        sin_part.push((a - b) * C64::new(0.0, 1.0));
                    }
                }
            }
        }
        Ok(Bloch {
            dim: self.dim,
            norb: self.norb,
            onsite,
            rs,
            cos_part,
            sin_part,
            variation: OnceLock::new(),
        })
    }
}

/// A tight-binding model at one parameter point: H(κ) = onsite + Σ_R (C_R cos φ_R + S_R sin φ_R)
/// with φ_R = 2πκ·R and Hermitian C_R = M_R + M_R†, S_R = i(M_R − M_R†).
#[derive(Clone, Debug)]
pub struct Bloch {
    dim: usize,
    norb: usize,
    onsite: Vec<C64>,
    rs: Vec<f64>,
    cos_part: Vec<C64>,
    sin_part: Vec<C64>,
    /// the variation bound, made the first time it is asked for
    variation: OnceLock<Option<VariationBound>>,
}

impl Bloch {
    /// An upper bound of ‖H(κ) − H(c)‖₂ over the box |κ_i − c_i| ≤ h_i, from first order at c:
    ///
    ///   H(c + δ) − H(c) = Σ_i δ_i ∂_iH(c) + Σ_R (M_R e^{iφ_R(c)} (e^{iΔ_R} − 1 − iΔ_R) + h.c.),
    ///
    /// with Δ_R = 2π R·δ. The first term's norm is convex in δ, so its largest value over the
    /// box is at a corner: the exact spectral norm of Σ_i s_i h_i ∂_iH(c) for the 2^(dim−1) sign
    /// patterns s (a corner and its opposite give the same norm). The remainder is at most
    /// Σ_R 2‖M_R‖ x_R²/2 with x_R = 2π Σ_i |R_i| h_i, because |e^{ix} − 1 − ix| ≤ x²/2 (common
    /// practice, no source: Taylor's theorem with the remainder in integral form).
    ///
    /// The global bound sums ‖M_R‖ over every R at its largest phase step; on small boxes this
    /// one sees how the hoppings' phases actually combine at c, which for a dozen random
    /// bonds was about three times smaller per axis (a 3D proof then needs ~25 times fewer
    /// boxes near a closing). None when the model has no hoppings.
    pub fn local_variation(&self, centre: &[f64], half: &[f64; 3]) -> CoreResult<Option<f64>> {
        let Some(bound @ VariationBound::Hoppings(_)) = self.variation() else {
            return Ok(None);
        };
        let remainder = bound.remainder(half);
        let (n, dim) = (self.norb, self.dim);
        let nn = n * n;
        // (axes of zero width add nothing: a step along one axis needs one matrix)
        let axes: Vec<usize> = (0..dim).filter(|&i| half[i] > 0.0).collect();
        let patterns = 1usize << axes.len().saturating_sub(1);
        // the corners' first-order matrices Σ_R w_R(s) (S_R cos φ_R − C_R sin φ_R), where
        // ∂_i(C cos φ + S sin φ) = 2π R_i (S cos φ − C sin φ) and w_R(s) = 2π Σ_i s_i h_i R_i
        let mut mats = vec![C64::new(0.0, 0.0); patterns * nn];
        for ((r, cp), sp) in self
            .rs
            .chunks_exact(dim)
            .zip(self.cos_part.chunks_exact(nn))
            .zip(self.sin_part.chunks_exact(nn))
        {
            let phase: f64 = r.iter().zip(centre).map(|(a, b)| a * b).sum::<f64>() * TAU;
            let (sn, cs) = phase.sin_cos();
            for (p, out) in mats.chunks_exact_mut(nn).enumerate() {
                // pattern p: sign + on the first axis, bit j−1 of p the sign on the j-th
                let w: f64 = axes
                    .iter()
                    .enumerate()
                    .map(|(j, &i)| {
                        let sign = if j > 0 && (p >> (j - 1)) & 1 == 1 {
                            -1.0
                        } else {
                            1.0
                        };
                        sign * half[i] * r[i]
                    })
                    .sum::<f64>()
                    * TAU;
                add_combination(out, cp, sp, -w * sn, w * cs);
            }
        }
        let mut e = vec![0.0; patterns * n];
        let mut work = vec![C64::new(0.0, 0.0); nn];
        eigh_occupied_many_into(&mats, n, 0, &mut e, &mut [], &mut work)?;
        let first = e.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        // (eigenvalues are exact to a few ulps of the matrix's norm)
        Ok(Some(first * (1.0 + 1e-10) + remainder))
    }

    /// H(κ) at one κ point into `out` (norb×norb).
    pub fn at_point(&self, kappa: &[f64], out: &mut [C64]) {
        let nn = self.norb * self.norb;
        let out = &mut out[..nn];
        out.copy_from_slice(&self.onsite);
        for ((r, cp), sp) in self
            .rs
            .chunks_exact(self.dim)
            .zip(self.cos_part.chunks_exact(nn))
            .zip(self.sin_part.chunks_exact(nn))
        {
            let phase: f64 = r.iter().zip(kappa).map(|(a, b)| a * b).sum::<f64>() * TAU;
            let (sn, cs) = phase.sin_cos();
            add_combination(out, cp, sp, cs, sn);
        }
    }
}

/// out += c·cp + s·sp (real scalars, complex matrices): contiguous, vectorises.
#[inline(always)]
fn add_combination(out: &mut [C64], cp: &[C64], sp: &[C64], c: f64, s: f64) {
    for ((o, a), b) in out.iter_mut().zip(cp).zip(sp) {
        o.re = fmadd(a.re, c, fmadd(b.re, s, o.re));
        o.im = fmadd(a.im, c, fmadd(b.im, s, o.im));
    }
}

/// κ points of a batch fill per parallel task. A batch of at most this many is filled on the
/// calling thread without touching rayon: a parallel iterator called outside any pool would
/// start rayon's global pool, and the binding runs such small fills (the symmetry checks' few
/// κ points) without a pool, so that they never make the caller a worker of a pool of a size
/// it did not ask for (`crate::exec::pools`).
pub const FILL_CHUNK: usize = 64;

impl BlochSource for Bloch {
    fn dim(&self) -> usize {
        self.dim
    }
    fn norb(&self) -> usize {
        self.norb
    }
    fn fill(&self, kappa: &[f64], out: &mut [C64]) -> CoreResult<()> {
        let nn = self.norb * self.norb;
        let npts = kappa.len() / self.dim;
        if out.len() < npts * nn {
            return Err(invalid!("output buffer too small for {npts} κ points"));
        }
        let (out, kappa) = (&mut out[..npts * nn], &kappa[..npts * self.dim]);
        if npts <= FILL_CHUNK {
            // (on this thread, without asking any pool: see FILL_CHUNK)
            for (o, k) in out.chunks_exact_mut(nn).zip(kappa.chunks_exact(self.dim)) {
                self.at_point(k, o);
            }
        } else {
            out.par_chunks_mut(nn)
                .zip(kappa.par_chunks(self.dim))
                .with_min_len(FILL_CHUNK)
                .for_each(|(o, k)| self.at_point(k, o));
        }
        Ok(())
    }

    fn prefers_batches(&self) -> bool {
        false
    }

    fn local_variation(&self, centre: &[f64], half: &[f64; 3]) -> CoreResult<Option<f64>> {
        Bloch::local_variation(self, centre, half)
    }

    fn variation(&self) -> Option<&VariationBound> {
        self.variation
            .get_or_init(|| {
                VariationBound::from_folded(
                    self.dim,
                    self.norb,
                    &self.rs,
                    &self.cos_part,
                    &self.sin_part,
                )
                .ok()
            })
            .as_ref()
    }

    /// Along a loop κ_axis = s/L, so φ_R(s) = φ_R⁰ + θ_m(s) with φ_R⁰ from the other
    /// coordinates and θ_m(s) = 2π m s / L, m = R_axis. Writing
    /// C cos(φ⁰ + θ) + S sin(φ⁰ + θ) = (C cos φ⁰ + S sin φ⁰) cos θ + (S cos φ⁰ − C sin φ⁰) sin θ,
    /// all R with the same |m| fold, once per line, into one pair of matrices (those with m = 0
    /// into the constant part). A κ point of the line then costs one real linear combination per
    /// distinct |m| — one or two for nearest-neighbour models, however many R there are — with
    /// cos θ, sin θ from a table of the L-th roots of unity (index |m|·s mod L: exact, no drift).
    ///
    /// A shift moves every point by shift/L along the axis: a phase 2π m·shift/L that folds into
    /// φ⁰ like the other coordinates.
    fn fill_line_shifted(
        &self,
        base: &[f64],
        axis: usize,
        points: usize,
        shift: f64,
        out: &mut [C64],
    ) -> CoreResult<()> {
        let nn = self.norb * self.norb;
        if out.len() < points * nn || axis >= self.dim || points == 0 || !shift.is_finite() {
            return Err(invalid!(
                "fill_line: bad axis, point count, shift or buffer size"
            ));
        }
        // (the thread's folded line, reused: see FOLDED)
        with_kept(&FOLDED, FoldedLine::bytes, |folded| {
            self.fold_line_into(base, axis, shift / points as f64, folded);
            ROOTS.with(|cell| {
                let mut roots = cell.borrow_mut();
                if roots.len() != points {
                    // the same loop length comes back for every line: one table per worker
                    // thread
                    *roots = (0..points)
                        .map(|k| (TAU * k as f64 / points as f64).sin_cos())
                        .collect();
                }
                for (s, o) in out[..points * nn].chunks_exact_mut(nn).enumerate() {
                    let mut pairs = folded
                        .harmonics
                        .iter()
                        .zip(folded.pairs.chunks_exact(2 * nn));
                    // the first harmonic writes constant + its combination in one pass (no copy)
                    match pairs.next() {
                        Some((&m, pair)) => {
                            let (sn, cs) = roots[(m * s) % points];
                            let (a, b) = pair.split_at(nn);
                            let (k, o) = (&folded.constant[..nn], &mut o[..nn]);
                            for i in 0..nn {
                                o[i].re = fmadd(a[i].re, cs, fmadd(b[i].re, sn, k[i].re));
                                o[i].im = fmadd(a[i].im, cs, fmadd(b[i].im, sn, k[i].im));
                            }
                        }
                        None => o.copy_from_slice(&folded.constant),
                    }
                    for (&m, pair) in pairs {
                        let (sn, cs) = roots[(m * s) % points];
                        let (a, b) = pair.split_at(nn);
                        add_combination(o, a, b, cs, sn);
                    }
                }
            });
        });
        Ok(())
    }
}

thread_local! {
    /// (sin, cos) of 2πk/L, k = 0…L−1, for the loop length L last used on this thread.
    static ROOTS: std::cell::RefCell<Vec<(f64, f64)>> = const { std::cell::RefCell::new(Vec::new()) };
}

/// H along one loop, folded by harmonic: H(s) = constant + Σ_i A_i cos θ_i(s) + B_i sin θ_i(s)
/// with θ_i(s) = 2π harmonics[i] s / L; `pairs` holds A_0, B_0, A_1, B_1, ... (norb² each).
#[derive(Default)]
struct FoldedLine {
    constant: Vec<C64>,
    harmonics: Vec<usize>,
    pairs: Vec<C64>,
}

impl FoldedLine {
    fn bytes(&self) -> usize {
        (self.constant.capacity() + self.pairs.capacity()) * std::mem::size_of::<C64>()
    }
}

thread_local! {
    /// The folded line of a thread's last line, its memory reused by the next: allocated per
    /// line, its three vectors cost the Wilson–Dirac point's threads gain ~0.1 (1.65–1.67×
    /// against 1.71–1.80× kept, three alternated runs of 1500 paired calls in a scratch build
    /// of the kernel harness) — allocation with two threads at work costs more than with one.
    static FOLDED: Cell<FoldedLine> = Cell::new(FoldedLine::default());
}

impl Bloch {
    /// Fold the line into `line` (whatever it held before is overwritten; its memory is
    /// reused). `offset`: κ_axis of the line's first point (0 for a Wilson loop).
    fn fold_line_into(&self, base: &[f64], axis: usize, offset: f64, line: &mut FoldedLine) {
        let nn = self.norb * self.norb;
        line.constant.clear();
        line.constant.extend_from_slice(&self.onsite);
        line.harmonics.clear();
        line.pairs.clear();
        for ((r, cp), sp) in self
            .rs
            .chunks_exact(self.dim)
            .zip(self.cos_part.chunks_exact(nn))
            .zip(self.sin_part.chunks_exact(nn))
        {
            // base[axis] is ignored: the loop coordinate runs over offset + s / points
            let mut phase: f64 = (0..self.dim)
                .filter(|&d| d != axis)
                .map(|d| r[d] * base[d])
                .sum::<f64>();
            if offset != 0.0 {
                phase += r[axis] * offset;
            }
            let phase = phase * TAU;
            let (s0, c0) = phase.sin_cos();
            let m = r[axis] as i64;
            if m == 0 {
                add_combination(&mut line.constant, cp, sp, c0, s0);
                continue;
            }
            let i = match line
                .harmonics
                .iter()
                .position(|&h| h == m.unsigned_abs() as usize)
            {
                Some(i) => i,
                None => {
                    line.harmonics.push(m.unsigned_abs() as usize);
                    line.pairs
                        .resize(line.pairs.len() + 2 * nn, C64::new(0.0, 0.0));
                    line.harmonics.len() - 1
                }
            };
            // sin(−θ) = −sin θ: a negative m flips the sine part
            let sign = m.signum() as f64;
            let (a, b) = line.pairs[2 * i * nn..(2 * i + 2) * nn].split_at_mut(nn);
            add_combination(a, cp, sp, c0, s0);
            add_combination(b, sp, cp, sign * c0, -sign * s0);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Two-band chain: onsite m σz (m the one coefficient), hopping (σz − iσx)/2 at R = 1.
    fn chain() -> Hoppings {
        let z = C64::new(0.0, 0.0);
        let sz = vec![C64::new(1.0, 0.0), z, z, C64::new(-1.0, 0.0)];
        let hop = vec![
            C64::new(0.5, 0.0),
            C64::new(0.0, -0.5),
            C64::new(0.0, -0.5),
            C64::new(-0.5, 0.0),
        ];
        let mut t = sz;
        t.extend(hop);
        Hoppings::new(1, 2, 1, vec![0, 1], t, vec![0, -1]).unwrap()
    }

    /// A 3-orbital 3D model with random Hermitian onsite terms and random hoppings at
    /// R = (1,0,0), (1,−2,0), (0,3,1); one coefficient scales the onsite and second hopping.
    fn random_three_orbital(seed: u64) -> Hoppings {
        let n = 3;
        let mut rng = crate::test_rng::TestRng::new(seed);
        let mut next = || rng.uniform();
        let r = vec![0, 0, 0, 1, 0, 0, 1, -2, 0, 0, 3, 1];
        let mut t: Vec<C64> = (0..4 * n * n).map(|_| C64::new(next(), next())).collect();
        for i in 0..n {
            for j in 0..n {
                t[i * n + j] = if i <= j {
                    t[i * n + j]
                } else {
                    t[j * n + i].conj()
                };
            }
            t[i * n + i].im = 0.0;
        }
        Hoppings::new(3, n, 1, r, t, vec![-1, 0, -1, 0]).unwrap()
    }

    /// The chain is H = (m + cos 2πκ) σz + sin 2πκ σx.
    #[test]
    fn chain_matches_closed_form() {
        let z = C64::new(0.0, 0.0);
        let m = 0.7;
        let b = chain().at(&[m]).unwrap();
        let mut out = vec![z; 4];
        for &k in &[0.0, 0.13, 0.5, 0.77] {
            b.at_point(&[k], &mut out);
            let (s, c) = (TAU * k).sin_cos();
            assert!((out[0] - (m + c)).norm() < 1e-14);
            assert!((out[3] + (m + c)).norm() < 1e-14);
            assert!((out[1] - s).norm() < 1e-14);
            assert!((out[2] - s).norm() < 1e-14);
        }
    }

    /// A batch fill equals H point by point, bit for bit, on this thread (up to FILL_CHUNK
    /// points) and split over a pool (more), so the binding may run small fills without one.
    #[test]
    fn batch_fill_equals_points_on_and_off_the_pool() {
        let n = 3;
        let b = random_three_orbital(5).at(&[0.4]).unwrap();
        for npts in [1, FILL_CHUNK, FILL_CHUNK + 1, 3 * FILL_CHUNK + 7] {
            let kappa: Vec<f64> = (0..3 * npts).map(|i| (i as f64 * 0.37).fract()).collect();
            let mut batch = vec![C64::new(9.0, 9.0); npts * n * n];
            crate::exec::guided::tests::pool(2)
                .install(|| b.fill(&kappa, &mut batch))
                .unwrap();
            let mut one = vec![C64::new(0.0, 0.0); n * n];
            for (p, k) in kappa.chunks_exact(3).enumerate() {
                b.at_point(k, &mut one);
                assert_eq!(
                    one[..],
                    batch[p * n * n..(p + 1) * n * n],
                    "{npts} points, {p}"
                );
            }
        }
    }

    /// The per-line fill (roots-of-unity table) equals H built point by point.
    #[test]
    fn fill_line_matches_points() {
        let n = 3;
        let b = random_three_orbital(99).at(&[0.7]).unwrap();
        for (axis, lp, shift) in [
            (0, 7, 0.0),
            (1, 40, 0.0),
            (2, 13, 0.0),
            (2, 8, 0.5),
            (0, 5, -1.3),
        ] {
            let base = [0.31, 0.5, 0.07];
            let mut line = vec![C64::new(0.0, 0.0); lp * n * n];
            if shift == 0.0 {
                b.fill_line(&base, axis, lp, &mut line).unwrap();
            } else {
                b.fill_line_shifted(&base, axis, lp, shift, &mut line)
                    .unwrap();
            }
            let mut one = vec![C64::new(0.0, 0.0); n * n];
            for s in 0..lp {
                let mut k = base;
                k[axis] = (s as f64 + shift) / lp as f64;
                b.at_point(&k, &mut one);
                for (x, y) in one.iter().zip(&line[s * n * n..(s + 1) * n * n]) {
                    assert!((x - y).norm() < 1e-13, "axis {axis} s {s}: {x} vs {y}");
                }
            }
        }
    }

    /// The folded line a thread keeps (FOLDED) carries nothing from one line to the next:
    /// lines of a 3-orbital model (harmonics 2 and 3 along one axis, 1 along another) and of
    /// the 2-orbital chain (harmonic 1), alternated on one thread, equal bit for bit what a
    /// fresh thread gives.
    #[test]
    fn kept_folded_line_carries_nothing_over() {
        let wide = random_three_orbital(7).at(&[0.3]).unwrap();
        let narrow = chain().at(&[0.4]).unwrap();
        let bits = |b: &Bloch, base: [f64; 3], axis: usize| {
            let lp = 11;
            let mut out = vec![C64::new(0.0, 0.0); lp * b.norb() * b.norb()];
            b.fill_line(&base[..b.dim()], axis, lp, &mut out).unwrap();
            out.iter()
                .flat_map(|c| [c.re.to_bits(), c.im.to_bits()])
                .collect::<Vec<u64>>()
        };
        let fresh =
            |f: &(dyn Fn() -> Vec<u64> + Sync)| std::thread::scope(|s| s.spawn(f).join().unwrap());
        let cases: [(&Bloch, [f64; 3], usize); 4] = [
            (&wide, [0.31, 0.5, 0.07], 1),
            (&narrow, [0.0; 3], 0),
            (&wide, [0.2, 0.9, 0.4], 2),
            (&narrow, [0.0; 3], 0),
        ];
        for (b, base, axis) in cases {
            assert_eq!(bits(b, base, axis), fresh(&|| bits(b, base, axis)));
        }
    }

    #[test]
    fn rejects_bad_shapes() {
        assert!(Hoppings::new(2, 2, 0, vec![0], vec![C64::new(0.0, 0.0); 4], vec![-1]).is_err());
        assert!(Hoppings::new(4, 2, 0, vec![], vec![], vec![]).is_err());
        let ok = Hoppings::new(1, 1, 1, vec![0], vec![C64::new(1.0, 0.0)], vec![0]).unwrap();
        assert!(ok.at(&[]).is_err());
        assert!(ok.at(&[f64::NAN]).is_err());
    }
}
