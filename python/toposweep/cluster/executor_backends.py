"""Where the tasks of a :class:`~toposweep.cluster.executors.ChunkRunner` run.

Inline, a ``concurrent.futures`` pool, or a Dask client; and the executors a text names
(``local:N``, ``processes:N``, a scheduler address).

Each backend submits :func:`~toposweep.cluster.executor_worker.run_task` and waits for the first of
several tasks; a pool that toposweep made itself can be remade after one of its processes died.
"""

from __future__ import annotations

import contextlib
import os
import sys
import time
from collections.abc import Callable, Iterator
from concurrent.futures import (
    FIRST_COMPLETED,
    Executor,
    Future,
    ProcessPoolExecutor,
    ThreadPoolExecutor,
    wait,
)
from typing import Any

from ..errors import ExecutorError, ParameterError
from .executor_worker import _host, call_job, run_task

__all__ = ["executor_from_spec", "is_dask_client", "pool_context"]


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
            return self.executor.submit(call_job, self.job, task, threads)
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


def _process_pool(n: int) -> Executor:
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
