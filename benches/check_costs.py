"""What toposweep's self-checks cost per point, with and without each check.

Two measures: the number of κ points whose Hamiltonian is diagonalised (exact and independent
of machine load: the model is wrapped in a counting CallableModel) and the time on one thread
(best of 9 repeats; inflated when other processes share the cores). Then, for a mass sweep of
the cubic Wilson–Dirac model, how often the convergence certificate recomputed a plane and how
often the two Z2 methods agreed.

Run: ``.venv/bin/python benches/check_costs.py``
"""

from __future__ import annotations

import time

import numpy as np
import toposweep as ts

VARIANTS = {
    "sampled gap, no certificate": {"gap_starts": 0, "certify": False},
    "+ gap minimiser": {"certify": False},
    "+ certificate (defaults)": {},
    "lattice only": {"method": "lattice", "certify": False},
    "both methods": {"method": "both"},
}
CASES = [
    ("Wilson-Dirac m=-2 (3D, 4 bands)", ts.models.wilson_dirac(), {"mass": -2.0}),
    ("Wilson-Dirac m=0.5 (3D, 4 bands)", ts.models.wilson_dirac(), {"mass": 0.5}),
    ("Kane-Mele default (2D, 4 bands)", ts.models.kane_mele(), {}),
    ("BHZ m=-1 (2D, 4 bands)", ts.models.bhz(), {"mass": -1.0}),
]


def best_time(model, params, repeats: int = 9, **kw) -> float:
    ts.invariants(model, 2, params, threads=1, **kw)
    best = np.inf
    for _ in range(repeats):
        t = time.perf_counter()
        ts.invariants(model, 2, params, threads=1, **kw)
        best = min(best, time.perf_counter() - t)
    return best


def kappa_points(model, params, **kw) -> int:
    """κ points the engine asks for, counted through a CallableModel with the same H(κ)."""
    seen = [0]
    full = model.resolve(params)

    def h(kappa, **_):
        seen[0] += len(kappa)
        return model.hamiltonian(kappa, full)

    counting = ts.CallableModel(
        h, model.dim, model.norb, parameters=[], time_reversal=model.time_reversal
    )
    ts.invariants(counting, 2, {}, threads=1, **kw)
    return seen[0]


def main() -> None:
    print("| model | " + " | ".join(VARIANTS) + " |")
    print("|---|" + "---:|" * len(VARIANTS))
    for label, model, params in CASES:
        cells = [
            f"{kappa_points(model, params, **kw)} κ, {1e3 * best_time(model, params, **kw):.1f} ms"
            for kw in VARIANTS.values()
        ]
        print(f"| {label} | " + " | ".join(cells) + " |")
    masses = np.linspace(-3.9, 3.9, 40)
    ds = ts.sweep(ts.models.wilson_dirac(), {"mass": masses}, 2, method="both", progress=False)
    defined = ds.undefined_reason.values == 0
    recomputed = int((ds.loop_points_used.values > 32).sum())
    agree = ds.methods_agree.values
    print()
    print(
        f"Wilson-Dirac mass sweep, {masses.size} points: {int(defined.sum())} defined, "
        f"certificate recomputed planes at {recomputed}, methods agree at "
        f"{int((agree == 1).sum())}, disagree at {int((agree == 0).sum())}"
    )


if __name__ == "__main__":
    main()
