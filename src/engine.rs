//! One parameter point, start to finish: TRIMs and a bulk grid for gaps and parity, the
//! Wilson-loop lines of every time-reversal-invariant plane with adaptive insertion of pump
//! lines, the Z2 of each plane, the indices, and the reason for any undefined result.
//!
//! Planes (3D): κ_i = c for i = 0, 1, 2 and c ∈ {0, 1/2}; loops run along axis (i+1) mod 3 and
//! the pump coordinate κ_{(i+2) mod 3} goes from 0 to 1/2. In 2D the single plane loops along
//! κ_1 and pumps κ_2. ν0 = z(i,0) + z(i,1/2) mod 2 for each i (three estimates that must agree)
//! and ν_i = z(i, 1/2).

use crate::bloch::BlochSource;
use crate::error::{invalid, CoreError, CoreResult};
use crate::indices::{combine, Indices};
use crate::lattice_z2::{lattice_z2, LatticeOutcome, LatticePlane};
use crate::flow::{inspect, z2_of_flow};
use crate::gap_search::{gaps_at, minimise, pick_starts, SearchSettings};
use crate::parity::{parity_indices, reason, trims, ParityResult};
use crate::wilson::{evaluate_lines, evaluate_points, BandStats, LineResult, LineSpec};
use crate::C64;

/// Relative gap floor (× bandwidth) used when the caller gives none.
pub const AUTO_FLOOR_REL: f64 = 1e-6;
/// Pump intervals narrower than this are never split further.
const MIN_INTERVAL: f64 = 1e-7;
/// How often the lattice mesh may be doubled in each direction before giving up.
const LATTICE_DOUBLINGS: usize = 2;

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
    /// which Z2 method(s) to run
    pub method: Method,
    /// recompute tight planes with doubled loop points (convergence certificate)
    pub certify: bool,
}

/// The Z2 method(s) of a run.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    /// hybrid Wannier centre flow of Wilson loops (Soluyanov–Vanderbilt)
    Wilson,
    /// lattice Z2 (Fukui–Hatsugai)
    Lattice,
    /// both, compared point by point
    Both,
}

impl Method {
    pub fn parse(name: &str) -> CoreResult<Self> {
        match name {
            "wilson" => Ok(Self::Wilson),
            "lattice" => Ok(Self::Lattice),
            "both" => Ok(Self::Both),
            other => Err(invalid!("method must be 'wilson', 'lattice' or 'both', got {other:?}")),
        }
    }
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
    /// κ points per Wilson loop of the finest run that decided (certificate: 2 × loop_points)
    pub loop_points_used: usize,
    /// Hamiltonians evaluated by the gap minimiser
    pub search_evaluations: usize,
    pub max_step: f64,
    pub min_clearance: f64,
    pub parity: Option<ParityResult>,
    pub lattice: Option<LatticeSummary>,
}

