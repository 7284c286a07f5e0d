"""Where the bulk gap closes on a segment of parameter space.

Along p(s) = start + s (end − start), s ∈ [0, 1], the direct gap minimised over κ, g(s), has a
V-shaped dip where two insulators meet: near a band inversion g ≈ k_L (s* − s) on one side and
k_R (s − s*) on the other. :func:`segment_search` finds s* by intersecting the two branches,
each a line through two points on the same side of the lowest point so far (exact for a
straight V, whatever its two slopes), with golden-section steps whenever the bracket around the
lowest point does not shrink fast enough. It stops when both neighbours of the lowest point are
within ``tol`` of it. Then it tells a point-like closing from a gapless interval: where g is
under the gap floor farther from s* than the two slopes allow, the edges of the closed region
are bisected to ``tol`` and the interval is reported.

The search is a generator that asks for lists of s values and is sent the gaps there, so that
many segments — every boundary of a phase map — advance in lock step and each round of all of
them is one batch for the core. The gap comes from a *probe*: the core's evaluation with the
Wilson-loop work cut to the least the core accepts (the gap minimiser — κ grid, TRIMs, compass
search from the smallest sampled gaps — is what is used).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Generator, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ..evaluation import Request, prepare_request, run_points
from ..sampling import Sampling
from ..tightbinding import TightBinding

__all__ = [
    "STATUS",
    "Probe",
    "SegmentResult",
    "locate_segments",
    "probe_request",
    "segment_search",
]

#: status codes of a located transition → CF flag meanings
STATUS: dict[int, str] = {
    0: "gap_closes_at_a_point",
    1: "gap_closed_over_an_interval",
    2: "no_closing_found_between_different_phases",
    3: "same_phase_no_closing",
    4: "same_phase_gap_closes_and_reopens",
}
GOLDEN = 0.5 * (3.0 - math.sqrt(5.0))  # 0.382: golden-section step
MAX_ROUNDS = 80


@dataclass(frozen=True)
class Probe:
    """The gap at one s: minimum over κ, where it is, and the point's gap floor."""

    gap: float
    kappa: NDArray[np.float64]
    floor: float


@dataclass
class SegmentResult:
    """A located transition (fractions of the segment, 0 at its start)."""

    fraction: float
    low: float
    high: float
    gap: float
    kappa: NDArray[np.float64]
    status: int
    probes: int


Search = Generator[list[float], list[Probe], SegmentResult]


def _vfit(s: Sequence[float], g: Sequence[float], i: int) -> float | None:
    """Intersection of the two V branches around the lowest point ``i`` (None: no estimate)."""
    n = len(s)
    if i == 0 or i == n - 1:
        return None

    def slope(j: int, k: int) -> float:
        return (g[k] - g[j]) / (s[k] - s[j])

    a, b, c = i - 1, i, i + 1
    k_ab, k_bc = -slope(a, b), slope(b, c)  # both positive on a dip
    if k_ab <= 0 or k_bc <= 0:
        return None
    if k_ab >= k_bc:  # b lies on the left branch: s* in [b, c]
        kl = k_ab
        kr = slope(c, c + 1) if c + 1 < n and slope(c, c + 1) > 0 else kl
        x = (g[b] + kl * s[b] - g[c] + kr * s[c]) / (kl + kr)
        return x if s[b] <= x <= s[c] else s[b] + g[b] / kl
    kr = k_bc
    kl = -slope(a - 1, a) if a - 1 >= 0 and -slope(a - 1, a) > 0 else kr
    x = (g[a] + kl * s[a] - g[b] + kr * s[b]) / (kl + kr)
    return x if s[a] <= x <= s[b] else s[b] - g[b] / kr


def _straight_v(pts: dict[float, Probe], star: float, floor: float) -> bool:
    """Whether the two open points nearest to ``star`` on each side lie on lines through ~0.

    Then the gap closes linearly from both sides at ``star`` — a point, not an interval.
    """
    for side in (-1, 1):
        open_ = sorted(
            (x for x, p in pts.items() if (x - star) * side > 0 and p.gap >= floor),
            key=lambda x: abs(x - star),
        )
        if len(open_) < 2:
            return False
        a, b = open_[0], open_[1]
        at_star = pts[a].gap + (pts[b].gap - pts[a].gap) * (star - a) / (b - a)
        if not abs(at_star) <= 2 * floor:
            return False
    return True


