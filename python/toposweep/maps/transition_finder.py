"""``find_transition``: where the bulk gap closes between two parameter points."""

from __future__ import annotations

import json
from collections.abc import Mapping
from datetime import datetime, timezone
from typing import Any

import numpy as np
import xarray as xr
from numpy.typing import ArrayLike

from .._version import __version__
from ..errors import ParameterError
from ..evaluation import prepare_request, run_points
from ..model import Model
from ..results.dataset import INDEX_FLAGS, PHASES
from ..sampling import Sampling
from .phase_map import labels_of
from .transitions import STATUS, locate_segments, probe_request, probes_of, segment_search

__all__ = ["find_transition"]

#: names of the result's own variables (a parameter may not take them)
OWN = {"fraction", "fraction_low", "fraction_high", "kappa", "gap", "status", "kappa_axis"} | {
    f"{q}_{end}" for q in ("phase", "nu0", "nu") for end in ("start", "end")
}


def _segment(
    model: Model, start: Any, end: Any, params: Mapping[str, float] | None
) -> tuple[list[str], np.ndarray, np.ndarray, dict[str, float]]:
    for name, d in (("start", start), ("end", end)):
        if not isinstance(d, Mapping) or not d:
            raise ParameterError(f"{name} must be a non-empty dict {{parameter: value}}, got {d!r}")
    if set(start) != set(end):
        raise ParameterError(
            f"start and end must name the same parameters, got {sorted(start)} and {sorted(end)}"
        )
    names = list(start)
    bad = sorted(set(names) & OWN)
    if bad:
        raise ParameterError(f"parameter name(s) {bad} clash with the result's variables")
    unknown = [k for k in names if k not in model.parameters]
    if unknown:
        raise ParameterError(
            f"{unknown} are not parameters of the model; its parameters are "
            f"{list(model.parameters)}"
        )
    try:
        a = np.array([float(start[k]) for k in names])
        b = np.array([float(end[k]) for k in names])
    except (TypeError, ValueError):
        raise ParameterError("start and end values must be real numbers") from None
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(b))):
        raise ParameterError("start and end values must be finite")
    if np.array_equal(a, b):
        raise ParameterError("start and end are the same point; give two different points")
    fixed = dict(params or {})
    both = sorted(set(fixed) & set(names))
    if both:
        raise ParameterError(f"{both} given both in params and in start/end; give each once")
    return names, a, b, fixed


