"""Which points of a grid an adaptive phase map evaluates, and how it vouches for the rest.

The grid is covered by cells — boxes of grid points, first every ``coarse_step``-th point per
axis (ends included), split at their midpoints until they are one spacing wide. A cell whose
evaluated points all have the same defined indices is *settled*: each point of it that was not
evaluated is

* **proven** when some evaluated point q of the cell has a proven gap (``gap_proven``) larger
  than twice the band-shift bound δ(p, q) of :mod:`toposweep.maps.weyl_bound` — then the gap cannot
  close between q and p, and p has q's indices. The proofs are asked for here, not at
  evaluation: a settled cell's points that no proven gap covers yet ask the corner whose
  measured gap covers them best for a proof of just 2δ (``prove``) — a target far under the
  gap is proven with a few boxes, where proving the gap itself costs as much as the point;
* else **filled by agreement** (unless forbidden): for tight-binding models when the same test
  passes with the measured gap (``gap_direct``, a minimum found by search, not a proof); for
  other models when every evaluated point's gap exceeds ``agreement_gap``.

Any other cell is split and the corners of its children are evaluated in the next round, so
boundaries end up between evaluated neighbours one spacing apart. Everything here is plain
NumPy over flat C-order point indices; the caller evaluates the points (``evaluate``), which
keeps the order of the work deterministic — a resumed run asks for the same points in the same
order.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from .weyl_bound import band_shift_bounds

__all__ = ["EVALUATED", "FILLED", "PROVEN", "PointTable", "auto_coarse_step", "refine"]

#: how a point of a phase map was obtained (the values of the ``obtained`` flag variable)
EVALUATED, PROVEN, FILLED = 0, 1, 2
#: label of a point that was not evaluated (yet); defined labels are ≥ 0, undefined −1
UNSEEN = -2
#: default agreement threshold for models without a band-shift bound, relative to the largest
#: bandwidth among the cell's evaluated points
AGREEMENT_SHARE = 0.02
#: a proof is asked for at most this share of the point's measured gap (the share the core's
#: own proof aims at, ``gap_proof::TARGET_SHARE``: nearer the gap the boxes get small)
PROOF_SHARE = 0.5
#: a proof asks this much more than the cell needs, so that the finer cells that share the
#: corner later are covered by the same proof
PROOF_HEADROOM = 2.5
#: a batch of at least this many proofs of which fewer than half succeed ends the asking: the
#: model's gaps are then mostly beyond what a proof's budget covers, and a failed proof costs
#: its whole budget (the d–f lattice: 2 of 98 proven, against 100 % on Wilson–Dirac and
#: Kane–Mele)
PROOF_GIVE_UP = 8
#: :func:`_decide`'s answer for a cell waiting for the proofs it asked for
WAIT = "wait"

Cell = tuple[tuple[int, ...], tuple[int, ...]]


@dataclass
class PointTable:
    """Per-point state over the flat grid, updated by the caller as points are evaluated."""

    shape: tuple[int, ...]
    label: NDArray[np.int64] = field(init=False)
    gap_direct: NDArray[np.float64] = field(init=False)
    gap_proven: NDArray[np.float64] = field(init=False)
    bandwidth: NDArray[np.float64] = field(init=False)
    #: the smallest proof target that failed at a point (inf: none failed)
    proof_failed: NDArray[np.float64] = field(init=False)

    def __post_init__(self) -> None:
        n = math.prod(self.shape)
        self.label = np.full(n, UNSEEN, np.int64)
        self.gap_direct = np.full(n, np.nan)
        self.gap_proven = np.full(n, np.nan)
        self.bandwidth = np.full(n, np.nan)
        self.proof_failed = np.full(n, np.inf)

    @property
    def evaluated(self) -> NDArray[np.bool_]:
        """Which points have been evaluated."""
        return self.label != UNSEEN


@dataclass
class Claims:
    """What a settled cell says about its points that were not evaluated."""

    points: NDArray[np.int64]
    how: NDArray[np.int8]
    source: NDArray[np.int64]
    bound: NDArray[np.float64]
    seen: int  # evaluated points in the cell when it was settled

    @staticmethod
    def none(seen: int) -> Claims:
        e = np.zeros(0, np.int64)
        return Claims(e, np.zeros(0, np.int8), e, np.zeros(0), seen)


def auto_coarse_step(shape: tuple[int, ...]) -> int:
    """Default coarse spacing: about 8 cells along the longest axis, at least 2 on the shortest.

    A power of two, so that cells halve down to one spacing.

    Examples
    --------
    >>> auto_coarse_step((257, 129)), auto_coarse_step((49, 25, 13)), auto_coarse_step((5,))
    (32, 4, 1)
    """
    spans = [n - 1 for n in shape if n > 1]
    if not spans:
        return 1
    target = max(1, min(max(spans) // 8, min(spans) // 2))
    return 1 << (target.bit_length() - 1)


def _coarse_axis(n: int, step: int) -> list[int]:
    return sorted(set(range(0, n, step)) | {n - 1})


def _box(cell: Cell, shape: tuple[int, ...]) -> NDArray[np.int64]:
    """Flat indices of the points of a cell, its faces included (C order)."""
    lo, hi = cell
    return _flat(shape)[tuple(slice(a, b + 1) for a, b in zip(lo, hi, strict=True))].ravel()


_FLAT: dict[tuple[int, ...], NDArray[np.int64]] = {}


def _flat(shape: tuple[int, ...]) -> NDArray[np.int64]:
    """``arange(size).reshape(shape)``, kept for the last few shapes."""
    found = _FLAT.get(shape)
    if found is None:
        if len(_FLAT) > 4:
            _FLAT.clear()
        found = _FLAT[shape] = np.arange(math.prod(shape), dtype=np.int64).reshape(shape)
    return found


def _all_corners(cells: list[Cell], shape: tuple[int, ...]) -> NDArray[np.int64]:
    """Sorted flat indices of the corners of all ``cells`` (each once)."""
    lo = np.array([c[0] for c in cells])
    hi = np.array([c[1] for c in cells])
    picks = np.array(list(itertools.product((0, 1), repeat=len(shape))), bool)
    pts = np.where(picks[None, :, :], hi[:, None, :], lo[:, None, :]).reshape(-1, len(shape))
    return np.unique(np.ravel_multi_index(tuple(pts.T), shape)).astype(np.int64)


def _split(cell: Cell) -> list[Cell]:
    lo, hi = cell
    parts = []
    for a, b in zip(lo, hi, strict=True):
        parts.append([(a, b)] if b - a <= 1 else [(a, (a + b) // 2), ((a + b) // 2, b)])
    return [
        (tuple(p[0] for p in combo), tuple(p[1] for p in combo))
        for combo in itertools.product(*parts)
    ]


@dataclass
class RefineSettings:
    """Options of :func:`refine` (see :func:`toposweep.phase_map`)."""

    coarse_step: int
    proven_only: bool = False
    agreement_gap: float | None = None


def _decide(
    cell: Cell,
    table: PointTable,
    coeffs: NDArray[np.float64] | None,
    bounds: NDArray[np.float64] | None,
    settings: RefineSettings,
    wants: dict[int, float] | None = None,
) -> Claims | None | str:
    """Claims of a settled cell, None when it must be split, or :data:`WAIT`.

    With ``wants`` (corner → proof target), a cell whose corners agree but whose points are
    not all proven asks for the proofs that would cover them (:func:`_proofs_wanted`) and
    returns :data:`WAIT` if it asked for any.
    """
    idx = _box(cell, table.shape)
    ev = table.label[idx] != UNSEEN
    seen = int(ev.sum())
    if seen == idx.size:
        return Claims.none(seen)
    src = idx[ev]
    labels = table.label[src]
    if labels.size == 0 or labels.min() < 0 or labels.min() != labels.max():
        return None
    todo = idx[~ev]
    nt, ns = todo.size, src.size
    best = np.zeros(nt, np.int64)
    margin = np.full(nt, -np.inf)
    estimate_ok = np.zeros(nt, bool)
    if bounds is not None and coeffs is not None:
        delta = band_shift_bounds(coeffs[todo][:, None, :], coeffs[src][None, :, :], bounds)
        proven_gap = np.where(np.isfinite(table.gap_proven[src]), table.gap_proven[src], -np.inf)
        m = proven_gap[None, :] - 2.0 * delta
        best = np.argmax(m, axis=1)
        margin = m[np.arange(nt), best]
        estimate_ok = (np.nan_to_num(table.gap_direct[src], nan=-np.inf) - 2.0 * delta > 0).any(1)
    proven = margin > 0
    if wants is not None and not proven.all() and bounds is not None and coeffs is not None:
        if _proofs_wanted(src, delta[~proven], table, wants):
            return WAIT
    if not proven.all():
        if settings.proven_only:
            return None
        if bounds is not None and settings.agreement_gap is None:
            agree = bool(estimate_ok[~proven].all())
        else:
            threshold = settings.agreement_gap
            if threshold is None:
                threshold = AGREEMENT_SHARE * float(np.nanmax(table.bandwidth[src]))
            gaps = table.gap_direct[src]
            agree = bool(np.all(np.isfinite(gaps)) and gaps.min() > threshold)
        if not agree:
            return None
    how = np.where(proven, PROVEN, FILLED).astype(np.int8)
    # filled points copy the nearest evaluated point of the cell (index distance)
    pt = np.array(np.unravel_index(todo, table.shape)).T
    ps = np.array(np.unravel_index(src, table.shape)).T
    nearest = np.abs(pt[:, None, :] - ps[None, :, :]).sum(-1).argmin(1) if ns else best
    source = np.where(proven, src[best], src[nearest])
    bound = np.where(proven, margin, np.nan)
    return Claims(todo.astype(np.int64), how, source.astype(np.int64), bound, seen)


def _proofs_wanted(
    src: NDArray[np.int64],
    delta: NDArray[np.float64],
    table: PointTable,
    wants: dict[int, float],
) -> bool:
    """Ask, for points not yet proven, the evaluated corners that could prove them.

    ``delta`` is (points, corners): each point picks the corner whose measured gap covers it
    with the most room, and that corner is asked for twice the largest δ among the points that
    picked it (with :data:`PROOF_HEADROOM`, never above :data:`PROOF_SHARE` of its gap). A
    corner is not asked again for what it has proven already, nor for a target at or above
    one that failed there. Returns whether anything was asked.
    """
    est = np.nan_to_num(table.gap_direct[src], nan=-np.inf)
    pick = np.argmax(est[None, :] - 2.0 * delta, axis=1)
    need = np.zeros(src.size)
    np.maximum.at(need, pick, 2.0 * delta[np.arange(delta.shape[0]), pick])
    asked = False
    for j in np.flatnonzero(need > 0):
        cap = PROOF_SHARE * est[j]
        if need[j] >= cap:  # out of a proof's reach: the point is filled or its cell split
            continue
        q = int(src[j])
        have = table.gap_proven[q]
        if have > need[j] or need[j] >= table.proof_failed[q]:
            continue
        wants[q] = max(wants.get(q, 0.0), min(PROOF_HEADROOM * need[j], cap))
        asked = True
    return asked


def _edge_midpoints(
    cells: list[Cell], table: PointTable
) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Midpoints of the cells' edges: those whose two ends agree, and all the others.

    An edge joins two corners that differ along one axis. Its midpoint can wait when both ends
    are evaluated with the same defined indices: a boundary that crosses the cell crosses
    some other edge or the cell's interior, where points are evaluated now, and the children
    next to the waiting point either settle it (proof or agreement, as any point) or, still
    undecided, evaluate it in the next round.
    """
    shape = table.shape
    agree: list[NDArray[np.int64]] = []
    other: list[NDArray[np.int64]] = []
    for axis in range(len(shape)):
        wide = [c for c in cells if c[1][axis] - c[0][axis] >= 2]
        if not wide:
            continue
        lo = np.array([c[0] for c in wide])
        hi = np.array([c[1] for c in wide])
        rest = [a for a in range(len(shape)) if a != axis]
        picks = np.array(list(itertools.product((0, 1), repeat=len(rest))), bool)
        picks = picks.reshape(2 ** len(rest), len(rest))
        for pick in picks:
            start = lo.copy()
            start[:, rest] = np.where(pick, hi[:, rest], lo[:, rest])
            end, mid = start.copy(), start.copy()
            end[:, axis] = hi[:, axis]
            mid[:, axis] = (lo[:, axis] + hi[:, axis]) // 2
            a, b, m = (np.ravel_multi_index(tuple(x.T), shape) for x in (start, end, mid))
            la, lb = table.label[a], table.label[b]
            same = (la >= 0) & (la == lb)
            agree.append(m[same])
            other.append(m[~same])
    empty = np.zeros(0, np.int64)
    return (
        np.unique(np.concatenate(agree)) if agree else empty,
        np.unique(np.concatenate(other)) if other else empty,
    )


