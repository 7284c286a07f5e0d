"""Checked hand-off of a list of parameter points to the Rust core.

Shared by :func:`toposweep.invariants` (one point) and :func:`toposweep.sweep` (many): it
validates filling, symmetry operators and parameters once, then calls the core in one batch.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from . import _core
from .errors import FillingError, ModelError, SamplingError, SymmetryWarning
from .limits import check_point_memory
from .model import Model
from .sampling import Sampling, check_threads
from .symmetry import TOLERANCE, as_operator, normalised_inversion, symmetry_error
from .tightbinding import TightBinding

#: reason codes set on the Python side (the core's codes are 0–6; see dataset.REASONS)
REASON_INVERSION_BROKEN = 7
REASON_TIME_REVERSAL_BROKEN = 8

__all__ = ["Request", "prepare_request", "run_points"]


@dataclass(frozen=True)
class Request:
    """Everything fixed for a run: model, filling, inversion matrix (or None), sampling."""

    model: Model
    filling: int
    inversion: NDArray[np.complex128] | None
    sampling: Sampling
    threads: int | None = None
    #: True when the inversion matrix came with the call (must then hold at every point)
    inversion_from_call: bool = False


def check_filling(model: Model, filling: Any) -> int:
    """Validate the number of occupied bands."""
    if isinstance(filling, bool) or not isinstance(filling, int | np.integer):
        raise FillingError(f"filling must be an integer number of occupied bands, got {filling!r}")
    f = int(filling)
    if not 1 <= f <= model.norb - 1:
        raise FillingError(
            f"filling must lie in 1 … {model.norb - 1} for a {model.norb}-band model, got {f}"
        )
    if model.time_reversal is not None and f % 2:
        raise FillingError(
            f"filling {f} is odd, but with time reversal the occupied bands come in Kramers "
            "pairs; use an even filling"
        )
    return f


def check_loop_resolution(model: Model, sampling: Sampling) -> None:
    """Refuse Wilson loops too coarse to represent the model's longest hoppings.

    Along a loop of L points a hopping that reaches r cells contributes exp(2πi r s/L); for
    L ≤ 2r it aliases onto a shorter hopping and the loop sees a different model, so the Z2
    index can come out wrong without any warning sign in the flow. Tight-binding models know
    their reach; for callable models the convergence certificate is the guard.

    Examples
    --------
    >>> import toposweep as ts
    >>> check_loop_resolution(ts.models.bhz(), Sampling(loop_points=4))  # reach 1: fine
    """
    if not isinstance(model, TightBinding) or sampling.method == "lattice":
        return
    reach = model.reach
    if sampling.loop_points <= 2 * reach:
        raise SamplingError(
            f"loop_points = {sampling.loop_points} cannot resolve hoppings that reach {reach} "
            f"cells (a loop needs more than 2 × {reach} points, or the long hoppings alias onto "
            f"short ones); use loop_points ≥ {4 * reach}"
        )


def prepare_request(
    model: Model,
    filling: Any,
    *,
    inversion: ArrayLike | None,
    sampling: Sampling,
    threads: int | None = None,
) -> Request:
    """Validate everything about a run that does not depend on the parameter point.

    The request is kept on the model and given again for the same filling, threads and
    sampling (the same objects) while the model's hoppings and operators are unchanged: a loop
    of :func:`toposweep.invariants` calls asks for the same one each time, and making it again
    cost ~10 µs of serial Python per call, cold after the last call's core (benches/RESULTS.md).
    The operators count as unchanged while they are the read-only arrays the model was made
    with; a model whose operators were replaced is checked every time.
    """
    if not isinstance(model, Model):
        raise ModelError(f"expected a toposweep model, got {type(model).__name__}")
    memo = model._request_memo
    if (
        memo is not None
        and inversion is None
        and memo[0] is filling
        and memo[1] is threads
        and memo[2] is sampling
        and model.time_reversal is model._own_operators[0]
        and model.inversion is model._own_operators[1]
    ):
        return memo[3]
    if model.dim not in (2, 3):
        raise ModelError(f"Z2 indices need a 2D or 3D model; this one has dim = {model.dim}")
    if model.time_reversal is None:
        raise ModelError(
            "Z2 indices need time-reversal symmetry: give the model time_reversal=U_T "
            "(Θ = U_T K, U_T U_T* = −1; for spin as the slowest index U_T = iσ_y ⊗ 1)"
        )
    f = check_filling(model, filling)
    checked_threads = check_threads(threads)
    check_loop_resolution(model, sampling)
    check_point_memory(model, sampling, checked_threads)  # a huge model: refused, not aborted
    explicit = inversion is not None
    p = as_operator(inversion, model.norb, "inversion") if explicit else model.inversion
    req = Request(
        model=model,
        filling=f,
        inversion=None if p is None else normalised_inversion(p),
        sampling=sampling,
        threads=checked_threads,
        inversion_from_call=explicit,
    )
    if not explicit:  # (the model's own operators are read-only: Model.__init__, __setstate__)
        model._request_memo = (filling, threads, sampling, req)
    return req


def _mark(raw: dict[str, NDArray], mask: NDArray[np.bool_], reason: int, *, parity: bool) -> None:
    """Overwrite results at ``mask`` as undefined with ``reason`` (Wilson or parity part).

    The variables the core derives from the indices follow: an undefined ν0 makes the phase
    undefined and every comparison that involves it not comparable (-1).
    """
    if parity:
        raw["nu0_parity"][mask] = -1
        raw["nu_parity"][mask] = -1
        raw["parity_reason"][mask] = reason
        raw["odd_count"][mask] = -1
        raw["parity_agrees"][mask] = -1
    else:
        raw["nu0"][mask] = -1
        raw["nu"][mask] = -1
        raw["reason"][mask] = reason
        raw["phase"][mask] = -1
        for key in ("parity_agrees", "methods_agree"):
            if key in raw:
                raw[key][mask] = -1
        if "nu0_lattice" in raw:
            raw["nu0_lattice"][mask] = -1
            raw["nu_lattice"][mask] = -1
            raw["lattice_reason"][mask] = reason


def _symmetry_breaks(
    req: Request, points: Sequence[dict[str, float]]
) -> tuple[NDArray[np.bool_], NDArray[np.bool_], str | None]:
    """Points where time reversal and where inversion fail, and a warning's text (or None).

    The rule (docs/symmetry.md): time reversal broken at a point makes its indices undefined
    (reason 8) — a result, never an error, in :func:`toposweep.invariants` and in sweeps
    alike; when it fails at every point of the call, the text of a :class:`SymmetryWarning`
    is returned too (for one point with the residual and the fix; for a chunk of a sweep the
    same text every time, so Python shows it once). Inversion declared by the model but broken
    at a point leaves only the parity result undefined there (reason 7); an inversion matrix
    passed to the call is part of the call and must hold at every point (SymmetryError).
    """
    model = req.model
    u_t = model.time_reversal
    assert u_t is not None  # checked in prepare_request
    tr_res = model.symmetry_residuals(points, u_t, "time_reversal")
    tr_broken = ~(tr_res <= TOLERANCE)  # NaN (overflowing H) counts as broken
    warning = None
    if tr_broken.all():
        if len(points) == 1:
            text = str(symmetry_error("time_reversal", float(tr_res.min()), "at this point"))
            warning = text + " The point's indices are undefined (reason 8)."
        else:
            warning = (
                "time reversal does not hold at any point of a chunk of this sweep: check U_T, "
                "or the parameters that break it; those points are undefined (reason 8)"
            )
    p_broken = np.zeros(len(points), bool)
    if req.inversion is not None:
        p_res = model.symmetry_residuals(points, req.inversion, "inversion")
        p_broken = ~(p_res <= TOLERANCE)
        if req.inversion_from_call and p_broken.any():
            i = int(np.argmax(p_res))
            raise symmetry_error("inversion", float(p_res[i]), f"at parameters {points[i]}")
    return tr_broken, p_broken, warning


def run_points(
    req: Request,
    points: Sequence[dict[str, float]],
    *,
    alongside: Callable[[], object] | None = None,
) -> dict[str, NDArray]:
    """Evaluate resolved parameter dicts in one core call; returns flat per-point arrays.

    Symmetries are checked at every point (see :func:`_symmetry_breaks`): first, so a run
    that is not valid stops before it starts. With ``alongside`` (Python work of the caller
    that does not need the results, such as :func:`toposweep.results.dataset.plan_dataset`), the
    checks and ``alongside()`` run instead while the core computes — on the worker that takes
    the call (from the main thread: the calling thread) while another worker starts on the
    points, so where there are two or more workers that work shares the cores with the points
    instead of adding to their time; their errors are raised all the same. When ``alongside``
    returns a dict of arrays (:meth:`toposweep.results.dataset.ResultLayout.core_targets`), the core
    writes the results of those keys into them and returns those very arrays.
    """
    breaks: list[tuple[NDArray[np.bool_], NDArray[np.bool_], bool, bool, str | None]] = []

    def python_side() -> object:
        tr_broken, p_broken, warning = _symmetry_breaks(req, points)
        # (whether any point is broken, found here: beside the core, not after it)
        breaks.append((tr_broken, p_broken, bool(tr_broken.any()), bool(p_broken.any()), warning))
        return None if alongside is None else alongside()

    if alongside is None:
        python_side()
    model = req.model
    core, coeffs = model.prepare(points)
    inv = None if req.inversion is None else np.ascontiguousarray(req.inversion)
    raw = _core.evaluate(
        core,
        np.ascontiguousarray(coeffs, dtype=float),
        req.filling,
        inversion=inv,
        time_reversal=np.ascontiguousarray(model.time_reversal, dtype=complex),
        threads=req.threads,
        alongside=None if alongside is None else python_side,
        **req.sampling.core_kwargs(),
    )
    tr_broken, p_broken, any_tr_broken, any_p_broken, warning = breaks[0]
    if warning is not None:  # (warned here, on the calling thread, not in the core's worker)
        warnings.warn(warning, SymmetryWarning, stacklevel=3)
    if any_tr_broken:
        _mark(raw, tr_broken, REASON_TIME_REVERSAL_BROKEN, parity=False)
    if req.inversion is not None and (any_tr_broken or any_p_broken):
        _mark(raw, p_broken | tr_broken, REASON_INVERSION_BROKEN, parity=True)
        raw["parity_reason"][tr_broken] = REASON_TIME_REVERSAL_BROKEN
    return raw
