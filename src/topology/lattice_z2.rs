//! Lattice Z2 of a time-reversal-invariant plane (Fukui & Hatsugai, J. Phys. Soc. Jpn. 76,
//! 053702 (2007)), with link variables and lattice field strength as for lattice Chern numbers
//! (Fukui, Hatsugai & Suzuki, J. Phys. Soc. Jpn. 74, 1674 (2005)).
//!
//! The plane is meshed over half of its Brillouin zone: the loop coordinate s ∈ [0, 1)
//! (periodic, N1 points, N1 even) times the pump coordinate t ∈ [0, 1/2] (N2 + 1 rows). The
//! rows t = 0 and t = 1/2 are time-reversal invariant: κ ↦ −κ maps them onto themselves with
//! s ↦ −s. There the occupied frame ψ (n × filling) is fixed by time reversal,
//! ψ(−κ) = Θ ψ(κ) = U_T ψ(κ)*, and at the four TRIMs it is put into Kramers-paired form
//! (columns v, Θv, v', Θv', …), which leaves only transformations of unit determinant. With
//! U_μ(κ) = det ψ(κ)† ψ(κ + μ) / |…|, A_μ = arg U_μ ∈ (−π, π] and
//! F(κ) = arg U_1(κ) U_2(κ + 1) U_1(κ + 2)* U_2(κ)* ∈ (−π, π], every plaquette carries the
//! integer n(κ) = (F − ΔA)/2π and Z2 = Σ n mod 2 over the half zone.
//!
//! The Wilson-loop engine shares no code with this module beyond the Bloch source and the
//! eigensolver, which is why it serves as an independent cross-check.

use crate::error::{invalid, CoreError, CoreResult};
use crate::linalg::eigen::{eigh_into, eigh_occupied_many_into};
use crate::topology::wilson::BandStats;
use crate::zone::bloch::BlochSource;
use crate::C64;
use rayon::prelude::*;
use std::f64::consts::PI;

/// Largest |F| (radians) accepted on any plaquette; above it the mesh is refined. Our choice
/// (no source): a plaquette is misread only if its true flux exceeds π, and the flux a gapped
/// band touching spreads over the zone is at most of order π in all, so a measured |F| ≤ 2
/// leaves more than 1 rad of margin once the mesh resolves the concentration.
pub const FIELD_LIMIT: f64 = 2.0;

/// Smallest |U| accepted on any link (our choice, no source): neighbouring occupied spaces
/// must overlap well for the link phases to follow the states.
pub const LINK_LIMIT: f64 = 0.5;

/// A plane of the Brillouin zone: base point, loop axis (periodic) and pump axis (0 … 1/2).
#[derive(Clone, Copy, Debug)]
pub struct LatticePlane {
    pub base: [f64; 3],
    pub loop_axis: usize,
    pub pump_axis: usize,
}

/// The lattice Z2 of one plane on one mesh.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LatticeOutcome {
    /// 0 or 1; −1 when a link overlap was singular (the mesh cannot resolve the states)
    pub z2: i8,
    /// largest |F| over the plaquettes (radians)
    pub max_field: f64,
    /// smallest |U| over the links: the product of the cosines of the principal angles between
    /// neighbouring occupied spaces (gauge invariant; near 0 the mesh misses how they turn)
    pub min_link: f64,
    /// finest spacing of the mesh used, as the uniform mesh of that spacing: loop points ×
    /// pump intervals
    pub mesh: (usize, usize),
    /// κ points of the mesh used
    pub points: usize,
}

impl LatticeOutcome {
    pub fn admissible(&self) -> bool {
        self.z2 >= 0 && self.max_field <= FIELD_LIMIT && self.min_link >= LINK_LIMIT
    }
}

/// Determinant of an m×m complex matrix (row-major) by LU with partial pivoting.
pub fn det(a: &[C64], m: usize) -> C64 {
    let mut a = a[..m * m].to_vec();
    let mut d = C64::new(1.0, 0.0);
    for c in 0..m {
        let p = (c..m)
            .max_by(|&x, &y| a[x * m + c].norm().total_cmp(&a[y * m + c].norm()))
            .unwrap_or(c);
        if a[p * m + c].norm() == 0.0 {
            return C64::new(0.0, 0.0);
        }
        if p != c {
            for k in 0..m {
                a.swap(p * m + k, c * m + k);
            }
            d = -d;
        }
        let piv = a[c * m + c];
        d *= piv;
        for r in c + 1..m {
            let f = a[r * m + c] / piv;
            if f != C64::new(0.0, 0.0) {
                for k in c..m {
                    let x = a[c * m + k];
                    a[r * m + k] -= f * x;
                }
            }
        }
    }
    d
}

