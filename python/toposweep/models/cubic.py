"""Cubic Wilson–Dirac lattice model (Qi, Hughes & Zhang, Phys. Rev. B 78, 195424 (2008)).

H(k) = t Σ_i sin k_i Γ_i + (m + t Σ_i cos k_i) Γ_4 with Γ_i = σ_x⊗s_i, Γ_4 = σ_z⊗s_0 (orbital
slowest). Phases (Fu & Kane, Phys. Rev. B 76, 045302 (2007)): (0;000) for |m/t| > 3, (1;000)
for −3 < m/t < −1, (0;111) for |m/t| < 1, (1;111) for 1 < m/t < 3.
"""

from __future__ import annotations

from ..tightbinding import TightBinding
from ._defaults import checked_defaults
from ._matrices import kron, s0, spin_time_reversal, sx, sy, sz

__all__ = ["wilson_dirac"]


def wilson_dirac(*, mass: float = -2.0, hopping: float = 1.0) -> TightBinding:
    """Build the cubic Wilson–Dirac model.

    Terms: ``mass`` (on-site Γ_4) and ``hopping`` (every bond). Time reversal U_T = 1 ⊗ iσ_y
    and inversion P = σ_z ⊗ 1 are attached.

    Parameters
    ----------
    mass, hopping : float
        Default values of the two terms.

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.invariants(ts.models.wilson_dirac(), filling=2, params={"mass": 0.5})
    >>> int(ds.nu0), ds.nu.values.tolist()
    (0, [1, 1, 1])
    """
    m = TightBinding(
        3,
        4,
        lattice=[[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]],
        time_reversal=kron(s0, spin_time_reversal),
        inversion=kron(sz, s0),
        name="cubic Wilson-Dirac model",
    )
    g4 = kron(sz, s0)
    m.add((0, 0, 0), g4, term="mass")
    for i, s in enumerate((sx, sy, sz)):
        r = [0, 0, 0]
        r[i] = 1
        m.add(tuple(r), 0.5 * (g4 - 1j * kron(sx, s)), term="hopping")
    m.defaults = checked_defaults("wilson_dirac", mass=mass, hopping=hopping)
    m.parameter_info = {
        "mass": {"long_name": "Dirac mass m", "units": "1"},
        "hopping": {"long_name": "hopping t", "units": "1"},
    }
    return m
