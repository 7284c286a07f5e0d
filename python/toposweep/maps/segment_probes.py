"""Gap probes along segments, many segments at once.

What the searches of :mod:`toposweep.maps.transitions` ask for. A search is a generator that
yields the fractions s of its segment it wants probed and is sent the probes there;
:func:`locate_segments` runs every search of a map in lock step, so each round of all of them
is one batch for the core. A probe (:func:`run_probes`) is the core's gap minimiser without any
Wilson loop; a :class:`~toposweep.maps.transitions.FullAsk` is answered by a full evaluation
instead (metal edges: the indirect gap over the κ an evaluation visits).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .. import _core
from ..evaluation import Request, prepare_request, run_points
from ..sampling import Sampling
from ..tightbinding import TightBinding
from .transitions import FullAsk, Probe, Search, SegmentResult, step_all

__all__ = ["coefficient_rows", "locate_segments", "probe_request", "probes_of", "run_probes"]


def probe_request(req: Request) -> Request:
    """A request whose evaluation yields the gap minimum cheaply (indices not to be used).

    In 3D the bulk grid and the TRIMs give the gap minimiser its starting points, so the
    Wilson loops are cut to two pump lines of the fewest loop points the model allows; in 2D
    the loop κ points are the only other starts, so the lines are kept (without insertion or
    certificate).
    """
    samp = req.sampling
    reach = req.model.reach if isinstance(req.model, TightBinding) else 1
    if req.model.dim == 3:
        probe: Sampling = dataclasses.replace(
            samp,
            loop_points=max(4, 2 * reach + 1),
            lines=2,
            max_lines=2,
            certify=False,
            method="wilson",
        )
    else:
        probe = dataclasses.replace(samp, max_lines=samp.lines, certify=False, method="wilson")
    if "prove_gap" in {f.name for f in dataclasses.fields(Sampling)}:
        probe = dataclasses.replace(probe, prove_gap="never")  # the estimate is what is used
    return prepare_request(req.model, req.filling, inversion=None, sampling=probe,
                           threads=req.threads)  # fmt: skip


def probes_of(
    raw: Mapping[str, NDArray[Any]], coeffs: NDArray[np.float64] | None = None
) -> list[Probe]:
    """Probes from the core's flat arrays (``coeffs``: the points' term coefficient rows)."""
    ind = raw.get("gap_indirect")
    return [
        Probe(
            float(raw["gap_direct"][j]),
            np.array(raw["gap_kappa"][j], float),
            float(raw["gap_floor"][j]),
            math.nan if ind is None else float(ind[j]),
            None if coeffs is None else coeffs[j],
        )
        for j in range(len(raw["gap_direct"]))
    ]


#: κ points per axis of the probes' grid in 2D (in 3D: the sampling's ``gap_points``, as the
#: bulk grid of an evaluation); the Wilson loops' κ points are the 2D evaluation's only starts
#: of its gap search, 21 × 32 by default
PROBE_GRID_2D = 16


def run_probes(req: Request, points: Sequence[Mapping[str, float]]) -> dict[str, NDArray[Any]]:
    """The gap at resolved points without Wilson loops (``_core.probe_gaps``).

    The TRIMs and a uniform κ grid start the request's gap minimiser. Returns ``gap_direct``,
    ``gap_kappa``, ``gap_floor`` and ``gap_indirect``, as an evaluation gives them.
    """
    samp = req.sampling
    dim = req.model.dim
    core, coeffs = req.model.prepare(list(points))
    return _core.probe_gaps(
        core,
        np.ascontiguousarray(coeffs, dtype=float),
        req.filling,
        grid=max(samp.gap_points, 2) if dim == 3 else max(PROBE_GRID_2D, samp.gap_points),
        starts=max(samp.gap_starts, 1),
        gap_floor=samp.core_kwargs()["gap_floor"],
        threads=req.threads,
    )


def coefficient_rows(model: Any, points: Sequence[Mapping[str, float]]) -> NDArray[np.float64]:
    """Term coefficients of resolved points of a tight-binding model (rows: points)."""
    terms = model.terms
    return np.array([[p[t] for t in terms] for p in points], float).reshape(len(points), len(terms))


def locate_segments(
    probe: Request,
    searches: list[Search],
    point_at: Callable[[int, float], dict[str, float]],
    *,
    batch: int = 512,
    stop: Callable[[], bool] = lambda: False,
    with_coefficients: bool = False,
    full: Request | None = None,
) -> list[list[SegmentResult]]:
    """Run searches in lock step; ``point_at(j, s)`` is the model point of segment j at s.

    Returns each segment's results. ``with_coefficients``: give every probe its term
    coefficients (the searches were given the model's norm bounds). ``full``: the request
    for the s a search asks as :class:`FullAsk` (default: ``probe``).
    """
    results: list[list[SegmentResult]] = [[] for _ in searches]
    asks, done = step_all(dict(enumerate(searches)), lambda j: None)
    while True:
        for j, r in done.items():
            results[j] = r
        if not asks:
            return results
        by_seg: dict[int, list[Probe]] = {}
        for kind in (False, True):
            req = (full or probe) if kind else probe
            order = [(j, x) for j in sorted(asks) if isinstance(asks[j], FullAsk) == kind
                     for x in asks[j]]  # fmt: skip
            found: list[Probe] = []
            for k in range(0, len(order), batch):
                points = [point_at(j, x) for j, x in order[k : k + batch]]
                rows = coefficient_rows(probe.model, points) if with_coefficients else None
                raw = run_points(req, points) if kind else run_probes(req, points)
                found += probes_of(raw, rows)
                if stop():
                    raise KeyboardInterrupt
            for (j, _), p in zip(order, found, strict=True):
                by_seg.setdefault(j, []).append(p)
        asks, done = step_all({j: searches[j] for j in sorted(asks)}, by_seg.__getitem__)