def refine(
    table: PointTable,
    evaluate: Callable[[NDArray[np.int64]], None],
    settings: RefineSettings,
    *,
    coeffs: NDArray[np.float64] | None = None,
    bounds: NDArray[np.float64] | None = None,
    forced: NDArray[np.int64] | None = None,
    prove: Callable[[NDArray[np.int64], NDArray[np.float64]], int] | None = None,
) -> tuple[NDArray[np.int8], NDArray[np.int64], NDArray[np.float64]]:
    """Evaluate a grid adaptively; returns per point ``(how, source, bound)``.

    ``evaluate(indices)`` must evaluate the given flat indices (sorted, none evaluated
    before) and set their ``label``, ``gap_direct``, ``gap_proven`` and ``bandwidth`` in
    ``table``. ``coeffs`` (points × terms) and ``bounds`` (terms) enable the proof;
    ``prove(indices, targets)`` (evaluated points, sorted) tries to prove the gap ≥ target
    there, raises ``table.gap_proven`` where it succeeds, lowers ``table.proof_failed`` where
    not, and returns how many succeeded. ``forced`` points
    are evaluated in the first round whatever happens. ``how`` is EVALUATED/PROVEN/FILLED,
    ``source`` the evaluated point whose indices a point carries (itself if evaluated),
    ``bound`` the proven lower bound of the gap at PROVEN points (NaN elsewhere).

    When a cell is split, the midpoints of its edges whose ends agree wait a round (see
    :func:`_edge_midpoints`); every other new corner is evaluated at once.
    """
    shape = table.shape
    step = max(1, int(settings.coarse_step))
    axes = [_coarse_axis(n, step) for n in shape]
    cells: list[Cell] = [
        (tuple(c[0] for c in combo), tuple(c[1] for c in combo))
        for combo in itertools.product(
            *[list(zip(a[:-1], a[1:], strict=True)) if len(a) > 1 else [(0, 0)] for a in axes]
        )
    ]
    first = np.ravel_multi_index(np.ix_(*[np.array(a) for a in axes]), shape).ravel()
    if forced is not None and forced.size:
        first = np.union1d(first, forced)
    first = np.unique(first).astype(np.int64)
    evaluate(first)
    waited = np.zeros(table.label.size, bool)  # midpoints that waited once already
    asking = prove is not None and bounds is not None and coeffs is not None

    def settle(cell: Cell, claims: Claims | None | str, children: list[Cell],
               split: list[Cell]) -> None:  # fmt: skip
        if claims is None:
            children += _split(cell)
            split.append(cell)
        elif isinstance(claims, Claims):
            leaves[cell] = claims

    def run(pending: list[Cell]) -> None:
        nonlocal asking
        while pending:
            children: list[Cell] = []
            split: list[Cell] = []
            wants: dict[int, float] | None = {} if asking else None
            waiting: list[Cell] = []
            for cell in pending:
                claims = _decide(cell, table, coeffs, bounds, settings, wants)
                if claims is WAIT:
                    waiting.append(cell)
                settle(cell, claims, children, split)
            if waiting and wants and prove is not None:
                asked = np.array(sorted(wants), np.int64)
                done = prove(asked, np.array([wants[int(q)] for q in asked]))
                if asked.size >= PROOF_GIVE_UP and 2 * done < asked.size:
                    asking = False
            for cell in waiting:
                settle(cell, _decide(cell, table, coeffs, bounds, settings), children, split)
            if children:
                new = _all_corners(children, shape)
                new = new[table.label[new] == UNSEEN]
                agree, other = _edge_midpoints(split, table)
                wait = np.setdiff1d(agree, other)
                wait = wait[~waited[wait]]
                waited[wait] = True
                new = np.setdiff1d(new, wait)
                if new.size:
                    evaluate(new.astype(np.int64))
            pending = children

    leaves: dict[Cell, Claims] = {}
    run(cells)
    while True:
        # a settled cell whose points were evaluated since (by a neighbour's split) is decided
        # again with what is known now; then claims that disagree on a point are settled by
        # evaluating that point
        stale = [
            c for c, cl in leaves.items() if int(table.evaluated[_box(c, shape)].sum()) != cl.seen
        ]
        for c in stale:
            del leaves[c]
        if stale:
            run(stale)
            continue
        how, source, bound, conflicts = _merge(leaves, table)
        if conflicts.size == 0:
            return how, source, bound
        evaluate(conflicts)


