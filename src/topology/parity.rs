//! Fu–Kane parity criterion (Fu & Kane, Phys. Rev. B 76, 045302 (2007)).
//!
//! At each time-reversal-invariant momentum Γ the occupied states are eigenstates of the
//! inversion matrix P (which commutes with H(Γ) in the periodic convention). Kramers partners
//! share a parity, so δ_Γ = (−1)^{n_−/2} with n_− the number of occupied states of parity −1.
//! (−1)^{ν0} = Π_Γ δ_Γ over all TRIMs; (−1)^{ν_i} = Π over the TRIMs with κ_i = 1/2.

use crate::error::CoreResult;
use crate::linalg::matrix::{hermitian_eigenvalues, matmul};
use crate::C64;

/// Why a result is undefined. 0 means defined. Shared by the Wilson-loop and parity results.
pub mod reason {
    pub const DEFINED: u8 = 0;
    pub const GAPLESS: u8 = 1;
    pub const DEGENERATE_AT_TRIM: u8 = 2;
    pub const NU0_ESTIMATES_DISAGREE: u8 = 3;
    pub const NOT_CONVERGED: u8 = 4;
    pub const INVERSION_MIXES_FILLING: u8 = 5;
    pub const ODD_KRAMERS_COUNT: u8 = 6;
    // 7 and 8 are set by the Python front (symmetry broken at the point)
    /// a plane's Z2 changed when the loops were recomputed with twice the points
    pub const CHANGES_WITH_LOOP_POINTS: u8 = 9;
    /// the lattice field or links stayed too rough on the finest lattice mesh
    pub const LATTICE_MESH_TOO_COARSE: u8 = 10;
    /// the direct gap could not be proven above the floor over the whole zone
    pub const GAP_NOT_PROVEN: u8 = 11;
}

/// The 2^dim TRIMs in reduced coordinates, in binary order (bit i ↔ κ_i = 1/2).
pub fn trims(dim: usize) -> Vec<[f64; 3]> {
    (0..1usize << dim)
        .map(|b| {
            let mut k = [0.0; 3];
            for (i, ki) in k.iter_mut().enumerate().take(dim) {
                if b >> i & 1 == 1 {
                    *ki = 0.5;
                }
            }
            k
        })
        .collect()
}

#[derive(Clone, Debug, PartialEq)]
pub struct ParityResult {
    pub nu0: i8,
    pub nu: [i8; 3],
    pub reason: u8,
    /// occupied states of odd parity at each TRIM (−1 where undefined)
    pub odd_count: Vec<i32>,
}

