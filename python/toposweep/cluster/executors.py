"""Chunks of a run on other processes: a Dask cluster or any ``concurrent.futures.Executor``.

The caller stays in charge: it decides the chunks, keeps the journal and writes the file;
workers only compute. A :class:`ChunkRunner` carries one *job* — a picklable callable
``job(task, threads) -> value``, for a sweep the plan (model, sampling, grid) and for a chunk
its ``(start, stop)`` range — and runs tasks of it on an executor:

- **The job reaches each worker once.** It is pickled once on the caller (with cloudpickle when
  it is installed, so a model function of a script or notebook travels by value) and named by
  the SHA-256 of those bytes. On Dask the bytes are scattered to every worker (broadcast) and
  each task only refers to them; on a generic executor a task carries the bytes only until the
  worker that runs it has them (a task that lands on a worker without them comes back at once
  and is sent again with them). A worker unpickles a job once and keeps it (and the model's
  compiled core with it) for the next tasks.
- **Bounded work in flight.** At most ``in_flight`` tasks are submitted at a time (default
  twice the executor's slots); the next task is taken from the caller's iterator only when one
  finishes, so the caller's memory stays flat however long the run.
- **Failures.** A worker that dies takes only its task with it: Dask runs it elsewhere by
  itself, a pool that toposweep owns is rebuilt, and a task that failed for another reason is
  submitted again, at most ``retries`` times. An error of toposweep's own (a model error, say)
  is raised at once: it would fail the same way anywhere. A user's pool that broke (a process
  killed) cannot be repaired; the run stops with :class:`~toposweep.errors.ExecutorError`.
- **Threads.** Every slot of an executor (a Dask worker thread, a pool process) runs one task
  at a time, so each task runs the core on ``threads`` threads; by default a host's cores are
  shared among the worker threads on it (:func:`fitting_threads`; 1 for executors whose hosts
  are unknown), so a worker never uses more than its share of the cores.

``executor=None`` runs the tasks inline in the calling process, so code that drives a
:class:`ChunkRunner` has one path for both. What a worker runs is in
:mod:`toposweep.cluster.executor_worker`, the kinds of executor in
:mod:`toposweep.cluster.executor_backends`.

Examples
--------
>>> from concurrent.futures import ThreadPoolExecutor
>>> with ThreadPoolExecutor(2) as pool, ChunkRunner(pool, ScaledSum(10)) as runner:
...     sorted(r.value for r in runner.imap_unordered([1, 2, 3]))
[10, 20, 30]
"""

from __future__ import annotations

import contextlib
import hashlib
import time
from collections.abc import Callable, Iterable, Iterator
from concurrent.futures import BrokenExecutor, Executor, Future
from dataclasses import dataclass
from typing import Any

from ..errors import ExecutorError, ParameterError, ToposweepError
from .executor_backends import _Dask, _Inline, _Pool, executor_from_spec, is_dask_client
from .executor_backends import pool_context as pool_context
from .executor_worker import MISSING, fitting_threads, serialise_job

__all__ = [
    "ChunkRunner",
    "ScaledSum",
    "TaskResult",
    "executor_from_spec",
    "fitting_threads",
    "is_dask_client",
    "pool_context",
]

#: seconds between looks at the executor while waiting (Ctrl-C and worker counts are seen)
POLL_SECONDS = 0.5
#: longest wait for the tasks in flight when a run stops on an error (their results are kept)
DRAIN_SECONDS = 60.0


@dataclass(frozen=True)
class TaskResult:
    """One finished task: its value and where and how long it ran."""

    task: Any
    value: Any
    #: the worker that ran it (Dask worker address, or ``host:pid``)
    worker: str
    #: seconds the job took on the worker (not counting transfer and queueing)
    seconds: float
    #: 1 unless the task had to be run again
    attempts: int


@dataclass(frozen=True)
class ScaledSum:
    """A toy job for examples and tests: ``task × factor`` (``task`` a number)."""

    factor: float

    def __call__(self, task: Any, threads: int | None) -> Any:
        """``task × factor``."""
        return task * self.factor


@dataclass
class _Pending:
    task: Any
    attempts: int
    with_payload: bool
    generation: int = 0


