"""Every benchmark of ``make bench`` in one run; writes a markdown report (benches/RESULTS.md).

(a) Hermitian eigensolver per matrix, n = 4 … 64: ``toposweep._core.eigh`` (one thread) against
    ``numpy.linalg.eigh`` on the same batch of random matrices, plus the Rust-side comparison of
    candidate solvers from ``cargo bench --bench kernels``;
(b) ``invariants()`` per 3D parameter point at identical fixed sampling (no adaptive lines, no
    gap minimiser) against the plain-NumPy implementation in ``numpy_baseline.py``, one thread and
    all cores, indices and gaps asserted equal;
(c) sweep throughput (points/s) of a 2D and a 3D model;
(d) peak memory against the number of points (``sweep_memory.py``, fresh processes);
(e) adaptive phase maps against the uniform sweep of the same grid (``phase_map_bench.py``);
(f) a 3D sweep on a local Dask cluster against the in-process sweep, and the per-task overhead
    (``cluster_speed.py``);
and what the self-checks cost per point (``check_costs.py``).

``--readme README.md`` also rewrites the short summary table of the README, between the lines
``<!-- bench-summary:start -->`` and ``<!-- bench-summary:end -->``. In the report, everything
from the line ``<!-- history: kept by run_all.py -->`` on (the dated measurement history) is
kept as it is.

Timings are the best of several repeats, measured side by side in one run and interleaved
round by round (NumPy, one thread, all cores) so that all see the same load; other jobs on the
machine make them noisy, so the load average is recorded with them. NumPy's BLAS is pinned to
one thread so "one thread" means one thread on both sides.

Usage::

    .venv/bin/python benches/run_all.py --out benches/RESULTS.md [--readme README.md]
                                         [--quick] [--no-cargo]
"""

from __future__ import annotations

import os

# pin numpy's BLAS/LAPACK before numpy is imported (single-thread comparison on both sides)
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import platform  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from datetime import datetime, timezone  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import toposweep as ts  # noqa: E402
import xarray as xr  # noqa: E402
from toposweep import _core  # noqa: E402

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from baseline_models import (  # noqa: E402
    expected_indices,
    stacked_wilson_dirac,
    wilson_dirac_without_inversion,
)
from check_costs import CASES as CHECK_CASES  # noqa: E402
from check_costs import VARIANTS as CHECK_VARIANTS  # noqa: E402
from check_costs import best_time as check_time  # noqa: E402
from check_costs import kappa_points  # noqa: E402
from numpy_baseline import compare, invariants_numpy  # noqa: E402
from point_sampling import POINT_OPTIONS  # noqa: E402
from timing import (  # noqa: E402
    ONE_THREAD,
    HostSteal,
    OnOneThread,
    best_time,
    gain_text,
    round_times,
)

#: the loop and line counts of the fixed sampling (point_sampling.py), as the NumPy baseline
#: takes them
FIXED = {k: POINT_OPTIONS[k] for k in ("loop_points", "lines")}
#: engine options that would sample more κ than the baseline: gap minimiser and convergence
#: certificate (finer loops) off, as in numpy_baseline.compare
ENGINE_FIXED = {k: POINT_OPTIONS[k] for k in ("gap_starts", "certify")}

#: figures for the README's summary table, filled in by the tables as they are measured
SUMMARY: dict[str, tuple[float, ...]] = {}
README_START, README_END = "<!-- bench-summary:start -->", "<!-- bench-summary:end -->"
HISTORY = "<!-- history: kept by run_all.py -->"


def load() -> str:
    one, five, _ = os.getloadavg()
    return f"load average {one:.1f} (1 min), {five:.1f} (5 min) on {os.cpu_count()} cores"


