"""Speed of each core of this machine over time: the first core alone, then all cores at once.

One process per core, pinned to it, evaluates the Wilson–Dirac point of ``make bench`` on one
thread in a loop and counts the calls it finishes in every half second. The first core works in
every half second; the others only in every other one, so windows where the first core runs
alone alternate with windows where all cores run. A threads gain of one call is at most the sum
of the cores' speeds while all work over the speed of one core working alone (the one-thread
call has the machine to itself). On a quiet machine that is the number of cores. On a shared
virtual machine it need not be: each virtual core's speed changes with what the host runs
beside it, and a core may run slower while the others work too.

Usage::

    .venv/bin/python benches/core_speeds.py [--seconds 15]

Prints a markdown table: calls per second of each core in each half second, and, for each
window of all cores after a window of the first alone, the sum of all over the one alone.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

#: one pinned process: waits for the common start time, then prints calls/s per window
#: (0 where it sat out); windows are fixed in wall time so that all processes agree on them
_WORKER = """
import os, sys, time
os.sched_setaffinity(0, {int(sys.argv[1])})
from toposweep import _core
import toposweep as ts
from toposweep.sampling import Sampling
wd = ts.models.wilson_dirac()
core, coeffs = wd.prepare([wd.resolve({"mass": -2.0})])
sys.path.insert(0, sys.argv[5])
from point_sampling import POINT_OPTIONS
kw = Sampling(**POINT_OPTIONS).core_kwargs()
run = lambda: _core.evaluate(core, coeffs, 2, inversion=None, threads=1, **kw)
for _ in range(50):
    run()
start, windows, always = float(sys.argv[2]), int(sys.argv[3]), sys.argv[4] == "always"
while time.time() < start:
    pass
rates = []
for w in range(windows):
    end = start + 0.5 * (w + 1)
    if not always and w % 2 == 0:
        time.sleep(max(0.0, end - time.time()))
        rates.append(0.0)
        continue
    n, t0 = 0, time.time()
    while time.time() < end:
        run()
        n += 1
    rates.append(n / (time.time() - t0))
print(*(f"{r:.0f}" for r in rates))
"""


def measure(seconds: float) -> tuple[list[int], list[list[float]]]:
    """The cores used and, per core, its calls/s in each half second (0: it sat out)."""
    cores = sorted(os.sched_getaffinity(0))
    windows = 2 * max(1, int(seconds))
    start = time.time() + 3.0  # (time for every process to import and warm up)
    procs = [
        subprocess.Popen(
            [
                sys.executable,
                "-c",
                _WORKER,
                str(c),
                str(start),
                str(windows),
                "always" if i == 0 else "alternate",
                str(Path(__file__).resolve().parent),  # (where point_sampling.py is)
            ],
            stdout=subprocess.PIPE,
            text=True,
        )
        for i, c in enumerate(cores)
    ]
    return cores, [list(map(float, p.communicate()[0].split())) for p in procs]


def ceilings(rates: list[list[float]]) -> list[float]:
    """For each window of all cores: their summed speed over the first core's speed alone in
    the window before it."""
    rows = list(zip(*rates, strict=True))
    return [sum(rows[w]) / rows[w - 1][0] for w in range(1, len(rows), 2)]


def speeds(rates: list[list[float]]) -> tuple[float, list[float]]:
    """Median calls/s of the first core alone, and of every core while all work."""
    alone = float(np.median(rates[0][0::2]))
    return alone, [float(np.median(r[1::2])) for r in rates]


def table(cores: list[int], rates: list[list[float]]) -> list[str]:
    """Markdown rows: each core's calls/s per half second, and the ceiling per pair."""
    out = [
        "| half second | "
        + " | ".join(f"core {c} (calls/s)" for c in cores)
        + " | all over one alone |",
        "|---:|" + "---:|" * len(cores) + "---:|",
    ]
    rows = list(zip(*rates, strict=True))
    c = ceilings(rates)
    for w, row in enumerate(rows):
        tail = f"{c[w // 2]:.2f}" if w % 2 else ""
        out.append(f"| {w + 1} | " + " | ".join(f"{x:.0f}" for x in row) + f" | {tail} |")
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=15.0)
    args = parser.parse_args()
    cores, rates = measure(args.seconds)
    print("\n".join(table(cores, rates)))
    c = sorted(ceilings(rates))
    print(f"\nall over one alone: median {c[len(c) // 2]:.2f}, range {c[0]:.2f}-{c[-1]:.2f}")


if __name__ == "__main__":
    main()
