"""Pictures of results (matplotlib): phase diagrams, index/gap lines, Wannier centre flow.

Phases get discrete colours by class — trivial insulator, weak TI, strong TI, Z2-odd 2D
insulator, undefined — with a shade per set of indices inside a class, so (1;000) and (1;111)
are told apart. In phase diagrams the colour is darkened where the direct gap is small, so gap
closings show as dark lines; a grey bar gives the scale. Figures are built without pyplot, so
importing this module changes no global matplotlib state (notebooks keep their backend).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import xarray as xr
from matplotlib.cm import ScalarMappable
from matplotlib.colors import LinearSegmentedColormap, PowerNorm, to_rgb
from matplotlib.figure import Figure
from matplotlib.patches import Patch

from .errors import ParameterError
from .summary import phase_labels

__all__ = ["axis_label", "phase_colours", "plot_flow", "plot_line", "plot_phase_map", "select"]

#: colour families per phase code: the first colour for the most common index set, and so on
FAMILIES: dict[int, list[str]] = {
    0: ["#e9dfc7", "#d8cba8", "#f4eedf"],  # trivial insulator: sand
    1: ["#4f8fcf", "#8cb8e3", "#2d5f94"],  # weak TI: blues
    2: ["#c8384f", "#f08a5d", "#8a1c33"],  # strong TI: reds/orange
    3: ["#7b5ab5", "#b49ee0", "#4b2f7f"],  # Z2-odd 2D insulator: purples
}
UNDEFINED = "#7f7f7f"


def axis_label(var: xr.DataArray) -> str:
    """``long_name (units)`` of a coordinate; dimensionless units ("1") are left out.

    Examples
    --------
    >>> axis_label(xr.DataArray([1.0], dims="x", attrs={"long_name": "f level", "units": "eV"}))
    'f level (eV)'
    """
    name = str(var.attrs.get("long_name", var.name))
    units = str(var.attrs.get("units", ""))
    return name if units in ("", "1") else f"{name} ({units})"


def select(ds: xr.Dataset, keep: Sequence[str], at: Mapping[str, float] | None) -> xr.Dataset:
    """Reduce ``ds`` to the dims ``keep``: other grid dims at the values ``at`` (nearest).

    A dim that is neither kept nor given in ``at`` is taken at its middle value.
    """
    at = dict(at or {})
    grid = [str(d) for d in ds.phase.dims]
    for name in [*keep, *at]:
        if name not in grid:
            raise ParameterError(f"{name!r} is not a swept parameter of this result; it has {grid}")
    pick: dict[str, float] = {}
    for d in grid:
        if d in keep:
            continue
        pick[d] = at[d] if d in at else float(ds[d].values[len(ds[d]) // 2])
    return ds.sel(pick, method="nearest") if pick else ds


def phase_colours(labels: np.ndarray, phase: np.ndarray) -> dict[str, str]:
    """A colour per distinct label: by phase class, then by how common the label is."""
    counts: dict[str, tuple[int, int]] = {}
    for lab, ph in zip(labels.ravel(), phase.ravel(), strict=True):
        n, _ = counts.get(lab, (0, int(ph)))
        counts[lab] = (n + 1, int(ph))
    colours: dict[str, str] = {}
    used: dict[int, int] = {}
    for lab, (_, ph) in sorted(counts.items(), key=lambda kv: -kv[1][0]):
        if ph < 0:
            colours[lab] = UNDEFINED
            continue
        family = FAMILIES.get(ph, ["#999999"])
        colours[lab] = family[used.get(ph, 0) % len(family)]
        used[ph] = used.get(ph, 0) + 1
    return colours


def _legend_order(colours: Mapping[str, str]) -> list[str]:
    def key(lab: str) -> tuple[int, str]:
        for rank, word in enumerate(("strong", "weak", "Z2-odd", "trivial", "undefined")):
            if lab.startswith(word):
                return rank, lab
        return 9, lab

    return sorted(colours, key=key)


def _title(ds: xr.Dataset, fixed: Mapping[str, Any]) -> str:
    import json

    try:
        name = json.loads(ds.attrs["model"]).get("name", "")
    except (KeyError, ValueError):
        name = ""
    extra = ", ".join(f"{k} = {v:.4g}" for k, v in fixed.items())
    return f"{name}" + (f"\n{extra}" if extra else "")


def plot_phase_map(
    ds: xr.Dataset, x: str, y: str, *, at: Mapping[str, float] | None = None
) -> Figure:
    """Phase diagram over the grid dims ``x`` and ``y``, darkened where the gap is small."""
    sub = select(ds, [x, y], at).transpose(y, x, ...)
    labels = phase_labels(sub)
    phase = sub.phase.values
    colours = phase_colours(labels, phase)
    rgb = np.array([[to_rgb(colours[lab]) for lab in row] for row in labels])
    gap = np.where(phase >= 0, sub.gap_direct.values, np.nan)
    scale = float(np.nanpercentile(gap, 90)) if np.isfinite(gap).any() else 1.0
    scale = scale if scale > 0 else 1.0
    # brightness 0.3 … 1 with the square root of the gap: closings become dark valleys
    shade = 0.3 + 0.7 * np.sqrt(np.clip(np.nan_to_num(gap, nan=scale) / scale, 0, 1))
    rgb = rgb * shade[..., None]

    fig = Figure(figsize=(8.4, 5.2), layout="constrained")
    grid = fig.add_gridspec(1, 2, width_ratios=[3.2, 1.25])
    ax = fig.add_subplot(grid[0, 0])
    side = fig.add_subplot(grid[0, 1])
    side.axis("off")
    ax.pcolormesh(sub[x].values, sub[y].values, rgb, shading="nearest")
    ax.set_xlabel(axis_label(sub[x]))
    ax.set_ylabel(axis_label(sub[y]))
    fixed = {str(k): float(v) for k, v in sub.coords.items() if v.ndim == 0}
    ax.set_title(_title(ds, fixed), fontsize=10)
    handles = [Patch(color=colours[lab], label=lab) for lab in _legend_order(colours)]
    side.legend(handles=handles, loc="upper left", frameon=False, fontsize=9, title="phase")
    # the shading scale: a small horizontal bar under the legend
    cax = side.inset_axes((0.05, 0.12, 0.85, 0.05))
    mappable = ScalarMappable(
        cmap=LinearSegmentedColormap.from_list("shade", [(0.3, 0.3, 0.3), (1, 1, 1)]),
        norm=PowerNorm(0.5, vmin=0, vmax=scale),
    )
    bar = fig.colorbar(mappable, cax=cax, orientation="horizontal")
    unit = str(sub.gap_direct.attrs.get("units", ""))
    bar.set_label("shading: direct gap" + ("" if unit in ("", "1") else f" ({unit})"), fontsize=8)
    bar.set_ticks([0, scale / 4, scale], labels=[f"{t:.2g}" for t in (0, scale / 4, scale)])
    bar.ax.tick_params(labelsize=7)
    return fig


def plot_line(ds: xr.Dataset, x: str, *, at: Mapping[str, float] | None = None) -> Figure:
    """Indices (top) and gaps (bottom) against one grid dim, on the phase colours."""
    sub = select(ds, [x], at)
    labels = phase_labels(sub)
    phase = sub.phase.values
    colours = phase_colours(labels, phase)
    xs = sub[x].values
    edges = np.concatenate(
        [[xs[0] - (xs[1] - xs[0]) / 2 if len(xs) > 1 else xs[0] - 0.5],
         (xs[1:] + xs[:-1]) / 2,
         [xs[-1] + (xs[-1] - xs[-2]) / 2 if len(xs) > 1 else xs[0] + 0.5]]
    )  # fmt: skip
    fig = Figure(figsize=(7.8, 5.2), layout="constrained")
    top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=[1, 1.4])
    for axis in (top, bottom):
        for i, lab in enumerate(labels):
            axis.axvspan(edges[i], edges[i + 1], color=colours[lab], alpha=0.55, lw=0)
    nu0 = np.where(sub.nu0.values >= 0, sub.nu0.values, np.nan)
    top.step(xs, nu0, where="mid", color="k", lw=2, label="ν0" if "nu" in sub else "Z2")
    if "nu" in sub:
        for k, style in zip(range(3), ("--", "-.", ":"), strict=True):
            weak = sub.nu.values[:, k].astype(float)
            weak[weak < 0] = np.nan
            top.step(xs, weak + 0.04 * (k + 1), where="mid", ls=style, lw=1.2,
                     label=f"ν{k + 1}")  # fmt: skip
    top.set_yticks([0, 1])
    top.set_ylim(-0.3, 1.4)
    top.set_ylabel("Z2 index")
    top.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
    unit = sub.gap_direct.attrs.get("units", "")
    bottom.plot(xs, sub.gap_direct.values, "k-", label="direct gap")
    bottom.plot(xs, sub.gap_indirect.values, color="0.35", ls="--", label="indirect gap")
    bottom.axhline(0, color="0.5", lw=0.8)
    bottom.set_ylabel("gap" + ("" if unit in ("", "1") else f" ({unit})"))
    bottom.set_xlabel(axis_label(sub[x]))
    handles = [Patch(color=colours[lab], alpha=0.55, label=lab) for lab in _legend_order(colours)]
    bottom.legend(handles=[*bottom.get_legend_handles_labels()[0], *handles], fontsize=8,
                  loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)  # fmt: skip
    fixed = {str(k): float(v) for k, v in sub.coords.items() if v.ndim == 0}
    top.set_title(_title(ds, fixed), fontsize=10)
    return fig


def plot_flow(flows: Sequence[xr.Dataset], z2: Sequence[int], title: str) -> Figure:
    """Hybrid Wannier centres against the pump coordinate, one panel per plane."""
    n = len(flows)
    cols = 3 if n == 6 else n
    rows = 2 if n == 6 else 1
    size = (3.0 * cols + 0.6, 2.9 * rows + 0.6) if n > 1 else (6.4, 4.6)
    fig = Figure(figsize=size, layout="constrained")
    axes = fig.subplots(rows, cols, squeeze=False, sharey=True)
    for i, (flow, z) in enumerate(zip(flows, z2, strict=True)):
        ax = axes[i % rows][i // rows] if n == 6 else axes[0][i]
        pump = flow.pump.values
        for band in range(flow.sizes["band"]):
            ax.plot(pump, flow.centre.values[:, band], ".", ms=2.5, color="#2d5f94")
        ax.set_xlim(0, 0.5)
        ax.set_ylim(0, 1)
        if "plane_axis" in flow.attrs:
            plane = f"κ{flow.attrs['plane_axis']} = {flow.attrs['cut']:g}"
        else:
            plane = "2D model"
        z_text = "undefined" if z < 0 else str(z)
        ax.set_title(f"{plane}: Z2 = {z_text}", fontsize=9)
        ax.set_xlabel(axis_label(flow.pump))
        ax.set_ylabel(axis_label(flow.centre).replace("hybrid Wannier centre", "HWC"))
    fig.suptitle(title, fontsize=10)
    return fig
