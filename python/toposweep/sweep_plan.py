"""What a sweep will compute: the validated grid, the fixed parameters and the parameter points.

A :class:`SweepPlan` is built once per sweep. It turns flat point indices (C order over the grid
dims, in the order the grid was given) into resolved model-parameter dicts, chunk by chunk, so
memory stays flat however many points the grid has. Its :attr:`~SweepPlan.identity` says
exactly what the run computes; a result file records it so an interrupted run is only ever
continued with the same model, grid, filling and sampling.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .callable_model import function_label
from .errors import ParameterError
from .evaluation import Request
from .fingerprint import numbers_fingerprint, sample_indices
from .model import Model, matrix_to_json
from .results.dataset import build_dataset
from .results.store import FLAT_DIM

__all__ = ["TERM_VALUES", "SweepPlan", "callable_name", "check_names", "make_plan"]

#: dimension and variable names a grid parameter may not take (they are used by the dataset)
RESERVED = frozenset(
    {"axis", "cut", "kappa_axis", "band", "pump", "term", "point"}
    | {"nu0", "nu", "z2_plane", "nu0_by_axis", "phase", "undefined_reason", "gap_direct"}
    | {"gap_indirect", "gap_kappa", "bandwidth", "converged", "lines_used", "max_step"}
    | {"gap_proven"}
    | {"min_clearance", "nu0_parity", "nu_parity", "parity_agrees", "parity_undefined_reason"}
    | {"trim", "trim_kappa", "odd_parity_states"}
)

Coefficients = Callable[[dict[str, float]], Mapping[str, float]]

#: the raw column of the model term values of every point (``coefficients=``)
TERM_VALUES = "term_values"


def callable_name(func: Callable[..., Any]) -> str:
    """``module:qualname`` of a function, recorded so a result says which mapping made it.

    Examples
    --------
    >>> callable_name(math.floor)
    'math:floor'
    """
    if getattr(func, "__module__", None) and getattr(func, "__qualname__", None):
        return function_label(func)  # (a file's function by its path, not our module name)
    return f"{getattr(func, '__module__', '?')}:{getattr(func, '__qualname__', repr(func))}"


def _digest(obj: Any) -> str:
    text = json.dumps(obj, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _values_digest(values: NDArray[np.float64]) -> str:
    """Digest of a grid axis's values (their float64 bytes: ~1000× faster than JSON text)."""
    data = np.ascontiguousarray(values, dtype="<f8").tobytes()
    return hashlib.sha256(data).hexdigest()[:16]


def _grid_axis(name: Any, values: Any) -> tuple[str, NDArray[np.float64], dict[str, str]]:
    """One validated grid axis: its name, float values and the user's attrs (if any)."""
    if not isinstance(name, str) or not name.isidentifier():
        raise ParameterError(
            f"grid names must be identifiers such as 'mass', got {name!r}; rename the parameter"
        )
    if name in RESERVED:
        raise ParameterError(
            f"grid parameter {name!r} clashes with a name the result dataset uses; "
            "rename it (use coefficients= to map your names onto model terms)"
        )
    attrs = {
        k: str(v) for k, v in getattr(values, "attrs", {}).items() if k in ("long_name", "units")
    }
    raw = np.asarray(getattr(values, "values", values))
    if raw.dtype.kind == "b" or (
        raw.dtype.kind == "O" and any(isinstance(v, bool | np.bool_) for v in raw.ravel())
    ):
        raise ParameterError(  # float() would take True as 1.0: params refuse them too
            f"grid[{name!r}] holds booleans; give real numbers (e.g. 0.0 and 1.0)"
        )
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise ParameterError(
            f"grid[{name!r}] must be a 1-D array of real numbers, got {type(values).__name__}"
        ) from None
    if arr.ndim == 0:
        arr = arr.reshape(1)
    if arr.ndim != 1 or arr.size == 0:
        raise ParameterError(
            f"grid[{name!r}] must be a non-empty 1-D array, got shape {arr.shape}; "
            "use e.g. numpy.linspace(start, stop, num)"
        )
    if not np.all(np.isfinite(arr)):
        raise ParameterError(f"grid[{name!r}] contains NaN or infinity")
    if np.unique(arr).size != arr.size:
        raise ParameterError(
            f"grid[{name!r}] repeats a value; give each value once so the coordinate is unique"
        )
    return name, arr.copy(), attrs


