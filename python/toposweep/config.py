"""Run configuration files (TOML) for ``toposweep run``.

A configuration names the model, the grid, the filling, the sampling and the output file::

    model = "wilson_dirac"          # a name from toposweep.models, or "path/to/file.py:function"
    filling = 2
    output = "wilson-dirac-map.nc"  # relative to this file's folder

    [model_options]                 # keyword arguments of the model function (optional)

    [grid]                          # swept parameters; the dataset's dims follow this order
    mass = { start = -4.0, stop = 4.0, num = 81 }
    hopping = [0.5, 1.0, 1.5]       # or explicit values; a table may add long_name / units

    [params]                        # values of parameters that are not swept (optional)
    [sampling]                      # loop_points, lines, max_lines, step_limit, gap_floor, ...
    [run]                           # threads, chunk_size, scheduler (optional)
    [adaptive]                      # optional: an adaptive phase map (toposweep.phase_map)
    coarse_step = 16                # every key optional: coarse_step, proven_only,
                                    # agreement_gap, transitions, transition_tol

``coefficients = "path/to/file.py:function"`` (optional) maps the grid's own variables onto
model terms, as ``coefficients=`` of :func:`toposweep.sweep` does. ``[run] scheduler`` runs the
chunks elsewhere: ``"local:N"`` (a Dask cluster of N worker processes on this machine),
``"processes:N"`` (a process pool) or a Dask scheduler address such as ``"tcp://host:8786"``.
Every mistake raises :class:`~toposweep.errors.ConfigError` naming the file and the key (or the
line, for TOML syntax).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import tomllib
import xarray as xr

from . import models
from .callable_model import load_file_module
from .errors import ConfigError
from .model import Model
from .sampling import Sampling

__all__ = ["RunConfig", "load_config", "parse_config"]

TOP_KEYS = {
    "model",
    "model_options",
    "filling",
    "output",
    "grid",
    "params",
    "sampling",
    "run",
    "coefficients",
    "adaptive",
}
#: keys of the [adaptive] table: keyword arguments of toposweep.phase_map
ADAPTIVE_KEYS = {"coarse_step", "proven_only", "agreement_gap", "transitions", "transition_tol"}
RUN_KEYS = {"threads", "chunk_size", "scheduler"}
RANGE_KEYS = {"start", "stop", "num", "values", "long_name", "units"}
#: values per grid axis a configuration may ask for (a typo like num = 1e9 must not eat memory)
MAX_AXIS = 10_000_000


@dataclass
class RunConfig:
    """A checked run configuration; :meth:`sweep_kwargs` feeds :func:`toposweep.sweep`."""

    source: str
    model: Model
    model_spec: str
    filling: int
    output: Path
    grid: dict[str, Any]
    params: dict[str, float] = field(default_factory=dict)
    sampling: dict[str, Any] = field(default_factory=dict)
    coefficients: Callable[[dict[str, float]], Mapping[str, float]] | None = None
    threads: int | None = None
    chunk_size: int | None = None
    #: options of an adaptive phase map ([adaptive]); None: a uniform sweep
    adaptive: dict[str, Any] | None = None
    #: where the chunks run (``executor=`` of :func:`toposweep.sweep`); None: this process
    scheduler: str | None = None

    def sweep_kwargs(self) -> dict[str, Any]:
        """Keyword arguments of :func:`toposweep.sweep` (without ``out``/``resume``)."""
        extra = {} if self.scheduler is None else {"executor": self.scheduler}
        return {
            **extra,
            "model": self.model,
            "grid": self.grid,
            "filling": self.filling,
            "params": self.params,
            "coefficients": self.coefficients,
            "threads": self.threads,
            "chunk_size": self.chunk_size,
            **self.sampling,
        }


def _fail(source: str, key: str, message: str) -> ConfigError:
    return ConfigError(f"{source}: {key}: {message}")


def _number(source: str, key: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        raise _fail(source, key, f"must be a finite number, got {value!r}")
    return float(value)


def _positive_int(source: str, key: str, value: Any) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise _fail(source, key, f"must be a positive integer, got {value!r}")
    return value


def _table(source: str, key: str, value: Any) -> dict[str, Any]:
    if not isinstance(value, dict):
        raise _fail(source, key, f"must be a table ([{key}] or {{...}}), got {value!r}")
    return value


def _grid_axis(source: str, name: str, spec: Any) -> Any:
    key = f"grid.{name}"
    attrs: dict[str, str] = {}
    if isinstance(spec, list):
        values = spec
    elif isinstance(spec, dict):
        unknown = sorted(set(spec) - RANGE_KEYS)
        if unknown:
            raise _fail(source, f"{key}.{unknown[0]}", f"unknown key; use {sorted(RANGE_KEYS)}")
        for a in ("long_name", "units"):
            if a in spec:
                if not isinstance(spec[a], str):
                    raise _fail(source, f"{key}.{a}", f"must be a string, got {spec[a]!r}")
                attrs[a] = spec[a]
        if "values" in spec:
            if {"start", "stop", "num"} & set(spec):
                raise _fail(source, key, "give either values = [...] or start/stop/num, not both")
            values = spec["values"]
            if not isinstance(values, list):
                raise _fail(source, f"{key}.values", f"must be a list, got {values!r}")
        else:
            missing = [k for k in ("start", "stop", "num") if k not in spec]
            if missing:
                raise _fail(source, key, f"missing {missing}; a range needs start, stop and num")
            start = _number(source, f"{key}.start", spec["start"])
            stop = _number(source, f"{key}.stop", spec["stop"])
            num = _positive_int(source, f"{key}.num", spec["num"])
            if num > MAX_AXIS:
                raise _fail(source, f"{key}.num", f"{num} values is more than {MAX_AXIS:,}")
            values = np.linspace(start, stop, num).tolist()
    else:
        raise _fail(
            source,
            key,
            f"must be a list of numbers or a table {{start, stop, num}}, got {spec!r}",
        )
    if not values:
        raise _fail(source, key, "has no values")
    floats = [_number(source, f"{key}[{i}]", v) for i, v in enumerate(values)]
    if len(set(floats)) != len(floats):
        raise _fail(source, key, "repeats a value; give each value once")
    return xr.DataArray(np.array(floats), dims=name, attrs=attrs) if attrs else np.array(floats)


def _import_user_file(source: str, key: str, path: Path) -> Any:
    """Import a model or coefficients file; whatever its code does wrong becomes one line.

    A syntax error, an exception at import, even ``sys.exit()`` in the file is a
    :class:`ConfigError` naming the file (and the line, where Python gives one).
    """
    try:
        module = load_file_module(path)  # same module name in every process (resume, plots)
    except SyntaxError as exc:
        raise _fail(source, key, f"{path}, line {exc.lineno}: syntax error: {exc.msg}") from None
    except SystemExit as exc:
        raise _fail(
            source, key, f"{path} calls sys.exit({exc.code!r}) when imported; remove that call"
        ) from None
    except Exception as exc:  # noqa: BLE001 - the user's code may raise anything
        raise _fail(source, key, f"importing {path} raised {type(exc).__name__}: {exc}") from None
    if module is None:
        raise _fail(source, key, f"cannot import {path} as Python")
    return module


def _load_function(source: str, key: str, spec: str, base: Path) -> Callable[..., Any]:
    """Import ``function`` from ``path/to/file.py`` (relative to the configuration's folder)."""
    path_text, _, func_name = spec.rpartition(":")
    if not path_text or not func_name.isidentifier():
        raise _fail(source, key, f"expected 'path/to/file.py:function', got {spec!r}")
    path = (base / path_text).resolve()
    if not path.is_file():
        raise _fail(source, key, f"no such file {path}")
    module = _import_user_file(source, key, path)
    func = getattr(module, func_name, None)
    if not callable(func):
        raise _fail(source, key, f"{path} has no function {func_name!r}")
    return func


def _model(source: str, spec: Any, options: dict[str, Any], base: Path) -> Model:
    if not isinstance(spec, str) or not spec:
        raise _fail(source, "model", f"must be a string, got {spec!r}")
    if ":" in spec:
        builder = _load_function(source, "model", spec, base)
    elif spec in models.__all__:
        builder = getattr(models, spec)
    else:
        raise _fail(
            source,
            "model",
            f"unknown model {spec!r}; use one of {models.__all__} or 'path/to/file.py:function'",
        )
    try:
        model = builder(**options)
    except ConfigError:
        raise
    except (TypeError, ValueError) as exc:  # bad option names or values
        raise _fail(source, "model_options", f"{spec}: {exc}") from None
    except SystemExit as exc:
        raise _fail(source, "model", f"{spec} calls sys.exit({exc.code!r})") from None
    except Exception as exc:  # noqa: BLE001 - the user's model code may raise anything
        raise _fail(source, "model", f"{spec} raised {type(exc).__name__}: {exc}") from None
    if not isinstance(model, Model):
        raise _fail(
            source, "model", f"{spec} returned {type(model).__name__}, not a toposweep model"
        )
    return model


def parse_config(text: str, source: str = "<config>", base: Path | None = None) -> RunConfig:
    r"""Check a TOML configuration given as text; ``base`` resolves relative paths.

    Examples
    --------
    >>> cfg = parse_config('''
    ... model = "bhz"
    ... filling = 2
    ... output = "map.nc"
    ... [grid]
    ... mass = { start = -3.0, stop = 3.0, num = 7 }
    ... ''')
    >>> cfg.grid["mass"].tolist(), cfg.output.name
    ([-3.0, -2.0, -1.0, 0.0, 1.0, 2.0, 3.0], 'map.nc')
    >>> parse_config('model = "bhz"\nfilling = 2\noutput = "m.nc"\n[grid]\nmass = 3')
    ... # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    toposweep.errors.ConfigError: <config>: grid.mass: must be a list of numbers or a table ...
    """
    base = Path.cwd() if base is None else base
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{source}: not valid TOML: {exc}") from None
    unknown = sorted(set(doc) - TOP_KEYS)
    if unknown:
        raise _fail(source, unknown[0], f"unknown key; known keys are {sorted(TOP_KEYS)}")
    for key in ("model", "filling", "output", "grid"):
        if key not in doc:
            raise _fail(source, key, "missing (model, filling, output and [grid] are required)")
    options = _table(source, "model_options", doc.get("model_options", {}))
    model = _model(source, doc["model"], options, base)
    filling = doc["filling"]
    if isinstance(filling, bool) or not isinstance(filling, int):
        raise _fail(source, "filling", f"must be an integer number of bands, got {filling!r}")
    output = doc["output"]
    if not isinstance(output, str) or not output:
        raise _fail(source, "output", f"must be a file name such as 'map.nc', got {output!r}")
    grid_doc = _table(source, "grid", doc["grid"])
    if not grid_doc:
        raise _fail(source, "grid", "is empty; sweep at least one parameter")
    grid = {name: _grid_axis(source, name, spec) for name, spec in grid_doc.items()}
    params = {
        k: _number(source, f"params.{k}", v)
        for k, v in _table(source, "params", doc.get("params", {})).items()
    }
    sampling = _table(source, "sampling", doc.get("sampling", {}))
    try:
        Sampling.from_options(**sampling)
    except ValueError as exc:
        raise _fail(source, "sampling", str(exc)) from None
    run = _table(source, "run", doc.get("run", {}))
    bad = sorted(set(run) - RUN_KEYS)
    if bad:
        raise _fail(source, f"run.{bad[0]}", f"unknown key; known keys are {sorted(RUN_KEYS)}")
    threads = run.get("threads")
    chunk = run.get("chunk_size")
    scheduler = run.get("scheduler")
    if scheduler is not None and (not isinstance(scheduler, str) or not scheduler.strip()):
        raise _fail(
            source,
            "run.scheduler",
            f"must be 'local:N', 'processes:N' or a scheduler address, got {scheduler!r}",
        )
    coefficients = None
    if "coefficients" in doc:
        spec = doc["coefficients"]
        if not isinstance(spec, str):
            raise _fail(source, "coefficients", f"must be 'file.py:function', got {spec!r}")
        coefficients = _load_function(source, "coefficients", spec, base)
    adaptive = None
    if "adaptive" in doc:
        adaptive = _table(source, "adaptive", doc["adaptive"])
        bad = sorted(set(adaptive) - ADAPTIVE_KEYS)
        if bad:
            raise _fail(
                source, f"adaptive.{bad[0]}", f"unknown key; known keys are {sorted(ADAPTIVE_KEYS)}"
            )
    return RunConfig(
        source=source,
        model=model,
        model_spec=doc["model"],
        filling=filling,
        output=(base / output),
        grid=grid,
        params=params,
        sampling=dict(sampling),
        coefficients=coefficients,
        threads=None if threads is None else _positive_int(source, "run.threads", threads),
        chunk_size=None if chunk is None else _positive_int(source, "run.chunk_size", chunk),
        adaptive=adaptive,
        scheduler=scheduler,
    )


def load_config(path: str | Path) -> RunConfig:
    """Read and check a TOML configuration file.

    Examples
    --------
    >>> load_config("no/such/config.toml")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    toposweep.errors.ConfigError: no/such/config.toml: cannot read the file (No such file ...)
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        why = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
        raise ConfigError(f"{path}: cannot read the file ({why})") from None
    return parse_config(text, source=str(path), base=p.parent.resolve())
