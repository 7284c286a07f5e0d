"""Term coefficients and symmetry checks over a whole grid, as a phase map needs them.

A map works from the coefficient rows of all its grid points (the band-shift bound of
:mod:`toposweep.maps.weyl_bound`) and must know where the symmetries its indices need fail
without evaluating every point: for a tight-binding model whose terms respect a symmetry one by
one that is nowhere, else the sweep's per-point check from the coefficient rows.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..evaluation import _symmetry_breaks
from ..sweep_plan import SweepPlan
from ..symmetry import TOLERANCE, symmetry_error
from ..tightbinding import TightBinding

__all__ = ["grid_coefficients", "symmetry_breaks_everywhere"]


def grid_coefficients(plan: SweepPlan) -> NDArray[np.float64]:
    """Term coefficients of every grid point (rows in flat C order, columns ``model.terms``).

    Straight from the grid without a coefficients mapping; through it (one call per point)
    with one.
    """
    model = plan.request.model
    if plan.coefficients is not None:
        return np.asarray(model.prepare(plan.points(0, plan.size))[1], float)
    mesh = np.meshgrid(*[plan.coords[d] for d in plan.dims], indexing="ij")
    by_dim = dict(zip(plan.dims, (m.reshape(-1) for m in mesh), strict=True))
    fixed = model.resolve(plan.user_point(0))
    cols = [by_dim[t] if t in by_dim else np.full(plan.size, fixed[t]) for t in model.terms]
    return np.stack(cols, axis=1) if cols else np.zeros((plan.size, 0))


def symmetry_breaks_everywhere(plan: SweepPlan) -> tuple[NDArray[np.bool_], NDArray[np.bool_]]:
    """Where time reversal and inversion fail on the grid (the sweep's per-point check).

    A tight-binding model whose fixed part and every term respect a symmetry on their own
    (checked once, per term) respects it at every point: no per-point check is needed.
    """
    req, n = plan.request, plan.size
    model = req.model
    if isinstance(model, TightBinding):
        ops = [model.time_reversal, req.inversion]
        kinds = ["time_reversal", "inversion"]
        exact = all(
            op is None or _terms_respect(model, op, kind)
            for op, kind in zip(ops, kinds, strict=True)
        )
        if exact:
            return np.zeros(n, bool), np.zeros(n, bool)
        if plan.coefficients is None:  # the sweep's per-point check, from the coefficient rows
            coeffs = grid_coefficients(plan)
            res = model.coefficient_residuals(coeffs, ops[0], kinds[0])
            p_broken = np.zeros(n, bool)
            if req.inversion is not None:
                p_res = model.coefficient_residuals(coeffs, req.inversion, kinds[1])
                p_broken = ~(p_res <= TOLERANCE)
                if req.inversion_from_call and p_broken.any():
                    i = int(np.argmax(p_res))
                    where = f"at parameters {plan.user_point(i)}"
                    raise symmetry_error("inversion", float(p_res[i]), where)
            return ~(res <= TOLERANCE), p_broken
    tr_broken, p_broken, _ = _symmetry_breaks(req, plan.points(0, n))  # (reason 8 is marked)
    return tr_broken, p_broken


def _terms_respect(model: TightBinding, operator: NDArray[Any], kind: str) -> bool:
    resid, hp = model._term_residuals(operator, kind)
    scale = np.abs(hp).reshape(len(hp), -1).max(axis=1)
    return bool(
        np.all(
            np.abs(resid).reshape(len(resid), -1).max(axis=1) <= 1e-13 * np.maximum(scale, 1e-300)
        )
    )