def segment_search(
    ends: tuple[Probe, Probe], *, tol: float, same_phase: bool, interior: int = 3
) -> Search:
    """Generator locating the smallest gap of a segment (see the module notes).

    ``ends`` are the probes at s = 0 and 1; ``same_phase`` whether the two ends have the same
    indices (it only chooses the status). Yields lists of s, receives their probes, returns a
    :class:`SegmentResult`.
    """
    pts: dict[float, Probe] = {0.0: ends[0], 1.0: ends[1]}
    asked = 0

    def ask(values: list[float]) -> Generator[list[float], list[Probe], None]:
        nonlocal asked
        fresh = sorted({min(1.0, max(0.0, v)) for v in values} - set(pts))
        if fresh:
            got = yield fresh
            asked += len(fresh)
            pts.update(zip(fresh, got, strict=True))

    def gap_of(p: Probe) -> float:
        return p.gap if np.isfinite(p.gap) else math.inf

    g0, g1 = gap_of(ends[0]), gap_of(ends[1])
    if interior == 1 and not same_phase and 0 < g0 < math.inf and 0 < g1 < math.inf:
        # a V with equal slopes through both ends: exact for a band inversion driven by a
        # term whose sign flips (Wilson–Dirac mass), a near guess otherwise; the V fit and the
        # golden-section fallback take it from there as from the midpoint
        yield from ask([min(0.95, max(0.05, g0 / (g0 + g1)))])
    else:
        yield from ask([(j + 1) / (interior + 1) for j in range(interior)])
    widths: list[float] = []
    for _ in range(MAX_ROUNDS):
        s = sorted(pts)
        g = [gap_of(pts[x]) for x in s]
        i = int(np.argmin(g))
        lo, hi = s[max(i - 1, 0)], s[min(i + 1, len(s) - 1)]
        if hi - lo <= 2 * tol + 1e-15:
            break
        widths.append(hi - lo)
        guess = _vfit(s, g, i)
        slow = len(widths) >= 3 and widths[-1] > 0.5 * widths[-3]
        if guess is None or slow or not lo < guess < hi:
            left, right = s[i] - lo, hi - s[i]
            guess = s[i] + GOLDEN * right if right >= left else s[i] - GOLDEN * left
        if abs(guess - s[i]) < tol / 2:  # the fit sits on the lowest point: bracket it to tol
            yield from ask([s[i] - tol / 2, s[i] + tol / 2])
            continue
        yield from ask([guess])
    s = sorted(pts)
    g = [gap_of(pts[x]) for x in s]
    i = int(np.argmin(g))
    best = pts[s[i]]
    lo, hi = s[max(i - 1, 0)], s[min(i + 1, len(s) - 1)]
    closed = g[i] < best.floor
    if not closed:
        status = 3 if same_phase else 2
        return SegmentResult(s[i], lo, hi, g[i], best.kappa, status, asked)
    if _straight_v(pts, s[i], best.floor):  # both branches already seen to be straight lines
        status = 4 if same_phase else 0
        return SegmentResult(s[i], lo, hi, g[i], best.kappa, status, asked)
    # point or interval: outside the half-widths a straight V allows, the gap must be open
    kl = (g[i - 1] - g[i]) / (s[i] - s[i - 1]) if i > 0 else math.inf
    kr = (g[i + 1] - g[i]) / (s[i + 1] - s[i]) if i + 1 < len(s) else math.inf
    reach_l = 3 * best.floor / kl + tol if kl > 0 else tol
    reach_r = 3 * best.floor / kr + tol if kr > 0 else tol
    out_l, out_r = max(0.0, s[i] - reach_l), min(1.0, s[i] + reach_r)
    yield from ask([out_l, out_r])
    if gap_of(pts[out_l]) >= pts[out_l].floor and gap_of(pts[out_r]) >= pts[out_r].floor:
        status = 4 if same_phase else 0
        return SegmentResult(s[i], lo, hi, g[i], best.kappa, status, asked)
    edges = []
    for inside, side in ((s[i], -1), (s[i], 1)):
        # outermost known open point on this side, then bisect the closed/open edge
        cands = [x for x in pts if (x - inside) * side > 0 and gap_of(pts[x]) >= pts[x].floor]
        if not cands:
            edges.append(0.0 if side < 0 else 1.0)
            continue
        a, b = inside, min(cands, key=lambda x: abs(x - inside))
        while abs(b - a) > tol:
            m = 0.5 * (a + b)
            yield from ask([m])
            a, b = (a, m) if gap_of(pts[m]) >= pts[m].floor else (m, b)
        edges.append(0.5 * (a + b))
    status = 4 if same_phase else 1
    return SegmentResult(s[i], edges[0], edges[1], g[i], best.kappa, status, asked)


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


def probes_of(raw: dict[str, NDArray]) -> list[Probe]:
    """Probes from the core's flat arrays."""
    return [
        Probe(
            float(raw["gap_direct"][j]),
            np.array(raw["gap_kappa"][j], float),
            float(raw["gap_floor"][j]),
        )  # fmt: skip
        for j in range(len(raw["gap_direct"]))
    ]


def locate_segments(
    probe: Request,
    searches: list[Search],
    point_at: Callable[[int, float], dict[str, float]],
    *,
    batch: int = 512,
    stop: Callable[[], bool] = lambda: False,
) -> list[SegmentResult]:
    """Run searches in lock step; ``point_at(j, s)`` is the model point of segment j at s."""
    results: list[SegmentResult | None] = [None] * len(searches)
    asks: dict[int, list[float]] = {}
    for j, gen in enumerate(searches):
        try:
            asks[j] = next(gen)
        except StopIteration as done:
            results[j] = done.value
    while asks:
        order = [(j, x) for j in sorted(asks) for x in asks[j]]
        found: list[Probe] = []
        for k in range(0, len(order), batch):
            part = order[k : k + batch]
            found += probes_of(run_points(probe, [point_at(j, x) for j, x in part]))
            if stop():
                raise KeyboardInterrupt
        by_seg: dict[int, list[Probe]] = {}
        for (j, _), p in zip(order, found, strict=True):
            by_seg.setdefault(j, []).append(p)
        nxt: dict[int, list[float]] = {}
        for j in sorted(asks):
            try:
                nxt[j] = searches[j].send(by_seg[j])
            except StopIteration as done:
                results[j] = done.value
        asks = nxt
    return [r for r in results if r is not None]
