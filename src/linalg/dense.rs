//! Complex matrix products for many occupied bands.
//!
//! With 16 or more occupied bands the overlaps U_s† U_{s+1}, the polar factors and the running
//! Wilson-loop product are n³ work at every κ point, and hand-written triple loops spend as
//! long on them as the eigensolver spends on H(κ). Through faer's blocked, vectorised GEMM
//! (built with the `faer` feature, as the Python build is) they cost a fraction of that; the
//! plain loops remain for builds without faer and as the reference in the tests. Small
//! matrices keep their own written-out paths in `matrix.rs` and `wilson.rs`.
//!
//! Layout: row-major with a leading dimension (row stride), as everywhere in the core.

use crate::C64;

/// Smallest size (occupied bands) at which the callers switch to [`product`].
pub const DENSE_MIN_N: usize = 9;

/// How an operand enters a product.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Op {
    /// as stored
    Plain,
    /// conjugate transpose of what is stored
    Adjoint,
}

/// A row-major matrix view: `data[i * ld + j]` for i < rows, j < cols (as stored).
#[derive(Clone, Copy, Debug)]
pub struct View<'a> {
    pub data: &'a [C64],
    pub rows: usize,
    pub cols: usize,
    pub ld: usize,
}

impl<'a> View<'a> {
    pub fn new(data: &'a [C64], rows: usize, cols: usize, ld: usize) -> Self {
        debug_assert!(rows == 0 || data.len() >= (rows - 1) * ld + cols);
        Self {
            data,
            rows,
            cols,
            ld,
        }
    }
    fn shape(&self, op: Op) -> (usize, usize) {
        match op {
            Op::Plain => (self.rows, self.cols),
            Op::Adjoint => (self.cols, self.rows),
        }
    }
    #[inline(always)]
    fn at(&self, op: Op, i: usize, j: usize) -> C64 {
        match op {
            Op::Plain => self.data[i * self.ld + j],
            Op::Adjoint => self.data[j * self.ld + i].conj(),
        }
    }
}

/// c = op_a(a) · op_b(b), c row-major m × n with leading dimension `ldc`.
/// Shapes must agree (callers pass their own buffers; checked in debug builds).
pub fn product(c: &mut [C64], ldc: usize, a: View, op_a: Op, b: View, op_b: Op) {
    let (m, k) = a.shape(op_a);
    let (k2, n) = b.shape(op_b);
    debug_assert_eq!(k, k2);
    debug_assert!(m == 0 || c.len() >= (m - 1) * ldc + n);
    #[cfg(feature = "faer")]
    {
        product_faer(c, ldc, a, op_a, b, op_b, (m, k, n));
    }
    #[cfg(not(feature = "faer"))]
    {
        product_loops(c, ldc, a, op_a, b, op_b);
    }
}

/// The straightforward triple loop (reference, and the path without faer).
pub fn product_loops(c: &mut [C64], ldc: usize, a: View, op_a: Op, b: View, op_b: Op) {
    let (m, k) = a.shape(op_a);
    let n = b.shape(op_b).1;
    for i in 0..m {
        for j in 0..n {
            let mut s = C64::new(0.0, 0.0);
            for l in 0..k {
                s += a.at(op_a, i, l) * b.at(op_b, l, j);
            }
            c[i * ldc + j] = s;
        }
    }
}

