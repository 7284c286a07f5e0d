"""Pictures of results (matplotlib): phase diagrams, index/gap lines, centre flows.

Every phase has one fixed colour, the same in every figure (:mod:`toposweep.phase_style`:
a colour per set of indices (ν0; ν1ν2ν3), chosen to stay apart under colour-blind vision;
metals hatched over their bands' colour; undefined points white). In phase diagrams the colour
is darkened near gap closings, so they show as dark lines, and each region is labelled with its
indices. Figures are built without pyplot, so importing this module changes no global
matplotlib state (notebooks keep their backend).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import xarray as xr
from matplotlib import patheffects, rc_context
from matplotlib.cm import ScalarMappable
from matplotlib.collections import PatchCollection
from matplotlib.colors import LinearSegmentedColormap, PowerNorm, to_rgb
from matplotlib.figure import Figure
from matplotlib.patches import Patch, Rectangle

from .errors import ParameterError
from .maps.map_report import draw_transitions, transitions_in
from .phase_style import (
    METAL_HATCH,
    SHADE_FLOOR,
    SHADE_FROM,
    gap_shade,
    is_metal,
    phase_colour,
    phase_short_label,
)
from .summary import phase_labels

__all__ = [
    "axis_label",
    "fixed_text",
    "phase_colours",
    "plot_flow",
    "plot_line",
    "plot_phase_map",
    "select",
]

#: legend order: strong, weak, 2D Z2-odd, trivial, then metals, then undefined
_LEGEND_RANK = ("strong", "weak", "Z2-odd", "trivial", "metal", "undefined")


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


class _PhaseStyle:
    """Label, colour and metal flag of every point of a selection, and the legend entries."""

    def __init__(self, sub: xr.Dataset) -> None:
        self.labels = phase_labels(sub)
        phase, nu0 = sub.phase.values, sub.nu0.values
        nu = sub.nu.values if "nu" in sub else None
        self.colours = np.empty(phase.shape, dtype=object)
        self.short = np.empty(phase.shape, dtype=object)
        self.metal = np.zeros(phase.shape, dtype=bool)
        #: colour → label of every colour present: the insulator's label where an insulating
        #: point has it, else the first metal's (metals add one "hatched" entry besides)
        self.legend: dict[str, str] = {}
        for idx in np.ndindex(phase.shape):
            args = (int(phase[idx]), int(nu0[idx]), None if nu is None else tuple(nu[idx]))
            colour = phase_colour(*args)
            self.colours[idx] = colour
            self.short[idx] = phase_short_label(*args)
            self.metal[idx] = is_metal(args[0])
            if colour not in self.legend or (
                not self.metal[idx] and self.legend[colour].startswith("metal")
            ):
                self.legend[colour] = self.labels[idx]

    def handles(self, alpha: float = 1.0) -> list[Patch]:
        """Legend patches: one per colour present (strong phases first), then metals' hatching."""

        def key(lab: str) -> tuple[int, str]:
            for rank, word in enumerate(_LEGEND_RANK):
                if lab.startswith(word):
                    return rank, lab
            return len(_LEGEND_RANK), lab

        entries = sorted(self.legend.items(), key=lambda kv: key(kv[1]))
        out = [
            Patch(facecolor=c, edgecolor="0.35", linewidth=0.6, alpha=alpha, label=lab)
            for c, lab in entries
        ]
        if self.metal.any():
            label = "hatched: metal (bands' indices)"
            out.append(Patch(facecolor="white", edgecolor="0.35", hatch=METAL_HATCH, label=label))
        return out


def phase_colours(ds: xr.Dataset) -> dict[str, str]:
    """The fixed colour of every phase label present in ``ds`` (metals: their bands' colour).

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.sweep(ts.models.bhz(), {"mass": [-3.0, -1.0]}, 2, progress=False)
    >>> phase_colours(ds)
    {'trivial insulator (Z2 = 0)': '#DDDDDD', 'Z2-odd 2D insulator (Z2 = 1)': '#CC3311'}
    """
    style = _PhaseStyle(ds)
    pairs = zip(style.labels.ravel(), style.colours.ravel(), strict=True)
    return {str(lab): str(c) for lab, c in pairs}


