//! True minima of the direct gap E_filling − E_{filling−1} over κ, not just over the sampled κ.
//!
//! A Dirac point that falls between the sampled κ points leaves the smallest *sampled* gap
//! finite, so a gapless point could be reported with indices. Starting from the smallest
//! sampled gaps, a bounded compass search (a derivative-free pattern search: try ±h along
//! every reduced axis, move to the best improvement, halve h when none improves) walks down
//! to the local minimum. All starts advance in lock step so that each round is ONE batch for
//! the `BlochSource` (a Python callback then vectorises over every trial point of the round).
//!
//! A compass search suits the gap because the gap is not smooth at a band touching (a cone,
//! |κ − κ0|) and derivative-based methods stall there; on a cone the search keeps halving its
//! step towards the apex, so a closing is followed down until the gap is below the floor.

use crate::error::CoreResult;
use crate::exec::guided::map_guided;
use crate::linalg::eigen::eigh_occupied_many_into;
use crate::topology::wilson::{batch_points, BandStats};
use crate::zone::bloch::BlochSource;
use crate::C64;
use rayon::prelude::*;

/// Settings of the search.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SearchSettings {
    /// initial step in reduced coordinates (about half the spacing of the sampled κ)
    pub step: f64,
    /// stop once the step is below this
    pub min_step: f64,
    /// stop a start once no neighbour changes the gap by more than `rel_tol` × gap
    pub rel_tol: f64,
    /// a start that reaches a gap below this stops (the point is gapless anyway)
    pub floor: f64,
    /// cap on rounds (each round = one batch of 2·dim trial points per active start)
    pub max_rounds: usize,
}

impl SearchSettings {
    pub fn new(step: f64, floor: f64) -> Self {
        Self {
            step,
            min_step: 1e-10,
            rel_tol: 1e-4,
            floor,
            max_rounds: 160,
        }
    }
}

/// Outcome of the search over all starts.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GapMinimum {
    pub gap: f64,
    pub kappa: [f64; 3],
    /// number of Hamiltonians evaluated
    pub evaluations: usize,
}

/// Direct gaps at a set of κ points (`kappa`: npts × dim), with their band statistics merged
/// into `stats`. The Hamiltonians are built in batches of [`batch_points`] (a 3D bulk gap
/// grid of a model of thousands of orbitals is tens of GB at once): the values do not depend
/// on the split.
pub fn gaps_at(
    src: &dyn BlochSource,
    kappa: &[f64],
    filling: usize,
    stats: &mut BandStats,
) -> CoreResult<Vec<f64>> {
    let block = batch_points(src.norb() * src.norb(), src.dim());
    gaps_in_blocks(src, kappa, filling, stats, block)
}

/// [`gaps_at`] with batches of `block` κ points.
fn gaps_in_blocks(
    src: &dyn BlochSource,
    kappa: &[f64],
    filling: usize,
    stats: &mut BandStats,
    block: usize,
) -> CoreResult<Vec<f64>> {
    let (dim, n) = (src.dim(), src.norb());
    let nn = n * n;
    let npts = kappa.len() / dim;
    let mut h = Vec::new();
    let mut gaps = Vec::with_capacity(npts);
    for start in (0..npts).step_by(block.max(1)) {
        let end = (start + block).min(npts);
        let kappa = &kappa[start * dim..end * dim];
        h.resize((end - start) * nn, C64::new(0.0, 0.0));
        src.fill(kappa, &mut h)?;
        // four κ points per task, solved together, eigenvalues only (eigh_occupied_many_into
        // with no occupied vectors: the Kramers closed form writes none); the rest in a pair
        // and alone
        let energies: CoreResult<Vec<Vec<f64>>> = h
            .par_chunks(4 * nn)
            .map_init(
                // eigenvector scratch of the fallbacks, once per rayon split
                || vec![C64::new(0.0, 0.0); nn],
                |work, hk| {
                    let mut e = vec![0.0; hk.len() / nn * n];
                    eigh_occupied_many_into(hk, n, 0, &mut e, &mut [], work)?;
                    Ok(e)
                },
            )
            .collect();
        // (n energies per point, in the order of `kappa`)
        let energies = energies?.concat();
        for (e, k) in energies.chunks_exact(n).zip(kappa.chunks_exact(dim)) {
            stats.add(e, filling, k);
            gaps.push(e[filling] - e[filling - 1]);
        }
    }
    Ok(gaps)
}

