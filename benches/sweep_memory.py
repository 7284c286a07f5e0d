"""Peak memory of a 2D sweep against its number of points (streamed to disk, and in memory).

Each case runs in a fresh Python process, which reports its peak resident set size
(``VmHWM`` of /proc/self/status) after the imports and after the sweep. Usage::

    .venv/bin/python benches/sweep_memory.py [--out RESULTS.md] [--sizes 1000 100000]

The model is the spinful square-lattice model (``toposweep.models.bhz``) over mass × hopping,
with light sampling (``loop_points=12, lines=7``) so 10^5 points take about a minute on 2 cores.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CHILD = r"""
import json, resource, sys, time
import numpy as np
import toposweep as ts


def peak_kib():
    # VmHWM: the high-water mark of this process's own memory. (ru_maxrss would not do: Linux
    # keeps it across exec, so a child started by a large parent reports the parent's size.)
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss


n_points, out = int(sys.argv[1]), sys.argv[2]
# mass × hopping grid as square as the point count allows (1000 = 25 × 40, 10^5 = 250 × 400)
rows = max(d for d in range(1, int(np.sqrt(n_points)) + 1) if n_points % d == 0)
cols = n_points // rows
grid = {"mass": np.linspace(-3.0, 3.0, rows), "hopping": np.linspace(0.2, 2.0, cols)}
after_import = peak_kib()
t0 = time.perf_counter()
ds = ts.sweep(ts.models.bhz(), grid, 2, out=None if out == "-" else out, progress=False,
              loop_points=12, lines=7)
seconds = time.perf_counter() - t0
n_undefined = int((ds.phase.values < 0).sum())
peak = peak_kib()
print(json.dumps({"points": rows * cols, "import_kib": after_import, "peak_kib": peak,
                  "seconds": seconds, "undefined": n_undefined}))
"""


def run_case(points: int, to_disk: bool) -> dict[str, float]:
    with tempfile.TemporaryDirectory() as tmp:
        out = str(Path(tmp) / "map.nc") if to_disk else "-"
        proc = subprocess.run(
            [sys.executable, "-c", CHILD, str(points), out],
            capture_output=True,
            text=True,
            check=True,
        )
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[1000, 10_000, 100_000])
    parser.add_argument("--out", help="also write the markdown table to this file")
    parser.add_argument("--no-memory-case", action="store_true", help="skip the in-memory runs")
    args = parser.parse_args()

    rows = []
    cases = [(n, True) for n in args.sizes]
    if not args.no_memory_case:
        cases += [(n, False) for n in args.sizes]
    t0 = time.perf_counter()
    for n, disk in cases:
        r = run_case(n, disk)
        rows.append((disk, r))
        print(
            f"{'disk' if disk else 'memory':6s} {r['points']:>8d} points: peak "
            f"{r['peak_kib'] / 1024:7.1f} MiB (after imports {r['import_kib'] / 1024:6.1f} MiB), "
            f"{r['seconds']:6.1f} s",
            file=sys.stderr,
        )
    lines = [
        "| result | points | peak RSS (MiB) | of which imports (MiB) | sweep time (s) | points/s |",
        "|---|---:|---:|---:|---:|---:|",
    ]
    for disk, r in rows:
        lines.append(
            f"| {'streamed to disk' if disk else 'kept in memory'} | {r['points']:,} | "
            f"{r['peak_kib'] / 1024:.1f} | {r['import_kib'] / 1024:.1f} | {r['seconds']:.1f} | "
            f"{r['points'] / r['seconds']:,.0f} |"
        )
    disk_rows = sorted((r for d, r in rows if d), key=lambda r: r["points"])
    if len(disk_rows) >= 2:
        small, large = disk_rows[0], disk_rows[-1]
        growth = (large["peak_kib"] - small["peak_kib"]) / 1024
        factor = large["points"] / small["points"]
        lines.append("")
        lines.append(
            f"Streamed to disk, {factor:.0f}× more points ({small['points']:,} → "
            f"{large['points']:,}) change the peak by {growth:+.1f} MiB."
        )
    lines.append(f"\n(total benchmark time {time.perf_counter() - t0:.0f} s)")
    table = "\n".join(lines)
    print(table)
    if args.out:
        Path(args.out).write_text(table + "\n")


if __name__ == "__main__":
    main()
