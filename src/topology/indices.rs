//! From the Z2 of each time-reversal-invariant plane to the indices (ν0; ν1ν2ν3), shared by
//! the Wilson-loop and the lattice method so both are read out the same way.

use crate::topology::parity::reason;

/// Indices of one method at one point; −1 where undefined.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Indices {
    pub nu0: i8,
    pub nu: [i8; 3],
    pub z2_plane: [[i8; 2]; 3],
    pub nu0_by_axis: [i8; 3],
    pub reason: u8,
}

/// Combine the plane results (order of `engine::planes`) into indices. `blocking` is the
/// reason that already makes the point undefined (gap, TRIM degeneracy), or `DEFINED`;
/// `unresolved` is the reason to give when some plane has no answer.
pub fn combine(dim: usize, plane_z2: &[i8], blocking: u8, unresolved: u8) -> Indices {
    let mut z2_plane = [[-1i8; 2]; 3];
    let mut nu0_by_axis = [-1i8; 3];
    let mut nu = [-1i8; 3];
    let mut nu0;
    if dim == 3 {
        for i in 0..3 {
            z2_plane[i] = [plane_z2[2 * i], plane_z2[2 * i + 1]];
            if z2_plane[i][0] >= 0 && z2_plane[i][1] >= 0 {
                nu0_by_axis[i] = (z2_plane[i][0] + z2_plane[i][1]) % 2;
                nu[i] = z2_plane[i][1];
            }
        }
        nu0 = nu0_by_axis[0];
    } else {
        nu0 = plane_z2[0];
    }
    let why = if blocking != reason::DEFINED {
        blocking
    } else if plane_z2.iter().any(|&z| z < 0) {
        unresolved
    } else if dim == 3 && !(nu0_by_axis[0] == nu0_by_axis[1] && nu0_by_axis[1] == nu0_by_axis[2]) {
        reason::NU0_ESTIMATES_DISAGREE
    } else {
        reason::DEFINED
    };
    if why != reason::DEFINED {
        nu0 = -1;
        nu = [-1; 3];
    }
    Indices {
        nu0,
        nu,
        z2_plane,
        nu0_by_axis,
        reason: why,
    }
}

/// Phase codes of a result (the `phase` variable; names in Python's `dataset.PHASES`).
pub mod phase {
    pub const UNDEFINED: i8 = -1;
    pub const TRIVIAL: i8 = 0;
    pub const WEAK: i8 = 1;
    pub const STRONG: i8 = 2;
    pub const Z2_ODD_2D: i8 = 3;
    /// added to the phase of the gapped band manifold when the bands overlap in energy (a
    /// negative indirect gap): a metal whose occupied bands carry those indices
    pub const METAL_OFFSET: i8 = 10;
}

/// The phase of indices (ν0; ν) — in 2D only ν0 counts: undefined where ν0 is; a strong
/// topological insulator where ν0 = 1 (3D); weak where ν0 = 0 and some ν_i = 1 (3D); Z2-odd
/// where ν0 = 1 (2D); trivial otherwise.
pub fn phase_of(dim: usize, nu0: i8, nu: [i8; 3]) -> i8 {
    match (nu0, dim == 3) {
        (n, _) if n < 0 => phase::UNDEFINED,
        (1, true) => phase::STRONG,
        (1, false) => phase::Z2_ODD_2D,
        (_, true) if nu.contains(&1) => phase::WEAK,
        _ => phase::TRIVIAL,
    }
}

/// The phase with band overlap marked: a defined phase of a point whose indirect gap is
/// negative (the occupied bands overlap the empty ones in energy, so the point is a metal
/// although the direct gap is open everywhere) becomes `phase + METAL_OFFSET`.
pub fn with_overlap(phase: i8, gap_indirect: f64) -> i8 {
    if phase >= 0 && gap_indirect < 0.0 {
        phase + phase::METAL_OFFSET
    } else {
        phase
    }
}