def _deepest_cells(labels: np.ndarray) -> dict[str, tuple[int, int, int]]:
    """For each label of a 2-D array: (row, column, depth) of its cell farthest from an edge.

    Regions are eroded one 4-neighbour step at a time; the last cells left are the deepest and
    ``depth`` counts the steps. Where a label has several regions, the deepest is kept.
    """
    out: dict[str, tuple[int, int, int]] = {}
    for lab in {str(v) for v in labels.ravel()}:
        mask = np.pad(labels == lab, 1)  # (the map's border counts as an edge: text stays in)
        depth = 0
        while True:
            inner = mask.copy()
            inner[1:, :] &= mask[:-1, :]
            inner[:-1, :] &= mask[1:, :]
            inner[:, 1:] &= mask[:, :-1]
            inner[:, :-1] &= mask[:, 1:]
            if not inner.any():
                break
            mask, depth = inner, depth + 1
        cells = np.argwhere(mask)  # the deepest cells; take the one nearest their centre
        row, col = cells[np.argmin(((cells - cells.mean(axis=0)) ** 2).sum(axis=1))]
        out[lab] = (int(row) - 1, int(col) - 1, depth)
    return out


def _fixed_parts(sub: xr.Dataset) -> list[str]:
    parts = []
    for k, v in sub.coords.items():
        if v.ndim != 0:
            continue
        name = str(v.attrs.get("long_name", k))
        units = str(v.attrs.get("units", ""))
        parts.append(f"{name} = {float(v):.4g}" + ("" if units in ("", "1") else f" {units}"))
    return parts


def fixed_text(sub: xr.Dataset, width: int = 0) -> str:
    """The grid parameters a selection holds fixed, by their long names and units.

    With ``width`` > 0 the text is broken between parameters into lines of about that many
    characters (a figure title must not run off the figure).

    Examples
    --------
    >>> z = xr.DataArray(0.6, attrs={"long_name": "f quasiparticle factor z", "units": "1"})
    >>> e = xr.DataArray(-1.5, attrs={"long_name": "bare f level", "units": "eV"})
    >>> fixed_text(xr.Dataset(coords={"weight": z, "f_level": e}))
    'f quasiparticle factor z = 0.6, bare f level = -1.5 eV'
    >>> print(fixed_text(xr.Dataset(coords={"weight": z, "f_level": e}), width=30))
    f quasiparticle factor z = 0.6,
    bare f level = -1.5 eV
    """
    lines: list[str] = []
    for part in _fixed_parts(sub):
        if lines and (width <= 0 or len(lines[-1]) + len(part) + 2 <= width):
            lines[-1] += f", {part}"
        else:
            lines.append(part)
    return ",\n".join(lines)


def _title(ds: xr.Dataset, sub: xr.Dataset) -> str:
    import json

    try:
        name = json.loads(ds.attrs["model"]).get("name", "")
    except (KeyError, ValueError):
        name = ""
    extra = fixed_text(sub, width=72)
    return f"{name}" + (f"\n{extra}" if extra else "")


