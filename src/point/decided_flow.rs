//! The hybrid Wannier centre flow that decided one plane's Z2, for plots and inspection.
//!
//! It runs the same steps as [`crate::point::engine::evaluate_point`] does for the planes of a gapped
//! point — the evenly spaced initial pump lines, adaptive insertion until every neighbouring
//! pair passes the refinement test (loops resolved to the gap where needed), and, when the flow is tight and the certificate is asked
//! for, the same again with twice the loop points — on one plane, and returns its lines
//! instead of only their Z2. It is built from the public steps of [`crate::topology::plane_flows`] and
//! changes nothing in them, so it follows them when they change; a Python test compares its
//! Z2 with the one `invariants` reports.

use crate::error::CoreResult;
use crate::sampling::Sampling;
use crate::topology::plane_flows::{
    initial_lines, is_tight, refine_lines, resolve_planes, summarise, Plane, PlaneLines,
};
use crate::zone::bloch::BlochSource;

/// One plane's decided flow: every pump line, ascending, with its centres.
#[derive(Clone, Debug, PartialEq)]
pub struct DecidedFlow {
    /// pump coordinates of the lines, ascending in 0 … 1/2
    pub pump: Vec<f64>,
    /// centres (fractions of the loop's lattice vector, in [0, 1)), `filling` per line
    pub centres: Vec<f64>,
    /// the plane's Z2 from these lines: 0, 1, or −1 when not converged or when the certificate
    /// run disagreed with the first
    pub z2: i8,
    /// κ points per Wilson loop of these lines (doubled when the certificate ran)
    pub loop_points: usize,
}

/// Initial lines and adaptive insertion on one plane at `loop_points` per loop.
fn adaptive(
    src: &dyn BlochSource,
    plane: Plane,
    filling: usize,
    s: &Sampling,
    loop_points: usize,
) -> CoreResult<(PlaneLines, i8, bool)> {
    let one = [plane];
    let mut lines = initial_lines(src, &one, filling, s, loop_points)?;
    resolve_planes(src, &one, &mut lines, filling, s, loop_points)?;
    refine_lines(src, &one, &mut lines, filling, s, loop_points)?;
    let res = summarise(&lines, s).remove(0);
    let tight = is_tight(&res, s);
    Ok((lines.remove(0), res.z2, tight))
}

/// The flow of `plane` that decides its Z2 at sampling `s` (see the module notes).
pub fn decided_flow(
    src: &dyn BlochSource,
    filling: usize,
    plane: Plane,
    s: &Sampling,
) -> CoreResult<DecidedFlow> {
    s.validate()?;
    let (lines, z2, tight) = adaptive(src, plane, filling, s, s.loop_points)?;
    if !(s.certify && tight) {
        return Ok(DecidedFlow {
            pump: lines.pump().to_vec(),
            centres: lines.centres().to_vec(),
            z2,
            loop_points: s.loop_points,
        });
    }
    // the certificate's finer flow is the one the index comes from (as in `certify`)
    let fine = 2 * s.loop_points;
    let (lines, again, _) = adaptive(src, plane, filling, s, fine)?;
    Ok(DecidedFlow {
        pump: lines.pump().to_vec(),
        centres: lines.centres().to_vec(),
        z2: if again == z2 { again } else { -1 },
        loop_points: fine,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::point::engine::evaluate_point;
    use crate::point::engine::tests::bhz;
    use crate::sampling::Method;
    use crate::topology::plane_flows::{initial_pump, planes};

    fn sampling() -> Sampling {
        Sampling {
            loop_points: 12,
            lines: 5,
            max_lines: 200,
            step_limit: 0.08,
            gap_floor: 0.0,
            gap_points: 0,
            gap_starts: 3,
            method: Method::Wilson,
            certify: true,
            prove_gap: crate::sampling::ProveGap::Never,
        }
    }

    #[test]
    fn decided_flow_carries_the_z2_of_the_point() {
        let model = bhz();
        let s = sampling();
        for (m, want) in [(-3.0, 0), (-1.0, 1), (-0.3, 1), (1.7, 1), (2.5, 0)] {
            let src = model.at(&[m]).unwrap();
            let point = evaluate_point(&src, 2, None, None, &s).unwrap();
            let flow = decided_flow(&src, 2, planes(2)[0], &s).unwrap();
            assert_eq!(flow.z2, want, "m = {m}");
            assert_eq!(point.nu0, want, "m = {m}");
            assert_eq!(flow.centres.len(), 2 * flow.pump.len());
            assert!(flow.pump.windows(2).all(|w| w[0] < w[1]), "ascending pump");
            // every initial line is kept; near the band inversion lines were inserted
            for t in initial_pump(&s) {
                assert!(flow.pump.contains(&t), "initial line {t} kept");
            }
            assert!(flow.centres.iter().all(|&x| (0.0..1.0).contains(&x)));
        }
    }
}
