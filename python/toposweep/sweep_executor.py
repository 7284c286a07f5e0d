"""A sweep's chunks as tasks of a Dask cluster or an executor (``sweep(..., executor=...)``).

The plan (model, sampling, grid, coefficients) is the job that reaches each worker once; a
task is a flat range of points, and the worker sends back the core's flat arrays of it. The
caller saves each range as it arrives — into the journal exactly as an in-process run does —
so the file does not depend on where, in which order or in how many pieces the chunks ran.

Chunk sizes adapt as in-process runs do, to the workers' own timings: about
:data:`TASK_SECONDS` of work per task (longer on clusters of more than
``TASK_SECONDS × MAX_TASK_RATE`` slots, so the caller is not swamped by results), and never so
large that the end of the run leaves slots idle (each range is at most a quarter of the rest of
the grid per slot).
"""

from __future__ import annotations

import contextlib
import dataclasses
import math
import os
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .cluster.executors import ChunkRunner, executor_from_spec
from .errors import ExecutorError
from .evaluation import Request, run_points
from .progress import ProgressBar
from .results.store import journal_path
from .sweep_plan import TERM_VALUES, SweepPlan, check_names

__all__ = ["PointsJob", "RangeJob", "Remote", "evaluate_range", "remote_for"]

#: aim for tasks of about this many seconds of work: long against the scheduler's overhead of
#: a few ms per task, short enough that a lost task or the run's last tasks cost little
TASK_SECONDS = 2.0
#: most tasks finished per second that the caller is asked to take in: each costs it a journal
#: write with an fsync (~5–20 ms here, more on a network file system) and the scheduler ~1 ms;
#: a large cluster therefore gets longer tasks (slots / MAX_TASK_RATE seconds each)
MAX_TASK_RATE = 50.0
#: points of the first tasks, before the workers' timings are known
FIRST_TASK = 8
MAX_TASK = 4096
#: a run of many points gets fewer, longer tasks: at most about this many journal files
MAX_CHUNKS = 100_000


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
    """A sweep's plan as a job of :class:`~toposweep.cluster.executors.ChunkRunner`.

    A task is a flat range ``(start, stop)``; its value the core's arrays of those points.
    """

    plan: SweepPlan

    def __call__(self, task: tuple[int, int], threads: int | None) -> dict[str, NDArray[Any]]:
        """The core's arrays of the range ``task`` on ``threads`` threads."""
        return evaluate_range(self.plan, task[0], task[1], threads)


@dataclass(frozen=True)
class PointsJob:
    """A checked request as a job: a task is a list of resolved parameter dicts.

    For drivers that choose their points as they go (an adaptive phase map): the request
    (model, filling, sampling) reaches each worker once, each task carries only its points.

    Examples
    --------
    >>> import toposweep as ts
    >>> from toposweep.evaluation import prepare_request
    >>> from toposweep.cluster.executors import ChunkRunner
    >>> req = prepare_request(ts.models.bhz(), 2, inversion=None, sampling=ts.Sampling())
    >>> points = [req.model.resolve({"mass": m}) for m in (-1.0, 3.0)]
    >>> with ChunkRunner(None, PointsJob(req)) as runner:   # or a Dask client, a pool
    ...     [r.value["nu0"].tolist() for r in runner.imap_unordered([points])]
    [[1, 0]]
    """

    request: Request

    def __call__(self, task: Sequence[dict[str, float]], threads: int | None) -> Any:
        """The core's flat arrays of the points ``task`` (as ``evaluation.run_points``)."""
        req = self.request
        if threads != req.threads:
            req = dataclasses.replace(req, threads=threads)
        return run_points(req, list(task))


class _Sizer:
    """Points per task: ~TASK_SECONDS by the workers' timings, a share of what is left."""

    def __init__(self, fixed: int | None, total: int) -> None:
        self.fixed = fixed
        self.per_point: float | None = None
        self.least = math.ceil(total / MAX_CHUNKS)

    def observe(self, seconds: float, points: int) -> None:
        rate = max(seconds / max(points, 1), 1e-7)
        # (a moving average: one task on a busy worker does not swing the size)
        self.per_point = rate if self.per_point is None else 0.7 * self.per_point + 0.3 * rate

    def size(self, left: int, slots: int) -> int:
        if self.fixed is not None:
            return self.fixed
        seconds = max(TASK_SECONDS, slots / MAX_TASK_RATE)
        want = FIRST_TASK if self.per_point is None else int(seconds / self.per_point)
        want = max(want, self.least)
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
        total = sum(b - a for a, b in todo)
        sizer = _Sizer(chunk_size, total)
        left = total
        saved = 0
        checked = False
        threads = plan.request.threads
        runner = ChunkRunner(
            self.executor, RangeJob(plan), threads=threads, retries=self.retries,
            repair=self.repair,
        )  # fmt: skip

        def status() -> None:
            n = runner.workers
            bar.set_status(f"{n} worker{'s' * (n != 1)}, {runner.running} tasks")

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
                status()
                for res in runner.imap_unordered(tasks()):
                    start, stop = res.task
                    if not checked:
                        check_names(plan, res.value)
                        checked = True
                    save(start, stop, res.value)
                    saved += stop - start
                    sizer.observe(res.seconds, stop - start)
                    status()
                    bar.update(stop - start, undefined=int(np.count_nonzero(res.value["nu0"] < 0)))
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


@contextlib.contextmanager
def remote_for(executor: Any, out: str | os.PathLike[str] | None = None) -> Iterator[Remote | None]:
    """The :class:`Remote` of an ``executor=`` argument (None: run in this process).

    A spec (``"local:N"``, ``"processes:N"``, an address) is opened here and closed on exit;
    a client or executor given as an object stays the caller's. ``_run`` of
    :mod:`toposweep.sweep` takes the result as its ``remote`` argument.
    """
    where = None if out is None else os.fspath(out)
    if executor is None:
        yield None
    elif isinstance(executor, str):
        with executor_from_spec(executor) as (ex, repair):
            yield Remote(ex, repair, where)
    else:
        yield Remote(executor, None, where)