def plot_phase_map(
    ds: xr.Dataset,
    x: str,
    y: str,
    *,
    at: Mapping[str, float] | None = None,
    region_labels: bool = True,
    show_evaluated: bool = False,
) -> Figure:
    """Phase diagram over the grid dims ``x`` and ``y``, darkened where the gap is small.

    Each phase has its fixed colour (:mod:`toposweep.phase_style`); metals are hatched over
    their bands' colour, undefined points left white. The colour is exact where the direct
    gap is at least a quarter of the map's typical gap (its 90th percentile) and darkens to
    half brightness at a closing. ``region_labels`` prints each phase's indices inside its
    largest region (so the map reads without colour too).

    For a phase map (:func:`toposweep.phase_map`) the located transitions are marked instead
    of the gap shading (its gaps are measured at the evaluated points only), and with
    ``show_evaluated`` the points that were evaluated.
    """
    sub = select(ds, [x, y], at).transpose(y, x, ...)
    style = _PhaseStyle(sub)
    phase = sub.phase.values
    rgb = np.array([[to_rgb(c) for c in row] for row in style.colours])
    gap = np.where(phase >= 0, sub.gap_direct.values, np.nan)
    scale = float(np.nanpercentile(gap, 90)) if np.isfinite(gap).any() else 1.0
    scale = scale if scale > 0 else 1.0
    # (a phase map measured gaps at its evaluated points only: no shading there, its
    # transitions are drawn instead)
    adaptive = "obtained" in sub
    rgb = rgb if adaptive else rgb * gap_shade(gap, scale)[..., None]

    handles = style.handles()
    fig = Figure(figsize=(8.6, max(5.2, 2.3 + 0.24 * len(handles))), layout="constrained")
    grid = fig.add_gridspec(1, 2, width_ratios=[3.2, 1.45])
    ax = fig.add_subplot(grid[0, 0])
    side = fig.add_subplot(grid[0, 1])
    side.axis("off")
    xs, ys = sub[x].values, sub[y].values
    ax.pcolormesh(xs, ys, rgb, shading="nearest")
    if style.metal.any():  # (dark hatching on light colours, light on dark ones)
        dark = _luminance(rgb) < 0.2
        for cells, ink in ((style.metal & ~dark, "0.15"), (style.metal & dark, "0.85")):
            if not cells.any():
                continue
            with rc_context({"hatch.color": ink, "hatch.linewidth": 0.7}):
                ax.add_collection(_metal_cells(xs, ys, cells))
    if region_labels:
        _label_regions(ax, xs, ys, style)
    marks = draw_transitions(ax, ds, sub, x, y, evaluated=show_evaluated)
    ax.set_xlabel(axis_label(sub[x]))
    ax.set_ylabel(axis_label(sub[y]))
    ax.set_title(_title(ds, sub), fontsize=10)
    if marks:  # (beside the map, under the phases: a legend on the map would hide points)
        handles.append(Patch(visible=False, label=" "))
        handles += marks
    side.legend(
        handles=handles, loc="upper left", frameon=False, fontsize=9, title="phase", markerscale=1.6
    )
    if adaptive:
        return fig
    # the shading scale: a small horizontal bar under the legend
    cax = side.inset_axes((0.05, 0.06, 0.85, 0.035))
    limit = SHADE_FROM * scale
    mappable = ScalarMappable(
        cmap=LinearSegmentedColormap.from_list("shade", [(SHADE_FLOOR,) * 3, (1, 1, 1)]),
        norm=PowerNorm(0.5, vmin=0, vmax=limit),
    )
    bar = fig.colorbar(mappable, cax=cax, orientation="horizontal")
    unit = str(sub.gap_direct.attrs.get("units", ""))
    bar.set_label("shading: direct gap" + ("" if unit in ("", "1") else f" ({unit})"), fontsize=8)
    bar.set_ticks([0, limit / 4, limit], labels=[f"{t:.2g}" for t in (0, limit / 4, limit)])
    bar.ax.tick_params(labelsize=7)
    return fig


def _luminance(rgb: np.ndarray) -> np.ndarray:
    """Relative luminance of sRGB colours (last axis r, g, b in 0…1), as WCAG 2.1 defines it."""
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    return np.asarray(lin @ np.array([0.2126, 0.7152, 0.0722]))


def _cell_edges(values: np.ndarray) -> np.ndarray:
    """Edges of the cells that ``pcolormesh(shading="nearest")`` draws around grid values."""
    if len(values) == 1:
        return np.array([values[0] - 0.5, values[0] + 0.5])
    mid = (values[1:] + values[:-1]) / 2
    return np.concatenate([[2 * values[0] - mid[0]], mid, [2 * values[-1] - mid[-1]]])


def _metal_cells(xs: np.ndarray, ys: np.ndarray, metal: np.ndarray) -> PatchCollection:
    """Hatching over exactly the cells of metal points (one rectangle per run in a row).

    (A contour of the metal mask would cut cells diagonally and leave the map's outer half
    cells bare.)
    """
    ex, ey = _cell_edges(xs), _cell_edges(ys)
    boxes = []
    for row in range(metal.shape[0]):
        flags = np.concatenate([[False], metal[row], [False]])
        starts = np.flatnonzero(flags[1:] & ~flags[:-1])
        stops = np.flatnonzero(~flags[1:] & flags[:-1])
        for a, b in zip(starts, stops, strict=True):
            boxes.append(Rectangle((ex[a], ey[row]), ex[b] - ex[a], ey[row + 1] - ey[row]))
    return PatchCollection(boxes, facecolor="none", edgecolor="none", hatch=METAL_HATCH,
                           zorder=2)  # fmt: skip


