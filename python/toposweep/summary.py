"""Plain-text summary of a result: phases and counts, undefined points and why, parity checks."""

from __future__ import annotations

import json
from collections import Counter

import numpy as np
import xarray as xr

from .maps.map_report import map_summary_lines

__all__ = ["phase_label", "phase_labels", "summarise"]

#: trade terms for the phase codes of :data:`toposweep.results.dataset.PHASES`
PHASE_NAMES = {
    -1: "undefined",
    0: "trivial insulator",
    1: "weak TI",
    2: "strong TI",
    3: "Z2-odd 2D insulator",
    10: "metal with trivial bands",
    11: "metal with weak TI bands",
    12: "metal with strong TI bands",
    13: "metal with Z2-odd 2D bands",
}
MAX_LISTED = 8


def phase_label(phase: int, nu0: int, nu: tuple[int, ...] | None) -> str:
    """Trade-term label with the indices, e.g. ``'strong TI (1;000)'``.

    Examples
    --------
    >>> phase_label(2, 1, (1, 1, 1)), phase_label(3, 1, None), phase_label(-1, -1, None)
    ('strong TI (1;111)', 'Z2-odd 2D insulator (Z2 = 1)', 'undefined')
    """
    name = PHASE_NAMES.get(int(phase), f"phase {phase}")
    if phase < 0:
        return name
    if nu is None:
        return f"{name} (Z2 = {nu0})"
    return f"{name} ({nu0};{''.join(str(int(v)) for v in nu)})"


def phase_labels(ds: xr.Dataset) -> np.ndarray:
    """Label of every point (an object array over the grid dims)."""
    phase = ds.phase.values
    nu0 = ds.nu0.values
    nu = ds.nu.values if "nu" in ds else None
    out = np.empty(phase.shape, dtype=object)
    for idx in np.ndindex(phase.shape):
        out[idx] = phase_label(
            int(phase[idx]), int(nu0[idx]), None if nu is None else tuple(nu[idx])
        )
    return out


def _grid_dims(ds: xr.Dataset) -> list[str]:
    return [str(d) for d in ds.phase.dims]


def _where(ds: xr.Dataset, idx: tuple[int, ...]) -> str:
    return ", ".join(
        f"{d}={float(ds[d].values[i]):.6g}" for d, i in zip(_grid_dims(ds), idx, strict=True)
    )


def _flag_names(var: xr.DataArray) -> dict[int, str]:
    values = np.atleast_1d(np.asarray(var.attrs.get("flag_values", [])))
    meanings = str(var.attrs.get("flag_meanings", "")).split()
    return {int(v): m for v, m in zip(values, meanings, strict=False)}


def _model_name(ds: xr.Dataset) -> str:
    try:
        return str(json.loads(ds.attrs["model"]).get("name") or "a lattice model")
    except (KeyError, ValueError, AttributeError):
        return "a lattice model"


def _cross_check(
    ds: xr.Dataset, flag: str, method: str, title: str, labels: np.ndarray
) -> list[str]:
    """Lines reporting one cross-check flag against the Wilson loop.

    Counts of the flag (1 agree, 0 disagree, −1 not comparable) and the first disagreeing points
    with both answers; ``method`` names the ``nu0_<method>``/``nu_<method>`` variables.
    """
    agree = ds[flag].values
    n_ok, n_bad, n_na = (int((agree == v).sum()) for v in (1, 0, -1))
    out = [f"{title}: {n_ok} agree, {n_bad} disagree, {n_na} not comparable"]
    for idx in list(map(tuple, np.argwhere(agree == 0)))[:MAX_LISTED]:
        nu0 = int(ds[f"nu0_{method}"].values[idx])
        if f"nu_{method}" in ds:
            other = f"({nu0};{''.join(str(int(v)) for v in ds[f'nu_{method}'].values[idx])})"
        else:
            other = f"(Z2 = {nu0})"
        where = _where(ds, idx) or "the point"
        out.append(f"  disagree at {where}: Wilson loop {labels[idx]}, {method} {other}")
    if n_bad > MAX_LISTED:
        out.append(f"  … and {n_bad - MAX_LISTED} more")
    return out


