//! The one error type of the core. The binding module maps each variant to a Python exception;
//! kernels never panic on bad input, they return one of these.

use thiserror::Error;

#[derive(Debug, Error, Clone, PartialEq)]
pub enum CoreError {
    /// Shapes, sizes or values that the caller should have validated (maps to `ValueError`).
    #[error("invalid input: {0}")]
    InvalidInput(String),
    /// An iterative kernel did not converge (maps to `ArithmeticError`).
    #[error("no convergence: {0}")]
    NoConvergence(String),
    /// A user-supplied Hamiltonian callback failed; the message carries the Python error.
    #[error("Hamiltonian callback failed: {0}")]
    Callback(String),
    /// The run was interrupted (Ctrl-C); finished work is kept by the caller.
    #[error("interrupted")]
    Interrupted,
    /// A bug: an internal invariant was broken or a panic was caught (maps to `RuntimeError`).
    #[error("internal error (please report): {0}")]
    Internal(String),
}

pub type CoreResult<T> = Result<T, CoreError>;

/// Shorthand for an `InvalidInput` error with a formatted message.
macro_rules! invalid {
    ($($arg:tt)*) => { $crate::error::CoreError::InvalidInput(format!($($arg)*)) };
}
pub(crate) use invalid;
