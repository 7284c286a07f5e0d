//! Linear algebra on small dense complex matrices stored row-major in flat slices: the
//! Hermitian eigensolvers (entry points and batches in `eigen`, Jacobi and the large-n path in
//! `eigen/`, n ≤ 16 in `eigen_small`, four n ≤ 8 matrices in vector lanes in `eigen_quad`),
//! dense products for many occupied bands (`dense`), overlaps, polar factors and eigenphases
//! of unitaries (`matrix`).
//!
//! Uses: nothing but `error` and the crate root (`C64`, `fmadd`). Every other folder may use it.

pub mod dense;
pub mod eigen;
mod eigen_quad;
mod eigen_small;
pub mod matrix;
