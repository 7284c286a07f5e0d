"""Builtin model catalogue.

Each function returns a :class:`~toposweep.TightBinding` with named terms, ``.defaults`` and
its symmetry operators, built from the published form.
"""

from __future__ import annotations

from .cubic import wilson_dirac
from .df_lattice import df_lattice
from .diamond import fu_kane_mele
from .honeycomb import kane_mele
from .square import bhz

__all__ = ["bhz", "df_lattice", "fu_kane_mele", "kane_mele", "wilson_dirac"]
