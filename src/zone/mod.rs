//! The Brillouin zone: Bloch Hamiltonians H(κ) from terms and hoppings, the `BlochSource`
//! trait every Hamiltonian provider implements (`bloch`), and how far H(κ) can move over a box
//! of κ (`variation`), the bound behind proven gaps and resolved loops.
//!
//! Uses: linalg, exec.

pub mod bloch;
pub mod variation;
