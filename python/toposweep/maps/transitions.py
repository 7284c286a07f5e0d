"""Where the bulk gap closes on a segment of parameter space — every place it does.

Along p(s) = start + s (end − start), s ∈ [0, 1], the direct gap minimised over κ, g(s), has a
V-shaped dip where two insulators meet: near a band inversion g ≈ k_L (s* − s) on one side and
k_R (s − s*) on the other. A segment may hold several such dips (Wilson–Dirac between m = −2
and 2 closes at −1 and 1), so :func:`segment_search` first makes sure of how many there are:

- **Covering.** For a tight-binding model the coefficients are affine along the segment (or,
  with ``coefficients=``, known at the probed s), and by Weyl's inequality no band moves by
  more than δ(a, b) = Σ_term |Δc_term| B_term between two s (:mod:`.weyl_bound`). So between
  two probes a < b with g(a) + g(b) > 2 δ(a, b) + 2 floor the gap stays above the floor: no
  closing there — *given the gap search*, since a probe's gap is the gap search's minimum
  over κ, an estimate from above, not a proof. With ``coefficients=`` δ uses the coefficients
  at a and b, exact when they are affine between them.
- **Dips.** Every interior local minimum of the probed gaps (a run of probes under the floor
  counts as one), and an end lower than its neighbour with the part between them not covered,
  is searched in its window (the probes on either side of it) by :func:`_dip`. Parts that are
  neither covered, nor inside a located closing's open neighbours, nor on a straight branch of
  a located V are split at their midpoints (down to ``resolution``) and searched again. A model
  without the bound (``CallableModel``) gets the first scan only: dips closer together than its
  spacing may be taken for one.

:func:`_dip` intersects the two V branches (each a line through two points on the same side of
the lowest point so far: exact for a straight V, whatever its two slopes), with golden-section
steps whenever the bracket around the lowest point does not shrink fast enough. With two open
probes on each side on straight lines that meet at ~0, the V bounds the closing: if the lowest
probe's gap g_i < k_min · tol (k_min the smaller slope), the closing is within g_i / k_min of
it, and the search stops there. When the lowest probe is under the floor it first looks just
outside the closed core a straight V allows (probes within it would be closed too and tell
nothing); otherwise it brackets the lowest point to ``tol``. Then it tells a point-like closing
from a gapless interval: where g is under the gap floor farther from s* than the two slopes
allow, the edges of the closed region are bisected to ``tol`` and the interval is reported.

When nothing closes between two different phases and the indirect gap has opposite signs at
the ends — an insulator on one side, a metal (band overlap) on the other — the place where it
changes sign is located by the Illinois variant of regula falsi to ``tol`` (status 5), on full
evaluations (:class:`FullAsk`): the indirect gap is taken over the κ an evaluation visits, so
the edge is found on the same kind of evaluation that decided the phases.

The search is a generator that asks for lists of s and is sent the gaps there, so that
many segments — every boundary of a phase map — advance in lock step and each round of all of
them is one batch for the core (:mod:`toposweep.maps.segment_probes`). The gap comes from a
*probe*: the core's gap minimiser without any Wilson loop — the TRIMs and a uniform κ grid
start compass searches from the smallest sampled gaps.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Generator, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from .weyl_bound import band_shift_bounds

__all__ = [
    "STATUS",
    "FullAsk",
    "Probe",
    "SegmentResult",
    "between",
    "finish_statuses",
    "segment_search",
]

#: status codes of a located transition → CF flag meanings
STATUS: dict[int, str] = {
    0: "gap_closes_at_a_point",
    1: "gap_closed_over_an_interval",
    2: "no_closing_found_between_different_phases",
    3: "same_phase_no_closing",
    4: "same_phase_gap_closes_and_reopens",
    5: "bands_overlap_begins",
}
GOLDEN = 0.5 * (3.0 - math.sqrt(5.0))  # 0.382: golden-section step
MAX_ROUNDS = 80
#: a lowest probe under this many gap floors sits on the closing itself (see :func:`_dip`)
LANDED = 0.01


@dataclass(frozen=True)
class Probe:
    """A probe of the gap at one s.

    The direct gap's minimum over κ and where it is, the point's gap floor, its indirect gap
    and (for a tight-binding model) its term coefficients.
    """

    gap: float
    kappa: NDArray[np.float64]
    floor: float
    indirect: float = math.nan
    coeffs: NDArray[np.float64] | None = None


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


Search = Generator[list[float], list[Probe], list[SegmentResult]]


class FullAsk(list[float]):
    """s values a search wants evaluated in full (the caller's request), not probed.

    The indirect gap of a point is a sampled quantity (the band edges over every κ the
    evaluation visits), and a point's phase — a metal or not — is decided on the full
    evaluation's samples; an edge between the two is therefore located on the same kind of
    evaluation, or it would fall where the two samplings disagree rather than where the
    phase changes.
    """


#: a search inside a segment: yields the s it needs, reads the segment's shared probes after
Inner = Generator[list[float], None, Any]


def _gap(p: Probe) -> float:
    return p.gap if np.isfinite(p.gap) else math.inf


def _is_open(p: Probe) -> bool:
    return _gap(p) >= p.floor


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


@dataclass(frozen=True)
class _Vee:
    """Two straight branches: the lines through the two open probes nearest a dip per side."""

    apex: float  # where the lines meet
    value: float  # their value there (≈ 0 at a closing)
    k_left: float  # slopes, both positive
    k_right: float


def _vee(pts: dict[float, Probe], s_i: float, lo: float, hi: float) -> _Vee | None:
    """The V around the lowest probe ``s_i`` from two open probes strictly on each side.

    Open probes only (gap at least the floor): below it a gapless interval's gaps are noise
    of the gap search, on which lines could meet anywhere.
    """
    lines = []
    for side in (-1, 1):
        near = sorted(
            (x for x in pts if lo <= x <= hi and (x - s_i) * side > 0 and _is_open(pts[x])),
            key=lambda x: abs(x - s_i),
        )
        if len(near) < 2:
            return None
        a, b = near[0], near[1]
        lines.append((a, _gap(pts[a]), (_gap(pts[b]) - _gap(pts[a])) / (b - a)))
    (a1, g1, k1), (a2, g2, k2) = lines
    if not (k1 < 0 < k2):
        return None
    apex = (g2 - g1 + k1 * a1 - k2 * a2) / (k1 - k2)
    return _Vee(apex, g1 + k1 * (apex - a1), -k1, k2)


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


def _dip(pts: dict[float, Probe], wlo: float, whi: float, tol: float) -> Inner:
    """Locate the smallest gap in the window [wlo, whi] of a segment (see the module notes).

    Returns a :class:`SegmentResult` with status 0 (closes at a point) or 1 (closed over an
    interval), or None when the gap found there stays open (its ``probes`` are filled in by
    the segment's search).
    """

    def window() -> tuple[list[float], list[float]]:
        s = sorted(x for x in pts if wlo <= x <= whi)
        return s, [_gap(pts[x]) for x in s]

    def v_stop(s: list[float], g: list[float], i: int) -> SegmentResult | None:
        """The V model bounds the closing: it is within g_i / k_min of the lowest probe."""
        v = _vee(pts, s[i], wlo, whi)
        floor = pts[s[i]].floor
        if v is None or not abs(v.value) <= 2 * floor:  # straight lines through ~0
            return None
        k = min(v.k_left, v.k_right)
        if not g[i] < k * tol:
            return None
        reach = g[i] / k
        where = v.apex if abs(v.apex - s[i]) <= reach else s[i]
        return SegmentResult(
            where, s[i] - reach, s[i] + reach, g[i], pts[s[i]].kappa, 0, 0
        )  # fmt: skip

    widths: list[float] = []
    looked_out = False
    for _ in range(MAX_ROUNDS):
        s, g = window()
        i = int(np.argmin(g))
        done = v_stop(s, g, i)
        if done is not None:
            return done
        lo, hi = s[max(i - 1, 0)], s[min(i + 1, len(s) - 1)]
        if hi - lo <= 2 * tol + 1e-15:
            break
        widths.append(hi - lo)
        guess = _vfit(s, g, i)
        slow = len(widths) >= 3 and widths[-1] > 0.5 * widths[-3]
        if guess is None or slow or not lo < guess < hi:
            left, right = s[i] - lo, hi - s[i]
            guess = s[i] + GOLDEN * right if right >= left else s[i] - GOLDEN * left
        if abs(guess - s[i]) < tol / 2:  # the fit sits on the lowest point
            if not looked_out and g[i] < LANDED * pts[s[i]].floor:
                # the fit landed on the closing itself (a straight V, as Wilson–Dirac's):
                # probes at ±tol/2 would be closed too when the closed core is wider than tol
                # and tell nothing; look just outside the core a straight V allows instead:
                # with two open probes a side the V bounds the closing
                looked_out = True
                yield _outside(s, g, i, pts[s[i]].floor, tol, wlo, whi)
                done = v_stop(s, g, i)
                if done is not None:
                    return done
            yield [s[i] - tol / 2, s[i] + tol / 2]  # bracket it to tol
            continue
        yield [guess]
    s, g = window()
    i = int(np.argmin(g))
    done = v_stop(s, g, i)
    if done is not None:
        return done
    best = pts[s[i]]
    lo, hi = s[max(i - 1, 0)], s[min(i + 1, len(s) - 1)]
    if g[i] >= best.floor:
        return None
    if _straight_v({x: pts[x] for x in s}, s[i], best.floor):
        return SegmentResult(s[i], lo, hi, g[i], best.kappa, 0, 0)
    # point or interval: outside the half-widths a straight V allows, the gap must be open
    out_l, out_r = _outside(s, g, i, best.floor, tol, wlo, whi)
    yield [out_l, out_r]
    if _is_open(pts[out_l]) and _is_open(pts[out_r]):
        return SegmentResult(s[i], lo, hi, g[i], best.kappa, 0, 0)
    edges = []
    for side in (-1, 1):
        # outermost known open point on this side, then bisect the closed/open edge
        cands = [x for x in pts if wlo <= x <= whi and (x - s[i]) * side > 0 and _is_open(pts[x])]
        if not cands:
            edges.append(wlo if side < 0 else whi)
            continue
        a, b = s[i], min(cands, key=lambda x: abs(x - s[i]))
        while abs(b - a) > tol:
            m = 0.5 * (a + b)
            yield [m]
            a, b = (a, m) if _is_open(pts[m]) else (m, b)
        edges.append(0.5 * (a + b))
    return SegmentResult(s[i], edges[0], edges[1], g[i], best.kappa, 1, 0)


def _outside(
    s: list[float], g: list[float], i: int, floor: float, tol: float, wlo: float, whi: float
) -> list[float]:
    """The two s just outside the closed core a straight V through ``s[i]`` would have."""
    kl = (g[i - 1] - g[i]) / (s[i] - s[i - 1]) if i > 0 else math.inf
    kr = (g[i + 1] - g[i]) / (s[i + 1] - s[i]) if i + 1 < len(s) else math.inf
    reach_l = 3 * floor / kl + tol if kl > 0 else tol
    reach_r = 3 * floor / kr + tol if kr > 0 else tol
    return [max(wlo, s[i] - reach_l), min(whi, s[i] + reach_r)]


def _sign_change(pts: dict[float, Probe], a: float, b: float, tol: float) -> Inner:
    """Where the indirect gap changes sign between ``a`` and ``b`` (Illinois regula falsi).

    Returns the bracket (low, high), at most ``2 tol`` wide. A step that would land within
    ``tol / 2`` of an end is moved to ``tol`` inside it, so the bracket closes from both sides.
    """
    fa, fb = pts[a].indirect, pts[b].indirect
    last = 0
    for _ in range(MAX_ROUNDS):
        if b - a <= 2 * tol:
            break
        # (equal values — both ends at the same indirect gap, e.g. exactly 0 where the
        # phase changes for another reason — have no secant: halve the bracket instead)
        x = b - fb * (b - a) / (fb - fa) if fb != fa else 0.5 * (a + b)
        if not a < x < b:
            x = 0.5 * (a + b)
        x = min(max(x, a + tol), b - tol)
        if x not in pts:
            yield [x]
        fx = pts[x].indirect
        if not np.isfinite(fx):
            break
        if fx == 0:
            return x, x
        if (fx > 0) == (fb > 0):
            b, fb = x, fx
            if last == 1:
                fa *= 0.5
            last = 1
        else:
            a, fa = x, fx
            if last == -1:
                fb *= 0.5
            last = -1
    return a, b


def segment_search(
    ends: tuple[Probe, Probe],
    *,
    tol: float,
    same_phase: bool,
    interior: int = 3,
    bounds: NDArray[np.float64] | None = None,
    resolution: float = 1.0 / 64,
) -> Search:
    """Generator locating every gap closing of a segment (see the module notes).

    ``ends`` are the probes at s = 0 and 1; ``same_phase`` whether the two ends have the same
    indices (it chooses the status when nothing closes); ``bounds`` the term norm bounds
    B_term of a tight-binding model (:func:`~toposweep.maps.weyl_bound.term_norm_bounds`;
    the probes then carry their coefficients), None for a fixed scan of ``interior`` points.
    Yields lists of s, receives their probes, returns the closings ordered along the segment
    (status 0 or 1; :func:`finish_statuses` makes those between equal phases 4) — or, when
    nothing closes, one result: status 3 (same phase), 5 (the indirect gap changes sign) or 2.
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

    def run(inner: list[Inner]) -> Generator[list[float], list[Probe], list[Any]]:
        """Advance searches inside the segment in lock step: one batch per round."""
        out: list[Any] = [None] * len(inner)
        wants, done = step_all(dict(enumerate(inner)), lambda k: None)
        while True:
            for k, v in done.items():
                out[k] = v
            if not wants:
                return out
            yield from ask([x for w in wants.values() for x in w])
            wants, done = step_all({k: inner[k] for k in wants}, lambda k: None)

    g0, g1 = _gap(ends[0]), _gap(ends[1])
    if interior == 1 and not same_phase and 0 < g0 < math.inf and 0 < g1 < math.inf:
        # a V with equal slopes through both ends: exact for a band inversion driven by a
        # term whose sign flips (Wilson–Dirac mass), a near guess otherwise; the V fit and the
        # golden-section fallback take it from there as from the midpoint
        yield from ask([min(0.99, max(0.01, g0 / (g0 + g1)))])
    else:
        yield from ask([(j + 1) / (interior + 1) for j in range(interior)])

    closings: list[SegmentResult] = []
    zones: list[tuple[float, float]] = []  # parts of the segment a search has explained

    def explained(a: float, b: float) -> bool:
        if any(lo <= a and b <= hi for lo, hi in zones):
            return True
        pa, pb = pts[a], pts[b]
        ga, gb = _gap(pa), _gap(pb)
        if not (ga < math.inf and gb < math.inf):
            return False
        floor = max(pa.floor, pb.floor)
        if bounds is not None and pa.coeffs is not None and pb.coeffs is not None:
            delta = float(band_shift_bounds(pa.coeffs, pb.coeffs, bounds))
            if ga + gb > 2 * delta + 2 * floor:  # Weyl: open all the way from a to b
                return True
        for c in closings:  # on a straight branch of a located closing
            x = c.fraction
            if c.status == 0 and (b <= x or a >= x):
                at_x = ga + (gb - ga) * (x - a) / (b - a)
                if abs(at_x) <= 2 * floor:
                    return True
        return False

    def zone_of(lo: float, hi: float) -> tuple[float, float]:
        """From the nearest open probe below ``lo`` to the nearest above ``hi``."""
        below = [x for x in pts if x <= lo and _is_open(pts[x])]
        above = [x for x in pts if x >= hi and _is_open(pts[x])]
        return (max(below) if below else 0.0, min(above) if above else 1.0)

    for _ in range(MAX_ROUNDS):
        s = sorted(pts)
        g = [_gap(pts[x]) for x in s]
        windows = []
        closed = [g[i] < pts[x].floor for i, x in enumerate(s)]
        i = 0
        while i < len(s):
            j = i  # a run of closed probes counts as one dip
            while closed[i] and j + 1 < len(s) and closed[j + 1]:
                j += 1
            left = g[i - 1] if i > 0 else math.inf
            right = g[j + 1] if j + 1 < len(s) else math.inf
            low = min(g[i : j + 1])
            interior_dip = i > 0 and j + 1 < len(s) and low < left and low <= right
            # an end lower than its neighbour, with the gap bound not proving the part
            # between them open: a dip may lie there (the first guess stays off the ends)
            end_dip = (
                bounds is not None
                and len(s) > 1
                and ((i == 0 and low < right and not explained(s[0], s[1]))
                     or (j == len(s) - 1 and low < left and not explained(s[-2], s[-1])))
            )  # fmt: skip
            if (closed[i] or interior_dip or end_dip) and not any(
                lo <= s[k] <= hi for lo, hi in zones for k in range(i, j + 1)
            ):
                windows.append((s[max(i - 1, 0)], s[min(j + 1, len(s) - 1)]))
            i = j + 1
        if windows:
            found = yield from run([_dip(pts, lo, hi, tol) for lo, hi in windows])
            for (lo, hi), res in zip(windows, found, strict=True):
                if res is None:
                    zones.append((lo, hi))
                else:
                    closings.append(res)
                    zones.append(zone_of(res.low, res.high))
            continue
        s = sorted(pts)
        if bounds is None:
            break  # a fixed scan: the dips it shows are all there is to find
        split = [
            0.5 * (a + b)
            for a, b in zip(s[:-1], s[1:], strict=True)
            if b - a > resolution and not explained(a, b)
        ]
        if not split:
            break
        yield from ask(split)

    s = sorted(pts)
    if not closings and (bounds is None or not all(
        explained(a, b) for a, b in zip(s[:-1], s[1:], strict=True)
    )):  # fmt: skip
        # nothing found and nothing proves the gap open: search around the lowest gap seen
        (res,) = yield from run([_dip(pts, 0.0, 1.0, tol)])
        if res is not None:
            closings.append(res)
    if closings:
        closings.sort(key=lambda r: r.fraction)
        for r in closings:
            r.probes = asked
        return closings
    s = sorted(pts)
    g = [_gap(pts[x]) for x in s]
    i = int(np.argmin(g))
    best = pts[s[i]]
    lo, hi = s[max(i - 1, 0)], s[min(i + 1, len(s) - 1)]
    if same_phase:
        return [SegmentResult(s[i], lo, hi, g[i], best.kappa, 3, asked)]
    f0, f1 = ends[0].indirect, ends[1].indirect
    if not (np.isfinite(f0) and np.isfinite(f1) and (f0 < 0) != (f1 < 0)):
        return [SegmentResult(s[i], lo, hi, g[i], best.kappa, 2, asked)]
    # the direct gap stays open but the bands begin to overlap: locate the indirect gap's
    # change of sign on full evaluations, as the phases at the ends were decided
    full: dict[float, Probe] = {0.0: ends[0], 1.0: ends[1]}
    root = _sign_change(full, 0.0, 1.0, tol)
    try:
        want = next(root)
        while True:
            fresh = [x for x in want if x not in full]
            if fresh:
                got = yield FullAsk(fresh)
                asked += len(fresh)
                full.update(zip(fresh, got, strict=True))
            want = root.send(None)
    except StopIteration as stop:
        low, high = stop.value
    f_lo, f_hi = full[low].indirect, full[high].indirect
    x = low if f_hi == f_lo else low - f_lo * (high - low) / (f_hi - f_lo)
    x = min(high, max(low, x))
    near = full[min(full, key=lambda y: abs(y - x))]  # κ of the direct gap's minimum there
    return [SegmentResult(x, low, high, _gap(near), near.kappa, 5, asked)]


def step_all(
    gens: dict[int, Generator[Any, Any, Any]], sent: Callable[[int], Any]
) -> tuple[dict[int, Any], dict[int, Any]]:
    """Advance every generator one step, sending ``sent(k)`` (None starts a fresh one).

    Returns what the running ones ask next and what the finished ones returned, by key, in the
    order of ``gens``: the one lock-step pattern of the searches and of
    :func:`toposweep.maps.segment_probes.locate_segments`.
    """
    asks: dict[int, Any] = {}
    done: dict[int, Any] = {}
    for k, gen in gens.items():
        try:
            asks[k] = gen.send(sent(k))
        except StopIteration as stop:
            done[k] = stop.value
    return asks, done


def finish_statuses(results: list[SegmentResult], labels: Sequence[int]) -> None:
    """Make the closings between equal phases 4 (``labels``: the phases between closings).

    ``labels`` has one entry more than ``results``: the phase before the first closing, between
    each two, after the last (−1: undefined, never equal to another).
    """
    for k, r in enumerate(results):
        if r.status in (0, 1) and labels[k] >= 0 and labels[k] == labels[k + 1]:
            r.status = 4


def between(results: list[SegmentResult]) -> list[float]:
    """The s halfway between consecutive closings (where the phases between them are taken)."""
    return [0.5 * (a.high + b.low) for a, b in zip(results[:-1], results[1:], strict=True)]
