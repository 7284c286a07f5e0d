"""Builtin model catalogue.

Each function returns a :class:`~toposweep.TightBinding` with named terms, ``.defaults`` and
its symmetry operators, built from the published form.
"""

from __future__ import annotations

from .cubic import wilson_dirac
from .square import bhz

__all__ = ["bhz", "wilson_dirac"]
