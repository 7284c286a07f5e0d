"""The demo scenario: a fictional cubic mixed-valence compound, "tessarine".

Everything here is invented for illustration: the compound, its name and its numbers. Its
bands are described by the cubic d–f model :func:`toposweep.models.df_lattice` — a wide d band,
a narrow f band of opposite parity and a p-like hybridisation. In the story, a mean-field
treatment of the f shell gives a quasiparticle factor z (0 < z ≤ 1) that renormalises the f
electrons as a whole: the f level relative to the d level becomes z ε_f, the f bandwidth
z t_f and the hybridisation √z V. The demo maps the Z2 phase over the bare f level ε_f and z
adaptively (``ts.phase_map``): the boundaries ε_f = g (t_d / z − t_f) at the TRIM values g of
the model curve as z drops, and the map evaluates the points near them only. It writes the
NetCDF file and the pictures and prints the summary with the share of points evaluated.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import xarray as xr

from . import models
from .flowplot import flow_figure
from .maps.phase_map import phase_map
from .model import Model
from .plotting import plot_line, plot_phase_map
from .summary import summarise
from .sweep import sweep

__all__ = ["COMPOUND", "cut_at_fixed_weight", "renormalised_terms", "run_demo"]

#: the invented compound: bare band parameters in eV (ours, not fitted to any material)
COMPOUND = {
    "name": "tessarine (fictional cubic mixed-valence compound)",
    "d_hopping": 0.32,
    "f_hopping": -0.04,
    "hybridisation": 0.25,
}
F_LEVEL = xr.DataArray(
    np.round(np.linspace(-3.0, 1.0, 161), 10),
    dims="f_level",
    attrs={"long_name": "bare f level relative to the d level", "units": "eV"},
)
WEIGHT = xr.DataArray(
    np.round(np.linspace(0.25, 1.0, 76), 10),
    dims="weight",
    attrs={"long_name": "f quasiparticle factor z", "units": "1"},
)
#: a point in the strong-TI region whose centre flow (hybrid Wannier centres) the demo draws
FLOW_POINT = {"f_level": -1.5, "weight": 0.8}
#: the cut drawn with its gaps (a uniform sweep along f_level at this z)
CUT_WEIGHT = 0.6


def renormalised_terms(point: dict[str, float]) -> dict[str, float]:
    """Model terms of tessarine at a bare f level and a quasiparticle factor z.

    Examples
    --------
    >>> renormalised_terms({"f_level": -1.0, "weight": 0.25})["hybridisation"]
    0.125
    """
    z = point["weight"]
    return {
        "d_hopping": COMPOUND["d_hopping"],
        "f_hopping": z * COMPOUND["f_hopping"],
        "f_level": z * point["f_level"],
        "hybridisation": math.sqrt(z) * COMPOUND["hybridisation"],
    }


def cut_at_fixed_weight(model: Model) -> xr.Dataset:
    """The uniform sweep along f_level at z = :data:`CUT_WEIGHT` that the demo draws.

    z is a one-value grid axis rather than a fixed parameter, so it keeps its long name and
    units for the figure's title.
    """
    weight = xr.DataArray([CUT_WEIGHT], dims="weight", attrs=WEIGHT.attrs)
    return sweep(
        model,
        {"f_level": F_LEVEL, "weight": weight},
        filling=2,
        coefficients=renormalised_terms,
        progress=False,
    )


def run_demo(out_dir: str | Path, *, progress: bool = True) -> list[Path]:
    """Run the demo map into ``out_dir``; returns the files written.

    Examples
    --------
    >>> # at z = 1 the f level inverts the three X points at −3.5 (t_d − t_f) = −1.26 eV
    >>> round(-3.5 * (COMPOUND["d_hopping"] - COMPOUND["f_hopping"]), 6)
    -1.26
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    model = models.df_lattice()
    model.name = f"cubic d-f lattice model of {COMPOUND['name']}"
    nc = out / "tessarine.nc"
    grid = {"f_level": F_LEVEL, "weight": WEIGHT}
    ds = phase_map(
        model,
        grid,
        filling=2,
        coefficients=renormalised_terms,
        out=nc,
        overwrite=True,  # (the demo's own folder: a second run redraws it)
        progress=progress,
    )
    print(summarise(ds, str(nc)))
    share = int(ds.attrs["points_evaluated"]) / ds.phase.size
    print(f"\nevaluated {share:.1%} of the {ds.phase.size} grid points")
    written = [nc]
    fig = plot_phase_map(ds, "f_level", "weight")
    written.append(out / "tessarine-phases.png")
    fig.savefig(written[-1], dpi=130)
    fig = plot_line(cut_at_fixed_weight(model), "f_level")
    written.append(out / "tessarine-cut.png")
    fig.savefig(written[-1], dpi=130)
    fig = flow_figure(ds, FLOW_POINT)
    written.append(out / "tessarine-flow.png")
    fig.savefig(written[-1], dpi=130)
    ds.close()
    return written
