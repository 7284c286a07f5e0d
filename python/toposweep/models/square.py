"""Spinful square-lattice model with a mass term (Bernevig–Hughes–Zhang type).

H(k) = s_z⊗σ_x sin k_x + s_0⊗σ_y sin k_y + (m + t cos k_x + t cos k_y) s_0⊗σ_z, i.e. the
Qi–Wu–Zhang two-band model h(k) (Qi, Wu & Zhang, Phys. Rev. B 74, 085308 (2006)) for spin up
and its time-reversed partner h*(−k) for spin down (Bernevig, Hughes & Zhang, Science 314,
1757 (2006)). Basis: spin ⊗ orbital (spin slowest). Z2 = 1 for 0 < |m/t| < 2.
"""

from __future__ import annotations

from ..tightbinding import TightBinding
from ._defaults import checked_defaults
from ._matrices import kron, s0, spin_time_reversal, sx, sy, sz

__all__ = ["bhz"]


def bhz(*, mass: float = -1.0, hopping: float = 1.0) -> TightBinding:
    """Build the spinful square-lattice (BHZ-type) model.

    Terms: ``mass`` (on-site σ_z) and ``hopping`` (scales every bond). Time reversal
    U_T = iσ_y ⊗ 1 and inversion P = 1 ⊗ σ_z are attached.

    Parameters
    ----------
    mass, hopping : float
        Default values of the two terms (stored in ``.defaults``).

    Examples
    --------
    >>> import toposweep as ts
    >>> int(ts.invariants(ts.models.bhz(), filling=2, params={"mass": 1.0}).nu0)
    1
    """
    m = TightBinding(
        2,
        4,
        lattice=[[1.0, 0.0], [0.0, 1.0]],
        time_reversal=kron(spin_time_reversal, s0),
        inversion=kron(s0, sz),
        name="spinful square-lattice model (BHZ type)",
    )
    gz = kron(s0, sz)
    m.add((0, 0), gz, term="mass")
    # T e^{ik} + T† e^{-ik} = Γ_a sin k + Γ_z cos k  ⇔  T = (Γ_z − iΓ_a)/2
    m.add((1, 0), 0.5 * (gz - 1j * kron(sz, sx)), term="hopping")
    m.add((0, 1), 0.5 * (gz - 1j * kron(s0, sy)), term="hopping")
    m.defaults = checked_defaults("bhz", mass=mass, hopping=hopping)
    m.parameter_info = {
        "mass": {"long_name": "mass m", "units": "1"},
        "hopping": {"long_name": "hopping t", "units": "1"},
    }
    return m
