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
from .segment_probes import coefficient_rows, locate_segments, probe_request, probes_of
from .transitions import (
    STATUS,
    SegmentResult,
    between,
    finish_statuses,
    segment_search,
)
from .weyl_bound import term_norm_bounds

__all__ = ["find_transition"]

#: names of the result's own variables (a parameter may not take them)
OWN = {
    "fraction",
    "fraction_low",
    "fraction_high",
    "kappa",
    "gap",
    "status",
    "kappa_axis",
    "transition",
} | {f"{q}_{end}" for q in ("phase", "nu0", "nu") for end in ("start", "end", "low", "high")}
#: interior points of the first scan of a segment (dips farther apart are always told apart)
SCAN = 7
#: uncovered parts of a segment are split down to this length (a fraction of the segment)
RESOLUTION = 1.0 / 256


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
    """Locate every bulk gap closing on the segment from ``start`` to ``end``.

    The direct gap, minimised over κ by the core's gap search, is followed along
    p(s) = start + s (end − start) (see :mod:`toposweep.maps.transitions`): a scan of 7
    interior points, then, for a ``TightBinding``, the parts of the segment the band-shift
    bound (Weyl's inequality) does not prove open are split until every dip of the gap is
    found; each dip is located to ``tol``. Both ends are evaluated in full, and so is one
    point between each two consecutive closings, for the phases on both sides of each.

    Parameters
    ----------
    model : TightBinding or CallableModel
        A 2D or 3D time-reversal-invariant model. A ``CallableModel`` has no band-shift bound:
        only the dips the scan shows are located (closings closer together than 1/8 of the
        segment may be reported as one).
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
        One entry per closing along the dim ``transition``, ordered along the segment (one
        entry when nothing closes): ``fraction`` (s*), ``fraction_low``/``fraction_high``
        (the bracket of s*, or the ends of a gapless interval), one variable per parameter of
        ``start`` (its value at s*), ``kappa`` (where the direct gap is smallest), ``gap``
        (the smallest gap found), ``status`` (CF flags: a point-like closing, a gapless
        interval, a closing between equal phases, no closing, the bands begin to overlap),
        ``phase_low``/``phase_high``, ``nu0_low``/``nu0_high`` (and ``nu_low``/``nu_high``
        in 3D) on the two sides of each closing; and, without the dim,
        ``phase_start``/``phase_end``, ``nu0_start``/``nu0_end`` (and ``nu_*`` in 3D).

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.find_transition(ts.models.bhz(), 2, start={"mass": -2.6}, end={"mass": -1.3})
    >>> ds.mass.values.round(6).tolist(), ds.kappa.values.tolist(), ds.status.values.tolist()
    ([-2.0], [[0.0, 0.0]], [0])
    >>> ds.status.attrs["flag_meanings"].split()[0]
    'gap_closes_at_a_point'
    >>> # Wilson–Dirac closes at m/t = -1 and 1 between m = -2 and 2: both are reported
    >>> wd = ts.find_transition(ts.models.wilson_dirac(), 2, start={"mass": -2.0},
    ...                         end={"mass": 2.0})
    >>> wd.mass.values.round(6).tolist(), wd.nu0_low.values.tolist(), wd.nu0_high.values.tolist()
    ([-1.0, 1.0], [1, 0], [0, 1])
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

    ends = [point_at(0, 0.0), point_at(0, 1.0)]
    raw = run_points(req, ends)
    labels = labels_of(raw)
    bounds = term_norm_bounds(model)
    rows = None if bounds is None else coefficient_rows(model, ends)
    search = segment_search(
        tuple(probes_of(raw, rows)),  # type: ignore[arg-type]
        tol=float(tol),
        same_phase=bool(labels[0] == labels[1]),
        interior=SCAN,
        bounds=bounds,
        resolution=RESOLUTION,
    )
    (found,) = locate_segments(
        probe_request(req), [search], point_at, with_coefficients=bounds is not None, full=req
    )
    # the phases between consecutive closings, from full evaluations halfway between them
    mids = between(found)
    inner = run_points(req, [point_at(0, x) for x in mids]) if mids else None
    side = {
        k: np.concatenate([raw[k][:1], *([] if inner is None else [inner[k]]), raw[k][1:]])
        for k in ("phase", "nu0", *(("nu",) if "nu" in raw else ()))
    }
    finish_statuses(found, labels_of(side).tolist())
    return _dataset(model, req, samp, filling, tol, names, a, b, fixed, raw, side, found)


def _dataset(
    model: Model,
    req: Any,
    samp: Sampling,
    filling: int,
    tol: float,
    names: list[str],
    a: np.ndarray,
    b: np.ndarray,
    fixed: dict[str, float],
    raw: Mapping[str, np.ndarray],
    side: Mapping[str, np.ndarray],
    found: list[SegmentResult],
) -> xr.Dataset:
    unit = model.energy_unit
    t = ("transition",)
    frac = np.array([r.fraction for r in found], float)
    data: dict[str, Any] = {
        "fraction": (t, frac, {"long_name": "position s* on the segment", "units": "1"}),
        "fraction_low": (
            t,
            np.array([r.low for r in found], float),
            {
                "long_name": "lower end of the bracket of s* or of the gapless interval",
                "units": "1",
            },
        ),
        "fraction_high": (
            t,
            np.array([r.high for r in found], float),
            {
                "long_name": "upper end of the bracket of s* or of the gapless interval",
                "units": "1",
            },
        ),
        "kappa": (
            ("transition", "kappa_axis"),
            np.array([r.kappa for r in found], float).reshape(len(found), model.dim),
            {"long_name": "reduced coordinates of the smallest direct gap at s*", "units": "1"},
        ),
        "gap": (
            t,
            np.array([r.gap for r in found], float),
            {"long_name": "smallest direct gap found at the closing", "units": unit},
        ),
        "status": (
            t,
            np.array([r.status for r in found], np.int8),
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
            t,
            a[k] + frac * (b[k] - a[k]),
            {**info, "long_name": f"{info.get('long_name', name)} at s*"},
        )
    phase_flags = {
        "flag_values": np.array(list(PHASES), np.int8),
        "flag_meanings": " ".join(PHASES.values()),
    }
    for j, end in enumerate(("start", "end")):
        data[f"phase_{end}"] = (
            (),
            np.int8(raw["phase"][j]),
            {"long_name": f"phase at the {end}", "units": "1", **phase_flags},
        )
        data[f"nu0_{end}"] = (
            (),
            np.int8(raw["nu0"][j]),
            {"long_name": f"nu0 at the {end}", "units": "1", **INDEX_FLAGS},
        )
        if "nu" in raw:
            data[f"nu_{end}"] = (
                ("axis",),
                np.asarray(raw["nu"][j], np.int8),
                {"long_name": f"weak indices at the {end}", "units": "1", **INDEX_FLAGS},
            )
    n = len(found)
    for where, part in (("low", slice(0, n)), ("high", slice(1, n + 1))):
        before = "before (lower s)" if where == "low" else "after (higher s)"
        data[f"phase_{where}"] = (
            t,
            np.asarray(side["phase"][part], np.int8),
            {"long_name": f"phase just {before} the transition", "units": "1", **phase_flags},
        )
        data[f"nu0_{where}"] = (
            t,
            np.asarray(side["nu0"][part], np.int8),
            {"long_name": f"nu0 just {before} the transition", "units": "1", **INDEX_FLAGS},
        )
        if "nu" in side:
            data[f"nu_{where}"] = (
                ("transition", "axis"),
                np.asarray(side["nu"][part], np.int8).reshape(n, 3),
                {"long_name": f"weak indices just {before} the transition", "units": "1",
                 **INDEX_FLAGS},
            )  # fmt: skip
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
        "gap_evaluations": int(found[0].probes),
    }
    return xr.Dataset(data, coords=coords, attrs=attrs)
