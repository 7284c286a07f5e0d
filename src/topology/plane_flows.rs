//! The Wilson-loop side of one parameter point: the time-reversal-invariant planes, their
//! pump lines with adaptive insertion, the Z2 of each plane from its hybrid Wannier centre
//! flow, and the convergence certificate (tight planes recomputed with doubled loop points).
//!
//! Planes (3D): κ_i = c for i = 0, 1, 2 and c ∈ {0, 1/2}; loops run along axis (i+1) mod 3 and
//! the pump coordinate κ_{(i+2) mod 3} goes from 0 to 1/2. In 2D the single plane loops along
//! κ_1 and pumps κ_2.

use crate::error::{CoreError, CoreResult};
use crate::exec::guided::map_guided;
use crate::sampling::Sampling;
use crate::topology::fine_line::{needs_resolution, resolve_line};
use crate::topology::flow::{inspect_with_gaps, largest_gap, z2_of_tracked_flow, Interval};
use crate::topology::lattice_z2::LatticePlane;
use crate::topology::wilson::{
    evaluate_line, evaluate_lines, BandStats, LineResult, LineSamples, LineSpec,
};
use crate::zone::bloch::BlochSource;
use rayon::prelude::*;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Mutex, OnceLock};

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

/// The pump lines of one plane computed so far, in ascending pump coordinate, with the
/// refinement test of every neighbouring pair and, once no pair needs a line between them, the
/// plane's Z2.
///
/// The centres are kept in one flat array (`width` per line), so that inserting lines and
/// examining neighbours touch one allocation per plane.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct PlaneLines {
    pump: Vec<f64>,
    centres: Vec<f64>,
    width: usize,
    line_stats: Vec<BandStats>,
    /// each line's `LineResult::min_step_gap` (infinite once a line is resolved)
    step_gap: Vec<f64>,
    /// each line's even-loop samples while it may still be resolved (`LineResult::samples`)
    samples: Vec<Option<LineSamples>>,
    /// a line could not be resolved to the gap: the plane has no Z2
    unresolved: bool,
    /// all lines' statistics, merged in the order the lines were computed
    stats: BandStats,
    /// `inspect` of lines (m, m + 1), for every m
    checks: Vec<Interval>,
    /// Z2 of the flow when no check asks for refinement
    z2: Option<u8>,
}

impl PlaneLines {
    fn new(pump: Vec<f64>, lines: Vec<LineResult>, width: usize, step_limit: f64) -> Self {
        let mut pl = PlaneLines {
            pump,
            centres: Vec::with_capacity(lines.len() * width),
            width,
            line_stats: Vec::with_capacity(lines.len()),
            step_gap: Vec::with_capacity(lines.len()),
            samples: Vec::with_capacity(lines.len()),
            ..Default::default()
        };
        for l in lines {
            debug_assert_eq!(l.centres.len(), width, "one centre per occupied band");
            pl.centres.extend_from_slice(&l.centres);
            pl.stats.merge(&l.stats);
            pl.line_stats.push(l.stats);
            pl.step_gap.push(l.min_step_gap);
            pl.samples.push(l.samples);
            pl.unresolved |= !l.resolved;
        }
        pl.examine(step_limit);
        pl
    }

    /// Every line's centres, line after line (`filling` per line).
    pub(crate) fn centres(&self) -> &[f64] {
        &self.centres
    }

    /// The lines' pump coordinates, ascending.
    pub(crate) fn pump(&self) -> &[f64] {
        &self.pump
    }

    fn line(&self, m: usize) -> &[f64] {
        &self.centres[m * self.width..(m + 1) * self.width]
    }

