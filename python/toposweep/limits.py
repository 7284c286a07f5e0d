"""Estimates of memory, disk and time before a run starts; refusals of what cannot fit.

A model of thousands of orbitals, or a grid of 10¹⁴ points, is accepted by every check of
meaning — and then asks the system for tens of gigabytes at once, or runs for millennia. These
estimates are coarse upper bounds, meant to tell a possible run from an impossible one, and a
refusal says what to change:

* **memory of one point.** A model whose Hamiltonian is a Python function gets the κ points in
  batches of at most 32 MiB of Hamiltonians (:data:`BATCH_BYTES`) but at least 2^dim κ points
  (:func:`batch_points`, the core's rule), a Wilson-line batch at least one whole loop; at the
  start of a point three batches are alive side by side (the TRIMs, the first of the 3D bulk
  gap grid, the first of the Wilson lines). A tight-binding model builds one Wilson line per
  worker. Each κ point holds an n×n complex matrix (16 n² bytes) and about as much again for
  its eigenvectors and the function's own arrays (factor :data:`COPIES`).
* **the result.** ~:data:`BYTES_PER_POINT` per grid point in memory, and the same on disk for
  the journal and again for the final file.
* **time.** ~:data:`EIGH_SECONDS_PER_N3` × n³ per Hermitian eigendecomposition (n ≥ 16; the
  design notes' NumPy figure for n = 64, 0.55 ms, is 2.1 ns × n³), about
  ``planes × lines × loop_points`` of them per point. A point of more than
  :data:`MAX_SECONDS` is refused, one of more than :data:`SLOW_POINT_SECONDS` announced.
"""

from __future__ import annotations

import math
import os
import shutil
import warnings
from pathlib import Path
from typing import Any

from .errors import ParameterError

__all__ = [
    "SlowPointWarning",
    "available_memory",
    "batch_points",
    "check_grid",
    "check_point_memory",
    "point_estimate",
]

#: bytes of a point's results (indices, gaps, plane Z2s, diagnostics; ~30 variables)
BYTES_PER_POINT = 400
#: matrices held per κ point of a batch: H, eigenvectors, the callback's own array
COPIES = 3
#: a Wilson-line batch of a batch source (the core's BATCH_BYTES)
BATCH_BYTES = 32 << 20
#: seconds per n³ of one Hermitian eigendecomposition (n ≥ 16), an upper estimate
EIGH_SECONDS_PER_N3 = 2.5e-9
#: a run estimated to take longer than this is refused (split it over machines or files)
MAX_SECONDS = 365 * 24 * 3600.0
#: fraction of the available memory a run may plan to use
MEMORY_SHARE = 0.8


def available_memory() -> int | None:
    """Bytes of memory available to new allocations (``MemAvailable``), None if unknown."""
    try:
        with open("/proc/meminfo") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
    except (ValueError, OSError, AttributeError):
        return None


def _size(n: float) -> str:
    """Bytes in words: '33 GB'.

    Examples
    --------
    >>> _size(3.28e10), _size(5e5)
    ('32.8 GB', '0.5 MB')
    """
    return f"{n / 1e9:,.1f} GB" if n >= 1e9 else f"{n / 1e6:.1f} MB"


def _duration(seconds: float) -> str:
    for unit, length in (("years", 365 * 86400.0), ("days", 86400.0), ("hours", 3600.0)):
        if seconds >= length:
            return f"{seconds / length:.3g} {unit}"
    return f"{seconds:.3g} s"