/// Direct gaps on the uniform bulk grid κ = (j + ½)/m of a 3D model — `kappa` lists its m³
/// points in C order, the last axis fastest — with their band statistics merged into `stats`
/// in that order. A source that builds H anywhere cheaply is taken row by row along the last
/// axis ([`grid_row`], one task of a guided list per row), so there is no m³ buffer. Batch
/// sources (Python callbacks) and other κ lists take [`gaps_at`].
pub fn gaps_on_grid(
    src: &dyn BlochSource,
    kappa: &[f64],
    m: usize,
    filling: usize,
    stats: &mut BandStats,
) -> CoreResult<Vec<f64>> {
    if !grid_by_rows(src, kappa, m) {
        return gaps_at(src, kappa, filling, stats);
    }
    let rows = map_guided(
        m * m,
        || grid_row_scratch(src, m),
        |(h, work), row| grid_row(src, m, row, h, work),
    )?;
    Ok(grid_gaps(&rows, kappa, src.norb(), filling, stats))
}

/// Whether [`gaps_on_grid`] takes the grid row by row (else as one batch of κ points).
fn grid_by_rows(src: &dyn BlochSource, kappa: &[f64], m: usize) -> bool {
    !src.prefers_batches() && src.dim() == 3 && m > 0 && kappa.len() == 3 * m * m * m
}

/// Scratch of [`grid_row`] for a worker: one row of H (m × n²) and the solver's n².
pub fn grid_row_scratch(src: &dyn BlochSource, m: usize) -> (Vec<C64>, Vec<C64>) {
    let nn = src.norb() * src.norb();
    (
        vec![C64::new(0.0, 0.0); m * nn],
        vec![C64::new(0.0, 0.0); nn],
    )
}

/// Eigenvalues (m × n) of row `row` = a m + b of the bulk grid: the m points κ = ((a + ½)/m,
/// (b + ½)/m, (c + ½)/m), c = 0…m−1, built in `h` by `fill_line_shifted`.
pub fn grid_row(
    src: &dyn BlochSource,
    m: usize,
    row: usize,
    h: &mut [C64],
    work: &mut [C64],
) -> CoreResult<Vec<f64>> {
    let n = src.norb();
    let step = 1.0 / m as f64;
    let (a, b) = (row / m, row % m);
    let base = [(a as f64 + 0.5) * step, (b as f64 + 0.5) * step, 0.0];
    src.fill_line_shifted(&base, 2, m, 0.5, h)?;
    let mut e = vec![0.0; m * n];
    eigh_occupied_many_into(h, n, 0, &mut e, &mut [], work)?;
    Ok(e)
}

/// The grid's gaps from its rows' eigenvalues ([`grid_row`], in row order), the statistics of
/// every point merged into `stats` in the order of `kappa`.
pub fn grid_gaps(
    rows: &[Vec<f64>],
    kappa: &[f64],
    n: usize,
    filling: usize,
    stats: &mut BandStats,
) -> Vec<f64> {
    let mut gaps = Vec::with_capacity(kappa.len() / 3);
    for (e, k) in rows
        .iter()
        .flat_map(|row| row.chunks_exact(n))
        .zip(kappa.chunks_exact(3))
    {
        stats.add(e, filling, k);
        gaps.push(e[filling] - e[filling - 1]);
    }
    gaps
}

/// Pick up to `count` starting points, smallest gap first, skipping near-duplicates.
pub fn pick_starts(
    candidates: &mut [(f64, [f64; 3])],
    count: usize,
    dim: usize,
) -> Vec<(f64, [f64; 3])> {
    candidates.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut out: Vec<(f64, [f64; 3])> = Vec::with_capacity(count);
    for &(g, k) in candidates.iter() {
        if out.len() == count {
            break;
        }
        if !g.is_finite() {
            continue;
        }
        let same = out.iter().any(|(_, q)| {
            (0..dim).all(|i| {
                let d = (k[i] - q[i]).rem_euclid(1.0);
                d.min(1.0 - d) < 1e-9
            })
        });
        if !same {
            out.push((g, k));
        }
    }
    out
}