    /// Insert a line at pump coordinate `t` (the checks are stale until [`Self::examine`]).
    fn insert(&mut self, t: f64, l: LineResult) {
        let at = self.pump.partition_point(|&x| x < t);
        self.pump.insert(at, t);
        let w = self.width;
        debug_assert_eq!(l.centres.len(), w, "one centre per occupied band");
        self.centres.splice(at * w..at * w, l.centres);
        self.stats.merge(&l.stats);
        self.line_stats.insert(at, l.stats);
        self.step_gap.insert(at, l.min_step_gap);
        // (an inserted line was resolved already where it needed it: `evaluate_resolved`)
        self.samples.insert(at, None);
        self.unresolved |= !l.resolved;
    }

    /// Replace line `m` by the same line resolved to the gap (`fine_line`).
    fn replace(&mut self, m: usize, l: LineResult) {
        let w = self.width;
        debug_assert_eq!(l.centres.len(), w, "one centre per occupied band");
        self.centres[m * w..(m + 1) * w].copy_from_slice(&l.centres);
        self.stats.merge(&l.stats);
        self.line_stats[m] = l.stats;
        self.step_gap[m] = f64::INFINITY;
        self.samples[m] = None;
        self.unresolved |= !l.resolved;
    }

    /// The refinement test of every neighbouring pair, and the Z2 when none needs a line.
    fn examine(&mut self, step_limit: f64) {
        let count = self.pump.len();
        // (each line's largest gap once: the checks of both its pairs and the Z2 need it)
        let gaps: Vec<(f64, f64)> = (0..count).map(|m| largest_gap(self.line(m))).collect();
        self.checks = (1..count)
            .map(|m| {
                let (a, b) = (self.line(m - 1), self.line(m));
                inspect_with_gaps(a, b, gaps[m - 1], gaps[m], step_limit)
            })
            .collect();
        if self.unresolved {
            self.z2 = None;
            return;
        }
        self.z2 = self.checks.iter().all(|c| !c.refine).then(|| {
            let refs: Vec<&[f64]> = (0..count).map(|m| self.line(m)).collect();
            let mid: Vec<f64> = gaps.iter().map(|g| g.0).collect();
            z2_of_tracked_flow(&refs, &mid)
        });
    }
}

/// The initial, evenly spaced pump coordinates of every plane: `lines` from 0 to 1/2.
pub fn initial_pump(s: &Sampling) -> Vec<f64> {
    (0..s.lines)
        .map(|m| 0.5 * m as f64 / (s.lines - 1) as f64)
        .collect()
}

/// The initial lines of several planes as tasks of a list (one task per line, `len` of them,
/// plane after plane), each plane examined by the task that delivers its last line
/// ([`PlaneInbox`]). [`initial_lines`] runs them alone; the first pass of a point
/// (`first_pass`) runs them among its other tasks.
pub struct InitialLines {
    specs: Vec<LineSpec>,
    pump: Vec<f64>,
    inboxes: Vec<PlaneInbox>,
}

impl InitialLines {
    pub fn new(planes: &[Plane], s: &Sampling) -> Self {
        let pump = initial_pump(s);
        let specs = planes
            .iter()
            .flat_map(|p| pump.iter().map(|&t| p.line(t)))
            .collect();
        let inboxes = planes.iter().map(|_| PlaneInbox::new(pump.len())).collect();
        Self {
            specs,
            pump,
            inboxes,
        }
    }

    /// Number of tasks (lines).
    pub fn len(&self) -> usize {
        self.specs.len()
    }

    pub fn is_empty(&self) -> bool {
        self.specs.is_empty()
    }

    /// Task `l`: its line, delivered to its plane.
    pub fn run(
        &self,
        src: &dyn BlochSource,
        l: usize,
        loop_points: usize,
        filling: usize,
        step_limit: f64,
    ) -> CoreResult<()> {
        let line = evaluate_line(src, &self.specs[l], loop_points, filling, None)?;
        let (plane, j) = (l / self.pump.len(), l % self.pump.len());
        self.inboxes[plane].deliver(j, line, &self.pump, filling, step_limit)
    }