def _label_regions(ax: Any, xs: np.ndarray, ys: np.ndarray, style: _PhaseStyle) -> None:
    """Print each phase's indices at the deepest cell of its largest region.

    Skipped for labels whose regions are all less than five cells thick (lines, isolated
    points: the text would cover their neighbours) and for undefined points.
    """
    for row, col, depth in _deepest_cells(style.labels).values():
        text = style.short[row, col]
        if depth < 2 or text == "undefined":
            continue
        r, g, b = to_rgb(style.colours[row, col])
        dark = 0.2126 * r + 0.7152 * g + 0.0722 * b < 0.45  # (relative luminance, sRGB weights)
        ax.text(xs[col], ys[row], text, ha="center", va="center", fontsize=8, zorder=5,
                color="white" if dark else "black",
                path_effects=[patheffects.withStroke(linewidth=2, foreground="black" if dark
                                                     else "white", alpha=0.6)])  # fmt: skip


def plot_line(ds: xr.Dataset, x: str, *, at: Mapping[str, float] | None = None) -> Figure:
    """Indices (top) and gaps (bottom) against one grid dim, on the phase colours."""
    sub = select(ds, [x], at)
    style = _PhaseStyle(sub)
    xs = sub[x].values
    edges = np.concatenate(
        [[xs[0] - (xs[1] - xs[0]) / 2 if len(xs) > 1 else xs[0] - 0.5],
         (xs[1:] + xs[:-1]) / 2,
         [xs[-1] + (xs[-1] - xs[-2]) / 2 if len(xs) > 1 else xs[0] + 0.5]]
    )  # fmt: skip
    fig = Figure(figsize=(7.8, 5.2), layout="constrained")
    top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=[1, 1.4])
    for axis in (top, bottom):
        for i in range(len(xs)):
            axis.axvspan(edges[i], edges[i + 1], facecolor=style.colours[i], alpha=0.55, lw=0,
                         hatch=METAL_HATCH if style.metal[i] else None)  # fmt: skip
    nu0 = np.where(sub.nu0.values >= 0, sub.nu0.values, np.nan)
    top.step(xs, nu0, where="mid", color="k", lw=2, label="ν0" if "nu" in sub else "Z2")
    if "nu" in sub:
        for k, style_ in zip(range(3), ("--", "-.", ":"), strict=True):
            weak = sub.nu.values[:, k].astype(float)
            weak[weak < 0] = np.nan
            top.step(xs, weak + 0.04 * (k + 1), where="mid", ls=style_, lw=1.2,
                     label=f"ν{k + 1}")  # fmt: skip
    top.set_yticks([0, 1])
    top.set_ylim(-0.3, 1.4)
    top.set_ylabel("Z2 index")
    top.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
    unit = sub.gap_direct.attrs.get("units", "")
    if "obtained" in sub:  # a phase map: gaps measured at its evaluated points only
        _phase_map_gaps(top, bottom, ds, sub, x)
    else:
        bottom.plot(xs, sub.gap_direct.values, "k-", label="direct gap")
        bottom.plot(xs, sub.gap_indirect.values, color="0.35", ls="--", label="indirect gap")
    bottom.axhline(0, color="0.5", lw=0.8)
    bottom.set_ylabel("gap" + ("" if unit in ("", "1") else f" ({unit})"))
    bottom.set_xlabel(axis_label(sub[x]))
    handles = style.handles(alpha=0.55)
    bottom.legend(handles=[*bottom.get_legend_handles_labels()[0], *handles], fontsize=8,
                  loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)  # fmt: skip
    top.set_title(_title(ds, sub), fontsize=10)
    return fig


def _phase_map_gaps(top: Any, bottom: Any, ds: xr.Dataset, sub: xr.Dataset, x: str) -> None:
    """A phase map's gaps on a cut: measured ones as dots, proven bounds, its transitions.

    Lines through the measured gaps would join points far apart (the map skips the insides of
    phases), so they are drawn as dots; the transitions located on the cut are vertical lines.
    """
    xs = sub[x].values
    measured = sub.obtained.values == 0
    bottom.plot(xs[measured], sub.gap_direct.values[measured], "o", ms=3, color="k",
                label="direct gap (evaluated)")  # fmt: skip
    bottom.plot(xs[measured], sub.gap_indirect.values[measured], "o", ms=3, mfc="none",
                mec="0.35", label="indirect gap (evaluated)")  # fmt: skip
    if "gap_bound" in sub and np.isfinite(sub.gap_bound.values).any():
        bottom.plot(xs, sub.gap_bound.values, "_", ms=5, color="0.35",
                    label="proven lower bound (not evaluated)")  # fmt: skip
    if ds.sizes.get("transition", 0):
        at = ds[f"transition_{x}"].values[transitions_in(ds, sub, (x,))]
        for i, value in enumerate(at):
            top.axvline(value, color="k", lw=0.8, ls=":")
            bottom.axvline(value, color="k", lw=0.8, ls=":", label=None if i else "transition")


