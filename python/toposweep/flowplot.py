"""Centre flow (hybrid Wannier centres) of one point of a result file, from its model."""

from __future__ import annotations

import json
from collections.abc import Mapping

import xarray as xr
from matplotlib.figure import Figure

from .centre_flow import centre_flow
from .errors import StoreError
from .model import Model
from .plotting import fixed_text, plot_flow, select

__all__ = ["flow_figure", "point_of"]


def point_of(
    ds: xr.Dataset, at: Mapping[str, float], *, allow_code: bool = False
) -> tuple[Model, xr.Dataset, dict[str, float]]:
    """The model of a result, the grid point nearest to ``at`` and its model parameters.

    ``allow_code`` lets a callable model's recorded code be imported (see
    :func:`toposweep.model_from_dict`).
    """
    from . import model_from_dict

    try:
        model = model_from_dict(json.loads(ds.attrs["model"]), allow_code=allow_code)
    except (KeyError, ValueError) as exc:
        raise StoreError(f"the file's model description cannot be rebuilt: {exc}") from None
    point = select(ds, [], at)
    if "coefficients" in ds.attrs:  # the mapping's term values were kept per point
        params = {t: float(point[f"term_{t}"]) for t in model.parameters}
    else:
        params = {
            str(k): float(v)
            for k, v in point.coords.items()
            if v.ndim == 0 and str(k) in model.parameters
        }
    return model, point, params


def flow_figure(ds: xr.Dataset, at: Mapping[str, float], *, allow_code: bool = False) -> Figure:
    """Centre flow of every time-reversal-invariant plane at the grid point nearest to ``at``.

    The flows are recomputed with the file's sampling, so they are the flows its indices came
    from (inserted lines marked). Grid dims not in ``at`` are taken at their middle value.
    The title names the grid point and, when the file's grid was mapped onto the model's
    terms (``coefficients=``), the term values it maps to. ``allow_code`` as in
    :func:`point_of`.
    """
    model, point, params = point_of(ds, at, allow_code=allow_code)
    filling = int(ds.attrs["filling"])
    sampling = json.loads(ds.attrs["sampling"])
    planes = [(a, c) for a in (1, 2, 3) for c in (0.0, 0.5)] if model.dim == 3 else [(None, 0.0)]
    flows = [centre_flow(model, filling, params, axis=a, cut=c, **sampling) for a, c in planes]
    # the grid point by its parameters' long names and units; when the grid was mapped onto
    # the model's terms (coefficients=), then the terms it maps to
    where = fixed_text(point, width=100)
    if "coefficients" in ds.attrs:
        where += "\nmodel terms: " + ", ".join(f"{k} = {v:.4g}" for k, v in params.items())
    title = f"centre flow (hybrid Wannier centres), {model.name}\n{where}"
    return plot_flow(flows, title=title)
