"""Assembly of result arrays into CF-annotated xarray Datasets.

:func:`build_dataset` turns the flat per-point arrays returned by the Rust core into a Dataset
over the grid dimensions, so a single point and a sweep share one schema. It works in two
steps that :func:`toposweep.invariants` also takes apart: :func:`plan_dataset` builds the whole
Dataset — coordinates, attributes and empty arrays of the right shapes and types — from what
is known before the core runs, and :meth:`ResultLayout.fill` writes the results into those
arrays. The plan is then made while the core computes (``_core.evaluate(alongside=...)``).
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Mapping, Sequence
from datetime import datetime, timezone
from functools import lru_cache
from typing import Any

import numpy as np
import xarray as xr
from numpy.typing import NDArray

from .._version import __version__
from ..model import Model
from ..sampling import Sampling
from .dataset_assembly import assemble, renewed
from .dataset_methods import AGREE_FLAGS, Field, Raw, method_fields

__all__ = [
    "build_dataset",
    "plan_dataset",
    "ResultLayout",
    "PHASES",
    "REASONS",
]

#: phase codes → CF flag meanings (the core derives them: ``indices::phase_of``)
PHASES: dict[int, str] = {
    -1: "undefined",
    0: "trivial_insulator",
    1: "weak_topological_insulator",
    2: "strong_topological_insulator",
    3: "z2_odd_2d_insulator",
    10: "metal_with_trivial_bands",
    11: "metal_with_weak_topological_bands",
    12: "metal_with_strong_topological_bands",
    13: "metal_with_z2_odd_2d_bands",
}

#: reason codes of the core → CF flag meanings
REASONS: dict[int, str] = {
    0: "defined",
    1: "gapless_direct_gap_below_floor",
    2: "degenerate_at_filling_at_trim",
    3: "nu0_estimates_disagree",
    4: "not_converged_within_max_lines",
    5: "inversion_mixes_occupied_and_empty_states",
    6: "odd_count_of_odd_parity_kramers_states",
    7: "inversion_not_a_symmetry_at_this_point",
    8: "time_reversal_broken_at_this_point",
    9: "changes_with_doubled_loop_points",
    10: "lattice_mesh_too_coarse",
    11: "gap_not_proven_above_floor",
}

_METHOD_TEXT = {
    "wilson": "Wilson loop, hybrid Wannier centre flow with largest-gap tracking",
    "lattice": "lattice Z2 (Fukui-Hatsugai)",
    "both": "Wilson loop, hybrid Wannier centre flow with largest-gap tracking; "
    "lattice Z2 (Fukui-Hatsugai) cross-check",
}


def _read_only(a: NDArray) -> NDArray:
    a.setflags(write=False)  # shared by every result's attrs: no in-place change may leak
    return a


INDEX_FLAGS = {
    "flag_values": _read_only(np.array([-1, 0, 1], np.int8)),
    "flag_meanings": "undefined even odd",
}


def _flags(codes: Mapping[int, str], dtype: Any = np.int8) -> dict[str, Any]:
    return {
        "flag_values": _read_only(np.array(list(codes), dtype=dtype)),
        "flag_meanings": " ".join(codes.values()),
    }


# (built once: every result carries them)
_PHASE_FLAGS = _flags(PHASES)
_REASON_FLAGS = _flags(REASONS)
_YES_NO_FLAGS = {"flag_values": _read_only(np.array([0, 1], np.int8)), "flag_meanings": "no yes"}


@lru_cache(maxsize=64)
def _fields(dim: int, unit: str, parity_known: bool, method: str) -> tuple[Field, ...]:
    """The data variables of a result, in the order the Dataset lists them."""
    three_d = dim == 3
    index = {"units": "1", **INDEX_FLAGS}
    fields = [
        Field(
            "nu0",
            (),
            np.int8,
            {"long_name": "strong Z2 index nu0" if three_d else "Z2 index", **index},
            "nu0",
        )
    ]
    if three_d:
        fields += [
            Field(
                "nu",
                (("axis", 3),),
                np.int8,
                {"long_name": "weak Z2 indices nu1 nu2 nu3", **index},
                "nu",
            ),
            Field(
                "z2_plane",
                (("axis", 3), ("cut", 2)),
                np.int8,
                {
                    "long_name": "Z2 index of the time-reversal-invariant plane kappa_axis = cut",
                    **index,
                },
                "z2_plane",
            ),
            Field(
                "nu0_by_axis",
                (("axis", 3),),
                np.int8,
                {"long_name": "nu0 estimated from the two planes normal to axis", **index},
                "nu0_by_axis",
            ),
        ]
    fields += [
        Field(
            "phase",
            (),
            np.int8,
            {"long_name": "topological phase", "units": "1", **_PHASE_FLAGS},
            "phase",
        ),
        Field(
            "undefined_reason",
            (),
            np.int8,
            {"long_name": "why the indices are undefined", "units": "1", **_REASON_FLAGS},
            "reason",
        ),
        Field(
            "gap_direct",
            (),
            np.float64,
            {
                "long_name": "smallest direct band gap at the filling (minimised over kappa)",
                "units": unit,
            },
            "gap_direct",
        ),
        Field(
            "gap_proven",
            (),
            np.float64,
            {
                "long_name": "proven lower bound of the direct band gap at the filling over "
                "the whole Brillouin zone (NaN: not proven)",
                "units": unit,
            },
            "gap_proven",
        ),
        Field(
            "gap_indirect",
            (),
            np.float64,
            {
                "long_name": "lowest empty minus highest occupied energy over sampled kappa "
                "(negative: band overlap)",
                "units": unit,
            },
            "gap_indirect",
        ),
        Field(
            "gap_kappa",
            (("kappa_axis", dim),),
            np.float64,
            {"long_name": "reduced coordinates of the smallest direct gap", "units": "1"},
            "gap_kappa",
        ),
        Field(
            "bandwidth",
            (),
            np.float64,
            {"long_name": "spread of all band energies over sampled kappa", "units": unit},
            "bandwidth",
        ),
        Field(
            "gap_floor",
            (),
            np.float64,
            {"long_name": "direct gap below which the point counts as gapless", "units": unit},
            "gap_floor",
        ),
        Field(
            "converged",
            (),
            np.int8,
            {
                "long_name": "indices converged: flow resolved within max_lines and, where it "
                "was tight, unchanged with doubled loop_points (lattice-only runs: mesh fine "
                "enough); 0 wherever the gap blocks the indices",
                "units": "1",
                **_YES_NO_FLAGS,
            },
            "converged",
        ),
        Field(
            "lines_used",
            (),
            np.int32,
            {"long_name": "largest number of pump lines used in one half plane", "units": "1"},
            "lines_used",
        ),
        Field(
            "max_step",
            (),
            np.float64,
            {
                "long_name": "largest hybrid Wannier centre motion between neighbouring pump "
                "lines in the runs that decided (NaN: no Wilson loops)",
                "units": "1",
            },
            "max_step",
        ),
        Field(
            "min_clearance",
            (),
            np.float64,
            {
                "long_name": "smallest distance between a largest-gap midpoint and a centre of "
                "the neighbouring line in the runs that decided (NaN: no Wilson loops)",
                "units": "1",
            },
            "min_clearance",
        ),
    ]
    fields += method_fields(
        three_d=three_d, method=method, index_flags=INDEX_FLAGS, reason_flags=_REASON_FLAGS
    )
    if parity_known:
        fields += _parity_fields(dim, three_d)
    return tuple(fields)


def _parity_fields(dim: int, three_d: bool) -> list[Field]:
    """The Fu–Kane parity variables (when an inversion matrix is known)."""
    index = {"units": "1", **INDEX_FLAGS}
    fields = [
        Field(
            "nu0_parity",
            (),
            np.int8,
            {
                "long_name": ("strong Z2 index nu0" if three_d else "Z2 index")
                + " from Fu-Kane parity",
                **index,
            },
            "nu0_parity",
        )
    ]
    if three_d:
        fields.append(
            Field(
                "nu_parity",
                (("axis", 3),),
                np.int8,
                {"long_name": "weak Z2 indices from Fu-Kane parity", **index},
                "nu_parity",
            )
        )
    return fields + [
        Field(
            "parity_agrees",
            (),
            np.int8,
            {
                "long_name": "Fu-Kane parity indices equal the Wilson-loop indices",
                "units": "1",
                **AGREE_FLAGS,
            },
            "parity_agrees",
        ),
        Field(
            "parity_undefined_reason",
            (),
            np.int8,
            {"long_name": "why the parity indices are undefined", "units": "1", **_REASON_FLAGS},
            "parity_reason",
        ),
        Field(
            "odd_parity_states",
            (("trim", 2**dim),),
            np.int16,
            {
                "long_name": "occupied states of odd parity at each TRIM (-1: undefined)",
                "units": "1",
            },
            "odd_count",
        ),
    ]


def _coordinates(
    model: Model,
    dims: tuple[str, ...],
    coords: Mapping[str, NDArray],
    fixed: Mapping[str, float],
    parity_known: bool,
) -> dict[str, tuple]:
    """Grid coordinates, fixed parameters as scalar coordinates, and the small index axes."""
    coord_vars: dict[str, Any] = {}
    for d in dims:
        coord_vars[d] = (d, np.asarray(coords[d]), model.describe(d))
    for name, value in fixed.items():
        coord_vars[name] = ((), float(value), model.describe(name))
    if model.dim == 3:
        coord_vars["axis"] = (
            "axis",
            np.array([1, 2, 3], np.int8),
            {"long_name": "reciprocal lattice axis", "units": "1"},
        )
        coord_vars["cut"] = (
            "cut",
            np.array([0.0, 0.5]),
            {"long_name": "reduced coordinate of the time-reversal-invariant plane", "units": "1"},
        )
    if parity_known:
        # TRIM g has kappa_i = 1/2 where bit i of g is set (the core's order)
        bits = (np.arange(2**model.dim)[:, None] >> np.arange(model.dim)[None, :]) & 1
        coord_vars["trim"] = (
            "trim",
            np.arange(2**model.dim, dtype=np.int8),
            {"long_name": "time-reversal-invariant momentum index", "units": "1"},
        )
        coord_vars["trim_kappa"] = (
            ("trim", "kappa_axis"),
            0.5 * bits,
            {"long_name": "reduced coordinates of the TRIM", "units": "1"},
        )
    coord_vars["kappa_axis"] = (
        "kappa_axis",
        np.arange(1, model.dim + 1, dtype=np.int8),
        {"long_name": "reduced coordinate index", "units": "1"},
    )
    return coord_vars


class ResultLayout:
    """A result Dataset built ahead of the values: :meth:`fill` writes them in, once.

    Made by :func:`plan_dataset`. The Dataset already holds every coordinate and attribute and
    one empty array per data variable; :meth:`fill` copies the core's flat per-point arrays
    into those arrays (cast as ``astype`` would) and returns the Dataset. Arrays the core
    wrote itself (:meth:`core_targets`) are not copied again.
    """

    def __init__(
        self,
        data: dict[str, tuple],
        coords: dict[str, tuple],
        attrs: dict[str, Any],
        sources: list[tuple[NDArray, str | Callable[[Raw], NDArray]]],
        grid_ndim: int,
    ) -> None:
        self._data, self._coords, self._attrs, self._sources = data, coords, attrs, sources
        self._dataset: xr.Dataset | None = _assembled_in_place(data, coords, attrs)
        self._filled, self._grid_ndim, self._direct = False, grid_ndim, {}

    @classmethod
    def around(
        cls,
        dataset: xr.Dataset,
        sources: list[tuple[NDArray, str | Callable[[Raw], NDArray]]],
        core_targets: dict[str, NDArray],
    ) -> ResultLayout:
        """A one-point layout of a Dataset that already holds the target arrays of ``sources``.

        ``core_targets`` are views of those arrays in the core's shapes (:meth:`core_targets`).
        """
        layout = cls.__new__(cls)
        layout._sources, layout._dataset, layout._filled = sources, dataset, False
        layout._grid_ndim, layout._direct = 0, core_targets
        return layout

    def core_targets(self) -> dict[str, NDArray]:
        """Views of the Dataset's arrays shaped as the core's results, by the core's keys.

        Returned by the Python job of ``_core.evaluate(alongside=...)``, they tell the core to
        write its results straight into the Dataset (where an array's type holds them
        exactly; the core makes new arrays for the rest), so that after the core — serial
        time, which caps what a second thread gives a call — :meth:`fill` has only the rest
        to copy.

        Examples
        --------
        >>> import toposweep as ts
        >>> from toposweep.evaluation import prepare_request, run_points
        >>> m = ts.models.bhz()
        >>> req = prepare_request(m, 2, inversion=None, sampling=Sampling())
        >>> point = m.resolve({"mass": -1.0})
        >>> layout = plan_dataset(m, dims=(), coords={}, fixed=point, filling=2,
        ...                       sampling=req.sampling, parity_known=False)
        >>> raw = run_points(req, [point], alongside=layout.core_targets)
        >>> raw["nu0"] is layout.core_targets()["nu0"], raw["nu0"].shape
        (True, (1,))
        >>> int(layout.fill(raw).nu0)
        1
        """
        if not self._direct:
            g = self._grid_ndim
            for target, source in self._sources:
                if isinstance(source, str):
                    shape = target.shape
                    # (math.prod: numpy's prod costs µs per call, this runs per variable)
                    self._direct[source] = target.reshape((math.prod(shape[:g]), *shape[g:]))
        return self._direct

    def fill(self, raw: Raw) -> xr.Dataset:
        """The Dataset with the values of ``raw`` (the dict of :func:`_core.evaluate`)."""
        if self._filled:
            raise RuntimeError("a ResultLayout is filled once; plan a new one for new values")
        self._filled = True
        direct = self._direct
        for target, source in self._sources:
            if isinstance(source, str):
                values = raw[source]
                if values is direct.get(source):
                    continue  # (the core wrote it in place)
            else:
                values = source(raw)
            target[...] = np.asarray(values).reshape(target.shape)
        if self._dataset is not None:
            return self._dataset
        return assemble(self._data, self._coords, self._attrs)


#: whether a Dataset assembled around arrays keeps those very arrays (checked on first use)
_KEEPS_ARRAYS: bool | None = None


def _assembled_in_place(
    data: dict[str, tuple], coords: dict[str, tuple], attrs: dict[str, Any]
) -> xr.Dataset | None:
    """The Dataset around the layout's arrays, or None where filling them would not show.

    xarray keeps a numeric ndarray as the Variable's data without copying; that is checked
    once per process (on the first result), and where it fails the Dataset is assembled only
    after the fill.
    """
    global _KEEPS_ARRAYS
    if _KEEPS_ARRAYS is False:
        return None
    ds = assemble(data, coords, attrs)
    if _KEEPS_ARRAYS is None:
        _KEEPS_ARRAYS = all(ds.variables[k].values is v[1] for k, v in data.items())
        if not _KEEPS_ARRAYS:
            return None
    return ds


def plan_dataset(
    model: Model,
    *,
    dims: Sequence[str],
    coords: Mapping[str, NDArray],
    fixed: Mapping[str, float],
    filling: int,
    sampling: Sampling,
    parity_known: bool,
    extra_attrs: Mapping[str, Any] | None = None,
) -> ResultLayout:
    """The result Dataset of a run, everything but the values (see :class:`ResultLayout`).

    Arguments as for :func:`build_dataset`, without the results.

    Examples
    --------
    >>> import toposweep as ts
    >>> from toposweep.evaluation import prepare_request, run_points
    >>> m = ts.models.bhz()
    >>> req = prepare_request(m, 2, inversion=None, sampling=Sampling())
    >>> point = m.resolve({"mass": -1.0})
    >>> layout = plan_dataset(m, dims=(), coords={}, fixed=point, filling=2,
    ...                       sampling=req.sampling, parity_known=False)
    >>> ds = layout.fill(run_points(req, [point]))
    >>> int(ds.nu0), str(ds.gap_direct.attrs["units"])
    (1, '1')
    """
    dims = tuple(dims)
    fields = _fields(model.dim, model.energy_unit, parity_known, sampling.method)
    # One-point results (invariants() in a loop) differ only in the parameter values and the
    # time: the next is copied from the previous one's layout instead of assembled again.
    key = None
    if not dims and not extra_attrs:
        key = _template_key(model, fixed, filling, sampling, parity_known)
        template = _TEMPLATES.get(key)
        if template is not None:
            layout = _from_template(template, fields, fixed)
            if layout is not None:
                return layout
    shape = tuple(len(coords[d]) for d in dims)
    data: dict[str, tuple] = {}
    sources: list[tuple[NDArray, Any]] = []
    for f in fields:
        target = np.empty(shape + f.extra_shape, f.dtype)
        data[f.name] = (dims + f.extra_dims, target, f.attrs)
        sources.append((target, f.source))
    attrs: dict[str, Any] = {
        "title": f"Z2 indices of {model.name or 'a lattice model'}",
        "Conventions": "CF-1.8",
        "source": f"toposweep {__version__}",
        "toposweep_version": __version__,
        "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "model": model.to_json(),
        "filling": int(filling),
        "sampling": json.dumps(sampling.as_dict(), sort_keys=True),
        "method": _METHOD_TEXT[sampling.method]
        + ("; Fu-Kane parity cross-check" if parity_known else ""),
    }
    attrs.update(extra_attrs or {})
    coord_vars = _coordinates(model, dims, coords, fixed, parity_known)
    layout = ResultLayout(data, coord_vars, attrs, sources, len(dims))
    if key is not None and layout._dataset is not None:
        # (a copy of its own: the layout's Dataset goes to the caller, who may change it)
        template = renewed(layout._dataset, {}, attrs)
        if template is not None:
            if len(_TEMPLATES) >= 32:
                _TEMPLATES.clear()
            _TEMPLATES[key] = template
    return layout


#: one-point layouts (no grid dims, no extra attributes) by everything but the values they
#: differ in — the fixed parameter values and the creation time (see :func:`plan_dataset`)
_TEMPLATES: dict[tuple, xr.Dataset] = {}


def _template_key(
    model: Model, fixed: Mapping[str, float], filling: int, sampling: Sampling, parity_known: bool
) -> tuple:
    # (to_json covers the model's name, unit, operators and parameter descriptions)
    return (type(model), model.to_json(), tuple(fixed), int(filling), sampling, parity_known)


def _from_template(
    template: xr.Dataset, fields: Sequence[Field], fixed: Mapping[str, float]
) -> ResultLayout | None:
    """A fresh layout shaped like ``template``: new empty arrays, this point's parameters."""
    # (each array made in the core's shape, one point first, and the Dataset given a view
    # without it: the core's targets come for the cost of an index, not a reshape later)
    flat = {f.name: np.empty((1, *f.extra_shape), f.dtype) for f in fields}
    data: dict[str, NDArray] = {name: a[0, ...] for name, a in flat.items()}
    sources = [(data[f.name], f.source) for f in fields]
    direct = {f.source: flat[f.name] for f in fields if isinstance(f.source, str)}
    for name, value in fixed.items():
        data[name] = np.asarray(float(value))
    attrs = dict(template.attrs)
    attrs["created"] = datetime.now(timezone.utc).isoformat(timespec="seconds")
    ds = renewed(template, data, attrs)
    return None if ds is None else ResultLayout.around(ds, sources, direct)


def build_dataset(
    model: Model,
    raw: Raw,
    *,
    dims: Sequence[str],
    coords: Mapping[str, NDArray],
    fixed: Mapping[str, float],
    filling: int,
    sampling: Sampling,
    parity_known: bool,
    extra_attrs: Mapping[str, Any] | None = None,
) -> xr.Dataset:
    """Dataset over ``dims`` from the flat per-point arrays ``raw`` of :func:`_core.evaluate`.

    ``coords`` holds one 1-D array per dim (C order of the flat arrays); ``fixed`` holds the
    parameters that are not swept (stored as scalar coordinates).
    """
    layout = plan_dataset(
        model,
        dims=dims,
        coords=coords,
        fixed=fixed,
        filling=filling,
        sampling=sampling,
        parity_known=parity_known,
        extra_attrs=extra_attrs,
    )
    return layout.fill(raw)
