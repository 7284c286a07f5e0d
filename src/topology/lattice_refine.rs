//! The lattice Z2 mesh refined locally, where the plaquette field or the links are too rough.
//!
//! Near a gap closing the Berry flux of the occupied states gathers within a small patch of
//! the zone; a uniform mesh fine enough for it everywhere would be mostly wasted. Here the
//! half-zone mesh of [`crate::topology::lattice_z2`] becomes a quadtree: a plaquette (cell) whose field
//! |F| or whose weakest link |U| fails the limits of `lattice_z2` is split into four, again
//! and again, until every cell passes or a cap is reached.
//!
//! Cells of different sizes meet along an edge that carries the corner points of the smaller
//! cells. Every cell is read as a polygon through all mesh points on its boundary (the corners
//! of finer neighbours included), so each elementary link — between neighbouring points on a
//! mesh line — belongs to exactly the two cells beside it, with opposite orientations, and the
//! field of a split cell is the sum of its four children's. The Fukui–Hatsugai count
//! n = (F − ΣA)/2π is an integer on any such cell, and Σ n over the cells is gauge invariant
//! mod 2 for the same reason as on a uniform mesh (Fukui & Hatsugai, J. Phys. Soc. Jpn. 76,
//! 053702 (2007); Fukui, Hatsugai & Suzuki, J. Phys. Soc. Jpn. 74, 1674 (2005)): interior
//! links cancel between neighbours, and on the two time-reversal-invariant boundary rows the
//! links pair up under s ↦ −s.
//!
//! That pairing needs the point set of each boundary row to be closed under s ↦ −s: a point
//! added on a boundary row brings its mirror image with it (as a hanging point of whatever
//! cell lies there), its occupied frame is the time-reversed frame of its partner, and the
//! link phases of the second half of the row are taken from their partners in the first half,
//! exactly as on the uniform mesh.
//!
//! Coordinates are integers: a base cell has side 2^[`MAX_LEVEL`] units, so points of any
//! level are exact and the mirror of a point is again a point of the same level.

use crate::error::{CoreError, CoreResult};
use crate::topology::lattice_z2::{
    kramers_frame, link, mesh_in_one_batch, time_reverse, LatticeOutcome, LatticePlane, MeshPoint,
    FIELD_LIMIT, LINK_LIMIT,
};
use crate::topology::wilson::BandStats;
use crate::zone::bloch::BlochSource;
use crate::C64;
use rayon::prelude::*;
use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::f64::consts::PI;

/// How often a base cell may be halved (our choice, no source): 2^−24 of a base cell is far
/// below any gap a default gap floor leaves open.
pub const MAX_LEVEL: u32 = 24;

/// Cap on the κ points of one refined plane (our choice, no source): 2^17 points is about 0.2 s
/// of 4×4 eigenproblems on one core.
pub const MAX_POINTS: usize = 1 << 17;

/// Cap on the memory the occupied frames of one refined plane may take.
const MAX_FRAME_BYTES: usize = 64 << 20;

/// κ points one refined plane may use with `n` orbitals and `m` occupied bands: the smaller
/// of [`MAX_POINTS`] and what fits in 64 MiB of frames, never less than `base` (the uniform
/// mesh it starts from).
pub fn point_cap(n: usize, m: usize, base: usize) -> usize {
    let per_point = 16 * n * m + 64; // frame + bookkeeping
    MAX_POINTS.min(MAX_FRAME_BYTES / per_point).max(base)
}

/// Refine the lattice mesh of every plane whose field or links are too rough, locally: cells
/// are split only where they fail, up to the point cap ([`point_cap`]). A plane that still fails stays inadmissible (reason
/// `LATTICE_MESH_TOO_COARSE`).
pub fn lattice_planes_refine(
    src: &dyn BlochSource,
    pl: &[LatticePlane],
    filling: usize,
    u_t: &[C64],
    lat: &mut [LatticeOutcome],
    stats: &mut BandStats,
) -> CoreResult<()> {
    let (dim, n) = (src.dim(), src.norb());
    for (p, out) in pl.iter().zip(lat.iter_mut()) {
        if out.admissible() {
            continue;
        }
        let cap = point_cap(n, filling, out.points);
        let mut solve = |kappa: &[f64]| mesh_in_one_batch(src, kappa, n, filling);
        *out = refined_z2(p, dim, n, filling, u_t, out.mesh, cap, &mut solve, stats)?;
    }
    Ok(())
}

