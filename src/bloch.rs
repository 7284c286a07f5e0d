//! Bloch Hamiltonians from the term/hopping representation.
//!
//! H(κ) = Σ_term c_term Σ_R [T e^{2πiκ·R} + (R ≠ 0) T† e^{-2πiκ·R}] (periodic convention, κ in
//! reduced coordinates). A parameter point fixes the coefficient vector c, so the hoppings are
//! first folded into one matrix per distinct R; a κ point then costs one sin/cos per R and a
//! few complex multiply-adds per matrix element.

use crate::error::{invalid, CoreResult};
use crate::C64;
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::f64::consts::TAU;

/// Anything that yields H(κ) for a batch of κ points.
///
/// `kappa` holds n points × `dim` reduced coordinates (row-major); `out` receives n row-major
/// norb×norb matrices. Implementations are called with large batches, so a Python callback
/// can vectorise.
pub trait BlochSource: Sync {
    fn dim(&self) -> usize;
    fn norb(&self) -> usize;
    fn fill(&self, kappa: &[f64], out: &mut [C64]) -> CoreResult<()>;
}

/// The hopping list of a tight-binding model: independent of the parameter values.
#[derive(Clone, Debug)]
pub struct Hoppings {
    pub dim: usize,
    pub norb: usize,
    pub nterms: usize,
    /// lattice vectors, nhop × dim
    pub r: Vec<i64>,
    /// hopping matrices, nhop × norb × norb (row-major)
    pub t: Vec<C64>,
    /// term index of each hopping; −1 for the fixed part (coefficient 1)
    pub term: Vec<i64>,
}

impl Hoppings {
    pub fn new(
        dim: usize,
        norb: usize,
        nterms: usize,
        r: Vec<i64>,
        t: Vec<C64>,
        term: Vec<i64>,
    ) -> CoreResult<Self> {
        if !(1..=3).contains(&dim) {
            return Err(invalid!("dim must be 1, 2 or 3, got {dim}"));
        }
        if norb == 0 {
            return Err(invalid!("norb must be positive"));
        }
        let nhop = term.len();
        if r.len() != nhop * dim || t.len() != nhop * norb * norb {
            return Err(invalid!(
                "hopping arrays disagree: {nhop} terms, {} R entries, {} T entries",
                r.len(),
                t.len()
            ));
        }
        if let Some(bad) = term.iter().find(|&&k| k < -1 || k >= nterms as i64) {
            return Err(invalid!("term index {bad} outside -1..{nterms}"));
        }
        if t.iter().any(|z| !z.re.is_finite() || !z.im.is_finite()) {
            return Err(invalid!("hopping matrix contains NaN or infinity"));
        }
        Ok(Self { dim, norb, nterms, r, t, term })
    }

    /// Fold the hoppings for one coefficient vector into one matrix per distinct R.
    pub fn at(&self, coeff: &[f64]) -> CoreResult<Bloch> {
        if coeff.len() != self.nterms {
            return Err(invalid!(
                "expected {} term coefficients, got {}",
                self.nterms,
                coeff.len()
            ));
        }
        if coeff.iter().any(|c| !c.is_finite()) {
            return Err(invalid!("term coefficient is NaN or infinite"));
        }
        let nn = self.norb * self.norb;
        let mut by_r: BTreeMap<Vec<i64>, Vec<C64>> = BTreeMap::new();
        for (h, &k) in self.term.iter().enumerate() {
            let c = if k < 0 { 1.0 } else { coeff[k as usize] };
            if c == 0.0 {
                continue;
            }
            let key = self.r[h * self.dim..(h + 1) * self.dim].to_vec();
            let acc = by_r.entry(key).or_insert_with(|| vec![C64::new(0.0, 0.0); nn]);
            for (a, &x) in acc.iter_mut().zip(&self.t[h * nn..(h + 1) * nn]) {
                *a += x * c;
            }
        }
        let mut onsite = vec![C64::new(0.0, 0.0); nn];
        let mut rs = Vec::new();
        let mut mats = Vec::new();
        for (key, m) in by_r {
            if key.iter().all(|&x| x == 0) {
                onsite = m;
            } else {
                rs.extend(key.iter().map(|&x| x as f64));
                mats.extend(m);
            }
        }
        Ok(Bloch { dim: self.dim, norb: self.norb, onsite, rs, mats })
    }
}

