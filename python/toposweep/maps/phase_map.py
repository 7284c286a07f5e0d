"""Adaptive phase maps: the Dataset of :func:`toposweep.sweep`, evaluating only what is needed.

:mod:`toposweep.maps.adaptive_cells` decides which points to evaluate and how every other point is
vouched for (proven by the gap bound of :mod:`toposweep.maps.weyl_bound`, or filled by agreement);
:mod:`toposweep.maps.transitions` then locates the gap closing between every pair of neighbouring
evaluated points of different phases. This module runs the evaluations through the sweep's own
chunk loop (Ctrl-C, progress, chunk sizes) and journal (``out=``/``resume=``), and assembles
the result.

Resuming: the points are numbered in the order they are evaluated, and the journal keeps them
in chunks of that numbering (with each point's grid index). The choice of points depends only on
the results of earlier points, so a resumed run asks for the same points in the same order; the
ones the journal holds are read back instead of evaluated.
"""

from __future__ import annotations

import dataclasses
import math
import os
from collections.abc import Mapping
from typing import Any

import numpy as np
import xarray as xr
from numpy.typing import ArrayLike, NDArray

from .. import _core
from .. import sweep as _sweep
from ..errors import ParameterError, StoreError
from ..evaluation import _mark, _symmetry_breaks, prepare_request, run_points
from ..model import Model
from ..progress import ProgressBar
from ..results.store import (
    Journal,
    check_output,
    finished_result,
    journal_path,
    missing_ranges,
)
from ..sampling import Sampling
from ..sweep import SweepInterrupted, _InterruptFlag
from ..sweep_executor import remote_for
from ..sweep_plan import TERM_VALUES, Coefficients, SweepPlan, make_plan
from ..symmetry import TOLERANCE, symmetry_error
from ..tightbinding import TightBinding
from .adaptive_cells import (
    EVALUATED,
    PointTable,
    RefineSettings,
    auto_coarse_step,
    refine,
)
from .phase_map_dataset import add_map_variables, write_map
from .transitions import (
    SegmentResult,
    between,
    finish_statuses,
    locate_segments,
    probe_request,
    probes_of,
    segment_search,
)
from .weyl_bound import term_norm_bounds

__all__ = ["labels_of", "phase_map"]

#: the journal's per-point record of which grid point a numbered evaluation was
GRID_INDEX = "grid_index"
#: flat results that say how the work went, not what the point is: 0 where not evaluated
WORK_COUNTERS = ("lines_used", "loop_points_used", "lattice_mesh", "lattice_points")
#: default transition_tol, as a fraction of a grid spacing
TRANSITION_TOL = 1e-3
#: under prove_gap="auto" the core makes a point whose proof is unfinished undefined when its
#: smallest gap found is under this many gap floors (the core's ``sampling::NEAR_FLOOR``)
NEAR_FLOOR = 100.0
#: a transition's segment: parts the gap bound leaves uncovered are split down to this length
#: (a fraction of the segment) in search of a second closing
MAP_RESOLUTION = 1.0 / 16
#: a map's proof gets this fraction of the budget of the core's own proof under "auto"
PROOF_BUDGET_SHARE = 2


class _Subset:
    """What :func:`toposweep.sweep._run` uses of a plan, over a list of grid points."""

    def __init__(self, plan: SweepPlan, indices: NDArray[np.int64]) -> None:
        self.request, self.dims, self.fixed = plan.request, plan.dims, plan.fixed
        self.coefficients = plan.coefficients
        self._plan, self._indices = plan, indices

    def points(self, start: int, stop: int) -> list[dict[str, float]]:
        plan = self._plan
        return [plan.model_point(plan.user_point(int(i))) for i in self._indices[start:stop]]


def _with_request(plan: SweepPlan, request: Any) -> SweepPlan:
    return dataclasses.replace(plan, request=request)


