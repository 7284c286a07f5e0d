"""Speed of each core of this machine over time, all cores busy at once.

One process per core, pinned to it, evaluates the Wilson–Dirac point of ``make bench`` on one
thread in a loop and counts the calls it finishes in every half second; all start together.
On a quiet machine every column stays flat and all columns agree. On a shared virtual machine
they need not: each virtual core's speed changes with what the host runs beside it, and a
threads gain of one call is bounded by the sum of its cores' speeds over the fastest one.

Usage::

    .venv/bin/python benches/core_speeds.py [--seconds 15]

Prints a markdown table: calls per second of each core in each half second, and the sum of
the cores over the fastest one.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time

#: one pinned process: waits for the common start time, then prints calls/s per window
_WORKER = """
import os, sys, time
os.sched_setaffinity(0, {int(sys.argv[1])})
from toposweep import _core
import toposweep as ts
from toposweep.sampling import Sampling
wd = ts.models.wilson_dirac()
core, coeffs = wd.prepare([wd.resolve({"mass": -2.0})])
kw = Sampling(loop_points=40, lines=41, max_lines=41, gap_starts=0, certify=False).core_kwargs()
run = lambda: _core.evaluate(core, coeffs, 2, inversion=None, threads=1, **kw)
for _ in range(50):
    run()
start, windows = float(sys.argv[2]), int(sys.argv[3])
while time.time() < start:
    pass
rates = []
for _ in range(windows):
    n, t0 = 0, time.perf_counter()
    while time.perf_counter() - t0 < 0.5:
        run()
        n += 1
    rates.append(n / (time.perf_counter() - t0))
print(*(f"{r:.0f}" for r in rates))
"""


def measure(seconds: float) -> tuple[list[int], list[list[float]]]:
    """The cores used and, per core, its calls/s in each half second (all busy at once)."""
    cores = sorted(os.sched_getaffinity(0))
    windows = max(1, int(seconds / 0.5))
    start = time.time() + 3.0  # (time for every process to import and warm up)
    procs = [
        subprocess.Popen(
            [sys.executable, "-c", _WORKER, str(c), str(start), str(windows)],
            stdout=subprocess.PIPE,
            text=True,
        )
        for c in cores
    ]
    return cores, [list(map(float, p.communicate()[0].split())) for p in procs]


def ceilings(rates: list[list[float]]) -> list[float]:
    """Per half second: the sum of the cores' speeds over the fastest core's."""
    return [sum(row) / max(row) for row in zip(*rates, strict=True)]


def table(cores: list[int], rates: list[list[float]]) -> list[str]:
    """Markdown rows: each core's calls/s per half second, and sum over fastest."""
    out = [
        "| half second | "
        + " | ".join(f"core {c} (calls/s)" for c in cores)
        + " | sum / fastest |",
        "|---:|" + "---:|" * len(cores) + "---:|",
    ]
    for w, (row, c) in enumerate(zip(zip(*rates, strict=True), ceilings(rates), strict=True)):
        out.append(f"| {w + 1} | " + " | ".join(f"{x:.0f}" for x in row) + f" | {c:.2f} |")
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=15.0)
    args = parser.parse_args()
    cores, rates = measure(args.seconds)
    print("\n".join(table(cores, rates)))
    c = sorted(ceilings(rates))
    print(f"\nsum / fastest: median {c[len(c) // 2]:.2f}, range {c[0]:.2f}-{c[-1]:.2f}")


if __name__ == "__main__":
    main()
