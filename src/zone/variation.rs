//! How far H(κ) can move over a box of κ: the bound behind the certified gap, the loop
//! resolution and the pump-line insertion near a gap closing.
//!
//! For a tight-binding model H(κ) = H₀ + Σ_R (M_R e^{iφ_R} + M_R† e^{−iφ_R}), φ_R = 2π κ·R, so
//! for |κ_i − c_i| ≤ h_i
//!
//!   ‖H(κ) − H(c)‖₂ ≤ Σ_R 2‖M_R‖₂ |e^{iΔφ_R} − 1| ≤ Σ_R 2‖M_R‖₂ · 2 sin(min(π Σ_i |R_i| h_i, π/2)),
//!
//! because |Δφ_R| ≤ 2π Σ_i |R_i| h_i and |e^{ix} − 1| = 2|sin(x/2)| (common practice, no
//! source: the triangle inequality term by term). By Weyl's inequality no eigenvalue moves by
//! more than that bound, so the direct gap moves by at most twice it; by the Davis–Kahan
//! sin θ theorem (Davis & Kahan, SIAM J. Numer. Anal. 7, 1 (1970)) the occupied subspace turns
//! by sin θ ≤ D/(g − D) for a bound D and a gap g at one end ([`turn_bound`]).
//!
//! A model given as a function carries no hopping list; its user may give Lipschitz constants
//! instead (‖H(κ) − H(c)‖₂ ≤ Σ_i L_i |κ_i − c_i|), see [`VariationBound::lipschitz`].

use crate::error::{invalid, CoreResult};
use crate::linalg::matrix::hermitian_eigenvalues;
use crate::C64;

/// Relative safety margin on computed norms (rounding in the eigenvalues of M†M).
const NORM_MARGIN: f64 = 1e-12;

/// Upper bounds of ‖H(κ) − H(c)‖₂ over boxes of κ.
#[derive(Clone, Debug, PartialEq)]
pub enum VariationBound {
    /// one entry per lattice vector: (|R_1|, |R_2|, |R_3|) and 2‖M_R‖₂
    Hoppings(Vec<([f64; 3], f64)>),
    /// a Lipschitz constant per reduced axis
    Lipschitz([f64; 3]),
}

impl VariationBound {
    /// The bound of H(κ) = onsite + Σ_R (C_R cos φ_R + S_R sin φ_R), C_R = M_R + M_R†,
    /// S_R = i(M_R − M_R†) (the folded form of `bloch::Bloch`): `rs` holds the lattice vectors
    /// (dim each), `cos_part`/`sin_part` the n×n matrices C_R and S_R.
    pub fn from_folded(
        dim: usize,
        n: usize,
        rs: &[f64],
        cos_part: &[C64],
        sin_part: &[C64],
    ) -> CoreResult<Self> {
        let nn = n * n;
        let mut out = Vec::with_capacity(rs.len() / dim.max(1));
        let mut m = vec![C64::new(0.0, 0.0); nn];
        let mut mtm = vec![C64::new(0.0, 0.0); nn];
        for ((r, c), s) in rs
            .chunks_exact(dim)
            .zip(cos_part.chunks_exact(nn))
            .zip(sin_part.chunks_exact(nn))
        {
            // M = (C − iS)/2
            for ((mi, ci), si) in m.iter_mut().zip(c).zip(s) {
                *mi = (ci - si * C64::new(0.0, 1.0)) * 0.5;
            }
            // M†M, Hermitian and positive: its largest eigenvalue is ‖M‖₂²
            for i in 0..n {
                for j in 0..n {
                    mtm[i * n + j] = (0..n).map(|k| m[k * n + i].conj() * m[k * n + j]).sum();
                }
            }
            let top = hermitian_eigenvalues(&mtm, n)?
                .last()
                .copied()
                .unwrap_or(0.0)
                .max(0.0);
            let norm = top.sqrt() * (1.0 + NORM_MARGIN) + f64::MIN_POSITIVE;
            if norm < 1e-300 {
                continue;
            }
            let mut abs_r = [0.0; 3];
            for (a, x) in abs_r.iter_mut().zip(r) {
                *a = x.abs();
            }
            out.push((abs_r, 2.0 * norm));
        }
        Ok(Self::Hoppings(out))
    }

    /// A bound from per-axis Lipschitz constants (finite, non-negative).
    pub fn lipschitz(constants: &[f64]) -> CoreResult<Self> {
        if constants.len() > 3 || constants.iter().any(|c| !(c.is_finite() && *c >= 0.0)) {
            return Err(invalid!(
                "Lipschitz constants must be at most three finite non-negative numbers"
            ));
        }
        let mut l = [0.0; 3];
        l[..constants.len()].copy_from_slice(constants);
        Ok(Self::Lipschitz(l))
    }

