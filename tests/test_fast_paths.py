"""The core's fast paths give the same answers as the straightforward ones, end to end.

Kernel-level comparisons (size-specialised Jacobi vs the dynamic one, closed-form polar factor
vs the eigen-decomposition one, whole Wilson lines) are Rust unit tests; the plain-NumPy
implementation is compared in test_numpy_baseline.py. Here: the parallel split over points and
κ lines (one thread vs all cores, a batch of points vs one call per point) and the per-line
Bloch fill of tight-binding models vs the batched fill of callable models.
"""

from __future__ import annotations

import os
import subprocess
import sys

import numpy as np
import pytest
import toposweep as ts
from toposweep.evaluation import prepare_request, run_points
from toposweep.sampling import Sampling

FIXED = Sampling(loop_points=24, lines=41, max_lines=41, gap_starts=0, certify=False)
KEYS = ("nu0", "nu", "z2_plane", "reason")
GAPS = ("gap_direct", "gap_indirect")


def same(a: dict, b: dict) -> None:
    for k in KEYS:
        np.testing.assert_array_equal(a[k], b[k], err_msg=k)
    for k in GAPS:
        np.testing.assert_allclose(a[k], b[k], rtol=0, atol=1e-10, err_msg=k)


def test_threads_and_batching_do_not_change_results():
    model = ts.models.wilson_dirac()
    points = [model.resolve({"mass": m}) for m in (-3.5, -2.0, -0.4, 0.6, 1.9, 3.3)]
    one = run_points(prepare_request(model, 2, inversion=None, sampling=FIXED, threads=1), points)
    many = run_points(prepare_request(model, 2, inversion=None, sampling=FIXED, threads=2), points)
    same(one, many)
    req = prepare_request(model, 2, inversion=None, sampling=FIXED, threads=2)
    for i, p in enumerate(points):
        single = run_points(req, [p])
        same({k: one[k][i : i + 1] for k in KEYS + GAPS}, single)
    # and the answers are the published ones (Fu & Kane, Phys. Rev. B 76, 045302 (2007))
    assert one["nu0"].tolist() == [0, 1, 0, 0, 1, 0]


@pytest.mark.parametrize("mass", [-2.0, 0.5])
def test_per_line_fill_equals_batched_callable(mass):
    """TightBinding builds each line on the worker; a CallableModel is filled in big batches."""
    tb = ts.models.wilson_dirac()

    def h(kappa, mass, hopping):
        return tb.hamiltonian(kappa, {"mass": mass, "hopping": hopping})

    cm = ts.CallableModel(h, 3, 4, time_reversal=tb.time_reversal)
    cm.defaults = {"mass": mass, "hopping": 1.0}
    opts = {"loop_points": 24, "lines": 21, "max_lines": 21, "gap_starts": 0, "certify": False}
    a = ts.invariants(tb, 2, {"mass": mass}, **opts)
    b = ts.invariants(cm, 2, {"mass": mass}, **opts)
    for k in ("nu0", "nu", "z2_plane", "undefined_reason"):
        np.testing.assert_array_equal(a[k].values, b[k].values, err_msg=k)
    for k in GAPS:
        assert abs(float(a[k]) - float(b[k])) <= 1e-10


def test_calls_from_many_python_threads_and_from_inside_a_callback():
    """``threads=1`` runs on the calling thread (its own one-worker pool), larger counts on
    shared pools: concurrent callers, short-lived threads and calls made from inside a Python
    callback of a running evaluation (the caller is then a worker of another pool, and the
    shared one-thread pool takes over) all give the single-thread answers."""
    from concurrent.futures import ThreadPoolExecutor

    model = ts.models.wilson_dirac()
    points = [model.resolve({"mass": m}) for m in (-2.0, 0.6)]
    want = run_points(prepare_request(model, 2, inversion=None, sampling=FIXED, threads=1), points)

    def call(threads: int) -> dict:
        req = prepare_request(model, 2, inversion=None, sampling=FIXED, threads=threads)
        return run_points(req, points)

    for _ in range(2):  # fresh executors: their threads build pools, finish and exit
        with ThreadPoolExecutor(max_workers=4) as ex:
            for got in ex.map(call, [1, 2, 1, 2, 3, 1]):
                same(want, got)

    inner: list[dict] = []

    def h(kappa, mass, hopping):
        if not inner:  # once, from a worker thread of the outer evaluation
            inner.append(call(1))
            inner.append(call(2))
        return model.hamiltonian(kappa, {"mass": mass, "hopping": hopping})

    cm = ts.CallableModel(h, 3, 4, time_reversal=model.time_reversal)
    cm.defaults = {"mass": -2.0, "hopping": 1.0}
    outer = run_points(
        prepare_request(cm, 2, inversion=None, sampling=FIXED, threads=2), [cm.resolve({})]
    )
    for got in inner:
        same(want, got)
    assert outer["nu0"].tolist() == [want["nu0"][0]]