def find_transition(
    model: Model,
    filling: int,
    *,
    start: Mapping[str, float],
    end: Mapping[str, float],
    tol: float = 1e-7,
    params: Mapping[str, float] | None = None,
    inversion: ArrayLike | None = None,
    threads: int | None = None,
    **sampling: Any,
) -> xr.Dataset:
    """Locate the bulk gap closing on the segment from ``start`` to ``end``.

    The direct gap, minimised over κ by the core's gap search, is followed along
    p(s) = start + s (end − start) to its smallest value (see :mod:`toposweep.maps.transitions`).
    Both ends are evaluated in full for their phases.

    Parameters
    ----------
    model : TightBinding or CallableModel
        A 2D or 3D time-reversal-invariant model.
    filling : int
        Number of occupied bands.
    start, end : dict
        The two points: the same parameter names, other parameters from ``params`` or the
        model defaults.
    tol : float
        Tolerance of s* (a fraction of the segment): the parameters at the transition are
        known to ``tol`` × |end − start|.
    params, inversion, threads, **sampling
        As for :func:`toposweep.invariants`.

    Returns
    -------
    xarray.Dataset
        ``fraction`` (s*), ``fraction_low``/``fraction_high`` (the bracket of s*, or the ends
        of a gapless interval), one variable per parameter of ``start`` (its value at s*),
        ``kappa`` (where the gap is smallest), ``gap`` (the smallest gap found), ``status``
        (CF flags: a point-like closing, a gapless interval, no closing, ...), and
        ``phase_start``/``phase_end``, ``nu0_start``/``nu0_end`` (and ``nu_*`` in 3D).

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.find_transition(ts.models.bhz(), 2, start={"mass": -2.6}, end={"mass": -1.3})
    >>> round(float(ds.mass), 6), ds.kappa.values.tolist(), int(ds.status)
    (-2.0, [0.0, 0.0], 0)
    >>> ds.status.attrs["flag_meanings"].split()[0]
    'gap_closes_at_a_point'
    """
    samp = Sampling.from_options(**sampling)
    req = prepare_request(model, filling, inversion=inversion, sampling=samp, threads=threads)
    if isinstance(tol, bool) or not isinstance(tol, int | float) or not 0 < tol < 0.5:
        raise ParameterError(f"tol must be a number in (0, 0.5), got {tol!r}")
    names, a, b, fixed = _segment(model, start, end, params)

    def point_at(_: int, s: float) -> dict[str, float]:
        user = dict(fixed)
        user.update(zip(names, (a + s * (b - a)).tolist(), strict=True))
        return model.resolve(user)

    raw = run_points(req, [point_at(0, 0.0), point_at(0, 1.0)])
    labels = labels_of(raw)
    search = segment_search(
        tuple(probes_of(raw)),  # type: ignore[arg-type]
        tol=float(tol),
        same_phase=bool(labels[0] == labels[1]),
        interior=7,
    )
    (res,) = locate_segments(probe_request(req), [search], point_at)
    unit = model.energy_unit
    data: dict[str, Any] = {
        "fraction": ((), res.fraction, {"long_name": "position s* on the segment", "units": "1"}),
        "fraction_low": (
            (),
            res.low,
            {
                "long_name": "lower end of the bracket of s* or of the gapless interval",
                "units": "1",
            },
        ),
        "fraction_high": (
            (),
            res.high,
            {
                "long_name": "upper end of the bracket of s* or of the gapless interval",
                "units": "1",
            },
        ),
        "kappa": (
            ("kappa_axis",),
            np.asarray(res.kappa, float),
            {"long_name": "reduced coordinates of the smallest direct gap at s*", "units": "1"},
        ),
        "gap": (
            (),
            res.gap,
            {"long_name": "smallest direct gap found on the segment", "units": unit},
        ),
        "status": (
            (),
            np.int8(res.status),
            {
                "long_name": "what the search found",
                "units": "1",
                "flag_values": np.array(list(STATUS), np.int8),
                "flag_meanings": " ".join(STATUS.values()),
            },
        ),
    }
    for k, name in enumerate(names):
        info = model.describe(name)
        data[name] = (
            (),
            float(a[k] + res.fraction * (b[k] - a[k])),
            {**info, "long_name": f"{info.get('long_name', name)} at s*"},
        )
    phase_flags = {
        "flag_values": np.array(list(PHASES), np.int8),
        "flag_meanings": " ".join(PHASES.values()),
    }
    for j, side in enumerate(("start", "end")):
        data[f"phase_{side}"] = (
            (),
            np.int8(raw["phase"][j]),
            {"long_name": f"phase at the {side}", "units": "1", **phase_flags},
        )
        data[f"nu0_{side}"] = (
            (),
            np.int8(raw["nu0"][j]),
            {"long_name": f"nu0 at the {side}", "units": "1", **INDEX_FLAGS},
        )
        if "nu" in raw:
            data[f"nu_{side}"] = (
                ("axis",),
                np.asarray(raw["nu"][j], np.int8),
                {"long_name": f"weak indices at the {side}", "units": "1", **INDEX_FLAGS},
            )
    coords: dict[str, Any] = {
        "kappa_axis": (
            "kappa_axis",
            np.arange(1, model.dim + 1, dtype=np.int8),
            {"long_name": "reduced coordinate index", "units": "1"},
        ),
    }
    if "nu" in raw:
        coords["axis"] = (
            "axis",
            np.array([1, 2, 3], np.int8),
            {"long_name": "reciprocal lattice axis", "units": "1"},
        )
    for k, v in fixed.items():
        coords[k] = ((), float(v), model.describe(k))
    attrs = {
        "title": f"gap closing of {model.name or 'a lattice model'} between two points",
        "Conventions": "CF-1.8",
        "source": f"toposweep {__version__}",
        "toposweep_version": __version__,
        "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "model": model.to_json(),
        "filling": int(filling),
        "sampling": json.dumps(samp.as_dict(), sort_keys=True),
        "start": json.dumps(dict(zip(names, a.tolist(), strict=True))),
        "end": json.dumps(dict(zip(names, b.tolist(), strict=True))),
        "tol": float(tol),
        "gap_evaluations": int(res.probes),
    }
    return xr.Dataset(data, coords=coords, attrs=attrs)
