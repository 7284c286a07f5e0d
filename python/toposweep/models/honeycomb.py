"""Kane–Mele honeycomb model (Kane & Mele, Phys. Rev. Lett. 95, 226801 (2005) and 146802 (2005)).

H = t Σ_⟨ij⟩ c_i† c_j + i λ_SO Σ_⟨⟨ij⟩⟩ ν_ij c_i† s_z c_j + i λ_R Σ_⟨ij⟩ c_i† (s × d̂_ij)_z c_j
  + λ_v Σ_i ξ_i c_i† c_i,

with ν_ij = (2/√3)(d̂¹ × d̂²)_z = ±1 for the two nearest-neighbour legs d¹, d² of the path from
j to i, d̂_ij the unit vector from j to i, and ξ = +1 on sublattice A, −1 on B. Lattice vectors
a₁ = (1, 0), a₂ = (1/2, √3/2) (nearest-neighbour distance 1/√3); A at the origin, B at
(a₁ + a₂)/3. Basis: sublattice ⊗ spin (sublattice slowest). Without Rashba the Z2-odd phase
ends at λ_v = 3√3 λ_SO (Kane & Mele 2005).
"""

from __future__ import annotations

import numpy as np

from ..tightbinding import TightBinding
from ._bonds import add_spin_bond, bond_shells, common_neighbour
from ._defaults import checked_defaults
from ._matrices import kron, s0, spin_time_reversal, sx, sy, sz

__all__ = ["kane_mele"]

_LATTICE = np.array([[1.0, 0.0], [0.5, np.sqrt(3.0) / 2.0]])
_SITES = np.array([[0.0, 0.0], [1.0 / 3.0, 1.0 / 3.0]])  # A, B in reduced coordinates


def kane_mele(
    *,
    hopping: float = 1.0,
    spin_orbit: float = 0.1,
    rashba: float = 0.0,
    staggered: float = 0.0,
) -> TightBinding:
    r"""Build the Kane–Mele honeycomb model with four orbitals (sublattice ⊗ spin).

    Published form (Kane & Mele, Phys. Rev. Lett. 95, 226801 (2005)):
    H = t Σ⟨ij⟩ c†_i c_j + i λ_SO Σ⟨⟨ij⟩⟩ ν_ij c†_i s_z c_j + i λ_R Σ⟨ij⟩ c†_i (s × d̂_ij)_z c_j
    + λ_v Σ_i ξ_i c†_i c_i. The bonds and the factors ν_ij and d̂_ij are found from the
    geometry (lattice a₁ = (1, 0), a₂ = (1/2, √3/2); A at 0, B at (a₁+a₂)/3).

    Terms: ``hopping`` (t), ``spin_orbit`` (λ_SO), ``rashba`` (λ_R), ``staggered`` (λ_v).
    Time reversal U_T = 1 ⊗ iσ_y holds at every parameter point. Inversion P = τ_x ⊗ 1 (the
    sublattice swap about a bond centre) is declared: the staggered potential breaks it, and
    so does the Rashba term, so there the parity indices come out undefined (the Wilson-loop
    index does not need inversion).

    Parameters
    ----------
    hopping, spin_orbit, rashba, staggered : float
        Default values of the four terms (stored in ``.defaults``); energies in units of a
        reference energy (dimensionless). The defaults sit in the Z2-odd (quantum spin Hall)
        phase with a gap of 6√3 λ_SO ≈ 1.04.

    Examples
    --------
    >>> import toposweep as ts
    >>> km = ts.models.kane_mele()
    >>> int(ts.invariants(km, filling=2).nu0)
    1
    >>> int(ts.invariants(km, filling=2, params={"staggered": 0.7}).nu0)
    0
    """
    m = TightBinding(
        2,
        4,
        lattice=_LATTICE,
        positions=np.repeat(_SITES, 2, axis=0),
        time_reversal=kron(s0, spin_time_reversal),
        inversion=kron(sx, s0),
        name="Kane-Mele honeycomb model",
    )
    nn, nnn = bond_shells(_LATTICE, _SITES, 2)
    d_nn = float(np.linalg.norm(nn[0].vector))
    for bond in nn:
        add_spin_bond(m, bond, 2, s0, "hopping")
    for bond in nnn:
        d1, d2 = common_neighbour(_LATTICE, _SITES, bond, d_nn)
        cross_z = d1[0] * d2[1] - d1[1] * d2[0]
        nu = (2.0 / np.sqrt(3.0)) * cross_z / d_nn**2
        add_spin_bond(m, bond, 2, 1j * round(nu) * sz, "spin_orbit")
    for bond in nn:
        d = -bond.vector / d_nn  # unit vector from j to i
        s_cross_d = sx * d[1] - sy * d[0]  # (s × d̂)_z
        add_spin_bond(m, bond, 2, 1j * s_cross_d, "rashba")
    m.add((0, 0), kron(sz, s0), term="staggered")
    m.defaults = checked_defaults(
        "kane_mele", hopping=hopping, spin_orbit=spin_orbit, rashba=rashba, staggered=staggered
    )
    m.parameter_info = {
        "hopping": {"long_name": "nearest-neighbour hopping t", "units": "1"},
        "spin_orbit": {"long_name": "spin-orbit coupling lambda_SO", "units": "1"},
        "rashba": {"long_name": "Rashba coupling lambda_R", "units": "1"},
        "staggered": {"long_name": "staggered sublattice potential lambda_v", "units": "1"},
    }
    return m
