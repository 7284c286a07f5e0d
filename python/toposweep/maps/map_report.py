"""What a phase map adds to summaries and plots: how points were obtained, the transitions."""

from __future__ import annotations

from typing import Any

import numpy as np
import xarray as xr

__all__ = ["draw_transitions", "map_summary_lines"]

MAX_LISTED = 8


def _meanings(var: xr.DataArray) -> dict[int, str]:
    values = np.atleast_1d(np.asarray(var.attrs.get("flag_values", [])))
    return dict(zip(values.tolist(), str(var.attrs.get("flag_meanings", "")).split(), strict=False))


def map_summary_lines(ds: xr.Dataset) -> list[str]:
    """Lines on how the points of a phase map were obtained and where its transitions are.

    Empty for results that are not phase maps.
    """
    if "obtained" not in ds:
        return []
    how = ds.obtained.values
    total = how.size
    names = {0: "evaluated", 1: "proven by the gap bound", 2: "filled by agreement"}
    lines = ["", "points obtained:"]
    for code, name in names.items():
        n = int((how == code).sum())
        lines.append(f"  {name:24s} {n:6d}  {100 * n / max(total, 1):5.1f}%")
    n_tr = ds.sizes.get("transition", 0)
    if "transition_status" not in ds:
        return lines
    lines.append("")
    lines.append(f"transitions located: {n_tr}")
    if not n_tr:
        return lines
    status = ds.transition_status.values
    meanings = _meanings(ds.transition_status)
    for code in sorted(set(status.tolist())):
        lines.append(f"  {meanings.get(code, str(code)):42s} {int((status == code).sum()):6d}")
    dims = [str(d) for d in ds.phase.dims]
    unit = str(ds.transition_gap.attrs.get("units", ""))
    unit = "" if unit in ("", "1") else f" {unit}"
    for j in range(min(n_tr, MAX_LISTED)):
        where = ", ".join(f"{d}={float(ds[f'transition_{d}'].values[j]):.6g}" for d in dims)
        kappa = ", ".join(f"{k:.4f}" for k in ds.transition_kappa.values[j])
        lines.append(
            f"  at {where}: gap {float(ds.transition_gap.values[j]):.2g}{unit} at kappa "
            f"({kappa}), phase {int(ds.transition_phase_low.values[j])} -> "
            f"{int(ds.transition_phase_high.values[j])}"
        )
    if n_tr > MAX_LISTED:
        lines.append(f"  … and {n_tr - MAX_LISTED} more")
    return lines


def draw_transitions(
    ax: Any, ds: xr.Dataset, sub: xr.Dataset, x: str, y: str, *, evaluated: bool = False
) -> None:
    """Mark a phase map's transitions (and, if asked, its evaluated points) on a 2D slice.

    ``sub`` is the slice drawn (other grid dims fixed); transitions of other slices are left
    out. Does nothing for results that are not phase maps.
    """
    if evaluated and "obtained" in sub:
        ev = sub.obtained.transpose(y, x).values == 0
        gx, gy = np.meshgrid(sub[x].values, sub[y].values)
        ax.plot(gx[ev], gy[ev], ".", ms=1.2, color="0.15", alpha=0.6, label="evaluated")
    if "transition_status" not in ds or ds.sizes.get("transition", 0) == 0:
        return
    keep = np.ones(ds.sizes["transition"], bool)
    for d in (str(k) for k in ds.phase.dims):
        if d not in (x, y):
            keep &= np.isclose(ds[f"transition_{d}"].values, float(sub[d]))
    tx, ty = ds[f"transition_{x}"].values[keep], ds[f"transition_{y}"].values[keep]
    point = ds.transition_status.values[keep] == 0
    ax.plot(tx[point], ty[point], "o", ms=2.2, mfc="k", mec="none", label="gap closes")
    if (~point).any():
        ax.plot(tx[~point], ty[~point], "x", ms=3, color="k", mew=0.8, label="other transition")
    ax.legend(loc="lower right", fontsize=7, framealpha=0.8, markerscale=2)
