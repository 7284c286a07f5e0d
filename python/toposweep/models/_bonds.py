"""Neighbour bonds of a lattice with a basis, found from the geometry.

The honeycomb and diamond models are written in the literature as sums over nearest- and
next-nearest-neighbour bonds with factors that depend on the bond vectors (the spin–orbit
factor ν_ij or d¹ × d², the Rashba factor s × d̂). Rather than typing the bonds in by hand, the
builders enumerate them here from the lattice vectors and the site positions, so the published
form is applied literally and a wrong bond cannot slip in.

A bond ``(i, j, R)`` means the matrix element ⟨i, cell 0| H |j, cell R⟩, the convention of
:meth:`toposweep.TightBinding.add`. Each bond is listed once: its reverse ``(j, i, −R)`` is the
Hermitian conjugate the model implies.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ..tightbinding import TightBinding

__all__ = ["Bond", "add_spin_bond", "bond_shells", "common_neighbour"]

_TOL = 1e-9


@dataclass(frozen=True)
class Bond:
    """One bond: sites ``i`` (cell 0) and ``j`` (cell ``R``); ``vector`` points from i to j."""

    i: int
    j: int
    R: tuple[int, ...]
    vector: NDArray[np.float64]


def _cells(dim: int, reach: int) -> list[tuple[int, ...]]:
    return list(itertools.product(range(-reach, reach + 1), repeat=dim))


def bond_shells(
    lattice: NDArray[np.float64], sites: NDArray[np.float64], shells: int, reach: int = 2
) -> list[list[Bond]]:
    """Bonds grouped by distance: ``result[0]`` nearest neighbours, ``result[1]`` next, ...

    Parameters
    ----------
    lattice : array (dim, dim)
        Lattice vectors as rows (Cartesian).
    sites : array (nsite, dim)
        Site positions in reduced coordinates.
    shells : int
        Number of distance shells to return.
    reach : int
        Cells searched in each direction.

    Examples
    --------
    >>> import numpy as np
    >>> nn, nnn = bond_shells(np.eye(2), np.zeros((1, 2)), 2)
    >>> [b.R for b in nn], [b.R for b in nnn]
    ([(0, 1), (1, 0)], [(1, -1), (1, 1)])
    """
    found: list[tuple[float, Bond]] = []
    cart = sites @ lattice
    for i, j in itertools.product(range(len(sites)), repeat=2):
        if i > j:  # listed as (j, i, −R)
            continue
        for cell in _cells(lattice.shape[0], reach):
            if i == j and cell <= tuple(-c for c in cell):  # keep one of R, −R; skip R = 0
                continue
            vec = cart[j] + np.asarray(cell) @ lattice - cart[i]
            found.append((float(np.linalg.norm(vec)), Bond(i, j, cell, vec)))
    dists: list[float] = []
    for d, _ in sorted(found, key=lambda x: x[0]):
        if not dists or d > dists[-1] + _TOL:
            dists.append(d)
    return [[b for d, b in found if abs(d - dist) < _TOL] for dist in dists[:shells]]


def common_neighbour(
    lattice: NDArray[np.float64], sites: NDArray[np.float64], bond: Bond, nn_distance: float
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """The two nearest-neighbour legs (d¹, d²) of the path from site j to site i.

    The path runs through the one neighbour the two sites share: d¹ from j to the middle
    site, d² from the middle site to i.

    Raises ``ValueError`` unless exactly one shared nearest neighbour exists (true for
    second neighbours on the honeycomb and diamond lattices).

    Examples
    --------
    >>> import numpy as np
    >>> lat = np.array([[1.0, 0.0], [0.5, np.sqrt(3) / 2]])
    >>> sites = np.array([[0.0, 0.0], [1 / 3, 1 / 3]])
    >>> nnn = bond_shells(lat, sites, 2)[1][0]
    >>> d1, d2 = common_neighbour(lat, sites, nnn, 1 / np.sqrt(3))
    >>> bool(np.allclose(d1 + d2, -nnn.vector))
    True
    """
    cart = sites @ lattice
    r_i = cart[bond.i]
    r_j = cart[bond.j] + np.asarray(bond.R) @ lattice
    shifts = np.asarray(_cells(lattice.shape[0], 3), dtype=float) @ lattice
    candidates = (cart[:, None, :] + shifts[None, :, :]).reshape(-1, lattice.shape[0])
    near_i = np.abs(np.linalg.norm(candidates - r_i, axis=1) - nn_distance) < _TOL
    near_j = np.abs(np.linalg.norm(candidates - r_j, axis=1) - nn_distance) < _TOL
    legs = [(r_k - r_j, r_i - r_k) for r_k in candidates[near_i & near_j]]
    if len(legs) != 1:
        raise ValueError(f"expected one shared neighbour for {bond}, found {len(legs)}")
    return legs[0]


def add_spin_bond(
    model: TightBinding, bond: Bond, nsite: int, spin: NDArray[np.complex128], term: str
) -> None:
    """Add ⟨i,0|H|j,R⟩ = ``spin`` (a 2×2 spin matrix) in a site ⊗ spin basis (site slowest).

    An intra-cell bond (R = 0) is the one case where the model does not imply the conjugate
    (an on-site block must be Hermitian as given), so it is added here explicitly.
    """
    site = np.zeros((nsite, nsite), dtype=complex)
    site[bond.i, bond.j] = 1.0
    t = np.kron(site, spin)
    if not any(bond.R):
        t = t + t.conj().T
    model.add(bond.R, t, term=term)
