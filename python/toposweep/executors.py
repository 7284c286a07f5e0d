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
:class:`ChunkRunner` has one path for both.

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
import os
import pickle
import socket
import sys
import threading
import time
from collections import OrderedDict
from collections.abc import Callable, Iterable, Iterator
from concurrent.futures import (
    FIRST_COMPLETED,
    BrokenExecutor,
    Executor,
    Future,
    ProcessPoolExecutor,
    ThreadPoolExecutor,
    wait,
)
from dataclasses import dataclass
from typing import Any

from .errors import ExecutorError, ParameterError, ToposweepError

__all__ = [
    "ChunkRunner",
    "ScaledSum",
    "TaskResult",
    "executor_from_spec",
    "is_dask_client",
    "pool_context",
]

#: a worker keeps this many unpickled jobs (a run has one; a few runs may share a cluster)
KEPT_JOBS = 4
#: seconds between looks at the executor while waiting (Ctrl-C and worker counts are seen)
POLL_SECONDS = 0.5
#: longest wait for the tasks in flight when a run stops on an error (their results are kept)
DRAIN_SECONDS = 60.0
#: module-name prefix of files toposweep loads by path (callable_model.file_module_name)
FILE_MODULE_PREFIX = "toposweep_user_"

_MISSING = "toposweep: job not on this worker"
_jobs: OrderedDict[str, Any] = OrderedDict()
_jobs_lock = threading.Lock()


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


# ---------------------------------------------------------------------------------------------
# the worker side


def _worker_name() -> str:
    mod = sys.modules.get("distributed")  # (a Dask worker has it; a pool need not import it)
    if mod is not None:
        with contextlib.suppress(ValueError):
            return str(mod.get_worker().address)
    return f"{socket.gethostname()}:{os.getpid()}"


def _usable_cores() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not Linux
        return os.cpu_count() or 1


def _job_for(key: str, payload: bytes | None) -> Any:
    """The unpickled job ``key`` of this process, loaded from ``payload`` if it is new here."""
    with _jobs_lock:
        job = _jobs.get(key)
        if job is not None:
            _jobs.move_to_end(key)
            return job
        if payload is None:
            return None
        try:
            job = pickle.loads(payload)
        except Exception as exc:  # ModuleNotFoundError, AttributeError, ...
            raise ExecutorError(
                f"a worker ({_worker_name()}) cannot load the run: {type(exc).__name__}: {exc}. "
                "The model (or coefficients) function must be importable on the workers: "
                "install its module there (pip install -e ., or PYTHONPATH on a shared file "
                "system), or define it in the script or notebook that starts the run, with "
                "cloudpickle installed (pip install toposweep[dask]), so it travels by value"
            ) from None
        _jobs[key] = job
        while len(_jobs) > KEPT_JOBS:
            _jobs.popitem(last=False)
        return job


def run_task(key: str, payload: bytes | None, task: Any, threads: Any) -> tuple[Any, ...]:
    """What a worker runs for one task: ``(value, worker, seconds)``.

    ``payload`` is the pickled job (on Dask: resolved from the scattered copy on this worker);
    ``None`` when the caller assumes the worker has it, and if it has not, the task returns at
    once asking for it. ``threads``: core threads of the task (capped at the worker's cores),
    ``{host: worker threads on it}`` to share each host's cores (:func:`fitting_threads`), or
    None for every core (only inline).
    """
    job = _job_for(key, payload)
    if job is None:
        return (_MISSING, _worker_name(), 0.0)
    return _call(job, task, threads)