    /// The examined planes, once every task has run.
    pub fn into_planes(self) -> CoreResult<Vec<PlaneLines>> {
        self.inboxes
            .into_iter()
            .map(PlaneInbox::into_plane)
            .collect()
    }
}

/// A plane's lines as the tasks that compute them deliver them, in any order; the delivery of
/// the last one examines the plane, in that task ([`PlaneLines`]). Planes are so examined while
/// other lines are still being computed, not one after the other once all are done (six 4-band
/// planes took ~48 µs so, on one thread, before `flow::unit_mod`), and the lines' allocations
/// are freed in the same task.
pub struct PlaneInbox {
    lines: Mutex<Vec<Option<LineResult>>>,
    left: AtomicUsize,
    done: OnceLock<PlaneLines>,
}

impl PlaneInbox {
    /// An inbox for `count` lines.
    pub fn new(count: usize) -> Self {
        Self {
            lines: Mutex::new((0..count).map(|_| None).collect()),
            left: AtomicUsize::new(count),
            done: OnceLock::new(),
        }
    }

    /// Deliver line `j` (pump coordinate `pump[j]`); the last delivery examines the plane.
    pub fn deliver(
        &self,
        j: usize,
        line: LineResult,
        pump: &[f64],
        filling: usize,
        step_limit: f64,
    ) -> CoreResult<()> {
        let poisoned = || CoreError::Internal("a plane's lines were left half written".into());
        self.lines.lock().map_err(|_| poisoned())?[j] = Some(line);
        // (AcqRel: the delivery that sees 1 comes after every other one, and the lock below
        // shows it their lines)
        if self.left.fetch_sub(1, Ordering::AcqRel) == 1 {
            let lines: Option<Vec<LineResult>> =
                std::mem::take(&mut *self.lines.lock().map_err(|_| poisoned())?)
                    .into_iter()
                    .collect();
            let lines = lines.ok_or_else(|| CoreError::Internal("a line came twice".into()))?;
            let _ = self
                .done
                .set(PlaneLines::new(pump.to_vec(), lines, filling, step_limit));
        }
        Ok(())
    }

    /// The examined plane, once every line is delivered.
    pub fn into_plane(self) -> CoreResult<PlaneLines> {
        self.done
            .into_inner()
            .ok_or_else(|| CoreError::Internal("a plane did not get all its lines".into()))
    }
}

/// The initial, evenly spaced pump lines of several planes, each plane examined once its lines
/// are done: a source that builds H itself as one list of tasks ([`InitialLines`]); one that
/// prefers batches (a Python callback) is asked for every line at once, and the planes are then
/// examined side by side.
pub fn initial_lines(
    src: &dyn BlochSource,
    planes: &[Plane],
    filling: usize,
    s: &Sampling,
    loop_points: usize,
) -> CoreResult<Vec<PlaneLines>> {
    if !src.prefers_batches() {
        let tasks = InitialLines::new(planes, s);
        map_guided(
            tasks.len(),
            || (),
            |_, l| tasks.run(src, l, loop_points, filling, s.step_limit),
        )?;
        return tasks.into_planes();
    }
    let pump = initial_pump(s);
    let specs: Vec<LineSpec> = planes
        .iter()
        .flat_map(|p| pump.iter().map(|&t| p.line(t)))
        .collect();
    let mut lines = evaluate_lines(src, &specs, loop_points, filling, None)?.into_iter();
    let per_plane: Vec<Vec<LineResult>> = planes
        .iter()
        .map(|_| lines.by_ref().take(pump.len()).collect())
        .collect();
    Ok(per_plane
        .into_par_iter()
        .map(|own| PlaneLines::new(pump.clone(), own, filling, s.step_limit))
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
            let budget = s.max_lines.saturating_sub(pl.pump.len());
            if budget == 0 || pl.z2.is_some() {
                continue; // no line may be added, or none is needed
            }
            let ts = &pl.pump;
            let mut new: Vec<(f64, f64)> = (0..ts.len() - 1)
                .filter(|&m| ts[m + 1] - ts[m] > MIN_INTERVAL && pl.checks[m].refine)
                .map(|m| (pl.checks[m].step, 0.5 * (ts[m] + ts[m + 1])))
                .collect();
            // largest motion first when the budget cannot take them all
            new.sort_by(|a, b| b.0.total_cmp(&a.0));
            wanted.extend(new.into_iter().take(budget).map(|(_, t)| (p, t)));
        }
        if wanted.is_empty() {
            return Ok(());
        }
        let specs: Vec<LineSpec> = wanted.iter().map(|&(p, t)| planes[p].line(t)).collect();
        let got = evaluate_resolved(src, &specs, loop_points, filling)?;
        let mut grown = vec![false; all.len()];
        for ((p, t), r) in wanted.into_iter().zip(got) {
            all[p].insert(t, r);
            grown[p] = true;
        }
        all.par_iter_mut()
            .zip(grown)
            .filter(|(_, g)| *g)
            .for_each(|(pl, _)| pl.examine(s.step_limit));
    }
}