/// Θ v = U_T v* for every column of an n × m frame (row-major).
pub(crate) fn time_reverse(u_t: &[C64], psi: &[C64], n: usize, m: usize, out: &mut [C64]) {
    for i in 0..n {
        for c in 0..m {
            let mut s = C64::new(0.0, 0.0);
            for k in 0..n {
                s += u_t[i * n + k] * psi[k * m + c].conj();
            }
            out[i * m + c] = s;
        }
    }
}

/// Replace the occupied frame at a TRIM by a Kramers-paired orthonormal frame of the same
/// space: columns v1, Θv1, v2, Θv2, … (Gram–Schmidt over the original columns).
pub(crate) fn kramers_frame(u_t: &[C64], psi: &mut [C64], n: usize, m: usize) -> CoreResult<()> {
    let col = |f: &[C64], c: usize| -> Vec<C64> { (0..n).map(|i| f[i * m + c]).collect() };
    let orig: Vec<Vec<C64>> = (0..m).map(|c| col(psi, c)).collect();
    let mut basis: Vec<Vec<C64>> = Vec::with_capacity(m);
    for cand in &orig {
        if basis.len() == m {
            break;
        }
        let mut r = cand.clone();
        for _ in 0..2 {
            // twice: re-orthogonalisation keeps the frame orthonormal to round-off
            for b in &basis {
                let proj: C64 = b.iter().zip(&r).map(|(x, y)| x.conj() * y).sum();
                r.iter_mut().zip(b).for_each(|(x, y)| *x -= proj * y);
            }
        }
        let norm = r.iter().map(|x| x.norm_sqr()).sum::<f64>().sqrt();
        if norm < 0.5 {
            continue;
        }
        r.iter_mut().for_each(|x| *x /= norm);
        let mut tr = vec![C64::new(0.0, 0.0); n];
        time_reverse(u_t, &r, n, 1, &mut tr);
        basis.push(r);
        basis.push(tr);
    }
    if basis.len() != m {
        return Err(CoreError::NoConvergence(
            "occupied states at a TRIM are not closed under time reversal".into(),
        ));
    }
    for (c, b) in basis.iter().enumerate() {
        for i in 0..n {
            psi[i * m + c] = b[i];
        }
    }
    Ok(())
}

/// det ψ_a† ψ_b of two n × m frames.
pub(crate) fn link(a: &[C64], b: &[C64], n: usize, m: usize) -> C64 {
    let mut o = vec![C64::new(0.0, 0.0); m * m];
    for i in 0..n {
        for p in 0..m {
            let ap = a[i * m + p].conj();
            for q in 0..m {
                o[p * m + q] += ap * b[i * m + q];
            }
        }
    }
    det(&o, m)
}

/// Lattice Z2 of `plane` on an `n1` × `n2` mesh. `u_t` (n × n) is the time-reversal matrix.
/// Band statistics of every mesh point are merged into `stats`, and the smallest gap of each
/// mesh row is pushed to `cand` (starting points for the gap search).
#[allow(clippy::too_many_arguments)]
pub fn lattice_z2(
    src: &dyn BlochSource,
    plane: &LatticePlane,
    filling: usize,
    u_t: &[C64],
    n1: usize,
    n2: usize,
    stats: &mut BandStats,
    cand: &mut Vec<(f64, [f64; 3])>,
) -> CoreResult<LatticeOutcome> {
    let (dim, n, m) = (src.dim(), src.norb(), filling);
    if n1 < 4 || n1 % 2 != 0 || n2 < 1 {
        return Err(invalid!(
            "lattice mesh needs an even n1 ≥ 4 and n2 ≥ 1, got {n1} × {n2}"
        ));
    }
    if u_t.len() != n * n {
        return Err(invalid!("time-reversal matrix must be {n}×{n}"));
    }
    let rows = n2 + 1;
    let npts = rows * n1;
    let idx = |i: usize, j: usize| i * n1 + j;
    let mut kappa = Vec::with_capacity(npts * dim);
    for i in 0..rows {
        for j in 0..n1 {
            let mut k = plane.base;
            k[plane.pump_axis] = 0.5 * i as f64 / n2 as f64;
            k[plane.loop_axis] = j as f64 / n1 as f64;
            kappa.extend_from_slice(&k[..dim]);
        }
    }
    let solved = if src.prefers_batches() {
        mesh_in_one_batch(src, &kappa, n, m)?
    } else {
        mesh_by_rows(src, plane, n, m, n1, n2)?
    };
    let mut psi: Vec<Vec<C64>> = Vec::with_capacity(npts);
    for i in 0..rows {
        let mut row = BandStats::default();
        for j in 0..n1 {
            let p = idx(i, j);
            row.add(&solved[p].0, filling, &kappa[p * dim..(p + 1) * dim]);
        }
        cand.push((row.min_direct, row.min_direct_at));
        stats.merge(&row);
    }
    psi.extend(solved.into_iter().map(|(_, v)| v));
    z2_of_frames(psi, u_t, n, m, n1, n2)
}

