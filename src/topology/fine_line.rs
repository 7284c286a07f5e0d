//! Wilson loops resolved to the gap: κ points placed where the occupied states turn.
//!
//! A loop of L evenly spaced κ points can step over a place where the occupied subspace turns
//! within a tiny stretch of κ (a loop that passes close to a near-closing): the discrete
//! parallel transport then aliases the turn and the centres come out wrong, however well the
//! pump lines are placed. Between neighbouring κ points a step of Δ along the loop changes H by
//! at most D(Δ) ([`VariationBound::along`]), so by the Davis–Kahan sin θ theorem (Davis &
//! Kahan, SIAM J. Numer. Anal. 7, 1 (1970)) the subspace turns by sin θ ≤ D/(g − D), with g the
//! larger direct gap at the step's ends. A loop whose worst step passes [`TURN_LIMIT`] is
//! recomputed here with the steps that fail split in two, again and again, so the points
//! crowd where the gap is small and nowhere else. A loop that needs more than
//! [`MAX_POINTS_PER_LOOP`] points, or steps shorter than [`MIN_STEP`], is marked unresolved.

use crate::error::CoreResult;
use crate::linalg::eigen::eigh_occupied_many_into;
use crate::linalg::matrix::{matmul, overlap, unitarise};
use crate::topology::wilson::{loop_centres, BandStats, LineResult, LineSamples, LineSpec};
use crate::zone::bloch::BlochSource;
use crate::zone::variation::{turn_bound, VariationBound, TURN_LIMIT};
use crate::C64;
use std::f64::consts::TAU;

/// Loop steps shorter than this are never split (the loop is then unresolved).
pub const MIN_STEP: f64 = 1e-10;

/// Cap on the κ points of one resolved loop.
pub const MAX_POINTS_PER_LOOP: usize = 1 << 14;

/// Whether a loop of `loop_points` even steps along `axis`, whose worst step has the gap
/// `min_step_gap` (`LineResult::min_step_gap`), must be resolved.
pub fn needs_resolution(
    bound: &VariationBound,
    axis: usize,
    loop_points: usize,
    min_step_gap: f64,
) -> bool {
    let d = bound.along(axis, 1.0 / loop_points as f64);
    // (a NaN gap counts as a step that must be resolved)
    let turn = turn_bound(d, min_step_gap);
    turn.is_nan() || turn > TURN_LIMIT
}

/// One κ point of a loop: its energies and occupied vectors (n × nocc, row-major).
struct Sample {
    t: f64,
    e: Vec<f64>,
    occ: Vec<C64>,
    /// the step to the next point passed the local bound (a step that passes is never split,
    /// so it is not checked again)
    settled: bool,
}

impl Sample {
    fn gap(&self, nocc: usize) -> f64 {
        self.e[nocc] - self.e[nocc - 1]
    }
}

/// Solve H at loop coordinates `ts` of line `l`.
fn solve(src: &dyn BlochSource, l: &LineSpec, ts: &[f64], nocc: usize) -> CoreResult<Vec<Sample>> {
    let (dim, n) = (src.dim(), src.norb());
    let nn = n * n;
    let mut kappa = Vec::with_capacity(ts.len() * dim);
    for &t in ts {
        let mut k = l.base;
        k[l.axis] = t;
        kappa.extend_from_slice(&k[..dim]);
    }
    let mut h = vec![C64::new(0.0, 0.0); ts.len() * nn];
    src.fill(&kappa, &mut h)?;
    let mut e = vec![0.0; ts.len() * n];
    let mut occ = vec![C64::new(0.0, 0.0); ts.len() * n * nocc];
    let mut work = vec![C64::new(0.0, 0.0); nn];
    eigh_occupied_many_into(&h, n, nocc, &mut e, &mut occ, &mut work)?;
    Ok(ts
        .iter()
        .enumerate()
        .map(|(i, &t)| Sample {
            t,
            e: e[i * n..(i + 1) * n].to_vec(),
            occ: occ[i * n * nocc..(i + 1) * n * nocc].to_vec(),
            settled: false,
        })
        .collect())
}

