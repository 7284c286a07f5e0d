"""The demo scenario: a fictional cubic mixed-valence compound, "tessarine".

Everything here is invented for illustration: the compound, its name and its numbers. Its
bands are described by the cubic d–f model :func:`toposweep.models.df_lattice` — a wide d band,
a narrow f band of opposite parity and a p-like hybridisation. In the story, pressure moves the
f level up through the d band and the hybridisation grows as the f shell delocalises; the demo
maps the Z2 phase over those two knobs, writes the NetCDF file and the pictures, and prints the
summary.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import xarray as xr

from . import models
from .flowplot import flow_figure
from .plotting import plot_line, plot_phase_map
from .summary import summarise
from .sweep import sweep

__all__ = ["COMPOUND", "run_demo"]

#: the invented compound: band parameters in eV (ours, not fitted to any material)
COMPOUND = {
    "name": "tessarine (fictional cubic mixed-valence compound)",
    "d_hopping": 0.32,
    "f_hopping": -0.04,
}
F_LEVEL = xr.DataArray(
    np.round(np.linspace(-1.5, 0.4, 39), 10),
    dims="f_level",
    attrs={"long_name": "f level relative to the d level", "units": "eV"},
)
HYBRIDISATION = xr.DataArray(
    np.round(np.linspace(0.0, 0.3, 16), 10),
    dims="hybridisation",
    attrs={"long_name": "d-f hybridisation V", "units": "eV"},
)
#: a point in the strong-TI region whose Wannier centre flow the demo draws
FLOW_POINT = {"f_level": -0.9, "hybridisation": 0.2}


def run_demo(out_dir: str | Path, *, progress: bool = True) -> list[Path]:
    """Run the demo sweep into ``out_dir``; returns the files written.

    Examples
    --------
    >>> # t_d − t_f sets the phase boundaries: the f level inverts X at −3.5 Δ, Γ at −1.5 Δ, ...
    >>> round(COMPOUND["d_hopping"] - COMPOUND["f_hopping"], 6)
    0.36
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    model = models.df_lattice(d_hopping=COMPOUND["d_hopping"], f_hopping=COMPOUND["f_hopping"])
    model.name = f"cubic d-f lattice model of {COMPOUND['name']}"
    nc = out / "tessarine.nc"
    ds = sweep(
        model,
        {"f_level": F_LEVEL, "hybridisation": HYBRIDISATION},
        filling=2,
        out=nc,
        progress=progress,
    )
    print(summarise(ds, str(nc)))
    written = [nc]
    fig = plot_phase_map(ds, "f_level", "hybridisation")
    written.append(out / "tessarine-phases.png")
    fig.savefig(written[-1], dpi=130)
    fig = plot_line(ds, "f_level", at={"hybridisation": 0.2})
    written.append(out / "tessarine-cut.png")
    fig.savefig(written[-1], dpi=130)
    fig = flow_figure(ds, FLOW_POINT)
    written.append(out / "tessarine-flow.png")
    fig.savefig(written[-1], dpi=130)
    ds.close()
    return written