#[cfg(feature = "faer")]
fn product_faer(
    c: &mut [C64],
    ldc: usize,
    a: View,
    op_a: Op,
    b: View,
    op_b: Op,
    (m, k, n): (usize, usize, usize),
) {
    use faer::linalg::matmul::matmul_with_conj;
    use faer::{Accum, Conj, MatMut, MatRef, Par};
    // a stored view and its transpose have the same type, so the adjoint is "transpose, then
    // conjugate inside the product" (no copy)
    fn operand<'a>(v: View<'a>, op: Op) -> (MatRef<'a, C64>, Conj) {
        let stored = MatRef::from_row_major_slice_with_stride(v.data, v.rows, v.cols, v.ld);
        match op {
            Op::Plain => (stored, Conj::No),
            Op::Adjoint => (stored.transpose(), Conj::Yes),
        }
    }
    let (lhs, conj_lhs) = operand(a, op_a);
    let (rhs, conj_rhs) = operand(b, op_b);
    let len = if m == 0 { 0 } else { (m - 1) * ldc + n };
    // (built as the transpose of a column-major view: faer 0.24's
    // `from_row_major_slice_with_stride_mut` lays the slice out column-major; the test below
    // caught it)
    let dst =
        MatMut::from_column_major_slice_with_stride_mut(&mut c[..len], n, m, ldc).transpose_mut();
    debug_assert_eq!((lhs.nrows(), lhs.ncols(), rhs.ncols()), (m, k, n));
    matmul_with_conj(
        dst,
        Accum::Replace,
        lhs,
        conj_lhs,
        rhs,
        conj_rhs,
        C64::new(1.0, 0.0),
        Par::Seq,
    );
    leave_wide_simd();
}

/// Clear the upper halves of the vector registers after faer's kernels.
///
/// faer picks AVX2/AVX-512 kernels at run time and can return with the upper register halves
/// still set; the rest of the core is built for baseline x86-64 (SSE2), and on this CPU every
/// SSE instruction of the thread then pays for merging with those stale upper halves. Measured
/// (`cargo bench --no-default-features --features faer --bench kernels -- simd`): a
/// Wilson–Dirac point on a thread that had just run one 64×64 faer eigensolve took about twice
/// as long, for the rest of the thread's life, until `vzeroupper` ran. So every call into faer
/// is followed by this.
#[inline]
pub fn leave_wide_simd() {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx") {
        // SAFETY: `_mm256_zeroupper` only needs AVX, which was detected just above.
        unsafe { std::arch::x86_64::_mm256_zeroupper() }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn random(len: usize, seed: u64) -> Vec<C64> {
        let mut rng = crate::test_rng::TestRng::new(seed);
        let mut next = || rng.uniform();
        (0..len).map(|_| C64::new(next(), next())).collect()
    }

    /// Every operand combination, with leading dimensions wider than the matrices (the
    /// occupied columns of an eigenvector block), against the triple loop.
    #[test]
    fn product_matches_loops() {
        for (m, k, n) in [
            (1, 1, 1),
            (3, 5, 2),
            (16, 32, 16),
            (32, 64, 32),
            (20, 7, 33),
        ] {
            for (op_a, op_b) in [
                (Op::Plain, Op::Plain),
                (Op::Adjoint, Op::Plain),
                (Op::Plain, Op::Adjoint),
                (Op::Adjoint, Op::Adjoint),
            ] {
                let (ra, ca) = if op_a == Op::Plain { (m, k) } else { (k, m) };
                let (rb, cb) = if op_b == Op::Plain { (k, n) } else { (n, k) };
                let (lda, ldb, ldc) = (ca + 3, cb + 1, n + 2);
                let a = random(ra * lda, 1 + m as u64);
                let b = random(rb * ldb, 7 + n as u64);
                let (va, vb) = (View::new(&a, ra, ca, lda), View::new(&b, rb, cb, ldb));
                let mut fast = vec![C64::new(9.0, 9.0); m * ldc];
                let mut slow = fast.clone();
                product(&mut fast, ldc, va, op_a, vb, op_b);
                product_loops(&mut slow, ldc, va, op_a, vb, op_b);
                for i in 0..m {
                    for j in 0..ldc {
                        let (x, y) = (fast[i * ldc + j], slow[i * ldc + j]);
                        assert!(
                            (x - y).norm() < 1e-13 * k as f64,
                            "{m}×{k}×{n} {op_a:?} {op_b:?} at {i},{j}: {x} vs {y}"
                        );
                    }
                }
            }
        }
    }
}
