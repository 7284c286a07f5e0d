"""Adaptive phase maps against the uniform sweep of the same grid, side by side in one run.

For each map: how many points were evaluated, proven and filled, how many transitions were
located, whether the map agrees with the sweep (phase and indices) at every point where both
are defined — counted separately for proven and for filled points — how many points the map
leaves undefined where the sweep is defined, and the wall times of both (same machine, one
right after the other; default sampling, all cores), with the host's load average while
they ran. With ``--rounds N`` map and sweep alternate N times and every round's ratio is
shown (the spread on a shared host). Part of ``make bench`` (``benches/run_all.py``); alone::

    nice .venv/bin/python benches/phase_map_bench.py [--quick] [--rounds N] [--only TEXT]
"""

from __future__ import annotations

import argparse
import os
import time
from typing import Any

import numpy as np
import toposweep as ts
import xarray as xr
from toposweep.maps.phase_map import labels_of


def cases(quick: bool) -> list[tuple[str, Any, dict[str, Any], dict[str, float]]]:
    """(label, model, grid, params) of the benchmark maps."""
    k = 4 if quick else 1  # quick: every 4th point per axis (plus the end)

    def axis(a: float, b: float, n: int) -> np.ndarray:
        return np.linspace(a, b, (n - 1) // k + 1)

    return [
        (
            "3D Wilson–Dirac, mass × hopping",
            ts.models.wilson_dirac(),
            {"mass": axis(-4.0, 4.0, 257), "hopping": axis(0.5, 1.5, 129)},
            {},
        ),
        (
            "2D Kane–Mele, staggered × Rashba (λ_SO = 0.1)",
            ts.models.kane_mele(),
            {"staggered": axis(0.0, 0.8, 129), "rashba": axis(0.0, 0.4, 129)},
            {},
        ),
        (
            "3D d–f lattice, f level × d hopping",
            ts.models.df_lattice(),
            {"f_level": axis(-2.0, 1.0, 129), "d_hopping": axis(0.1, 0.5, 65)},
            {},
        ),
        (
            "3D d–f lattice, f level × d hopping × f hopping (3 parameters)",
            ts.models.df_lattice(),
            {
                "f_level": axis(-2.0, 1.0, 49),
                "d_hopping": axis(0.1, 0.5, 25),
                "f_hopping": axis(-0.1, 0.0, 13),
            },
            {},
        ),
    ]


def compare(pm: xr.Dataset, sw: xr.Dataset) -> dict[str, int]:
    """Disagreements of the map with the sweep where both are defined, by how obtained."""
    raw = {k: pm[k].values.reshape(pm.phase.size, -1).squeeze(-1) for k in ("phase", "nu0")}
    ref = {k: sw[k].values.reshape(sw.phase.size, -1).squeeze(-1) for k in ("phase", "nu0")}
    if "nu" in pm:
        raw["nu"] = pm.nu.values.reshape(pm.phase.size, -1)
        ref["nu"] = sw.nu.values.reshape(sw.phase.size, -1)
    a, b = labels_of(raw), labels_of(ref)
    how = pm.obtained.values.reshape(-1)
    both = (a >= 0) & (b >= 0)
    return {
        "evaluated": int((both & (a != b) & (how == 0)).sum()),
        "proven": int((both & (a != b) & (how == 1)).sum()),
        "filled": int((both & (a != b) & (how == 2)).sum()),
        "map_undefined": int(((a < 0) & (b >= 0)).sum()),
        "sweep_undefined": int(((b < 0) & (a >= 0)).sum()),
    }


def table(quick: bool, rounds: int = 1, only: str | None = None) -> list[str]:
    """Markdown rows: one per map (best times of ``rounds`` alternating rounds)."""
    out = [
        "| map | points | evaluated | proven | filled | transitions | disagree (proven / "
        "filled) | undefined only in map / only in sweep | sweep (s) | map (s) | "
        "evaluated share | time ratio | ratio per round | load (1 min) |",
        "|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|",
    ]
    ts.sweep(ts.models.bhz(), {"mass": [0.5, 1.0]}, 2, progress=False)  # one-off set-up costs
    for label, model, grid, params in cases(quick):
        if only is not None and only not in label:
            continue
        maps, sweeps, loads = [], [], [os.getloadavg()[0]]
        for _ in range(rounds):
            t0 = time.perf_counter()
            pm = ts.phase_map(model, grid, 2, params=params, progress=False)
            maps.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            sw = ts.sweep(model, grid, 2, params=params, progress=False)
            sweeps.append(time.perf_counter() - t0)
            loads.append(os.getloadavg()[0])
        t_map, t_sweep = min(maps), min(sweeps)
        c = compare(pm, sw)
        assert c["evaluated"] == 0, "evaluated points must equal the sweep's"
        n = pm.phase.size
        ev = int(pm.attrs["points_evaluated"])
        shape = " × ".join(str(len(v)) for v in grid.values())
        per_round = " / ".join(f"{a / b:.1f}" for a, b in zip(sweeps, maps, strict=True))
        out.append(
            f"| {label} ({shape}) | {n} | {ev} | {pm.attrs['points_proven']} | "
            f"{pm.attrs['points_filled_by_agreement']} | {pm.sizes['transition']} | "
            f"{c['proven']} / {c['filled']} | {c['map_undefined']} / {c['sweep_undefined']} | "
            f"{t_sweep:.1f} | {t_map:.1f} | {ev / n:.3f} | {t_sweep / t_map:.1f}× | "
            f"{per_round} | {min(loads):.1f}–{max(loads):.1f} |"
        )
        print(out[-1], flush=True)
        print(f"  ({transition_line(pm)})", flush=True)
    return out


def transition_line(pm: xr.Dataset) -> str:
    """Gap evaluations of the transition search (per transition) and the statuses found.

    Closings of one segment share their segment's count; such segments are rare on these maps.
    """
    if pm.sizes["transition"] == 0:
        return "no transitions"
    probes = pm.transition_probes.values
    status = pm.transition_status.values
    meanings = pm.transition_status.attrs["flag_meanings"].split()
    counts = ", ".join(f"{meanings[k]} {int((status == k).sum())}" for k in sorted(set(status)))
    return f"transitions: {probes.mean():.2f} gap evaluations each ({int(probes.sum())}); {counts}"


NOTE = (
    "`benches/phase_map_bench.py`: `ts.phase_map` against `ts.sweep` of the same grid, default "
    "options and sampling, all cores, the map first and the sweep right after it (best of the "
    "rounds when they alternate; every round's ratio and the 1-minute load average beside). "
    "'disagree' "
    "counts points where both are defined and phase or indices differ, split by how the map "
    "obtained them (evaluated points are asserted equal); 'undefined only in map / only in "
    "sweep' counts points one of them leaves undefined. Proven points need the core's "
    "`gap_proven`; without it every point not evaluated is filled by agreement."
)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="coarser grids")
    parser.add_argument("--rounds", type=int, default=1, help="alternating map/sweep rounds")
    parser.add_argument("--only", help="only the maps whose label contains this text")
    args = parser.parse_args()
    print("\n".join(table(args.quick, args.rounds, args.only)))


if __name__ == "__main__":
    main()
