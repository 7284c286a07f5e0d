"""toposweep: Z2 topological indices of lattice models over dense parameter grids.

>>> import toposweep as ts
>>> ds = ts.invariants(ts.models.bhz(), filling=2, params={"mass": -1.0})
>>> int(ds.nu0)
1
"""

from __future__ import annotations

from typing import Any

from ._cpu_check import check_cpu

check_cpu()  # before the extension is loaded: a clear error instead of "illegal instruction"

from . import models  # noqa: E402
from ._version import __version__  # noqa: E402
from .api import invariants  # noqa: E402
from .callable_model import CallableModel  # noqa: E402
from .centre_flow import centre_flow, wcc_flow  # noqa: E402
from .errors import (  # noqa: E402
    ConfigError,
    ExecutorError,
    FillingError,
    ModelError,
    ParameterError,
    SamplingError,
    StoreError,
    SymmetryError,
    SymmetryWarning,
    ToposweepError,
)
from .maps.phase_map import phase_map  # noqa: E402
from .maps.transition_finder import find_transition  # noqa: E402
from .model import Model  # noqa: E402
from .model_files import load_model, save_model  # noqa: E402
from .results.store import open_result  # noqa: E402
from .sampling import Sampling  # noqa: E402
from .sweep import SweepInterrupted, sweep  # noqa: E402
from .symmetrise import symmetrise  # noqa: E402
from .tightbinding import TightBinding  # noqa: E402

__all__ = [
    "__version__",
    "CallableModel",
    "ConfigError",
    "ExecutorError",
    "FillingError",
    "Model",
    "ModelError",
    "ParameterError",
    "Sampling",
    "SamplingError",
    "StoreError",
    "SweepInterrupted",
    "SymmetryError",
    "SymmetryWarning",
    "TightBinding",
    "ToposweepError",
    "centre_flow",
    "find_transition",
    "invariants",
    "load_model",
    "model_from_dict",
    "models",
    "open_result",
    "phase_map",
    "save_model",
    "sweep",
    "symmetrise",
    "wcc_flow",
]


def model_from_dict(d: dict[str, Any], *, allow_code: bool = False) -> Model:
    """Rebuild a model from ``model.to_dict()`` (for example from a result file's attributes).

    A tight-binding description is plain data. A callable model's description names Python
    code — a ``module:function`` or a file path — and rebuilding it imports and runs that code,
    so it is refused unless ``allow_code=True``: pass it only for descriptions (result files)
    you trust, as you would before running a script from the same source.

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
        if not allow_code:
            from .callable_model import FILE_MODULE_PREFIX

            where = str(d.get("function", "?"))
            file = d.get("function_file")
            if where.startswith(FILE_MODULE_PREFIX) and file:  # (an older record's name)
                where = f"{file}:{where.rpartition(':')[2]}"
            elif file and not where.startswith(f"{file}:"):
                where += f" from {file}"
            raise ModelError(
                f"this model description names Python code ({where}); rebuilding it imports "
                "and runs that code. Pass allow_code=True (command line: --allow-code) only if "
                "you trust where the description came from"
            )
        return CallableModel.from_dict(d)
    raise ModelError(f"unknown model kind {kind!r}; expected 'tight_binding' or 'callable'")
