"""The lattice Z2 (``method="both"``) next to gap closings, for two builds of the core side by side.

Question: where does the lattice method (Fukui & Hatsugai, J. Phys. Soc. Jpn. 76, 053702 (2007))
give an answer next to a transition, is it right, and what does that cost? Points: the
near-transition family of ``tests/test_near_transitions.py`` (Kane–Mele with and without
Rashba, BHZ, Wilson–Dirac, Fu–Kane–Mele, d–f lattice, the 8-band model at relative distances
1e-1 … 1e-4 on both sides of each closing, located independently with NumPy), the Rashba
reproducer of issue 18 ({"spin_orbit": 0.06, "staggered": 0.166667, "rashba": 0.143590}: Z2 = 0
by continuity to Kane & Mele, PRL 95, 226801 (2005); test_near_transitions) and the builtin
models at their defaults.

Each point is evaluated by the core's ``evaluate`` (the Python checks around it are the same
for both builds) with default sampling and ``method="both"``, in alternate rounds for the
installed build and, with ``--other``, an earlier build's ``_core`` library (how to build one:
``benches/compare_extensions.py``). Per point: the lattice answer (or −1 and the reason), the
expected indices (published phase or an independent NumPy Fu–Kane parity product), the direct
gap NumPy finds relative to the bandwidth, and the best time per call of each build. The last
lines count, per build, the points with reason 10 (``lattice_mesh_too_coarse``), the defined
lattice answers, the wrong ones, and the total times.

Run from the repository root::

    .venv/bin/python benches/studies/lattice_refinement.py [--other path/to/_core.abi3.so]
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402
import toposweep as ts  # noqa: E402
from toposweep import _core  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(ROOT / "benches"))
import reference_bands as rb  # noqa: E402
import test_near_transitions as family  # noqa: E402
from compare_extensions import load_other  # noqa: E402
from timing import best_times  # noqa: E402

REASON_MESH = 10  # lattice_mesh_too_coarse (dataset.REASONS)
SAMPLING = ts.Sampling(method="both").core_kwargs()


def points() -> list[tuple[str, ts.TightBinding, int, dict, tuple | None, rb.HamiltonianFn | None]]:
    """(label, model, filling, params, expected indices or None, NumPy H or None)."""
    out = []
    for t in family.TRANSITIONS:
        closing = family.critical_value(t.name)
        for d in family.DISTANCES:
            for side in (-1, 1):
                value = family.point_value(t, d, side)
                want = family.expected_indices(t.name, value, side)
                label = f"{t.name} {d:.0e} {'above' if side > 0 else 'below'}"
                out.append(
                    (
                        label,
                        family.built_model(t.name),
                        t.filling,
                        {**t.fixed, t.param: value},
                        want,
                        (t.reference(value), t.dim, closing.kappa),
                    )
                )
    km = ts.models.kane_mele()
    reproducer = {"spin_orbit": 0.06, "staggered": 0.166667, "rashba": 0.143590}
    out.append(
        (
            "issue 18 Rashba reproducer",
            km,
            2,
            reproducer,
            (0, ()),
            (lambda k: rb.kane_mele_h(k, lso=0.06, lr=0.143590, lv=0.166667), 2, None),
        )
    )
    for name in ("bhz", "kane_mele", "wilson_dirac", "fu_kane_mele", "df_lattice"):
        model = getattr(ts.models, name)()
        out.append((f"{name} defaults", model, 2, {}, None, None))
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--other", help="path of an earlier build's _core library")
    parser.add_argument("--repeats", type=int, default=2, help="interleaved rounds (default 2)")
    args = parser.parse_args()
    builds = [("this", _core)]
    if args.other:
        builds.insert(0, ("other", load_other(args.other)))
    names = [b for b, _ in builds]
    stats = {b: {"reason10": 0, "defined": 0, "wrong": 0, "time": 0.0} for b in names}
    print(f"builds: {names}; columns per build: lattice answer (reason) and ms per call")
    for label, model, filling, params, want, ref in points():
        core_new, coeffs = model.prepare([model.resolve(params)])
        t_r = np.ascontiguousarray(model.time_reversal, dtype=complex)
        calls = []
        for _, module in builds:
            core = (
                core_new
                if module is _core
                else module.CoreModel.tight_binding(*model._core_arguments())
            )
            calls.append(
                lambda m=module, c=core, x=coeffs, f=filling, u=t_r: m.evaluate(
                    c, x, f, time_reversal=u, **SAMPLING
                )
            )
        times = best_times(calls, args.repeats, min_seconds=0.02)
        cells = []
        for (b, _), call, dt in zip(builds, calls, times, strict=True):
            raw = call()
            nu0 = int(raw["nu0_lattice"][0])
            reason = int(raw["lattice_reason"][0])
            got = (nu0, tuple(int(v) for v in raw["nu_lattice"][0]) if model.dim == 3 else ())
            stats[b]["time"] += dt
            if reason == REASON_MESH:
                stats[b]["reason10"] += 1
            if nu0 >= 0:
                stats[b]["defined"] += 1
                if want is not None and got != want:
                    stats[b]["wrong"] += 1
            pts = f" {int(raw['lattice_points'][0]):6d} pts" if "lattice_points" in raw else ""
            text = f"{got[0]}{''.join(map(str, got[1]))}" if nu0 >= 0 else f"-1 (r{reason})"
            cells.append(f"{b}: {text:9s} {1e3 * dt:7.1f} ms{pts}")
        rel = ""
        if ref is not None:
            h, dim, kappa = ref
            starts = None if kappa is None else [kappa, -kappa]
            gap = rb.min_direct_gap(h, dim, filling, extra_starts=starts)
            rel = f"gap/bw {gap.relative:.1e}"
        wanted = "" if want is None else f"{want[0]}{''.join(map(str, want[1]))}"
        print(f"{label:32s} want {wanted:5s} {rel:15s} | " + " | ".join(cells), flush=True)
    for b in names:
        s = stats[b]
        print(
            f"{b}: reason 10 at {s['reason10']} points, lattice answer defined at "
            f"{s['defined']}, wrong {s['wrong']}, total {s['time']:.2f} s"
        )
    if len(names) == 2:
        print(f"time this / other: {stats['this']['time'] / stats['other']['time']:.2f}")


if __name__ == "__main__":
    main()
