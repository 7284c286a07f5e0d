"""A 3D sweep on a local Dask cluster against the in-process sweep, and the cost of a task.

(a) points/s of the same Wilson–Dirac mass × hopping sweep (default sampling) run in this
    process on all cores and on a ``LocalCluster`` of as many one-thread worker processes,
    in interleaved rounds (both see the same host load); the ratio per round, its median and
    range;
(b) the per-task overhead: the round trip of trivial tasks (no work) through the cluster and
    through a process pool — submission, scheduling, transfer of the result, the caller's
    bookkeeping — as the wall time per task times the slots (what one slot loses per task);
(c) what the caller does per finished chunk: the journal write (``.npz``, fsync, rename);
(d) the caller's peak memory (``ru_maxrss``, a fresh process each) for a 2D sweep to a file on
    a ``LocalCluster`` of 2 workers, against the number of points (full run only).

Usage::

    .venv/bin/python benches/cluster_speed.py [--quick] [--rounds 3]
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import toposweep as ts
from toposweep.cluster.executors import ChunkRunner, ScaledSum, executor_from_spec
from toposweep.results.store import Journal
from toposweep.sweep_executor import evaluate_range
from toposweep.sweep_plan import make_plan

sys.path.insert(0, str(Path(__file__).resolve().parent))
from baseline_models import stacked_wilson_dirac  # noqa: E402


def cases(quick: bool) -> list[tuple[str, ts.TightBinding, dict[str, np.ndarray], int]]:
    """(label, model, grid, filling): a cheap 4-band point (~1 ms) and a 16-band one."""
    n = 16 if quick else 40
    wd = {"mass": np.linspace(-4.0, 4.0, n), "hopping": np.linspace(0.5, 1.5, n)}
    stack = {"shift": np.linspace(-0.2, 0.2, 8 if quick else 24)}
    return [
        ("Wilson–Dirac, 4 bands, mass × hopping", ts.models.wilson_dirac(), wd, 2),
        ("16 coupled bands, dense, shift", stacked_wilson_dirac(4, seed=2), stack, 8),
    ]


def sweep_rates(
    client: object, model: ts.TightBinding, g: dict[str, np.ndarray], filling: int, rounds: int
) -> tuple[list[float], list[float], int]:
    """Points/s in this process and on the cluster, rounds interleaved; results compared."""
    n = int(np.prod([len(v) for v in g.values()]))
    small = {k: v[:2] for k, v in g.items()}
    ts.sweep(model, small, filling, progress=False)  # one-off set-up costs of both, untimed
    ts.sweep(model, small, filling, progress=False, executor=client)
    here, there = [], []
    for _ in range(rounds):
        t0 = time.perf_counter()
        a = ts.sweep(model, g, filling, progress=False)
        here.append(n / (time.perf_counter() - t0))
        t0 = time.perf_counter()
        b = ts.sweep(model, g, filling, progress=False, executor=client)
        there.append(n / (time.perf_counter() - t0))
        assert a.assign_attrs(created="").identical(b.assign_attrs(created=""))
    return here, there, n


def task_overhead(executor: object, tasks: int) -> float:
    """Seconds one slot spends per trivial task (wall per task × slots)."""
    with ChunkRunner(executor, ScaledSum(1)) as runner:
        list(runner.imap_unordered(range(runner.slots * 2)))  # warm: every worker has the job
        t0 = time.perf_counter()
        list(runner.imap_unordered(range(tasks)))
        return (time.perf_counter() - t0) / tasks * runner.slots


def _identity(x: int) -> int:
    return x


def plain_dask_overhead(client: object, tasks: int) -> float:
    """The same for Dask's own ``client.map`` + ``as_completed`` (no window, no job)."""
    import distributed

    client.submit(_identity, -1, pure=False).result()  # type: ignore[attr-defined]
    t0 = time.perf_counter()
    futures = client.map(_identity, range(tasks), pure=False)  # type: ignore[attr-defined]
    for f in distributed.as_completed(futures):
        f.result()
    slots = sum(client.nthreads().values())  # type: ignore[attr-defined]
    return (time.perf_counter() - t0) / tasks * slots


def journal_write(points: int, repeats: int = 20) -> tuple[float, int]:
    """Median seconds of one journal write of ``points`` points of a 3D sweep, and its bytes."""
    model = ts.models.wilson_dirac()
    samp = ts.Sampling()
    from toposweep.evaluation import prepare_request

    req = prepare_request(model, 2, inversion=None, sampling=samp)
    plan = make_plan(req, {"mass": np.linspace(-4, 4, points)}, params=None, coefficients=None)
    raw = evaluate_range(plan, 0, points, None)
    with tempfile.TemporaryDirectory() as tmp:
        journal = Journal.start(Path(tmp) / "j.nc", plan.identity, False)
        times = []
        for i in range(repeats):
            t0 = time.perf_counter()
            journal.save(i * points, (i + 1) * points, raw)
            times.append(time.perf_counter() - t0)
        size = (journal.path / journal._name(0, points)).stat().st_size
        journal.remove()
    return statistics.median(times), size