/// The Wilson loop of line `l`, its κ points placed so that no step turns the occupied states
/// by more than the Davis–Kahan bound allows, starting from `loop_points` even steps — solved
/// here, or given as `seed` (the even loop's own samples, `LineResult::samples`).
/// `positions` as for `wilson::evaluate_lines`.
pub fn resolve_line(
    src: &dyn BlochSource,
    l: &LineSpec,
    loop_points: usize,
    filling: usize,
    positions: Option<&[f64]>,
    bound: &VariationBound,
    seed: Option<&LineSamples>,
) -> CoreResult<LineResult> {
    let (dim, n, nocc) = (src.dim(), src.norb(), filling);
    let even: Vec<f64> = (0..loop_points)
        .map(|s| s as f64 / loop_points as f64)
        .collect();
    let mut pts = match seed {
        Some(sm) if sm.e.len() == loop_points * n && sm.occ.len() == loop_points * n * nocc => even
            .iter()
            .zip(sm.e.chunks_exact(n).zip(sm.occ.chunks_exact(n * nocc)))
            .map(|(&t, (e, occ))| Sample {
                t,
                e: e.to_vec(),
                occ: occ.to_vec(),
                settled: false,
            })
            .collect(),
        _ => solve(src, l, &even, nocc)?,
    };
    let mut resolved = true;
    loop {
        let count = pts.len();
        let mut mids = Vec::new();
        for i in 0..count {
            let j = (i + 1) % count;
            let dt = step_length(&pts, i);
            let g = pts[i].gap(nocc).max(pts[j].gap(nocc));
            let d = bound.along(l.axis, dt);
            if turn_bound(d, g) <= TURN_LIMIT || pts[i].settled {
                continue;
            }
            // the bound from the derivatives at the end with the larger gap, over a box that
            // holds the whole step (often two to three times smaller near a closing)
            let end = if pts[i].gap(nocc) >= pts[j].gap(nocc) {
                i
            } else {
                j
            };
            let mut k = l.base;
            k[l.axis] = pts[end].t;
            let mut h = [0.0; 3];
            h[l.axis] = dt;
            if let Some(d) = src.local_variation(&k[..dim], &h)? {
                if turn_bound(d, g) <= TURN_LIMIT {
                    pts[i].settled = true;
                    continue;
                }
            }
            if dt < MIN_STEP {
                resolved = false;
                continue;
            }
            mids.push((pts[i].t + 0.5 * dt).rem_euclid(1.0));
        }
        if mids.is_empty() {
            break;
        }
        if count + mids.len() > MAX_POINTS_PER_LOOP.max(loop_points) {
            resolved = false;
            break;
        }
        pts.extend(solve(src, l, &mids, nocc)?);
        pts.sort_by(|a, b| a.t.total_cmp(&b.t));
    }
    let mut stats = BandStats::default();
    let mut min_step_gap = f64::INFINITY;
    for (i, p) in pts.iter().enumerate() {
        let mut k = l.base;
        k[l.axis] = p.t;
        stats.add(&p.e, nocc, &k[..dim]);
        let next = &pts[(i + 1) % pts.len()];
        min_step_gap = min_step_gap.min(p.gap(nocc).max(next.gap(nocc)));
    }
    let (centres, min_singular) = transport(&pts, n, nocc, l.axis, positions)?;
    Ok(LineResult {
        centres,
        stats,
        min_singular,
        min_step_gap,
        resolved,
        samples: None,
    })
}

/// Length of the step from point i to the next one (the last step closes the loop).
fn step_length(pts: &[Sample], i: usize) -> f64 {
    if i + 1 < pts.len() {
        pts[i + 1].t - pts[i].t
    } else {
        1.0 - pts[i].t + pts[0].t
    }
}