/// Energies and occupied frame (n × m, row-major) of one mesh point.
pub(crate) type MeshPoint = (Vec<f64>, Vec<C64>);

/// Energies and occupied frames (n × m) of every mesh point, H for all of them in one batch
/// (sources that prefer batches: Python callbacks).
pub(crate) fn mesh_in_one_batch(
    src: &dyn BlochSource,
    kappa: &[f64],
    n: usize,
    m: usize,
) -> CoreResult<Vec<MeshPoint>> {
    let nn = n * n;
    let mut h = vec![C64::new(0.0, 0.0); kappa.len() / src.dim() * nn];
    src.fill(kappa, &mut h)?;
    h.par_chunks(nn)
        .map(|hk| {
            let mut e = vec![0.0; n];
            let mut v = vec![C64::new(0.0, 0.0); nn];
            eigh_into(hk, n, &mut e, &mut v)?;
            let occ: Vec<C64> = (0..n).flat_map(|r| v[r * n..r * n + m].to_vec()).collect();
            Ok((e, occ))
        })
        .collect()
}

/// [`mesh_in_one_batch`] row by row: a mesh row is a loop along the loop axis, so each rayon
/// task builds it with the per-line Bloch sums (`fill_line`) and solves its κ points two at a
/// time for the occupied vectors only, as the Wilson lines do.
fn mesh_by_rows(
    src: &dyn BlochSource,
    plane: &LatticePlane,
    n: usize,
    m: usize,
    n1: usize,
    n2: usize,
) -> CoreResult<Vec<MeshPoint>> {
    let (dim, nn) = (src.dim(), n * n);
    let rows: CoreResult<Vec<Vec<MeshPoint>>> = (0..=n2)
        .into_par_iter()
        .map_init(
            || {
                (
                    vec![C64::new(0.0, 0.0); n1 * nn],
                    vec![C64::new(0.0, 0.0); nn],
                )
            },
            |(h, work), i| {
                let mut base = plane.base;
                base[plane.pump_axis] = 0.5 * i as f64 / n2 as f64;
                src.fill_line(&base[..dim], plane.loop_axis, n1, h)?;
                let (mut e, mut o) = (vec![0.0; n1 * n], vec![C64::new(0.0, 0.0); n1 * n * m]);
                eigh_occupied_many_into(h, n, m, &mut e, &mut o, work)?;
                let row: Vec<MeshPoint> = e
                    .chunks_exact(n)
                    .zip(o.chunks_exact(n * m))
                    .map(|(e, o)| (e.to_vec(), o.to_vec()))
                    .collect();
                Ok(row)
            },
        )
        .collect();
    Ok(rows?.into_iter().flatten().collect())
}