@dataclass
class SweepPlan:
    """A validated sweep: grid dims and values, fixed parameters, the model mapping."""

    request: Request
    dims: tuple[str, ...]
    coords: dict[str, NDArray[np.float64]]
    #: ``long_name``/``units`` per grid dim (the user's, else the model's)
    coord_attrs: dict[str, dict[str, str]]
    #: parameters that are not swept: model parameters, or the user's when coefficients is set
    fixed: dict[str, float]
    coefficients: Coefficients | None = None
    identity: dict[str, Any] = field(default_factory=dict)

    @property
    def shape(self) -> tuple[int, ...]:
        """Grid shape (one length per dim)."""
        return tuple(len(self.coords[d]) for d in self.dims)

    @property
    def size(self) -> int:
        """Number of parameter points."""
        return math.prod(self.shape)

    def user_point(self, flat: int) -> dict[str, float]:
        """The grid values and fixed parameters of one flat point index (C order)."""
        idx = np.unravel_index(flat, self.shape)
        point = dict(self.fixed)
        point.update({d: float(self.coords[d][i]) for d, i in zip(self.dims, idx, strict=True)})
        return point

    def model_point(self, user: dict[str, float]) -> dict[str, float]:
        """Resolved model parameters of one point (through ``coefficients`` when given)."""
        model = self.request.model
        if self.coefficients is None:
            return model.resolve(user)
        try:  # (its own errors pass unchanged: executors retry them, and the command line
            terms = self.coefficients(_Point(user))  # reports them in one line)
        except _NotGiven as exc:  # except reading a variable the call never gave it
            key = exc.args[0]
            raise ParameterError(
                f"coefficients {callable_name(self.coefficients)} reads {key!r}, which is "
                f"neither swept nor fixed (it was given {sorted(user)}); give its value in "
                "params= (in a run configuration: [params])"
            ) from None
        if not isinstance(terms, Mapping):
            raise ParameterError(
                f"coefficients {callable_name(self.coefficients)} must return a dict "
                f"{{term: value}}, got {type(terms).__name__}"
            )
        try:
            return model.resolve(terms)
        except ParameterError as exc:
            raise ParameterError(
                f"coefficients {callable_name(self.coefficients)} returned {dict(terms)!r} "
                f"for {user!r}: {exc}"
            ) from None

    def points(self, start: int, stop: int) -> list[dict[str, float]]:
        """Resolved model-parameter dicts of the flat points ``start … stop-1``."""
        idx = np.unravel_index(np.arange(start, stop), self.shape)
        columns = [self.coords[d][i].tolist() for d, i in zip(self.dims, idx, strict=True)]
        out = []
        for values in zip(*columns, strict=True):
            user = dict(self.fixed)
            user.update(zip(self.dims, values, strict=True))
            out.append(self.model_point(user))
        return out


class _NotGiven(KeyError):
    """A coefficients function read a variable that is neither swept nor fixed."""


class _Point(dict[str, float]):
    """The variables handed to a coefficients function.

    A plain dict whose missing keys raise :class:`_NotGiven`, told apart from a failed lookup
    inside the user's own code (which keeps its KeyError).
    """

    def __missing__(self, key: str) -> float:
        raise _NotGiven(key)


