"""Cubic d–f lattice model: the generic picture of a heavy-fermion band inversion.

A wide even-parity d band, a narrow odd-parity f band and an odd-parity (p-like)
hybridisation between them:

H(k) = [[ε_d(k), V Σ_i sin k_i s_i], [V Σ_i sin k_i s_i, ε_f(k)]] in the basis
orbital ⊗ spin (orbital slowest: d↑, d↓, f↑, f↓), simple cubic lattice (a = 1), with

    ε_d(k) = t_d g(k),   ε_f(k) = ε_f + t_f g(k),
    g(k) = −2 Σ_i cos k_i + (3/2) Σ_{i<j} cos k_i cos k_j,

i.e. both bands have nearest-neighbour hopping −t and next-nearest-neighbour (face-diagonal)
hopping +3t/8, the d level is fixed at 0 and f_level is ε_f. This form is our own (no
published parameter set); the construction — an inverted narrow band of opposite parity,
hybridised by an odd-in-k term — is common practice, no source.

Why the second-neighbour hopping: g takes the values −1.5 (Γ), −3.5 (three X), +0.5 (three M),
+10.5 (R) at the TRIMs, so the d band is lowest at the X points and the f level can cross it
there alone. The parity of the occupied Kramers pair at a TRIM is +1 where the d level lies
below the f level and −1 elsewhere (Fu & Kane, Phys. Rev. B 76, 045302 (2007)); with
t_d − t_f > 0 the f level passes the TRIM classes in the order X, Γ, M, R as it rises:

    ε_f < −3.5 Δ            (0;000)   no inversion
    −3.5 Δ < ε_f < −1.5 Δ   (1;111)   inversion at the three X points
    −1.5 Δ < ε_f < 0.5 Δ    (0;111)   inversion at X and Γ
    0.5 Δ < ε_f < 10.5 Δ    (1;111)   inversion everywhere but R

with Δ = t_d − t_f (the hybridisation does not act at the TRIMs, so it moves no boundary).
"""

from __future__ import annotations

import itertools

import numpy as np

from ..tightbinding import TightBinding
from ._defaults import checked_defaults
from ._matrices import kron, s0, spin_time_reversal, sx, sy, sz

__all__ = ["df_lattice"]

#: second-neighbour hopping relative to the nearest-neighbour one (see the module docstring)
_NNN_RATIO = -3.0 / 8.0


def _band_hoppings(model: TightBinding, projector: np.ndarray, term: str) -> None:
    """Add t·g(k) on one orbital: amplitude −1 on the 3 axes, +3/8 on the 6 face diagonals."""
    for axis in range(3):
        r = [0, 0, 0]
        r[axis] = 1
        model.add(tuple(r), -projector, term=term)
    for i, j in itertools.combinations(range(3), 2):
        for sign in (1, -1):
            r = [0, 0, 0]
            r[i], r[j] = 1, sign
            model.add(tuple(r), -_NNN_RATIO * projector, term=term)


def df_lattice(
    *,
    d_hopping: float = 0.25,
    f_hopping: float = -0.05,
    f_level: float = -0.75,
    hybridisation: float = 0.25,
) -> TightBinding:
    r"""Build the cubic d–f lattice model with four orbitals (orbital ⊗ spin).

    H(k) = [[t_d g(k), V Σ sin k_i s_i], [V Σ sin k_i s_i, ε_f + t_f g(k)]] with
    g(k) = −2 Σ cos k_i + (3/2) Σ_{i<j} cos k_i cos k_j (nearest-neighbour hopping −t,
    face-diagonal hopping +3t/8) and the d level at 0. A model of our own for the generic
    heavy-fermion band inversion (common practice, no source); see the module docstring for
    the phases as the f level rises.

    Terms: ``d_hopping`` (t_d, wide even-parity d band), ``f_hopping`` (t_f, narrow odd-parity
    f band; negative, so the f band curves the other way), ``f_level`` (ε_f, on-site f energy),
    ``hybridisation`` (V, the p-like d–f mixing V Σ sin k_i τ_x ⊗ s_i). Time reversal
    U_T = 1 ⊗ iσ_y and inversion P = τ_z ⊗ 1 (d even, f odd) hold at every parameter point.

    Parameters
    ----------
    d_hopping, f_hopping, f_level, hybridisation : float
        Default values of the four terms (stored in ``.defaults``), in eV. The defaults put
        the f level inside the d band so the bands are inverted at the three X points only:
        a strong topological insulator (1;111) with a direct gap of about 0.3 eV and an
        indirect gap of about 0.1 eV (bandwidth about 3.9 eV).

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.invariants(ts.models.df_lattice(), filling=2)
    >>> int(ds.nu0), ds.nu.values.tolist(), int(ds.nu0_parity)
    (1, [1, 1, 1], 1)
    >>> int(ts.invariants(ts.models.df_lattice(), filling=2, params={"f_level": -1.5}).phase)
    0
    """
    m = TightBinding(
        3,
        4,
        lattice=np.eye(3),
        positions=np.zeros((4, 3)),
        time_reversal=kron(s0, spin_time_reversal),
        inversion=kron(sz, s0),
        energy_unit="eV",
        name="cubic d-f lattice model",
    )
    d_orbital = np.diag([1.0, 0.0])
    f_orbital = np.diag([0.0, 1.0])
    _band_hoppings(m, kron(d_orbital, s0), "d_hopping")
    _band_hoppings(m, kron(f_orbital, s0), "f_hopping")
    m.add((0, 0, 0), kron(f_orbital, s0), term="f_level")
    # V sin k Γ = T e^{ik} + T† e^{−ik} with T = −(i/2) V Γ, Γ_i = τ_x ⊗ s_i
    for axis, s in enumerate((sx, sy, sz)):
        r = [0, 0, 0]
        r[axis] = 1
        m.add(tuple(r), -0.5j * kron(sx, s), term="hybridisation")
    m.defaults = checked_defaults(
        "df_lattice",
        d_hopping=d_hopping,
        f_hopping=f_hopping,
        f_level=f_level,
        hybridisation=hybridisation,
    )
    m.parameter_info = {
        "d_hopping": {"long_name": "d-band hopping t_d", "units": "eV"},
        "f_hopping": {"long_name": "f-band hopping t_f", "units": "eV"},
        "f_level": {"long_name": "f level energy", "units": "eV"},
        "hybridisation": {"long_name": "d-f hybridisation V", "units": "eV"},
    }
    return m