def _merge(
    leaves: dict[Cell, Claims], table: PointTable
) -> tuple[NDArray[np.int8], NDArray[np.int64], NDArray[np.float64], NDArray[np.int64]]:
    n = table.label.size
    how = np.full(n, EVALUATED, np.int8)
    source = np.arange(n, dtype=np.int64)
    bound = np.full(n, np.nan)
    parts = [c for c in leaves.values() if c.points.size]
    if not parts:
        return how, source, bound, np.zeros(0, np.int64)
    pts = np.concatenate([c.points for c in parts])
    hw = np.concatenate([c.how for c in parts])
    src = np.concatenate([c.source for c in parts])
    bd = np.concatenate([c.bound for c in parts])
    keep = table.label[pts] == UNSEEN
    pts, hw, src, bd = pts[keep], hw[keep], src[keep], bd[keep]
    lab = table.label[src]
    lo = np.full(n, np.iinfo(np.int64).max)
    hi = np.full(n, np.iinfo(np.int64).min)
    np.minimum.at(lo, pts, lab)
    np.maximum.at(hi, pts, lab)
    claimed = np.zeros(n, bool)
    claimed[pts] = True
    conflicts = np.flatnonzero(claimed & (lo != hi))
    # per point: a proof before a fill, the largest proven bound first
    order = np.lexsort((-np.nan_to_num(bd, nan=-np.inf), hw, pts))
    pts, hw, src, bd = pts[order], hw[order], src[order], bd[order]
    first = np.unique(pts, return_index=True)[1]
    how[pts[first]] = hw[first]
    source[pts[first]] = src[first]
    bound[pts[first]] = bd[first]
    unclaimed = np.flatnonzero(~table.evaluated & ~claimed)
    if unclaimed.size:  # cannot happen: every cell is settled or split down to its corners
        raise RuntimeError(f"{unclaimed.size} grid points were neither evaluated nor settled")
    return how, source, bound, conflicts.astype(np.int64)
