"""Where the time of one ``invariants()`` call goes: Python before the core, the Python job
beside it, the core, and Python after it.

The Wilson–Dirac point of ``make bench`` (fixed sampling) is evaluated many times on one and on
all cores. Each call is timed in parts, by wrapping ``_core.evaluate`` as ``evaluation`` sees
it (the wrapper adds ~1 µs):

- before: from the call until the core is entered (argument checks, sampling, the model's
  coefficients);
- side job: the symmetry checks and the result Dataset's layout, which run on the calling
  thread while a second worker starts on the points (first, then the points, with one
  worker);
- core: from entering the core until it returns (the side job included);
- after: from the core's return until ``invariants()`` returns (the results copied in).

Usage::

    .venv/bin/python benches/studies/call_timeline.py [--calls 400]

Prints the fastest call, the tenth percentile and the median of each part, in µs, per thread
count. The parts of one call need not add up across columns of different rows.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

# (as in run_all.py: NumPy's BLAS on one thread, so its threads do not compete with ours)
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402
import toposweep as ts  # noqa: E402
from toposweep import evaluation  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from point_sampling import POINT_OPTIONS  # noqa: E402

PARTS = ("before", "side job", "core", "after", "whole call")


def timeline(threads: int, calls: int) -> np.ndarray:
    """Per call, the parts (µs) in the order of :data:`PARTS`."""
    marks: dict[str, float] = {}
    core = evaluation._core.evaluate

    def timed_core(*args, alongside=None, **kwargs):
        def side() -> object:
            marks["side_in"] = time.perf_counter()
            targets = alongside()  # (the arrays the core writes into: passed on, as given)
            marks["side_out"] = time.perf_counter()
            return targets

        marks["core_in"] = time.perf_counter()
        out = core(*args, alongside=None if alongside is None else side, **kwargs)
        marks["core_out"] = time.perf_counter()
        return out

    model = ts.models.wilson_dirac()

    def call() -> None:
        ts.invariants(model, 2, {"mass": -2.0}, threads=threads, **POINT_OPTIONS)

    evaluation._core.evaluate = timed_core
    try:
        for _ in range(30):
            call()
        rows = []
        for _ in range(calls):
            t0 = time.perf_counter()
            call()
            t1 = time.perf_counter()
            m = marks
            rows.append(
                [
                    m["core_in"] - t0,
                    m["side_out"] - m["side_in"],
                    m["core_out"] - m["core_in"],
                    t1 - m["core_out"],
                    t1 - t0,
                ]
            )
    finally:
        evaluation._core.evaluate = core
    return 1e6 * np.array(rows)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--calls", type=int, default=400)
    args = parser.parse_args()
    print("| threads | statistic | " + " | ".join(f"{p} (µs)" for p in PARTS) + " |")
    print("|---:|---|" + "---:|" * len(PARTS))
    for threads in sorted({1, os.cpu_count() or 1}):
        t = timeline(threads, args.calls)
        fastest = t[np.argmin(t[:, -1])]
        for label, row in (
            ("fastest call", fastest),
            ("10th percentile", np.percentile(t, 10, axis=0)),
            ("median", np.median(t, axis=0)),
        ):
            print(f"| {threads} | {label} | " + " | ".join(f"{x:.0f}" for x in row) + " |")


if __name__ == "__main__":
    main()
