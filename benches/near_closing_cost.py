"""What the proven gap and the loops resolved to the gap cost, per default `invariants()` call.

``prove_gap="never"`` is the call with the proof switched off (loops are still resolved to the
gap where a small gap asks for it: at points far from a closing that costs one comparison per
loop); ``"auto"`` is the default; ``"always"`` proves every point. Times are the best of
interleaved rounds (``timing.best_times``), default sampling, all cores. The near-closing rows
also give the answers, against the published critical value λ_v* = 3√3 λ_SO of Kane & Mele,
PRL 95, 146802 (2005): Z2 = 1 below it.

A second table (``lattice_table``) times the default call against ``method="both"``, whose lattice
Z2 (Fukui & Hatsugai, J. Phys. Soc. Jpn. 76, 053702 (2007)) refines its mesh locally where the
plaquette field or links are rough: at the defaults (no refinement) and next to transitions.

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


def lattice_cases() -> list[tuple[str, object, int, dict, str]]:
    """(label, model, filling, params, expected answer) of the lattice-method rows."""
    km = ts.models.kane_mele()
    return [
        ("BHZ, default", ts.models.bhz(), 2, {}, ""),
        ("Kane–Mele, default", km, 2, {}, ""),
        ("Wilson–Dirac m = −2", ts.models.wilson_dirac(), 2, {"mass": -2.0}, ""),
        ("Fu–Kane–Mele, default", ts.models.fu_kane_mele(), 2, {}, ""),
        ("d–f lattice, default", ts.models.df_lattice(), 2, {}, ""),
        # Bernevig, Hughes & Zhang, Science 314, 1757 (2006): Z2 = 1 for −2 < m < 0
        ("BHZ m = −1.998", ts.models.bhz(), 2, {"mass": -1.998}, "1"),
        # Qi, Hughes & Zhang, PRB 78, 195424 (2008): (1;000) for −3 < m < −1
        ("Wilson–Dirac m = −2.99", ts.models.wilson_dirac(), 2, {"mass": -2.99}, "1;000"),
        (
            "Kane–Mele at 0.99 λ_v*",
            km,
            2,
            {"spin_orbit": LAMBDA_SO, "staggered": 0.99 * CRITICAL},
            "1",
        ),
        (
            "Kane–Mele at 1.001 λ_v*",
            km,
            2,
            {"spin_orbit": LAMBDA_SO, "staggered": 1.001 * CRITICAL},
            "0",
        ),
        # issue 18's point past the Rashba closing (λ_v ≈ 0.16297): trivial
        (
            "Kane–Mele, Rashba point of issue 18",
            km,
            2,
            {"spin_orbit": LAMBDA_SO, "staggered": 0.166667, "rashba": 0.143590},
            "0",
        ),
    ]


def lattice_table(repeats: int = 3) -> list[str]:
    """Markdown rows: the default call against ``method="both"``, with the lattice answer and
    the κ points of its meshes (refined locally where the plaquette field or links are rough).
    """
    out = [
        "| model, point | wilson (ms) | both (ms) | both / wilson | lattice answer | expected "
        "| lattice κ points |",
        "|---|---:|---:|---:|---:|---:|---:|",
    ]
    for label, model, filling, params, want in lattice_cases():
        calls = [
            lambda m=model, f=filling, p=params, how=how: ts.invariants(m, f, p, method=how)
            for how in ("wilson", "both")
        ]
        t_wilson, t_both = best_times(calls, repeats, min_seconds=0.1)
        ds = calls[1]()
        reason = int(ds.lattice_undefined_reason)
        if reason:
            answer = f"−1 (reason {reason})"
        else:
            weak = "".join(str(int(v)) for v in ds.nu_lattice.values) if "nu_lattice" in ds else ""
            answer = f"{int(ds.nu0_lattice)}" + (f";{weak}" if weak else "")
        out.append(
            f"| {label} | {1e3 * t_wilson:.2f} | {1e3 * t_both:.2f} | {t_both / t_wilson:.2f} "
            f"| {answer} | {want or '—'} | {int(ds.lattice_points)} |"
        )
    return out


if __name__ == "__main__":
    print("\n".join(table()))
    print()
    print("\n".join(lattice_table()))