    /// Upper bound of ‖H(κ) − H(c)‖₂ over the box |κ_i − c_i| ≤ h_i.
    pub fn within(&self, h: &[f64; 3]) -> f64 {
        match self {
            Self::Hoppings(terms) => terms
                .iter()
                .map(|(r, a)| {
                    let x = std::f64::consts::PI * reach(r, h);
                    a * 2.0 * x.min(std::f64::consts::FRAC_PI_2).sin()
                })
                .sum(),
            Self::Lipschitz(l) => l[0] * h[0] + l[1] * h[1] + l[2] * h[2],
        }
    }

    /// The second-order remainder of the local bound (`Bloch::local_variation`) over the box
    /// |κ_i − c_i| ≤ h_i: Σ_R 2‖M_R‖ x_R²/2 with x_R = 2π Σ_i |R_i| h_i; infinity for a
    /// Lipschitz bound (which has no local form).
    pub fn remainder(&self, h: &[f64; 3]) -> f64 {
        match self {
            Self::Hoppings(terms) => terms
                .iter()
                .map(|(r, a)| {
                    let x = std::f64::consts::TAU * reach(r, h);
                    a * 0.5 * x * x
                })
                .sum(),
            Self::Lipschitz(_) => f64::INFINITY,
        }
    }

    /// [`Self::within`] for a step of length `delta` along one axis.
    pub fn along(&self, axis: usize, delta: f64) -> f64 {
        let mut h = [0.0; 3];
        h[axis] = delta.abs();
        self.within(&h)
    }

    /// The rate at which the bound grows along each axis for small steps (which axes of a
    /// box are worth splitting).
    pub fn slopes(&self) -> [f64; 3] {
        match self {
            Self::Hoppings(terms) => {
                let mut s = [0.0; 3];
                for (r, a) in terms {
                    for i in 0..3 {
                        s[i] += a * std::f64::consts::TAU * r[i];
                    }
                }
                s
            }
            Self::Lipschitz(l) => *l,
        }
    }
}

/// Σ_i |R_i| h_i: the largest phase step of a bond over a box, in turns (|R_i| stored).
fn reach(r: &[f64; 3], h: &[f64; 3]) -> f64 {
    r[0] * h[0] + r[1] * h[1] + r[2] * h[2]
}

/// Davis–Kahan bound of sin θ between the occupied subspaces at two κ points whose
/// Hamiltonians differ by at most `d` in norm, when the direct gap at one of them is `gap`:
/// d / (gap − d), or infinity when the bound says nothing (gap ≤ d).
pub fn turn_bound(d: f64, gap: f64) -> f64 {
    if gap > d {
        d / (gap - d)
    } else {
        f64::INFINITY
    }
}

