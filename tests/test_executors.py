"""Sweeps on a Dask cluster or a process pool: identical results, lost workers, lost callers.

Every comparison is against the same sweep run in this process (identical Dataset or file,
creation time aside); the Wilson–Dirac map run on the cluster is also checked against the
Fu–Kane parity criterion, Fu & Kane, Phys. Rev. B 76, 045302 (2007), eqs. (3.10)–(3.11).
Process pools use the forkserver start method (a forked child would inherit the caller's
thread pools half-made). A watchdog ends the test process instead of letting CI hang.
"""

from __future__ import annotations

import contextlib
import faulthandler
import io
import os
import re
import signal
import subprocess
import sys
import textwrap
import threading
import time
import types
from collections.abc import Callable, Iterator
from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import toposweep as ts
import xarray as xr
from toposweep.callable_model import load_file_module
from toposweep.cluster import executor_backends, executors
from toposweep.cluster.executors import ChunkRunner, ScaledSum
from toposweep.errors import ExecutorError, ModelError
from toposweep.results.store import journal_path

distributed = pytest.importorskip("distributed")

FAST = {"loop_points": 16, "lines": 9, "progress": False}
WATCHDOG_SECONDS = 240

# a coefficients mapping in a file of its own, loaded by path as `toposweep run` loads one: it
# exists only in the process that loaded it, so it must reach the workers by value; the nap
# makes a run last long enough to kill something in the middle of it
MAPPING_FILE = textwrap.dedent(
    """
    import time

    def slow_mass(p):
        time.sleep(p["nap"])
        return {"mass": p["m"]}
    """
)
SLOW_GRID = {"m": np.linspace(-3.0, 3.0, 90)}
SLOW_PARAMS = {"nap": 0.03}


@pytest.fixture(autouse=True)
def watchdog() -> Iterator[None]:
    faulthandler.dump_traceback_later(WATCHDOG_SECONDS, exit=True)
    yield
    faulthandler.cancel_dump_traceback_later()


@pytest.fixture(scope="module")
def client() -> Iterator[Any]:
    with (
        distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0"
        ) as cluster,
        distributed.Client(cluster) as c,
    ):
        yield c


@pytest.fixture(scope="module")
def mapping_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("user") / "slow_mapping.py"
    path.write_text(MAPPING_FILE)
    return path


def slow_mapping(path: Path) -> Callable[..., Any]:
    return load_file_module(path).slow_mass


def forkserver_pool(n: int = 2) -> ProcessPoolExecutor:
    # (the user's own pool; pool_context() is forkserver with toposweep imported beforehand)
    return ProcessPoolExecutor(n, mp_context=executors.pool_context())


