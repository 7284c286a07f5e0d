"""A sweep's chunks as tasks of a Dask cluster or an executor (``sweep(..., executor=...)``).

The plan (model, sampling, grid, coefficients) is the job that reaches each worker once; a
task is a flat range of points, and the worker sends back the core's flat arrays of it. The
caller saves each range as it arrives — into the journal exactly as an in-process run does —
so the file does not depend on where, in which order or in how many pieces the chunks ran.

Chunk sizes adapt as in-process runs do, to the workers' own timings: about
:data:`TASK_SECONDS` of work per task, and never so large that the end of the run leaves
slots idle (each range is at most a share of the rest of the grid).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .errors import ExecutorError
from .evaluation import run_points
from .executors import ChunkRunner
from .progress import ProgressBar
from .store import journal_path
from .sweep import TERM_VALUES, _check_names
from .sweep_plan import SweepPlan

__all__ = ["RangeJob", "Remote", "evaluate_range"]

#: aim for tasks of about this many seconds of work: long against the scheduler's overhead of
#: a few ms per task, short enough that a lost task or the run's last tasks cost little
TASK_SECONDS = 2.0
#: points of the first tasks, before the workers' timings are known
FIRST_TASK = 8
MAX_TASK = 4096


def evaluate_range(
    plan: SweepPlan, start: int, stop: int, threads: int | None
) -> dict[str, NDArray[Any]]:
    """The core's flat arrays of the points ``start … stop-1`` of a plan (one core call)."""
    req = plan.request
    if threads != req.threads:
        req = dataclasses.replace(req, threads=threads)
    points = plan.points(start, stop)
    raw = run_points(req, points)
    if plan.coefficients is not None:  # keep the model's term values of every point
        terms = req.model.parameters
        raw[TERM_VALUES] = np.array([[p[t] for t in terms] for p in points], float)
    return raw


@dataclass(frozen=True)
class RangeJob:
    """A sweep's plan as a job of :class:`~toposweep.executors.ChunkRunner`.

    A task is a flat range ``(start, stop)``; its value the core's arrays of those points.
    """

    plan: SweepPlan

    def __call__(self, task: tuple[int, int], threads: int | None) -> dict[str, NDArray[Any]]:
        """The core's arrays of the range ``task`` on ``threads`` threads."""
        return evaluate_range(self.plan, task[0], task[1], threads)


class _Sizer:
    """Points per task: ~TASK_SECONDS by the workers' timings, a share of what is left."""

    def __init__(self, fixed: int | None) -> None:
        self.fixed = fixed
        self.per_point: float | None = None

    def observe(self, seconds: float, points: int) -> None:
        rate = max(seconds / max(points, 1), 1e-7)
        # (a moving average: one task on a busy worker does not swing the size)
        self.per_point = rate if self.per_point is None else 0.7 * self.per_point + 0.3 * rate

    def size(self, left: int, slots: int) -> int:
        if self.fixed is not None:
            return self.fixed
        want = FIRST_TASK if self.per_point is None else int(TASK_SECONDS / self.per_point)
        share = math.ceil(left / (4 * max(slots, 1)))  # the last tasks of a run stay short
        return max(1, min(want, share, MAX_TASK))


@dataclass
class Remote:
    """Where a sweep's chunks run: an executor (and how to remake a pool toposweep owns)."""

    executor: Any
    repair: Callable[[], Any] | None = None
    out: str | None = None
    #: retries of a failed task (see ChunkRunner)
    retries: int = 2

    def run(
        self,
        plan: SweepPlan,
        todo: list[tuple[int, int]],
        save: Callable[[int, int, Any], None],
        bar: ProgressBar,
        chunk_size: int | None,
        flag: Any,
    ) -> bool:
        """Evaluate the flat ranges ``todo`` as tasks; False if Ctrl-C stopped the run."""
        sizer = _Sizer(chunk_size)
        total = sum(b - a for a, b in todo)
        left = total
        saved = 0
        checked = False
        threads = plan.request.threads
        runner = ChunkRunner(
            self.executor, RangeJob(plan), threads=threads, retries=self.retries,
            repair=self.repair,
        )  # fmt: skip

        def tasks() -> Iterator[tuple[int, int]]:
            nonlocal left
            for lo, hi in todo:
                start = lo
                while start < hi:
                    if flag.requested:  # Ctrl-C: submit nothing more, finish what runs
                        return
                    stop = min(hi, start + sizer.size(left, runner.slots))
                    left -= stop - start
                    yield start, stop
                    start = stop

        try:
            with runner:
                for res in runner.imap_unordered(tasks()):
                    start, stop = res.task
                    if not checked:
                        _check_names(plan, res.value)
                        checked = True
                    save(start, stop, res.value)
                    saved += stop - start
                    sizer.observe(res.seconds, stop - start)
                    bar.update(stop - start)
        except ExecutorError as exc:
            if self.out is None:
                kept = "without out= nothing is kept"
            else:
                kept = (
                    f"{saved} of the {total} points this call had to do are kept in "
                    f"{journal_path(self.out)}; continue with resume=True"
                )
            raise ExecutorError(f"{exc} ({kept})") from exc.__cause__
        return saved == total
