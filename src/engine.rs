//! One parameter point, start to finish: TRIMs and a bulk grid for gaps and parity, the
//! Wilson-loop lines of every time-reversal-invariant plane with adaptive insertion of pump
//! lines, the Z2 of each plane, the indices, and the reason for any undefined result.
//!
//! Planes (3D): κ_i = c for i = 0, 1, 2 and c ∈ {0, 1/2}; loops run along axis (i+1) mod 3 and
//! the pump coordinate κ_{(i+2) mod 3} goes from 0 to 1/2. In 2D the single plane loops along
//! κ_1 and pumps κ_2. ν0 = z(i,0) + z(i,1/2) mod 2 for each i (three estimates that must agree)
//! and ν_i = z(i, 1/2).

use crate::bloch::BlochSource;
use crate::error::{invalid, CoreResult};
use crate::flow::{inspect, z2_of_flow};
use crate::gap_search::{gaps_at, minimise, pick_starts, SearchSettings};
use crate::parity::{parity_indices, reason, trims, ParityResult};
use crate::wilson::{evaluate_lines, evaluate_points, BandStats, LineResult, LineSpec};
use crate::C64;

/// Relative gap floor (× bandwidth) used when the caller gives none.
pub const AUTO_FLOOR_REL: f64 = 1e-6;
/// Pump intervals narrower than this are never split further.
const MIN_INTERVAL: f64 = 1e-7;

#[derive(Clone, Debug, PartialEq)]
pub struct Sampling {
    pub loop_points: usize,
    pub lines: usize,
    pub max_lines: usize,
    pub step_limit: f64,
    /// absolute gap floor; ≤ 0 selects `AUTO_FLOOR_REL` × bandwidth
    pub gap_floor: f64,
    /// points per axis of the uniform bulk grid used only for the gap (3D); 0 = none
    pub gap_points: usize,
    /// starting points of the gap minimiser (smallest sampled gaps first); 0 = no search
    pub gap_starts: usize,
}

impl Sampling {
    pub fn validate(&self) -> CoreResult<()> {
        if self.loop_points < 4 {
            return Err(invalid!(
                "loop_points must be at least 4, got {}",
                self.loop_points
            ));
        }
        if self.lines < 2 {
            return Err(invalid!("lines must be at least 2, got {}", self.lines));
        }
        if self.max_lines < self.lines {
            return Err(invalid!(
                "max_lines ({}) must be at least lines ({})",
                self.max_lines,
                self.lines
            ));
        }
        if !(self.step_limit > 0.0 && self.step_limit < 0.5) {
            return Err(invalid!(
                "step_limit must lie in (0, 0.5), got {}",
                self.step_limit
            ));
        }
        if !self.gap_floor.is_finite() {
            return Err(invalid!("gap_floor must be finite"));
        }
        Ok(())
    }
}

