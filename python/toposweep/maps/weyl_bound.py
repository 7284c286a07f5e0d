"""How far the bands of a tight-binding model can move between two parameter points.

A :class:`~toposweep.TightBinding` is affine in its term coefficients:
H(κ; p) = H_fixed(κ) + Σ_term c_term(p) H_term(κ), with H_term(κ) = Σ_R C_term,R e^{2πiκ·R}.
So at every κ, ‖H(κ; p) − H(κ; p′)‖₂ ≤ Σ_term |c_term(p) − c_term(p′)| B_term with
B_term = Σ_R ‖C_term,R‖₂ (triangle inequality, |e^{iφ}| = 1; tightened per
±R pair below), and by Weyl's inequality no band
energy moves by more than that δ(p, p′) — at any κ. The direct gap at the filling therefore
shrinks by at most 2δ: if a proven lower bound of the gap at p′ exceeds 2δ(p, p′), the gap
stays open along the whole segment from p′ to p (δ grows linearly along it), and every index
that needs only a gap and the symmetries that hold at both ends is the same at p as at p′.

The symmetry residual of an affine family is itself affine in the coefficients, so a symmetry
that holds at p and at p′ holds on the whole segment between them: checking it at p (the
sweep's per-point check, a linear combination of per-term residuals) covers the path, and is
implied by the stronger per-term condition "every swept term respects the symmetry".
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..model import Model
from ..tightbinding import TightBinding

__all__ = ["band_shift_bounds", "term_norm_bounds"]

#: B_term is inflated by this relative margin so that the rounding of the singular values and
#: of the sums (~1e-15 relative) can never make the bound smaller than the true norm
SAFETY = 1e-9


def _canonical(r: tuple[int, ...]) -> tuple[tuple[int, ...], bool]:
    """``(R, False)`` if R is the representative of the pair ±R, else ``(−R, True)``."""
    neg = tuple(-x for x in r)
    return (r, False) if r >= neg else (neg, True)


def term_norm_bounds(model: Model) -> NDArray[np.float64] | None:
    """B_term = Σ_R ‖C_term,R‖₂ for each term of a tight-binding model (None for others).

    C_term,R is the Fourier coefficient of the term at R: the hoppings added at R plus the
    conjugates of those added at −R (an on-site hopping, R = 0, counts once), so the bound is
    as tight as the triangle inequality allows over distinct R. Order: ``model.terms``.

    Examples
    --------
    >>> import toposweep as ts
    >>> # Wilson-Dirac: mass is the on-site Γ4 (norm 1); hopping: 3 bond pairs, each ≤ √2
    >>> term_norm_bounds(ts.models.wilson_dirac()).round(6).tolist()
    [1.0, 4.242641]
    """
    if not isinstance(model, TightBinding):
        return None
    terms = model.terms
    coeff: list[dict[tuple[int, ...], NDArray[np.complex128]]] = [{} for _ in terms]
    index = {t: i for i, t in enumerate(terms)}
    for r, t, term in model.hoppings():
        if term is None:
            continue
        key, flipped = _canonical(r)
        block = t.conj().T if flipped else t
        table = coeff[index[term]]
        table[key] = table.get(key, 0) + block
    out = np.zeros(len(terms))
    for i, table in enumerate(coeff):
        for r, c in table.items():
            out[i] += _pair_norm_bound(c) if any(r) else float(np.linalg.norm(c, 2))
    return out * (1.0 + SAFETY)


def _pair_norm_bound(c: NDArray[np.complex128]) -> float:
    """Bound of ‖C e^{iφ} + C† e^{−iφ}‖₂ over all φ.

    The sum is cos φ A + sin φ B with Hermitian A = C + C†, B = i(C − C†); a Hermitian
    matrix's norm is its numerical radius, and |cos φ ⟨x,Ax⟩ + sin φ ⟨x,Bx⟩| ≤
    √(‖A‖² + ‖B‖²), so the smaller of that and 2‖C‖ bounds it (the first is √2 for a
    Wilson-Dirac bond, where the triangle inequality gives 2).
    """
    a = float(np.linalg.norm(c + c.conj().T, 2))
    b = float(np.linalg.norm(1j * (c - c.conj().T), 2))
    return min(2.0 * float(np.linalg.norm(c, 2)), float(np.hypot(a, b)))


def band_shift_bounds(
    coeffs: NDArray[np.float64], source: NDArray[np.float64], bounds: NDArray[np.float64]
) -> NDArray[np.float64]:
    """δ(p, p′) = Σ_term |c_term(p) − c_term(p′)| B_term for rows ``coeffs`` against ``source``.

    ``coeffs`` is (..., nterms), ``source`` (nterms,) or broadcastable; returns (...).

    Examples
    --------
    >>> band_shift_bounds(np.array([[1.0, 2.0], [0.5, 2.0]]), np.array([1.0, 1.0]),
    ...                   np.array([1.0, 3.0])).tolist()
    [3.0, 3.5]
    """
    diff: Any = np.abs(np.asarray(coeffs, float) - np.asarray(source, float))
    return np.asarray(diff @ np.asarray(bounds, float), dtype=float)