THREAD_COUNT_SCRIPT = """
import os, toposweep as ts
from toposweep import _core
from toposweep.sampling import Sampling
count = lambda: len(os.listdir("/proc/self/task"))
wd = ts.models.wilson_dirac()
core, coeffs = wd.prepare([wd.resolve({"mass": -2.0})])
kw = Sampling(loop_points=16, lines=9, max_lines=9).core_kwargs()
seen = [count()]
for threads in (1, 1, None, 3, 1):
    _core.evaluate(core, coeffs, 2, threads=threads, **kw)
    seen.append(count())
print(*seen)
"""


@pytest.mark.skipif(not os.path.isdir("/proc/self/task"), reason="counts threads through /proc")
def test_threads_one_starts_no_thread_and_leaves_the_default_parallel():
    """``threads=1`` runs on the calling thread (no new OS thread); a later default call still
    gets its pool of one worker per core (the calling thread, now the worker of its one-thread
    pool, must not capture it), ``threads=3`` a pool of three."""
    env = {**os.environ, "RAYON_NUM_THREADS": "2"}
    out = subprocess.run(
        [sys.executable, "-c", THREAD_COUNT_SCRIPT], env=env, capture_output=True, text=True
    )
    assert out.returncode == 0, out.stderr
    start, one, one_again, default, three, one_last = map(int, out.stdout.split())
    assert one == start and one_again == start
    assert default == start + 2
    assert three == default + 3
    assert one_last == three


PUBLIC_ONE_THREAD_SCRIPT = """
import os, numpy as np, toposweep as ts
count = lambda: len(os.listdir("/proc/self/task"))
seen, nu = [count()], []
wd, km = ts.models.wilson_dirac(), ts.models.kane_mele()
def qwz_stack(kappa, mass=-1.0):  # (BHZ in NumPy: two Qi-Wu-Zhang blocks, spin z up and down)
    k = 2 * np.pi * np.asarray(kappa)
    sx, sy, sz = np.array([[0, 1], [1, 0]]), np.array([[0, -1j], [1j, 0]]), np.diag([1, -1])
    up = (np.sin(k[:, :1, None]) * sx + np.sin(k[:, 1:, None]) * sy
          + (mass + np.cos(k).sum(axis=1))[:, None, None] * sz)
    down = (-np.sin(k[:, :1, None]) * sx + np.sin(k[:, 1:, None]) * sy
            + (mass + np.cos(k).sum(axis=1))[:, None, None] * sz)
    h = np.zeros((len(k), 4, 4), complex)
    h[:, :2, :2], h[:, 2:, 2:] = up, down
    return h
callable_model = ts.CallableModel(  # (the model's own symmetry checks call the core)
    qwz_stack, 2, 4, time_reversal=np.kron([[0, 1], [-1, 0]], np.eye(2)))
opts = dict(loop_points=12, lines=7, threads=1)
grid = np.random.default_rng(3).random((500, 3))  # (more than one chunk: would use a pool)
h1 = wd.hamiltonian(grid, {"mass": -2.0}, threads=1)
seen.append(count())
for model, params in ((wd, {"mass": -2.0}), (wd, {"mass": 4.0}), (km, {}), (callable_model, {})):
    ds = ts.invariants(model, 2, params, **opts)  # (new models: their symmetries checked anew)
    nu.append(int(ds.nu0))
    seen.append(count())
ds = ts.invariants(wd, 2, {"mass": -2.0}, inversion=np.asarray(wd.inversion), **opts)
nu.append(int(ds.nu0))
ds = ts.sweep(km, {"staggered": [0.0, 0.2]}, filling=2, loop_points=12, lines=7, threads=1)
nu += ds.nu0.values.tolist()
seen.append(count())
print(*seen, *nu)
"""