def fitting_threads(threads_on_host: int, cores: int) -> int:
    """Core threads of one task: the host's cores shared among the worker threads on it.

    Each worker thread (slot) runs one task at a time, so a host whose workers have T threads
    in all gives each task ``cores // T`` threads: a lone one-thread worker on a 32-core node
    uses all 32, 32 one-thread workers (or one worker of 32 threads) one each.

    Examples
    --------
    >>> [fitting_threads(t, cores) for t, cores in [(1, 32), (32, 32), (2, 2), (3, 2)]]
    [32, 1, 1, 1]
    """
    return max(1, cores // max(int(threads_on_host), 1))


def _host(address: str) -> str:
    """Host part of a worker address such as ``tcp://10.0.0.5:40021`` or ``host:pid``.

    Examples
    --------
    >>> _host("tcp://10.0.0.5:40021"), _host("tls://[::1]:8786"), _host("node7:1234")
    ('10.0.0.5', '::1', 'node7')
    """
    rest = address.split("://", 1)[-1]
    return rest.rsplit(":", 1)[0].strip("[]")


def _call(job: Any, task: Any, threads: Any) -> tuple[Any, str, float]:
    if isinstance(threads, dict):  # {host: worker threads on it} ("*": any host)
        here = _host(_worker_name())
        threads = fitting_threads(threads.get(here, threads.get("*", 1)), _usable_cores())
    elif threads is not None:
        threads = max(1, min(int(threads), _usable_cores()))
    t0 = time.perf_counter()
    value = job(task, threads)
    seconds = time.perf_counter() - t0
    return (value, _worker_name(), seconds)


# ---------------------------------------------------------------------------------------------
# the caller side


def serialise_job(job: Any) -> bytes:
    """Pickle ``job`` once for all workers.

    cloudpickle (when installed) sends functions of ``__main__`` and of files toposweep loaded
    by path by value: they exist only in this process.
    """
    try:
        import cloudpickle
    except ImportError:
        cloudpickle = None
    try:
        if cloudpickle is None:
            return pickle.dumps(job, protocol=pickle.HIGHEST_PROTOCOL)
        for name, module in list(sys.modules.items()):
            if name.startswith(FILE_MODULE_PREFIX) and module is not None:
                # (such a module exists only in the process that loaded the file by path)
                cloudpickle.register_pickle_by_value(module)
        return bytes(cloudpickle.dumps(job, protocol=pickle.HIGHEST_PROTOCOL))
    except Exception as exc:  # PicklingError, AttributeError of local objects, TypeError ...
        how = (
            "define the model function (and coefficients=) at module level in an importable "
            "module, or install cloudpickle (pip install toposweep[dask]) to send functions of "
            "scripts, notebooks and closures by value"
            if cloudpickle is None
            else "the model and coefficients= must not hold open files, locks or other "
            "objects that cannot be copied to another process"
        )
        raise ExecutorError(
            f"cannot send the run to the executor's workers ({type(exc).__name__}: {exc}); {how}"
        ) from None


def is_dask_client(obj: Any) -> bool:
    """True for a ``dask.distributed.Client`` (without importing Dask when it is absent)."""
    mod = sys.modules.get("distributed")
    return mod is not None and isinstance(obj, mod.Client)


class _Inline:
    """No executor: each task runs in the calling process when it is submitted."""

    payload_by_reference = False
    repairable = False

    def __init__(self, job: Any) -> None:
        self.job = job

    def slots(self) -> int:
        return 1

    def workers(self) -> int:
        return 1

    def submit(self, key: str, payload: Any, task: Any, threads: Any) -> Future[Any]:
        fut: Future[Any] = Future()
        t0 = time.perf_counter()
        try:
            value = self.job(task, threads)
        except Exception as exc:  # (delivered like a worker's error)
            fut.set_exception(exc)
        else:
            fut.set_result((value, "in-process", time.perf_counter() - t0))
        return fut

    def wait_any(self, handles: list[Any], timeout: float) -> set[Any]:
        return set(handles)

    def cancel(self, handles: list[Any]) -> None:
        pass

    def close(self) -> None:
        pass


class _Pool:
    """A ``concurrent.futures.Executor``; ``factory`` rebuilds one that toposweep owns.

    A thread pool shares this process: its tasks call the job itself, never a copy.
    """

    payload_by_reference = False

    def __init__(
        self, executor: Executor, factory: Callable[[], Executor] | None, job: Any
    ) -> None:
        self.executor, self.factory = executor, factory
        self.repairable = factory is not None
        self.job = job if isinstance(executor, ThreadPoolExecutor) else None

    def slots(self) -> int:
        for attr in ("num_workers", "_max_workers"):  # MPIPoolExecutor / the standard pools
            n = getattr(self.executor, attr, None)
            if isinstance(n, int) and n > 0:
                return n
        return os.cpu_count() or 1

    workers = slots

    def host_threads(self) -> dict[str, int] | None:
        """A local process pool shares this machine's cores; elsewhere: unknown (None)."""
        return {"*": self.slots()} if isinstance(self.executor, ProcessPoolExecutor) else None

    def submit(self, key: str, payload: Any, task: Any, threads: Any) -> Any:
        if self.job is not None:
            return self.executor.submit(_call, self.job, task, threads)
        return self.executor.submit(run_task, key, payload, task, threads)

    def wait_any(self, handles: list[Any], timeout: float) -> set[Any]:
        done, _ = wait(handles, timeout=timeout, return_when=FIRST_COMPLETED)
        return set(done)

    def cancel(self, handles: list[Any]) -> None:
        for h in handles:
            h.cancel()

    def repair(self) -> None:
        assert self.factory is not None
        self.executor.shutdown(wait=False, cancel_futures=True)
        self.executor = self.factory()

    def close(self) -> None:
        if self.factory is not None:  # ours: shut it down (a user's pool is the user's)
            self.executor.shutdown(wait=True, cancel_futures=True)


class _Dask:
    """A ``dask.distributed.Client``: the job is scattered to every worker once."""

    payload_by_reference = True
    repairable = False

    def __init__(self, client: Any) -> None:
        import distributed

        self.client, self._wait = client, distributed.wait
        self._counted = (0.0, 1, 1)
        self._host_threads: dict[str, int] = {}

    def _count(self) -> tuple[int, int]:
        t, slots, workers = self._counted
        if time.monotonic() - t > 2.0:  # (a cluster may grow or shrink while it runs)
            threads = self.client.nthreads()
            slots, workers = max(1, sum(threads.values())), len(threads)
            self._counted = (time.monotonic(), slots, workers)
            per_host: dict[str, int] = {}
            for address, n in threads.items():
                per_host[_host(address)] = per_host.get(_host(address), 0) + n
            self._host_threads = per_host
        return slots, workers

    def host_threads(self) -> dict[str, int]:
        """Worker threads per host (each task shares its host's cores among them)."""
        self._count()
        return self._host_threads

    def slots(self) -> int:
        return self._count()[0]

    def workers(self) -> int:
        return self._count()[1]

    def scatter(self, blob: bytes) -> Any:
        # a cluster that is still starting (batch jobs in a queue) is waited for
        self.client.wait_for_workers(1)
        return self.client.scatter(blob, broadcast=True, hash=False)

    def submit(self, *args: Any) -> Any:
        return self.client.submit(run_task, *args, pure=False)

    def wait_any(self, handles: list[Any], timeout: float) -> set[Any]:
        refused = {h for h in handles if isinstance(h, Future)}  # (submit raised: see _submit)
        if refused:
            return refused
        try:
            done, _ = self._wait(handles, timeout=timeout, return_when="FIRST_COMPLETED")
        except TimeoutError:
            return set()
        return set(done)

    def cancel(self, handles: list[Any]) -> None:
        ours = [h for h in handles if not isinstance(h, Future)]
        if ours:
            self.client.cancel(ours)

    def close(self) -> None:
        pass


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
                    if isinstance(value, str) and value == _MISSING:
                        p.with_payload = True  # (not a failure: the worker lacked the job)
                        self._submit(pending, p)
                        continue
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
                if not (isinstance(value, str) and value == _MISSING):
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


def _process_pool(n: int) -> Executor:
    from concurrent.futures import ProcessPoolExecutor

    return ProcessPoolExecutor(n, mp_context=pool_context())


def pool_context() -> Any:
    """A multiprocessing context for process pools that run toposweep.

    forkserver (else spawn): a child forked from a caller that has run the core would inherit
    its thread pools half-made. The fork server imports toposweep once, before any core call,
    so each new process starts with it imported (~1–2 s saved per process).
    """
    import multiprocessing

    if "forkserver" not in multiprocessing.get_all_start_methods():  # pragma: no cover
        return multiprocessing.get_context("spawn")
    ctx = multiprocessing.get_context("forkserver")
    ctx.set_forkserver_preload(["toposweep.sweep_executor"])
    return ctx


@contextlib.contextmanager
def executor_from_spec(spec: str) -> Iterator[tuple[Any, Callable[[], Executor] | None]]:
    """Open the executor a text names, and close it afterwards.

    ``local:N``: a Dask ``LocalCluster`` of N worker processes of one thread each;
    ``processes:N``: a process pool of N processes that toposweep rebuilds if one dies (no
    Dask needed); anything else is a Dask scheduler address such as ``tcp://host:8786``.
    Yields ``(executor, repair)`` where ``repair`` remakes a pool toposweep owns.

    Examples
    --------
    >>> with executor_from_spec("processes:1") as (pool, repair):
    ...     pool.submit(abs, -3).result()
    3
    """
    if not isinstance(spec, str) or not spec.strip():
        raise ParameterError(f"an executor spec must be a non-empty string, got {spec!r}")
    kind, sep, count = spec.strip().partition(":")
    if sep and kind in ("local", "processes"):
        if not count.isdigit() or int(count) < 1:
            raise ParameterError(f"{spec!r}: expected {kind}:N with N a positive integer")
        n = int(count)
        if kind == "processes":
            pool = _Owned(lambda: _process_pool(n))
            try:
                yield pool.executor, pool.remake
            finally:
                pool.executor.shutdown(wait=True, cancel_futures=True)
            return
    distributed = _import_distributed(spec)
    if sep and kind == "local":
        with (
            distributed.LocalCluster(
                n_workers=n, threads_per_worker=1, processes=True, dashboard_address=":0"
            ) as cluster,
            distributed.Client(cluster) as client,
        ):
            yield client, None
        return
    try:
        client = distributed.Client(spec.strip(), timeout=30)
    except OSError as exc:
        raise ExecutorError(f"cannot reach the Dask scheduler at {spec!r}: {exc}") from None
    with client:
        yield client, None


class _Owned:
    """A process pool that toposweep made, and remakes after one of its processes died."""

    def __init__(self, make: Callable[[], Executor]) -> None:
        self._make = make
        self.executor = make()

    def remake(self) -> Executor:
        self.executor = self._make()
        return self.executor


def _import_distributed(spec: str) -> Any:
    try:
        import distributed
    except ImportError:
        raise ExecutorError(
            f"executor {spec!r} needs Dask: pip install 'toposweep[dask]' (or use "
            "'processes:N' for a process pool on this machine)"
        ) from None
    return distributed