def _coefficients(plan: SweepPlan) -> NDArray[np.float64]:
    """Term coefficients of every grid point (rows in flat C order, columns ``model.terms``).

    Straight from the grid without a coefficients mapping; through it (one call per point)
    with one.
    """
    model = plan.request.model
    if plan.coefficients is not None:
        return np.asarray(model.prepare(plan.points(0, plan.size))[1], float)
    mesh = np.meshgrid(*[plan.coords[d] for d in plan.dims], indexing="ij")
    by_dim = dict(zip(plan.dims, (m.reshape(-1) for m in mesh), strict=True))
    fixed = model.resolve(plan.user_point(0))
    cols = [by_dim[t] if t in by_dim else np.full(plan.size, fixed[t]) for t in model.terms]
    return np.stack(cols, axis=1) if cols else np.zeros((plan.size, 0))


def _symmetry_breaks_everywhere(plan: SweepPlan) -> tuple[NDArray[np.bool_], NDArray[np.bool_]]:
    """Where time reversal and inversion fail on the grid (the sweep's per-point check).

    A tight-binding model whose fixed part and every term respect a symmetry on their own
    (checked once, per term) respects it at every point: no per-point check is needed.
    """
    req, n = plan.request, plan.size
    model = req.model
    if isinstance(model, TightBinding):
        ops = [model.time_reversal, req.inversion]
        kinds = ["time_reversal", "inversion"]
        exact = all(
            op is None or _terms_respect(model, op, kind)
            for op, kind in zip(ops, kinds, strict=True)
        )
        if exact:
            return np.zeros(n, bool), np.zeros(n, bool)
        if plan.coefficients is None:  # the sweep's per-point check, from the coefficient rows
            coeffs = _coefficients(plan)
            res = model.coefficient_residuals(coeffs, ops[0], kinds[0])
            p_broken = np.zeros(n, bool)
            if req.inversion is not None:
                p_res = model.coefficient_residuals(coeffs, req.inversion, kinds[1])
                p_broken = ~(p_res <= TOLERANCE)
                if req.inversion_from_call and p_broken.any():
                    i = int(np.argmax(p_res))
                    where = f"at parameters {plan.user_point(i)}"
                    raise symmetry_error("inversion", float(p_res[i]), where)
            return ~(res <= TOLERANCE), p_broken
    tr_broken, p_broken, _ = _symmetry_breaks(req, plan.points(0, n))  # (reason 8 is marked)
    return tr_broken, p_broken


def _terms_respect(model: TightBinding, operator: NDArray[Any], kind: str) -> bool:
    resid, hp = model._term_residuals(operator, kind)
    scale = np.abs(hp).reshape(len(hp), -1).max(axis=1)
    return bool(
        np.all(
            np.abs(resid).reshape(len(resid), -1).max(axis=1) <= 1e-13 * np.maximum(scale, 1e-300)
        )
    )


def labels_of(raw: Mapping[str, NDArray[Any]]) -> NDArray[np.int64]:
    """One integer per point for its phase and indices (−1 where undefined).

    Examples
    --------
    >>> raw = {"phase": np.array([2, -1, 2]), "nu0": np.array([1, -1, 1]),
    ...        "nu": np.array([[0, 0, 0], [-1, -1, -1], [1, 1, 1]])}
    >>> labels_of(raw).tolist()
    [310, -1, 323]
    """
    phase = np.asarray(raw["phase"], np.int64)
    key = phase + 1
    parts = [np.asarray(raw["nu0"], np.int64)[:, None]]
    if "nu" in raw:
        parts.append(np.asarray(raw["nu"], np.int64).reshape(len(phase), -1))
    for col in np.concatenate(parts, axis=1).T:
        key = key * 3 + (col + 1)
    return np.where(phase < 0, -1, key)