/// Parity indices from the occupied eigenvectors (n × nocc, row-major) at each TRIM, in the
/// order of [`trims`], and the direct gap at each TRIM. `p` must satisfy P² = 1.
pub fn parity_indices(
    occ: &[Vec<C64>],
    trim_gap: &[f64],
    p: &[C64],
    n: usize,
    nocc: usize,
    dim: usize,
    floor: f64,
) -> CoreResult<ParityResult> {
    let mut odd_count = vec![-1; occ.len()];
    let mut reason = reason::DEFINED;
    let mut pu = vec![C64::new(0.0, 0.0); n * nocc];
    for (g, u) in occ.iter().enumerate() {
        if trim_gap[g] < floor {
            reason = reason.max(reason::DEGENERATE_AT_TRIM);
            continue;
        }
        // P_occ = U† P U (Hermitian since P is Hermitian and unitary)
        matmul(p, u, &mut pu, n, n, nocc);
        let mut pocc = vec![C64::new(0.0, 0.0); nocc * nocc];
        for a in 0..nocc {
            for b in 0..nocc {
                let mut s = C64::new(0.0, 0.0);
                for i in 0..n {
                    s += u[i * nocc + a].conj() * pu[i * nocc + b];
                }
                pocc[a * nocc + b] = s;
            }
        }
        let ev = hermitian_eigenvalues(&pocc, nocc)?;
        if ev.iter().any(|x| (x.abs() - 1.0).abs() > 1e-6) {
            reason = reason.max(reason::INVERSION_MIXES_FILLING);
            continue;
        }
        let minus = ev.iter().filter(|&&x| x < 0.0).count() as i32;
        if minus % 2 != 0 {
            reason = reason.max(reason::ODD_KRAMERS_COUNT);
            continue;
        }
        odd_count[g] = minus;
    }
    if reason != reason::DEFINED {
        return Ok(ParityResult {
            nu0: -1,
            nu: [-1; 3],
            reason,
            odd_count,
        });
    }
    let pairs = |sel: &dyn Fn(usize) -> bool| -> i8 {
        let s: i32 = (0..occ.len())
            .filter(|&g| sel(g))
            .map(|g| odd_count[g] / 2)
            .sum();
        (s % 2) as i8
    };
    let nu0 = pairs(&|_| true);
    let mut nu = [-1i8; 3];
    if dim == 3 {
        for (i, v) in nu.iter_mut().enumerate() {
            *v = pairs(&|g| g >> i & 1 == 1);
        }
    }
    Ok(ParityResult {
        nu0,
        nu,
        reason,
        odd_count,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn trim_order() {
        let t = trims(3);
        assert_eq!(t.len(), 8);
        assert_eq!(t[5], [0.5, 0.0, 0.5]);
        assert_eq!(trims(2).len(), 4);
    }

    /// Two occupied states of odd parity at one TRIM only → ν0 = 1.
    #[test]
    fn single_inverted_trim() {
        let n = 4;
        let z = C64::new(0.0, 0.0);
        let one = C64::new(1.0, 0.0);
        let mut p = vec![z; 16];
        for (i, s) in [1.0, 1.0, -1.0, -1.0].iter().enumerate() {
            p[i * n + i] = C64::new(*s, 0.0);
        }
        // occupied = orbitals 0,1 (even) everywhere except TRIM 0, where they are 2,3 (odd)
        let even: Vec<C64> = vec![one, z, z, one, z, z, z, z];
        let odd: Vec<C64> = vec![z, z, z, z, one, z, z, one];
        let mut occ = vec![even.clone(); 8];
        occ[0] = odd;
        let r = parity_indices(&occ, &[1.0; 8], &p, n, 2, 3, 1e-9).unwrap();
        assert_eq!((r.nu0, r.nu), (1, [0, 0, 0]));
        // the odd-parity count is reported per TRIM as counted (the `odd_parity_states` variable)
        assert_eq!(r.odd_count, vec![2, 0, 0, 0, 0, 0, 0, 0]);
        let r = parity_indices(&occ, &[0.0; 8], &p, n, 2, 3, 1e-9).unwrap();
        assert_eq!(r.reason, reason::DEGENERATE_AT_TRIM);
    }

    /// Odd pairs at the TRIM κ = (0, ½, ½) only: ν0 = 1 and the weak indices are the parities
    /// of the TRIMs with κ_i = ½, so (1;011) — each axis reads its own bit of the TRIM order.
    #[test]
    fn weak_indices_read_the_trims_of_their_own_axis() {
        let n = 4;
        let z = C64::new(0.0, 0.0);
        let one = C64::new(1.0, 0.0);
        let mut p = vec![z; 16];
        for (i, s) in [1.0, 1.0, -1.0, -1.0].iter().enumerate() {
            p[i * n + i] = C64::new(*s, 0.0);
        }
        let even: Vec<C64> = vec![one, z, z, one, z, z, z, z];
        let odd: Vec<C64> = vec![z, z, z, z, one, z, z, one];
        for (inverted, nu) in [(6, [0, 1, 1]), (1, [1, 0, 0]), (4, [0, 0, 1])] {
            let mut occ = vec![even.clone(); 8];
            occ[inverted] = odd.clone();
            let r = parity_indices(&occ, &[1.0; 8], &p, n, 2, 3, 1e-9).unwrap();
            assert_eq!((r.nu0, r.nu), (1, nu), "TRIM {inverted} inverted");
        }
    }

    /// Occupied states that are not parity eigenstates — (even + odd)/√2 — give ⟨P⟩ = 0, not
    /// ±1: the inversion mixes occupied and empty states, and the parity result is undefined.
    #[test]
    fn states_of_mixed_parity_are_refused() {
        let n = 4;
        let z = C64::new(0.0, 0.0);
        let h = C64::new(std::f64::consts::FRAC_1_SQRT_2, 0.0);
        let mut p = vec![z; 16];
        for (i, s) in [1.0, 1.0, -1.0, -1.0].iter().enumerate() {
            p[i * n + i] = C64::new(*s, 0.0);
        }
        // column 0 = (e0 + e2)/√2, column 1 = (e1 + e3)/√2 (n × 2, row-major)
        let mixed: Vec<C64> = vec![h, z, z, h, h, z, z, h];
        let occ = vec![mixed; 8];
        let r = parity_indices(&occ, &[1.0; 8], &p, n, 2, 3, 1e-9).unwrap();
        assert_eq!(r.reason, reason::INVERSION_MIXES_FILLING);
        assert_eq!((r.nu0, r.nu), (-1, [-1; 3]));
    }
}