/// Whether two sets of indices agree (the `parity_agrees` and `methods_agree` variables): 1
/// equal, 0 different, −1 where either ν0 is undefined; the weak indices count in 3D only.
pub fn agreement(dim: usize, a: (i8, [i8; 3]), b: (i8, [i8; 3])) -> i8 {
    if a.0 < 0 || b.0 < 0 {
        -1
    } else {
        i8::from(a.0 == b.0 && (dim != 3 || a.1 == b.1))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every (ν0; ν1ν2ν3) with entries −1, 0, 1.
    fn all_indices() -> Vec<(i8, [i8; 3])> {
        let v = [-1i8, 0, 1];
        let mut out = Vec::new();
        for a in v {
            for b in v {
                for c in v {
                    for d in v {
                        out.push((a, [b, c, d]));
                    }
                }
            }
        }
        out
    }

    #[test]
    fn phase_follows_its_definition_for_every_index_combination() {
        for (nu0, nu) in all_indices() {
            // the definitions, one case at a time
            let mut some_weak_odd = false;
            for x in nu {
                some_weak_odd |= x == 1;
            }
            let want_3d = if nu0 < 0 {
                -1
            } else if nu0 == 1 {
                2
            } else if some_weak_odd {
                1
            } else {
                0
            };
            let want_2d = match nu0 {
                -1 => -1,
                1 => 3,
                _ => 0,
            };
            assert_eq!(phase_of(3, nu0, nu), want_3d, "{nu0} {nu:?}");
            assert_eq!(phase_of(2, nu0, nu), want_2d, "{nu0} {nu:?}");
        }
    }

    #[test]
    fn agreement_follows_its_definition_for_every_pair() {
        let all = all_indices();
        for &a in &all {
            for &b in &all {
                let comparable = a.0 >= 0 && b.0 >= 0;
                let want_3d = if comparable { (a == b) as i8 } else { -1 };
                let want_2d = if comparable { (a.0 == b.0) as i8 } else { -1 };
                assert_eq!(agreement(3, a, b), want_3d, "{a:?} {b:?}");
                assert_eq!(agreement(2, a, b), want_2d, "{a:?} {b:?}");
            }
        }
    }

    /// A plane without an answer leaves its axis undefined (−1) in every array the point
    /// reports (`nu0_by_axis`, `z2_plane`), not only in ν0, whatever the other plane of that
    /// axis says; the other axes keep theirs.
    #[test]
    fn unresolved_plane_leaves_its_axis_undefined() {
        let r = combine(
            3,
            &[1, 0, -1, 1, 0, -1],
            reason::DEFINED,
            reason::NOT_CONVERGED,
        );
        assert_eq!(r.nu0_by_axis, [1, -1, -1]);
        assert_eq!(r.z2_plane, [[1, 0], [-1, 1], [0, -1]]);
        assert_eq!(
            (r.nu0, r.nu, r.reason),
            (-1, [-1; 3], reason::NOT_CONVERGED)
        );
    }

    /// Any one of the three ν0 estimates differing from the others makes the point undefined,
    /// with every index −1 (not only ν0).
    #[test]
    fn any_odd_one_out_among_the_nu0_estimates_is_refused() {
        for planes in [[1, 0, 1, 0, 0, 0], [0, 0, 1, 0, 1, 0], [1, 0, 0, 0, 1, 0]] {
            let r = combine(3, &planes, reason::DEFINED, reason::NOT_CONVERGED);
            assert_eq!(r.reason, reason::NU0_ESTIMATES_DISAGREE, "{planes:?}");
            assert_eq!((r.nu0, r.nu), (-1, [-1; 3]), "{planes:?}");
        }
    }

    /// z(i, 0) = 0 and z(i, ½) = 1 on every axis: (1;111) — the order of the two planes in
    /// ν0 = z(i, 0) + z(i, ½) mod 2 and ν_i = z(i, ½) matters (Fu & Kane, Phys. Rev. B 76,
    /// 045302 (2007): the Wilson–Dirac model for 1 < m < 3).
    #[test]
    fn odd_top_planes_give_the_strong_phase_with_odd_weak_indices() {
        let r = combine(
            3,
            &[0, 1, 0, 1, 0, 1],
            reason::DEFINED,
            reason::NOT_CONVERGED,
        );
        assert_eq!((r.nu0, r.nu, r.nu0_by_axis), (1, [1, 1, 1], [1, 1, 1]));
        assert_eq!(r.reason, reason::DEFINED);
    }

    #[test]
    fn strong_weak_and_undefined() {
        // z(1,0)=1, z(1,½)=0 for every axis: (1;000)
        let r = combine(
            3,
            &[1, 0, 1, 0, 1, 0],
            reason::DEFINED,
            reason::NOT_CONVERGED,
        );
        assert_eq!((r.nu0, r.nu, r.reason), (1, [0, 0, 0], reason::DEFINED));
        // all planes odd: (0;111)
        let r = combine(3, &[1; 6], reason::DEFINED, reason::NOT_CONVERGED);
        assert_eq!((r.nu0, r.nu), (0, [1, 1, 1]));
        // inconsistent ν0 estimates
        let r = combine(
            3,
            &[1, 0, 0, 0, 1, 0],
            reason::DEFINED,
            reason::NOT_CONVERGED,
        );
        assert_eq!((r.nu0, r.reason), (-1, reason::NU0_ESTIMATES_DISAGREE));
        let r = combine(2, &[-1], reason::DEFINED, reason::NOT_CONVERGED);
        assert_eq!((r.nu0, r.reason), (-1, reason::NOT_CONVERGED));
        let r = combine(2, &[1], reason::GAPLESS, reason::NOT_CONVERGED);
        assert_eq!((r.nu0, r.reason), (-1, reason::GAPLESS));
    }

    /// Band overlap: a defined phase with a negative indirect gap becomes the metal code of
    /// its bands — 10 trivial, 11 weak, 12 strong, 13 Z2-odd 2D (the names the Dataset's
    /// flag table gives codes 10–13: metal_with_trivial_bands, ..._weak_topological_...,
    /// ..._strong_topological_..., ..._z2_odd_2d_bands); an undefined phase stays undefined,
    /// and a gap of zero (touching, not overlapping) or positive keeps the phase.
    #[test]
    fn overlapping_bands_give_the_metal_code_of_the_phase() {
        let table = [
            (phase::TRIVIAL, 10),
            (phase::WEAK, 11),
            (phase::STRONG, 12),
            (phase::Z2_ODD_2D, 13),
        ];
        for (p, metal) in table {
            assert_eq!(with_overlap(p, -0.3), metal, "phase {p}");
            assert_eq!(with_overlap(p, -1e-12), metal, "phase {p}");
            for gap in [0.0, 1e-12, 0.7, f64::NAN] {
                assert_eq!(with_overlap(p, gap), p, "phase {p}, gap {gap}");
            }
        }
        for gap in [-0.3, 0.0, 0.7] {
            assert_eq!(with_overlap(phase::UNDEFINED, gap), phase::UNDEFINED);
        }
    }
}
