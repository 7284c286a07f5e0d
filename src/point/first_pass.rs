//! The first pass over a parameter point, before anything is decided: H and its spectrum at
//! the TRIMs (gaps, parity), the uniform bulk grid (gaps away from the planes, 3D) and the
//! initial pump lines of every time-reversal-invariant plane. The three are independent, so
//! they are one parallel phase.
//!
//! A source that builds H itself puts all of them into one guided list of tasks
//! ([`crate::exec::guided`]): the TRIMs, every line, every row of the bulk grid — the rows last,
//! because they are the shortest tasks (a row of 8 κ points against a line of 40) and the end
//! of a list waits for its last task. A source that prefers batches (a Python callback) is asked
//! for each kind in one batch, the three side by side.

use crate::error::{CoreError, CoreResult};
use crate::exec::guided::map_guided;
use crate::point::gap_search::{gaps_on_grid, grid_gaps, grid_row, grid_row_scratch};
use crate::topology::parity::trims;
use crate::topology::plane_flows::{initial_lines, InitialLines, Plane, PlaneLines};
use crate::topology::wilson::{evaluate_points, BandStats, PointSpectra};
use crate::zone::bloch::BlochSource;

/// What the first pass found. `trims` lists the TRIMs as [`trims`] does.
pub struct FirstPass {
    /// statistics, eigenvalues and occupied eigenvectors at the TRIMs
    pub trims: PointSpectra,
    /// the bulk grid's κ points (m³ × 3, empty without one) and their direct gaps
    pub bulk_kappa: Vec<f64>,
    pub bulk_gaps: Vec<f64>,
    pub bulk_stats: BandStats,
    /// every plane's initial lines, examined (empty when no Wilson loop is wanted)
    pub lines: Vec<PlaneLines>,
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

/// One task of the list and what it gives (a line goes to its plane, [`InitialLines`]).
enum Found {
    Trims(PointSpectra),
    Line,
    Row(Vec<f64>),
}

/// The first pass at `s.loop_points` per loop and `s.gap_points` per axis of the bulk grid;
/// `planes` get lines only when `wilson` is set.
pub fn first_pass(
    src: &dyn BlochSource,
    planes: &[Plane],
    filling: usize,
    s: &crate::sampling::Sampling,
    wilson: bool,
) -> CoreResult<FirstPass> {
    let dim = src.dim();
    let trim_k: Vec<f64> = trims(dim).iter().flat_map(|k| k[..dim].to_vec()).collect();
    let bulk_kappa = bulk_grid(dim, s.gap_points);
    let m = s.gap_points;
    let wilson_planes = if wilson { planes } else { &[] };
    if src.prefers_batches() {
        return batched(src, wilson_planes, filling, s, trim_k, bulk_kappa);
    }
    let lines = InitialLines::new(wilson_planes, s);
    let rows = if bulk_kappa.is_empty() { 0 } else { m * m };
    let found = map_guided(
        1 + lines.len() + rows,
        || grid_row_scratch(src, m),
        |(h, work), i| match i.checked_sub(1) {
            None => evaluate_points(src, &trim_k, filling, true).map(Found::Trims),
            Some(l) if l < lines.len() => lines
                .run(src, l, s.loop_points, filling, s.step_limit)
                .map(|()| Found::Line),
            Some(l) => grid_row(src, m, l - lines.len(), h, work).map(Found::Row),
        },
    )?;
    let mut found = found.into_iter();
    let Some(Found::Trims(at_trims)) = found.next() else {
        return Err(CoreError::Internal(
            "the first task is not the TRIMs".into(),
        ));
    };
    let mut grid = Vec::with_capacity(rows);
    for f in found {
        match f {
            Found::Line => {}
            Found::Row(e) => grid.push(e),
            Found::Trims(_) => return Err(CoreError::Internal("the TRIMs came twice".into())),
        }
    }
    let mut bulk_stats = BandStats::default();
    let bulk_gaps = grid_gaps(&grid, &bulk_kappa, src.norb(), filling, &mut bulk_stats);
    Ok(FirstPass {
        trims: at_trims,
        bulk_kappa,
        bulk_gaps,
        bulk_stats,
        lines: lines.into_planes()?,
    })
}

/// The first pass of a source that prefers batches: each kind of κ set in one batch, the
/// three side by side (`rayon::join`, so a worker that runs out of one steals from the others).
fn batched(
    src: &dyn BlochSource,
    planes: &[Plane],
    filling: usize,
    s: &crate::sampling::Sampling,
    trim_k: Vec<f64>,
    bulk_kappa: Vec<f64>,
) -> CoreResult<FirstPass> {
    let (at_trims, (bulk, lines)) = rayon::join(
        || evaluate_points(src, &trim_k, filling, true),
        || {
            rayon::join(
                || {
                    let mut st = BandStats::default();
                    gaps_on_grid(src, &bulk_kappa, s.gap_points, filling, &mut st).map(|g| (g, st))
                },
                || initial_lines(src, planes, filling, s, s.loop_points),
            )
        },
    );
    let (bulk_gaps, bulk_stats) = bulk?;
    Ok(FirstPass {
        trims: at_trims?,
        bulk_kappa,
        bulk_gaps,
        bulk_stats,
        lines: lines?,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::exec::guided::tests::pool;
    use crate::sampling::{Method, ProveGap, Sampling};
    use crate::topology::plane_flows::planes;
    use crate::topology::wilson::tests::random_model;
    use crate::zone::bloch::Bloch;

    fn sampling(gap_points: usize) -> Sampling {
        Sampling {
            loop_points: 12,
            lines: 7,
            max_lines: 7,
            step_limit: 0.2,
            gap_floor: 0.0,
            gap_points,
            gap_starts: 0,
            method: Method::Wilson,
            certify: false,
            prove_gap: ProveGap::Never,
        }
    }

    /// The same source asking to be given its κ points in batches (as a Python callback does).
    struct Batched<'a>(&'a Bloch);

    impl BlochSource for Batched<'_> {
        fn dim(&self) -> usize {
            self.0.dim()
        }
        fn norb(&self) -> usize {
            self.0.norb()
        }
        fn fill(&self, kappa: &[f64], out: &mut [crate::C64]) -> CoreResult<()> {
            self.0.fill(kappa, out)
        }
        fn prefers_batches(&self) -> bool {
            true
        }
    }

    /// The list's results, sorted back into TRIMs, grid and planes, equal those of the three
    /// computed one after the other — bit for bit, on any number of workers.
    #[test]
    fn one_list_equals_its_parts() {
        let src = random_model(4, 21).at(&[]).unwrap();
        let pl = planes(3);
        for m in [0, 5] {
            let s = sampling(m);
            let trim_k: Vec<f64> = trims(3).iter().flat_map(|k| k.to_vec()).collect();
            let bulk = bulk_grid(3, m);
            let mut bulk_stats = BandStats::default();
            let gaps = gaps_on_grid(&src, &bulk, m, 2, &mut bulk_stats).unwrap();
            let at_trims = evaluate_points(&src, &trim_k, 2, true).unwrap();
            let lines = initial_lines(&src, &pl, 2, &s, s.loop_points).unwrap();
            for workers in [1, 2, 3] {
                let got = pool(workers)
                    .install(|| first_pass(&src, &pl, 2, &s, true))
                    .unwrap();
                let what = format!("m = {m}, {workers} workers");
                assert_eq!(got.trims, at_trims, "{what}");
                assert_eq!(got.bulk_kappa, bulk, "{what}");
                assert_eq!(got.bulk_gaps, gaps, "{what}");
                assert_eq!(got.bulk_stats, bulk_stats, "{what}");
                assert_eq!(got.lines, lines, "{what}");
                assert_eq!(gaps.len(), m * m * m);
            }
        }
        // no Wilson loop wanted: no lines, the rest as before
        let got = first_pass(&src, &pl, 2, &sampling(3), false).unwrap();
        assert!(got.lines.is_empty());
        assert_eq!(got.bulk_gaps.len(), 27);
    }

    /// A source given its κ points in batches takes the other form of the pass; H is built
    /// point by point there rather than line by line, so the results agree to rounding.
    #[test]
    fn batches_agree_with_the_list() {
        let src = random_model(4, 8).at(&[]).unwrap();
        let pl = planes(3);
        let s = sampling(4);
        let list = first_pass(&src, &pl, 2, &s, true).unwrap();
        let batch = first_pass(&Batched(&src), &pl, 2, &s, true).unwrap();
        let close = |a: &[f64], b: &[f64], what: &str| {
            assert_eq!(a.len(), b.len(), "{what}");
            for (x, y) in a.iter().zip(b) {
                assert!((x - y).abs() < 1e-10, "{what}: {x} vs {y}");
            }
        };
        close(&list.bulk_gaps, &batch.bulk_gaps, "bulk gaps");
        list.bulk_stats
            .assert_close(&batch.bulk_stats, 1e-10, "bulk statistics");
        close(
            &list.trims.1.concat(),
            &batch.trims.1.concat(),
            "TRIM energies",
        );
        assert_eq!(list.lines.len(), 6);
        for (a, b) in list.lines.iter().zip(&batch.lines) {
            close(a.centres(), b.centres(), "centres");
        }
    }
}