/// The lattice Z2 from the occupied frames (n × m each, row-major) of an `n1` × (`n2` + 1)
/// mesh, row by row, in any gauge: the frames of the two invariant rows are re-gauged here.
pub fn z2_of_frames(
    mut psi: Vec<Vec<C64>>,
    u_t: &[C64],
    n: usize,
    m: usize,
    n1: usize,
    n2: usize,
) -> CoreResult<LatticeOutcome> {
    let npts = (n2 + 1) * n1;
    if psi.len() != npts || psi.iter().any(|f| f.len() != n * m) {
        return Err(invalid!("expected {npts} frames of {n} × {m}"));
    }
    let idx = |i: usize, j: usize| i * n1 + j;
    // time-reversal gauge on the two invariant rows
    for i in [0, n2] {
        for j in [0, n1 / 2] {
            kramers_frame(u_t, &mut psi[idx(i, j)], n, m)?;
        }
        for j in 1..n1 / 2 {
            let mut partner = vec![C64::new(0.0, 0.0); n * m];
            time_reverse(u_t, &psi[idx(i, j)], n, m, &mut partner);
            psi[idx(i, n1 - j)] = partner;
        }
    }
    // link variables: u1 along the loop (periodic), u2 along the pump
    let links: Vec<(C64, C64)> = (0..npts)
        .into_par_iter()
        .map(|p| {
            let (i, j) = (p / n1, p % n1);
            let u1 = link(&psi[p], &psi[idx(i, (j + 1) % n1)], n, m);
            let u2 = if i < n2 {
                link(&psi[p], &psi[idx(i + 1, j)], n, m)
            } else {
                C64::new(1.0, 0.0)
            };
            (u1, u2)
        })
        .collect();
    let min_link = links[..n2 * n1]
        .iter()
        .map(|(a, b)| a.norm().min(b.norm()))
        .chain(links[n2 * n1..].iter().map(|(a, _)| a.norm()))
        .fold(f64::INFINITY, f64::min);
    if min_link < 1e-10 {
        return Ok(LatticeOutcome {
            z2: -1,
            max_field: f64::INFINITY,
            min_link,
            mesh: (n1, n2),
            points: npts,
        });
    }
    // Link phases. On the two invariant rows the link s → s + δ and its time-reversed
    // partner −s − δ → −s are equal in exact arithmetic; they often sit right at the branch
    // cut (a link of −1 next to a TRIM is common), where round-off could put one at +π and
    // the other at −π. Taking both from the same link keeps the pairing exact, which is what
    // makes the count gauge invariant mod 2.
    let mut a1: Vec<f64> = links.iter().map(|l| l.0.arg()).collect();
    let a2: Vec<f64> = links.iter().map(|l| l.1.arg()).collect();
    for i in [0, n2] {
        for j in 0..n1 / 2 {
            a1[idx(i, n1 - 1 - j)] = a1[idx(i, j)];
        }
    }
    let mut total: i64 = 0;
    let mut max_field = 0.0f64;
    for i in 0..n2 {
        for j in 0..n1 {
            let jn = (j + 1) % n1;
            let (u1, u2) = links[idx(i, j)];
            let u2r = links[idx(i, jn)].1;
            let u1t = links[idx(i + 1, j)].0;
            let f = (u1 * u2r * u1t.conj() * u2.conj()).arg();
            let da = a1[idx(i, j)] + a2[idx(i, jn)] - a1[idx(i + 1, j)] - a2[idx(i, j)];
            total += ((f - da) / (2.0 * PI)).round() as i64;
            max_field = max_field.max(f.abs());
        }
    }
    Ok(LatticeOutcome {
        z2: total.rem_euclid(2) as i8,
        max_field,
        min_link,
        mesh: (n1, n2),
        points: npts,
    })
}

