"""Exact transformations of tight-binding models that must not change (or must change in a
known way) the Z2 indices. Plain NumPy; used by the property tests.

Each function builds a new :class:`toposweep.TightBinding` from the hoppings of the old one, so
the transformation is exact in every Bloch Hamiltonian, not only at sampled κ.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray
from toposweep import TightBinding

__all__ = [
    "add_trivial_pair",
    "double_cell",
    "permute_orbitals",
    "scale_and_shift",
    "two_copies",
]

Array = NDArray[np.complex128]


def _copy(
    model: TightBinding,
    norb: int,
    transform: Callable[[tuple[int, ...], Array], list[tuple[tuple[int, ...], Array]]],
    time_reversal: Array | None,
    inversion: Array | None,
) -> TightBinding:
    out = TightBinding(
        model.dim, norb, time_reversal=time_reversal, inversion=inversion, name=model.name
    )
    for r, t, term in model.hoppings():
        for r2, t2 in transform(r, t):
            out.add(r2, t2, term)
    out.defaults = dict(model.defaults)
    return out


def permute_orbitals(model: TightBinding, perm: NDArray[np.int64]) -> TightBinding:
    """Relabel orbital ``perm[i]`` as ``i`` (H → Q H Qᵀ with the permutation matrix Q)."""
    q = np.eye(model.norb)[perm]

    def rot(m: Array | None) -> Array | None:
        return None if m is None else q @ m @ q.T

    return _copy(
        model,
        model.norb,
        lambda r, t: [(r, q @ t @ q.T)],
        rot(model.time_reversal),
        rot(model.inversion),
    )


def scale_and_shift(model: TightBinding, scale: float, shift: float) -> TightBinding:
    """H → scale·H + shift·1 (scale > 0): the same eigenvectors, energies mapped linearly."""

    def tr(r: tuple[int, ...], t: Array) -> list[tuple[tuple[int, ...], Array]]:
        return [(r, scale * t)]

    out = _copy(model, model.norb, tr, model.time_reversal, model.inversion)
    out.add((0,) * model.dim, shift * np.eye(model.norb))
    return out


def add_trivial_pair(model: TightBinding, energy: float) -> TightBinding:
    """Append a decoupled Kramers pair of flat bands at ``energy`` (two more orbitals, even
    under inversion, U_T = iσ_y on them)."""
    n = model.norb
    u_t = np.zeros((n + 2, n + 2), complex)
    u_t[:n, :n] = model.time_reversal
    u_t[n:, n:] = [[0, 1], [-1, 0]]
    p = None
    if model.inversion is not None:
        p = np.eye(n + 2, dtype=complex)
        p[:n, :n] = model.inversion

    def pad(r: tuple[int, ...], t: Array) -> list[tuple[tuple[int, ...], Array]]:
        big = np.zeros((n + 2, n + 2), complex)
        big[:n, :n] = t
        return [(r, big)]

    out = _copy(model, n + 2, pad, u_t, p)
    extra = np.zeros((n + 2, n + 2), complex)
    extra[n:, n:] = energy * np.eye(2)
    out.add((0,) * model.dim, extra)
    return out


def two_copies(model: TightBinding) -> TightBinding:
    """Two uncoupled copies: H ⊕ H, U_T ⊕ U_T, P ⊕ P."""
    n = model.norb

    def dsum(m: Array | None) -> Array | None:
        if m is None:
            return None
        out = np.zeros((2 * n, 2 * n), complex)
        out[:n, :n] = m
        out[n:, n:] = m
        return out

    return _copy(model, 2 * n, lambda r, t: [(r, dsum(t))], dsum(model.time_reversal), None)


def double_cell(model: TightBinding, axis: int) -> TightBinding:
    """The same crystal described with the cell doubled along ``axis`` (0-based).

    Orbital (s, a) of the new cell is orbital a of old cell 2R + s (s = 0, 1). A hopping T from
    old cell 0 to old cell R becomes, for each s, a hopping from sub-cell s to sub-cell
    s' = (s + R_axis) mod 2 of new cell R' with R'_axis = ⌊(s + R_axis)/2⌋. Pieces that land on
    R' = 0 between different sub-cells are added together with their conjugate (the implied
    reverse hop), because an on-site block must be Hermitian.
    """
    n = model.norb
    u_t = np.kron(np.eye(2), model.time_reversal)

    def split(r: tuple[int, ...], t: Array) -> list[tuple[tuple[int, ...], Array]]:
        out = []
        for s in (0, 1):
            target = s + r[axis]
            s2, cell = target % 2, target // 2
            r2 = list(r)
            r2[axis] = cell
            big = np.zeros((2 * n, 2 * n), complex)
            big[s * n : (s + 1) * n, s2 * n : (s2 + 1) * n] = t
            if not any(r2) and s != s2:
                big = big + big.conj().T
            out.append((tuple(r2), big))
        return out

    return _copy(model, 2 * n, split, u_t, None)