class ChunkRunner:
    """Run tasks of one job on an executor, with the job sent to each worker once.

    Parameters
    ----------
    executor : dask.distributed.Client, concurrent.futures.Executor or None
        Where the tasks run; ``None`` runs them inline in the calling process.
    job : callable
        ``job(task, threads) -> value``, picklable (see the module notes on functions).
    threads : int, optional
        Core threads per task on a worker (capped at its cores). Default: each host's cores
        shared among the worker threads on it (Dask; a local process pool), else 1. Inline,
        ``None`` means every core.
    in_flight : int, optional
        Most tasks submitted at once (default twice the executor's slots, rechecked as a Dask
        cluster grows or shrinks).
    retries : int
        How often a failed task is submitted again before the run stops.
    repair : callable, optional
        Makes a new executor when the given one broke (only for pools toposweep made itself).

    Examples
    --------
    >>> with ChunkRunner(None, ScaledSum(2)) as runner:   # inline
    ...     [(r.task, r.value, r.attempts) for r in runner.imap_unordered([1, 5])]
    [(1, 2, 1), (5, 10, 1)]
    """

    def __init__(
        self,
        executor: Any,
        job: Any,
        *,
        threads: int | None = None,
        in_flight: int | None = None,
        retries: int = 2,
        repair: Callable[[], Executor] | None = None,
    ) -> None:
        if executor is None:
            self._backend: Any = _Inline(job)
            self.threads = threads
        elif is_dask_client(executor):
            self._backend = _Dask(executor)
            self.threads = threads
        elif isinstance(executor, Executor):
            self._backend = _Pool(executor, repair, job)
            self.threads = threads
        else:
            raise ParameterError(
                "executor must be a dask.distributed.Client, a concurrent.futures.Executor "
                f"(e.g. ProcessPoolExecutor), or a spec such as 'local:4'; got "
                f"{type(executor).__name__}"
            )
        if isinstance(retries, bool) or not isinstance(retries, int) or retries < 0:
            raise ParameterError(f"retries must be a non-negative integer, got {retries!r}")
        self.retries = retries
        self._in_flight = in_flight
        # (inline and on threads, the job is called as it is: it need not pickle)
        same_process = executor is None or getattr(self._backend, "job", None) is not None
        self._blob = b"" if same_process else serialise_job(job)
        self.key = hashlib.sha256(self._blob).hexdigest()
        self._payload: Any = None
        self._generation = 0  # counts pools made after a break (their tasks are new)
        if self._backend.payload_by_reference:
            self._payload = self._backend.scatter(self._blob)
        #: tasks submitted and not yet returned (for progress displays)
        self.running = 0
        #: how many tasks ran again after a failure, and the last failure
        self.failures = 0
        self.last_failure: BaseException | None = None

    @property
    def slots(self) -> int:
        """Tasks the executor runs at once (Dask: threads of all workers)."""
        return self._backend.slots()

    @property
    def workers(self) -> int:
        """Worker processes (Dask workers, pool processes)."""
        return self._backend.workers()

    def task_threads(self) -> Any:
        """``threads`` as given, else each host's cores shared by its worker threads."""
        if self.threads is not None or isinstance(self._backend, _Inline):
            return self.threads
        return self._backend.host_threads() or 1

    def in_flight(self) -> int:
        """Most tasks submitted at once right now."""
        return self._in_flight or 2 * self.slots

    def _payload_arg(self, with_payload: bool) -> Any:
        if self._payload is not None:
            if getattr(self._payload, "status", "finished") != "finished":
                # every worker that held the scattered job is gone: scatter it again
                self._payload = self._backend.scatter(self._blob)
            return self._payload
        return self._blob if with_payload else None

    def _submit(self, pending: dict[Any, _Pending], p: _Pending) -> None:
        payload = self._payload_arg(p.with_payload)
        try:
            h = self._backend.submit(self.key, payload, p.task, self.task_threads())
        except Exception as exc:  # a pool already known broken refuses new tasks at once
            h = Future()
            h.set_exception(exc)
        p.generation = self._generation
        pending[h] = p

    def imap_unordered(self, tasks: Iterable[Any]) -> Iterator[TaskResult]:
        """Run ``tasks`` and yield their results as they finish.

        Tasks are taken from the iterable only when a slot of the in-flight window is free,
        so a generator of tasks may look at the results so far (e.g. to size the next chunk).
        Stopping the iteration (or an error) cancels what is still pending.

        Raises
        ------
        ExecutorError
            A task failed ``retries + 1`` times, or the executor broke; the tasks still in
            flight are finished (up to DRAIN_SECONDS) and yielded first.
        ToposweepError
            An error of toposweep's own from a task (raised at once, as it would be inline).
        """
        it = iter(tasks)
        pending: dict[Any, _Pending] = {}
        exhausted = False
        sent_payload = 0
        try:
            while True:
                while not exhausted and len(pending) < self.in_flight():
                    try:
                        task = next(it)
                    except StopIteration:
                        exhausted = True
                        break
                    # the first few tasks carry the job; later ones only when asked for it
                    first = sent_payload < self.slots
                    sent_payload += first
                    self._submit(pending, _Pending(task, 1, first))
                self.running = len(pending)
                if not pending:
                    return
                done = self._backend.wait_any(list(pending), POLL_SECONDS)
                failed: list[tuple[_Pending, BaseException]] = []
                for h in [h for h in pending if h in done]:  # (in the order submitted)
                    p = pending.pop(h)
                    try:
                        value, worker, seconds = h.result()
                    except Exception as exc:
                        failed.append((p, exc))
                        continue
                    if isinstance(value, str) and value == MISSING:
                        p.with_payload = True  # (not a failure: the worker lacked the job)
                        self._submit(pending, p)
                        continue
                    self.running = len(pending)
                    yield TaskResult(p.task, value, worker, seconds, p.attempts)
                for p, exc in failed:
                    try:
                        self._failed(pending, p, exc)
                    except BaseException:
                        # the run stops: first keep what the tasks still in flight finish
                        yield from self._drain(pending)
                        raise
        finally:
            self._backend.cancel(list(pending))
            self.running = 0

    def _drain(self, pending: dict[Any, _Pending]) -> Iterator[TaskResult]:
        """Yield the results of the tasks in flight (bounded wait; their failures ignored)."""
        deadline = time.monotonic() + DRAIN_SECONDS
        while pending and time.monotonic() < deadline:
            done = self._backend.wait_any(list(pending), POLL_SECONDS)
            for h in [h for h in pending if h in done]:
                p = pending.pop(h)
                try:
                    value, worker, seconds = h.result()
                except Exception:
                    continue
                if not (isinstance(value, str) and value == MISSING):
                    yield TaskResult(p.task, value, worker, seconds, p.attempts)

    def _failed(self, pending: dict[Any, _Pending], p: _Pending, exc: BaseException) -> None:
        """Run a failed task again, or stop the run with a clear error."""
        if isinstance(exc, ToposweepError):
            raise exc  # deterministic: the same chunk fails the same way anywhere
        self.failures += 1
        self.last_failure = exc
        if isinstance(exc, BrokenExecutor):
            if not self._backend.repairable:
                raise ExecutorError(
                    f"the executor broke ({type(exc).__name__}: {exc}); a worker process "
                    "probably died (killed, or out of memory). A broken pool cannot be reused: "
                    "start a new executor and continue the run"
                ) from exc
            if p.generation < self._generation:  # it died with a pool already replaced
                p.with_payload = True
                self._submit(pending, p)
                return
            if p.attempts <= self.retries:
                self._backend.repair()
                self._generation += 1
                # the pool's other tasks died with it: submit them again too (new processes
                # lack the job, so each carries it)
                lost = list(pending.items())
                pending.clear()
                for _, q in lost:
                    q.with_payload = True
                    self._submit(pending, q)
        if p.attempts > self.retries:
            raise ExecutorError(
                f"task {p.task!r} failed {p.attempts} times; the last error was "
                f"{type(exc).__name__}: {exc}"
            ) from exc
        p.attempts += 1
        p.with_payload = True
        self._submit(pending, p)

    def close(self) -> None:
        """Release the scattered job and, for a pool toposweep made, the pool."""
        if self._payload is not None:
            with contextlib.suppress(Exception):
                self._payload.release()
            self._payload = None
        self._backend.close()

    def __enter__(self) -> ChunkRunner:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