/// Lattice Z2 of every plane at the base mesh (loop points rounded up to even × pump
/// intervals of the initial lines).
pub fn lattice_planes_initial(
    src: &dyn BlochSource,
    pl: &[LatticePlane],
    filling: usize,
    u_t: &[C64],
    mesh: (usize, usize),
    stats: &mut BandStats,
    cand: &mut Vec<(f64, [f64; 3])>,
) -> CoreResult<Vec<LatticeOutcome>> {
    pl.iter()
        .map(|p| lattice_z2(src, p, filling, u_t, mesh.0, mesh.1, stats, cand))
        .collect()
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::zone::bloch::Hoppings;

    fn c(re: f64, im: f64) -> C64 {
        C64::new(re, im)
    }

    #[test]
    fn determinant_matches_closed_forms() {
        let a = [c(1.0, 1.0), c(2.0, 0.0), c(0.0, -1.0), c(3.0, 0.5)];
        let want = a[0] * a[3] - a[1] * a[2];
        assert!((det(&a, 2) - want).norm() < 1e-14);
        // permutation matrix with one swap: det = −1
        let p = [
            c(0.0, 0.0),
            c(1.0, 0.0),
            c(0.0, 0.0),
            c(1.0, 0.0),
            c(0.0, 0.0),
            c(0.0, 0.0),
            c(0.0, 0.0),
            c(0.0, 0.0),
            c(1.0, 0.0),
        ];
        assert!((det(&p, 3) + 1.0).norm() < 1e-14);
    }

    /// Qi–Wu–Zhang block and its time-reversed partner (spin ⊗ orbital, spin slowest):
    /// Z2 = 1 for 0 < |m| < 2 (Qi, Wu & Zhang, PRB 74, 085308 (2006); Bernevig, Hughes & Zhang,
    /// Science 314, 1757 (2006)). An extra term `r` (Rashba-like, s_x ⊗ σ_y sin k_y... here the
    /// on-site s_x ⊗ σ_y) couples the spins and breaks s_z conservation but not time reversal.
    pub(crate) fn bhz(rashba: f64, mix: f64) -> (Hoppings, Vec<C64>) {
        let z = c(0.0, 0.0);
        let o = c(1.0, 0.0);
        let i = c(0.0, 1.0);
        // 2×2 blocks as [a, b, c, d]; kron(s, σ) for 2×2 s and σ
        let kron = |s: [C64; 4], p: [C64; 4]| -> Vec<C64> {
            let mut out = vec![z; 16];
            for (a, b) in [(0, 0), (0, 1), (1, 0), (1, 1)] {
                for (x, y) in [(0, 0), (0, 1), (1, 0), (1, 1)] {
                    out[(2 * a + x) * 4 + 2 * b + y] = s[2 * a + b] * p[2 * x + y];
                }
            }
            out
        };
        let s0 = [o, z, z, o];
        let sx = [z, o, o, z];
        let sy = [z, -i, i, z];
        let sz = [o, z, z, -o];
        let add = |a: Vec<C64>, b: Vec<C64>, f: C64| -> Vec<C64> {
            a.iter().zip(&b).map(|(x, y)| x + f * y).collect()
        };
        let gz = kron(s0, sz);
        let tx = add(gz.clone(), kron(sz, sx), -i)
            .iter()
            .map(|x| x * 0.5)
            .collect::<Vec<_>>();
        let ty = add(gz.clone(), kron(s0, sy), -i)
            .iter()
            .map(|x| x * 0.5)
            .collect::<Vec<_>>();
        // on-site extras: spin mixing `rashba` s_x⊗σ_y, orbital mixing `mix` s_0⊗σ_x (breaks the
        // two-fold rotation that otherwise makes the plaquette field vanish)
        let ra: Vec<C64> = add(
            kron(sx, sy).iter().map(|x| x * rashba).collect(),
            kron(s0, sx),
            c(mix, 0.0),
        );
        let mut t = gz;
        t.extend(ra);
        t.extend(tx);
        t.extend(ty);
        let h = Hoppings::new(
            2,
            4,
            1,
            vec![0, 0, 0, 0, 1, 0, 0, 1],
            t,
            vec![0, -1, -1, -1],
        )
        .unwrap();
        (h, kron([z, o, -o, z], s0)) // U_T = iσ_y ⊗ 1
    }

    pub(crate) fn plane() -> LatticePlane {
        LatticePlane {
            base: [0.0; 3],
            loop_axis: 0,
            pump_axis: 1,
        }
    }

    #[test]
    fn bhz_phases_with_and_without_spin_mixing() {
        for rashba in [0.0, 0.3] {
            let (model, u_t) = bhz(rashba, 0.0);
            for (m, want) in [(-2.7, 0), (-1.0, 1), (0.6, 1), (1.4, 1), (2.6, 0)] {
                let src = model.at(&[m]).unwrap();
                let mut st = BandStats::default();
                let r =
                    lattice_z2(&src, &plane(), 2, &u_t, 24, 12, &mut st, &mut Vec::new()).unwrap();
                assert!(r.admissible(), "m = {m}: {r:?}");
                assert_eq!(r.z2, want, "m = {m}, rashba = {rashba}");
            }
        }
    }

    /// The same source seen as a batch source (as a Python callback is): `fill` only.
    struct Batched<'a>(&'a dyn BlochSource);

    impl BlochSource for Batched<'_> {
        fn dim(&self) -> usize {
            self.0.dim()
        }
        fn norb(&self) -> usize {
            self.0.norb()
        }
        fn fill(&self, kappa: &[f64], out: &mut [C64]) -> CoreResult<()> {
            self.0.fill(kappa, out)
        }
    }

    /// Mesh rows built per line and solved two κ points at a time for the occupied vectors give
    /// the outcome and band statistics of one batch of full solves (generic spectra with
    /// Rashba mixing, Kramers-degenerate without; two mesh sizes).
    #[test]
    fn mesh_by_rows_matches_one_batch() {
        for (rashba, n1) in [(0.0, 24), (0.3, 24), (0.3, 10)] {
            let (model, u_t) = bhz(rashba, 0.0);
            for m in [-1.0, 1.4] {
                let src = model.at(&[m]).unwrap();
                let (mut sa, mut sb) = (BandStats::default(), BandStats::default());
                let (mut ca, mut cb) = (Vec::new(), Vec::new());
                let rows = lattice_z2(&src, &plane(), 2, &u_t, n1, 11, &mut sa, &mut ca).unwrap();
                let batch = lattice_z2(&Batched(&src), &plane(), 2, &u_t, n1, 11, &mut sb, &mut cb)
                    .unwrap();
                assert_eq!((rows.z2, rows.mesh), (batch.z2, batch.mesh), "m = {m}");
                assert!((rows.max_field - batch.max_field).abs() < 1e-10);
                assert!((rows.min_link - batch.min_link).abs() < 1e-10);
                assert!((sa.min_direct - sb.min_direct).abs() < 1e-12);
                assert!((sa.bandwidth() - sb.bandwidth()).abs() < 1e-12);
                assert_eq!(ca.len(), cb.len());
                for (x, y) in ca.iter().zip(&cb) {
                    assert!((x.0 - y.0).abs() < 1e-12);
                }
            }
        }
    }

    /// Occupied frames of the lattice mesh straight from the eigensolver, each multiplied by a
    /// random m×m unitary (a random gauge at every site).
    fn scrambled_frames(
        src: &dyn BlochSource,
        m: usize,
        n1: usize,
        n2: usize,
        seed: u64,
    ) -> Vec<Vec<C64>> {
        let n = src.norb();
        let mut rng = crate::test_rng::TestRng::new(seed);
        let mut next = || rng.uniform();
        let mut out = Vec::new();
        for i in 0..=n2 {
            for j in 0..n1 {
                let k = [j as f64 / n1 as f64, 0.5 * i as f64 / n2 as f64];
                let mut h = vec![c(0.0, 0.0); n * n];
                src.fill(&k, &mut h).unwrap();
                let (_, v) = crate::linalg::eigen::eigh(&h, n).unwrap();
                let mut g: Vec<C64> = (0..m * m).map(|_| c(next(), next())).collect();
                crate::linalg::matrix::unitarise(&mut g, m).unwrap();
                let mut f = vec![c(0.0, 0.0); n * m];
                for r in 0..n {
                    for a in 0..m {
                        for b in 0..m {
                            f[r * m + a] += v[r * n + b] * g[b * m + a];
                        }
                    }
                }
                out.push(f);
            }
        }
        out
    }

    #[test]
    fn count_is_gauge_invariant() {
        // spin mixing: the frames are genuinely 2×2 (no conserved spin to fix a gauge)
        let (model, u_t) = bhz(0.2, 0.2); // ‖ΔH‖ ≤ 0.4 < half of every gap below: Weyl
        for (m, want) in [(-1.0, 1), (0.6, 1), (2.6, 0)] {
            let src = model.at(&[m]).unwrap();
            for seed in 1..6 {
                let frames = scrambled_frames(&src, 2, 16, 8, seed);
                let r = z2_of_frames(frames, &u_t, 4, 2, 16, 8).unwrap();
                assert_eq!(r.z2, want, "m = {m}, gauge {seed}");
                assert!(
                    r.max_field > 1e-3,
                    "the plaquette field should not vanish here"
                );
            }
        }
    }

    #[test]
    fn mesh_checks() {
        let (model, u_t) = bhz(0.0, 0.0);
        let src = model.at(&[1.0]).unwrap();
        let mut st = BandStats::default();
        assert!(lattice_z2(&src, &plane(), 2, &u_t, 7, 4, &mut st, &mut Vec::new()).is_err());
        assert!(lattice_z2(&src, &plane(), 2, &u_t[..4], 8, 4, &mut st, &mut Vec::new()).is_err());
    }
}
