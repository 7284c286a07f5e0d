"""Adaptive phase maps: the Dataset of :func:`toposweep.sweep`, evaluating only what is needed.

:mod:`toposweep.maps.adaptive_cells` decides which points to evaluate and how every other point is
vouched for (proven by the gap bound of :mod:`toposweep.maps.weyl_bound`, or filled by agreement);
:mod:`toposweep.maps.transitions` then locates the gap closing between every pair of neighbouring
evaluated points of different phases. This module runs the evaluations through the sweep's own
chunk loop (:mod:`toposweep.maps.map_evaluations`, which also journals them and asks for the
gap proofs), and assembles the result.
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping
from typing import Any

import numpy as np
import xarray as xr
from numpy.typing import ArrayLike, NDArray

from .. import sweep as _sweep
from ..errors import ParameterError
from ..evaluation import _mark, prepare_request, run_points
from ..model import Model
from ..progress import ProgressBar
from ..results.store import (
    Journal,
    check_output,
    finished_result,
    journal_path,
)
from ..sampling import Sampling
from ..sweep import SweepInterrupted, _InterruptFlag
from ..sweep_executor import remote_for
from ..sweep_plan import TERM_VALUES, Coefficients, SweepPlan, make_plan
from .adaptive_cells import (
    EVALUATED,
    PointTable,
    RefineSettings,
    auto_coarse_step,
    refine,
)
from .grid_terms import grid_coefficients, symmetry_breaks_everywhere
from .map_evaluations import MapEvaluations, labels_of
from .phase_map_dataset import add_map_variables, write_map
from .segment_probes import locate_segments, probe_request, probes_of
from .transitions import (
    SegmentResult,
    between,
    finish_statuses,
    segment_search,
)
from .weyl_bound import term_norm_bounds

__all__ = ["labels_of", "phase_map"]

#: flat results that say how the work went, not what the point is: 0 where not evaluated
WORK_COUNTERS = ("lines_used", "loop_points_used", "lattice_mesh", "lattice_points")
#: default transition_tol, as a fraction of a grid spacing
TRANSITION_TOL = 1e-3
#: a transition's segment: parts the gap bound leaves uncovered are split down to this length
#: (a fraction of the segment) in search of a second closing
MAP_RESOLUTION = 1.0 / 16


def _check_options(
    coarse_step: Any, proven_only: Any, agreement_gap: Any, transition_tol: Any
) -> None:
    if coarse_step is not None and (
        isinstance(coarse_step, bool) or not isinstance(coarse_step, int) or coarse_step < 1
    ):
        raise ParameterError(f"coarse_step must be a positive integer or None, got {coarse_step!r}")
    if not isinstance(proven_only, bool):
        raise ParameterError(f"proven_only must be True or False, got {proven_only!r}")
    for name, v in (("agreement_gap", agreement_gap), ("transition_tol", transition_tol)):
        if v is not None and (
            isinstance(v, bool) or not isinstance(v, int | float) or not math.isfinite(v) or v <= 0
        ):
            raise ParameterError(f"{name} must be a positive number or None, got {v!r}")
    if transition_tol is not None and transition_tol >= 0.5:
        raise ParameterError(
            f"transition_tol is a fraction of a grid spacing and must be below 0.5, got "
            f"{transition_tol!r}"
        )


def phase_map(
    model: Model,
    grid: Mapping[str, ArrayLike],
    filling: int,
    *,
    params: Mapping[str, float] | None = None,
    coefficients: Coefficients | None = None,
    inversion: ArrayLike | None = None,
    out: str | os.PathLike[str] | None = None,
    resume: bool = False,
    overwrite: bool = False,
    progress: bool = True,
    threads: int | None = None,
    chunk_size: int | None = None,
    executor: Any = None,
    coarse_step: int | None = None,
    proven_only: bool = False,
    agreement_gap: float | None = None,
    transitions: bool = True,
    transition_tol: float | None = None,
    **sampling: Any,
) -> xr.Dataset:
    """The phase diagram over a grid, evaluating only where phases may change.

    Takes the arguments of :func:`toposweep.sweep` and returns its Dataset over the whole grid
    (every variable, dim and attribute), plus ``obtained`` (how each point was obtained),
    ``gap_bound`` (a proven lower bound of the direct gap at points proven without being
    evaluated) and the located transitions along a dim ``transition``. At points that were not
    evaluated the indices are those of an evaluated point they were proven (or filled) from;
    measured quantities (gaps, bandwidth, diagnostics) are NaN there, counters 0. See
    docs/phase-maps.md for the method.

    Parameters
    ----------
    model : TightBinding or CallableModel
        As for :func:`toposweep.sweep`; the proof needs a ``TightBinding``.
    grid : dict
        ``{name: 1-D values}`` of 1 to 4 parameters, as for :func:`toposweep.sweep`.
    filling : int
        Number of occupied bands.
    params, coefficients, inversion : optional
        As for :func:`toposweep.sweep`.
    out : path, optional
        NetCDF4/HDF5 file to write; evaluated points are journalled in ``<out>.partial/``.
    resume : bool
        Continue an interrupted run writing ``out``, or return ``out`` if it is finished —
        either only when made with the same settings (model, grid, filling, fixed parameters,
        coefficients, sampling and the options below); otherwise a
        :class:`~toposweep.StoreError` names the first differences.
    overwrite : bool
        Replace an existing ``out`` (or an interrupted run's journal). Without ``resume`` or
        ``overwrite`` an existing one is refused, as for :func:`toposweep.sweep`.
    progress : bool
        Progress bar of the evaluated points on stderr (only on a terminal).
    threads : int, optional
        Worker threads of the core (default: one per core).
    chunk_size : int, optional
        Points per core call (default: adapted so a chunk takes about a second).
    executor : dask.distributed.Client, concurrent.futures.Executor or str, optional
        Evaluate the chosen points as tasks elsewhere, as :func:`toposweep.sweep` does
        (``"local:N"``, ``"processes:N"``, a scheduler address); transitions are located in
        this process. See docs/cluster.md.
    coarse_step : int, optional
        Spacing, in grid points, of the first evaluated sub-grid (ends always included).
        Default: the power of two giving about 8 cells along the longest axis and at least 2
        along the shortest.
    proven_only : bool
        Never fill by agreement: every point is evaluated or proven by the gap bound.
    agreement_gap : float, optional
        Fill by agreement only where every evaluated point of the cell has a larger direct
        gap (energy units). Default: for tight-binding models, the gap-bound test with the
        measured gap in place of the proven one; for other models 2 % of the largest
        bandwidth in the cell.
    transitions : bool
        Locate the gap closings between neighbouring evaluated points of different phases.
    transition_tol : float, optional
        Tolerance of a transition's position, as a fraction of the grid spacing (default 1e-3).
    **sampling
        Sampling options, as for :func:`toposweep.sweep`. With ``prove_gap="always"`` every
        evaluated point of a tight-binding model carries a proven gap, so more of the cells
        around it are proven rather than filled by agreement; the proof costs 1.5–2× a call
        for small 2D models and far more for wide-band 3D ones (docs/near-closings.md), so the
        default stays the sweep's ``"auto"``.

    Returns
    -------
    xarray.Dataset

    Examples
    --------
    >>> import numpy as np, toposweep as ts
    >>> ds = ts.phase_map(ts.models.bhz(), {"mass": np.linspace(-3, 3, 40)}, 2, progress=False)
    >>> int(ds.attrs["points_evaluated"]) < 40, ds.sizes["transition"]
    (True, 2)
    >>> ds.transition_mass.values.round(6).tolist()  # Z2 changes at m/t = -2 and 2
    [-2.0, 2.0]
    """
    samp = Sampling.from_options(**sampling)
    req = prepare_request(model, filling, inversion=inversion, sampling=samp, threads=threads)
    if chunk_size is not None and (
        isinstance(chunk_size, bool) or not isinstance(chunk_size, int) or chunk_size < 1
    ):
        raise ParameterError(f"chunk_size must be a positive integer or None, got {chunk_size!r}")
    _check_options(coarse_step, proven_only, agreement_gap, transition_tol)
    plan = make_plan(req, grid, params=params, coefficients=coefficients)
    if not 1 <= len(plan.dims) <= 4:
        raise ParameterError(
            f"phase_map takes 1 to 4 grid parameters, got {len(plan.dims)}; use ts.sweep for more"
        )
    step = auto_coarse_step(plan.shape) if coarse_step is None else coarse_step
    tol = TRANSITION_TOL if transition_tol is None else float(transition_tol)
    settings = RefineSettings(
        step, proven_only, None if agreement_gap is None else float(agreement_gap)
    )
    plan.identity["phase_map"] = {
        "coarse_step": step,
        "proven_only": proven_only,
        "agreement_gap": settings.agreement_gap,
        "transitions": bool(transitions),
        "transition_tol": tol,
    }
    target = None if out is None else os.fspath(out)
    if target is not None:
        check_output(target, resume=resume, overwrite=overwrite)
        if resume and os.path.isfile(target) and not journal_path(target).is_dir():
            return finished_result(target, plan.identity)
    journal = None if target is None else Journal.start(target, plan.identity, resume)
    try:
        with remote_for(executor, target) as remote:
            ds = _compute(
                plan, settings, journal, progress, chunk_size, transitions, tol, target, remote
            )
        if journal is not None and target is not None:
            write_map(plan, ds, target)
            journal.remove()
    finally:
        if journal is not None:
            journal.close()
    return ds if target is None else xr.open_dataset(target, engine="h5netcdf")


def _compute(
    plan: SweepPlan,
    settings: RefineSettings,
    journal: Journal | None,
    progress: bool,
    chunk_size: int | None,
    transitions: bool,
    tol: float,
    out: str | None,
    remote: Any = None,
) -> xr.Dataset:
    req = plan.request
    tr_broken, p_broken = symmetry_breaks_everywhere(plan)
    bounds = term_norm_bounds(req.model)
    coeffs = grid_coefficients(plan) if bounds is not None else None
    table = PointTable(plan.shape)
    bar = ProgressBar(1, enabled=progress)
    bar.total = 0
    with _InterruptFlag() as flag:
        evals = MapEvaluations(plan, table, journal, bar, chunk_size, flag, remote)
        try:
            how, source, bound = refine(
                table,
                evals,
                settings,
                coeffs=coeffs,
                bounds=bounds,
                forced=np.flatnonzero(tr_broken).astype(np.int64),
                prove=evals.prove if req.sampling.prove_gap != "never" else None,
            )
            full = _complete(
                evals.raw, how, source, p_broken if req.inversion is not None else None
            )
            found = (
                _transitions(plan, full, how, tol, flag, coeffs)
                if transitions
                else _no_transitions()
            )
        except KeyboardInterrupt:
            bar.close()
            done = evals.count
            where = (
                f"the evaluated points are kept in {journal.path} — run again with resume=True "
                "to continue"
                if journal is not None
                else "nothing is kept without out="
            )
            raise SweepInterrupted(
                f"phase map interrupted after {done} evaluated points; {where}",
                done=done,
                total=plan.size,
                out=out,
                partial=None,
            ) from None
    bar.close()
    if plan.coefficients is not None:  # the model's term values are known everywhere
        terms = req.model.parameters
        points = plan.points(0, plan.size)
        full[TERM_VALUES] = np.array([[p[t] for t in terms] for p in points], float)
    ds = _sweep.assemble(plan, full, plan.dims, plan.coords)
    return add_map_variables(ds, plan, how, bound, found)


def _complete(
    raw: dict[str, NDArray[Any]],
    how: NDArray[np.int8],
    source: NDArray[np.int64],
    p_broken: NDArray[np.bool_] | None,
) -> dict[str, NDArray[Any]]:
    """Results at every grid point: evaluated ones as they are, the others from their source.

    Indices and flags are copied; measured floats become NaN, work counters 0. Where the
    declared inversion fails at a point that was not evaluated, its parity results are
    undefined exactly as the sweep's per-point check makes them.
    """
    full = {}
    other = how != EVALUATED
    for k, v in raw.items():
        a = v.copy()
        if np.issubdtype(a.dtype, np.floating):
            a[other] = np.nan
        elif k in WORK_COUNTERS:
            a[other] = 0
        else:
            a[other] = v[source[other]]
        full[k] = a
    if p_broken is not None:
        mask = other & p_broken
        if mask.any():
            _mark(full, mask, 7, parity=True)
    return full


def _no_transitions() -> dict[str, NDArray[Any]]:
    empty = np.zeros(0, np.int64)
    return {"lower": empty, "upper": empty, "axis": empty, "results": []}


def _transitions(
    plan: SweepPlan,
    full: dict[str, NDArray[Any]],
    how: NDArray[np.int8],
    tol: float,
    flag: _InterruptFlag,
    coefficients: NDArray[np.float64] | None = None,
) -> dict[str, Any]:
    """Locate the closing between every pair of neighbouring evaluated points of two phases."""
    shape = plan.shape
    lo, hi, ax = segments(labels_of(full).reshape(shape), (how == EVALUATED).reshape(shape))
    if lo.size == 0:
        return _no_transitions()
    bounds = term_norm_bounds(plan.request.model)
    rows = None
    if bounds is not None:
        rows = coefficients if coefficients is not None else grid_coefficients(plan)
    keys = ("gap_direct", "gap_kappa", "gap_floor", "gap_indirect")
    ends = probes_of({k: full[k] for k in keys if k in full}, rows)
    span = np.abs(np.array(np.unravel_index(hi, shape)) - np.array(np.unravel_index(lo, shape)))
    span = span.sum(axis=0)
    searches = [
        segment_search(
            (ends[i], ends[j]),
            tol=tol / n,
            same_phase=False,
            interior=1,
            bounds=bounds,
            resolution=MAP_RESOLUTION,
        )
        for i, j, n in zip(lo, hi, span, strict=True)
    ]
    dims = plan.dims

    def point_at(j: int, s: float) -> dict[str, float]:
        user = dict(plan.fixed)
        idx_lo = np.unravel_index(lo[j], shape)
        user.update({d: float(plan.coords[d][i]) for d, i in zip(dims, idx_lo, strict=True)})
        d = dims[ax[j]]
        x0 = plan.coords[d][idx_lo[ax[j]]]
        x1 = plan.coords[d][np.unravel_index(hi[j], shape)[ax[j]]]
        user[d] = float(x0 + s * (x1 - x0))
        return plan.model_point(user)

    per_segment = locate_segments(
        probe_request(plan.request),
        searches,
        point_at,
        stop=lambda: flag.requested,
        with_coefficients=bounds is not None,
        full=plan.request,
    )
    return _flatten(plan, full, lo, hi, ax, per_segment, point_at)


def _flatten(
    plan: SweepPlan,
    full: dict[str, NDArray[Any]],
    lo: NDArray[np.int64],
    hi: NDArray[np.int64],
    ax: NDArray[np.int64],
    per_segment: list[list[SegmentResult]],
    point_at: Any,
) -> dict[str, Any]:
    """One entry per closing, with the phases on both of its sides.

    Where a segment holds several closings, the phases between them come from full
    evaluations halfway between consecutive closings (one core call for all of them).
    """
    keys = ("phase", "nu0", *(("nu",) if "nu" in full else ()))
    mids = [(j, x) for j, res in enumerate(per_segment) for x in between(res)]
    inner = run_points(plan.request, [point_at(j, x) for j, x in mids]) if mids else None
    taken = 0
    rows: dict[str, list[Any]] = {k: [] for k in ("lower", "upper", "axis", "results")}
    sides: dict[str, list[Any]] = {f"{k}_{w}": [] for k in keys for w in ("low", "high")}
    for j, res in enumerate(per_segment):
        n = len(res) - 1
        side = {
            k: [full[k][lo[j]], *([] if inner is None else inner[k][taken : taken + n]),
                full[k][hi[j]]]
            for k in keys
        }  # fmt: skip
        taken += n
        finish_statuses(res, labels_of({k: np.asarray(v) for k, v in side.items()}).tolist())
        for k, r in enumerate(res):
            rows["lower"].append(lo[j])
            rows["upper"].append(hi[j])
            rows["axis"].append(ax[j])
            rows["results"].append(r)
            for key in keys:
                sides[f"{key}_low"].append(side[key][k])
                sides[f"{key}_high"].append(side[key][k + 1])
    out: dict[str, Any] = {k: np.array(rows[k], np.int64) for k in ("lower", "upper", "axis")}
    out["results"] = rows["results"]
    out["sides"] = {k: np.asarray(v) for k, v in sides.items()}
    return out


def segments(
    labels: NDArray[np.int64], evaluated: NDArray[np.bool_]
) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
    """Segments to search for a transition, as pairs of grid points along a grid axis.

    Both ends are evaluated and have different defined phases; they are neighbours or
    separated only by evaluated undefined points (a closing on a grid point).

    Returns flat indices of the lower and upper ends and the axis, ordered by lower end.

    Examples
    --------
    >>> lab = np.array([[5, 5, -1, 7, 7]])
    >>> [a.tolist() for a in segments(lab, np.ones_like(lab, bool))]
    [[1], [3], [1]]
    """
    shape = labels.shape
    flat = np.arange(labels.size).reshape(shape)
    lo, hi, axes = [], [], []
    for axis in range(len(shape)):
        lab = np.moveaxis(labels, axis, -1).reshape(-1, shape[axis])
        ev = np.moveaxis(evaluated, axis, -1).reshape(-1, shape[axis])
        idx = np.moveaxis(flat, axis, -1).reshape(-1, shape[axis])
        for row in range(lab.shape[0]):
            known = np.flatnonzero(ev[row] & (lab[row] >= 0))
            for i, j in zip(known[:-1], known[1:], strict=True):
                if lab[row, i] == lab[row, j] or not ev[row, i + 1 : j].all():
                    continue
                lo.append(idx[row, i])
                hi.append(idx[row, j])
                axes.append(axis)
    a, b, c = (np.array(x, np.int64) for x in (lo, hi, axes))
    order = np.lexsort((c, a))
    return a[order], b[order], c[order]
