"""Print what the package answers at every point of the near-transition family.

Run from the repository root: ``.venv/bin/python tests/near_transition_table.py``. One line per
point: transition, relative distance and side, the indices (or −1 and the reason), the phase
code, the direct gap NumPy finds (relative to the bandwidth) and ``gap_proven`` where the
result has it. The last lines count answered and undefined points and give the smallest
relative gap at which a point was answered. Where the README quotes such figures, they come
from this command.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import reference_bands as rb  # noqa: E402
import test_near_transitions as family  # noqa: E402
import toposweep as ts  # noqa: E402


def main() -> None:
    answered, undefined, smallest = 0, {}, math.inf
    for t in family.TRANSITIONS:
        closing = family.critical_value(t.name)
        for d in family.DISTANCES:
            for side in (-1, 1):
                value = family.point_value(t, d, side)
                params = {**t.fixed, t.param: value}
                ds = ts.invariants(family.built_model(t.name), t.filling, params)
                starts = [closing.kappa, -closing.kappa, ds.gap_kappa.values]
                gap = rb.min_direct_gap(t.reference(value), t.dim, t.filling, extra_starts=starts)
                nu0, reason = int(ds.nu0), int(ds.undefined_reason)
                nu = "".join(str(int(v)) for v in ds.nu.values) if "nu" in ds else ""
                proven = float(ds.gap_proven) if "gap_proven" in ds else math.nan
                print(
                    f"{t.name:17s} {d:.0e} {'above' if side > 0 else 'below'}  "
                    f"nu0 {nu0:2d} {nu:3s} reason {reason:2d} phase {int(ds.phase):3d}  "
                    f"gap/bandwidth {gap.relative:.1e}  gap_proven {proven:.2e}",
                    flush=True,
                )
                if nu0 == -1:
                    undefined[reason] = undefined.get(reason, 0) + 1
                else:
                    answered += 1
                    smallest = min(smallest, gap.relative)
    print(f"answered {answered}, undefined by reason {dict(sorted(undefined.items()))}")
    print(f"smallest gap/bandwidth of an answered point: {smallest:.1e}")


if __name__ == "__main__":
    main()