#[derive(Clone, Debug, PartialEq)]
pub struct PlaneResult {
    pub z2: i8,
    pub converged: bool,
    pub lines_used: usize,
    pub max_step: f64,
    pub min_clearance: f64,
    /// pump coordinates and centres of every line (kept for flow plots)
    pub pump: Vec<f64>,
    pub centres: Vec<Vec<f64>>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct PointResult {
    pub nu0: i8,
    pub nu: [i8; 3],
    pub z2_plane: [[i8; 2]; 3],
    pub nu0_by_axis: [i8; 3],
    pub gap_direct: f64,
    pub gap_indirect: f64,
    pub gap_kappa: [f64; 3],
    pub bandwidth: f64,
    pub gap_floor: f64,
    pub converged: bool,
    pub reason: u8,
    pub lines_used: usize,
    /// Hamiltonians evaluated by the gap minimiser
    pub search_evaluations: usize,
    pub max_step: f64,
    pub min_clearance: f64,
    pub parity: Option<ParityResult>,
}

/// A time-reversal-invariant plane: base point, loop axis and pump axis.
#[derive(Clone, Copy, Debug)]
pub struct Plane {
    pub base: [f64; 3],
    pub loop_axis: usize,
    pub pump_axis: usize,
}

impl Plane {
    pub fn line(&self, t: f64) -> LineSpec {
        let mut base = self.base;
        base[self.pump_axis] = t;
        LineSpec {
            base,
            axis: self.loop_axis,
        }
    }
}

/// The planes of a `dim`-dimensional model, in the order (axis 0, cut 0), (axis 0, cut 1/2), …
pub fn planes(dim: usize) -> Vec<Plane> {
    match dim {
        2 => vec![Plane {
            base: [0.0; 3],
            loop_axis: 0,
            pump_axis: 1,
        }],
        _ => (0..3)
            .flat_map(|i| {
                [0.0, 0.5].map(|c| {
                    let mut base = [0.0; 3];
                    base[i] = c;
                    Plane {
                        base,
                        loop_axis: (i + 1) % 3,
                        pump_axis: (i + 2) % 3,
                    }
                })
            })
            .collect(),
    }
}

/// Largest spacing between neighbouring sampled κ points (loop, pump or bulk grid), which
/// bounds how far the true gap minimum can lie from the smallest sampled gap.
fn sampled_spacing(dim: usize, s: &Sampling) -> f64 {
    let mut h = (1.0 / s.loop_points as f64).max(0.5 / (s.lines - 1) as f64);
    if dim == 3 && s.gap_points > 0 {
        h = h.max(1.0 / s.gap_points as f64);
    }
    h
}

/// Uniform bulk grid of m³ points (m per axis), offset by half a step so it avoids the planes
/// that the Wilson loops already sample.
fn bulk_grid(dim: usize, m: usize) -> Vec<f64> {
    if dim != 3 || m == 0 {
        return Vec::new();
    }
    let step = 1.0 / m as f64;
    let mut k = Vec::with_capacity(3 * m * m * m);
    for a in 0..m {
        for b in 0..m {
            for c in 0..m {
                k.extend([a, b, c].map(|x| (x as f64 + 0.5) * step));
            }
        }
    }
    k
}

/// The pump lines of one plane computed so far, in ascending pump coordinate.
#[derive(Clone, Debug, Default)]
struct PlaneLines {
    pump: Vec<f64>,
    lines: Vec<LineResult>,
}

/// The initial, evenly spaced pump lines of several planes, as one batch for the source.
fn initial_lines(
    src: &dyn BlochSource,
    planes: &[Plane],
    filling: usize,
    s: &Sampling,
    loop_points: usize,
) -> CoreResult<Vec<PlaneLines>> {
    let t0: Vec<f64> = (0..s.lines)
        .map(|m| 0.5 * m as f64 / (s.lines - 1) as f64)
        .collect();
    let specs: Vec<LineSpec> = planes
        .iter()
        .flat_map(|p| t0.iter().map(move |&t| p.line(t)))
        .collect();
    let mut res = evaluate_lines(src, &specs, loop_points, filling, None)?.into_iter();
    Ok(planes
        .iter()
        .map(|_| PlaneLines {
            pump: t0.clone(),
            lines: res.by_ref().take(s.lines).collect(),
        })
        .collect())
}

/// Adaptive insertion of pump lines (all planes in one batch per round) until every
/// neighbouring pair passes the refinement test or `max_lines` is reached.
fn refine_lines(
    src: &dyn BlochSource,
    planes: &[Plane],
    all: &mut [PlaneLines],
    filling: usize,
    s: &Sampling,
    loop_points: usize,
) -> CoreResult<()> {
    loop {
        let mut wanted: Vec<(usize, f64)> = Vec::new();
        for (p, pl) in all.iter().enumerate() {
            let (ts, ls) = (&pl.pump, &pl.lines);
            let budget = s.max_lines.saturating_sub(ts.len());
            let mut new: Vec<(f64, f64)> = (0..ts.len() - 1)
                .filter(|&m| ts[m + 1] - ts[m] > MIN_INTERVAL)
                .filter_map(|m| {
                    let iv = inspect(&ls[m].centres, &ls[m + 1].centres, s.step_limit);
                    iv.refine.then_some((iv.step, 0.5 * (ts[m] + ts[m + 1])))
                })
                .collect();
            // largest motion first when the budget cannot take them all
            new.sort_by(|a, b| b.0.total_cmp(&a.0));
            wanted.extend(new.into_iter().take(budget).map(|(_, t)| (p, t)));
        }
        if wanted.is_empty() {
            return Ok(());
        }
        let specs: Vec<LineSpec> = wanted.iter().map(|&(p, t)| planes[p].line(t)).collect();
        let got = evaluate_lines(src, &specs, loop_points, filling, None)?;
        for ((p, t), r) in wanted.into_iter().zip(got) {
            let at = all[p].pump.partition_point(|&x| x < t);
            all[p].pump.insert(at, t);
            all[p].lines.insert(at, r);
        }
    }
}

/// Z2 and flow diagnostics of each plane from its lines.
fn summarise(all: Vec<PlaneLines>, s: &Sampling) -> Vec<PlaneResult> {
    all.into_iter()
        .map(
            |PlaneLines {
                 pump: ts,
                 lines: ls,
             }| {
                let mut converged = true;
                let (mut max_step, mut min_clear) = (0.0f64, f64::INFINITY);
                for m in 0..ls.len() - 1 {
                    let iv = inspect(&ls[m].centres, &ls[m + 1].centres, s.step_limit);
                    converged &= !iv.refine;
                    max_step = max_step.max(iv.step);
                    min_clear = min_clear.min(iv.clearance);
                }
                let centres: Vec<Vec<f64>> = ls.into_iter().map(|l| l.centres).collect();
                let refs: Vec<&[f64]> = centres.iter().map(|c| c.as_slice()).collect();
                let z2 = if converged {
                    z2_of_flow(&refs) as i8
                } else {
                    -1
                };
                PlaneResult {
                    z2,
                    converged,
                    lines_used: ts.len(),
                    max_step,
                    min_clearance: min_clear,
                    pump: ts,
                    centres,
                }
            },
        )
        .collect()
}

/// Band statistics of every line, and each line's own smallest gap (gap-search candidates).
fn line_stats(all: &[PlaneLines], stats: &mut BandStats, cand: &mut Vec<(f64, [f64; 3])>) {
    for l in all.iter().flat_map(|p| &p.lines) {
        stats.merge(&l.stats);
        cand.push((l.stats.min_direct, l.stats.min_direct_at));
    }
}

/// Evaluate one parameter point. `inversion` (n×n, P² = 1) enables the parity indices.
pub fn evaluate_point(
    src: &dyn BlochSource,
    filling: usize,
    inversion: Option<&[C64]>,
    s: &Sampling,
) -> CoreResult<PointResult> {
    s.validate()?;
    let (dim, n) = (src.dim(), src.norb());
    if !(2..=3).contains(&dim) {
        return Err(invalid!(
            "Z2 indices need a 2D or 3D model, got dim = {dim}"
        ));
    }
    if filling == 0 || filling >= n {
        return Err(invalid!("filling must lie in 1…{}, got {filling}", n - 1));
    }
    // TRIMs first (gaps, parity), then a uniform bulk grid (3D) and the initial pump lines;
    // every sampled κ point is a candidate start for the gap search.
    let trim_k: Vec<f64> = trims(dim).iter().flat_map(|k| k[..dim].to_vec()).collect();
    let (trim_stats, trim_e, trim_v) = evaluate_points(src, &trim_k, filling, true)?;
    let mut stats = trim_stats;
    let trim_gap: Vec<f64> = trim_e.iter().map(|e| e[filling] - e[filling - 1]).collect();
    let mut cand: Vec<(f64, [f64; 3])> = trims(dim)
        .into_iter()
        .zip(&trim_gap)
        .map(|(k, &g)| (g, k))
        .collect();
    let bulk_k = bulk_grid(dim, s.gap_points);
    let bulk_gap = gaps_at(src, &bulk_k, filling, &mut stats)?;
    for (g, k) in bulk_gap.iter().zip(bulk_k.chunks_exact(dim)) {
        let mut at = [0.0; 3];
        at[..dim].copy_from_slice(k);
        cand.push((*g, at));
    }
    let pl = planes(dim);
    let mut lines = initial_lines(src, &pl, filling, s, s.loop_points)?;
    line_stats(&lines, &mut stats, &mut cand);
    let floor_of = |st: &BandStats| {
        if s.gap_floor > 0.0 {
            s.gap_floor
        } else {
            (AUTO_FLOOR_REL * st.bandwidth()).max(1e-12)
        }
    };
    // True gap minimum: follow the smallest sampled gaps down to the model's local minima.
    let mut search_evaluations = 0;
    if s.gap_starts > 0 && stats.min_direct >= floor_of(&stats) {
        let starts = pick_starts(&mut cand, s.gap_starts, dim);
        let set = SearchSettings::new(0.5 * sampled_spacing(dim, s), floor_of(&stats));
        let found = minimise(src, filling, &starts, &set, &mut stats)?;
        search_evaluations = found.evaluations;
        if found.gap < stats.min_direct {
            stats.min_direct = found.gap;
            stats.min_direct_at = found.kappa;
        }
    }
    // Adaptive pump lines only where the point is gapped: near a closing they would be spent
    // resolving a flow that has no Z2 anyway.
    if stats.min_direct >= floor_of(&stats) {
        refine_lines(src, &pl, &mut lines, filling, s, s.loop_points)?;
        let mut none = Vec::new();
        line_stats(&lines, &mut stats, &mut none);
    }
    let plane_res = summarise(lines, s);
    let floor = floor_of(&stats);

    let parity = match inversion {
        Some(p) => Some(parity_indices(
            &trim_v, &trim_gap, p, n, filling, dim, floor,
        )?),
        None => None,
    };

    let mut z2_plane = [[-1i8; 2]; 3];
    let mut nu0_by_axis = [-1i8; 3];
    let mut nu = [-1i8; 3];
    let mut nu0;
    let converged = plane_res.iter().all(|p| p.converged);
    if dim == 3 {
        for i in 0..3 {
            z2_plane[i] = [plane_res[2 * i].z2, plane_res[2 * i + 1].z2];
            if z2_plane[i][0] >= 0 && z2_plane[i][1] >= 0 {
                nu0_by_axis[i] = (z2_plane[i][0] + z2_plane[i][1]) % 2;
                nu[i] = z2_plane[i][1];
            }
        }
        nu0 = nu0_by_axis[0];
    } else {
        nu0 = plane_res[0].z2;
    }
    let why = if trim_gap.iter().any(|&g| g < floor) {
        reason::DEGENERATE_AT_TRIM
    } else if stats.min_direct < floor {
        reason::GAPLESS
    } else if !converged {
        reason::NOT_CONVERGED
    } else if dim == 3 && !(nu0_by_axis[0] == nu0_by_axis[1] && nu0_by_axis[1] == nu0_by_axis[2]) {
        reason::NU0_ESTIMATES_DISAGREE
    } else {
        reason::DEFINED
    };
    if why != reason::DEFINED {
        nu0 = -1;
        nu = [-1; 3];
    }
    Ok(PointResult {
        nu0,
        nu,
        z2_plane,
        nu0_by_axis,
        gap_direct: stats.min_direct,
        gap_indirect: stats.indirect(),
        gap_kappa: stats.min_direct_at,
        bandwidth: stats.bandwidth(),
        gap_floor: floor,
        converged,
        reason: why,
        lines_used: plane_res.iter().map(|p| p.lines_used).max().unwrap_or(0),
        search_evaluations,
        max_step: plane_res.iter().map(|p| p.max_step).fold(0.0, f64::max),
        min_clearance: plane_res
            .iter()
            .map(|p| p.min_clearance)
            .fold(f64::INFINITY, f64::min),
        parity,
    })
}

/// Hybrid Wannier centre flow of one plane with fixed pump lines (no insertion), for plots.
/// `cut` picks the plane of 3D models (axis, value); `positions` (dim × norb, axis-major)
/// reports centres in the tight-binding convention.
pub fn plane_flow(
    src: &dyn BlochSource,
    filling: usize,
    plane: Plane,
    loop_points: usize,
    pump: &[f64],
    positions: Option<&[f64]>,
) -> CoreResult<Vec<LineResult>> {
    let specs: Vec<LineSpec> = pump.iter().map(|&t| plane.line(t)).collect();
    evaluate_lines(src, &specs, loop_points, filling, positions)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::bloch::Hoppings;

    fn c(re: f64, im: f64) -> C64 {
        C64::new(re, im)
    }

    /// Qi–Wu–Zhang h(k) = sin kx σx + sin ky σy + (m + cos kx + cos ky) σz and its time-reversed
    /// partner h*(−k) as a 4-band block-diagonal model (Bernevig, Hughes & Zhang, Science 314,
    /// 1757 (2006)); Z2 = 1 for 0 < |m| < 2, 0 for |m| > 2 (Qi, Wu & Zhang, PRB 74, 085308 (2006)).
    fn bhz() -> Hoppings {
        let z = c(0.0, 0.0);
        let block = |up: [C64; 4], dn: [C64; 4]| -> Vec<C64> {
            vec![
                up[0], up[1], z, z, up[2], up[3], z, z, z, z, dn[0], dn[1], z, z, dn[2], dn[3],
            ]
        };
        // hop along x: (σz − iσx)/2 for h; for h*(−k): (σz + iσx)/2
        let tx = block(
            [c(0.5, 0.0), c(0.0, -0.5), c(0.0, -0.5), c(-0.5, 0.0)],
            [c(0.5, 0.0), c(0.0, 0.5), c(0.0, 0.5), c(-0.5, 0.0)],
        );
        // hop along y: (σz − iσy)/2 for h; sin ky σy is even under the map so the same for h*(−k)
        let ty = block(
            [c(0.5, 0.0), c(-0.5, 0.0), c(0.5, 0.0), c(-0.5, 0.0)],
            [c(0.5, 0.0), c(-0.5, 0.0), c(0.5, 0.0), c(-0.5, 0.0)],
        );
        let sz = block(
            [c(1.0, 0.0), z, z, c(-1.0, 0.0)],
            [c(1.0, 0.0), z, z, c(-1.0, 0.0)],
        );
        let mut t = sz;
        t.extend(tx);
        t.extend(ty);
        Hoppings::new(2, 4, 1, vec![0, 0, 1, 0, 0, 1], t, vec![0, -1, -1]).unwrap()
    }

    fn sampling() -> Sampling {
        Sampling {
            loop_points: 24,
            lines: 11,
            max_lines: 200,
            step_limit: 0.1,
            gap_floor: 0.0,
            gap_points: 0,
            gap_starts: 3,
        }
    }

    #[test]
    fn bhz_phases() {
        let model = bhz();
        for (m, want) in [
            (-3.0, 0),
            (-1.0, 1),
            (-0.3, 1),
            (0.5, 1),
            (1.7, 1),
            (2.5, 0),
        ] {
            let src = model.at(&[m]).unwrap();
            let r = evaluate_point(&src, 2, None, &sampling()).unwrap();
            assert_eq!(r.reason, reason::DEFINED, "m = {m}");
            assert_eq!(r.nu0, want, "m = {m}");
        }
    }

    #[test]
    fn bhz_gapless_is_undefined() {
        // m = 0: gap closes at (1/2, 0) and (0, 1/2); m = 2: at (1/2, 1/2) — all sampled TRIMs
        for m in [0.0, 2.0] {
            let src = bhz().at(&[m]).unwrap();
            let r = evaluate_point(&src, 2, None, &sampling()).unwrap();
            assert_eq!(r.nu0, -1);
            assert_eq!(r.reason, reason::DEGENERATE_AT_TRIM);
        }
    }

    #[test]
    fn bad_sampling_is_rejected() {
        let src = bhz().at(&[1.0]).unwrap();
        let mut s = sampling();
        s.step_limit = 0.0;
        assert!(evaluate_point(&src, 2, None, &s).is_err());
        assert!(evaluate_point(&src, 4, None, &sampling()).is_err());
    }
}
