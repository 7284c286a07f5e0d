"""Builtin model catalogue.

Each function returns a :class:`~toposweep.TightBinding` with named terms, ``.defaults`` and
its symmetry operators, built from the published form (the source is in each docstring).

================  ====  ================================  ====================================
function          dim   model                             terms
================  ====  ================================  ====================================
``bhz``           2     spinful square lattice (BHZ/QWZ)  mass, hopping
``kane_mele``     2     Kane–Mele honeycomb               hopping, spin_orbit, rashba, staggered
``wilson_dirac``  3     cubic Wilson–Dirac                mass, hopping
``fu_kane_mele``  3     Fu–Kane–Mele diamond              hopping, spin_orbit, dimerisation
``df_lattice``    3     cubic d–f heavy-fermion picture   d_hopping, f_hopping, f_level,
                                                          hybridisation
================  ====  ================================  ====================================

All have four orbitals (filling 2). At their defaults (the README table comes from this):

>>> import toposweep as ts
>>> for name in ts.models.__all__:
...     ds = ts.invariants(getattr(ts.models, name)(), filling=2)
...     weak = "".join(str(v) for v in ds.nu.values) if "nu" in ds else "-"
...     print(f"{name:13s} nu0={int(ds.nu0)} nu={weak:3s} phase={int(ds.phase)} "
...           f"gap={float(ds.gap_direct):.3f} bandwidth={float(ds.bandwidth):.3f}")
bhz           nu0=1 nu=-   phase=3 gap=2.000 bandwidth=6.000
df_lattice    nu0=1 nu=111 phase=2 gap=0.300 bandwidth=3.900
fu_kane_mele  nu0=1 nu=111 phase=2 gap=0.800 bandwidth=8.800
kane_mele     nu0=1 nu=-   phase=3 gap=1.039 bandwidth=6.000
wilson_dirac  nu0=1 nu=000 phase=2 gap=2.000 bandwidth=10.000
"""

from __future__ import annotations

from .cubic import wilson_dirac
from .df_lattice import df_lattice
from .diamond import fu_kane_mele
from .honeycomb import kane_mele
from .square import bhz

__all__ = ["bhz", "df_lattice", "fu_kane_mele", "kane_mele", "wilson_dirac"]
