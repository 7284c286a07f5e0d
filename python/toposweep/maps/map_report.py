"""What a phase map adds to summaries and plots: how points were obtained, the transitions."""

from __future__ import annotations

from typing import Any

import numpy as np
import xarray as xr

__all__ = ["draw_transitions", "map_summary_lines", "transitions_in"]

MAX_LISTED = 8


def _meanings(var: xr.DataArray) -> dict[int, str]:
    values = np.atleast_1d(np.asarray(var.attrs.get("flag_values", [])))
    return dict(zip(values.tolist(), str(var.attrs.get("flag_meanings", "")).split(), strict=False))


#: phase codes as a summary line names them (metals: 10 + the code of their bands)
PHASE_NAMES = {-1: "undefined", 0: "trivial insulator", 1: "weak TI", 2: "strong TI",
               3: "Z2-odd 2D insulator"}  # fmt: skip


def _phase_name(code: int) -> str:
    """A phase code as a summary line says it.

    Examples
    --------
    >>> _phase_name(2), _phase_name(10), _phase_name(7)
    ('strong TI', 'metal (trivial insulator bands)', 'phase 7')
    """
    if code in PHASE_NAMES:
        return PHASE_NAMES[code]
    if code - 10 in PHASE_NAMES and code >= 10:
        return f"metal ({PHASE_NAMES[code - 10]} bands)"
    return f"phase {code}"


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
        name = meanings.get(code, str(code))  # (as the flag meanings say, like reasons)
        lines.append(f"  {name:42s} {int((status == code).sum()):6d}")
    dims = [str(d) for d in ds.phase.dims]
    unit = str(ds.transition_gap.attrs.get("units", ""))
    unit = "" if unit in ("", "1") else f" {unit}"
    for j in range(min(n_tr, MAX_LISTED)):
        low = int(ds.transition_phase_low.values[j])
        high = int(ds.transition_phase_high.values[j])
        where = ", ".join(f"{d}={float(ds[f'transition_{d}'].values[j]):.6g}" for d in dims)
        kappa = ", ".join(f"{k:.4f}" for k in ds.transition_kappa.values[j])
        lines.append(
            f"  at {where}: gap {float(ds.transition_gap.values[j]):.2g}{unit} at kappa "
            f"({kappa}), {_phase_name(low)} -> {_phase_name(high)}"
        )
    if n_tr > MAX_LISTED:
        lines.append(f"  … and {n_tr - MAX_LISTED} more")
    return lines


#: marker styles on a phase map: evaluated points as small white dots ringed in black and
#: located closings as larger black dots ringed in white, so each stands out on every phase
#: colour, pale grey and dark indigo alike (tests/test_plot_readability.py checks the contrast)
EVALUATED_STYLE = {"marker": "o", "ms": 2.0, "mfc": "white", "mec": "black", "mew": 0.35}
CLOSING_STYLE = {"marker": "o", "ms": 3.2, "mfc": "black", "mec": "white", "mew": 0.6}
OTHER_STYLE = {"marker": "X", "ms": 5.0, "mfc": "black", "mec": "white", "mew": 0.5}
#: markers of the other transition statuses, in the order of their codes (labelled by their
#: flag meanings: "bands overlap begins", "gap closed over an interval", ...)
OTHER_MARKERS = ("X", "D", "s", "P", "^", "v")


def transitions_in(ds: xr.Dataset, sub: xr.Dataset, free: tuple[str, ...]) -> np.ndarray:
    """Which transitions of ``ds`` lie in the slice ``sub`` (grid dims not in ``free`` fixed)."""
    keep = np.ones(ds.sizes.get("transition", 0), bool)
    for d in (str(k) for k in ds.phase.dims):
        if d not in free:
            keep &= np.isclose(ds[f"transition_{d}"].values, float(sub[d]))
    return keep


def draw_transitions(
    ax: Any, ds: xr.Dataset, sub: xr.Dataset, x: str, y: str, *, evaluated: bool = False
) -> list[Any]:
    """Mark a phase map's transitions (and, if asked, its evaluated points) on a 2D slice.

    ``sub`` is the slice drawn (other grid dims fixed); transitions of other slices are left
    out. Returns the drawn markers for a legend (the caller puts it beside the map, where it
    covers nothing); empty for results that are not phase maps.
    """
    drawn: list[Any] = []
    if evaluated and "obtained" in sub:
        ev = sub.obtained.transpose(y, x).values == 0
        gx, gy = np.meshgrid(sub[x].values, sub[y].values)
        drawn += ax.plot(gx[ev], gy[ev], ls="none", zorder=3, label="evaluated point",
                         **EVALUATED_STYLE)  # fmt: skip
    if "transition_status" not in ds or ds.sizes.get("transition", 0) == 0:
        return drawn
    keep = transitions_in(ds, sub, (x, y))
    tx, ty = ds[f"transition_{x}"].values[keep], ds[f"transition_{y}"].values[keep]
    point = ds.transition_status.values[keep] == 0
    if point.any():
        drawn += ax.plot(tx[point], ty[point], ls="none", zorder=4, label="gap closes",
                         **CLOSING_STYLE)  # fmt: skip
    status = ds.transition_status.values[keep]
    meanings = _meanings(ds.transition_status)
    for code, marker in zip(sorted(set(status[~point].tolist())), OTHER_MARKERS, strict=False):
        here = status == code
        label = meanings.get(code, f"transition status {code}").replace("_", " ")
        drawn += ax.plot(tx[here], ty[here], ls="none", zorder=4, label=label,
                         **{**OTHER_STYLE, "marker": marker})  # fmt: skip
    return drawn
