"""Evaluating the points a phase map chooses, and proving the gaps it needs there.

:class:`MapEvaluations` runs the chosen points through the sweep's own chunk loop (Ctrl-C,
progress, chunk sizes) and journal (``out=``/``resume=``), keeps their results over the whole
grid and the per-point state :func:`toposweep.maps.adaptive_cells.refine` decides from, and
asks the core for the gap proofs a settled cell needs (:meth:`MapEvaluations.prove`).

Resuming: the points are numbered in the order they are evaluated, and the journal keeps them
in chunks of that numbering (with each point's grid index). The choice of points depends only on
the results of earlier points, so a resumed run asks for the same points in the same order; the
ones the journal holds are read back instead of evaluated. Proofs are not journalled: they are
deterministic, and redone.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .. import _core
from .. import sweep as _sweep
from ..errors import StoreError
from ..progress import ProgressBar
from ..results.store import Journal, missing_ranges
from ..sampling import Sampling
from ..sweep import _InterruptFlag
from ..sweep_plan import SweepPlan
from .adaptive_cells import PointTable

__all__ = ["GRID_INDEX", "MapEvaluations", "labels_of"]

#: the journal's per-point record of which grid point a numbered evaluation was
GRID_INDEX = "grid_index"
#: under prove_gap="auto" the core makes a point whose proof is unfinished undefined when its
#: smallest gap found is under this many gap floors (the core's ``sampling::NEAR_FLOOR``)
NEAR_FLOOR = 100.0
#: a map's proof gets this fraction of the budget of the core's own proof under "auto"
PROOF_BUDGET_SHARE = 2


def model_points(plan: SweepPlan, indices: NDArray[np.int64]) -> list[dict[str, float]]:
    """The model's parameter points at flat grid indices (the coefficients mapping applied)."""
    return [plan.model_point(plan.user_point(int(i))) for i in indices]


class _Subset:
    """What :func:`toposweep.sweep._run` uses of a plan, over a list of grid points."""

    def __init__(self, plan: SweepPlan, indices: NDArray[np.int64]) -> None:
        self.request, self.dims, self.fixed = plan.request, plan.dims, plan.fixed
        self.coefficients = plan.coefficients
        self._plan, self._indices = plan, indices

    def points(self, start: int, stop: int) -> list[dict[str, float]]:
        return model_points(self._plan, self._indices[start:stop])


def _with_request(plan: SweepPlan, request: Any) -> SweepPlan:
    return dataclasses.replace(plan, request=request)


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


class MapEvaluations:
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
        core, coeffs = model.prepare(model_points(self.plan, indices))
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
        core, coeffs = self.plan.request.model.prepare(model_points(self.plan, indices[risky]))
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