/// Largest sin θ a loop step or a pump step may reach by [`turn_bound`]; a step beyond it is
/// split. At 1/2 the whole step lies within 30° of the subspace at its better end (and the gap
/// stays open along it: gap ≥ 3d > 2d), so the discrete parallel transport cannot skip a
/// turn of the occupied states (common practice, no source, for the choice of 1/2).
pub const TURN_LIMIT: f64 = 0.5;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_rng::TestRng;
    use crate::zone::bloch::{BlochSource, Hoppings};

    /// A random 3-orbital 3D model with hoppings at several R.
    fn random_model(seed: u64) -> Hoppings {
        let mut rng = TestRng::new(seed);
        let n = 3;
        let rs: Vec<i64> = vec![0, 0, 0, 1, 0, 0, 0, 1, 0, 1, -1, 2, 0, 0, 1];
        let nh = rs.len() / 3;
        let mut t: Vec<C64> = (0..nh * n * n)
            .map(|_| C64::new(rng.uniform() - 0.5, rng.uniform() - 0.5))
            .collect();
        // on-site block Hermitian
        for i in 0..n {
            for j in 0..n {
                let (a, b) = (t[i * n + j], t[j * n + i]);
                t[i * n + j] = (a + b.conj()) * 0.5;
            }
        }
        Hoppings::new(3, n, 0, rs, t, vec![-1; nh]).unwrap()
    }

    fn norm2(a: &[C64], n: usize) -> f64 {
        // ‖A‖₂ of a Hermitian matrix: largest |eigenvalue|
        let e = hermitian_eigenvalues(a, n).unwrap();
        e.iter().fold(0.0f64, |m, x| m.max(x.abs()))
    }

    #[test]
    fn bound_holds_at_random_points() {
        let mut rng = TestRng::new(7);
        // (uniform() is in [−0.5, 0.5))
        let mut u = move || rng.uniform() + 0.5;
        for seed in 0..5 {
            let src = random_model(seed).at(&[]).unwrap();
            let b = src.variation().unwrap().clone();
            let n = src.norb();
            for _ in 0..200 {
                let c: Vec<f64> = (0..3).map(|_| u()).collect();
                let h = [u() * 0.3, u() * 0.1, u() * 0.6];
                let k: Vec<f64> = (0..3).map(|i| c[i] + (2.0 * u() - 1.0) * h[i]).collect();
                let mut hc = vec![C64::new(0.0, 0.0); n * n];
                let mut hk = hc.clone();
                src.fill(&c, &mut hc).unwrap();
                src.fill(&k, &mut hk).unwrap();
                let diff: Vec<C64> = hk.iter().zip(&hc).map(|(a, b)| a - b).collect();
                let d = b.within(&h);
                assert!(
                    norm2(&diff, n) <= d * (1.0 + 1e-12),
                    "{} > {d}",
                    norm2(&diff, n)
                );
            }
        }
    }

    #[test]
    fn local_bound_holds_and_is_tighter_on_small_boxes() {
        // the bound from the derivatives at the centre (Bloch::local_variation) against the
        // norm of the actual difference at random points of random boxes, at the box corners
        // (where the first-order term is largest) and inside; then its gain over the global bound
        let mut rng = TestRng::new(11);
        let mut u = move || rng.uniform() + 0.5;
        let (mut local_sum, mut global_sum) = (0.0, 0.0);
        for seed in 0..5 {
            let src = random_model(seed).at(&[]).unwrap();
            let b = src.variation().unwrap().clone();
            let n = src.norb();
            for trial in 0..200 {
                let c: Vec<f64> = (0..3).map(|_| u()).collect();
                let scale = [1e-4, 1e-3, 1e-2, 0.1][trial % 4];
                let h = [u() * scale, u() * scale, u() * scale];
                let local = src.local_variation(&c, &h).unwrap().unwrap();
                let mut hc = vec![C64::new(0.0, 0.0); n * n];
                src.fill(&c, &mut hc).unwrap();
                for corner in 0..12 {
                    let k: Vec<f64> = (0..3)
                        .map(|i| {
                            let s = if corner < 8 {
                                if (corner >> i) & 1 == 1 {
                                    1.0
                                } else {
                                    -1.0
                                }
                            } else {
                                2.0 * u() - 1.0
                            };
                            c[i] + s * h[i]
                        })
                        .collect();
                    let mut hk = hc.clone();
                    src.fill(&k, &mut hk).unwrap();
                    let diff: Vec<C64> = hk.iter().zip(&hc).map(|(a, b)| a - b).collect();
                    let d = norm2(&diff, n);
                    assert!(d <= local, "{d} > local bound {local} at h = {h:?}");
                }
                if scale <= 1e-3 {
                    local_sum += local;
                    global_sum += b.within(&h);
                }
            }
        }
        // (the triangle inequality over five bonds of random matrices: 2.3 here)
        assert!(
            global_sum > 1.5 * local_sum,
            "local {local_sum} vs global {global_sum}"
        );
    }

    #[test]
    fn bound_is_tight_for_one_cosine() {
        // H(κ) = cos(2πκ) σz as M = σz/2 at R = 1: ‖H(1/2) − H(0)‖ = 2, the bound at h = 1/2 is
        // 2‖M‖ · 2 sin(π/2) = 2
        let z = C64::new(0.0, 0.0);
        let o = C64::new(1.0, 0.0);
        let t = vec![z, z, z, z, o * 0.5, z, z, -o * 0.5];
        let hop = Hoppings::new(1, 2, 0, vec![0, 1], t, vec![-1, -1]).unwrap();
        let src = hop.at(&[]).unwrap();
        let b = src.variation().unwrap();
        assert!((b.within(&[0.5, 0.0, 0.0]) - 2.0).abs() < 1e-9);
        assert!((b.along(0, 0.25) - 2.0 * std::f64::consts::FRAC_1_SQRT_2).abs() < 1e-9);
    }

    #[test]
    fn turn_bound_says_nothing_without_a_gap() {
        assert_eq!(turn_bound(1.0, 0.5), f64::INFINITY);
        assert!((turn_bound(0.5, 2.0) - 1.0 / 3.0).abs() < 1e-15);
        assert!(VariationBound::lipschitz(&[1.0, -1.0]).is_err());
        let l = VariationBound::lipschitz(&[2.0, 3.0]).unwrap();
        assert_eq!(l.within(&[0.5, 1.0, 7.0]), 4.0);
    }
}