/// Lines as `evaluate_lines` gives them, each recomputed to the gap where its even loop may
/// step over a turn of the occupied states (`fine_line`).
fn evaluate_resolved(
    src: &dyn BlochSource,
    specs: &[LineSpec],
    loop_points: usize,
    filling: usize,
) -> CoreResult<Vec<LineResult>> {
    let mut got = evaluate_lines(src, specs, loop_points, filling, None)?;
    if let Some(bound) = src.variation() {
        let todo: Vec<usize> = (0..got.len())
            .filter(|&i| needs_resolution(bound, specs[i].axis, loop_points, got[i].min_step_gap))
            .collect();
        let fine = map_guided(
            todo.len(),
            || (),
            |_, j| {
                let i = todo[j];
                let seed = got[i].samples.as_ref();
                resolve_line(src, &specs[i], loop_points, filling, None, bound, seed)
            },
        )?;
        for (i, r) in todo.into_iter().zip(fine) {
            got[i] = r;
        }
    }
    for r in &mut got {
        r.samples = None; // (resolved or not, a line is not resolved again)
    }
    Ok(got)
}

/// Resolve to the gap every line of the planes whose even loop may step over a turn of the
/// occupied states (`fine_line`). Run once a point is known to be gapped: near a closing the
/// work would be spent on a flow that has no Z2 anyway.
///
/// Pump lines are not inserted by the same bound (only by the centres' motion): with the
/// smallest gap of each line, a hybridisation gap that is small along a whole surface of the
/// zone asked for evenly dense lines everywhere (a d–f lattice point at V = 0.02: 2.3 s and
/// still unresolved), where the flow itself moved little.
pub fn resolve_planes(
    src: &dyn BlochSource,
    planes: &[Plane],
    all: &mut [PlaneLines],
    filling: usize,
    s: &Sampling,
    loop_points: usize,
) -> CoreResult<()> {
    let Some(bound) = src.variation() else {
        return Ok(());
    };
    let mut todo: Vec<(usize, usize)> = Vec::new();
    for (p, pl) in all.iter().enumerate() {
        for m in 0..pl.pump.len() {
            if needs_resolution(bound, planes[p].loop_axis, loop_points, pl.step_gap[m]) {
                todo.push((p, m));
            }
        }
    }
    let fine = map_guided(
        todo.len(),
        || (),
        |_, j| {
            let (p, m) = todo[j];
            let spec = planes[p].line(all[p].pump[m]);
            let seed = all[p].samples[m].as_ref();
            resolve_line(src, &spec, loop_points, filling, None, bound, seed)
        },
    )?;
    // (the samples have served: a line is resolved once)
    for pl in all.iter_mut() {
        pl.samples.iter_mut().for_each(|x| *x = None);
    }
    for (&(p, m), r) in todo.iter().zip(fine) {
        all[p].replace(m, r);
    }
    let mut changed = vec![false; all.len()];
    for &(p, _) in &todo {
        changed[p] = true;
    }
    all.par_iter_mut()
        .zip(changed)
        .filter(|(_, c)| *c)
        .for_each(|(pl, _)| pl.examine(s.step_limit));
    Ok(())
}

