"""Checked hand-off of a list of parameter points to the Rust core.

Shared by :func:`toposweep.invariants` (one point) and :func:`toposweep.sweep` (many): it
validates filling, symmetry operators and parameters once, then calls the core in one batch.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from . import _core
from .errors import FillingError, ModelError
from .model import Model
from .sampling import Sampling
from .symmetry import as_operator, normalised_inversion

__all__ = ["Request", "prepare_request", "run_points"]


@dataclass(frozen=True)
class Request:
    """Everything fixed for a run: model, filling, inversion matrix (or None), sampling."""

    model: Model
    filling: int
    inversion: NDArray[np.complex128] | None
    sampling: Sampling
    threads: int | None = None


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


def prepare_request(
    model: Model,
    filling: Any,
    *,
    inversion: ArrayLike | None,
    sampling: Sampling,
    params: dict[str, float] | None = None,
    threads: int | None = None,
) -> Request:
    """Validate a run once; symmetry operators are checked numerically at ``params``."""
    if not isinstance(model, Model):
        raise ModelError(f"expected a toposweep model, got {type(model).__name__}")
    if model.dim not in (2, 3):
        raise ModelError(f"Z2 indices need a 2D or 3D model; this one has dim = {model.dim}")
    if model.time_reversal is None:
        raise ModelError(
            "Z2 indices need time-reversal symmetry: give the model time_reversal=U_T "
            "(Θ = U_T K, U_T U_T* = −1; for spin as the slowest index U_T = iσ_y ⊗ 1)"
        )
    f = check_filling(model, filling)
    if threads is not None and (isinstance(threads, bool) or not isinstance(threads, int) or threads < 1):
        raise ModelError(f"threads must be a positive integer or None, got {threads!r}")
    p_call = as_operator(inversion, model.norb, "inversion") if inversion is not None else None
    model.check_symmetries(params, inversion=p_call)
    p = p_call if p_call is not None else model.inversion
    return Request(
        model=model,
        filling=f,
        inversion=None if p is None else normalised_inversion(p),
        sampling=sampling,
        threads=threads,
    )


def run_points(req: Request, points: Sequence[dict[str, float]]) -> dict[str, NDArray]:
    """Evaluate resolved parameter dicts in one core call; returns flat per-point arrays."""
    core, coeffs = req.model.prepare(points)
    inv = None if req.inversion is None else np.ascontiguousarray(req.inversion)
    return _core.evaluate(
        core,
        np.ascontiguousarray(coeffs, dtype=float),
        req.filling,
        inversion=inv,
        threads=req.threads,
        **req.sampling.core_kwargs(),
    )
