"""A stand-in for the core's proven gap (``gap_proven``), written independently with NumPy.

The direct gap is sampled on a uniform κ grid of M points per axis; every κ lies within
1/(2M) per axis of a grid point, and ‖H(κ) − H(κ′)‖₂ ≤ Σ_R ‖C_R‖₂ |e^{2πiκ·R} − e^{2πiκ′·R}|
≤ Σ_R ‖C_R‖₂ 2π Σ_i |R_i| |κ_i − κ′_i| (C_R the Fourier coefficient at R, both signs of R
counted). By Weyl's inequality the gap at κ is at least the grid point's gap minus twice that:
a rigorous lower bound (coarse, fine for tiny models with large gaps). Used by the tests to
exercise the proof path of phase maps before, and independently of, the core's own bound.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence

import numpy as np
from numpy.typing import NDArray
from random_models import bloch_hamiltonian
from toposweep import TightBinding


def lipschitz(model: TightBinding, params: Mapping[str, float]) -> NDArray[np.float64]:
    """L_i with ‖H(κ) − H(κ′)‖₂ ≤ Σ_i L_i |κ_i − κ′_i|."""
    values = {**model.defaults, **params}
    folded: dict[tuple[int, ...], NDArray[np.complex128]] = {}
    for r, t, term in model.hoppings():
        c = 1.0 if term is None else float(values[term])
        folded[r] = folded.get(r, 0) + c * t
    out = np.zeros(model.dim)
    for r, t in folded.items():
        if any(r):  # T at R and T† at −R: two Fourier coefficients of the same norm
            out += 2 * 2 * np.pi * np.abs(np.array(r)) * np.linalg.norm(t, 2)
    return out


def sampled_gap(
    model: TightBinding, params: Mapping[str, float], filling: int = 2, points: int = 64
) -> float:
    """The smallest direct gap on a uniform κ grid: an upper bound of the true minimum."""
    axes = [np.arange(points) / points] * model.dim
    grid = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, model.dim)
    e = np.linalg.eigvalsh(bloch_hamiltonian(model, grid, params))
    return float((e[:, filling] - e[:, filling - 1]).min())


def proven_gap(
    model: TightBinding, filling: int, params: Mapping[str, float], points: int = 40
) -> float:
    """A rigorous lower bound of the direct gap at the filling (may be negative: no proof)."""
    slack = float(lipschitz(model, params).sum()) / (2 * points)
    return sampled_gap(model, params, filling, points) - 2 * slack


def with_proven_gap(
    run_points: Callable, model: TightBinding, filling: int, points: int = 40
) -> Callable:
    """``run_points`` that also returns ``gap_proven`` (NaN where no bound is proven)."""

    def wrapped(request, pts: Sequence[dict[str, float]], **kwargs):  # type: ignore[no-untyped-def]
        raw = run_points(request, pts, **kwargs)
        bounds = np.array([proven_gap(model, filling, p, points) for p in pts])
        raw["gap_proven"] = np.where(bounds > 0, bounds, np.nan)
        return raw

    return wrapped
