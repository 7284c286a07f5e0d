//! The Wilson-loop side of one parameter point: the time-reversal-invariant planes, their
//! pump lines with adaptive insertion, the Z2 of each plane from its hybrid Wannier centre
//! flow, and the convergence certificate (tight planes recomputed with doubled loop points).
//!
//! Planes (3D): κ_i = c for i = 0, 1, 2 and c ∈ {0, 1/2}; loops run along axis (i+1) mod 3 and
//! the pump coordinate κ_{(i+2) mod 3} goes from 0 to 1/2. In 2D the single plane loops along
//! κ_1 and pumps κ_2.

use crate::bloch::BlochSource;
use crate::engine::Sampling;
use crate::error::CoreResult;
use crate::flow::{inspect, z2_of_flow};
use crate::lattice_z2::LatticePlane;
use crate::wilson::{evaluate_lines, BandStats, LineResult, LineSpec};
use rayon::prelude::*;

/// Pump intervals narrower than this are never split further.
const MIN_INTERVAL: f64 = 1e-7;

#[derive(Clone, Debug, PartialEq)]
pub struct PlaneResult {
    pub z2: i8,
    pub converged: bool,
    /// κ points per loop of this result (doubled when the certificate recomputed the plane)
    pub loop_points: usize,
    /// the certificate's finer run gave a different Z2
    pub changed: bool,
    pub lines_used: usize,
    pub max_step: f64,
    pub min_clearance: f64,
    /// pump coordinates and centres of every line (kept for flow plots)
    pub pump: Vec<f64>,
    pub centres: Vec<Vec<f64>>,
}

/// A time-reversal-invariant plane: base point, loop axis and pump axis.
#[derive(Clone, Copy, Debug)]
pub struct Plane {
    pub base: [f64; 3],
    pub loop_axis: usize,
    pub pump_axis: usize,
}

impl Plane {
    pub fn lattice(&self) -> LatticePlane {
        LatticePlane {
            base: self.base,
            loop_axis: self.loop_axis,
            pump_axis: self.pump_axis,
        }
    }
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

/// The pump lines of one plane computed so far, in ascending pump coordinate.
#[derive(Clone, Debug, Default)]
pub struct PlaneLines {
    pump: Vec<f64>,
    lines: Vec<LineResult>,
}

/// The initial, evenly spaced pump lines of several planes, as one batch for the source.
pub fn initial_lines(
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
pub fn refine_lines(
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
            if budget == 0 {
                continue; // (no line may be added: skip inspecting the flow for it)
            }
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
pub fn summarise(all: Vec<PlaneLines>, s: &Sampling) -> Vec<PlaneResult> {
    // one rayon task per plane: otherwise the one serial stretch between the parallel phases
    all.into_par_iter()
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
                    loop_points: s.loop_points,
                    changed: false,
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
pub fn line_stats(all: &[PlaneLines], stats: &mut BandStats, cand: &mut Vec<(f64, [f64; 3])>) {
    for l in all.iter().flat_map(|p| &p.lines) {
        stats.merge(&l.stats);
        cand.push((l.stats.min_direct, l.stats.min_direct_at));
    }
}

/// A plane's flow is tight when a largest-gap midpoint comes within reach of a centre of the
/// neighbouring line: closer than `step_limit` or than the largest step a centre made between
/// lines. Then the jump count could depend on how finely the loops sample κ.
pub fn is_tight(p: &PlaneResult, s: &Sampling) -> bool {
    p.converged && p.min_clearance < s.step_limit.max(p.max_step)
}

/// Convergence certificate: recompute the tight planes with twice the loop points (initial
/// lines and adaptive insertion as before). A plane keeps its Z2 only if the finer run agrees;
/// its diagnostics become those of the finer run.
pub fn certify(
    src: &dyn BlochSource,
    pl: &[Plane],
    res: &mut [PlaneResult],
    filling: usize,
    s: &Sampling,
    stats: &mut BandStats,
) -> CoreResult<()> {
    let tight: Vec<usize> = (0..res.len()).filter(|&i| is_tight(&res[i], s)).collect();
    if tight.is_empty() {
        return Ok(());
    }
    let sub: Vec<Plane> = tight.iter().map(|&i| pl[i]).collect();
    let fine = 2 * s.loop_points;
    let mut lines = initial_lines(src, &sub, filling, s, fine)?;
    refine_lines(src, &sub, &mut lines, filling, s, fine)?;
    line_stats(&lines, stats, &mut Vec::new());
    for (&i, mut again) in tight.iter().zip(summarise(lines, s)) {
        again.loop_points = fine;
        if again.z2 != res[i].z2 {
            again.z2 = -1;
            again.changed = true;
        }
        res[i] = again;
    }
    Ok(())
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
    use crate::engine::Method;

    fn sampling() -> Sampling {
        Sampling {
            loop_points: 16,
            lines: 5,
            max_lines: 50,
            step_limit: 0.08,
            gap_floor: 0.0,
            gap_points: 0,
            gap_starts: 0,
            method: Method::Wilson,
            certify: true,
        }
    }

    fn plane(clearance: f64, step: f64, converged: bool) -> PlaneResult {
        PlaneResult {
            z2: if converged { 1 } else { -1 },
            converged,
            loop_points: 16,
            changed: false,
            lines_used: 5,
            max_step: step,
            min_clearance: clearance,
            pump: Vec::new(),
            centres: Vec::new(),
        }
    }

    #[test]
    fn tightness() {
        let s = sampling();
        assert!(!is_tight(&plane(0.2, 0.07, true), &s)); // clear of every centre
        assert!(is_tight(&plane(0.05, 0.01, true), &s)); // midpoint within step_limit
        assert!(is_tight(&plane(0.1, 0.15, true), &s)); // a centre's step could reach it
        assert!(!is_tight(&plane(0.05, 0.01, false), &s)); // unresolved: nothing to certify
    }

    #[test]
    fn planes_cover_the_half_zones() {
        let p3 = planes(3);
        assert_eq!(p3.len(), 6);
        for (k, p) in p3.iter().enumerate() {
            let axis = k / 2;
            assert_eq!(p.base[axis], if k % 2 == 0 { 0.0 } else { 0.5 });
            assert_eq!((p.loop_axis, p.pump_axis), ((axis + 1) % 3, (axis + 2) % 3));
        }
        assert_eq!(planes(2).len(), 1);
    }
}