/// A square cell of the quadtree: lower-left corner and side, in units.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Cell {
    s: u64,
    t: u64,
    side: u64,
}

/// The refined mesh of one plane.
struct Mesh {
    /// units along the loop axis (periodic) and up to the top row (t = 1/2)
    loop_units: u64,
    top: u64,
    /// coordinates and occupied frame of every point
    at: Vec<(u64, u64)>,
    frames: Vec<Vec<C64>>,
    index: HashMap<(u64, u64), usize>,
    /// points of each row (key t) and each column (key s), sorted
    rows: BTreeMap<u64, BTreeSet<u64>>,
    cols: BTreeMap<u64, BTreeSet<u64>>,
    cells: Vec<Cell>,
    /// U(a → b) for a < b
    links: HashMap<(usize, usize), C64>,
}

/// What one pass over the cells found.
struct Reading {
    /// Σ n over the cells (None: a link was singular)
    count: Option<i64>,
    max_field: f64,
    min_link: f64,
    /// cells that fail the limits
    rough: Vec<usize>,
}

impl Mesh {
    fn kappa(&self, plane: &LatticePlane, dim: usize, p: (u64, u64)) -> Vec<f64> {
        let mut k = plane.base;
        k[plane.loop_axis] = p.0 as f64 / self.loop_units as f64;
        k[plane.pump_axis] = 0.5 * p.1 as f64 / self.top as f64;
        k[..dim].to_vec()
    }

    fn on_boundary_row(&self, t: u64) -> bool {
        t == 0 || t == self.top
    }

    fn mirror(&self, s: u64) -> u64 {
        (self.loop_units - s) % self.loop_units
    }

    /// Add the points not yet in the mesh (with the mirror images of those on a boundary
    /// row), solving H at them with `solve` and fixing the time-reversal gauge there.
    #[allow(clippy::too_many_arguments)]
    fn insert(
        &mut self,
        wanted: &[(u64, u64)],
        plane: &LatticePlane,
        dim: usize,
        filling: usize,
        u_t: &[C64],
        n: usize,
        solve: &mut dyn FnMut(&[f64]) -> CoreResult<Vec<MeshPoint>>,
        stats: &mut BandStats,
    ) -> CoreResult<()> {
        let mut new: Vec<(u64, u64)> = Vec::new();
        let mut seen = BTreeSet::new();
        for &(s, t) in wanted {
            let s = s % self.loop_units;
            let mut add = |p: (u64, u64)| {
                if !self.index.contains_key(&p) && seen.insert(p) {
                    new.push(p);
                }
            };
            add((s, t));
            if self.on_boundary_row(t) {
                add((self.mirror(s), t));
            }
        }
        if new.is_empty() {
            return Ok(());
        }
        let kappa: Vec<f64> = new
            .iter()
            .flat_map(|&p| self.kappa(plane, dim, p))
            .collect();
        let solved = solve(&kappa)?;
        if solved.len() != new.len() {
            return Err(CoreError::Internal(
                "mesh solver returned too few points".into(),
            ));
        }
        for ((p, (e, frame)), k) in new.iter().zip(solved).zip(kappa.chunks_exact(dim)) {
            stats.add(&e, filling, k);
            self.index.insert(*p, self.at.len());
            self.at.push(*p);
            self.frames.push(frame);
            self.rows.entry(p.1).or_default().insert(p.0);
            self.cols.entry(p.0).or_default().insert(p.1);
        }
        // time-reversal gauge on the boundary rows: Kramers frames at the TRIMs, partners in
        // the second half of the row (their own solution is replaced)
        let half = self.loop_units / 2;
        for &(s, t) in &new {
            if !self.on_boundary_row(t) {
                continue;
            }
            let i = self.index[&(s, t)];
            if s == 0 || s == half {
                kramers_frame(u_t, &mut self.frames[i], n, filling)?;
            }
        }
        for &(s, t) in &new {
            if !self.on_boundary_row(t) || s <= half {
                continue;
            }
            let (i, j) = (self.index[&(s, t)], self.index[&(self.mirror(s), t)]);
            let mut partner = vec![C64::new(0.0, 0.0); n * filling];
            time_reverse(u_t, &self.frames[j], n, filling, &mut partner);
            self.frames[i] = partner;
        }
        Ok(())
    }

