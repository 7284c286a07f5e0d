"""Assembly of result arrays into CF-annotated xarray Datasets.

One function, :func:`build_dataset`, turns the flat per-point arrays returned by the Rust core
into a Dataset over the grid dimensions, so a single point and a sweep share one schema.
"""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from datetime import datetime, timezone
from typing import Any

import numpy as np
import xarray as xr
from numpy.typing import NDArray

from ._version import __version__
from .dataset_assembly import assemble
from .dataset_methods import method_variables
from .model import Model
from .sampling import Sampling

__all__ = ["build_dataset", "classify_phase", "PHASES", "REASONS"]

#: phase codes → CF flag meanings
PHASES: dict[int, str] = {
    -1: "undefined",
    0: "trivial_insulator",
    1: "weak_topological_insulator",
    2: "strong_topological_insulator",
    3: "z2_odd_2d_insulator",
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


def classify_phase(nu0: NDArray, nu: NDArray | None) -> NDArray[np.int8]:
    """Phase codes (see :data:`PHASES`) from ν0 and, in 3D, the weak indices (last axis).

    Examples
    --------
    >>> import numpy as np
    >>> weak = np.array([[0, 0, 0], [1, 0, 0], [0, 0, 0], [-1, -1, -1]])
    >>> classify_phase(np.array([1, 0, 0, -1]), weak)
    array([ 2,  1,  0, -1], dtype=int8)
    >>> classify_phase(np.array([1, 0]), None)
    array([3, 0], dtype=int8)
    """
    nu0 = np.asarray(nu0)
    if nu is None:
        out = np.where(nu0 == 1, 3, 0)
    else:
        weak = np.any(np.asarray(nu) == 1, axis=-1)
        out = np.where(nu0 == 1, 2, np.where(weak, 1, 0))
    return np.where(nu0 < 0, -1, out).astype(np.int8)


def _flags(codes: Mapping[int, str], dtype: Any = np.int8) -> dict[str, Any]:
    return {
        "flag_values": _read_only(np.array(list(codes), dtype=dtype)),
        "flag_meanings": " ".join(codes.values()),
    }


# (built once: every result carries them)
_PHASE_FLAGS = _flags(PHASES)
_REASON_FLAGS = _flags(REASONS)


def build_dataset(
    model: Model,
    raw: Mapping[str, NDArray],
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
    dims = tuple(dims)
    shape = tuple(len(coords[d]) for d in dims)
    three_d = model.dim == 3
    unit = model.energy_unit

    def grid(a: NDArray, extra: tuple[int, ...] = ()) -> NDArray:
        return np.asarray(a).reshape(shape + extra)

    data: dict[str, tuple] = {}
    nu_raw = grid(raw["nu"], (3,)) if three_d else None
    data["nu0"] = (
        dims,
        grid(raw["nu0"]).astype(np.int8),
        {
            "long_name": "strong Z2 index nu0" if three_d else "Z2 index",
            "units": "1",
            **INDEX_FLAGS,
        },
    )
    if three_d:
        data["nu"] = (
            dims + ("axis",),
            nu_raw.astype(np.int8),
            {
                "long_name": "weak Z2 indices nu1 nu2 nu3",
                "units": "1",
                **INDEX_FLAGS,
            },
        )
        data["z2_plane"] = (
            dims + ("axis", "cut"),
            grid(raw["z2_plane"], (3, 2)).astype(np.int8),
            {
                "long_name": "Z2 index of the time-reversal-invariant plane kappa_axis = cut",
                "units": "1",
                **INDEX_FLAGS,
            },
        )
        data["nu0_by_axis"] = (
            dims + ("axis",),
            grid(raw["nu0_by_axis"], (3,)).astype(np.int8),
            {
                "long_name": "nu0 estimated from the two planes normal to axis",
                "units": "1",
                **INDEX_FLAGS,
            },
        )
    phase = classify_phase(data["nu0"][1], nu_raw)
    data["phase"] = (
        dims,
        phase,
        {"long_name": "topological phase", "units": "1", **_PHASE_FLAGS},
    )
    data["undefined_reason"] = (
        dims,
        grid(raw["reason"]).astype(np.int8),
        {
            "long_name": "why the indices are undefined",
            "units": "1",
            **_REASON_FLAGS,
        },
    )
    data["gap_direct"] = (
        dims,
        grid(raw["gap_direct"]),
        {
            "long_name": "smallest direct band gap at the filling (minimised over kappa)",
            "units": unit,
        },
    )
    data["gap_indirect"] = (
        dims,
        grid(raw["gap_indirect"]),
        {
            "long_name": "lowest empty minus highest occupied energy over sampled kappa "
            "(negative: band overlap)",
            "units": unit,
        },
    )
    data["gap_kappa"] = (
        dims + ("kappa_axis",),
        grid(raw["gap_kappa"], (model.dim,)),
        {
            "long_name": "reduced coordinates of the smallest direct gap",
            "units": "1",
        },
    )
    data["bandwidth"] = (
        dims,
        grid(raw["bandwidth"]),
        {
            "long_name": "spread of all band energies over sampled kappa",
            "units": unit,
        },
    )
    data["gap_floor"] = (
        dims,
        grid(raw["gap_floor"]),
        {
            "long_name": "direct gap below which the point counts as gapless",
            "units": unit,
        },
    )
    data["converged"] = (
        dims,
        grid(raw["converged"]).astype(np.int8),
        {
            "long_name": "indices converged: flow resolved within max_lines and, where it was "
            "tight, unchanged with doubled loop_points (lattice-only runs: mesh fine enough)",
            "units": "1",
            "flag_values": np.array([0, 1], np.int8),
            "flag_meanings": "no yes",
        },
    )
    data["lines_used"] = (
        dims,
        grid(raw["lines_used"]).astype(np.int32),
        {
            "long_name": "largest number of pump lines used in one half plane",
            "units": "1",
        },
    )
    data["max_step"] = (
        dims,
        grid(raw["max_step"]),
        {
            "long_name": "largest hybrid Wannier centre motion between neighbouring pump lines "
            "in the runs that decided (NaN: no Wilson loops)",
            "units": "1",
        },
    )
    data["min_clearance"] = (
        dims,
        grid(raw["min_clearance"]),
        {
            "long_name": "smallest distance between a largest-gap midpoint and a centre of the "
            "neighbouring line in the runs that decided (NaN: no Wilson loops)",
            "units": "1",
        },
    )
    data.update(
        method_variables(
            raw,
            grid,
            dims,
            three_d=three_d,
            method=sampling.method,
            index_flags=INDEX_FLAGS,
            reason_flags=_REASON_FLAGS,
        )
    )
    if parity_known:
        nu0p = grid(raw["nu0_parity"]).astype(np.int8)
        data["nu0_parity"] = (
            dims,
            nu0p,
            {
                "long_name": ("strong Z2 index nu0" if three_d else "Z2 index")
                + " from Fu-Kane parity",
                "units": "1",
                **INDEX_FLAGS,
            },
        )
        agree = np.where(nu0p == data["nu0"][1], 1, 0)
        if three_d:
            nup = grid(raw["nu_parity"], (3,)).astype(np.int8)
            data["nu_parity"] = (
                dims + ("axis",),
                nup,
                {
                    "long_name": "weak Z2 indices from Fu-Kane parity",
                    "units": "1",
                    **INDEX_FLAGS,
                },
            )
            agree = np.where(np.all(nup == nu_raw, axis=-1), agree, 0)
        both = (nu0p >= 0) & (data["nu0"][1] >= 0)
        data["parity_agrees"] = (
            dims,
            np.where(both, agree, -1).astype(np.int8),
            {
                "long_name": "Fu-Kane parity indices equal the Wilson-loop indices",
                "units": "1",
                "flag_values": np.array([-1, 0, 1], np.int8),
                "flag_meanings": "not_comparable disagree agree",
            },
        )
        data["parity_undefined_reason"] = (
            dims,
            grid(raw["parity_reason"]).astype(np.int8),
            {
                "long_name": "why the parity indices are undefined",
                "units": "1",
                **_REASON_FLAGS,
            },
        )
        ntrim = 2**model.dim
        data["odd_parity_states"] = (
            dims + ("trim",),
            grid(raw["odd_count"], (ntrim,)).astype(np.int16),
            {
                "long_name": "occupied states of odd parity at each TRIM (-1: undefined)",
                "units": "1",
            },
        )

    coord_vars: dict[str, Any] = {}
    for d in dims:
        coord_vars[d] = (d, np.asarray(coords[d]), model.describe(d))
    for name, value in fixed.items():
        coord_vars[name] = ((), float(value), model.describe(name))
    if three_d:
        coord_vars["axis"] = (
            "axis",
            np.array([1, 2, 3], np.int8),
            {
                "long_name": "reciprocal lattice axis",
                "units": "1",
            },
        )
        coord_vars["cut"] = (
            "cut",
            np.array([0.0, 0.5]),
            {
                "long_name": "reduced coordinate of the time-reversal-invariant plane",
                "units": "1",
            },
        )
    if parity_known:
        # TRIM g has kappa_i = 1/2 where bit i of g is set (the core's order)
        bits = (np.arange(2**model.dim)[:, None] >> np.arange(model.dim)[None, :]) & 1
        coord_vars["trim"] = (
            "trim",
            np.arange(2**model.dim, dtype=np.int8),
            {
                "long_name": "time-reversal-invariant momentum index",
                "units": "1",
            },
        )
        coord_vars["trim_kappa"] = (
            ("trim", "kappa_axis"),
            0.5 * bits,
            {
                "long_name": "reduced coordinates of the TRIM",
                "units": "1",
            },
        )
    coord_vars["kappa_axis"] = (
        "kappa_axis",
        np.arange(1, model.dim + 1, dtype=np.int8),
        {
            "long_name": "reduced coordinate index",
            "units": "1",
        },
    )

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
    return assemble(data, coord_vars, attrs)
