"""Two builds of the Rust core in one process: the threads gain of each on the same point.

Changes to how a call is split over threads move its threads gain by a few per cent, while on a
shared virtual machine the gain itself moves by more than that from one minute to the next.
Run one after the other, two builds cannot be told apart. Here the installed extension and
another build of it (``--other``: the ``_core`` shared library of, say, an earlier commit) are
loaded into one process and called in alternate rounds on the Wilson–Dirac point of table (b) —
one thread, then all cores, for each build — so both see the same moments. The results of
both builds are asserted equal first.

Build the other extension from a worktree of the earlier commit, for instance::

    git worktree add /tmp/before <commit> --detach
    (cd /tmp/before && RUSTFLAGS="-C target-cpu=x86-64-v3" \\
        ../main/.venv/bin/maturin build --release -o /tmp/before-wheel)
    mkdir /tmp/before-x && (cd /tmp/before-x && python -m zipfile -e /tmp/before-wheel/*.whl .)
    .venv/bin/python benches/compare_extensions.py --other /tmp/before-x/toposweep/_core.abi3.so

With ``--whole-call`` each call is a whole ``invariants()`` call — the Python around the core and
the Python job beside it included — with the build's ``evaluate`` put in for the installed
one's for its calls; without, the core's ``evaluate`` alone. ``--default-sampling`` takes the
package's default sampling (gap search and convergence certificate on) instead of table (b)'s.

Prints, for each build, the threads gain (median over rounds of one-thread over all-core time)
and the best times, and the median over rounds of the new build's all-core time over the other's.
"""

from __future__ import annotations

import argparse
import importlib.machinery
import importlib.util
import os
import sys
from pathlib import Path
from types import ModuleType

# (as in run_all.py: NumPy's BLAS on one thread, so its threads do not compete with ours)
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402
import toposweep as ts  # noqa: E402
from toposweep import _core  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
from point_sampling import POINT_OPTIONS  # noqa: E402
from timing import ONE_THREAD, HostSteal, OnOneThread, gain_text, round_times  # noqa: E402


def load_other(path: str) -> ModuleType:
    """The extension at ``path`` as a module of its own (its init function is ``_core``'s)."""
    loader = importlib.machinery.ExtensionFileLoader("other_build._core", path)
    spec = importlib.util.spec_from_loader("other_build._core", loader)
    if spec is None:
        raise SystemExit(f"cannot load {path}")
    module = importlib.util.module_from_spec(spec)
    loader.exec_module(module)
    return module


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--other", required=True, help="path of the other build's _core library")
    parser.add_argument("--rounds", type=int, default=30, help="alternate rounds (default 30)")
    parser.add_argument(
        "--whole-call",
        action="store_true",
        help="time whole invariants() calls instead of the core's evaluate alone",
    )
    parser.add_argument(
        "--default-sampling",
        action="store_true",
        help="the package's default sampling (gap search and certificate on) instead of the "
        "fixed sampling of table (b)",
    )
    args = parser.parse_args()
    options = {} if args.default_sampling else POINT_OPTIONS
    other = load_other(args.other)
    cores = os.cpu_count() or 1
    wd = ts.models.wilson_dirac()
    model_new, coeffs = wd.prepare([wd.resolve({"mass": -2.0})])
    model_other = other.CoreModel.tight_binding(*wd._core_arguments())
    keywords = ts.Sampling(**options).core_kwargs()
    # the main thread's first call joins the pool of all cores, in each build
    for module in (other, _core):
        module.eigh(np.eye(4, dtype=complex)[None], threads=cores)
    ONE_THREAD.run(lambda: None)

    def call(module: ModuleType, model: object, threads: int):
        if args.whole_call:
            return whole_call(module, model, threads)
        return lambda: module.evaluate(
            model, coeffs, 2, inversion=None, threads=threads, **keywords
        )

    installed_evaluate = _core.evaluate

    def whole_call(module: ModuleType, model: object, threads: int):
        own_evaluate = module.evaluate

        def evaluate(_model: object, *rest: object, **kw: object) -> object:
            return own_evaluate(model, *rest, **kw)  # (this build's model and evaluate)

        def run() -> object:
            _core.evaluate = evaluate
            try:
                ds = ts.invariants(wd, 2, {"mass": -2.0}, threads=threads, **options)
            finally:
                _core.evaluate = installed_evaluate
            return ds

        return run

    a, b = call(other, model_other, cores)(), call(_core, model_new, cores)()
    for key in a:  # (dict keys, or a Dataset's variables)
        assert np.array_equal(a[key], b[key], equal_nan=True), f"the builds differ in {key}"
    with HostSteal() as steal:
        times = round_times(
            [
                OnOneThread(call(other, model_other, 1)),
                call(other, model_other, cores),
                OnOneThread(call(_core, model_new, 1)),
                call(_core, model_new, cores),
            ],
            args.rounds,
            min_seconds=0.035,
        )
    best = [min(column) * 1e3 for column in zip(*times, strict=True)]
    ratio = sorted(t[3] / t[1] for t in times)[len(times) // 2]
    print(f"| build | 1 thread (ms) | {cores} threads (ms) | threads gain (95 % interval) |")
    print("|---|---:|---:|---:|")
    print(f"| other | {best[0]:.3f} | {best[1]:.3f} | {gain_text(times, 0, 1)} |")
    print(f"| installed | {best[2]:.3f} | {best[3]:.3f} | {gain_text(times, 2, 3)} |")
    print(f"\ninstalled over other, {cores} threads, median over rounds: {ratio:.3f}")
    print(f"CPU time the host took away during the rounds (steal): {steal.text()}")


if __name__ == "__main__":
    main()
