"""What the proven gap and the loops resolved to the gap cost, per default `invariants()` call.

``prove_gap="never"`` is the call with the proof switched off (loops are still resolved to the
gap where a small gap asks for it: at points far from a closing that costs one comparison per
loop); ``"auto"`` is the default; ``"always"`` proves every point. Times are the best of
interleaved rounds (``timing.best_times``), default sampling, all cores. The near-closing rows
also give the answers, against the published critical value λ_v* = 3√3 λ_SO of Kane & Mele,
PRL 95, 146802 (2005): Z2 = 1 below it.

Run alone: ``.venv/bin/python benches/near_closing_cost.py``; ``make bench`` includes it.
"""

from __future__ import annotations

import sys
from pathlib import Path

import toposweep as ts

sys.path.insert(0, str(Path(__file__).parent))
from baseline_models import stacked_wilson_dirac  # noqa: E402
from timing import best_times  # noqa: E402

LAMBDA_SO = 0.06
CRITICAL = 3**1.5 * LAMBDA_SO  # Kane & Mele, PRL 95, 146802 (2005)


def cases() -> list[tuple[str, object, int, dict]]:
    """(label, model, filling, params) of the rows."""
    km = ts.models.kane_mele()
    return [
        ("BHZ, default", ts.models.bhz(), 2, {}),
        ("Kane–Mele, default", km, 2, {}),
        ("Wilson–Dirac m = −2", ts.models.wilson_dirac(), 2, {"mass": -2.0}),
        ("Fu–Kane–Mele, default", ts.models.fu_kane_mele(), 2, {}),
        ("d–f lattice, default", ts.models.df_lattice(), 2, {}),
        ("stacked Wilson–Dirac, 8 bands", stacked_wilson_dirac(2), 4, {}),
        ("stacked Wilson–Dirac, 16 bands", stacked_wilson_dirac(4), 8, {}),
        (
            "Kane–Mele at 0.999 λ_v* (answer 1)",
            km,
            2,
            {"spin_orbit": LAMBDA_SO, "staggered": 0.999 * CRITICAL},
        ),
        (
            "Kane–Mele at 1.001 λ_v* (answer 0)",
            km,
            2,
            {"spin_orbit": LAMBDA_SO, "staggered": 1.001 * CRITICAL},
        ),
    ]


def table(repeats: int = 3) -> list[str]:
    """Markdown rows: time per call for each `prove_gap` and the answer of the default call."""
    out = [
        "| model, point | never (ms) | auto (ms) | always (ms) | auto / never | always / never "
        "| Z2 (auto) | gap_proven (always) |",
        "|---|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for label, model, filling, params in cases():
        calls = [
            lambda m=model, f=filling, p=params, g=g: ts.invariants(m, f, p, prove_gap=g)
            for g in ("never", "auto", "always")
        ]
        t_never, t_auto, t_always = best_times(calls, repeats, min_seconds=0.1)
        auto = calls[1]()
        always = calls[2]()
        z2 = int(auto.nu0)
        reason = int(auto.undefined_reason)
        answer = f"{z2}" if reason == 0 else f"−1 (reason {reason})"
        out.append(
            f"| {label} | {1e3 * t_never:.2f} | {1e3 * t_auto:.2f} | {1e3 * t_always:.2f} "
            f"| {t_auto / t_never:.2f} | {t_always / t_never:.2f} | {answer} "
            f"| {float(always.gap_proven):.3g} |"
        )
    return out


if __name__ == "__main__":
    print("\n".join(table()))