def make_plan(
    request: Request,
    grid: Mapping[str, Any],
    *,
    params: Mapping[str, float] | None,
    coefficients: Coefficients | None,
) -> SweepPlan:
    """Validate grid and parameters against the model and build the plan of a sweep."""
    model: Model = request.model
    if not isinstance(grid, Mapping) or not grid:
        raise ParameterError(
            "grid must be a non-empty dict {parameter name: 1-D array of values}, "
            f"got {grid!r:.80}"
        )
    if coefficients is not None and not callable(coefficients):
        raise ParameterError(
            "coefficients must be a function params -> {term: value}, "
            f"got {type(coefficients).__name__}"
        )
    axes = [_grid_axis(name, values) for name, values in grid.items()]
    clash = [a[0] for a in axes if coefficients is not None and a[0].startswith("term_")]
    if clash:
        raise ParameterError(
            f"grid name(s) {clash} start with 'term_', which a coefficients sweep uses for the "
            "model's term values; rename them"
        )
    dims = tuple(a[0] for a in axes)
    given = dict(params or {})
    overlap = sorted(set(given) & set(dims))
    if overlap:
        raise ParameterError(
            f"parameter(s) {overlap} are both swept (grid) and fixed (params); give each once"
        )
    if coefficients is None:
        known = set(model.parameters)
        unknown = [d for d in dims if d not in known]
        if unknown:
            raise ParameterError(
                f"grid parameter(s) {unknown} are not parameters of model "
                f"{model.name or type(model).__name__!r}; its parameters are "
                f"{list(model.parameters)} (or pass coefficients= to map your own names)"
            )
        # the grid's own parameters take their first value here, so a model without
        # defaults is checked whole; they are dropped again: only the others are fixed
        first = {name: float(values[0]) for name, values, _ in axes}
        fixed = {k: v for k, v in model.resolve({**given, **first}).items() if k not in dims}
    else:
        fixed = {}
        for k, v in given.items():
            try:
                value = float(v)
            except (TypeError, ValueError):
                raise ParameterError(f"params[{k!r}] must be a real number, got {v!r}") from None
            if not math.isfinite(value):
                raise ParameterError(f"params[{k!r}] must be finite, got {v!r}")
            fixed[str(k)] = value
    coord_attrs = {}
    for name, _, attrs in axes:
        base = model.describe(name) if coefficients is None else {"long_name": name, "units": "1"}
        coord_attrs[name] = {**base, **attrs}
    plan = SweepPlan(
        request=request,
        dims=dims,
        coords={name: values for name, values, _ in axes},
        coord_attrs=coord_attrs,
        fixed=fixed,
        coefficients=coefficients,
    )
    # the model's own numbers at a few grid points (the first one first: a bad mapping fails
    # now, not after the first chunk), so a resume notices code that changed under its name
    numbers = numbers_fingerprint(
        model, (plan.user_point(i) for i in sample_indices(plan.size)), plan.model_point
    )
    inv = request.inversion
    plan.identity = {
        "model": _digest(model.to_dict()),
        "numbers": numbers,
        "filling": request.filling,
        "sampling": request.sampling.as_dict(),
        # a list, in the grid's order: the same axes in another order are another run
        "grid": [[d, len(plan.coords[d]), _values_digest(plan.coords[d])] for d in dims],
        "fixed": {k: repr(v) for k, v in sorted(fixed.items())},
        "coefficients": None if coefficients is None else callable_name(coefficients),
        "inversion": None if inv is None else _digest(matrix_to_json(inv)),
    }
    return plan


def check_names(plan: SweepPlan, raw: Mapping[str, NDArray[Any]]) -> None:
    """Refuse parameter names that the result dataset uses itself.

    Checked on the first chunk, so it holds for every variable the dataset has now or gains
    later, not just for a list written down once.
    """
    req = plan.request
    n = len(raw["nu0"])
    probe = build_dataset(
        req.model,
        raw,
        dims=(FLAT_DIM,),
        coords={FLAT_DIM: np.arange(n)},
        fixed={},
        filling=req.filling,
        sampling=req.sampling,
        parity_known=req.inversion is not None,
    )
    clash = sorted((set(plan.dims) | set(plan.fixed)) & {str(v) for v in probe.variables})
    if clash:
        raise ParameterError(
            f"parameter name(s) {clash} are also names of result variables; rename them "
            "(with coefficients= you can sweep variables of your own naming)"
        )
