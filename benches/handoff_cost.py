"""What handing a call to a pool of sleeping threads costs, against running it on the caller.

The same two-thread calls are made from the main thread — which is one of the workers of its
own calls (``src/pools.rs``), so only the helper needs waking — and from another thread,
whose calls go to the shared pool: a sleeping worker takes the call, and the caller sleeps
until it is done. Rounds alternate between the two callers; each call follows ~100 µs of
Python work, as in a loop of calls, so the pool's threads have gone to sleep.

Usage::

    .venv/bin/python benches/handoff_cost.py [--calls 400]

Prints the median and the quartiles of each kind of call, in µs.
"""

from __future__ import annotations

import argparse
import os
import queue
import threading
import time

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402
import toposweep as ts  # noqa: E402
from toposweep import _core  # noqa: E402


def spin(seconds: float) -> None:
    """Python work between calls (busy, so this thread does not sleep)."""
    end = time.perf_counter() + seconds
    while time.perf_counter() < end:
        pass


def timed_calls(f, calls: int) -> list[float]:
    out = []
    for _ in range(calls):
        spin(100e-6)
        t0 = time.perf_counter()
        f()
        out.append(time.perf_counter() - t0)
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--calls", type=int, default=400)
    args = parser.parse_args()
    h = np.eye(4, dtype=complex)[None]
    bhz = ts.models.bhz()
    cases = {
        "`_core.eigh` of one 4×4": lambda: _core.eigh(h, threads=2),
        "BHZ `invariants()` (default sampling)": lambda: ts.invariants(
            bhz, 2, {"mass": -1.0}, threads=2
        ),
    }
    jobs: queue.Queue = queue.Queue()
    results: queue.Queue = queue.Queue()

    def other_thread() -> None:
        while True:
            job = jobs.get()
            results.put(job())

    threading.Thread(target=other_thread, daemon=True).start()
    print("| two-thread call | made from | median (µs) | quartiles (µs) |")
    print("|---|---|---:|---:|")
    for label, f in cases.items():
        main_t: list[float] = []
        other_t: list[float] = []
        f()
        jobs.put(f)
        results.get()
        per_round = max(1, args.calls // 8)
        for _ in range(8):
            main_t += timed_calls(f, per_round)
            jobs.put(lambda f=f, n=per_round: timed_calls(f, n))
            other_t += results.get()
        for who, t in (("the main thread (its own pool)", main_t), ("another thread", other_t)):
            q1, med, q3 = 1e6 * np.percentile(t, [25, 50, 75])
            print(f"| {label} | {who} | {med:.1f} | {q1:.1f}–{q3:.1f} |")


if __name__ == "__main__":
    main()