#[derive(Clone, Copy)]
struct Walker {
    at: [f64; 3],
    gap: f64,
    step: f64,
    active: bool,
}

impl Walker {
    fn from_starts(starts: &[(f64, [f64; 3])], set: &SearchSettings) -> Vec<Self> {
        starts
            .iter()
            .map(|&(gap, at)| Walker {
                at,
                gap,
                step: set.step,
                active: gap >= set.floor,
            })
            .collect()
    }

    /// The walker's stencil: ±step along every axis, 2·dim κ points of `dim` coordinates.
    fn stencil(&self, dim: usize, kappa: &mut Vec<f64>) {
        for axis in 0..dim {
            for sign in [-1.0, 1.0] {
                let mut k = self.at;
                k[axis] = (k[axis] + sign * self.step).rem_euclid(1.0);
                kappa.extend_from_slice(&k[..dim]);
            }
        }
    }

    /// One step of the compass search from the gaps at the stencil (`kappa`, 2·dim points):
    /// move to the best improvement, else halve the step (and stop once the gap no longer
    /// changes, is below the floor, or the step is below its minimum).
    fn advance(&mut self, trial: &[f64], kappa: &[f64], set: &SearchSettings, dim: usize) {
        let (best, &bg) = trial
            .iter()
            .enumerate()
            .min_by(|a, b| a.1.total_cmp(b.1))
            .expect("dim ≥ 1 gives a non-empty stencil");
        if bg < self.gap {
            self.at[..dim].copy_from_slice(&kappa[best * dim..(best + 1) * dim]);
            self.gap = bg;
        } else {
            let spread = trial
                .iter()
                .map(|g| (g - self.gap).abs())
                .fold(0.0, f64::max);
            if spread <= set.rel_tol * self.gap {
                self.active = false;
            }
            self.step *= 0.5;
        }
        if self.gap < set.floor || self.step < set.min_step {
            self.active = false;
        }
    }
}

/// Minimise the direct gap from every start (gap value known at the start) and return the
/// smallest gap found. Trial points are merged into `stats` (they are genuine κ points).
///
/// A source that wants batches gets every walker's stencil of a round in one batch
/// ([`lock_step`]); one that builds H cheaply anywhere has each walker walk on its own task
/// ([`apart`]). Both merge the trial points into `stats` in the same order, so the result is
/// the same on any number of workers.
pub fn minimise(
    src: &dyn BlochSource,
    filling: usize,
    starts: &[(f64, [f64; 3])],
    set: &SearchSettings,
    stats: &mut BandStats,
) -> CoreResult<GapMinimum> {
    let mut walkers = Walker::from_starts(starts, set);
    let evaluations = if src.prefers_batches() {
        lock_step(src, filling, &mut walkers, set, stats)?
    } else {
        apart(src, filling, &mut walkers, set, stats)?
    };
    let best = walkers
        .iter()
        .min_by(|a, b| a.gap.total_cmp(&b.gap))
        .map(|w| (w.gap, w.at))
        .unwrap_or((f64::INFINITY, [0.0; 3]));
    Ok(GapMinimum {
        gap: best.0,
        kappa: best.1,
        evaluations,
    })
}