    /// The points of a cell's boundary, counter-clockwise from its lower-left corner: the
    /// corners and every point of a finer neighbour on its edges.
    fn polygon(&self, c: &Cell) -> Vec<usize> {
        let (s0, t0) = (c.s, c.t);
        let (s1, t1) = (c.s + c.side, c.t + c.side);
        let wrap = s1 % self.loop_units;
        let mut v = Vec::new();
        let row = |t: u64| self.rows.get(&t);
        let col = |s: u64| self.cols.get(&s);
        if let Some(r) = row(t0) {
            v.extend(r.range(s0..s1).map(|&s| (s, t0)));
        }
        if let Some(k) = col(wrap) {
            v.extend(k.range(t0..t1).map(|&t| (wrap, t)));
        }
        v.push((wrap, t1));
        if let Some(r) = row(t1) {
            v.extend(r.range(s0 + 1..s1).rev().map(|&s| (s, t1)));
        }
        if let Some(k) = col(s0) {
            v.extend(k.range(t0 + 1..=t1).rev().map(|&t| (s0, t)));
        }
        v.into_iter().map(|p| self.index[&p]).collect()
    }

    fn link_value(&self, a: usize, b: usize) -> C64 {
        if a < b {
            self.links[&(a, b)]
        } else {
            self.links[&(b, a)].conj()
        }
    }

    /// The phase A of the link a → b. A link on a boundary row in the second half of the
    /// loop takes the phase of its time-reversal partner in the first half (equal in exact
    /// arithmetic; taken from the same number, the pairing stays exact at the branch cut).
    fn phase(&self, a: usize, b: usize) -> f64 {
        let ((sa, ta), (sb, tb)) = (self.at[a], self.at[b]);
        if ta == tb && self.on_boundary_row(ta) {
            let l = self.loop_units;
            // unwrap the link across s = 0 (neighbours on a row are less than half apart)
            let (ua, ub) = if sa.abs_diff(sb) > l / 2 {
                (if sa == 0 { l } else { sa }, if sb == 0 { l } else { sb })
            } else {
                (sa, sb)
            };
            if ua + ub > l {
                // second half: the frames there are Θψ(−s), so U(a → b) = U(−b → −a)
                let pa = self.index[&(self.mirror(sa), ta)];
                let pb = self.index[&(self.mirror(sb), tb)];
                return self.link_value(pb, pa).arg();
            }
        }
        self.link_value(a, b).arg()
    }

    /// Compute the links the cells need, then read every cell.
    fn read(&mut self, n: usize, m: usize) -> Reading {
        let polygons: Vec<Vec<usize>> = self.cells.iter().map(|c| self.polygon(c)).collect();
        let mut missing: Vec<(usize, usize)> = Vec::new();
        let mut seen = BTreeSet::new();
        for poly in &polygons {
            for (i, &a) in poly.iter().enumerate() {
                let b = poly[(i + 1) % poly.len()];
                let key = (a.min(b), a.max(b));
                if !self.links.contains_key(&key) && seen.insert(key) {
                    missing.push(key);
                }
            }
        }
        let frames = &self.frames;
        let values: Vec<C64> = missing
            .par_iter()
            .map(|&(a, b)| link(&frames[a], &frames[b], n, m))
            .collect();
        self.links.extend(missing.into_iter().zip(values));
        let mut out = Reading {
            count: Some(0),
            max_field: 0.0,
            min_link: f64::INFINITY,
            rough: Vec::new(),
        };
        for (ci, poly) in polygons.iter().enumerate() {
            let mut product = C64::new(1.0, 0.0);
            let mut sum_a = 0.0;
            let mut weakest = f64::INFINITY;
            for (i, &a) in poly.iter().enumerate() {
                let b = poly[(i + 1) % poly.len()];
                let u = self.link_value(a, b);
                weakest = weakest.min(u.norm());
                // (renormalised: the product of many small links must not underflow)
                product *= u / u.norm().max(f64::MIN_POSITIVE);
                sum_a += self.phase(a, b);
            }
            out.min_link = out.min_link.min(weakest);
            if weakest < 1e-10 {
                out.count = None;
                out.max_field = f64::INFINITY;
                out.rough.push(ci);
                continue;
            }
            let f = product.arg();
            out.max_field = out.max_field.max(f.abs());
            if let Some(total) = out.count.as_mut() {
                *total += ((f - sum_a) / (2.0 * PI)).round() as i64;
            }
            if f.abs() > FIELD_LIMIT || weakest < LINK_LIMIT {
                out.rough.push(ci);
            }
        }
        out
    }
}