CALLER = r"""
import json, resource, sys, tempfile, time
import numpy as np, toposweep as ts
from toposweep.cluster.executors import executor_from_spec
if __name__ == "__main__":
    n = int(sys.argv[1])
    rows = int(np.sqrt(n)); cols = n // rows
    grid = {"mass": np.linspace(-3, 3, rows), "hopping": np.linspace(0.2, 2, cols)}
    with executor_from_spec("local:2") as (client, _), tempfile.TemporaryDirectory() as tmp:
        ts.sweep(ts.models.bhz(), {"mass": [1.0]}, 2, progress=False, executor=client)
        before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        t0 = time.perf_counter()
        ts.sweep(ts.models.bhz(), grid, 2, out=tmp + "/m.nc", progress=False, executor=client,
                 loop_points=12, lines=7).close()
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        print(json.dumps({"points": rows * cols, "before": before, "peak": peak,
                          "seconds": time.perf_counter() - t0}))
"""


def caller_memory(points: int) -> dict[str, float]:
    """Peak RSS (KiB) of a fresh caller before and after a sweep of ``points`` on a cluster."""
    import json
    import subprocess

    with tempfile.TemporaryDirectory() as tmp:
        script = Path(tmp) / "caller.py"  # (a file: the workers import the caller's main)
        script.write_text(CALLER)
        proc = subprocess.run(
            [sys.executable, str(script), str(points)], capture_output=True, text=True, check=True
        )
    return json.loads(proc.stdout.strip().splitlines()[-1])


def table(quick: bool = False, rounds: int = 3) -> list[str]:
    """Markdown lines of the three measurements."""
    cores = os.cpu_count() or 1
    out = [
        f"| 3D sweep, default sampling | points | in-process, {cores} threads "
        f"(points/s) | LocalCluster {cores} × 1 thread (points/s) | cluster / in-process |",
        "|---|---:|---:|---:|---:|",
    ]
    with executor_from_spec(f"local:{cores}") as (client, _):
        for label, model, g, filling in cases(quick):
            here, there, n = sweep_rates(client, model, g, filling, rounds)
            ratios = [b / a for a, b in zip(here, there, strict=True)]
            rows = " / ".join(f"{r:.2f}" for r in ratios)
            out.append(
                f"| {label} | {n} | {statistics.median(here):.1f} | "
                f"{statistics.median(there):.1f} | **{statistics.median(ratios):.2f}** "
                f"(rounds: {rows}) |"
            )
        out += [
            "",
            "| per-task overhead (trivial tasks; wall per task × slots) | ms |",
            "|---|---:|",
        ]
        tasks = 100 if quick else 400
        dask_cost = [task_overhead(client, tasks) for _ in range(3)]
        plain_cost = [plain_dask_overhead(client, tasks) for _ in range(3)]
    with executor_from_spec(f"processes:{cores}") as (pool, _):
        pool_cost = [task_overhead(pool, tasks) for _ in range(3)]
    for label, cost in (
        ("Dask LocalCluster, ChunkRunner", dask_cost),
        ("Dask LocalCluster, plain client.map + as_completed (reference)", plain_cost),
        ("process pool (processes:N), ChunkRunner", pool_cost),
    ):
        out.append(
            f"| {label} | {1e3 * statistics.median(cost):.2f} "
            f"({1e3 * min(cost):.2f}–{1e3 * max(cost):.2f}) |"
        )
    out += ["", "| caller: journal write of one chunk | points | KiB | ms |"]
    out += ["|---|---:|---:|---:|"]
    for points in (16, 256):
        seconds, size = journal_write(points)
        kib, ms = size / 1024, 1e3 * seconds
        out.append(f"| .npz + fsync + rename | {points} | {kib:.0f} | {ms:.1f} |")
    if not quick:
        out += [
            "",
            "| caller on a LocalCluster, 2D sweep to a file | points | peak RSS before "
            "the sweep (MiB) | peak RSS after (MiB) | time (s) |",
            "|---|---:|---:|---:|---:|",
        ]
        for points in (2_000, 40_000):
            r = caller_memory(points)
            out.append(
                f"| bhz, `loop_points=12, lines=7` | {r['points']:,} | {r['before'] / 1024:.0f} "
                f"| {r['peak'] / 1024:.0f} | {r['seconds']:.1f} |"
            )
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a smaller grid and fewer tasks")
    parser.add_argument("--rounds", type=int, default=3, help="interleaved rounds (default 3)")
    args = parser.parse_args()
    print("\n".join(table(args.quick, args.rounds)))


if __name__ == "__main__":
    sys.exit(main())