def summarise(ds: xr.Dataset, name: str = "result") -> str:
    """Multi-line summary of a sweep or a single point.

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.sweep(ts.models.bhz(), {"mass": [-3.5, -2.0, -0.5, 1.0]}, 2, progress=False)
    >>> print(summarise(ds, "bhz"))  # doctest: +NORMALIZE_WHITESPACE
    bhz: spinful square-lattice model (BHZ type), filling 2
    grid: mass 4 values (-3.5 … 1) = 4 points
    <BLANKLINE>
      phase                         points   share
      Z2-odd 2D insulator (Z2 = 1)       2   50.0%
      trivial insulator (Z2 = 0)         1   25.0%
      undefined                          1   25.0%
    <BLANKLINE>
    undefined points, by reason:
      degenerate_at_filling_at_trim       1   e.g. mass=-2
    <BLANKLINE>
    Fu-Kane parity cross-check: 3 agree, 0 disagree, 1 not comparable
    smallest direct gap where defined: 1 at mass=-0.5
    """
    lines: list[str] = []
    dims = _grid_dims(ds)
    lines.append(f"{name}: {_model_name(ds)}, filling {ds.attrs.get('filling', '?')}")
    if dims:
        parts = []
        for d in dims:
            v = ds[d].values
            parts.append(f"{d} {v.size} values ({v.min():.6g} … {v.max():.6g})")
        lines.append(f"grid: {', '.join(parts)} = {ds.phase.size} points")
    labels = phase_labels(ds)
    total = labels.size
    counts = Counter(labels.ravel().tolist())
    lines.append("")
    width = max(len("phase"), *(len(k) for k in counts))
    lines.append(f"  {'phase':{width}s}  points   share")
    ordered = sorted(counts.items(), key=lambda kv: (kv[0] == "undefined", -kv[1], kv[0]))
    for label, n in ordered:
        lines.append(f"  {label:{width}s}  {n:6d}  {100 * n / total:5.1f}%")

    lines += map_summary_lines(ds)
    reason = ds.undefined_reason.values
    undefined = np.argwhere(reason != 0)
    if len(undefined):
        names = _flag_names(ds.undefined_reason)
        by_reason: dict[int, list[tuple[int, ...]]] = {}
        for idx in map(tuple, undefined):
            by_reason.setdefault(int(reason[idx]), []).append(idx)
        lines.append("")
        lines.append("undefined points, by reason:")
        rwidth = max(len(names.get(r, str(r))) for r in by_reason)
        for r, where in sorted(by_reason.items()):
            example = f"   e.g. {_where(ds, where[0])}" if dims else ""
            lines.append(f"  {names.get(r, f'reason {r}'):{rwidth}s}  {len(where):6d}{example}")
    if "parity_agrees" in ds:
        lines.append("")
        lines += _cross_check(ds, "parity_agrees", "parity", "Fu-Kane parity cross-check", labels)
    if "methods_agree" in ds:
        lines += _cross_check(
            ds, "methods_agree", "lattice", "lattice Z2 cross-check (Fukui-Hatsugai)", labels
        )
    gap = np.where(reason == 0, ds.gap_direct.values, np.nan)
    if np.isfinite(gap).any():
        idx = np.unravel_index(int(np.nanargmin(gap)), gap.shape)
        unit = ds.gap_direct.attrs.get("units", "")
        unit = "" if unit in ("", "1") else f" {unit}"
        at = f" at {_where(ds, tuple(int(i) for i in idx))}" if dims else ""
        # (a phase map measures gaps at its evaluated points only)
        where = "at an evaluated point" if "obtained" in ds else "where defined"
        lines.append(f"smallest direct gap {where}: {np.nanmin(gap):.4g}{unit}{at}")
    return "\n".join(lines)