class _Evaluations:
    """Numbered evaluations of grid points, journalled when writing a file."""

    def __init__(
        self,
        plan: SweepPlan,
        table: PointTable,
        journal: Journal | None,
        bar: ProgressBar,
        chunk_size: int | None,
        flag: _InterruptFlag,
        remote: Any = None,
    ) -> None:
        self.plan, self.table, self.journal = plan, table, journal
        self.bar, self.chunk_size, self.flag = bar, chunk_size, flag
        self.remote = remote  # (sweep_executor.Remote: chunks as tasks of an executor)
        self.raw: dict[str, NDArray[Any]] = {}
        self.count = 0
        self.finished = [] if journal is None else journal.finished()
        # under prove_gap="auto" the points are evaluated without the proof, and the proofs a
        # map needs are asked for afterwards, for just the gap they must show (prove())
        self.plain = None
        if plan.request.sampling.prove_gap == "auto":
            plain = dataclasses.replace(plan.request.sampling, prove_gap="never")
            self.plain = _with_request(plan, dataclasses.replace(plan.request, sampling=plain))
        self.proofs = 0  # proofs asked for

    def _store(self, indices: NDArray[np.int64], raw: Mapping[str, NDArray[Any]]) -> None:
        n = self.plan.size
        for k, v in raw.items():
            if k == GRID_INDEX:
                continue
            v = np.asarray(v)
            if k not in self.raw:
                self.raw[k] = np.zeros((n, *v.shape[1:]), v.dtype)
            self.raw[k][indices] = v
        t = self.table
        t.label[indices] = labels_of(raw)
        t.gap_direct[indices] = raw["gap_direct"]
        t.bandwidth[indices] = raw["bandwidth"]
        if "gap_proven" in raw:
            t.gap_proven[indices] = raw["gap_proven"]

    def __call__(self, indices: NDArray[np.int64]) -> None:
        """Evaluate ``indices``; under ``prove_gap="auto"`` without the proof.

        Its results are then the sweep's apart from ``gap_proven`` (the map asks for the proofs
        it needs with :meth:`prove`), except that the sweep's proof can also find a closing the
        gap search missed: where the smallest gap found is under :data:`NEAR_FLOOR` floors, or
        where the proof's κ samples could make it a metal (:meth:`_proof_may_matter`), the
        point is evaluated again with the sweep's setting, so it is exactly the sweep's there.
        Proving at every evaluated point instead cost a Kane–Mele map ~40 % of its time
        (benches/RESULTS.md), most of it at points whose proof vouched for nothing.
        """
        if self.plain is None:
            self._evaluate(indices, self.plan)
            return
        self._evaluate(indices, self.plain)
        again = indices[self._proof_may_matter(indices)]
        if again.size:
            self._evaluate(again, self.plan)

    def prove(self, indices: NDArray[np.int64], targets: NDArray[np.float64]) -> int:
        """Prove the gap ≥ ``targets`` at evaluated points; returns how many were proven.

        A proven bound raises the point's ``gap_proven`` (in the table and in the results: a
        lower bound of the direct gap, as the sweep's, though aimed at what the map needed
        rather than at half the gap); a failed target is remembered so it is not asked again.
        Deterministic, so a resumed run proves the same points alike (proofs are not
        journalled: they are redone).
        """
        req = self.plan.request
        model = req.model
        pts = [self.plan.model_point(self.plan.user_point(int(i))) for i in indices]
        core, coeffs = model.prepare(pts)
        self.proofs += len(indices)
        lower, code, _ = _core.prove_gaps(
            core,
            np.ascontiguousarray(coeffs, dtype=float),
            req.filling,
            np.ascontiguousarray(targets, dtype=float),
            np.ascontiguousarray(self.floor(indices), dtype=float),
            budget=_proof_budget(req.sampling, model.dim),
            threads=req.threads,
        )
        if self.flag.requested:
            raise KeyboardInterrupt
        ok = code == 0
        t = self.table
        better = ok & ~(t.gap_proven[indices] >= lower)
        t.gap_proven[indices[better]] = lower[better]
        if "gap_proven" in self.raw:
            self.raw["gap_proven"][indices[better]] = lower[better]
        failed = indices[~ok]
        t.proof_failed[failed] = np.minimum(t.proof_failed[failed], targets[~ok])
        return int(ok.sum())

    def _proof_may_matter(self, indices: NDArray[np.int64]) -> NDArray[np.bool_]:
        """Points evaluated without the proof whose phase the sweep's proof could change.

        The sweep proves a point's gap under "auto" only where its smallest gap found is under
        the core's threshold (``_core.auto_proof_below``); elsewhere its evaluation is the
        same without the proof. Where it proves: near the floor an unfinished proof makes a
        point undefined (reason 11); and the proof samples κ across the zone — where the
        indirect gap found is positive but well below the direct one, the band extrema lie
        apart from the direct gap's minimum, and a valence maximum or conduction minimum that
        only the proof's samples find can make it negative (a metal, phase codes 10–13).
        Measured on Kane–Mele with Rashba coupling: 4e-4 became −3e-3 where the direct gap
        was 0.09.
        """
        direct = self.table.gap_direct[indices]
        indirect = np.asarray(self.raw["gap_indirect"][indices], float)
        near_floor = direct < NEAR_FLOOR * self.floor(indices)
        risky = near_floor | ((indirect > 0) & (indirect < 0.5 * direct))
        if not risky.any():
            return risky
        pts = [self.plan.model_point(self.plan.user_point(int(i))) for i in indices[risky]]
        core, coeffs = self.plan.request.model.prepare(pts)
        below = _core.auto_proof_below(core, np.ascontiguousarray(coeffs, dtype=float))
        # (NaN: the model has no bound and the sweep proves nothing either)
        risky[risky] = direct[risky] < below
        return risky

    def floor(self, indices: NDArray[np.int64]) -> NDArray[np.float64]:
        """The gap floor the core used at evaluated points."""
        return np.asarray(self.raw["gap_floor"][indices], float)

    def _evaluate(self, indices: NDArray[np.int64], plan: SweepPlan) -> None:
        if indices.size == 0:
            return
        base = self.count
        self.count += len(indices)
        here = [(a - base, b - base) for a, b in self.finished if base <= a and b <= self.count]
        for a, b in here:  # read back what an interrupted run finished
            raw = self.journal.load(base + a, base + b)  # type: ignore[union-attr]
            if not np.array_equal(raw[GRID_INDEX], indices[a:b]):
                raise StoreError(
                    f"{self.journal.path}: the journal's points differ from this run's; "  # type: ignore[union-attr]
                    "start over with overwrite=True (command line: --overwrite)"
                )
            self._store(indices[a:b], raw)
        todo = missing_ranges(here, len(indices))
        if not todo:
            return
        self.bar.total = max(self.bar.total, self.bar.done + sum(b - a for a, b in todo))
        view = _Subset(plan, indices)

        def save(start: int, stop: int, raw: dict[str, NDArray[Any]]) -> None:
            if self.journal is not None:
                self.journal.save(
                    base + start, base + stop, {**raw, GRID_INDEX: indices[start:stop]}
                )
            self._store(indices[start:stop], raw)

        if not _sweep._run(view, todo, save, self.bar, self.chunk_size, self.flag, self.remote):  # type: ignore[arg-type]
            raise KeyboardInterrupt


def _proof_budget(sampling: Sampling, dim: int) -> int:
    """Hamiltonians a map's proof may spend at one point.

    :data:`PROOF_BUDGET_SHARE` of the budget of the core's own proof under
    ``prove_gap="auto"`` (``engine::proof_budget``, about two evaluations' worth).
    """
    planes = 6 if dim == 3 else 1
    grid = sampling.gap_points**3 if dim == 3 else 0
    auto = max(4096, 2 * (planes * sampling.lines * sampling.loop_points + grid))
    return auto // PROOF_BUDGET_SHARE


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
    tr_broken, p_broken = _symmetry_breaks_everywhere(plan)
    bounds = term_norm_bounds(req.model)
    coeffs = _coefficients(plan) if bounds is not None else None
    table = PointTable(plan.shape)
    bar = ProgressBar(1, enabled=progress)
    bar.total = 0
    with _InterruptFlag() as flag:
        evals = _Evaluations(plan, table, journal, bar, chunk_size, flag, remote)
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
        rows = coefficients if coefficients is not None else _coefficients(plan)
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
