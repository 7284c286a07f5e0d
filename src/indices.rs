//! From the Z2 of each time-reversal-invariant plane to the indices (ν0; ν1ν2ν3), shared by
//! the Wilson-loop and the lattice method so both are read out the same way.

use crate::parity::reason;

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

#[cfg(test)]
mod tests {
    use super::*;

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
}
