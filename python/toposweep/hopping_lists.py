"""Hopping lists made elsewhere, checked and folded into the entries of a tight-binding model.

The two arrays every tight-binding code can write — integer lattice vectors R (nR, dim) and
hopping matrices T (nR, norb, norb), as a full list (every bond with its partner −R) or a half
list (one of each pair) — become the (R, T, term) entries that :meth:`TightBinding.add` takes.
This module builds no model itself, so that :class:`~toposweep.TightBinding` can use it
(``TightBinding.from_hoppings``) without an import circle.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import ModelError

__all__ = ["hopping_entries"]

Entry = tuple[tuple[int, ...], NDArray[np.complex128], "str | None"]


def _term_names(terms: str | Sequence[str | None] | None, n: int) -> list[str | None]:
    if terms is None or isinstance(terms, str):
        return [terms or None] * n
    names = [None if t in (None, "") else str(t) for t in terms]
    if len(names) != n:
        raise ModelError(f"terms must give one name per hopping ({n}), got {len(names)}")
    return names


def hopping_entries(
    R: ArrayLike,
    T: ArrayLike,
    *,
    terms: str | Sequence[str | None] | None = None,
    half: bool | None = None,
    weights: ArrayLike | None = None,
    tolerance: float = 1e-8,
) -> tuple[int, int, list[Entry]]:
    """``(dim, norb, entries)`` of a hopping list: one (R, T, term) per bond to add.

    The checks and options of :meth:`toposweep.TightBinding.from_hoppings`, which documents
    them; entries with the same R and term are summed, and of a full list one of each pair is
    kept.
    """
    try:
        r = np.asarray(R)
        t = np.asarray(T, dtype=complex)
    except (TypeError, ValueError) as exc:
        raise ModelError(f"R and T must be numeric arrays: {exc}") from None
    if r.ndim != 2 or r.shape[0] == 0:
        raise ModelError(f"R must be an integer array of shape (nR, dim), got shape {r.shape}")
    if t.ndim != 3 or t.shape[0] != r.shape[0] or t.shape[1] != t.shape[2]:
        raise ModelError(
            f"T must have shape (nR, norb, norb) with nR = {r.shape[0]} (from R), got {t.shape}"
        )
    if not np.issubdtype(r.dtype, np.integer):
        if not (np.all(np.isfinite(r)) and np.all(r == np.round(r))):
            raise ModelError("R must hold integers (lattice vectors in primitive units)")
        r = np.round(r).astype(np.int64)
    if weights is not None:
        w = np.asarray(weights, dtype=float)
        if w.shape != (r.shape[0],) or not np.all(w > 0):
            raise ModelError(f"weights must be {r.shape[0]} positive numbers, got shape {w.shape}")
        t = t / w[:, None, None]
    dim, norb = r.shape[1], t.shape[1]
    names = _term_names(terms, r.shape[0])
    # sum entries with the same (R, term): codes may list a bond once per contribution
    summed: dict[tuple[tuple[int, ...], str | None], NDArray[np.complex128]] = {}
    for vec, mat, name in zip(map(tuple, r.tolist()), t, names, strict=True):
        key = (vec, name)
        summed[key] = summed[key] + mat if key in summed else mat.copy()
    bonds = [k for k in summed if any(k[0])]
    partnered = [k for k in bonds if (tuple(-x for x in k[0]), k[1]) in summed]
    if half is None:
        if partnered and len(partnered) != len(bonds):
            lone = next(k for k in bonds if k not in set(partnered))
            raise ModelError(
                f"the list has both R and −R for some bonds but R = {lone[0]} has no partner: "
                "pass half=True (each entry as given, conjugates implied) or half=False (a "
                "full list, then every bond needs its −R)"
            )
        half = not partnered
    if not half:
        _check_pairs(summed, bonds, tolerance)
    return (
        dim,
        norb,
        [
            (vec, mat, name)
            for (vec, name), mat in summed.items()
            if half or not any(vec) or not _is_negative(vec)  # (the partner of a kept bond)
        ],
    )


def _is_negative(vec: tuple[int, ...]) -> bool:
    """Whether the first nonzero component is negative (−R of a kept bond R)."""
    return next(x for x in vec if x) < 0


def _check_pairs(
    summed: dict[tuple[tuple[int, ...], str | None], NDArray[np.complex128]],
    bonds: list[tuple[tuple[int, ...], str | None]],
    tolerance: float,
) -> None:
    scale = max(float(np.abs(m).max()) for m in summed.values()) or 1.0
    worst, where = 0.0, None
    for vec, name in bonds:
        partner = summed.get((tuple(-x for x in vec), name))
        if partner is None:
            raise ModelError(
                f"half=False, but R = {vec} has no partner −R in the list: pass half=True for "
                "a list with one of each pair"
            )
        err = float(np.abs(partner - summed[(vec, name)].conj().T).max()) / scale
        if err > worst:
            worst, where = err, vec
    if worst > tolerance:
        raise ModelError(
            f"the full list is not Hermitian: T(−R) differs from T(R)† by {worst:.2e} (relative) "
            f"at R = {where}; check the matrices' orbital order (T[R][a, b]: b in cell 0 to a in "
            "cell R), or pass half=True if the list holds one of each pair"
        )