/// All walkers advance together: each round is one batch of every live walker's stencil (a
/// Python callback then vectorises over the whole round). Returns the Hamiltonians evaluated.
fn lock_step(
    src: &dyn BlochSource,
    filling: usize,
    walkers: &mut [Walker],
    set: &SearchSettings,
    stats: &mut BandStats,
) -> CoreResult<usize> {
    let dim = src.dim();
    let mut evaluations = 0usize;
    for _ in 0..set.max_rounds {
        let live: Vec<usize> = (0..walkers.len()).filter(|&w| walkers[w].active).collect();
        if live.is_empty() {
            break;
        }
        let mut kappa = Vec::with_capacity(live.len() * 2 * dim * dim);
        for &w in &live {
            walkers[w].stencil(dim, &mut kappa);
        }
        let gaps = gaps_at(src, &kappa, filling, stats)?;
        evaluations += gaps.len();
        for (slot, &w) in live.iter().enumerate() {
            let span = slot * 2 * dim..(slot + 1) * 2 * dim;
            let k = &kappa[span.start * dim..span.end * dim];
            walkers[w].advance(&gaps[span], k, set, dim);
        }
    }
    Ok(evaluations)
}

/// Each walker walks all its rounds on a task of its own (a guided list over the walkers), on
/// the task's thread: a round is 2·dim small eigenproblems, a few µs, too little to share
/// between workers — handed to the pool round by round, as [`lock_step`] does, the search ran
/// slower on two workers than on one, and the other worker idled meanwhile. The trial points
/// are merged afterwards round by round, walkers in order: the order of [`lock_step`].
fn apart(
    src: &dyn BlochSource,
    filling: usize,
    walkers: &mut [Walker],
    set: &SearchSettings,
    stats: &mut BandStats,
) -> CoreResult<usize> {
    let (dim, n) = (src.dim(), src.norb());
    let nn = n * n;
    let stencil = 2 * dim;
    // per walker: where it ended, and each round's stencil κ and eigenvalues
    let walks = map_guided(
        walkers.len(),
        || {
            (
                vec![C64::new(0.0, 0.0); stencil * nn],
                vec![C64::new(0.0, 0.0); nn],
            )
        },
        |(h, work), w| {
            let mut wk = walkers[w];
            let mut rounds: Vec<(Vec<f64>, Vec<f64>)> = Vec::new();
            while wk.active && rounds.len() < set.max_rounds {
                let mut kappa = Vec::with_capacity(stencil * dim);
                wk.stencil(dim, &mut kappa);
                src.fill(&kappa, h)?;
                let mut e = vec![0.0; stencil * n];
                eigh_occupied_many_into(h, n, 0, &mut e, &mut [], work)?;
                let gaps: Vec<f64> = e
                    .chunks_exact(n)
                    .map(|e| e[filling] - e[filling - 1])
                    .collect();
                wk.advance(&gaps, &kappa, set, dim);
                rounds.push((kappa, e));
            }
            Ok((wk, rounds))
        },
    )?;
    let mut evaluations = 0usize;
    let longest = walks.iter().map(|(_, r)| r.len()).max().unwrap_or(0);
    for round in 0..longest {
        for (kappa, e) in walks.iter().filter_map(|(_, r)| r.get(round)) {
            for (e, k) in e.chunks_exact(n).zip(kappa.chunks_exact(dim)) {
                stats.add(e, filling, k);
            }
            evaluations += stencil;
        }
    }
    for (wk, (end, _)) in walkers.iter_mut().zip(&walks) {
        *wk = *end;
    }
    Ok(evaluations)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::CoreError;

    /// Two-band h(κ) = (cos 2πκx − cos 2πa) σx + (cos 2πκy − cos 2πb) σz + m σy: the gap
    /// 2|h| closes (m = 0) or is smallest (= 2|m|) exactly at (±a, ±b).
    struct Cone {
        a: f64,
        b: f64,
        m: f64,
    }

    impl BlochSource for Cone {
        fn dim(&self) -> usize {
            2
        }
        fn norb(&self) -> usize {
            2
        }
        fn fill(&self, kappa: &[f64], out: &mut [C64]) -> CoreResult<()> {
            if out.len() < kappa.len() * 2 {
                return Err(CoreError::Internal("buffer".into()));
            }
            let tau = std::f64::consts::TAU;
            for (k, o) in kappa.chunks_exact(2).zip(out.chunks_exact_mut(4)) {
                let x = (tau * k[0]).cos() - (tau * self.a).cos();
                let z = (tau * k[1]).cos() - (tau * self.b).cos();
                o[0] = C64::new(z, 0.0);
                o[3] = C64::new(-z, 0.0);
                o[1] = C64::new(x, -self.m);
                o[2] = C64::new(x, self.m);
            }
            Ok(())
        }
    }

    fn search(src: &Cone, start: [f64; 3], floor: f64) -> GapMinimum {
        let mut stats = BandStats::default();
        let k = [start[0], start[1]];
        let g0 = gaps_at(src, &k, 1, &mut stats).unwrap()[0];
        minimise(
            src,
            1,
            &[(g0, start)],
            &SearchSettings::new(1.0 / 64.0, floor),
            &mut stats,
        )
        .unwrap()
    }

    #[test]
    fn finds_a_closing_between_grid_points() {
        let src = Cone {
            a: 0.5f64.sqrt() * 0.4,
            b: 1.0 / std::f64::consts::PI,
            m: 0.0,
        };
        // start at the nearest point of a 32 × 40 grid
        let start = [
            (src.a * 32.0).round() / 32.0,
            (src.b * 40.0).round() / 40.0,
            0.0,
        ];
        let r = search(&src, start, 1e-6);
        assert!(r.gap < 1e-6, "gap {} at {:?}", r.gap, r.kappa);
        assert!((r.kappa[0] - src.a).abs() < 1e-5 && (r.kappa[1] - src.b).abs() < 1e-5);
    }

    #[test]
    fn finds_a_small_gap_to_high_accuracy() {
        let src = Cone {
            a: 0.31,
            b: 0.17,
            m: 0.01,
        };
        let r = search(&src, [0.3, 0.2, 0.0], 1e-9);
        assert!((r.gap - 0.02).abs() < 1e-5, "gap {}", r.gap);
        assert!(r.evaluations < 400, "{} evaluations", r.evaluations);
    }

    #[test]
    fn starts_skip_duplicates() {
        let mut c = vec![
            (0.3, [0.0; 3]),
            (0.1, [0.5, 0.0, 0.0]),
            (0.2, [1.0, 0.0, 0.0]),
            (0.4, [0.2; 3]),
        ];
        let s = pick_starts(&mut c, 3, 2);
        assert_eq!(s.len(), 3);
        assert_eq!(s[0].0, 0.1);
        assert_eq!(s[1].0, 0.2); // κ = (1, 0) ≡ (0, 0): the 0.3 entry is a duplicate
        assert_eq!(s[2].0, 0.4);
    }

    /// `gaps_at` (κ points solved four at a time in lanes, three left over too, the rest in a
    /// pair or alone) against `eigh_into` per point: gaps and band statistics to 1e-13 (the
    /// lanes do the same rounding steps in another order: a few ε of these O(1) energies),
    /// the κ of the smallest gap exactly.
    #[test]
    fn gaps_at_matches_single_points() {
        let src = Cone {
            a: 0.31,
            b: 0.17,
            m: 0.05,
        };
        for npts in [1usize, 2, 5] {
            let kappa: Vec<f64> = (0..npts).flat_map(|s| [0.13 * s as f64, 0.4]).collect();
            let mut stats = BandStats::default();
            let gaps = gaps_at(&src, &kappa, 1, &mut stats).unwrap();
            let mut want = BandStats::default();
            for (g, k) in gaps.iter().zip(kappa.chunks_exact(2)) {
                let mut h = vec![C64::new(0.0, 0.0); 4];
                src.fill(k, &mut h).unwrap();
                let (e, _) = crate::linalg::eigen::eigh(&h, 2).unwrap();
                want.add(&e, 1, k);
                assert!(
                    (*g - (e[1] - e[0])).abs() <= 1e-13,
                    "{g} vs {}",
                    e[1] - e[0]
                );
            }
            assert_eq!(gaps.len(), npts);
            stats.assert_close(&want, 1e-13, "grid by lines against batch");
        }
    }

    /// A set of κ points taken in batches gives the values of one batch, bit for bit, and the
    /// source never gets more than a batch at once (a huge model's bulk grid: issue 20).
    #[test]
    fn gaps_in_batches_match_one_batch() {
        struct Counted<'a>(&'a dyn BlochSource, std::sync::Mutex<Vec<usize>>);
        impl BlochSource for Counted<'_> {
            fn dim(&self) -> usize {
                self.0.dim()
            }
            fn norb(&self) -> usize {
                self.0.norb()
            }
            fn fill(&self, kappa: &[f64], out: &mut [C64]) -> CoreResult<()> {
                self.1.lock().unwrap().push(kappa.len() / self.dim());
                self.0.fill(kappa, out)
            }
        }
        let (generic, _) = generic_and_kramers();
        let m = 5;
        let kappa: Vec<f64> = (0..m * m * m)
            .flat_map(|i| {
                [
                    (i / 25) as f64 / 5.0,
                    (i / 5 % 5) as f64 / 5.0 + 0.03,
                    0.1 * (i % 5) as f64,
                ]
            })
            .collect();
        let mut one_stats = BandStats::default();
        let one = gaps_in_blocks(&generic, &kappa, 2, &mut one_stats, 1 << 20).unwrap();
        for block in [4, 8, 12] {
            let counted = Counted(&generic, Default::default());
            let mut stats = BandStats::default();
            let split = gaps_in_blocks(&counted, &kappa, 2, &mut stats, block).unwrap();
            assert_eq!(format!("{split:?}"), format!("{one:?}"), "block {block}");
            assert_eq!(
                format!("{stats:?}"),
                format!("{one_stats:?}"),
                "block {block}"
            );
            let sizes = counted.1.into_inner().unwrap();
            assert_eq!(sizes.iter().sum::<usize>(), m * m * m);
            assert!(sizes.iter().all(|&b| b <= block), "{sizes:?}");
        }
    }

    #[test]
    fn batches_fit_the_budget_but_hold_at_least_the_trims() {
        for dim in 1..=3 {
            // 4 bands: the whole default bulk grid (512 points) in one batch
            assert!(batch_points(16, dim) >= 512);
            // 2000 orbitals: 64 MB a matrix, more than the budget alone: 2^dim, rounded to 4
            assert_eq!(batch_points(2000 * 2000, dim), (1usize << dim).max(4));
            for n in [64usize, 200, 1000] {
                let b = batch_points(n * n, dim);
                assert_eq!(b % 4, 0);
                assert!(b >= 1 << dim);
                assert!(b * n * n * 16 <= (32 << 20) || b <= 8, "{n}: {b}");
            }
        }
    }

    /// Two 4-band 3D models: a generic Hermitian H(κ) (random nearest-neighbour hoppings) and
    /// the Wilson–Dirac model at m = −2 (two Kramers-degenerate levels: the closed form).
    fn generic_and_kramers() -> (crate::zone::bloch::Bloch, crate::zone::bloch::Bloch) {
        use crate::zone::bloch::Hoppings;
        let mut rng = crate::test_rng::TestRng::new(7u64);
        let mut next = || rng.uniform();
        let n = 4;
        // R = 0 Hermitian, R = ±x, ±y, ±z as pairs (T, T†): a generic Hermitian H(κ)
        let r: Vec<i64> = vec![
            0, 0, 0, 1, 0, 0, -1, 0, 0, 0, 1, 0, 0, -1, 0, 0, 0, 1, 0, 0, -1,
        ];
        let mut t = vec![C64::new(0.0, 0.0); 7 * n * n];
        for i in 0..n {
            for j in 0..n {
                let z = C64::new(next(), if i == j { 0.0 } else { next() });
                t[i * n + j] += z;
                t[j * n + i] += z.conj();
            }
        }
        for pair in 0..3 {
            let (a, b) = (1 + 2 * pair, 2 + 2 * pair);
            for x in 0..n * n {
                let z = C64::new(next(), next());
                t[a * n * n + x] = z;
                let (i, j) = (x / n, x % n);
                t[b * n * n + j * n + i] = z.conj();
            }
        }
        let generic = Hoppings::new(3, n, 0, r.clone(), t, vec![-1; 7])
            .unwrap()
            .at(&[])
            .unwrap();
        // Wilson–Dirac, H = (m + Σ cos 2πκ_i) Γ4 + Σ sin 2πκ_i Γ_i: two Kramers-degenerate
        // levels everywhere (the closed form)
        let g = crate::linalg::eigen::tests::dirac_gammas();
        let mut t = vec![C64::new(0.0, 0.0); 7 * n * n];
        for x in 0..n * n {
            t[x] = g[4][x] * -2.0;
            for i in 0..3 {
                let half = C64::new(0.0, 0.5) * g[i][x];
                t[(1 + 2 * i) * n * n + x] = g[4][x] * 0.5 - half;
                t[(2 + 2 * i) * n * n + x] = g[4][x] * 0.5 + half;
            }
        }
        let kramers = Hoppings::new(3, n, 0, r, t, vec![-1; 7])
            .unwrap()
            .at(&[])
            .unwrap();
        (generic, kramers)
    }

    /// The bulk grid taken line by line (shifted line fills, eigenvalues only, four at a
    /// time) gives the gaps and band statistics of the plain batch over the same κ list, for a
    /// generic 4-band and a Kramers-degenerate (closed-form) 3D model, m even and odd.
    #[test]
    fn grid_by_lines_matches_batch() {
        let (generic, kramers) = generic_and_kramers();
        for src in [&generic as &dyn BlochSource, &kramers] {
            for m in [4usize, 5] {
                let step = 1.0 / m as f64;
                let kappa: Vec<f64> = (0..m * m * m)
                    .flat_map(|i| {
                        [i / (m * m), (i / m) % m, i % m].map(|x| (x as f64 + 0.5) * step)
                    })
                    .collect();
                let (mut sa, mut sb) = (BandStats::default(), BandStats::default());
                let by_lines = gaps_on_grid(src, &kappa, m, 2, &mut sa).unwrap();
                let batch = gaps_at(src, &kappa, 2, &mut sb).unwrap();
                assert_eq!(by_lines.len(), m * m * m);
                for (x, y) in by_lines.iter().zip(&batch) {
                    assert!((x - y).abs() < 1e-12, "m = {m}: {x} vs {y}");
                }
                assert!((sa.min_direct - sb.min_direct).abs() < 1e-12);
                assert!((sa.bandwidth() - sb.bandwidth()).abs() < 1e-12);
                assert!((sa.indirect() - sb.indirect()).abs() < 1e-12);
            }
        }
    }

    /// Walkers on tasks of their own end where the walkers in lock step end, after as many
    /// Hamiltonians, with the same band statistics, on one worker and on two.
    #[test]
    fn walkers_apart_match_lock_step() {
        let (generic, kramers) = generic_and_kramers();
        for src in [&generic as &dyn BlochSource, &kramers] {
            let kappa = [0.1, 0.2, 0.3, 0.45, 0.05, 0.7, 0.9, 0.6, 0.35];
            let gaps = gaps_at(src, &kappa, 2, &mut BandStats::default()).unwrap();
            let starts: Vec<(f64, [f64; 3])> = gaps
                .iter()
                .zip(kappa.chunks_exact(3))
                .map(|(&g, k)| (g, [k[0], k[1], k[2]]))
                .collect();
            let set = SearchSettings::new(0.03, 1e-9);
            let run = |walk: bool, workers: usize| {
                crate::exec::guided::tests::pool(workers).install(|| {
                    let mut walkers = Walker::from_starts(&starts, &set);
                    let mut stats = BandStats::default();
                    let evaluations = if walk {
                        apart(src, 2, &mut walkers, &set, &mut stats)
                    } else {
                        lock_step(src, 2, &mut walkers, &set, &mut stats)
                    }
                    .unwrap();
                    let ends: Vec<_> = walkers.iter().map(|w| (w.gap, w.at, w.step)).collect();
                    (evaluations, ends, stats)
                })
            };
            let want = run(false, 1);
            assert!(want.0 > 6 * starts.len(), "the walkers moved: {}", want.0);
            for workers in [1, 2] {
                assert_eq!(run(true, workers), want, "{workers} workers");
            }
        }
    }
}
