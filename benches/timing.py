"""Timing helpers of the benchmarks: interleaved rounds, paired threads gains, the thread that
makes every one-thread call, and the share of the CPUs' time the host took away meanwhile.

Used by ``run_all.py`` and the single-purpose scripts beside it.
"""

from __future__ import annotations

import queue
import threading
import time
from collections.abc import Callable
from typing import TypeVar

import numpy as np

T = TypeVar("T")


class CallerThread:
    """A thread of its own that makes calls for the main thread and returns their results.

    A thread works in the pool of the first thread count it asks for and hands calls of other
    counts to shared pools (DEVELOPERS.md, "Threads"), as an application that uses one count
    per thread never notices. So every one-thread call of the benchmarks is made from this
    thread, and the main thread makes the calls with all cores: each count is timed as its
    users meet it.
    """

    def __init__(self) -> None:
        self._jobs: queue.Queue = queue.Queue()
        self._results: queue.Queue = queue.Queue()
        threading.Thread(target=self._serve, name="one-thread calls", daemon=True).start()

    def _serve(self) -> None:
        while True:
            job = self._jobs.get()
            try:
                self._results.put((True, job()))
            except BaseException as e:  # raised again on the main thread
                self._results.put((False, e))

    def run(self, job: Callable[[], T]) -> T:
        """``job()`` on this thread; its result (or its exception, raised here)."""
        self._jobs.put(job)
        ok, value = self._results.get()
        if not ok:
            raise value
        return value


#: makes every ``threads=1`` call of the benchmarks (see :class:`CallerThread`)
ONE_THREAD = CallerThread()


class OnOneThread:
    """A function whose timing loops :func:`best_times` runs on :data:`ONE_THREAD`."""

    def __init__(self, f: Callable[[], object]) -> None:
        self.f = f

    def __call__(self) -> object:
        return ONE_THREAD.run(self.f)


def best_time(f: Callable[[], object], repeats: int, min_seconds: float = 0.2) -> float:
    """Best wall time of one call over `repeats` rounds (each round long enough to time)."""
    return best_times([f], repeats, min_seconds)[0]


def best_times(fs: list[Callable[[], object]], repeats: int, min_seconds: float = 0.2) -> list:
    """Like :func:`best_time` for several functions, interleaved round by round, so that every
    function sees the same changes of machine load (ratios stay fair on a shared machine).
    The rounds of an :class:`OnOneThread` function run on :data:`ONE_THREAD`."""
    return [min(column) for column in zip(*round_times(fs, repeats, min_seconds), strict=True)]


def round_times(
    fs: list[Callable[[], object]], rounds: int, min_seconds: float = 0.2
) -> list[list[float]]:
    """Time per call of each function in each round (``[round][function]``), interleaved."""

    def round_of(f: Callable[[], object]) -> float:
        n, t0 = 0, time.perf_counter()
        while True:
            f()
            n += 1
            dt = time.perf_counter() - t0
            if dt >= min_seconds or n >= 1000:
                return dt / n

    def timed(f: Callable[[], object]) -> float:
        if isinstance(f, OnOneThread):
            return ONE_THREAD.run(lambda: round_of(f.f))
        return round_of(f)

    for f in fs:
        f()
    return [[timed(f) for f in fs] for _ in range(rounds)]


def paired_gain(times: list[list[float]], one: int, many: int) -> float:
    """Threads gain: the median over rounds of (one-thread time) / (all-core time).

    Each round times both right after each other. On this VM the two virtual cores change
    speed independently, for seconds at a time (one ran a third slower than the other for
    12 s while both were busy); a ratio of best times would set the fastest moment of one
    core against the fastest moment of both at once, which is rarer.
    """
    return float(np.median([r[one] / r[many] for r in times]))


def gain_interval(
    times: list[list[float]], one: int, many: int, resamples: int = 2000
) -> tuple[float, float]:
    """95 % interval of :func:`paired_gain`: the rounds resampled with replacement.

    A percentile bootstrap (Efron, Ann. Statist. 7, 1 (1979); from memory) of the median of
    the per-round ratios, with a fixed seed, so the same times give the same interval. It
    says how far the median of these rounds could move with other rounds of the same
    moments; a host that changes between runs moves it further.

    Examples
    --------
    >>> times = [[2.0, 1.0]] * 10 + [[1.5, 1.0]] * 10
    >>> gain_interval(times, 0, 1)
    (1.5, 2.0)
    """
    ratios = np.array([r[one] / r[many] for r in times])
    rng = np.random.default_rng(0)
    medians = np.median(rng.choice(ratios, (resamples, len(ratios))), axis=1)
    lo, hi = np.percentile(medians, [2.5, 97.5])
    return float(lo), float(hi)


def gain_text(times: list[list[float]], one: int, many: int) -> str:
    """``"1.85× (1.76–1.93)"``: :func:`paired_gain` and its :func:`gain_interval`.

    Examples
    --------
    >>> gain_text([[2.0, 1.0]] * 10 + [[1.5, 1.0]] * 10, 0, 1)
    '1.75× (1.50–2.00)'
    """
    lo, hi = gain_interval(times, one, many)
    return f"{paired_gain(times, one, many):.2f}× ({lo:.2f}–{hi:.2f})"


def cpu_ticks(path: str = "/proc/stat") -> tuple[int, int] | None:
    """(stolen, all) clock ticks of all CPUs since boot, from Linux's /proc/stat; None elsewhere.

    "Steal" is time a virtual CPU was ready to run but the hypervisor ran something else on
    the physical core (common practice, no source: the eighth field of the ``cpu`` line, see
    proc(5)).
    """
    try:
        with open(path) as f:
            fields = f.readline().split()
    except OSError:
        return None
    if len(fields) < 9 or fields[0] != "cpu":
        return None
    # user nice system idle iowait irq softirq steal (guest time is counted in user already)
    ticks = [int(x) for x in fields[1:9]]
    return ticks[7], sum(ticks)


class HostSteal:
    """The share of all CPUs' time the host took away while the ``with`` block ran.

    On a shared virtual machine a threads gain is capped by it: with both virtual CPUs busy
    the host may run other guests on their physical cores. Resolution is a clock tick (10 ms),
    so meaningful for blocks of a second or more.

    Examples
    --------
    >>> with HostSteal() as steal:
    ...     busy = sum(range(10**6))
    >>> steal.share is None or 0.0 <= steal.share <= 1.0
    True
    """

    def __init__(self) -> None:
        self.share: float | None = None

    def __enter__(self) -> HostSteal:
        self._start = cpu_ticks()
        return self

    def __exit__(self, *exc: object) -> None:
        end = cpu_ticks()
        if self._start is not None and end is not None and end[1] > self._start[1]:
            self.share = (end[0] - self._start[0]) / (end[1] - self._start[1])

    def text(self) -> str:
        """The share in per cent, or "n/a" where the system does not report it."""
        return "n/a" if self.share is None else f"{100 * self.share:.0f} %"
