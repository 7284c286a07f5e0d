//! Topology of the occupied bands: Wilson loops along κ lines (`wilson`), loops resolved to the
//! gap (`fine_line`), hybrid Wannier centre flow and its Z2 (`flow`), the time-reversal-invariant
//! planes with adaptive pump lines (`plane_flows`), the lattice Z2 (`lattice_z2`) and its mesh
//! refined locally (`lattice_refine`), Fu–Kane parity
//! and the reason codes (`parity`), and the indices (ν0; ν1ν2ν3) with the phase (`indices`).
//!
//! Uses: zone, linalg, exec.

pub mod fine_line;
pub mod flow;
pub mod indices;
pub mod lattice_refine;
pub mod lattice_z2;
pub mod parity;
pub mod plane_flows;
pub mod wilson;