@pytest.fixture(scope="module")
def slow_reference(mapping_file: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The slow runs' file computed in this process (without the nap)."""
    ref = tmp_path_factory.mktemp("ref") / "ref.nc"
    mapping = slow_mapping(mapping_file)
    kw = {"coefficients": mapping, "params": {"nap": 0.0}, "chunk_size": 5, **FAST}
    ts.sweep(ts.models.bhz(), SLOW_GRID, 2, out=ref, **kw).close()
    return ref


def same_but_the_nap(out: Path, ref: Path) -> None:
    """Same points as the reference; only the nap (a parameter of the run) differs."""
    with xr.open_dataset(out, engine="h5netcdf") as a, xr.open_dataset(ref, engine="h5netcdf") as b:
        assert float(a.nap) == SLOW_PARAMS["nap"]
        skip = {"run_identity": "", "created": ""}
        xr.testing.assert_identical(
            a.drop_vars("nap").load().assign_attrs(skip),
            b.drop_vars("nap").load().assign_attrs(skip),
        )


def same(a: xr.Dataset, b: xr.Dataset) -> None:
    """Identical apart from the creation time."""
    xr.testing.assert_identical(a.assign_attrs(created=""), b.assign_attrs(created=""))


def same_files(a: Path, b: Path) -> None:
    with xr.open_dataset(a, engine="h5netcdf") as x, xr.open_dataset(b, engine="h5netcdf") as y:
        same(x.load(), y.load())


def in_thread(fn: Callable[[], Any]) -> tuple[threading.Thread, dict[str, Any]]:
    box: dict[str, Any] = {}

    def target() -> None:
        try:
            box["value"] = fn()
        except BaseException as exc:  # handed to the test
            box["error"] = exc

    t = threading.Thread(target=target, daemon=True)
    t.start()
    return t, box


def wait_for_chunks(out: Path, n: int, alive: Callable[[], bool], timeout: float = 60) -> int:
    journal = journal_path(out)
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline and alive():
        if journal.is_dir() and len(list(journal.glob("chunk-*.npz"))) >= n:
            return len(list(journal.glob("chunk-*.npz")))
        time.sleep(0.005)
    raise AssertionError(f"the run did not reach {n} chunks in time")


def fu_kane_nu0(m: float, t: float) -> int:
    """Strong index of the Wilson–Dirac model from the TRIM parities (see test_sweep.py)."""
    trims = np.array([[a, b, c] for a in (0, 0.5) for b in (0, 0.5) for c in (0, 0.5)])
    delta = -np.sign(m + t * np.cos(2 * np.pi * trims).sum(axis=1))
    return int(np.prod(delta) < 0)


# --- a Dask cluster -------------------------------------------------------------------------


def test_local_cluster_gives_the_in_process_dataset(client: Any) -> None:
    model = ts.models.wilson_dirac()
    grid = {"mass": np.linspace(-4.5, 4.5, 10), "hopping": [0.6, 1.3]}
    here = ts.sweep(model, grid, 2, **FAST)
    there = ts.sweep(model, grid, 2, executor=client, chunk_size=3, **FAST)
    same(there, here)
    for m in grid["mass"]:
        for t in grid["hopping"]:
            assert int(there.nu0.sel(mass=m, hopping=t)) == fu_kane_nu0(m, t), (m, t)
    # adaptive chunk sizes, one task per range: the same again
    same(ts.sweep(model, grid, 2, executor=client, **FAST), here)


def test_phase_map_on_the_cluster_is_the_in_process_one(client: Any, tmp_path: Path) -> None:
    model = ts.models.wilson_dirac()
    grid = {"mass": np.linspace(-4, 4, 33) + 0.013, "hopping": np.linspace(0.6, 1.4, 5)}
    here = ts.phase_map(model, grid, 2, progress=False, loop_points=16, lines=9)
    there = ts.phase_map(
        model, grid, 2, progress=False, loop_points=16, lines=9, executor=client,
        out=tmp_path / "map.nc",
    )  # fmt: skip
    same(there.load(), here)
    there.close()


def test_function_of_a_file_loaded_by_path_travels_by_value(
    client: Any, mapping_file: Path, tmp_path: Path
) -> None:
    kw = {"coefficients": slow_mapping(mapping_file), "params": {"nap": 0.0}, **FAST}
    grid = {"m": np.linspace(-3.0, 3.0, 13)}
    here = ts.sweep(ts.models.bhz(), grid, 2, out=tmp_path / "here.nc", **kw)
    there = ts.sweep(ts.models.bhz(), grid, 2, out=tmp_path / "there.nc", executor=client, **kw)
    same(there, here)
    same_files(tmp_path / "here.nc", tmp_path / "there.nc")
    here.close()
    there.close()


def test_each_task_gets_its_share_of_the_host_cores(client: Any) -> None:
    with ChunkRunner(client, ThreadsJob()) as runner:
        threads = {r.value for r in runner.imap_unordered(range(4))}
    # two one-thread workers on this host: each task gets cores // 2
    assert threads == {max(1, len(os.sched_getaffinity(0)) // 2)}
    with ChunkRunner(client, ThreadsJob(), threads=1) as runner:
        assert {r.value for r in runner.imap_unordered(range(2))} == {1}


def test_job_reaches_each_worker_once(client: Any) -> None:
    with ChunkRunner(client, CountingJob()) as runner:
        seen = [r.value for r in runner.imap_unordered(range(12))]
    assert runner.slots == 2 and runner.workers == 2
    pids = {pid for pid, _ in seen}
    loads = {pid: max(n for p, n in seen if p == pid) for pid in pids}
    assert all(n == 1 for n in loads.values()), loads


def test_points_job_for_drivers_that_choose_their_points(client: Any) -> None:
    from toposweep.evaluation import prepare_request
    from toposweep.sweep_executor import PointsJob

    req = prepare_request(ts.models.wilson_dirac(), 2, inversion=None, sampling=ts.Sampling())
    batches = [[req.model.resolve({"mass": m}) for m in ms] for ms in ([-2.0, 0.5], [2.0])]
    results = {}
    for where in (None, client):
        with ChunkRunner(where, PointsJob(req)) as runner:
            got = {len(r.task): r.value for r in runner.imap_unordered(batches)}
        results[where is None] = got
    for n in (1, 2):
        here, there = results[True][n], results[False][n]
        assert here.keys() == there.keys()
        for k in here:
            np.testing.assert_array_equal(here[k], there[k], err_msg=k)
    assert results[True][2]["nu0"].tolist() == [fu_kane_nu0(-2.0, 1.0), fu_kane_nu0(0.5, 1.0)]


def test_worker_killed_mid_run_loses_nothing(
    mapping_file: Path, slow_reference: Path, tmp_path: Path
) -> None:
    kw = {"coefficients": slow_mapping(mapping_file), "params": SLOW_PARAMS, "chunk_size": 5}
    out = tmp_path / "killed.nc"
    with (
        distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0"
        ) as cluster,
        distributed.Client(cluster) as c,
    ):
        pids = c.run(os.getpid)
        t, box = in_thread(
            lambda: ts.sweep(ts.models.bhz(), SLOW_GRID, 2, out=out, executor=c, **kw, **FAST)
        )
        wait_for_chunks(out, 3, t.is_alive)
        os.kill(next(iter(pids.values())), signal.SIGKILL)
        t.join(120)
        assert not t.is_alive()
    assert "error" not in box, box.get("error")
    box["value"].close()
    assert not journal_path(out).exists()
    same_but_the_nap(out, slow_reference)


CALLER_SCRIPT = textwrap.dedent(
    """
    import sys, numpy as np, toposweep as ts
    from pathlib import Path
    from toposweep.callable_model import load_file_module
    mapping = load_file_module(Path(sys.argv[2])).slow_mass
    ts.sweep(ts.models.bhz(), {"m": np.linspace(-3.0, 3.0, 90)}, 2, out=sys.argv[1],
             coefficients=mapping, params={"nap": 0.03}, chunk_size=5, executor=sys.argv[3],
             loop_points=16, lines=9, progress=False)
    """
)


@pytest.mark.parametrize("spec", ["local:2", "processes:2"])
def test_caller_killed_then_resumed_on_a_fresh_cluster(
    spec: str, client: Any, mapping_file: Path, slow_reference: Path, tmp_path: Path
) -> None:
    kw = {"coefficients": slow_mapping(mapping_file), "params": SLOW_PARAMS, "chunk_size": 5}
    out = tmp_path / "caller.nc"
    # its own session: the caller and the workers it started die together, as on a lost node
    proc = subprocess.Popen(
        [sys.executable, "-c", CALLER_SCRIPT, str(out), str(mapping_file), spec],
        start_new_session=True,
    )
    try:
        kept = wait_for_chunks(out, 4, lambda: proc.poll() is None, timeout=120)
        os.killpg(proc.pid, signal.SIGKILL)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
        proc.wait(30)
    assert not out.exists() and kept < 18
    # resumed on the other kind: the journal does not care where chunks ran
    with contextlib.ExitStack() as stack:
        where = client if spec.startswith("processes") else stack.enter_context(forkserver_pool())
        resumed = ts.sweep(
            ts.models.bhz(), SLOW_GRID, 2, out=out, resume=True, executor=where, **kw, **FAST
        )
    resumed.close()
    same_but_the_nap(out, slow_reference)


def test_model_error_on_a_worker_is_raised_as_is(client: Any) -> None:
    with pytest.raises(ModelError, match="bad point"):
        with ChunkRunner(client, FailingJob(ModelError("bad point"))) as runner:
            list(runner.imap_unordered([1, 2, 3]))


def test_function_the_workers_cannot_import_gives_a_clear_error(client: Any) -> None:
    ghost = types.ModuleType("ghost_models_of_this_test")
    exec("def mapping(p):\n    return {'mass': p['m']}\n", ghost.__dict__)
    sys.modules[ghost.__name__] = ghost
    try:
        with pytest.raises(ExecutorError, match="must be importable on the workers"):
            ts.sweep(
                ts.models.bhz(), {"m": [-1.0, 1.0]}, 2, coefficients=ghost.mapping,
                executor=client, **FAST,
            )  # fmt: skip
    finally:
        del sys.modules[ghost.__name__]


def test_command_line_scheduler_local_cluster(tmp_path: Path, capsys: Any) -> None:
    from toposweep.cli import main

    (tmp_path / "map.toml").write_text(
        'model = "wilson_dirac"\nfilling = 2\noutput = "map.nc"\n'
        "[grid]\nmass = { start = -4.0, stop = 4.0, num = 9 }\nhopping = [0.5, 1.0]\n"
        '[sampling]\nloop_points = 16\nlines = 9\n[run]\nscheduler = "processes:2"\n'
    )
    cfg = str(tmp_path / "map.toml")
    assert main(["run", cfg, "--quiet", "--scheduler", "local:2"]) == 0  # the option wins
    here = ts.sweep(
        ts.models.wilson_dirac(), {"mass": np.linspace(-4, 4, 9), "hopping": [0.5, 1.0]}, 2,
        **FAST,
    )  # fmt: skip
    with ts.open_result(tmp_path / "map.nc", load=True) as there:
        same(there, here)
    assert "phase" in capsys.readouterr().out.lower()
    (tmp_path / "bad.toml").write_text(
        'model = "bhz"\nfilling = 2\noutput = "b.nc"\n[grid]\nmass = [1.0]\n[run]\nscheduler = 4\n'
    )
    assert main(["run", str(tmp_path / "bad.toml")]) == 2
    assert "run.scheduler" in capsys.readouterr().err


# --- concurrent.futures executors -------------------------------------------------------------


def test_process_pool_gives_the_in_process_dataset(tmp_path: Path) -> None:
    grid = {"mass": np.linspace(-3.0, 3.0, 7), "hopping": [0.5, 1.5]}
    here = ts.sweep(ts.models.bhz(), grid, 2, **FAST)
    with forkserver_pool() as pool:
        same(ts.sweep(ts.models.bhz(), grid, 2, executor=pool, chunk_size=2, **FAST), here)
        with ChunkRunner(pool, CountingJob()) as runner:
            seen = [r.value for r in runner.imap_unordered(range(20))]
    assert all(n == 1 for _, n in seen)  # the job was unpickled once per process


def test_user_pool_broken_by_a_kill_stops_clearly_and_resumes(
    mapping_file: Path, slow_reference: Path, tmp_path: Path
) -> None:
    kw = {"coefficients": slow_mapping(mapping_file), "params": SLOW_PARAMS, "chunk_size": 5}
    out = tmp_path / "pool.nc"
    with forkserver_pool() as pool:
        t, box = in_thread(
            lambda: ts.sweep(ts.models.bhz(), SLOW_GRID, 2, out=out, executor=pool, **kw, **FAST)
        )
        wait_for_chunks(out, 3, t.is_alive)
        os.kill(next(iter(pool._processes)), signal.SIGKILL)
        t.join(60)
        assert not t.is_alive()
    err = box.get("error")
    assert isinstance(err, ExecutorError), box
    assert "broke" in str(err) and "resume=True" in str(err) and str(journal_path(out)) in str(err)
    kept = len(list(journal_path(out).glob("chunk-*.npz")))
    assert 3 <= kept < 18
    with forkserver_pool() as pool:
        ts.sweep(
            ts.models.bhz(), SLOW_GRID, 2, out=out, resume=True, executor=pool, **kw, **FAST
        ).close()
    same_but_the_nap(out, slow_reference)


def test_pool_of_our_own_is_rebuilt_after_a_kill(
    mapping_file: Path, slow_reference: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    made: list[ProcessPoolExecutor] = []
    make = executor_backends._process_pool

    def recording(n: int) -> Any:
        made.append(make(n))
        return made[-1]

    monkeypatch.setattr(executor_backends, "_process_pool", recording)
    kw = {"coefficients": slow_mapping(mapping_file), "params": SLOW_PARAMS, "chunk_size": 5}
    out = tmp_path / "own.nc"
    t, box = in_thread(
        lambda: ts.sweep(
            ts.models.bhz(), SLOW_GRID, 2, out=out, executor="processes:2", **kw, **FAST
        )
    )
    wait_for_chunks(out, 3, t.is_alive)
    os.kill(next(iter(made[0]._processes)), signal.SIGKILL)
    t.join(60)
    assert not t.is_alive() and "error" not in box, box.get("error")
    box["value"].close()
    assert len(made) == 2  # rebuilt once
    same_but_the_nap(out, slow_reference)


def test_failing_task_is_retried_then_stops_keeping_what_finished() -> None:
    with ThreadPoolExecutor(2) as pool:
        job = FlakyJob(fails={3: 2})  # task 3 fails twice, then works
        with ChunkRunner(pool, job, retries=2) as runner:
            got = {r.task: (r.value, r.attempts) for r in runner.imap_unordered(range(6))}
        assert got == {i: (10 * i, 3 if i == 3 else 1) for i in range(6)}
        assert runner.failures == 2

        job = FlakyJob(fails={3: 99})
        seen: list[int] = []
        with pytest.raises(ExecutorError, match=r"task 3 failed 3 times.*OSError: flaky"):
            with ChunkRunner(pool, job, retries=2, in_flight=1) as runner:
                for r in runner.imap_unordered(range(6)):
                    seen.append(r.task)
        assert seen == [0, 1, 2]


BROKEN_DISK = {"on": True}


def mapping_with_a_bad_point(p: dict[str, float]) -> dict[str, float]:
    # (not at the grid's first, middle and last points, which the run's fingerprint maps
    # before any chunk: a mapping failing there stops the sweep before it starts)
    if BROKEN_DISK["on"] and 2.0 < p["m"] < 2.9:
        raise OSError("the model's data file is unreadable")
    return {"mass": p["m"]}


def test_chunk_failing_every_time_stops_the_sweep_keeping_the_rest(tmp_path: Path) -> None:
    grid = {"m": np.linspace(-3.0, 3.0, 30)}
    kw = {"coefficients": mapping_with_a_bad_point, "chunk_size": 3, **FAST}
    out = tmp_path / "stopped.nc"
    with ThreadPoolExecutor(2) as pool:
        with pytest.raises(ExecutorError, match=r"failed 3 times.*unreadable.*resume=True"):
            ts.sweep(ts.models.bhz(), grid, 2, out=out, executor=pool, **kw)
    kept = len(list(journal_path(out).glob("chunk-*.npz")))
    assert kept == 8  # every chunk below m = 2: those in flight at the stop were finished too
    BROKEN_DISK["on"] = False
    try:
        with ThreadPoolExecutor(2) as pool:
            ts.sweep(ts.models.bhz(), grid, 2, out=out, resume=True, executor=pool, **kw).close()
    finally:
        BROKEN_DISK["on"] = True
    ref = tmp_path / "ref.nc"
    BROKEN_DISK["on"] = False
    try:
        ts.sweep(ts.models.bhz(), grid, 2, out=ref, **kw).close()
    finally:
        BROKEN_DISK["on"] = True
    same_files(out, ref)


class Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_progress_bar_shows_workers_and_tasks(monkeypatch: pytest.MonkeyPatch) -> None:
    term = Terminal()
    monkeypatch.setattr(sys, "stderr", term)
    with ThreadPoolExecutor(2) as pool:
        ts.sweep(ts.models.bhz(), {"mass": np.linspace(-3, 3, 8)}, 2, executor=pool,
                 chunk_size=2, **{**FAST, "progress": True})  # fmt: skip
    last = re.split(r"[\r\n]+", term.getvalue().strip())[-1]
    assert "8/8" in last and re.search(r"2 workers, \d tasks, \d+ undefined", last), last


def test_tasks_in_flight_are_bounded() -> None:
    pulled = 0
    ahead: list[int] = []

    def tasks() -> Iterator[int]:
        nonlocal pulled
        for i in range(40):
            pulled += 1
            yield i

    with ThreadPoolExecutor(3) as pool, ChunkRunner(pool, ScaledSum(1)) as runner:
        assert runner.in_flight() == 6
        for n, _ in enumerate(runner.imap_unordered(tasks()), start=1):
            ahead.append(pulled - n)
    assert max(ahead) <= 6 and pulled == 40


def test_a_lambda_reaches_a_process_pool() -> None:
    with forkserver_pool(1) as pool, ChunkRunner(pool, LambdaJob(lambda x: x + 1)) as runner:
        assert [r.value for r in runner.imap_unordered([1])] == [2]


WITHOUT_DASK = textwrap.dedent(
    """
    import sys
    for name in ("dask", "distributed", "cloudpickle"):
        sys.modules[name] = None  # import fails as if not installed
    import numpy as np, toposweep as ts
    from toposweep.errors import ExecutorError
    grid = {"mass": np.linspace(-3.0, 3.0, 7)}
    here = ts.sweep(ts.models.bhz(), grid, 2, progress=False, loop_points=16, lines=9)
    there = ts.sweep(ts.models.bhz(), grid, 2, progress=False, loop_points=16, lines=9,
                     executor="processes:2")
    assert here.assign_attrs(created="").identical(there.assign_attrs(created=""))
    try:
        ts.sweep(ts.models.bhz(), grid, 2, progress=False, executor="local:2")
    except ExecutorError as exc:
        print(exc)
    """
)


def test_runs_without_dask_installed() -> None:
    proc = subprocess.run(
        [sys.executable, "-c", WITHOUT_DASK], capture_output=True, text=True, timeout=180
    )
    assert proc.returncode == 0, proc.stderr
    assert "pip install 'toposweep[dask]'" in proc.stdout


def test_executor_of_the_wrong_kind_is_refused() -> None:
    with pytest.raises(ts.ParameterError, match="concurrent.futures.Executor"):
        ts.sweep(ts.models.bhz(), {"mass": [1.0]}, 2, executor=object(), **FAST)
    with pytest.raises(ts.ParameterError, match="local:N"):
        ts.sweep(ts.models.bhz(), {"mass": [1.0]}, 2, executor="local:zero", **FAST)


# --- jobs of the tests (module level: they travel by reference) -------------------------------


class CountingJob:
    """Returns (pid, how many times this process unpickled a CountingJob)."""

    loads = 0

    def __setstate__(self, state: dict[str, Any]) -> None:
        type(self).loads += 1

    def __getstate__(self) -> dict[str, Any]:
        return {"x": 1}  # (an empty state would skip __setstate__)

    def __call__(self, task: Any, threads: int | None) -> tuple[int, int]:
        return os.getpid(), type(self).loads


class ThreadsJob:
    def __call__(self, task: Any, threads: int | None) -> int | None:
        return threads


class FailingJob:
    def __init__(self, exc: Exception) -> None:
        self.exc = exc

    def __call__(self, task: Any, threads: int | None) -> Any:
        raise self.exc


class FlakyJob:
    """``10 × task``, after failing ``fails[task]`` times (threads share the counts)."""

    def __init__(self, fails: dict[int, int]) -> None:
        self.fails = dict(fails)
        self.lock = threading.Lock()

    def __call__(self, task: int, threads: int | None) -> int:
        with self.lock:
            left = self.fails.get(task, 0)
            self.fails[task] = left - 1
        if left > 0:
            raise OSError("flaky")
        return 10 * task

    def __getstate__(self) -> dict[str, Any]:
        raise TypeError("thread pools only")


class LambdaJob:
    def __init__(self, f: Callable[[Any], Any]) -> None:
        self.f = f

    def __call__(self, task: Any, threads: int | None) -> Any:
        return self.f(task)