#: centre flow markers: the evenly spaced initial lines and the lines inserted between them
#: (Tol's vibrant blue and orange, told apart in colour-blind vision too)
FLOW_INITIAL, FLOW_INSERTED = "#0077BB", "#EE7733"


def plot_flow(
    flows: Sequence[xr.Dataset],
    z2: Sequence[int] | None = None,
    title: str | None = None,
) -> Figure:
    """Centre flows — hybrid Wannier centres against the pump coordinate — one panel per plane.

    Each flow is a :func:`toposweep.centre_flow` result. A panel shows the centres of every
    pump line the index came from, the lines inserted where the centres moved fast in orange
    (with a tick above the panel), and its plane's Z2 in the panel title. ``z2`` overrides the
    flows' own values; ``title`` defaults to the model's name and the parameters.

    Examples
    --------
    >>> import toposweep as ts
    >>> flow = ts.centre_flow(ts.models.bhz(), 2, {"mass": -1.0})
    >>> plot_flow([flow]).axes[0].get_title()
    '2D model: Z2 = 1'
    """
    n = len(flows)
    if n == 0:
        raise ParameterError("plot_flow needs at least one centre flow")
    if z2 is None:
        z2 = [int(f.z2) if "z2" in f else -1 for f in flows]
    cols = 3 if n == 6 else n
    rows = 2 if n == 6 else 1
    size = (3.0 * cols + 0.6, 2.9 * rows + 0.9) if n > 1 else (6.4, 4.8)
    fig = Figure(figsize=size, layout="constrained")
    axes = fig.subplots(rows, cols, squeeze=False, sharey=True)
    for i, (flow, z) in enumerate(zip(flows, z2, strict=True)):
        ax = axes[i % rows][i // rows] if n == 6 else axes[0][i]
        pump = flow.pump.values
        centres = flow.centre.values
        inserted = flow.inserted.values if "inserted" in flow else np.zeros(len(pump), bool)
        for mask, colour, label in ((~inserted, FLOW_INITIAL, "initial line"),
                                    (inserted, FLOW_INSERTED, "inserted line")):  # fmt: skip
            if mask.any():
                xs = np.repeat(pump[mask], centres.shape[1])
                ax.plot(xs, centres[mask].ravel(), ".", ms=3, color=colour, label=label)
        if inserted.any():  # where lines were inserted, above the panel
            top = ax.get_xaxis_transform()  # (x in data, y in axes fractions)
            ax.plot(pump[inserted], np.ones(int(inserted.sum())), "v", ms=3.5,
                    color=FLOW_INSERTED, clip_on=False, transform=top)  # fmt: skip
        ax.set_xlim(0, 0.5)
        ax.set_ylim(0, 1)
        if "plane_axis" in flow.attrs:
            plane = f"κ{flow.attrs['plane_axis']} = {flow.attrs['cut']:g}"
        else:
            plane = "2D model"
        z_text = "undefined" if z < 0 else str(z)
        ax.set_title(f"{plane}: Z2 = {z_text}", fontsize=9)
        ax.set_xlabel(f"pump coordinate κ{flow.attrs.get('pump_axis', 2)}")
        ax.set_ylabel(f"centre along κ{flow.attrs.get('loop_axis', 1)}")
    # the markers' legend under the panels, where it covers no centre
    handles, labels = axes.flat[0].get_legend_handles_labels()
    for ax in axes.flat[1:]:
        for h, lab in zip(*ax.get_legend_handles_labels(), strict=True):
            if lab not in labels:
                handles.append(h)
                labels.append(lab)
    if "inserted line" in labels:
        fig.legend(handles, labels, loc="outside lower center", ncols=len(labels), fontsize=8,
                   frameon=False, markerscale=2)  # fmt: skip
    if title is None:
        first = flows[0]
        where = fixed_text(first, width=100)
        name = str(first.attrs.get("model_name", ""))
        title = "centre flow (hybrid Wannier centres)" + (f", {name}" if name else "")
        title += f"\n{where}" if where else ""
    fig.suptitle(title, fontsize=10)
    return fig
