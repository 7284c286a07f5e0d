"""The centre flow: hybrid Wannier centres of one plane against the pump coordinate.

"Centre" is this package's one name for the hybrid Wannier centre of a Wilson loop (the
eigenphase θ of the loop as x = θ/2π mod 1); the centre flow is how the centres move as the
loop is pumped across half of a time-reversal-invariant plane, and its Z2 is the plane's.
:func:`centre_flow` returns the flow the index came from: the same pump lines — the evenly
spaced initial ones and those inserted where the centres moved fast, at the loop points of the
convergence certificate when it ran — that :func:`toposweep.invariants` counted.
"""

from __future__ import annotations

import warnings
from dataclasses import replace
from typing import Any

import numpy as np
import xarray as xr

from . import _core
from .api import invariants
from .errors import ModelError, SamplingError
from .evaluation import check_filling
from .model import Model, Params
from .results.dataset import INDEX_FLAGS, REASONS, _flags
from .sampling import MAXIMA, Sampling, check_threads

__all__ = ["centre_flow", "plane_of", "wcc_flow"]

_DEFAULT = Sampling()
REASON_FLAGS = _flags(REASONS)


def plane_of(model: Model, axis: int | None, cut: float) -> tuple[int, int, int, int | None]:
    """(plane index, loop axis, pump axis, plane axis) of a plane choice; checked.

    3D: the plane κ_axis = cut (axis 1, 2, 3; cut 0 or 1/2); loops run along axis+1 and pump
    axis+2 (cyclically). 2D: one plane, loops along κ_1, pump κ_2.
    """
    if model.dim == 3:
        axis = 3 if axis is None else axis
        if axis not in (1, 2, 3):
            raise ModelError(f"axis must be 1, 2 or 3, got {axis!r}")
        if cut not in (0.0, 0.5):
            raise ModelError(f"cut must be 0.0 or 0.5, got {cut!r}")
        plane = 2 * (axis - 1) + (1 if cut == 0.5 else 0)
        return plane, axis % 3 + 1, (axis + 1) % 3 + 1, axis
    if model.dim == 2:
        if axis is not None or cut != 0.0:  # silently ignoring them would plot another plane
            raise ModelError(
                "axis and cut select a plane of a 3D model; a 2D model has one plane (loops "
                f"along κ_1, pump κ_2): leave them out (got axis={axis!r}, cut={cut!r})"
            )
        return 0, 1, 2, None
    raise ModelError("a centre flow needs a 2D or 3D model")