@pytest.mark.skipif(not os.path.isdir("/proc/self/task"), reason="counts threads through /proc")
def test_public_calls_with_one_thread_start_no_thread():
    """``invariants``, ``sweep`` and ``Model.hamiltonian`` with ``threads=1`` run on the calling
    thread, symmetry checks of new models and operators included: these once ran on a pool of
    the default size,
    which made the main thread a worker of that pool for good and handed each later
    ``threads=1`` call to another thread, the main thread spinning until it was done."""
    out = subprocess.run(
        [sys.executable, "-c", PUBLIC_ONE_THREAD_SCRIPT], capture_output=True, text=True
    )
    assert out.returncode == 0, out.stderr
    values = list(map(int, out.stdout.split()))
    seen, nu = values[:7], values[7:]
    assert seen == [seen[0]] * 7
    # Wilson-Dirac (1;000) at m = -2, trivial at m = 4 (Fu & Kane, Phys. Rev. B 76, 045302
    # (2007)); Kane-Mele Z2-odd without and with a small staggered potential (Kane & Mele,
    # Phys. Rev. Lett. 95, 226801 (2005)); BHZ odd for 0 < |m| < 2 (Bernevig, Hughes & Zhang,
    # Science 314, 1757 (2006)), as in the physics tests
    assert nu == [1, 0, 1, 1, 1, 1, 1]


MAIN_THREAD_SCRIPT = """
import os, threading, toposweep as ts
from toposweep import _core
from toposweep.sampling import Sampling
count = lambda: len(os.listdir("/proc/self/task"))
wd = ts.models.wilson_dirac()
core, coeffs = wd.prepare([wd.resolve({"mass": -2.0})])
kw = Sampling(loop_points=40, lines=41, max_lines=41).core_kwargs()
seen, nu = [count()], []
def call(threads):
    nu.append(int(_core.evaluate(core, coeffs, 2, threads=threads, **kw)["nu0"][0]))
for threads in (2, 2, 1):
    call(threads)
    seen.append(count())
def other_thread():
    call(2)
    seen.append(count())  # (counted while this thread is alive: it may linger after join)
other = threading.Thread(target=other_thread)
other.start()
other.join()
print(*seen, *nu)
"""


@pytest.mark.skipif(not os.path.isdir("/proc/self/task"), reason="counts threads through /proc")
def test_main_thread_is_a_worker_of_its_first_pool():
    """From the main thread, ``threads=2`` starts one helper (the main thread is the other
    worker); a later ``threads=1`` from it, and ``threads=2`` from another thread, go to the
    shared pools (one and two more threads, besides the calling thread itself); every call gives
    the same index."""
    out = subprocess.run([sys.executable, "-c", MAIN_THREAD_SCRIPT], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    start, two, two_again, one, other, *nu = map(int, out.stdout.split())
    assert two == start + 1 and two_again == two
    assert one == two + 1
    assert other == one + 1 + 2
    # (1;000) at m = -2: Fu & Kane, Phys. Rev. B 76, 045302 (2007), as in the physics tests
    assert nu == [1, 1, 1, 1]


def test_hamiltonian_batches_equal_on_any_number_of_threads():
    """A batch larger than one parallel chunk gives the same H, bit for bit, on one thread, two
    and the default; a bad thread count is refused like everywhere else."""
    wd = ts.models.wilson_dirac()
    grid = np.random.default_rng(4).random((300, 3))
    one = wd.hamiltonian(grid, {"mass": -1.0}, threads=1)
    for threads in (2, None):
        np.testing.assert_array_equal(wd.hamiltonian(grid, {"mass": -1.0}, threads=threads), one)
    with pytest.raises(ts.SamplingError, match="threads"):
        wd.hamiltonian(grid, threads=0)