def eigensolver_table(repeats: int) -> list[str]:
    rng = np.random.default_rng(7)
    out = [
        "| n | numpy.linalg.eigh (µs/matrix) | toposweep eigh, 1 thread (µs/matrix) | ratio |",
        "|---:|---:|---:|---:|",
    ]
    for n in (4, 8, 16, 32, 64):
        batch = max(8, 4096 // n)
        a = rng.normal(size=(batch, n, n)) + 1j * rng.normal(size=(batch, n, n))
        h = np.ascontiguousarray(0.5 * (a + a.conj().transpose(0, 2, 1)))
        t_np = best_time(lambda h=h: np.linalg.eigh(h), repeats) / batch
        t_ts = best_time(OnOneThread(lambda h=h: _core.eigh(h, threads=1)), repeats) / batch
        e_ts, _ = ONE_THREAD.run(lambda h=h: _core.eigh(h, threads=1))
        np.testing.assert_allclose(e_ts, np.linalg.eigh(h)[0], atol=1e-10 * n)
        out.append(f"| {n} | {t_np * 1e6:.2f} | {t_ts * 1e6:.2f} | {t_np / t_ts:.1f}× |")
        if n == 4:
            SUMMARY["eigh4"] = (t_np * 1e6, t_ts * 1e6)
    return out


def cargo_kernel_tables() -> list[str]:
    """Run the Rust kernel harness; its stdout is already markdown."""
    cmd = ["cargo", "bench", "--quiet", "--no-default-features", "--features", "faer"]
    cmd += ["--bench", "kernels"]
    proc = subprocess.run(cmd, cwd=HERE.parent, capture_output=True, text=True)
    if proc.returncode != 0:
        return [f"(cargo bench failed: {proc.stderr.strip().splitlines()[-1:]})"]
    return [line for line in proc.stdout.splitlines() if not line.startswith("running")]


def point_cases(quick: bool) -> list[tuple[str, object, int, dict | None, dict]]:
    """(label, model, filling, params, sampling) of the per-point comparison."""
    cases: list[tuple[str, object, int, dict | None, dict]] = [
        ("Wilson–Dirac, 4 bands (m = −2)", ts.models.wilson_dirac(), 2, {"mass": -2.0}, FIXED),
    ]
    cases.append(
        (
            "Wilson–Dirac without inversion, 4 bands (generic 4×4)",
            wilson_dirac_without_inversion(0.3),
            2,
            {"mass": -2.0},
            FIXED,
        )
    )
    if hasattr(ts.models, "fu_kane_mele"):
        cases.append(("diamond (Fu–Kane–Mele), 4 bands", ts.models.fu_kane_mele(), 2, None, FIXED))
    cases.append(("16 coupled bands, dense", stacked_wilson_dirac(4, seed=2), 8, None, FIXED))
    if not quick:
        # 64 bands at full sampling costs NumPy 10-20 s per point; a lighter fixed sampling
        # keeps the benchmark to minutes (both sides use it). It is too light for the flow of
        # 32 occupied bands to pass the refinement test, so both sides report "not converged":
        # this row compares cost at identical work, not answers.
        light = {"loop_points": 16, "lines": 9, "gap_points": 4}
        cases.append(
            (
                "64 coupled bands, dense (16 × 9 × 6 κ, 4³ gap grid)",
                stacked_wilson_dirac(16, seed=2),
                32,
                None,
                light,
            )
        )
    return cases


def invariants_table(repeats: int, quick: bool) -> list[str]:
    out = [
        "| model | NumPy baseline (ms/point) | toposweep 1 thread (ms) | speed-up | "
        f"toposweep {os.cpu_count()} threads (ms) | speed-up | threads gain (95 % interval) | "
        "host steal | "
        "result |",
        "|---|---:|---:|---:|---:|---:|---:|---:|---|",
    ]
    for label, model, filling, params, sampling in point_cases(quick):
        opts = {"gap_points": 8, **sampling}
        ref, _ = compare(model, filling, params, **opts)  # asserts agreement
        reps = repeats if model.norb <= 16 else 1
        kw = {**opts, **ENGINE_FIXED, "max_lines": opts["lines"]}
        with HostSteal() as steal:
            times = round_times(
                [
                    lambda m=model, f=filling, p=params, o=opts: invariants_numpy(m, f, p, **o),
                    OnOneThread(
                        lambda m=model, f=filling, p=params, kw=kw: ts.invariants(
                            m, f, p, threads=1, **kw
                        )
                    ),
                    lambda m=model, f=filling, p=params, kw=kw: ts.invariants(
                        m, f, p, threads=os.cpu_count(), **kw
                    ),
                ],
                6 * reps,
                min_seconds=0.035,
            )
        t_np, t1, tn = (min(column) for column in zip(*times, strict=True))
        gain = gain_text(times, 1, 2)
        if ref["nu0"] < 0:
            result = f"undefined (reason {ref['reason']}), same on both sides"
        else:
            result = f"({ref['nu0']};{''.join(map(str, ref['nu']))})"
        out.append(
            f"| {label} | {t_np * 1e3:.1f} | {t1 * 1e3:.2f} | {t_np / t1:.1f}× | "
            f"{tn * 1e3:.2f} | {t_np / tn:.1f}× | {gain} | {steal.text()} | {result} |"
        )
        if label.startswith("Wilson–Dirac, 4"):
            SUMMARY["point4"] = (t_np * 1e3, t1 * 1e3, tn * 1e3)
        if label.startswith("16"):
            SUMMARY["point16"] = (t_np * 1e3, t1 * 1e3, tn * 1e3)
            assert (ref["nu0"], ref["nu"]) == expected_indices(4)
    return out


def core_only_table(repeats: int) -> list[str]:
    """The Rust call alone (no symmetry checks, no Dataset assembly) for the Wilson–Dirac point."""
    from toposweep.evaluation import prepare_request, run_points
    from toposweep.results.dataset import build_dataset
    from toposweep.sampling import Sampling

    wd = ts.models.wilson_dirac()
    point = [wd.resolve({"mass": -2.0})]
    s = Sampling(**POINT_OPTIONS)
    core, coeffs = wd.prepare(point)
    kw = s.core_kwargs()
    out = [
        "| Wilson–Dirac point, fixed 40 × 41 × 6 | 1 thread (ms) | "
        f"{os.cpu_count()} threads (ms) | threads gain (95 % interval) | host steal |",
        "|---|---:|---:|---:|---:|",
    ]
    rows = [
        (
            "`_core.evaluate` (Rust only)",
            lambda th: _core.evaluate(core, coeffs, 2, inversion=None, threads=th, **kw),
        ),
        (
            "`run_points` (+ symmetry checks)",
            lambda th: run_points(
                prepare_request(wd, 2, inversion=None, sampling=s, threads=th), point
            ),
        ),
        (
            "the same + Dataset, one step after the other",
            lambda th: build_dataset(
                wd,
                run_points(prepare_request(wd, 2, inversion=None, sampling=s, threads=th), point),
                dims=(),
                coords={},
                fixed=point[0],
                filling=2,
                sampling=s,
                parity_known=True,
            ),
        ),
        (
            "`invariants()`: checks and Dataset layout beside the core",
            lambda th: ts.invariants(wd, 2, {"mass": -2.0}, threads=th, **POINT_OPTIONS),
        ),
    ]
    for name, f in rows:
        with HostSteal() as steal:
            times = round_times(
                [OnOneThread(lambda f=f: f(1)), lambda f=f: f(os.cpu_count())],
                6 * repeats,
                min_seconds=0.035,
            )
        t1, tn = (min(column) for column in zip(*times, strict=True))
        out.append(
            f"| {name} | {t1 * 1e3:.2f} | {tn * 1e3:.2f} | {gain_text(times, 0, 1)} | "
            f"{steal.text()} |"
        )
    return out


def sweep_table(quick: bool) -> list[str]:
    cores = os.cpu_count() or 1
    out = [
        f"| sweep (default sampling) | points | 1 thread (points/s) | {cores} threads (points/s) "
        "| threads gain |",
        "|---|---:|---:|---:|---:|",
    ]
    n2, n3 = (20, 6) if quick else (60, 16)
    cases = [
        (
            "2D spinful square lattice (bhz), mass × hopping",
            ts.models.bhz(),
            {"mass": np.linspace(-3, 3, n2), "hopping": np.linspace(0.3, 2, n2)},
        ),
        (
            "3D Wilson–Dirac, mass × hopping",
            ts.models.wilson_dirac(),
            {"mass": np.linspace(-4, 4, n3), "hopping": np.linspace(0.5, 1.5, n3)},
        ),
    ]
    for label, model, grid in cases:
        n = int(np.prod([len(v) for v in grid.values()]))
        # an untimed small sweep first: the first sweep of a process pays one-off set-up costs
        ts.sweep(model, {k: v[:2] for k, v in grid.items()}, 2, progress=False)
        best = {1: float("inf"), cores: float("inf")}
        for _ in range(2):  # interleaved, best of two: both see the same machine load
            for threads in best:

                def timed_sweep(m=model, g=grid, th=threads) -> tuple[float, xr.Dataset]:
                    t0 = time.perf_counter()
                    ds = ts.sweep(m, g, 2, progress=False, threads=th)
                    return time.perf_counter() - t0, ds

                dt, ds = ONE_THREAD.run(timed_sweep) if threads == 1 else timed_sweep()
                best[threads] = min(best[threads], dt)
        rate = [n / best[1], n / best[cores]]
        undefined = int((ds.phase.values < 0).sum())
        SUMMARY[f"sweep{model.dim}d"] = (rate[0], rate[1])
        out.append(
            f"| {label} ({undefined} undefined) | {n} | {rate[0]:.0f} | {rate[1]:.0f} | "
            f"{rate[1] / rate[0]:.2f}× |"
        )
    return out


def memory_table(quick: bool) -> list[str]:
    from sweep_memory import run_case

    sizes = (1000, 10_000) if quick else (1000, 10_000, 100_000)
    out = [
        "| 2D sweep streamed to disk, points | peak RSS (MiB) | after imports (MiB) | time (s) |",
        "|---:|---:|---:|---:|",
    ]
    for n in sizes:
        r = run_case(n, True)
        out.append(
            f"| {r['points']:,} | {r['peak_kib'] / 1024:.1f} | {r['import_kib'] / 1024:.1f} | "
            f"{r['seconds']:.1f} |"
        )
        SUMMARY.setdefault("memory", ())
        SUMMARY["memory"] += (r["points"], r["peak_kib"] / 1024)
    return out


def check_cost_table() -> list[str]:
    """κ points diagonalised (exact) and one-thread time (best of 9) per self-check variant."""
    out = [
        "| model | " + " | ".join(CHECK_VARIANTS) + " |",
        "|---|" + "---:|" * len(CHECK_VARIANTS),
    ]
    for label, model, params in CHECK_CASES:
        cells = []
        for kw in CHECK_VARIANTS.values():
            seconds = ONE_THREAD.run(lambda m=model, p=params, kw=kw: check_time(m, p, **kw))
            cells.append(f"{kappa_points(model, params, **kw)} κ, {1e3 * seconds:.1f} ms")
        out.append(f"| {label} | " + " | ".join(cells) + " |")
    return out


def summary_table(stamp: str) -> list[str]:
    """The README's table: the headline figures of this run, each with the table it comes from."""
    cores = os.cpu_count()
    rows = [
        f"Measured by `make bench` ({stamp}); details and the other tables in "
        "[benches/RESULTS.md](benches/RESULTS.md).",
        "",
        f"| | plain NumPy | toposweep, 1 thread | toposweep, {cores} threads |",
        "|---|---:|---:|---:|",
    ]

    def cell(t: float, ref: float, digits: int) -> str:
        return (
            f"{t:.{digits}f} ({ref / t:.0f}×)"
            if ref / t >= 10
            else f"{t:.{digits}f} ({ref / t:.1f}×)"
        )

    if "point4" in SUMMARY:
        t_np, t1, tn = SUMMARY["point4"]
        rows.append(
            f"| 3D Wilson–Dirac point, 4 bands, fixed sampling (ms) | {t_np:.1f} | "
            f"{cell(t1, t_np, 2)} | {cell(tn, t_np, 2)} |"
        )
    if "point16" in SUMMARY:
        t_np, t1, tn = SUMMARY["point16"]
        rows.append(
            f"| 3D point, 16 dense bands, fixed sampling (ms) | {t_np:.0f} | "
            f"{cell(t1, t_np, 0)} | {cell(tn, t_np, 0)} |"
        )
    if "eigh4" in SUMMARY:
        t_np, t1 = SUMMARY["eigh4"]
        rows.append(
            f"| 4×4 Hermitian eigensolver (µs per matrix) | {t_np:.2f} | {cell(t1, t_np, 2)} | |"
        )
    for key, label in (("sweep2d", "2D"), ("sweep3d", "3D")):
        if key in SUMMARY:
            r1, rn = SUMMARY[key]
            rows.append(f"| {label} sweep, default sampling (points/s) | | {r1:,.0f} | {rn:,.0f} |")
    if "memory" in SUMMARY:
        m = SUMMARY["memory"]
        rows.append(
            f"| peak memory of a 2D sweep streamed to disk, {m[0]:,.0f} → {m[-2]:,.0f} points "
            f"(MiB) | | | {m[1]:.0f} → {m[-1]:.0f} |"
        )
    return rows


def replace_between(path: Path, start: str, end: str, lines: list[str]) -> None:
    text = path.read_text()
    if start not in text or end not in text:
        raise SystemExit(f"{path}: the lines {start} and {end} are missing")
    head, rest = text.split(start, 1)
    _, tail = rest.split(end, 1)
    path.write_text(head + start + "\n" + "\n".join(lines) + "\n" + end + tail)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, help="write the markdown report here")
    parser.add_argument("--quick", action="store_true", help="fewer repeats, smaller cases")
    parser.add_argument("--no-cargo", action="store_true", help="skip the Rust kernel harness")
    parser.add_argument("--readme", type=Path, help="rewrite the summary table of this README")
    args = parser.parse_args()
    repeats = 2 if args.quick else 5
    # the main thread's first call: it joins the pool of all cores (one-thread calls are made
    # from ONE_THREAD, see CallerThread)
    _core.eigh(np.eye(4, dtype=complex)[None], threads=os.cpu_count())
    t_start = time.perf_counter()
    load_at_start = load()
    doc = [
        "# toposweep benchmarks",
        "",
        f"Generated by `benches/run_all.py` on {datetime.now(timezone.utc):%Y-%m-%d %H:%M} UTC, "
        f"{platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}, "
        f"numpy {np.__version__} (BLAS pinned to one thread), toposweep {ts.__version__} "
        f"with kernels compiled for {_core.INSTRUCTION_SET} "
        f"(RUSTFLAGS='{os.environ.get('RUSTFLAGS', '')}'). "
        "Times are the best of several rounds; a threads gain is the median over the rounds of "
        "the one-thread time over the all-core time measured right after it, with a 95 % "
        "bootstrap interval over the rounds (how far the median of other rounds of the same "
        "minutes could lie; the host moves it further from one run to the next). One-thread calls "
        "are made from a thread of their own and calls on all cores from the main thread. "
        "'Host steal' is the share of all CPUs' time that the hypervisor gave to other guests "
        "while a row was measured (/proc/stat): on a shared virtual machine it caps a threads "
        "gain, and it changes from minute to minute. "
        "Other jobs were sharing the machine "
        f"({load_at_start} at the start).",
        "",
    ]

    def section(title: str, lines: list[str], note: str = "") -> None:
        doc.extend([f"## {title}", ""])
        if note:
            doc.extend([note, ""])
        doc.extend([*lines, ""])
        print("\n".join([f"## {title}", *lines, ""]), flush=True)

    section(
        "(b) `invariants()` per 3D point against the NumPy baseline",
        invariants_table(repeats, args.quick),
        "Identical fixed sampling — `loop_points=40, lines=41, max_lines=41` (6 planes × 41 "
        "lines × 40 κ), TRIMs and the 8³ bulk gap grid, `gap_starts=0, certify=False` (the "
        "baseline has no gap minimiser and no convergence certificate) — on both sides; "
        "indices and gaps are asserted equal before timing. "
        "`benches/numpy_baseline.py` is the same algorithm in plain NumPy (batched `eigh`, "
        "SVD, `eigvals`).",
    )
    section(
        "Where the time of one point goes",
        core_only_table(repeats),
        "The Rust core alone; with the Python-side symmetry checks first; with those, then "
        "the xarray Dataset after the core (one step after the other); and the public call, "
        "which makes the checks and the Dataset's layout while the core computes (on the "
        "calling thread, while a second worker starts on the points).",
    )
    section(
        "(a) Hermitian eigensolver per matrix",
        eigensolver_table(repeats),
        "Batches of random complex Hermitian matrices; `_core.eigh` includes copying the batch "
        "in and out of Python. n ≤ 16: size-specialised Householder reduction + implicit QR on "
        "split real/imaginary arrays (n = 4: closed form when the spectrum is two "
        "Kramers-degenerate levels); n ≥ 17: faer. For n ≤ 8, four matrices are solved at once, "
        "one per lane of a vector register (also what the engine does with independent κ "
        "points; the kernel tables give one, two and four at a time).",
    )
    if not args.no_cargo:
        section(
            "Rust kernels (`cargo bench --no-default-features --features faer --bench kernels`)",
            cargo_kernel_tables(),
            "Per call, best of 7 repeats, no Python involved: candidate eigensolvers (the "
            "straightforward dynamic Jacobi, the size-specialised one cold and warm-started "
            "from a nearby matrix's eigenvectors, nalgebra's Householder, faer), polar factors, "
            "one Wilson line and one full point on one thread.",
        )
    section("(c) Sweep throughput", sweep_table(args.quick))
    section(
        "(d) Peak memory against the number of points",
        memory_table(args.quick),
        "Each row a fresh process (`benches/sweep_memory.py`): `bhz` over mass × hopping, "
        "`loop_points=12, lines=7`, streamed to a NetCDF file chunk by chunk.",
    )
    from phase_map_bench import NOTE as MAP_NOTE
    from phase_map_bench import table as map_table

    section("(e) Adaptive phase maps against the uniform sweep", map_table(args.quick), MAP_NOTE)

    from cluster_speed import table as cluster_table

    section(
        "(f) A sweep on a local Dask cluster",
        cluster_table(args.quick),
        "`benches/cluster_speed.py`: the same 3D sweep in this process on all cores and on a "
        "`LocalCluster` of as many one-thread worker processes (`executor=`), rounds "
        "interleaved, Datasets asserted identical; the per-task overhead of trivial tasks; the "
        "caller's journal write per chunk. On a shared host the cluster's extra processes and "
        "the scheduler compete with other jobs: read the range, not one round.",
    )
    section(
        "What the self-checks cost per point",
        check_cost_table(),
        "κ points whose Hamiltonian is diagonalised (exact, independent of the machine's load: "
        "the model is wrapped in a counting `CallableModel`) and the time of one `invariants()` "
        "call on one thread (best of 9), with each check of the default sampling switched off "
        "or on in turn (`benches/check_costs.py`).",
    )
    from near_closing_cost import table as near_closing_table

    section(
        "Proven gaps and loops resolved to the gap: cost per default call",
        near_closing_table(2 if args.quick else 3),
        "`benches/near_closing_cost.py`: default sampling, all cores, `prove_gap` never / auto "
        "(the default) / always, interleaved rounds; the last rows sit 0.1 % from the "
        "Kane–Mele transition (λ_SO = 0.06), where the loops' κ points crowd toward K.",
    )
    from near_closing_cost import lattice_table

    section(
        'The lattice method refined locally: cost of method="both"',
        lattice_table(2 if args.quick else 3),
        "`benches/near_closing_cost.py`: default sampling, all cores, the default call against "
        '`method="both"`, interleaved rounds; the lattice mesh is refined only where the '
        "plaquette field or links are rough (docs/near-closings.md), so the default points "
        "pay what they paid before and the points next to transitions pay for their patch.",
    )
    doc.append(f"(total benchmark time {time.perf_counter() - t_start:.0f} s; {load()} at the end)")
    if args.out:
        kept = ""
        if args.out.exists() and HISTORY in args.out.read_text():
            kept = "\n" + HISTORY + args.out.read_text().split(HISTORY, 1)[1]
        args.out.write_text("\n".join(doc) + "\n" + kept)
        print(f"wrote {args.out}", file=sys.stderr)
    if args.readme:
        stamp = (
            f"{datetime.now(timezone.utc):%Y-%m-%d}, kernels for "
            f"{_core.INSTRUCTION_SET.split(' (')[0]}, {load_at_start} at the start — the "
            "threads columns mean little when the load exceeds the cores"
        )
        replace_between(args.readme, README_START, README_END, summary_table(stamp))
        print(f"rewrote the summary table of {args.readme}", file=sys.stderr)


if __name__ == "__main__":
    main()
