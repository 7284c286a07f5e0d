"""The two one-point entry points: :func:`invariants` and :func:`wcc_flow`."""

from __future__ import annotations

from typing import Any

import numpy as np
import xarray as xr
from numpy.typing import ArrayLike, NDArray

from . import _core
from .dataset import ResultLayout, plan_dataset
from .errors import ModelError, SamplingError
from .evaluation import check_filling, prepare_request, run_points
from .model import Model, Params
from .sampling import MAXIMA, Sampling, check_threads, sampling_for

__all__ = ["invariants", "wcc_flow"]

_DEFAULT = Sampling()


def invariants(
    model: Model,
    filling: int,
    params: Params | None = None,
    *,
    inversion: ArrayLike | None = None,
    loop_points: int = _DEFAULT.loop_points,
    lines: int = _DEFAULT.lines,
    max_lines: int = _DEFAULT.max_lines,
    step_limit: float = _DEFAULT.step_limit,
    gap_floor: float | None = _DEFAULT.gap_floor,
    gap_points: int = _DEFAULT.gap_points,
    gap_starts: int = _DEFAULT.gap_starts,
    method: str = _DEFAULT.method,
    certify: bool = _DEFAULT.certify,
    prove_gap: str | bool = _DEFAULT.prove_gap,
    threads: int | None = None,
) -> xr.Dataset:
    """Z2 indices of a time-reversal-invariant insulator at one parameter point.

    The indices come from the hybrid Wannier centre flow of Wilson loops on the
    time-reversal-invariant planes (Soluyanov & Vanderbilt, Phys. Rev. B 83, 035108 (2011)),
    with pump lines inserted where the flow moves fast. Every point checks itself: the direct
    gap is minimised over κ (not just over the sampled κ), tight flows are recomputed with
    doubled ``loop_points`` (``converged``, ``loop_points_used``), ``method="both"`` adds the
    lattice Z2 of Fukui & Hatsugai (J. Phys. Soc. Jpn. 76, 053702 (2007)) and
    ``methods_agree``, and when an inversion matrix is known (from the model or
    ``inversion=``) the Fu–Kane parity indices are computed too and compared.

    Parameters
    ----------
    model : TightBinding or CallableModel
        A 2D or 3D model with ``time_reversal`` set.
    filling : int
        Number of occupied bands (even).
    params : dict, optional
        Parameter values; the rest come from ``model.defaults``.
    inversion : array (norb, norb), optional
        Inversion matrix for this call (overrides the model's).
    loop_points, lines, max_lines, step_limit, gap_floor, gap_points, gap_starts, method, certify,
    prove_gap
        Sampling options, see :class:`toposweep.Sampling`.
    threads : int, optional
        Worker threads. ``threads=1`` runs the call on the calling thread (no other thread).
        Larger values: called from the main thread, that thread and ``threads - 1`` helpers;
        from other threads, a pool of that many workers shared by such calls. A thread works
        in the pool of the first count it asks for; other counts from it use the shared pools.
        Default: one worker per core (or ``RAYON_NUM_THREADS``).

    Returns
    -------
    xarray.Dataset
        Scalar variables ``nu0``, ``phase``, ``gap_direct``, ... and, in 3D, ``nu`` and
        ``z2_plane`` over ``axis``/``cut``; undefined indices are −1 with ``undefined_reason``.

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.invariants(ts.models.wilson_dirac(), filling=2, params={"mass": -2.0})
    >>> int(ds.nu0), ds.nu.values.tolist(), int(ds.nu0_parity)
    (1, [0, 0, 0], 1)

    A second, independent method on the Kane–Mele model (no inversion with a staggered
    potential, so parity cannot help):

    >>> km = ts.invariants(ts.models.kane_mele(), 2, {"staggered": 0.3}, method="both")
    >>> int(km.nu0), int(km.nu0_lattice), int(km.methods_agree)
    (1, 1, 1)
    """
    sampling = sampling_for(
        loop_points=loop_points,
        lines=lines,
        max_lines=max_lines,
        step_limit=step_limit,
        gap_floor=gap_floor,
        gap_points=gap_points,
        gap_starts=gap_starts,
        method=method,
        certify=certify,
        prove_gap=prove_gap,
    )
    if not isinstance(model, Model):
        raise ModelError(f"expected a toposweep model, got {type(model).__name__}")
    point = model.resolve(params)
    req = prepare_request(model, filling, inversion=inversion, sampling=sampling, threads=threads)
    layout: list[ResultLayout] = []

    def plan() -> dict[str, NDArray]:  # (while the core computes: needs none of its results)
        layout.append(
            plan_dataset(
                model,
                dims=(),
                coords={},
                fixed=point,
                filling=req.filling,
                sampling=sampling,
                parity_known=req.inversion is not None,
            )
        )
        return layout[0].core_targets()  # (the core writes its results straight into them)

    raw = run_points(req, [point], alongside=plan)
    return layout[0].fill(raw)


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
    """Hybrid Wannier centres of one time-reversal-invariant plane against the pump coordinate.

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
    loop_points : int
        κ points per Wilson loop.
    pump_points : int
        Evenly spaced pump lines from 0 to 1/2.
    threads : int, optional
        Worker threads, as for :func:`invariants`.

    Returns
    -------
    xarray.Dataset
        Variable ``centre`` over (``pump``, ``band``); centres are in the tight-binding
        convention (orbital positions included) when the model has positions.

    Examples
    --------
    >>> import toposweep as ts
    >>> flow = ts.wcc_flow(ts.models.bhz(), filling=2, params={"mass": -1.0}, pump_points=11)
    >>> flow.centre.shape
    (11, 2)
    """
    if not isinstance(model, Model):
        raise ModelError(f"expected a toposweep model, got {type(model).__name__}")
    f = check_filling(model, filling)
    if model.dim == 3:
        axis = 3 if axis is None else axis
        if axis not in (1, 2, 3):
            raise ModelError(f"axis must be 1, 2 or 3, got {axis!r}")
        if cut not in (0.0, 0.5):
            raise ModelError(f"cut must be 0.0 or 0.5, got {cut!r}")
        plane = 2 * (axis - 1) + (1 if cut == 0.5 else 0)
        loop_axis, pump_axis = axis % 3 + 1, (axis + 1) % 3 + 1
    elif model.dim == 2:
        if axis is not None or cut != 0.0:  # silently ignoring them would plot another plane
            raise ModelError(
                "axis and cut select a plane of a 3D model; a 2D model has one plane (loops "
                f"along κ_1, pump κ_2): leave them out (got axis={axis!r}, cut={cut!r})"
            )
        plane, loop_axis, pump_axis = 0, 1, 2
    else:
        raise ModelError("wcc_flow needs a 2D or 3D model")
    if (
        isinstance(pump_points, bool)
        or not isinstance(pump_points, int | np.integer)
        or not 2 <= pump_points <= MAXIMA["lines"]
    ):
        raise SamplingError(
            f"pump_points must be an integer in 2 … {MAXIMA['lines']}, got {pump_points!r}"
        )
    pump_points = int(pump_points)
    Sampling(loop_points=loop_points)  # validates loop_points
    threads = check_threads(threads)
    point = model.resolve(params)
    core, coeffs = model.prepare([point])
    pump = np.linspace(0.0, 0.5, pump_points)
    pos = None if model.positions is None else np.ascontiguousarray(model.positions.T)
    centres = _core.flow(
        core,
        np.ascontiguousarray(coeffs[0]),
        f,
        plane,
        loop_points,
        pump,
        positions=pos,
        threads=threads,
    )
    attrs: dict[str, Any] = {
        "loop_axis": loop_axis,
        "pump_axis": pump_axis,
        "convention": "tight-binding (orbital positions)" if pos is not None else "periodic",
    }
    if model.dim == 3:
        attrs.update(plane_axis=axis, cut=cut)
    return xr.Dataset(
        {
            "centre": (
                ("pump", "band"),
                centres,
                {
                    "long_name": f"hybrid Wannier centre along reduced axis {loop_axis}",
                    "units": "1",
                },
            )
        },
        coords={
            "pump": ("pump", pump, {"long_name": f"kappa_{pump_axis}", "units": "1"}),
            "band": ("band", np.arange(f), {"long_name": "occupied band index", "units": "1"}),
            **{k: ((), v, model.describe(k)) for k, v in point.items()},
        },
        attrs=attrs,
    )