def batch_points(norb: int, dim: int) -> int:
    """κ points per batch of a Python-function model (the core's ``wilson::batch_points``).

    As many as :data:`BATCH_BYTES` of n×n complex Hamiltonians hold, at least 2^dim (the
    TRIMs are one batch), in multiples of four.

    Examples
    --------
    >>> batch_points(4, 3), batch_points(128, 3), batch_points(2000, 3), batch_points(2000, 1)
    (131072, 128, 8, 4)
    """
    fit = BATCH_BYTES // max(16 * norb * norb, 1)
    return -(-max(fit, 2**dim) // 4) * 4


def point_estimate(model: Any, sampling: Any, workers: int) -> tuple[float, float, str]:
    """(bytes at once, seconds on ``workers``, what takes the bytes) of one point.

    Examples
    --------
    >>> import toposweep as ts
    >>> m = ts.models.wilson_dirac()
    >>> b, t, what = point_estimate(m, ts.Sampling(), 1)
    >>> b < 1e7 and t < 1.0
    True
    """
    n, dim = int(model.norb), int(model.dim)
    matrix = 16.0 * n * n * COPIES
    loop = max(int(sampling.loop_points), 2) * (2 if sampling.certify else 1)
    planes = 6 if dim == 3 else 1
    batched = not hasattr(model, "add")  # a tight-binding model builds lines in place
    if batched:
        # three batches side by side at the start of a point (the core's first pass)
        block = batch_points(n, dim)
        trims = min(2**dim, block)
        grid = min(int(sampling.gap_points) ** dim if dim == 3 else 0, block)
        lines_batch = max(BATCH_BYTES // (16 * n * n * loop), 1) * loop
        need = (trims + grid + lines_batch) * matrix
        what = (
            f"three batches side by side: {trims} TRIMs, {grid} points of the bulk gap grid "
            f"and Wilson lines of {lines_batch} κ points"
            if grid
            else f"two batches side by side: {trims} TRIMs and Wilson lines of {lines_batch} "
            "κ points"
        )
    else:
        need = workers * loop * matrix
        what = f"one Wilson line of {loop} κ points on each of {workers} worker(s)"
    solves = planes * int(sampling.lines) * loop + int(sampling.gap_points) ** dim + 8
    seconds = solves * EIGH_SECONDS_PER_N3 * max(n, 16) ** 3 / max(workers, 1)
    return need, seconds, what


class SlowPointWarning(UserWarning):
    """One parameter point will take long (a model of many orbitals): said before it starts."""


#: a point estimated to take longer than this is announced (SlowPointWarning)
SLOW_POINT_SECONDS = 60.0


def check_point_memory(model: Any, sampling: Any, threads: int | None) -> None:
    """Refuse a point that cannot fit in memory or takes over a year; warn if it is slow.

    The limit of time is :data:`MAX_SECONDS`, the warning comes after
    :data:`SLOW_POINT_SECONDS`. Reads the system's memory only when the estimate is above
    256 MiB (so small models pay nothing but the arithmetic).
    """
    workers = threads or os.cpu_count() or 1
    need, seconds, what = point_estimate(model, sampling, workers)
    if seconds > MAX_SECONDS:
        raise ParameterError(
            f"one point of this {model.norb}-orbital model would take about "
            f"{_duration(seconds)} on {workers} thread(s) ({model.norb}×{model.norb} "
            "eigendecompositions, planes × lines × loop_points of them): lower lines and "
            "loop_points, or reduce the model (fewer orbitals per cell)"
        )
    if seconds > SLOW_POINT_SECONDS:
        warnings.warn(
            f"one point of this {model.norb}-orbital model will take about "
            f"{_duration(seconds)} on {workers} thread(s) (thousands of eigendecompositions "
            f"of {model.norb}×{model.norb} matrices); lower loop_points and lines for a "
            "first look",
            SlowPointWarning,
            stacklevel=4,
        )
    if need < (256 << 20):
        return
    have = available_memory()
    if have is None or need <= MEMORY_SHARE * have:
        return
    if "batches" in what:  # a Wilson line is one batch: its κ points decide
        hint = "lower loop_points (or certify=False: half the κ points per line)"
    else:
        hint = "lower loop_points, use fewer threads"
    raise ParameterError(
        f"a point of this {model.norb}-orbital model needs about {_size(need)} at once "
        f"({what}; {COPIES} n×n complex matrices per κ point), but {_size(have)} of memory "
        f"are available: {hint}, or run it on a machine with more memory"
    )


def check_grid(
    model: Any,
    sampling: Any,
    threads: int | None,
    points: int,
    out: str | os.PathLike[str] | None,
) -> None:
    """Refuse a grid whose result cannot be held (memory, disk) or computed (time).

    The message says into how many parts to split the grid.
    """
    workers = threads or os.cpu_count() or 1
    _, per_point, _ = point_estimate(model, sampling, workers)
    result = float(points) * BYTES_PER_POINT
    problems: list[tuple[float, str]] = []
    if out is None:
        have = available_memory()
        if have is not None and result > MEMORY_SHARE * have:
            problems.append(
                (
                    result / (MEMORY_SHARE * have),
                    f"its result takes about {_size(result)} of memory, {_size(have)} are "
                    "available (out= streams it to a file instead)",
                )
            )
    else:
        folder = Path(os.fspath(out)).resolve().parent
        try:
            free = shutil.disk_usage(folder).free
        except OSError:
            free = None
        if free is not None and 2 * result > free:
            problems.append(
                (
                    2 * result / max(free, 1),
                    f"its journal and file take up to {_size(2 * result)} on disk, {_size(free)} "
                    f"are free in {folder}",
                )
            )
    total = per_point * points
    if total > MAX_SECONDS:
        problems.append(
            (total / MAX_SECONDS, f"it would take about {_duration(total)} on {workers} thread(s)")
        )
    if problems:
        parts = math.ceil(max(f for f, _ in problems))
        raise ParameterError(
            f"a grid of {points:,} points is too large: "
            + "; ".join(why for _, why in problems)
            + f". Split it into at least {parts:,} parts (sweep a slice of one axis per call, "
            "each with its own out= file), or use fewer grid values"
        )
