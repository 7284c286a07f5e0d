"""The threads gain of one ``invariants()`` call beside that of a call with nothing serial in it.

``_core.fork_join_probe`` spreads equal tasks of pure arithmetic (246, as many as the point has
pump lines) over the same pools as the engine, sized so that one thread takes as long as the
Wilson–Dirac point of ``make bench``. Its gain from a second thread is what this machine gives a
fork–join call of that length at that moment: unlike two whole processes side by side
(``core_speeds.py``), a call must wait at its end for its last task, and on a virtual machine
for a worker whose virtual CPU the host has paused. Rounds of the four calls are interleaved,
so both gains see the same moments; each is the median over rounds of one-thread time over
all-core time (``timing.paired_gain``), given with a 95 % bootstrap interval over the rounds
(``timing.gain_interval``).

Usage::

    .venv/bin/python benches/fork_join_gain.py [--rounds 30]
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

# (as in run_all.py: NumPy's BLAS on one thread, so its threads do not compete with ours)
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402
import toposweep as ts  # noqa: E402
from toposweep import _core  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from point_sampling import POINT_OPTIONS  # noqa: E402
from timing import (  # noqa: E402
    ONE_THREAD,
    HostSteal,
    OnOneThread,
    best_time,
    gain_text,
    paired_gain,
    round_times,
)

#: tasks of the probe: the point's 6 planes × 41 lines
TASKS = 246


def measure(rounds: int) -> tuple[dict[str, tuple[float, float, float, str]], HostSteal]:
    """Per call ("invariants()", "probe"): best one-thread and all-core time (s), paired gain
    and the gain with its interval as text; and the host's steal during the rounds."""
    cores = os.cpu_count() or 1
    model = ts.models.wilson_dirac()

    def point(threads: int) -> object:
        return ts.invariants(model, 2, {"mass": -2.0}, threads=threads, **POINT_OPTIONS)

    # the probe's length: its one-thread time scaled to the point's
    t_point = best_time(OnOneThread(lambda: point(1)), 5, 0.05)
    t_unit = best_time(OnOneThread(lambda: _core.fork_join_probe(TASKS, 1000, threads=1)), 5, 0.05)
    iterations = max(1, round(1000 * t_point / t_unit))

    def probe(threads: int) -> object:
        return _core.fork_join_probe(TASKS, iterations, threads=threads)

    with HostSteal() as steal:
        times = round_times(
            [
                OnOneThread(lambda: point(1)),
                lambda: point(cores),
                OnOneThread(lambda: probe(1)),
                lambda: probe(cores),
            ],
            rounds,
            min_seconds=0.035,
        )
    best = [min(column) for column in zip(*times, strict=True)]
    return {
        "invariants()": (best[0], best[1], paired_gain(times, 0, 1), gain_text(times, 0, 1)),
        "probe": (best[2], best[3], paired_gain(times, 2, 3), gain_text(times, 2, 3)),
    }, steal


def table(rounds: int) -> list[str]:
    """Markdown rows: both calls, the point's gain as a share of the probe's, and the host's
    steal meanwhile."""
    res, steal = measure(rounds)
    cores = os.cpu_count() or 1
    out = [
        f"| call | 1 thread (ms) | {cores} threads (ms) | threads gain (95 % interval) |",
        "|---|---:|---:|---:|",
    ]
    names = {
        "invariants()": "`invariants()`, Wilson–Dirac point of table (b)",
        "probe": f"`_core.fork_join_probe`: {TASKS} equal tasks, same one-thread time",
    }
    for key, (t1, tn, _, gain) in res.items():
        out.append(f"| {names[key]} | {t1 * 1e3:.2f} | {tn * 1e3:.2f} | {gain} |")
    share = (res["invariants()"][2] - 1) / (res["probe"][2] - 1)
    out.append(
        f"| the point's extra speed from more threads, as a share of the probe's | | | "
        f"{share:.0%} |"
    )
    out.append(f"| CPU time the host took away during these rounds (steal) | | | {steal.text()} |")
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=120, help="interleaved rounds (default 120)")
    args = parser.parse_args()
    # the main thread's first call joins the pool of all cores (see timing.CallerThread)
    _core.eigh(np.eye(4, dtype=complex)[None], threads=os.cpu_count())
    ONE_THREAD.run(lambda: None)
    print("\n".join(table(args.rounds)))


if __name__ == "__main__":
    main()
