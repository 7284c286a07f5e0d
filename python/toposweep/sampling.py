"""Sampling options of the Wilson-loop engine, their defaults and their validation."""

from __future__ import annotations

import math
from dataclasses import dataclass, fields
from functools import cached_property
from numbers import Real
from typing import Any

import numpy as np

from .errors import SamplingError

__all__ = ["MAXIMA", "METHODS", "PROVE_GAP", "Sampling", "check_threads", "sampling_for"]

#: the Z2 methods a run can use
METHODS = ("wilson", "lattice", "both")

#: when a point's gap is proven over the whole zone
PROVE_GAP = ("auto", "always", "never")

#: Largest accepted value of each integer option. Far beyond any useful sampling; they stop a
#: typo (an extra zero or three) from allocating more memory than the machine has instead of
#: failing with a message: the core holds loop_points·norb² complex numbers per Wilson loop and
#: gap_points^3 κ points for the bulk gap grid.
MAXIMA: dict[str, int] = {
    "loop_points": 10_000,
    "lines": 100_000,
    "max_lines": 100_000,
    "gap_points": 200,
    "gap_starts": 1_000,
}
_WHY_MAXIMA = {
    "loop_points": "κ points per Wilson loop; memory grows as loop_points × norb²",
    "lines": "pump lines per half plane",
    "max_lines": "pump lines per half plane",
    "gap_points": "the 3D gap grid has gap_points³ κ points",
    "gap_starts": "starting points of the gap minimiser",
}


