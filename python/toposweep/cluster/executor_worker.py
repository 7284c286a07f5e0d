"""The worker side of :mod:`toposweep.cluster.executors`: what a task runs, and the job it runs.

A job is unpickled once per worker process and kept (:data:`KEPT_JOBS` of them), so the model
and its compiled core serve every later task of the run on that worker. Also here: how the
caller pickles a job once for all workers (:func:`serialise_job`) and how many core threads a
task takes (:func:`fitting_threads`).
"""

from __future__ import annotations

import contextlib
import os
import pickle
import socket
import sys
import threading
import time
from collections import OrderedDict
from typing import Any

from ..errors import ExecutorError

__all__ = ["fitting_threads", "run_task", "serialise_job"]

#: a worker keeps this many unpickled jobs (a run has one; a few runs may share a cluster)
KEPT_JOBS = 4
#: module-name prefix of files toposweep loads by path (callable_model.file_module_name)
FILE_MODULE_PREFIX = "toposweep_user_"
#: what a task returns when its worker lacks the job (the caller then sends it along)
MISSING = "toposweep: job not on this worker"

_jobs: OrderedDict[str, Any] = OrderedDict()
_jobs_lock = threading.Lock()


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
        return (MISSING, _worker_name(), 0.0)
    return call_job(job, task, threads)


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


def call_job(job: Any, task: Any, threads: Any) -> tuple[Any, str, float]:
    if isinstance(threads, dict):  # {host: worker threads on it} ("*": any host)
        here = _host(_worker_name())
        threads = fitting_threads(threads.get(here, threads.get("*", 1)), _usable_cores())
    elif threads is not None:
        threads = max(1, min(int(threads), _usable_cores()))
    t0 = time.perf_counter()
    value = job(task, threads)
    seconds = time.perf_counter() - t0
    return (value, _worker_name(), seconds)


def _refuse_file_modules(payload: bytes) -> None:
    """Refuse a job that refers to a file toposweep loaded by path, naming the file.

    Pickled by reference, such a function names a module that exists only in this process
    (the worker would fail with "No module named" and our internal module name).
    """
    files = sorted(
        str(getattr(module, "__file__", name))
        for name, module in list(sys.modules.items())
        if name.startswith(FILE_MODULE_PREFIX) and module is not None and name.encode() in payload
    )
    if files:
        raise ExecutorError(
            f"the run's model or coefficients function comes from {', '.join(files)}, a file "
            "loaded by its path, which the workers cannot import by name: install cloudpickle "
            "(pip install 'toposweep[dask]') so it travels to them by value, or make the file "
            "an importable module on the workers and name the function from there"
        )


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
            payload = pickle.dumps(job, protocol=pickle.HIGHEST_PROTOCOL)
            _refuse_file_modules(payload)
            return payload
        for name, module in list(sys.modules.items()):
            if name.startswith(FILE_MODULE_PREFIX) and module is not None:
                # (such a module exists only in the process that loaded the file by path)
                cloudpickle.register_pickle_by_value(module)
        return bytes(cloudpickle.dumps(job, protocol=pickle.HIGHEST_PROTOCOL))
    except ExecutorError:
        raise
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