/// Z2 and flow diagnostics of each plane from its examined lines.
pub fn summarise(all: &[PlaneLines], s: &Sampling) -> Vec<PlaneResult> {
    all.iter()
        .map(|pl| PlaneResult {
            z2: pl.z2.map_or(-1, |z| z as i8),
            converged: pl.z2.is_some(),
            loop_points: s.loop_points,
            changed: false,
            lines_used: pl.pump.len(),
            max_step: pl.checks.iter().map(|c| c.step).fold(0.0, f64::max),
            min_clearance: pl
                .checks
                .iter()
                .map(|c| c.clearance)
                .fold(f64::INFINITY, f64::min),
        })
        .collect()
}

/// Band statistics of all lines (merged per plane first), and, when `cand` is given,
/// each line's own smallest gap (gap-search candidates).
pub fn line_stats(
    all: &[PlaneLines],
    stats: &mut BandStats,
    cand: Option<&mut Vec<(f64, [f64; 3])>>,
) {
    for pl in all {
        stats.merge(&pl.stats);
    }
    if let Some(cand) = cand {
        let every = all.iter().flat_map(|pl| &pl.line_stats);
        cand.extend(every.map(|l| (l.min_direct, l.min_direct_at)));
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
    resolve_planes(src, &sub, &mut lines, filling, s, fine)?;
    refine_lines(src, &sub, &mut lines, filling, s, fine)?;
    line_stats(&lines, stats, None);
    for (&i, mut again) in tight.iter().zip(summarise(&lines, s)) {
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
    use crate::sampling::{Method, ProveGap};

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
            prove_gap: ProveGap::Never,
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
        }
    }

    /// A line of two centres (a Kramers-like pair at ±x around 0.3) and made-up statistics.
    fn line_at(t: f64) -> LineResult {
        let x = 0.45 * (2.0 * std::f64::consts::PI * t).sin().abs();
        let mut centres = vec![(0.3 + x).rem_euclid(1.0), (0.3 - x).rem_euclid(1.0)];
        centres.sort_by(|a, b| a.total_cmp(b));
        let mut stats = BandStats::default();
        let e = 1.0 + (7.0 * t).cos();
        stats.min_direct = e;
        stats.min_direct_at = [t, 0.5, 0.0];
        stats.top_occ = -e;
        stats.bottom_empty = e;
        stats.e_min = -3.0 - t;
        stats.e_max = 3.0 + t;
        LineResult {
            centres,
            stats,
            min_singular: 1.0,
            min_step_gap: e,
            resolved: true,
            samples: None,
        }
    }

    /// Lines inserted one by one end as a plane built at once from all of them: the same flat
    /// centres, statistics, checks and Z2 (the checks and Z2 recomputed by `examine`).
    #[test]
    fn inserted_lines_equal_a_plane_built_at_once() {
        let step_limit = 0.08;
        let coarse: Vec<f64> = (0..5).map(|m| 0.125 * m as f64).collect();
        let extra = [0.3125, 0.0625, 0.4375, 0.1875];
        let mut grown = PlaneLines::new(
            coarse.clone(),
            coarse.iter().map(|&t| line_at(t)).collect(),
            2,
            step_limit,
        );
        for &t in &extra {
            grown.insert(t, line_at(t));
        }
        grown.examine(step_limit);
        let mut all: Vec<f64> = coarse.iter().chain(&extra).copied().collect();
        all.sort_by(|a, b| a.total_cmp(b));
        let at_once = PlaneLines::new(
            all.clone(),
            all.iter().map(|&t| line_at(t)).collect(),
            2,
            step_limit,
        );
        assert_eq!(grown.pump, at_once.pump);
        assert_eq!(grown.centres, at_once.centres);
        assert_eq!(grown.line_stats, at_once.line_stats);
        assert_eq!(grown.checks, at_once.checks);
        assert_eq!(grown.z2, at_once.z2);
        grown
            .stats
            .assert_close(&at_once.stats, 0.0, "merged statistics");
        // the checks are those of `inspect` on neighbouring lines, and the merged statistics
        // those of merging every line in turn
        let mut seq = BandStats::default();
        for (m, &t) in all.iter().enumerate() {
            seq.merge(&line_at(t).stats);
            if m + 1 < all.len() {
                let want = crate::topology::flow::inspect(
                    &line_at(t).centres,
                    &line_at(all[m + 1]).centres,
                    step_limit,
                );
                assert_eq!(grown.checks[m], want, "interval {m}");
            }
        }
        grown.stats.assert_close(&seq, 0.0, "sequential merge");
        // and the Z2, when there is one, that of `z2_of_flow` on the lines
        let lines: Vec<Vec<f64>> = all.iter().map(|&t| line_at(t).centres).collect();
        let refs: Vec<&[f64]> = lines.iter().map(|l| l.as_slice()).collect();
        let loose = PlaneLines::new(
            all.clone(),
            all.iter().map(|&t| line_at(t)).collect(),
            2,
            0.45,
        );
        assert_eq!(loose.z2, Some(crate::topology::flow::z2_of_flow(&refs)));
    }

    /// `summarise` reads the checks: converged exactly when no interval asks for a line, with the
    /// largest step and smallest clearance of all intervals.
    /// Lines delivered in any order, from several threads, make the plane built at once; a plane
    /// that misses a line is an error, not a plane.
    #[test]
    fn inbox_in_any_order_equals_a_plane_built_at_once() {
        let pump: Vec<f64> = (0..9).map(|m| 0.0625 * m as f64).collect();
        let at_once = PlaneLines::new(
            pump.clone(),
            pump.iter().map(|&t| line_at(t)).collect(),
            2,
            0.08,
        );
        let inbox = PlaneInbox::new(pump.len());
        let order = [4, 0, 8, 2, 7, 1, 5, 3, 6];
        std::thread::scope(|sc| {
            for part in order.chunks(3) {
                let (inbox, pump) = (&inbox, &pump);
                sc.spawn(move || {
                    for &j in part {
                        inbox.deliver(j, line_at(pump[j]), pump, 2, 0.08).unwrap();
                    }
                });
            }
        });
        assert_eq!(inbox.into_plane().unwrap(), at_once);
        let short = PlaneInbox::new(pump.len());
        for j in 1..pump.len() {
            short.deliver(j, line_at(pump[j]), &pump, 2, 0.08).unwrap();
        }
        assert!(matches!(short.into_plane(), Err(CoreError::Internal(_))));
    }

    #[test]
    fn summary_follows_the_checks() {
        let s = sampling();
        let coarse: Vec<f64> = (0..3).map(|m| 0.25 * m as f64).collect();
        let fine: Vec<f64> = (0..41).map(|m| 0.0125 * m as f64).collect();
        let mut seen = Vec::new();
        for pump in [coarse, fine] {
            let pl = PlaneLines::new(
                pump.clone(),
                pump.iter().map(|&t| line_at(t)).collect(),
                2,
                s.step_limit,
            );
            let r = &summarise(std::slice::from_ref(&pl), &s)[0];
            let refine = pl.checks.iter().any(|c| c.refine);
            assert_eq!(r.converged, !refine);
            assert_eq!(r.z2 < 0, refine);
            assert_eq!(r.lines_used, pump.len());
            let step = pl.checks.iter().map(|c| c.step).fold(0.0, f64::max);
            assert_eq!(r.max_step, step);
            seen.push(refine);
        }
        assert_eq!(
            seen,
            [true, false],
            "one unresolved and one converged plane"
        );
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
