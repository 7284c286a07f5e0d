"""The variables a phase map adds to the sweep's Dataset, and writing it to a file.

Per grid point: ``obtained`` (evaluated / proven by the gap bound / filled by agreement) and
``gap_bound``. Along the dim ``transition``: where each located gap closing is, what closes
there and between which phases. The file is the sweep's layout (:func:`toposweep.results.store.
write_result`, one block of the whole grid) with the transition variables added before the
file takes its final name.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

import h5netcdf
import numpy as np
import xarray as xr
from numpy.typing import NDArray

from ..file_digest import append_digest
from ..results.dataset import PHASES
from ..results.store import FLAT_DIM, _create, _fsync_dir, write_result
from ..sweep_plan import SweepPlan
from .adaptive_cells import EVALUATED, FILLED, PROVEN
from .transitions import STATUS

__all__ = ["OBTAINED", "add_map_variables", "write_map"]

#: how a point was obtained → CF flag meanings
OBTAINED = {
    EVALUATED: "evaluated",
    PROVEN: "proven_by_gap_bound",
    FILLED: "filled_by_agreement",
}
TRANSITION_DIM = "transition"


def _flags(codes: dict[int, str]) -> dict[str, Any]:
    return {
        "flag_values": np.array(list(codes), np.int8),
        "flag_meanings": " ".join(codes.values()),
    }


def add_map_variables(
    ds: xr.Dataset,
    plan: SweepPlan,
    how: NDArray[np.int8],
    bound: NDArray[np.float64],
    found: dict[str, Any],
) -> xr.Dataset:
    """``ds`` with ``obtained``, ``gap_bound``, the transitions and the counts in its attrs."""
    dims, shape = plan.dims, plan.shape
    unit = str(ds.gap_direct.attrs.get("units", "1"))
    ds["obtained"] = (
        dims,
        how.reshape(shape).astype(np.int8),
        {"long_name": "how the point's indices were obtained", "units": "1", **_flags(OBTAINED)},
    )
    ds["gap_bound"] = (
        dims,
        bound.reshape(shape),
        {
            "long_name": "proven lower bound of the direct gap at a point that was not evaluated "
            "(gap_proven of an evaluated point minus twice the band-shift bound, Weyl's "
            "inequality); NaN elsewhere",
            "units": unit,
        },
    )
    counts = {k: int((how == v).sum()) for k, v in (("evaluated", 0), ("proven", 1), ("filled", 2))}
    ds.attrs["points_evaluated"] = counts["evaluated"]
    ds.attrs["points_proven"] = counts["proven"]
    ds.attrs["points_filled_by_agreement"] = counts["filled"]
    ds.attrs["phase_map"] = json.dumps(plan.identity["phase_map"], sort_keys=True)
    for name, var in _transition_variables(ds, plan, found, unit).items():
        ds[name] = var
    return ds


def _transition_variables(
    ds: xr.Dataset, plan: SweepPlan, found: dict[str, Any], unit: str
) -> dict[str, xr.Variable]:
    lo, hi, axis, results = found["lower"], found["upper"], found["axis"], found["results"]
    n, shape, dims = len(results), plan.shape, plan.dims
    t = (TRANSITION_DIM,)
    idx = np.array(np.unravel_index(lo, shape)).T.reshape(n, len(dims))
    idx_hi = np.array(np.unravel_index(hi, shape)).T.reshape(n, len(dims))
    frac = np.array([r.fraction for r in results], float)
    out: dict[str, xr.Variable] = {}
    out["transition_along"] = xr.Variable(
        t,
        axis.astype(np.int8),
        {
            "long_name": "grid parameter along which the transition's segment runs",
            "units": "1",
            **_flags(dict(enumerate(dims))),
        },
    )
    for k, d in enumerate(dims):
        c = plan.coords[d]
        at = c[idx[:, k]] if n else np.zeros(0)
        if n:
            nxt = c[idx_hi[:, k]]
            along = axis == k
            at = np.where(along, at + frac * (nxt - at), at)
        out[f"transition_{d}"] = xr.Variable(
            t, np.asarray(at, float), {**ds[d].attrs, "long_name": f"{d} at the transition"}
        )
    for name, what in (
        ("fraction", "position"),
        ("fraction_low", "lower end of the closed interval (or of the bracket)"),
        ("fraction_high", "upper end of the closed interval (or of the bracket)"),
    ):
        values = np.array([getattr(r, name.removeprefix("fraction_") if "_" in name else name)
                           for r in results], float)  # fmt: skip
        out[f"transition_{name}"] = xr.Variable(
            t,
            values,
            {
                "long_name": f"{what} of the transition on the segment between the two "
                "evaluated grid points (0 at the lower, 1 at the upper)",
                "units": "1",
            },
        )
    out["transition_gap"] = xr.Variable(
        t,
        np.array([r.gap for r in results], float),
        {"long_name": "smallest direct gap found on the segment", "units": unit},
    )
    kdim = ds.sizes["kappa_axis"]
    out["transition_kappa"] = xr.Variable(
        (TRANSITION_DIM, "kappa_axis"),
        np.array([r.kappa for r in results], float).reshape(n, kdim),
        {"long_name": "reduced coordinates where the gap is smallest", "units": "1"},
    )
    out["transition_status"] = xr.Variable(
        t,
        np.array([r.status for r in results], np.int8),
        {"long_name": "what the transition search found", "units": "1", **_flags(STATUS)},
    )
    out["transition_span"] = xr.Variable(
        t,
        (idx_hi - idx).sum(axis=1).astype(np.int32),
        {
            "long_name": "grid spacings between the segment's ends (more than 1: undefined "
            "points between them)",
            "units": "1",
        },  # fmt: skip
    )
    sides = found.get("sides", {})
    for side, pts in (("low", lo), ("high", hi)):
        phase = sides.get(f"phase_{side}", ds.phase.values.reshape(-1)[pts])
        nu0 = sides.get(f"nu0_{side}", ds.nu0.values.reshape(-1)[pts])
        out[f"transition_phase_{side}"] = xr.Variable(
            t,
            np.asarray(phase).astype(np.int8),
            {"long_name": f"phase on the {side}er side of the transition", "units": "1",
             **_flags(PHASES)},
        )  # fmt: skip
        out[f"transition_nu0_{side}"] = xr.Variable(
            t,
            np.asarray(nu0).astype(np.int8),
            {"long_name": f"nu0 on the {side}er side of the transition", "units": "1"},
        )
    out["transition_probes"] = xr.Variable(
        t,
        np.array([r.probes for r in results], np.int32),
        {
            "long_name": "gap evaluations the search of the transition's segment used "
            "(shared by the closings of one segment)",
            "units": "1",
        },
    )
    return out


def write_map(plan: SweepPlan, ds: xr.Dataset, out: str) -> None:
    """Write a phase map's Dataset to ``out`` in the sweep's file layout (atomic)."""
    dims = plan.dims
    n = plan.size
    grid_vars = {k: v for k, v in ds.data_vars.items() if v.dims[: len(dims)] == dims}
    flat = xr.Dataset(
        {
            k: (
                (FLAT_DIM, *v.dims[len(dims) :]),
                v.values.reshape(n, *v.shape[len(dims) :]),
                v.attrs,
            )
            for k, v in grid_vars.items()
        }
    )
    coords = {str(k): c.variable for k, c in ds.coords.items()}
    tmp = Path(f"{out}.assembling")
    write_result(tmp, dims=dims, coords=coords, chunks=iter([(0, flat)]), attrs=dict(ds.attrs))
    with h5netcdf.File(tmp, "a") as f:
        f.dimensions[TRANSITION_DIM] = ds.sizes.get(TRANSITION_DIM, 0)
        for k, v in ds.data_vars.items():
            if k in grid_vars:
                continue
            var = _create(f, str(k), v.dims, v.dtype, v.attrs, v.shape)
            if v.size:
                var[...] = v.values
    append_digest(tmp)  # (HDF5's append replaced write_result's: the whole file again)
    with open(tmp, "rb") as fh:
        os.fsync(fh.fileno())
    os.replace(tmp, out)
    _fsync_dir(Path(out).parent)
