//! The smallest direct gap of a parameter point and where it lies, without any Wilson loop:
//! what locating a transition asks of each point it probes along a segment (the indices there
//! are not used). The TRIMs and a uniform κ grid of m^dim points (offset by half a step) give
//! the starts of the gap minimiser ([`minimise`]), as the bulk grid does in a full evaluation.

use crate::error::CoreResult;
use crate::point::gap_search::{gaps_at, minimise, pick_starts, SearchSettings};
use crate::sampling::AUTO_FLOOR_REL;
use crate::topology::parity::trims;
use crate::topology::wilson::evaluate_points;
use crate::zone::bloch::BlochSource;

/// The minimiser walks on down to this share of the floor (an evaluation stops at the floor).
const PROBE_DEPTH: f64 = 1e-3;

/// What a probe finds.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GapProbe {
    /// smallest direct gap found, and where
    pub gap: f64,
    pub kappa: [f64; 3],
    /// the gap floor (`gap_floor`, or [`AUTO_FLOOR_REL`] of the bandwidth sampled)
    pub floor: f64,
    /// lowest conduction minus highest valence energy over the κ points sampled
    pub indirect: f64,
}

/// The probe of one point: `grid` κ points per axis (≥ 2), `starts` minimiser starts (≥ 1),
/// `gap_floor` as in `Sampling` (≤ 0: relative to the bandwidth).
pub fn probe_gap(
    src: &dyn BlochSource,
    filling: usize,
    grid: usize,
    starts: usize,
    gap_floor: f64,
) -> CoreResult<GapProbe> {
    let dim = src.dim();
    let trim_k: Vec<f64> = trims(dim).iter().flat_map(|k| k[..dim].to_vec()).collect();
    let (mut stats, trim_e, _) = evaluate_points(src, &trim_k, filling, false)?;
    let mut cand: Vec<(f64, [f64; 3])> = trim_e
        .iter()
        .zip(trims(dim))
        .map(|(e, k)| (e[filling] - e[filling - 1], k))
        .collect();
    let m = grid.max(2);
    let step = 1.0 / m as f64;
    let count = m.pow(dim as u32);
    let mut kappa = Vec::with_capacity(count * dim);
    for idx in 0..count {
        let mut rest = idx;
        for _ in 0..dim {
            kappa.push(((rest % m) as f64 + 0.5) * step);
            rest /= m;
        }
    }
    let gaps = gaps_at(src, &kappa, filling, &mut stats)?;
    for (g, k) in gaps.iter().zip(kappa.chunks_exact(dim)) {
        let mut at = [0.0; 3];
        at[..dim].copy_from_slice(k);
        cand.push((*g, at));
    }
    let floor = if gap_floor > 0.0 {
        gap_floor
    } else {
        (AUTO_FLOOR_REL * stats.bandwidth()).max(1e-12)
    };
    if stats.min_direct >= PROBE_DEPTH * floor {
        let starts = pick_starts(&mut cand, starts.max(1), dim);
        // (followed well under the floor: a transition's search fits lines to the gaps next
        // to a closing, and a walk stopped at the floor gave them where it happened to stop)
        let set = SearchSettings::new(0.5 * step, PROBE_DEPTH * floor);
        let found = minimise(src, filling, &starts, &set, &mut stats)?;
        if found.gap < stats.min_direct {
            stats.min_direct = found.gap;
            stats.min_direct_at = found.kappa;
        }
    }
    Ok(GapProbe {
        gap: stats.min_direct,
        kappa: stats.min_direct_at,
        floor,
        indirect: stats.bottom_empty - stats.top_occ,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::point::engine::tests::bhz as qwz;

    /// Qi–Wu–Zhang ⊕ its time-reversed partner: the direct gap is 2 min_k |d(k)| with
    /// d = (sin kx, sin ky, m + cos kx + cos ky) (Qi, Wu & Zhang, PRB 74, 085308 (2006)); at
    /// m = 1.5 it is 2 × 0.5 = 1, at (π, π) = κ (½, ½) (common practice, no source).
    #[test]
    fn finds_the_gap_minimum_and_where_it_is() {
        for (m, want, at) in [
            (1.5, 1.0, [0.5, 0.5]),
            (-1.5, 1.0, [0.0, 0.0]),
            (2.3, 0.6, [0.5, 0.5]),
        ] {
            let src = qwz().at(&[m]).unwrap();
            let p = probe_gap(&src, 2, 8, 3, 0.0).unwrap();
            assert!((p.gap - want).abs() < 1e-8, "m = {m}: {}", p.gap);
            assert!((p.kappa[0] - at[0]).abs() < 1e-4 && (p.kappa[1] - at[1]).abs() < 1e-4);
            assert!(p.indirect >= p.gap - 1e-12 || p.indirect <= p.gap);
            assert!(p.floor > 0.0);
        }
    }
}