/// The lattice (Fukui–Hatsugai) result of a point and the roughness of its finest mesh.
#[derive(Clone, Debug, PartialEq)]
pub struct LatticeSummary {
    pub indices: Indices,
    pub max_field: f64,
    pub min_link: f64,
    pub mesh: (usize, usize),
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
        LatticePlane { base: self.base, loop_axis: self.loop_axis, pump_axis: self.pump_axis }
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
fn line_stats(all: &[PlaneLines], stats: &mut BandStats, cand: &mut Vec<(f64, [f64; 3])>) {
    for l in all.iter().flat_map(|p| &p.lines) {
        stats.merge(&l.stats);
        cand.push((l.stats.min_direct, l.stats.min_direct_at));
    }
}

/// Lattice Z2 of every plane at the base mesh (loop points rounded up to even × pump
/// intervals of the initial lines).
fn lattice_initial(
    src: &dyn BlochSource,
    pl: &[Plane],
    filling: usize,
    u_t: &[C64],
    s: &Sampling,
    stats: &mut BandStats,
    cand: &mut Vec<(f64, [f64; 3])>,
) -> CoreResult<Vec<LatticeOutcome>> {
    let n1 = s.loop_points + s.loop_points % 2;
    pl.iter()
        .map(|p| lattice_z2(src, &p.lattice(), filling, u_t, n1, s.lines - 1, stats, cand))
        .collect()
}

/// Double the lattice mesh of every plane whose field or links are too rough, up to
/// `LATTICE_DOUBLINGS` times.
fn lattice_refine(
    src: &dyn BlochSource,
    pl: &[Plane],
    filling: usize,
    u_t: &[C64],
    lat: &mut [LatticeOutcome],
    stats: &mut BandStats,
) -> CoreResult<()> {
    for (p, out) in pl.iter().zip(lat.iter_mut()) {
        for _ in 0..LATTICE_DOUBLINGS {
            if out.admissible() {
                break;
            }
            let (n1, n2) = out.mesh;
            *out = lattice_z2(src, &p.lattice(), filling, u_t, 2 * n1, 2 * n2, stats, &mut Vec::new())?;
        }
    }
    Ok(())
}

/// A plane's flow is tight when a largest-gap midpoint comes within reach of a centre: closer
/// than `step_limit`, or closer than twice the largest step a centre made between neighbouring
/// lines. Then the jump count could depend on how finely the loops sample κ.
fn is_tight(p: &PlaneResult, s: &Sampling) -> bool {
    p.converged && p.min_clearance < s.step_limit.max(2.0 * p.max_step)
}

/// Convergence certificate: recompute the tight planes with twice the loop points (initial
/// lines and adaptive insertion as before). A plane keeps its Z2 only if the finer run agrees;
/// its diagnostics become those of the finer run.
fn certify(
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

/// Evaluate one parameter point. `inversion` (n×n, P² = 1) enables the parity indices;
/// `time_reversal` (n×n U_T) is needed by the lattice method.
pub fn evaluate_point(
    src: &dyn BlochSource,
    filling: usize,
    inversion: Option<&[C64]>,
    time_reversal: Option<&[C64]>,
    s: &Sampling,
) -> CoreResult<PointResult> {
    s.validate()?;
    let (dim, n) = (src.dim(), src.norb());
    if !(2..=3).contains(&dim) {
        return Err(invalid!("Z2 indices need a 2D or 3D model, got dim = {dim}"));
    }
    if filling == 0 || filling >= n {
        return Err(invalid!("filling must lie in 1…{}, got {filling}", n - 1));
    }
    let want_wilson = s.method != Method::Lattice;
    let u_t = match (s.method, time_reversal) {
        (Method::Wilson, _) => None,
        (_, Some(u)) if u.len() == n * n => Some(u),
        _ => return Err(invalid!("the lattice method needs the {n}×{n} time-reversal matrix")),
    };
    // TRIMs first (gaps, parity), then a uniform bulk grid (3D), the initial pump lines and
    // the base lattice mesh; every sampled κ point is a candidate start for the gap search.
    let trim_k: Vec<f64> = trims(dim).iter().flat_map(|k| k[..dim].to_vec()).collect();
    let (trim_stats, trim_e, trim_v) = evaluate_points(src, &trim_k, filling, true)?;
    let mut stats = trim_stats;
    let trim_gap: Vec<f64> = trim_e.iter().map(|e| e[filling] - e[filling - 1]).collect();
    let mut cand: Vec<(f64, [f64; 3])> =
        trims(dim).into_iter().zip(&trim_gap).map(|(k, &g)| (g, k)).collect();
    let bulk_k = bulk_grid(dim, s.gap_points);
    let bulk_gap = gaps_at(src, &bulk_k, filling, &mut stats)?;
    for (g, k) in bulk_gap.iter().zip(bulk_k.chunks_exact(dim)) {
        let mut at = [0.0; 3];
        at[..dim].copy_from_slice(k);
        cand.push((*g, at));
    }
    let pl = planes(dim);
    let mut lines = Vec::new();
    if want_wilson {
        lines = initial_lines(src, &pl, filling, s, s.loop_points)?;
        line_stats(&lines, &mut stats, &mut cand);
    }
    let mut lat = match u_t {
        Some(u) => lattice_initial(src, &pl, filling, u, s, &mut stats, &mut cand)?,
        None => Vec::new(),
    };
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
    // Adaptive pump lines, certificates and finer lattice meshes only where the point is
    // gapped: near a closing they would be spent on a flow that has no Z2 anyway.
    let gapped = stats.min_direct >= floor_of(&stats);
    if gapped && want_wilson {
        refine_lines(src, &pl, &mut lines, filling, s, s.loop_points)?;
        line_stats(&lines, &mut stats, &mut Vec::new());
    }
    let mut plane_res = summarise(lines, s);
    if gapped && want_wilson && s.certify {
        certify(src, &pl, &mut plane_res, filling, s, &mut stats)?;
    }
    if let (true, Some(u)) = (gapped, u_t) {
        lattice_refine(src, &pl, filling, u, &mut lat, &mut stats)?;
    }
    let floor = floor_of(&stats);

    let parity = match inversion {
        Some(p) => Some(parity_indices(&trim_v, &trim_gap, p, n, filling, dim, floor)?),
        None => None,
    };
    let blocking = if trim_gap.iter().any(|&g| g < floor) {
        reason::DEGENERATE_AT_TRIM
    } else if stats.min_direct < floor {
        reason::GAPLESS
    } else {
        reason::DEFINED
    };
    let lattice = (!lat.is_empty()).then(|| {
        let z: Vec<i8> = lat.iter().map(|o| if o.admissible() { o.z2 } else { -1 }).collect();
        LatticeSummary {
            indices: combine(dim, &z, blocking, reason::LATTICE_MESH_TOO_COARSE),
            max_field: lat.iter().map(|o| o.max_field).fold(0.0, f64::max),
            min_link: lat.iter().map(|o| o.min_link).fold(f64::INFINITY, f64::min),
            mesh: lat.iter().map(|o| o.mesh).max().unwrap_or((0, 0)),
        }
    });
    let wilson = want_wilson.then(|| {
        let z: Vec<i8> = plane_res.iter().map(|p| p.z2).collect();
        let unresolved = if plane_res.iter().any(|p| p.changed) {
            reason::CHANGES_WITH_LOOP_POINTS
        } else {
            reason::NOT_CONVERGED
        };
        combine(dim, &z, blocking, unresolved)
    });
    // the headline indices: the Wilson loop when it ran, else the lattice method
    let main = match (&wilson, &lattice) {
        (Some(w), _) => *w,
        (None, Some(l)) => l.indices,
        (None, None) => return Err(CoreError::Internal("no method ran".into())),
    };
    let converged = if want_wilson {
        plane_res.iter().all(|p| p.converged && !p.changed)
    } else {
        lat.iter().all(|o| o.admissible())
    };
    let (max_step, min_clearance) = if want_wilson {
        (
            plane_res.iter().map(|p| p.max_step).fold(0.0, f64::max),
            plane_res.iter().map(|p| p.min_clearance).fold(f64::INFINITY, f64::min),
        )
    } else {
        (f64::NAN, f64::NAN)
    };
    Ok(PointResult {
        nu0: main.nu0,
        nu: main.nu,
        z2_plane: main.z2_plane,
        nu0_by_axis: main.nu0_by_axis,
        gap_direct: stats.min_direct,
        gap_indirect: stats.indirect(),
        gap_kappa: stats.min_direct_at,
        bandwidth: stats.bandwidth(),
        gap_floor: floor,
        converged,
        reason: main.reason,
        lines_used: plane_res.iter().map(|p| p.lines_used).max().unwrap_or(0),
        loop_points_used: plane_res.iter().map(|p| p.loop_points).max().unwrap_or(0),
        search_evaluations,
        max_step,
        min_clearance,
        parity,
        lattice,
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
            method: Method::Wilson,
            certify: true,
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
            let r = evaluate_point(&src, 2, None, None, &sampling()).unwrap();
            assert_eq!(r.reason, reason::DEFINED, "m = {m}");
            assert_eq!(r.nu0, want, "m = {m}");
        }
    }

    /// U_T = iσ_y ⊗ 1 (spin slowest) of the `bhz` test model.
    fn bhz_time_reversal() -> Vec<C64> {
        let mut u = vec![c(0.0, 0.0); 16];
        for i in 0..2 {
            u[i * 4 + 2 + i] = c(1.0, 0.0);
            u[(2 + i) * 4 + i] = c(-1.0, 0.0);
        }
        u
    }

    #[test]
    fn lattice_method_agrees_with_the_flow() {
        let model = bhz();
        let u_t = bhz_time_reversal();
        for method in [Method::Lattice, Method::Both] {
            let s = Sampling { method, ..sampling() };
            for (m, want) in [(-3.0, 0), (-1.0, 1), (0.5, 1), (2.5, 0)] {
                let src = model.at(&[m]).unwrap();
                let r = evaluate_point(&src, 2, None, Some(&u_t), &s).unwrap();
                let lat = r.lattice.expect("lattice ran");
                assert_eq!((lat.indices.nu0, lat.indices.reason), (want, reason::DEFINED), "m = {m}");
                assert_eq!(r.nu0, want, "m = {m}");
            }
        }
        // the lattice method cannot run without U_T
        let s = Sampling { method: Method::Both, ..sampling() };
        assert!(evaluate_point(&model.at(&[1.0]).unwrap(), 2, None, None, &s).is_err());
    }

    #[test]
    fn bhz_gapless_is_undefined() {
        // m = 0: gap closes at (1/2, 0) and (0, 1/2); m = 2: at (1/2, 1/2) — all sampled TRIMs
        for m in [0.0, 2.0] {
            let src = bhz().at(&[m]).unwrap();
            let r = evaluate_point(&src, 2, None, None, &sampling()).unwrap();
            assert_eq!(r.nu0, -1);
            assert_eq!(r.reason, reason::DEGENERATE_AT_TRIM);
        }
    }

    #[test]
    fn bad_sampling_is_rejected() {
        let src = bhz().at(&[1.0]).unwrap();
        let mut s = sampling();
        s.step_limit = 0.0;
        assert!(evaluate_point(&src, 2, None, None, &s).is_err());
        assert!(evaluate_point(&src, 4, None, None, &sampling()).is_err());
    }
}
