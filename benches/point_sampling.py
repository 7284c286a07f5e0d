"""The fixed sampling of the per-point benchmarks (table (b) of ``make bench`` and every script
that times the same Wilson–Dirac point), written once.

6 planes × 41 pump lines × 40 κ per loop, the 8 TRIMs and the 8³ bulk gap grid. The gap
minimiser and the convergence certificate are off: the NumPy baseline has neither, and both
sample more κ than it does.
"""

from __future__ import annotations

#: keyword arguments of ``toposweep.invariants`` / ``toposweep.Sampling``
POINT_OPTIONS: dict[str, int | bool] = {
    "loop_points": 40,
    "lines": 41,
    "max_lines": 41,
    "gap_points": 8,
    "gap_starts": 0,
    "certify": False,
}