/// The lattice Z2 of `plane`, starting from the uniform `base` mesh (loop points × pump
/// intervals, as `lattice_z2::lattice_z2`) and splitting the cells whose field or links are
/// too rough until all pass, at most `max_points` κ points are used, or a cell would have to
/// be split beyond [`MAX_LEVEL`]. `solve` gives the energies and occupied frames (n × filling)
/// at a batch of κ points (dim coordinates each); their band statistics go into `stats`.
/// The outcome is admissible only when every cell passed.
#[allow(clippy::too_many_arguments)]
pub fn refined_z2(
    plane: &LatticePlane,
    dim: usize,
    n: usize,
    filling: usize,
    u_t: &[C64],
    base: (usize, usize),
    max_points: usize,
    solve: &mut dyn FnMut(&[f64]) -> CoreResult<Vec<MeshPoint>>,
    stats: &mut BandStats,
) -> CoreResult<LatticeOutcome> {
    let (_, outcome) = refine(plane, dim, n, filling, u_t, base, max_points, solve, stats)?;
    Ok(outcome)
}

/// [`refined_z2`], with the mesh it ended on.
#[allow(clippy::too_many_arguments)]
fn refine(
    plane: &LatticePlane,
    dim: usize,
    n: usize,
    filling: usize,
    u_t: &[C64],
    base: (usize, usize),
    max_points: usize,
    solve: &mut dyn FnMut(&[f64]) -> CoreResult<Vec<MeshPoint>>,
    stats: &mut BandStats,
) -> CoreResult<(Mesh, LatticeOutcome)> {
    let (n1, n2) = base;
    if n1 < 4 || n1 % 2 != 0 || n2 < 1 {
        return Err(crate::error::invalid!(
            "lattice mesh needs an even n1 ≥ 4 and n2 ≥ 1, got {n1} × {n2}"
        ));
    }
    if u_t.len() != n * n {
        return Err(crate::error::invalid!(
            "time-reversal matrix must be {n}×{n}"
        ));
    }
    let unit = 1u64 << MAX_LEVEL;
    let mut mesh = Mesh {
        loop_units: n1 as u64 * unit,
        top: n2 as u64 * unit,
        at: Vec::new(),
        frames: Vec::new(),
        index: HashMap::new(),
        rows: BTreeMap::new(),
        cols: BTreeMap::new(),
        cells: Vec::new(),
        links: HashMap::new(),
    };
    let grid: Vec<(u64, u64)> = (0..=n2 as u64)
        .flat_map(|i| (0..n1 as u64).map(move |j| (j * unit, i * unit)))
        .collect();
    mesh.insert(&grid, plane, dim, filling, u_t, n, solve, stats)?;
    mesh.cells = (0..n2 as u64)
        .flat_map(|i| {
            (0..n1 as u64).map(move |j| Cell {
                s: j * unit,
                t: i * unit,
                side: unit,
            })
        })
        .collect();
    loop {
        let reading = mesh.read(n, filling);
        let finest = mesh.cells.iter().map(|c| c.side).min().unwrap_or(unit);
        let level = (unit / finest).trailing_zeros() as usize;
        let outcome = |z2: i8| LatticeOutcome {
            z2,
            max_field: reading.max_field,
            min_link: reading.min_link,
            mesh: (n1 << level, n2 << level),
            points: mesh.at.len(),
        };
        let z2 = reading.count.map_or(-1, |c| c.rem_euclid(2) as i8);
        if reading.rough.is_empty() {
            let done = outcome(z2);
            return Ok((mesh, done));
        }
        // split every rough cell in four (corners, edge midpoints and centre)
        let mut wanted = Vec::with_capacity(5 * reading.rough.len());
        let mut stuck = false;
        for &ci in &reading.rough {
            let c = mesh.cells[ci];
            if c.side < 2 {
                stuck = true;
                break;
            }
            let h = c.side / 2;
            let (s, t) = (c.s, c.t);
            wanted.extend([
                (s + h, t),
                (s, t + h),
                (s + h, t + h),
                (s + 2 * h, t + h),
                (s + h, t + 2 * h),
            ]);
        }
        let mut fresh = wanted
            .iter()
            .filter(|&&(s, t)| !mesh.index.contains_key(&(s % mesh.loop_units, t)))
            .count();
        // (mirror images on the boundary rows come on top: at most as many again)
        fresh += wanted
            .iter()
            .filter(|&&(_, t)| mesh.on_boundary_row(t))
            .count();
        if stuck || mesh.at.len() + fresh > max_points {
            // (the count on the unfinished mesh is kept, but the outcome is not admissible)
            let done = outcome(z2);
            return Ok((mesh, done));
        }
        mesh.insert(&wanted, plane, dim, filling, u_t, n, solve, stats)?;
        let rough: BTreeSet<usize> = reading.rough.into_iter().collect();
        let mut cells = Vec::with_capacity(mesh.cells.len() + 3 * rough.len());
        for (ci, c) in mesh.cells.iter().enumerate() {
            if rough.contains(&ci) {
                let h = c.side / 2;
                for (ds, dt) in [(0, 0), (h, 0), (0, h), (h, h)] {
                    cells.push(Cell {
                        s: c.s + ds,
                        t: c.t + dt,
                        side: h,
                    });
                }
            } else {
                cells.push(*c);
            }
        }
        mesh.cells = cells;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::linalg::eigen::eigh;
    use crate::topology::lattice_z2::lattice_z2;
    use crate::topology::lattice_z2::tests::{bhz, plane};

    /// Energies and occupied frames straight from the eigensolver; with `seed`, each frame
    /// multiplied by a random filling × filling unitary (a random gauge at every point).
    fn solver<'a>(
        src: &'a dyn BlochSource,
        m: usize,
        seed: Option<u64>,
    ) -> impl FnMut(&[f64]) -> CoreResult<Vec<MeshPoint>> + 'a {
        let mut rng = crate::test_rng::TestRng::new(seed.unwrap_or(1));
        move |kappa: &[f64]| {
            let (dim, n) = (src.dim(), src.norb());
            let mut out = Vec::new();
            for k in kappa.chunks_exact(dim) {
                let mut h = vec![C64::new(0.0, 0.0); n * n];
                src.fill(k, &mut h)?;
                let (e, v) = eigh(&h, n)?;
                let mut g: Vec<C64> = (0..m * m)
                    .map(|_| C64::new(rng.uniform(), rng.uniform()))
                    .collect();
                crate::linalg::matrix::unitarise(&mut g, m)?;
                let mut f = vec![C64::new(0.0, 0.0); n * m];
                for r in 0..n {
                    for a in 0..m {
                        if seed.is_none() {
                            f[r * m + a] = v[r * n + a];
                            continue;
                        }
                        for b in 0..m {
                            f[r * m + a] += v[r * n + b] * g[b * m + a];
                        }
                    }
                }
                out.push((e, f));
            }
            Ok(out)
        }
    }

    fn run(
        src: &dyn BlochSource,
        u_t: &[C64],
        base: (usize, usize),
        cap: usize,
        seed: Option<u64>,
    ) -> (Mesh, LatticeOutcome) {
        let mut solve = solver(src, 2, seed);
        let mut st = BandStats::default();
        refine(&plane(), 2, 4, 2, u_t, base, cap, &mut solve, &mut st).unwrap()
    }

    /// A mesh that needs no refinement reads exactly as the uniform mesh of `lattice_z2`.
    #[test]
    fn unrefined_mesh_reads_as_the_uniform_mesh() {
        let (model, u_t) = bhz(0.3, 0.2);
        for m in [-1.0, 0.6, 2.6] {
            let src = model.at(&[m]).unwrap();
            let mut st = BandStats::default();
            let uniform =
                lattice_z2(&src, &plane(), 2, &u_t, 24, 12, &mut st, &mut Vec::new()).unwrap();
            assert!(uniform.admissible(), "m = {m}");
            let (_, out) = run(&src, &u_t, (24, 12), MAX_POINTS, None);
            assert_eq!(
                (out.z2, out.mesh, out.points),
                (uniform.z2, (24, 12), 24 * 13)
            );
            assert!((out.max_field - uniform.max_field).abs() < 1e-10, "m = {m}");
            assert!((out.min_link - uniform.min_link).abs() < 1e-10, "m = {m}");
        }
    }

    /// Qi–Wu–Zhang block and its time-reversed partner: Z2 = 1 for 0 < |m| < 2, 0 for |m| > 2
    /// (Qi, Wu & Zhang, PRB 74, 085308 (2006); Bernevig, Hughes & Zhang, Science 314, 1757
    /// (2006)). The on-site orbital mixing x σ_x (x = 0.1, here to give the plaquettes a field)
    /// moves the closings from Γ, M to m = ∓(1 + √(1 − x²)) = ∓1.99499 and from the X points
    /// to m = ±(1 − √(1 − x²)) = ±0.00501 (the block's closed form: sin k_x = −x, sin k_y = 0 and
    /// m + cos k_x + cos k_y = 0; common practice, no source). The points below lie 0.015 …
    /// 0.3 from them, next to closings at a corner of the half zone (Γ), on both
    /// time-reversal-invariant rows (near the X points) and inside (near M).
    const NEAR: [(f64, i8); 6] = [
        (-2.3, 0),
        (-1.9, 1),
        (0.02, 1),
        (-0.02, 1),
        (1.98, 1),
        (2.1, 0),
    ];

    /// Where the uniform 16 × 8 mesh is too rough, local refinement answers right, with far
    /// fewer points than a uniform mesh of its finest spacing.
    #[test]
    fn near_closings_are_refined_locally_and_right() {
        let (model, u_t) = bhz(0.0, 0.1);
        let mut refined = 0;
        for (m, want) in NEAR {
            let src = model.at(&[m]).unwrap();
            let mut st = BandStats::default();
            let uniform =
                lattice_z2(&src, &plane(), 2, &u_t, 16, 8, &mut st, &mut Vec::new()).unwrap();
            let (mesh, out) = run(&src, &u_t, (16, 8), MAX_POINTS, None);
            assert!(out.admissible(), "m = {m}: {out:?}");
            assert_eq!(out.z2, want, "m = {m}");
            assert!(out.max_field <= FIELD_LIMIT && out.min_link >= LINK_LIMIT);
            if !uniform.admissible() {
                refined += 1;
                let full = out.mesh.0 * (out.mesh.1 + 1);
                assert!(
                    out.points > 16 * 9 && 2 * out.points < full,
                    "m = {m}: {out:?}"
                );
            }
            // every boundary row is closed under s ↦ −s, and its frames are time-reversal
            // partners there
            for t in [0, mesh.top] {
                let row = &mesh.rows[&t];
                for &s in row {
                    assert!(
                        row.contains(&mesh.mirror(s)),
                        "m = {m}: row {t} misses −{s}"
                    );
                }
            }
        }
        assert!(refined >= 4, "only {refined} points needed refinement");
    }

    /// A random gauge at every point of the refined mesh (the TRIMs and boundary rows are
    /// re-gauged by time reversal, the rest stays random): the same count.
    #[test]
    fn refined_count_is_gauge_invariant() {
        // spin mixing (Rashba-like 0.2) makes the occupied frames genuinely 2 × 2 far from the
        // closings; without it, next to the X points (the boundary rows refined)
        for (rashba, m, want) in [
            (0.2, -1.9, 1),
            (0.0, 0.02, 1),
            (0.0, -1.98, 1),
            (0.0, 2.02, 0),
        ] {
            let (model, u_t) = bhz(rashba, 0.1);
            let src = model.at(&[m]).unwrap();
            let (_, plain) = run(&src, &u_t, (16, 8), MAX_POINTS, None);
            assert!(plain.points > 16 * 9, "m = {m}: no refinement to test");
            for seed in 1..5 {
                let (_, out) = run(&src, &u_t, (16, 8), MAX_POINTS, Some(seed));
                assert!(out.admissible(), "m = {m}, gauge {seed}");
                assert_eq!(out.z2, want, "m = {m}, gauge {seed}");
                // gauge-invariant readings and the same mesh
                assert_eq!((out.points, out.mesh), (plain.points, plain.mesh));
                assert!((out.max_field - plain.max_field).abs() < 1e-8);
                assert!((out.min_link - plain.min_link).abs() < 1e-8);
            }
        }
    }

    /// A cap below what the point needs leaves the plane inadmissible (the engine's reason
    /// `LATTICE_MESH_TOO_COARSE`), never over the cap.
    #[test]
    fn cap_reached_is_not_admissible() {
        let (model, u_t) = bhz(0.0, 0.1);
        let src = model.at(&[0.02]).unwrap();
        let (_, full) = run(&src, &u_t, (16, 8), MAX_POINTS, None);
        assert!(full.admissible());
        let cap = 16 * 9 + (full.points - 16 * 9) / 2;
        let (_, capped) = run(&src, &u_t, (16, 8), cap, None);
        assert!(!capped.admissible() && capped.points <= cap, "{capped:?}");
        assert_eq!(point_cap(4, 2, 10), MAX_POINTS);
        assert_eq!(point_cap(64, 32, 10), (64 << 20) / (16 * 64 * 32 + 64));
        assert_eq!(point_cap(64, 32, 1 << 20), 1 << 20);
    }
}