@dataclass(frozen=True)
class Sampling:
    """How densely the Brillouin zone is sampled.

    Parameters
    ----------
    loop_points : int
        κ points per Wilson loop (along the loop direction).
    lines : int
        Initial pump lines per half plane (pump coordinate 0 … 1/2, ends included).
    max_lines : int
        Cap on pump lines per half plane after adaptive insertion.
    step_limit : float
        Largest allowed motion of a hybrid Wannier centre between neighbouring lines, as a
        fraction of the unit cell; larger motion inserts a line between them.
    gap_floor : float or None
        Direct gap below which a point counts as gapless, in the model's energy unit.
        ``None`` uses 1e-5 × the bandwidth of the point.
    gap_points : int
        Points per axis of an extra uniform bulk grid (3D only) used for the gap, so gap
        closings away from the time-reversal-invariant planes are seen. 0 disables it.
    gap_starts : int
        Starting points of the gap minimiser: from the smallest sampled direct gaps, a compass
        search over κ finds the model's true local gap minima, so a band touching between
        sampled κ points is not missed and ``gap_direct`` is the model's minimum, not the
        grid's. 0 switches the search off (the gap is then only the sampled minimum).
    method : {"wilson", "lattice", "both"}
        Z2 method. ``"wilson"`` (default): hybrid Wannier centre flow of Wilson loops
        (Soluyanov & Vanderbilt, Phys. Rev. B 83, 035108 (2011)). ``"lattice"``: the lattice
        Z2 of Fukui & Hatsugai, J. Phys. Soc. Jpn. 76, 053702 (2007). ``"both"``: run both and
        report ``methods_agree``; the headline indices stay the Wilson-loop ones. The lattice
        method costs about as much again as the Wilson loops, so it is opt-in; use ``"both"``
        for maps you publish.
    certify : bool
        Convergence certificate: planes whose flow is tight (a largest-gap midpoint closer to
        a centre of the neighbouring line than ``step_limit`` or than the largest step of a
        centre between lines) are recomputed with twice ``loop_points``; the indices stand
        only if the finer run agrees (otherwise undefined, reason
        ``changes_with_doubled_loop_points``). ``max_step`` and ``min_clearance`` then
        describe the finer run.
    prove_gap : {"auto", "always", "never"} or bool
        When to prove a lower bound of the direct gap over the whole Brillouin zone
        (``gap_proven``), by branch and bound over boxes of κ, each bounded through Weyl's
        inequality with the hopping norms of the model. A box centre with a gap under the
        floor makes the point gapless. ``"always"`` (or ``True``): every point, about a second
        of work at most; a point that cannot be proven is undefined
        (``gap_not_proven_above_floor``). ``"auto"`` (default): where the estimated gap is
        under 5 % of the most the Hamiltonian can change over the zone, with a budget of twice
        the point's first-pass κ points; unproven, the point is undefined only when its
        smallest gap found is under 100 floors. ``"never"`` (or ``False``). A
        :class:`CallableModel` needs ``lipschitz=`` for the proof. Whatever this option says,
        Wilson loops get extra κ points where the Davis–Kahan bound says the occupied states
        may turn too far between neighbours (docs/near-closings.md).

    Examples
    --------
    >>> Sampling(loop_points=40, lines=41, max_lines=41).max_lines
    41
    """

    loop_points: int = 32
    lines: int = 21
    max_lines: int = 321
    step_limit: float = 0.08
    gap_floor: float | None = None
    gap_points: int = 8
    gap_starts: int = 3
    method: str = "wilson"
    certify: bool = True
    prove_gap: str = "auto"

    def __post_init__(self) -> None:
        for name in ("loop_points", "lines", "max_lines", "gap_points", "gap_starts"):
            value = getattr(self, name)
            # numpy integers are not ``int``; NaN/inf must not reach int() (ValueError /
            # OverflowError with numpy's wording instead of ours)
            if isinstance(value, bool | np.bool_) or not isinstance(value, Real):
                raise SamplingError(f"{name} must be an integer, got {value!r}")
            if not math.isfinite(value) or value != int(value):
                raise SamplingError(f"{name} must be an integer, got {value!r}")
            value = int(value)
            if value > MAXIMA[name]:
                raise SamplingError(
                    f"{name} = {value} is beyond the supported maximum {MAXIMA[name]} "
                    f"({_WHY_MAXIMA[name]}); use a smaller value"
                )
            object.__setattr__(self, name, value)
        if self.loop_points < 4:
            raise SamplingError(f"loop_points must be at least 4, got {self.loop_points}")
        if self.lines < 2:
            raise SamplingError(f"lines must be at least 2, got {self.lines}")
        if self.max_lines < self.lines:
            raise SamplingError(
                f"max_lines ({self.max_lines}) must be at least lines ({self.lines}); "
                "set max_lines=lines to switch adaptive insertion off"
            )
        if self.gap_points < 0:
            raise SamplingError(f"gap_points must be 0 or positive, got {self.gap_points}")
        if not isinstance(self.method, str) or self.method not in METHODS:
            raise SamplingError(f"method must be one of {list(METHODS)}, got {self.method!r}")
        if not isinstance(self.certify, bool | np.bool_):
            raise SamplingError(f"certify must be True or False, got {self.certify!r}")
        object.__setattr__(self, "certify", bool(self.certify))
        prove = self.prove_gap
        if isinstance(prove, bool | np.bool_):
            prove = "always" if prove else "never"
        if not isinstance(prove, str) or prove not in PROVE_GAP:
            raise SamplingError(
                f"prove_gap must be one of {list(PROVE_GAP)} (or True/False), got {prove!r}"
            )
        object.__setattr__(self, "prove_gap", prove)
        if self.gap_starts < 0:
            raise SamplingError(f"gap_starts must be 0 or positive, got {self.gap_starts}")
        step = self.step_limit
        if isinstance(step, bool | np.bool_) or not isinstance(step, Real) or not 0 < step < 0.5:
            raise SamplingError(f"step_limit must lie in (0, 0.5), got {step!r}")
        object.__setattr__(self, "step_limit", float(step))  # plain floats for provenance
        floor = self.gap_floor
        if floor is not None and (
            isinstance(floor, bool | np.bool_)
            or not isinstance(floor, Real)
            or not math.isfinite(floor)
            or floor <= 0
        ):
            raise SamplingError(f"gap_floor must be a positive number or None, got {floor!r}")
        if floor is not None:
            object.__setattr__(self, "gap_floor", float(floor))

    @classmethod
    def from_options(cls, **options: Any) -> Sampling:
        """Build from keyword options, rejecting unknown names with the list of known ones.

        Examples
        --------
        >>> Sampling.from_options(loop_points=20, gap_floor=None).loop_points
        20
        """
        known = {f.name for f in fields(cls)}
        unknown = sorted(set(options) - known)
        if unknown:
            raise SamplingError(
                f"unknown sampling option(s) {unknown}; known options are {sorted(known)}"
            )
        return cls(**{k: v for k, v in options.items() if v is not None or k == "gap_floor"})

    def as_dict(self) -> dict[str, Any]:
        """Plain dict, for provenance attributes (fields are plain scalars: no deep copy)."""
        return {f.name: getattr(self, f.name) for f in fields(self)}

    def core_kwargs(self) -> dict[str, Any]:
        """Keyword arguments for :func:`toposweep._core.evaluate`."""
        return dict(self._core_kwargs)

    @cached_property
    def _core_kwargs(self) -> dict[str, Any]:
        # (made once per instance: the fields are frozen)
        d = self.as_dict()
        d["gap_floor"] = -1.0 if self.gap_floor is None else float(self.gap_floor)
        return d


#: recently validated samplings by their options (see :func:`sampling_for`)
_RECENT: dict[tuple, Sampling] = {}


def sampling_for(**options: Any) -> Sampling:
    """``Sampling(**options)``, validated once for options seen before.

    A loop of :func:`toposweep.invariants` calls passes the same options every time; checking
    them again cost ~10 µs of serial Python per call. Options are matched by type and value
    (``1`` and ``1.0`` are different options), and unhashable ones are simply validated.

    Examples
    --------
    >>> sampling_for(loop_points=40) is sampling_for(loop_points=40)
    True
    """
    try:
        key = tuple((k, type(v), v) for k, v in options.items())
        found = _RECENT.get(key)
    except TypeError:  # an unhashable option: the constructor says what is wrong with it
        return Sampling(**options)
    if found is None:
        found = Sampling(**options)
        if len(_RECENT) >= 64:
            _RECENT.clear()
        _RECENT[key] = found
    return found


def check_threads(threads: Any) -> int | None:
    """Validate the worker-thread count (None: all cores)."""
    if threads is None:
        return None
    if isinstance(threads, bool) or not isinstance(threads, int | np.integer) or threads < 1:
        raise SamplingError(
            f"threads must be a positive integer, or None for all cores; got {threads!r}"
        )
    return int(threads)
