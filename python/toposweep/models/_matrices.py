"""Pauli matrices and Dirac Γ matrices shared by the builtin models."""

from __future__ import annotations

import numpy as np

s0 = np.eye(2, dtype=complex)
sx = np.array([[0, 1], [1, 0]], dtype=complex)
sy = np.array([[0, -1j], [1j, 0]], dtype=complex)
sz = np.array([[1, 0], [0, -1]], dtype=complex)


def kron(*ms: np.ndarray) -> np.ndarray:
    """Kronecker product of several matrices (first factor = slowest index)."""
    out = np.eye(1, dtype=complex)
    for m in ms:
        out = np.kron(out, m)
    return out


#: spin-1/2 time reversal U_T = iσ_y acting on the spin index
spin_time_reversal = 1j * sy
