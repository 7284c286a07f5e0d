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

use crate::bloch::BlochSource;
use crate::eigen::{eigh_into, eigh_pair_into};
use crate::error::CoreResult;
use crate::wilson::BandStats;
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

/// Direct gaps at a batch of κ points (`kappa`: npts × dim), with their band statistics merged
/// into `stats`.
pub fn gaps_at(
    src: &dyn BlochSource,
    kappa: &[f64],
    filling: usize,
    stats: &mut BandStats,
) -> CoreResult<Vec<f64>> {
    let (dim, n) = (src.dim(), src.norb());
    let nn = n * n;
    let npts = kappa.len() / dim;
    if npts == 0 {
        return Ok(Vec::new());
    }
    let mut h = vec![C64::new(0.0, 0.0); npts * nn];
    src.fill(kappa, &mut h)?;
    // two κ points per task, solved together (eigh_pair_into); an odd last one alone
    let energies: CoreResult<Vec<[Vec<f64>; 2]>> = h
        .par_chunks(2 * nn)
        .map_init(
            // eigenvector scratch, once per rayon split
            || [vec![C64::new(0.0, 0.0); nn], vec![C64::new(0.0, 0.0); nn]],
            |[v0, v1], hk| {
                let mut e = [vec![0.0; n], vec![0.0; n]];
                let [e0, e1] = &mut e;
                if hk.len() == 2 * nn {
                    eigh_pair_into([&hk[..nn], &hk[nn..]], n, [e0, e1], [v0, v1])?;
                } else {
                    eigh_into(hk, n, e0, v0)?;
                }
                Ok(e)
            },
        )
        .collect();
    let energies: Vec<Vec<f64>> = energies?.into_iter().flatten().take(npts).collect();
    for (e, k) in energies.iter().zip(kappa.chunks_exact(dim)) {
        stats.add(e, filling, k);
    }
    Ok(energies
        .iter()
        .map(|e| e[filling] - e[filling - 1])
        .collect())
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

struct Walker {
    at: [f64; 3],
    gap: f64,
    step: f64,
    active: bool,
}

/// Minimise the direct gap from every start (gap value known at the start) and return the
/// smallest gap found. Trial points are merged into `stats` (they are genuine κ points).
pub fn minimise(
    src: &dyn BlochSource,
    filling: usize,
    starts: &[(f64, [f64; 3])],
    set: &SearchSettings,
    stats: &mut BandStats,
) -> CoreResult<GapMinimum> {
    let dim = src.dim();
    let mut walkers: Vec<Walker> = starts
        .iter()
        .map(|&(gap, at)| Walker {
            at,
            gap,
            step: set.step,
            active: gap >= set.floor,
        })
        .collect();
    let mut evaluations = 0usize;
    for _ in 0..set.max_rounds {
        let live: Vec<usize> = (0..walkers.len()).filter(|&w| walkers[w].active).collect();
        if live.is_empty() {
            break;
        }
        // stencil: ±step along every axis, for every live walker, in one batch
        let mut kappa = Vec::with_capacity(live.len() * 2 * dim * dim);
        for &w in &live {
            let wk = &walkers[w];
            for axis in 0..dim {
                for sign in [-1.0, 1.0] {
                    let mut k = wk.at;
                    k[axis] = (k[axis] + sign * wk.step).rem_euclid(1.0);
                    kappa.extend_from_slice(&k[..dim]);
                }
            }
        }
        let gaps = gaps_at(src, &kappa, filling, stats)?;
        evaluations += gaps.len();
        for (slot, &w) in live.iter().enumerate() {
            let trial = &gaps[slot * 2 * dim..(slot + 1) * 2 * dim];
            let wk = &mut walkers[w];
            let (best, &bg) = trial
                .iter()
                .enumerate()
                .min_by(|a, b| a.1.total_cmp(b.1))
                .expect("dim ≥ 1 gives a non-empty stencil");
            if bg < wk.gap {
                let k = &kappa[(slot * 2 * dim + best) * dim..(slot * 2 * dim + best + 1) * dim];
                wk.at[..dim].copy_from_slice(k);
                wk.gap = bg;
            } else {
                let spread = trial.iter().map(|g| (g - wk.gap).abs()).fold(0.0, f64::max);
                if spread <= set.rel_tol * wk.gap {
                    wk.active = false;
                }
                wk.step *= 0.5;
            }
            if wk.gap < set.floor || wk.step < set.min_step {
                wk.active = false;
            }
        }
    }
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

    /// `gaps_at` (κ points solved two at a time, an odd last one alone) against `eigh_into`
    /// per point.
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
                let (e, _) = crate::eigen::eigh(&h, 2).unwrap();
                want.add(&e, 1, k);
                assert_eq!(*g, e[1] - e[0]);
            }
            assert_eq!(gaps.len(), npts);
            assert_eq!(stats, want);
        }
    }
}