def centre_flow(
    model: Model,
    filling: int,
    params: Params | None = None,
    *,
    axis: int | None = None,
    cut: float = 0.0,
    pump_points: int | None = None,
    threads: int | None = None,
    **sampling: Any,
) -> xr.Dataset:
    """Hybrid Wannier centres of one plane against the pump coordinate, with the plane's Z2.

    By default the flow is the one the index came from (see the module notes): its lines are
    those :func:`toposweep.invariants` counted at the same sampling, ``inserted`` marks the
    lines added where the centres moved fast, and ``z2`` is the plane's Z2 as
    :func:`~toposweep.invariants` reports it (−1, with ``undefined_reason``, where the point
    is undefined — for example when its gap closes somewhere else in the zone).

    Parameters
    ----------
    model : TightBinding or CallableModel
        A 2D or 3D model.
    filling : int
        Number of occupied bands.
    params : dict, optional
        Parameter values (defaults from ``model.defaults``).
    axis : {1, 2, 3}, optional
        3D only: the plane is κ_axis = ``cut``. The Wilson loop runs along axis+1 and the pump
        coordinate is axis+2 (cyclically). Default 3. 2D: loops along κ_1, pumps κ_2.
    cut : {0.0, 0.5}
        Position of the plane.
    pump_points : int, optional
        Instead of the deciding lines, this many evenly spaced lines from 0 to 1/2 (a smooth
        picture; centres then in the tight-binding convention when the model has orbital
        positions). ``z2`` is still the point's.
    threads : int, optional
        Worker threads, as for :func:`toposweep.invariants`.
    **sampling
        Sampling options as for :func:`toposweep.invariants` (``loop_points``, ``lines``,
        ``max_lines``, ``step_limit``, ``gap_floor``, ``certify``, ...): give those of the
        result whose flow you want to see.

    Returns
    -------
    xarray.Dataset
        ``centre`` over (``pump``, ``band``) in [0, 1) (fractions of the loop's lattice
        vector), ``inserted`` over ``pump``, scalars ``z2`` and ``undefined_reason``; attrs
        ``loop_axis``, ``pump_axis``, ``loop_points`` (of these lines), ``convention`` and,
        in 3D, ``plane_axis`` and ``cut``.

    Examples
    --------
    >>> import toposweep as ts
    >>> flow = ts.centre_flow(ts.models.bhz(), filling=2, params={"mass": -1.5})
    >>> int(flow.z2), flow.centre.dims, bool(flow.inserted.any())
    (1, ('pump', 'band'), True)
    """
    if not isinstance(model, Model):
        raise ModelError(f"expected a toposweep model, got {type(model).__name__}")
    f = check_filling(model, filling)
    plane, loop_axis, pump_axis, plane_axis = plane_of(model, axis, cut)
    even = None if pump_points is None else _even_pump(pump_points)
    samp = Sampling.from_options(**sampling)
    if samp.method == "lattice":  # the flow is the Wilson loop's: its indices decide here
        samp = replace(samp, method="wilson")
    threads = check_threads(threads)
    point = model.resolve(params)
    if model.time_reversal is None:  # a flow without a Z2 (no time reversal to protect one)
        z2, reason = -1, None
    else:  # the point's own verdict (gap, certificate, estimates): the Z2 this flow carries
        ds = invariants(model, f, point, threads=threads, **samp.as_dict())
        if plane_axis is not None:
            z2 = int(ds.z2_plane.values[plane_axis - 1, 1 if cut == 0.5 else 0])
        else:
            z2 = int(ds.nu0)
        reason = ds.undefined_reason.values
    core, coeffs = model.prepare([point])
    coeff = np.ascontiguousarray(coeffs[0])
    if even is None:
        pump, centres, lines_z2, used = _core.decided_flow(
            core,
            coeff,
            f,
            plane,
            loop_points=samp.loop_points,
            lines=samp.lines,
            max_lines=samp.max_lines,
            step_limit=samp.step_limit,
            certify=samp.certify,
            threads=threads,
        )
        initial = np.linspace(0.0, 0.5, samp.lines)  # (the core's, to the last bit or so)
        inserted = np.abs(pump[:, None] - initial[None, :]).min(axis=1) > 1e-12
        convention = "periodic"
    else:
        pump = even
        pos = None if model.positions is None else np.ascontiguousarray(model.positions.T)
        centres = _core.flow(
            core, coeff, f, plane, samp.loop_points, pump, positions=pos, threads=threads
        )
        inserted = np.zeros(len(pump), dtype=bool)
        lines_z2, used = None, samp.loop_points
        convention = "tight-binding (orbital positions)" if pos is not None else "periodic"
    attrs: dict[str, Any] = {
        "model_name": model.name,
        "loop_axis": loop_axis,
        "pump_axis": pump_axis,
        "loop_points": int(used),
        "convention": convention,
    }
    if lines_z2 is not None:
        attrs["lines_z2"] = int(lines_z2)
    if plane_axis is not None:
        attrs.update(plane_axis=plane_axis, cut=cut)
    data: dict[str, Any] = {
        "centre": (
            ("pump", "band"),
            centres,
            {
                "long_name": f"hybrid Wannier centre along reduced axis {loop_axis}",
                "units": "1",
            },
        ),
        "inserted": (
            "pump",
            inserted,
            {"long_name": "line inserted where the centres moved fast", "units": "1"},
        ),
        "z2": (
            (),
            np.int8(z2),
            {"long_name": "Z2 index of the plane", "units": "1", **INDEX_FLAGS},
        ),  # fmt: skip
    }
    if reason is not None:
        data["undefined_reason"] = (
            (),
            reason,
            {"long_name": "why the point's indices are undefined", "units": "1", **REASON_FLAGS},
        )
    return xr.Dataset(
        data,
        coords={
            "pump": ("pump", pump, {"long_name": f"kappa_{pump_axis}", "units": "1"}),
            "band": ("band", np.arange(f), {"long_name": "occupied band index", "units": "1"}),
            **{k: ((), v, model.describe(k)) for k, v in point.items()},
        },
        attrs=attrs,
    )


def _even_pump(pump_points: Any) -> np.ndarray:
    if (
        isinstance(pump_points, bool)
        or not isinstance(pump_points, int | np.integer)
        or not 2 <= pump_points <= MAXIMA["lines"]
    ):
        raise SamplingError(
            f"pump_points must be an integer in 2 … {MAXIMA['lines']}, got {pump_points!r}"
        )
    return np.linspace(0.0, 0.5, int(pump_points))


def wcc_flow(
    model: Model,
    filling: int,
    params: Params | None = None,
    *,
    axis: int | None = None,
    cut: float = 0.0,
    loop_points: int = _DEFAULT.loop_points,
    pump_points: int = 101,
    threads: int | None = None,
) -> xr.Dataset:
    """Deprecated name of :func:`centre_flow` with ``pump_points=101`` evenly spaced lines.

    Examples
    --------
    >>> import warnings, toposweep as ts
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     flow = ts.wcc_flow(ts.models.bhz(), 2, {"mass": -1.0}, pump_points=11)
    >>> flow.centre.shape, caught[0].category.__name__
    ((11, 2), 'DeprecationWarning')
    """
    warnings.warn(
        "wcc_flow is deprecated: use toposweep.centre_flow (the flow the index came from; "
        "pump_points=N for evenly spaced lines)",
        DeprecationWarning,
        stacklevel=2,
    )
    return centre_flow(
        model,
        filling,
        params,
        axis=axis,
        cut=cut,
        loop_points=loop_points,
        pump_points=pump_points,
        threads=threads,
    )
