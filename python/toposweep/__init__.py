"""toposweep: Z2 topological indices of lattice models over dense parameter grids.

>>> import toposweep as ts
>>> ds = ts.invariants(ts.models.bhz(), filling=2, params={"mass": -1.0})
>>> int(ds.nu0)
1
"""

from __future__ import annotations

from typing import Any

from . import models
from ._version import __version__
from .api import invariants, wcc_flow
from .callable_model import CallableModel
from .errors import (
    ConfigError,
    FillingError,
    ModelError,
    ParameterError,
    SamplingError,
    StoreError,
    SymmetryError,
    ToposweepError,
)
from .model import Model
from .sampling import Sampling
from .store import open_result
from .sweep import SweepInterrupted, sweep
from .tightbinding import TightBinding

__all__ = [
    "__version__",
    "CallableModel",
    "ConfigError",
    "FillingError",
    "Model",
    "ModelError",
    "ParameterError",
    "Sampling",
    "SamplingError",
    "StoreError",
    "SweepInterrupted",
    "SymmetryError",
    "TightBinding",
    "ToposweepError",
    "invariants",
    "model_from_dict",
    "models",
    "open_result",
    "sweep",
    "wcc_flow",
]


def model_from_dict(d: dict[str, Any]) -> Model:
    """Rebuild a model from ``model.to_dict()`` (for example from a result file's attributes).

    Examples
    --------
    >>> import toposweep as ts
    >>> ts.model_from_dict(ts.models.bhz().to_dict()).name
    'spinful square-lattice model (BHZ type)'
    """
    if not isinstance(d, dict):
        raise ModelError(f"model description must be a dict, got {type(d).__name__}")
    kind = d.get("kind")
    if kind == "tight_binding":
        return TightBinding.from_dict(d)
    if kind == "callable":
        return CallableModel.from_dict(d)
    raise ModelError(f"unknown model kind {kind!r}; expected 'tight_binding' or 'callable'")
