"""Symmetry operators: validation of the matrices and numerical checks against H(κ)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import ModelError, SymmetryError

__all__ = ["as_operator", "check_time_reversal", "check_inversion", "normalised_inversion"]

TOLERANCE = 1e-8


def as_operator(m: ArrayLike | None, norb: int, what: str) -> NDArray[np.complex128] | None:
    """Validate a unitary norb×norb operator matrix (or ``None``)."""
    if m is None:
        return None
    try:
        a = np.asarray(m, dtype=complex)
    except (TypeError, ValueError) as exc:
        raise ModelError(f"{what} must be a complex {norb}×{norb} matrix: {exc}") from None
    if a.shape != (norb, norb):
        raise ModelError(f"{what} must have shape ({norb}, {norb}), got {a.shape}")
    if not np.all(np.isfinite(a)):
        raise ModelError(f"{what} contains NaN or infinity")
    err = np.abs(a @ a.conj().T - np.eye(norb)).max()
    if err > 1e-8:
        raise SymmetryError(f"{what} must be unitary; |U U† − 1| = {err:.2e}")
    if what == "time_reversal":
        kr = np.abs(a @ a.conj() + np.eye(norb)).max()
        if kr > 1e-8:
            raise SymmetryError(
                "time_reversal U_T must satisfy U_T U_T* = −1 (spin-1/2 time reversal, "
                f"Kramers pairs); |U_T U_T* + 1| = {kr:.2e}. For spin as the slowest index "
                "use U_T = iσ_y ⊗ 1."
            )
    return a


def normalised_inversion(p: NDArray[np.complex128]) -> NDArray[np.complex128]:
    """Return P scaled so that P² = 1 (an operator with P² = −1 is multiplied by i)."""
    sq = p @ p
    n = p.shape[0]
    if np.abs(sq - np.eye(n)).max() < 1e-8:
        return p
    if np.abs(sq + np.eye(n)).max() < 1e-8:
        return 1j * p
    raise SymmetryError("inversion P must square to ±1")


def _relative(res: NDArray, ref: NDArray) -> float:
    scale = max(float(np.abs(ref).max()), 1e-300)
    return float(np.abs(res).max()) / scale


def check_time_reversal(u: NDArray, h_plus: NDArray, h_minus: NDArray, label: str) -> None:
    """Raise unless U_T H(κ)* U_T† = H(−κ) on the samples."""
    lhs = u @ h_plus.conj() @ u.conj().T
    rel = _relative(lhs - h_minus, h_plus)
    if rel > TOLERANCE:
        raise SymmetryError(
            f"time reversal does not hold for {label}: max |U_T H(κ)* U_T† − H(−κ)| / max|H| = "
            f"{rel:.2e} at random κ. Check U_T, or remove time_reversal= if the model breaks it."
        )


def check_inversion(p: NDArray, h_plus: NDArray, h_minus: NDArray, label: str) -> None:
    """Raise unless P H(κ) P† = H(−κ) on the samples."""
    normalised_inversion(p)
    lhs = p @ h_plus @ p.conj().T
    rel = _relative(lhs - h_minus, h_plus)
    if rel > TOLERANCE:
        raise SymmetryError(
            f"inversion does not hold for {label}: max |P H(κ) P† − H(−κ)| / max|H| = {rel:.2e} "
            "at random κ. Pass inversion=None (the Wilson loop does not need it) or fix P."
        )
