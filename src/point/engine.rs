//! One parameter point, start to finish: TRIMs and a bulk grid for gaps and parity, the
//! Wilson-loop lines of every time-reversal-invariant plane with adaptive insertion of pump
//! lines, the Z2 of each plane, the indices, and the reason for any undefined result.
//!
//! Planes (3D): κ_i = c for i = 0, 1, 2 and c ∈ {0, 1/2}; loops run along axis (i+1) mod 3 and
//! the pump coordinate κ_{(i+2) mod 3} goes from 0 to 1/2. In 2D the single plane loops along
//! κ_1 and pumps κ_2. ν0 = z(i,0) + z(i,1/2) mod 2 for each i (three estimates that must agree)
//! and ν_i = z(i, 1/2).

use crate::error::{invalid, CoreError, CoreResult};
use crate::point::first_pass::{first_pass, FirstPass};
use crate::point::gap_proof::{prove_gap, GapProof};
use crate::point::gap_search::{minimise, pick_starts, SearchSettings};
use crate::sampling::{Method, ProveGap, Sampling, AUTO_FLOOR_REL, AUTO_PROOF_SHARE, NEAR_FLOOR};
use crate::topology::indices::{combine, Indices};
use crate::topology::lattice_refine::lattice_planes_refine;
use crate::topology::lattice_z2::lattice_planes_initial;
use crate::topology::parity::{parity_indices, reason, trims, ParityResult};
use crate::topology::plane_flows::{certify, line_stats, refine_lines, resolve_planes, summarise};
pub use crate::topology::plane_flows::{plane_flow, planes, Plane, PlaneResult};
use crate::topology::wilson::BandStats;
use crate::zone::bloch::BlochSource;
use crate::zone::variation::VariationBound;
use crate::C64;

// Here, not in `sampling`: it reads the zone's variation bound, and `sampling` uses only `error`.
impl ProveGap {
    /// Whether to prove a gap estimated at `estimate` under `bound`.
    fn wanted(self, estimate: f64, bound: &VariationBound) -> bool {
        match self {
            Self::Never => false,
            Self::Always => true,
            Self::Auto => estimate < auto_proof_below(bound),
        }
    }
}

/// The gap under which [`ProveGap::Auto`] proves: [`AUTO_PROOF_SHARE`] of how far H can move
/// over the whole zone.
pub fn auto_proof_below(bound: &VariationBound) -> f64 {
    AUTO_PROOF_SHARE * bound.within(&[0.5; 3])
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
    /// proven lower bound of the direct gap over the zone (NaN: not proven)
    pub gap_proven: f64,
    /// Hamiltonians evaluated by the gap proof
    pub proof_evaluations: usize,
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
    /// finest spacing over the planes, as loop points × pump intervals of a uniform mesh
    pub mesh: (usize, usize),
    /// κ points of the lattice meshes of all planes
    pub points: usize,
}