/// Hybrid Wannier centres (ascending, in [0, 1)) of the ordered product of the polar factors
/// of the overlaps along the points, closed in the periodic gauge; and the smallest singular
/// value of any overlap.
fn transport(
    pts: &[Sample],
    n: usize,
    nocc: usize,
    axis: usize,
    positions: Option<&[f64]>,
) -> CoreResult<(Vec<f64>, f64)> {
    let mut w = vec![C64::new(0.0, 0.0); nocc * nocc];
    for a in 0..nocc {
        w[a * nocc + a] = C64::new(1.0, 0.0);
    }
    let mut m = vec![C64::new(0.0, 0.0); nocc * nocc];
    let mut tmp = m.clone();
    let mut scaled = vec![C64::new(0.0, 0.0); n * nocc];
    let mut min_singular = f64::INFINITY;
    for i in 0..pts.len() {
        let (from, to) = (&pts[i].occ, &pts[(i + 1) % pts.len()].occ);
        match positions {
            None => overlap(from, to, n, nocc, nocc, &mut m),
            Some(p) => {
                // tight-binding convention: E = diag(exp(−2πi τ Δ)) for a step Δ
                let dt = step_length(pts, i);
                for (idx, x) in scaled.iter_mut().enumerate() {
                    let tau = p[axis * n + idx / nocc];
                    *x = to[idx] * C64::from_polar(1.0, -TAU * tau * dt);
                }
                overlap(from, &scaled, n, nocc, nocc, &mut m);
            }
        }
        min_singular = min_singular.min(unitarise(&mut m, nocc)?);
        tmp.copy_from_slice(&w);
        matmul(&tmp, &m, &mut w, nocc, nocc, nocc);
    }
    let centres = loop_centres(&w, nocc, min_singular)?;
    Ok((centres, min_singular))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::topology::wilson::evaluate_line;
    use crate::topology::wilson::tests::random_model;

    /// On a model with a large gap the resolved loop is the even loop: same centres.
    #[test]
    fn agrees_with_the_even_loop_where_nothing_turns_fast() {
        for seed in 0..4 {
            let src = random_model(4, seed).at(&[]).unwrap();
            let bound = src.variation().unwrap().clone();
            let l = LineSpec {
                base: [0.0, 0.3, 0.0],
                axis: 0,
            };
            let even = evaluate_line(&src, &l, 400, 2, None).unwrap();
            let fine = resolve_line(&src, &l, 400, 2, None, &bound, None).unwrap();
            if needs_resolution(&bound, 0, 400, even.min_step_gap) {
                continue; // a random model may have a small gap somewhere on the line
            }
            for (a, b) in even.centres.iter().zip(&fine.centres) {
                assert!((a - b).abs() < 1e-9, "{a} vs {b}");
            }
        }
    }

    /// Started from the even loop's own samples (`LineResult::samples`), the resolution
    /// places the same points and gives the same centres as when it solves them itself, on
    /// lines that need it (near-closing two-band chain) and on random models.
    #[test]
    fn a_seeded_resolution_is_the_unseeded_one() {
        let mut seen = 0;
        for seed in 0..6 {
            let src = random_model(4, seed).at(&[]).unwrap();
            let bound = src.variation().unwrap().clone();
            for (base, axis) in [([0.0, 0.3, 0.0], 0), ([0.25, 0.0, 0.0], 1)] {
                let l = LineSpec { base, axis };
                let even = evaluate_line(&src, &l, 16, 2, None).unwrap();
                let sm = even
                    .samples
                    .as_ref()
                    .expect("a 4-band line keeps its samples");
                assert_eq!((sm.e.len(), sm.occ.len()), (16 * 4, 16 * 4 * 2));
                let cold = resolve_line(&src, &l, 16, 2, None, &bound, None).unwrap();
                let warm = resolve_line(&src, &l, 16, 2, None, &bound, Some(sm)).unwrap();
                assert_eq!(cold.resolved, warm.resolved);
                assert!((cold.min_step_gap - warm.min_step_gap).abs() < 1e-12);
                for (a, b) in cold.centres.iter().zip(&warm.centres) {
                    let d = (a - b).abs();
                    assert!(d.min(1.0 - d) < 1e-9, "seed {seed}: {a} vs {b}");
                }
                seen += usize::from(needs_resolution(&bound, axis, 16, even.min_step_gap));
            }
        }
        assert!(
            seen > 0,
            "no line needed the resolution: the test proves nothing"
        );
        // samples of the wrong size are not used (the loop is solved afresh)
        let src = random_model(4, 0).at(&[]).unwrap();
        let bound = src.variation().unwrap().clone();
        let l = LineSpec {
            base: [0.0, 0.3, 0.0],
            axis: 0,
        };
        let short = LineSamples::default();
        let cold = resolve_line(&src, &l, 16, 2, None, &bound, None).unwrap();
        let bad = resolve_line(&src, &l, 16, 2, None, &bound, Some(&short)).unwrap();
        assert_eq!(cold.centres, bad.centres);
    }

    /// A two-band chain H(k) = sin k σx + (m + cos k) σz (the Su–Schrieffer–Heeger-like
    /// winding of the Qi–Wu–Zhang block on one line; Qi, Wu & Zhang, PRB 74, 085308 (2006)):
    /// the Berry phase of the lower band is π for |m| < 1 and 0 for |m| > 1 (common practice,
    /// no source). Close to m = 1 the even loop of 8 points has too few points near k = π; the
    /// resolved loop gets it right on both sides.
    #[test]
    fn resolves_a_turn_the_even_loop_steps_over() {
        use crate::zone::bloch::Hoppings;
        let c = |re: f64, im: f64| C64::new(re, im);
        let z = c(0.0, 0.0);
        // on-site m σz (coefficient), hopping at R = 1: (σz − iσx)/2
        let t = vec![
            c(1.0, 0.0),
            z,
            z,
            c(-1.0, 0.0),
            c(0.5, 0.0),
            c(0.0, -0.5),
            c(0.0, -0.5),
            c(-0.5, 0.0),
        ];
        let hop = Hoppings::new(1, 2, 1, vec![0, 1], t, vec![0, -1]).unwrap();
        let l = LineSpec {
            base: [0.0; 3],
            axis: 0,
        };
        for (m, want) in [(0.999, 0.5), (1.001, 0.0), (0.99999, 0.5), (1.00001, 0.0)] {
            let src = hop.at(&[m]).unwrap();
            let bound = src.variation().unwrap().clone();
            let fine = resolve_line(&src, &l, 8, 1, None, &bound, None).unwrap();
            assert!(fine.resolved, "m = {m}");
            let x = fine.centres[0];
            assert!(
                (x - want).abs() < 0.05 || (want == 0.0 && (x - 1.0).abs() < 0.05),
                "m = {m}: centre {x}, want {want}"
            );
        }
        // at m = 1 the gap closes on the line: unresolved, never a centre to trust
        let src = hop.at(&[1.0]).unwrap();
        let bound = src.variation().unwrap().clone();
        let fine = resolve_line(&src, &l, 8, 1, None, &bound, None).unwrap();
        assert!(!fine.resolved);
    }
}
