"""Diamond-lattice model with spin–orbit coupling and a dimerised bond.

Published form: Fu, Kane & Mele, Phys. Rev. Lett. 98, 106803 (2007):

H = Σ_⟨ij⟩ t_ij c_i† c_j + i (8 λ_SO / a²) Σ_⟨⟨ij⟩⟩ c_i† s · (d¹_ij × d²_ij) c_j,

with d¹, d² the two nearest-neighbour legs of the path from j to i and t_ij = t + δt on the
bonds along [111], t on the other three. Cubic lattice constant a = 1; fcc primitive vectors
a₁ = (0, ½, ½), a₂ = (½, 0, ½), a₃ = (½, ½, 0); site A at the origin, site B at
(a₁ + a₂ + a₃)/4 = (¼, ¼, ¼), so the [111] bond is the A–B bond inside one cell. Basis:
sublattice ⊗ spin (sublattice slowest).

Sign convention, checked by the parity test: at the TRIMs the spin–orbit term vanishes and
H = f τ_x with f = t + δt + t Σ_i e^{−2πiκ_i}. f changes sign with δt only at the three X
points (two κ_i = ½), so δt > 0 gives (1;111) and δt < 0 gives (0;111) in this reduced basis,
as in Fu, Kane & Mele (2007); δt = 0 closes the gap at the X points.
"""

from __future__ import annotations

import numpy as np

from ..tightbinding import TightBinding
from ._bonds import add_spin_bond, bond_shells, common_neighbour
from ._defaults import checked_defaults
from ._matrices import kron, s0, spin_time_reversal, sx, sy, sz

__all__ = ["fu_kane_mele"]

_LATTICE = 0.5 * np.array([[0.0, 1.0, 1.0], [1.0, 0.0, 1.0], [1.0, 1.0, 0.0]])
_SITES = np.array([[0.0, 0.0, 0.0], [0.25, 0.25, 0.25]])  # A, B in reduced coordinates
_DIMER_DIRECTION = np.array([1.0, 1.0, 1.0]) / np.sqrt(3.0)


def fu_kane_mele(
    *, hopping: float = 1.0, spin_orbit: float = 0.1, dimerisation: float = 0.4
) -> TightBinding:
    r"""Build the Fu–Kane–Mele diamond-lattice model with four orbitals (sublattice ⊗ spin).

    Published form (Fu, Kane & Mele, Phys. Rev. Lett. 98, 106803 (2007)):
    H = Σ⟨ij⟩ t_ij c†_i c_j + i (8λ_SO/a²) Σ⟨⟨ij⟩⟩ c†_i s·(d¹_ij × d²_ij) c_j, with
    t_ij = t + δt on the [111] bonds. Bonds and legs are found from the geometry (fcc
    primitive vectors a₁ = (0, ½, ½), a₂ = (½, 0, ½), a₃ = (½, ½, 0), a = 1).

    Terms: ``hopping`` (t, all four nearest-neighbour bonds), ``spin_orbit`` (λ_SO),
    ``dimerisation`` (δt, added to the [111] bond only). Time reversal U_T = 1 ⊗ iσ_y and
    inversion P = τ_x ⊗ 1 (about the centre of the [111] bond) hold at every parameter point.

    In the fcc reduced basis δt > 0 gives the strong phase (1;111) and δt < 0 the weak phase
    (0;111); δt = 0 is gapless at the X points.

    Parameters
    ----------
    hopping, spin_orbit, dimerisation : float
        Default values of the three terms (stored in ``.defaults``), dimensionless energies.
        The defaults give (1;111) with a direct gap of 2δt = 0.8 (bandwidth about 8.8).

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.invariants(ts.models.fu_kane_mele(), filling=2)
    >>> int(ds.nu0), ds.nu.values.tolist()
    (1, [1, 1, 1])
    """
    m = TightBinding(
        3,
        4,
        lattice=_LATTICE,
        positions=np.repeat(_SITES, 2, axis=0),
        time_reversal=kron(s0, spin_time_reversal),
        inversion=kron(sx, s0),
        name="Fu-Kane-Mele diamond model",
    )
    nn, nnn = bond_shells(_LATTICE, _SITES, 2)
    d_nn = float(np.linalg.norm(nn[0].vector))
    for bond in nn:
        add_spin_bond(m, bond, 2, s0, "hopping")
        direction = bond.vector / d_nn
        if abs(abs(direction @ _DIMER_DIRECTION) - 1.0) < 1e-9:
            add_spin_bond(m, bond, 2, s0, "dimerisation")
    for bond in nnn:
        d1, d2 = common_neighbour(_LATTICE, _SITES, bond, d_nn)
        c = 8.0 * np.cross(d1, d2)  # a = 1
        spin = c[0] * sx + c[1] * sy + c[2] * sz
        add_spin_bond(m, bond, 2, 1j * spin, "spin_orbit")
    m.defaults = checked_defaults(
        "fu_kane_mele", hopping=hopping, spin_orbit=spin_orbit, dimerisation=dimerisation
    )
    m.parameter_info = {
        "hopping": {"long_name": "nearest-neighbour hopping t", "units": "1"},
        "spin_orbit": {"long_name": "spin-orbit coupling lambda_SO", "units": "1"},
        "dimerisation": {"long_name": "[111] bond dimerisation delta_t", "units": "1"},
    }
    return m