/// Hamiltonians the gap proof of one point may evaluate before it gives up. With
/// `ProveGap::Always`, about a second of eigenvalue work at any size (the point is then
/// undefined, reason `GAP_NOT_PROVEN`). With `ProveGap::Auto`, twice the κ points of the
/// point's first pass, so the proof at most about doubles the call (the point then simply has
/// no proven gap, unless it is near the floor: then the full budget is spent as with `Always`).
fn proof_budget(dim: usize, n: usize, s: &Sampling, when: ProveGap) -> usize {
    match when {
        ProveGap::Always => {
            let per_matrix = (n * n * n).max(64); // ~ flops of one eigenvalue problem
            let budget = (4usize << 30) / per_matrix; // ~4 G flop-units
            budget.clamp(1 << 14, if dim == 3 { 1 << 21 } else { 1 << 19 })
        }
        _ => {
            let planes = if dim == 3 { 6 } else { 1 };
            let grid = if dim == 3 { s.gap_points.pow(3) } else { 0 };
            (2 * (planes * s.lines * s.loop_points + grid)).max(4096)
        }
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
        return Err(invalid!(
            "Z2 indices need a 2D or 3D model, got dim = {dim}"
        ));
    }
    if filling == 0 || filling >= n {
        return Err(invalid!("filling must lie in 1…{}, got {filling}", n - 1));
    }
    let want_wilson = s.method != Method::Lattice;
    let u_t = match (s.method, time_reversal) {
        (Method::Wilson, _) => None,
        (_, Some(u)) if u.len() == n * n => Some(u),
        _ => {
            return Err(invalid!(
                "the lattice method needs the {n}×{n} time-reversal matrix"
            ))
        }
    };
    // TRIMs (gaps, parity), a uniform bulk grid (3D) and the initial pump lines: one parallel
    // phase. When the gap search runs, every sampled κ point is a candidate start for it.
    let pl = planes(dim);
    let FirstPass {
        trims: (trim_stats, trim_e, trim_v),
        bulk_kappa: bulk_k,
        bulk_gaps: bulk_gap,
        bulk_stats,
        mut lines,
    } = first_pass(src, &pl, filling, s, want_wilson)?;
    let mut stats = trim_stats;
    let trim_gap: Vec<f64> = trim_e.iter().map(|e| e[filling] - e[filling - 1]).collect();
    // (candidates are collected only for a search that will use them)
    let searching = s.gap_starts > 0;
    let mut cand: Vec<(f64, [f64; 3])> = Vec::new();
    if searching {
        cand.extend(trims(dim).into_iter().zip(&trim_gap).map(|(k, &g)| (g, k)));
    }
    // (merged in the order the points were sampled: the same statistics as adding them in turn)
    stats.merge(&bulk_stats);
    if searching {
        for (g, k) in bulk_gap.iter().zip(bulk_k.chunks_exact(dim)) {
            let mut at = [0.0; 3];
            at[..dim].copy_from_slice(k);
            cand.push((*g, at));
        }
    }
    if want_wilson {
        line_stats(&lines, &mut stats, searching.then_some(&mut cand));
    }
    let mut lat = match u_t {
        Some(u) => {
            let lp: Vec<_> = pl.iter().map(|p| p.lattice()).collect();
            let n1 = s.loop_points + s.loop_points % 2;
            lattice_planes_initial(
                src,
                &lp,
                filling,
                u,
                (n1, s.lines - 1),
                &mut stats,
                &mut cand,
            )?
        }
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
    if searching && stats.min_direct >= floor_of(&stats) {
        let starts = pick_starts(&mut cand, s.gap_starts, dim);
        let set = SearchSettings::new(0.5 * sampled_spacing(dim, s), floor_of(&stats));
        let found = minimise(src, filling, &starts, &set, &mut stats)?;
        search_evaluations = found.evaluations;
        if found.gap < stats.min_direct {
            stats.min_direct = found.gap;
            stats.min_direct_at = found.kappa;
        }
    }
    // A proven bound of the gap over the whole zone: what the search found is an estimate.
    let mut gap_proven = f64::NAN;
    let mut proof_evaluations = 0;
    let mut unfinished = false;
    if stats.min_direct >= floor_of(&stats) {
        if let Some(bound) = src
            .variation()
            .filter(|b| s.prove_gap.wanted(stats.min_direct, b))
        {
            let floor = floor_of(&stats);
            let budget = proof_budget(dim, n, s, s.prove_gap);
            let mut proof = prove_gap(
                src,
                bound,
                filling,
                floor,
                stats.min_direct,
                budget,
                &mut stats,
            )?;
            proof_evaluations = proof.evaluations();
            // auto, near the floor: the cheap proof is not enough, and without a proof the
            // point would be undefined (NEAR_FLOOR below) — spend an eighth of the full budget
            // on it (the whole budget tripled the d–f demo's time, points next to its
            // transitions)
            if matches!(proof, GapProof::Unfinished { .. })
                && s.prove_gap == ProveGap::Auto
                && stats.min_direct < NEAR_FLOOR * floor
            {
                let full = proof_budget(dim, n, s, ProveGap::Always) / 8;
                proof = prove_gap(
                    src,
                    bound,
                    filling,
                    floor,
                    stats.min_direct,
                    full,
                    &mut stats,
                )?;
                proof_evaluations += proof.evaluations();
            }
            match proof {
                GapProof::Proven { lower, .. } => gap_proven = lower,
                GapProof::BelowFloor { gap, kappa, .. } => {
                    if gap < stats.min_direct {
                        stats.min_direct = gap;
                        stats.min_direct_at = kappa;
                    }
                }
                GapProof::Unfinished { .. } => unfinished = true,
            }
        }
    }
    // Adaptive pump lines, certificates and finer lattice meshes only where the point is
    // gapped: near a closing they would be spent on a flow that has no Z2 anyway.
    let gapped = stats.min_direct >= floor_of(&stats);
    if gapped && want_wilson {
        resolve_planes(src, &pl, &mut lines, filling, s, s.loop_points)?;
        refine_lines(src, &pl, &mut lines, filling, s, s.loop_points)?;
        line_stats(&lines, &mut stats, None);
    }
    let mut plane_res = summarise(&lines, s);
    if gapped && want_wilson && s.certify {
        certify(src, &pl, &mut plane_res, filling, s, &mut stats)?;
    }
    if let (true, Some(u)) = (gapped, u_t) {
        let lp: Vec<_> = pl.iter().map(|p| p.lattice()).collect();
        lattice_planes_refine(src, &lp, filling, u, &mut lat, &mut stats)?;
    }
    let floor = floor_of(&stats);
    // An unfinished proof makes the point undefined with `ProveGap::Always`; with `Auto` only
    // when the smallest gap found (by now: loops and lines too) is within NEAR_FLOOR floors —
    // there no cheap proof can succeed (boxes must shrink to (gap − floor)/slope) and a closing
    // between the sampled κ is most likely; elsewhere the point simply has no proven gap.
    let not_proven =
        unfinished && (s.prove_gap == ProveGap::Always || stats.min_direct < NEAR_FLOOR * floor);

    let parity = match inversion {
        Some(p) => Some(parity_indices(
            &trim_v, &trim_gap, p, n, filling, dim, floor,
        )?),
        None => None,
    };
    let blocking = if trim_gap.iter().any(|&g| g < floor) {
        reason::DEGENERATE_AT_TRIM
    } else if stats.min_direct < floor {
        reason::GAPLESS
    } else if not_proven {
        reason::GAP_NOT_PROVEN
    } else {
        reason::DEFINED
    };
    let lattice = (!lat.is_empty()).then(|| {
        let z: Vec<i8> = lat
            .iter()
            .map(|o| if o.admissible() { o.z2 } else { -1 })
            .collect();
        LatticeSummary {
            indices: combine(dim, &z, blocking, reason::LATTICE_MESH_TOO_COARSE),
            max_field: lat.iter().map(|o| o.max_field).fold(0.0, f64::max),
            min_link: lat.iter().map(|o| o.min_link).fold(f64::INFINITY, f64::min),
            mesh: lat.iter().map(|o| o.mesh).max().unwrap_or((0, 0)),
            points: lat.iter().map(|o| o.points).sum(),
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
    // (never "converged" where the gap blocks the indices: a flow that happened to close at
    // a gapless point is not an answer)
    let converged = blocking == reason::DEFINED
        && if want_wilson {
            plane_res.iter().all(|p| p.converged && !p.changed)
        } else {
            lat.iter().all(|o| o.admissible())
        };
    let (max_step, min_clearance) = if want_wilson {
        (
            plane_res.iter().map(|p| p.max_step).fold(0.0, f64::max),
            plane_res
                .iter()
                .map(|p| p.min_clearance)
                .fold(f64::INFINITY, f64::min),
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
        gap_proven,
        proof_evaluations,
        max_step,
        min_clearance,
        parity,
        lattice,
    })
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::zone::bloch::Hoppings;

    fn c(re: f64, im: f64) -> C64 {
        C64::new(re, im)
    }

    /// Qi–Wu–Zhang h(k) = sin kx σx + sin ky σy + (m + cos kx + cos ky) σz and its time-reversed
    /// partner h*(−k) as a 4-band block-diagonal model (Bernevig, Hughes & Zhang, Science 314,
    /// 1757 (2006)); Z2 = 1 for 0 < |m| < 2, 0 for |m| > 2 (Qi, Wu & Zhang, PRB 74, 085308 (2006)).
    pub(crate) fn bhz() -> Hoppings {
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
            prove_gap: ProveGap::Always,
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
            let s = Sampling {
                method,
                ..sampling()
            };
            for (m, want) in [(-3.0, 0), (-1.0, 1), (0.5, 1), (2.5, 0)] {
                let src = model.at(&[m]).unwrap();
                let r = evaluate_point(&src, 2, None, Some(&u_t), &s).unwrap();
                let lat = r.lattice.expect("lattice ran");
                assert_eq!(
                    (lat.indices.nu0, lat.indices.reason),
                    (want, reason::DEFINED),
                    "m = {m}"
                );
                assert_eq!(r.nu0, want, "m = {m}");
            }
        }
        // the lattice method cannot run without U_T
        let s = Sampling {
            method: Method::Both,
            ..sampling()
        };
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
            assert!(!r.converged, "m = {m}: a gapless point is never converged");
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