/// A tight-binding model at one parameter point.
#[derive(Clone, Debug)]
pub struct Bloch {
    dim: usize,
    norb: usize,
    onsite: Vec<C64>,
    rs: Vec<f64>,
    mats: Vec<C64>,
}

impl Bloch {
    /// H(κ) at one κ point into `out` (norb×norb).
    pub fn at_point(&self, kappa: &[f64], out: &mut [C64]) {
        let n = self.norb;
        let nn = n * n;
        out[..nn].copy_from_slice(&self.onsite);
        for (r, m) in self.rs.chunks_exact(self.dim).zip(self.mats.chunks_exact(nn)) {
            let phase: f64 = r.iter().zip(kappa).map(|(a, b)| a * b).sum::<f64>() * TAU;
            let e = C64::from_polar(1.0, phase);
            for i in 0..n {
                for j in 0..n {
                    out[i * n + j] += m[i * n + j] * e + m[j * n + i].conj() * e.conj();
                }
            }
        }
    }
}

impl BlochSource for Bloch {
    fn dim(&self) -> usize {
        self.dim
    }
    fn norb(&self) -> usize {
        self.norb
    }
    fn fill(&self, kappa: &[f64], out: &mut [C64]) -> CoreResult<()> {
        let nn = self.norb * self.norb;
        let npts = kappa.len() / self.dim;
        if out.len() < npts * nn {
            return Err(invalid!("output buffer too small for {npts} κ points"));
        }
        out[..npts * nn]
            .par_chunks_mut(nn)
            .zip(kappa.par_chunks(self.dim))
            .with_min_len(64)
            .for_each(|(o, k)| self.at_point(k, o));
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Two-band chain: onsite m σz, hopping (σz − iσx)/2 at R = 1 → H = (m + cos 2πκ) σz + sin 2πκ σx.
    #[test]
    fn chain_matches_closed_form() {
        let z = C64::new(0.0, 0.0);
        let sz = vec![C64::new(1.0, 0.0), z, z, C64::new(-1.0, 0.0)];
        let hop = vec![C64::new(0.5, 0.0), C64::new(0.0, -0.5), C64::new(0.0, -0.5), C64::new(-0.5, 0.0)];
        let mut t = sz.clone();
        t.extend(hop);
        let model = Hoppings::new(1, 2, 1, vec![0, 1], t, vec![0, -1]).unwrap();
        let m = 0.7;
        let b = model.at(&[m]).unwrap();
        let mut out = vec![z; 4];
        for &k in &[0.0, 0.13, 0.5, 0.77] {
            b.at_point(&[k], &mut out);
            let (s, c) = (TAU * k).sin_cos();
            assert!((out[0] - (m + c)).norm() < 1e-14);
            assert!((out[3] + (m + c)).norm() < 1e-14);
            assert!((out[1] - s).norm() < 1e-14);
            assert!((out[2] - s).norm() < 1e-14);
        }
    }

    #[test]
    fn rejects_bad_shapes() {
        assert!(Hoppings::new(2, 2, 0, vec![0], vec![C64::new(0.0, 0.0); 4], vec![-1]).is_err());
        assert!(Hoppings::new(4, 2, 0, vec![], vec![], vec![]).is_err());
        let ok = Hoppings::new(1, 1, 1, vec![0], vec![C64::new(1.0, 0.0)], vec![0]).unwrap();
        assert!(ok.at(&[]).is_err());
        assert!(ok.at(&[f64::NAN]).is_err());
    }
}
