"""Where a callable model's time goes, against the same model as a hopping list.

The model is the cubic Wilson–Dirac model (or ``--model``), given once as a `TightBinding` and
once as a `CallableModel` whose function is the plain NumPy Bloch sum of the same hoppings
(the fastest a user function of this kind gets: one phase matrix, one `einsum`). Each is
evaluated at the same point by `toposweep.invariants` in alternated rounds. For the callable
model every call of the function is recorded: how many calls per point, how many κ points per
call, and how the time splits into the user's function, toposweep's checks of what it
returned (shape, finiteness, Hermiticity) and the rest (the core, the hand-off of each batch
to Python and back).

Usage::

    .venv/bin/python benches/callable_cost.py [--model wilson_dirac] [--rounds 20]
"""

from __future__ import annotations

import argparse
import os
import statistics
import time
from collections import Counter

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import numpy as np  # noqa: E402
import toposweep as ts  # noqa: E402
from toposweep import callable_model  # noqa: E402


def numpy_function(model: ts.TightBinding):
    """A vectorised H(κ, **params) of a tight-binding model: the Bloch sum in NumPy."""
    hops = list(model.hoppings())
    R = np.array([r for r, _, _ in hops], float)
    T = np.array([t for _, t, _ in hops])
    terms = [term for _, _, term in hops]

    n = model.norb
    # every bond and its conjugate partner, so that H = Σ phase · T is one matrix product
    onsite = ~R.any(axis=1)
    R2 = np.concatenate([R, -R[~onsite]])
    T2 = np.concatenate([T, T[~onsite].conj().transpose(0, 2, 1)]).reshape(len(R2), n * n)
    terms2 = terms + [t for t, o in zip(terms, onsite, strict=True) if not o]

    def h(kappa, **params):
        c = np.array([1.0 if t is None else params[t] for t in terms2])
        phase = np.exp(2j * np.pi * (kappa @ R2.T)) * c  # (nk, nbonds)
        return (phase @ T2).reshape(len(kappa), n, n)  # one BLAS product, no einsum

    return h


class Recorder:
    """Wraps the user function: counts calls and batch sizes, times the function itself."""

    def __init__(self, func):
        self.func, self.sizes, self.seconds = func, Counter(), 0.0

    def __call__(self, kappa, **params):
        t0 = time.thread_time()  # (CPU time: on a busy host wall time counts others' turns)
        out = self.func(kappa, **params)
        self.seconds += time.thread_time() - t0
        self.sizes[len(kappa)] += 1
        return out


class TimedCallbacks:
    """Stands in for ``_core`` in ``toposweep.callable_model``: times each whole callback
    (the user's function plus toposweep's checks of what it returned)."""

    def __init__(self, core):
        self.core, self.seconds = core, 0.0
        timer = self

        class CoreModel:
            @staticmethod
            def callable(dim, norb, evaluate):
                def timed(kappa, point):
                    t0 = time.thread_time()
                    out = evaluate(kappa, point)
                    timer.seconds += time.thread_time() - t0
                    return out

                return core.CoreModel.callable(dim, norb, timed)

        self.CoreModel = CoreModel


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--model", default="wilson_dirac")
    parser.add_argument("--rounds", type=int, default=20)
    parser.add_argument("--threads", type=int, default=1)
    args = parser.parse_args()
    tb = getattr(ts.models, args.model)()
    params = tb.resolve({})
    rec = Recorder(numpy_function(tb))
    cm = ts.CallableModel(
        rec, tb.dim, tb.norb, parameters=tb.parameters,
        time_reversal=tb.time_reversal, inversion=tb.inversion,
    )  # fmt: skip
    kappa = np.random.default_rng(1).random((50, tb.dim))
    assert np.allclose(cm.hamiltonian(kappa, params), tb.hamiltonian(kappa, params))
    a = ts.invariants(tb, 2, params, threads=args.threads)
    b = ts.invariants(cm, 2, params, threads=args.threads)
    assert int(a.nu0) == int(b.nu0)

    timed = TimedCallbacks(callable_model._core)
    callable_model._core = timed  # (only this process; the core model is rebuilt per call)
    times = {"tight-binding": [], "callable": []}
    cpu = {"tight-binding": [], "callable": []}
    rec.sizes.clear()
    func_seconds = callback_seconds = 0.0
    for _ in range(args.rounds):
        for name, model in (("tight-binding", tb), ("callable", cm)):
            rec.seconds = 0.0
            c0, t0 = time.process_time(), time.perf_counter()
            ts.invariants(model, 2, params, threads=args.threads)
            times[name].append(time.perf_counter() - t0)
            cpu[name].append(time.process_time() - c0)
        func_seconds += rec.seconds
        callback_seconds += timed.seconds
        timed.seconds = 0.0
    calls = sum(rec.sizes.values()) / args.rounds
    points = sum(k * v for k, v in rec.sizes.items()) / args.rounds
    med = {k: statistics.median(v) for k, v in times.items()}
    print(f"model {args.model}, {args.threads} thread(s), {args.rounds} alternated rounds")
    for k, v in med.items():
        c = statistics.median(cpu[k])
        print(f"  {k:14s} median {v * 1e3:7.2f} ms per point (CPU time {c * 1e3:7.2f} ms)")
    print(f"  ratio callable / tight-binding: {med['callable'] / med['tight-binding']:.1f}x")
    print(f"  user function: {calls:.0f} calls per point, {points:.0f} κ points per point, "
          f"{func_seconds / args.rounds * 1e3:.2f} ms per point")  # fmt: skip
    checks = (callback_seconds - func_seconds) / args.rounds
    print(f"  toposweep's checks of the returned batches: {checks * 1e3:.2f} ms per point")
    common = sorted(rec.sizes.items(), key=lambda kv: -kv[1])[:8]
    print("  batch sizes (κ points: calls over all rounds):",
          ", ".join(f"{k}: {v}" for k, v in common))  # fmt: skip


if __name__ == "__main__":
    main()
