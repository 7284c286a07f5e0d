"""Symmetry operators: validation of the matrices and numerical checks against H(κ)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import ModelError, SymmetryError

__all__ = [
    "TOLERANCE",
    "as_operator",
    "normalised_inversion",
    "symmetry_error",
    "symmetry_residual",
]

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
    with np.errstate(over="ignore", invalid="ignore"):  # huge entries: inf/NaN, refused below
        err = np.abs(a @ a.conj().T - np.eye(norb)).max()
        kr = np.abs(a @ a.conj() + np.eye(norb)).max()
    if not err <= 1e-8:  # written so that NaN fails too
        raise SymmetryError(f"{what} must be unitary; |U U† − 1| = {err:.2e}")
    if what == "time_reversal":
        if not kr <= 1e-8:
            raise SymmetryError(
                "time_reversal U_T must satisfy U_T U_T* = −1 (spin-1/2 time reversal, "
                f"Kramers pairs); |U_T U_T* + 1| = {kr:.2e}. For spin as the slowest index "
                "use U_T = iσ_y ⊗ 1."
            )
    return a


#: normalised inversion matrices by their entries (see :func:`normalised_inversion`)
_NORMALISED: dict[tuple, NDArray[np.complex128]] = {}


def normalised_inversion(p: NDArray[np.complex128]) -> NDArray[np.complex128]:
    """Return P scaled so that P² = 1 (an operator with P² = −1 is multiplied by i).

    The result is a read-only copy, kept for matrices seen before: every call of
    :func:`toposweep.invariants` normalises the model's P again (~6 µs of serial Python).

    Examples
    --------
    >>> import numpy as np
    >>> normalised_inversion(np.diag([1j, -1j])).real.tolist()
    [[-1.0, 0.0], [0.0, 1.0]]
    """
    key = (p.shape, p.dtype.str, p.tobytes())
    found = _NORMALISED.get(key)
    if found is None:
        found = np.array(_normalised(p))
        found.setflags(write=False)
        if len(_NORMALISED) >= 32:
            _NORMALISED.clear()
        _NORMALISED[key] = found
    return found


def _normalised(p: NDArray[np.complex128]) -> NDArray[np.complex128]:
    sq = p @ p
    n = p.shape[0]
    if np.abs(sq - np.eye(n)).max() < 1e-8:
        return p
    if np.abs(sq + np.eye(n)).max() < 1e-8:
        return 1j * p
    raise SymmetryError("inversion P must square to ±1")


def symmetry_residual(op: NDArray, h_plus: NDArray, h_minus: NDArray, kind: str) -> float:
    """max|O H(κ)^(*) O† − H(−κ)| / max|H(κ)| over a stack of samples.

    ``kind="time_reversal"`` conjugates H (antiunitary Θ = U_T K); ``"inversion"`` does not.
    """
    h = h_plus.conj() if kind == "time_reversal" else h_plus
    lhs = op @ h @ op.conj().T
    scale = max(float(np.abs(h_plus).max(initial=0.0)), 1e-300)
    return float(np.abs(lhs - h_minus).max(initial=0.0)) / scale


#: residuals below this (but above TOLERANCE) look like rounding in the model's source, e.g.
#: Wannier-derived hoppings, rather than a wrong operator
NEARLY = 1e-2


def symmetry_error(kind: str, residual: float, where: str) -> SymmetryError:
    """The error raised when a declared operator does not hold."""
    if kind == "time_reversal":
        text = (
            f"time reversal does not hold {where}: max |U_T H(κ)* U_T† − H(−κ)| / max|H| = "
            f"{residual:.2e} at random κ (tolerance {TOLERANCE:.0e}). "
        )
        if residual < NEARLY:
            return SymmetryError(
                text + "The model is only nearly symmetric (typical of fitted or "
                "Wannier-derived hoppings): symmetrise it — toposweep.symmetrise(model) for a "
                "tight-binding model (every hopping T becomes (T + U_T T* U_T†)/2), or average "
                "H(κ) with U_T H(−κ)* U_T† in your own function."
            )
        return SymmetryError(text + "Check U_T, or the parameters that break it.")
    text = (
        f"inversion does not hold {where}: max |P H(κ) P† − H(−κ)| / max|H| = {residual:.2e} "
        f"at random κ (tolerance {TOLERANCE:.0e}). "
    )
    if residual < NEARLY:
        return SymmetryError(
            text + "The model is only nearly symmetric: symmetrise it — "
            "toposweep.symmetrise(model, inversion=True) for a tight-binding model (the hopping "
            "on bond R becomes (T_R + P T_{−R} P†)/2) — or pass inversion=None (the Wilson loop "
            "does not need it)."
        )
    return SymmetryError(text + "Pass inversion=None (the Wilson loop does not need it) or fix P.")
