"""Python work run beside the core (``_core.evaluate(alongside=...)``) and the result layout.

``invariants()`` checks the symmetries and builds its Dataset (empty, :func:`plan_dataset`)
while the core computes, on a second worker when there is one. Nothing about the answer may
depend on that: errors raised by that work still reach the caller, the callable runs exactly
once whatever the number of threads, and the Dataset equals the one built after the fact.
"""

from __future__ import annotations

import threading

import numpy as np
import pytest
import toposweep as ts
from toposweep import _core
from toposweep.evaluation import prepare_request, run_points
from toposweep.results.dataset import ResultLayout, build_dataset, plan_dataset
from toposweep.sampling import Sampling

LIGHT = Sampling(loop_points=16, lines=9, max_lines=41, gap_starts=0, certify=False)
KW = LIGHT.core_kwargs()
SMALL = {"loop_points": 16, "lines": 9}


@pytest.fixture(scope="module")
def wd_core():
    wd = ts.models.wilson_dirac()
    return wd.prepare([wd.resolve({"mass": m}) for m in (-2.0, 4.0)])


@pytest.mark.parametrize("threads", [1, 2, None])
def test_callable_runs_once_and_results_do_not_change(wd_core, threads):
    core, coeffs = wd_core
    calls: list[str] = []
    plain = _core.evaluate(core, coeffs, 2, threads=threads, **KW)
    beside = _core.evaluate(
        core,
        coeffs,
        2,
        threads=threads,
        alongside=lambda: calls.append(threading.current_thread().name),
        **KW,
    )
    assert len(calls) == 1
    assert plain.keys() == beside.keys()
    for k in plain:
        np.testing.assert_array_equal(plain[k], beside[k], err_msg=k)
    # the cubic Wilson-Dirac model's phases (Fu & Kane, Phys. Rev. B 76, 045302 (2007), as
    # in test_physics_wilson_dirac.py): (1;000) at m = -2, (0;000) at m = 4
    assert beside["nu0"].tolist() == [1, 0]
    assert beside["nu"].tolist() == [[0, 0, 0], [0, 0, 0]]


def test_two_workers_run_the_callable_beside_the_points(wd_core):
    """With two workers the callable runs on a pool worker while the points run. Called from
    a thread other than the main one, the call goes to the shared pool and the calling thread
    only waits, so the callable's thread is never the caller (from the main thread, which is a
    worker of its own pool, either thread may take it). With one worker it runs first, on the
    calling thread."""
    core, coeffs = wd_core
    where: list[tuple[str, int]] = []

    def call(threads: int) -> None:
        caller = threading.get_ident()
        _core.evaluate(
            core,
            coeffs,
            2,
            threads=threads,
            alongside=lambda: where.append((f"threads={threads}", threading.get_ident() == caller)),
            **KW,
        )

    side = threading.Thread(target=call, args=(2,))
    side.start()
    side.join()
    call(1)
    assert where == [("threads=2", False), ("threads=1", True)]


class Marker(Exception):
    pass


def _raise() -> None:
    raise Marker("from the Python side")


@pytest.mark.parametrize("threads", [1, 2])
def test_callable_errors_reach_the_caller(wd_core, threads):
    core, coeffs = wd_core
    with pytest.raises(Marker, match="Python side"):
        _core.evaluate(core, coeffs, 2, threads=threads, alongside=_raise, **KW)


@pytest.mark.parametrize("threads", [1, 2])
def test_callable_error_wins_over_the_core_error(wd_core, threads):
    """A run the Python side rejects reports why, not what the core made of it."""
    core, coeffs = wd_core
    bad = np.array([[np.nan, 1.0]])
    with pytest.raises(ValueError):  # the core alone: non-finite coefficients
        _core.evaluate(core, bad, 2, threads=threads, **KW)
    with pytest.raises(Marker):
        _core.evaluate(core, bad, 2, threads=threads, alongside=_raise, **KW)


@pytest.mark.parametrize("threads", [1, 2])
def test_symmetry_breaks_of_one_point_still_warn(threads):
    """invariants() checks time reversal beside the core; a point without it is undefined."""
    m = ts.models.wilson_dirac()
    m.add((1, 0, 0), 1j * np.eye(4), term="b")  # i·1 hopping: odd under Θ = iσ_y K
    m.defaults["b"] = 0.0
    # b = 0: the Wilson-Dirac model at m = -2, (1;000) (Fu & Kane, Phys. Rev. B 76, 045302 (2007))
    assert int(ts.invariants(m, 2, {"b": 0.0}, threads=threads, **SMALL).nu0) == 1
    with pytest.warns(ts.SymmetryWarning, match="time.reversal"):
        ds = ts.invariants(m, 2, {"b": 0.3}, threads=threads, **SMALL)
    assert int(ds.nu0) == -1 and int(ds.undefined_reason) == 8


def test_layout_equals_the_dataset_built_afterwards():
    model = ts.models.fu_kane_mele()
    s = Sampling(loop_points=16, lines=9, method="both")
    req = prepare_request(model, 2, inversion=None, sampling=s)
    points = [model.resolve({})] * 2
    raw = run_points(req, points)
    kw = dict(
        dims=("point",),
        coords={"point": np.arange(2)},
        fixed=points[0],
        filling=2,
        sampling=s,
        parity_known=req.inversion is not None,
    )
    layout = plan_dataset(model, **kw)
    filled = layout.fill(raw)
    after = build_dataset(model, raw, **kw)
    filled.attrs.pop("created"), after.attrs.pop("created")
    assert filled.identical(after)
    assert list(filled.variables) == list(after.variables)
    # the diamond model's strong phase at δt > 0 (Fu, Kane & Mele, Phys. Rev. Lett. 98, 106803
    # (2007); tests/test_physics_diamond.py)
    assert int(filled.nu0[0]) == 1
    with pytest.raises(RuntimeError, match="filled once"):
        layout.fill(raw)


def test_invariants_same_on_one_and_two_threads():
    model = ts.models.wilson_dirac()
    one = ts.invariants(model, 2, {"mass": -2.0}, threads=1, **SMALL)
    two = ts.invariants(model, 2, {"mass": -2.0}, threads=2, **SMALL)
    one.attrs.pop("created"), two.attrs.pop("created")
    assert one.identical(two)
    assert int(one.nu0) == 1 and int(one.nu0_parity) == 1  # Fu & Kane 2007: (1;000) at m = -2


@pytest.mark.parametrize("threads", [1, 2])
@pytest.mark.parametrize("method", ["wilson", "both"])
def test_results_written_straight_into_the_layout_equal_the_copied_ones(threads, method):
    """The core writes every result the Dataset takes by key into the layout's arrays (no copy
    after the core), and the Dataset equals the one filled by copying, on a grid of points."""
    model = ts.models.fu_kane_mele()
    s = Sampling(loop_points=16, lines=9, method=method)
    req = prepare_request(model, 2, inversion=None, sampling=s, threads=threads)
    points = [model.resolve({}), model.resolve({"dimerisation": -0.4})] * 3
    kw = dict(
        dims=("a", "b"),
        coords={"a": np.arange(2), "b": np.arange(3)},
        fixed={},
        filling=2,
        sampling=s,
        parity_known=req.inversion is not None,
    )
    layout = plan_dataset(model, **kw)
    raw = run_points(req, points, alongside=layout.core_targets)
    targets = layout.core_targets()
    assert set(targets) <= set(raw)
    for key, target in targets.items():
        assert raw[key] is target, f"{key}: the core made a new array"
    direct = layout.fill(raw)
    copied = build_dataset(model, run_points(req, points), **kw)
    direct.attrs.pop("created"), copied.attrs.pop("created")
    assert direct.identical(copied)
    # the diamond model's phases (Fu, Kane & Mele, Phys. Rev. Lett. 98, 106803 (2007), as in
    # tests/test_physics_diamond.py): strong for dimerisation > 0, weak for dimerisation < 0
    assert direct.nu0.values.tolist() == [[1, 0, 1], [0, 1, 0]]


@pytest.mark.parametrize("threads", [1, 2])
def test_core_writes_only_into_arrays_that_hold_the_values_exactly(wd_core, threads):
    """Given arrays of another integer type are written (values converted exactly); arrays that
    cannot hold the values, are read-only, not contiguous or of another size are left alone
    and new arrays returned."""
    core, coeffs = wd_core
    plain = _core.evaluate(core, coeffs, 2, threads=threads, **KW)
    read_only = np.full(2, 7.0)
    read_only.setflags(write=False)
    out = {
        "nu0": np.full(2, 9, np.int64),  # int8 values into int64: written
        "reason": np.full(2, 9, np.int16),  # uint8 values into int16: written
        "nu": np.full((2, 3), 9, np.uint8),  # values 0 fit uint8: written
        "phase": np.full(2, 9, np.uint8),  # -1 would not fit, but both points are defined
        "gap_direct": np.full(2, 9.0, np.float32),  # float64 into float32: not exact
        "gap_indirect": read_only,
        "bandwidth": np.full(4, 9.0)[::2],  # not contiguous
        "max_step": np.full(3, 9.0),  # wrong size
        "converged": np.full(2, 9, np.int8),  # booleans as 0/1
    }
    kept = {k: v.copy() for k, v in out.items()}
    raw = _core.evaluate(core, coeffs, 2, threads=threads, alongside=lambda: out, **KW)
    for key in ("nu0", "reason", "nu", "phase", "converged"):
        assert raw[key] is out[key], key
        np.testing.assert_array_equal(out[key], plain[key].astype(out[key].dtype), err_msg=key)
    for key in ("gap_direct", "gap_indirect", "bandwidth", "max_step"):
        assert raw[key] is not out[key], key
        np.testing.assert_array_equal(out[key], kept[key], err_msg=key)  # untouched
        np.testing.assert_array_equal(raw[key], plain[key], err_msg=key)
    undefined = np.full(2, 9, np.uint8)  # nu0 of a gapless point is -1: not a uint8
    gapless = _core.evaluate(
        core, np.zeros_like(coeffs), 2, threads=threads, alongside=lambda: {"nu0": undefined}, **KW
    )
    # zero coefficients make H(κ) = 0: every band at zero energy, no gap (common practice, no
    # source), so the index is undefined
    assert gapless["nu0"].tolist() == [-1, -1] and undefined.tolist() == [9, 9]


@pytest.mark.parametrize("threads", [1, 2])
def test_an_array_given_twice_or_not_in_a_dict_is_written_at_most_once(wd_core, threads):
    """The arrays are borrowed for writing while the points run: one array under two keys is
    written for one of them only (the other gets a new array), and targets that are not a
    dict are not used at all."""
    core, coeffs = wd_core
    plain = _core.evaluate(core, coeffs, 2, threads=threads, **KW)
    shared = np.full(2, 9.0)
    raw = _core.evaluate(
        core,
        coeffs,
        2,
        threads=threads,
        alongside=lambda: {"gap_direct": shared, "gap_indirect": shared},
        **KW,
    )
    written = [k for k in ("gap_direct", "gap_indirect") if raw[k] is shared]
    assert len(written) == 1
    np.testing.assert_array_equal(shared, plain[written[0]])
    for k in ("gap_direct", "gap_indirect"):
        np.testing.assert_array_equal(raw[k], plain[k], err_msg=k)
    given = [np.full(2, 9, np.int8)]
    raw = _core.evaluate(core, coeffs, 2, threads=threads, alongside=lambda: given, **KW)
    assert given[0].tolist() == [9, 9]
    np.testing.assert_array_equal(raw["nu0"], plain["nu0"])


@pytest.mark.parametrize("threads", [1, 2])
def test_invariants_leaves_nothing_to_copy_after_the_core(monkeypatch, threads):
    """Every result the Dataset takes by key arrives written in place, for the first point's
    layout and for the next, copied from it (dataset._TEMPLATES)."""
    left: list[list[str]] = []
    fill = ResultLayout.fill

    def checking(self, raw):
        left.append([k for k, v in self.core_targets().items() if raw[k] is not v])
        return fill(self, raw)

    monkeypatch.setattr(ResultLayout, "fill", checking)
    model = ts.models.wilson_dirac()
    for mass in (-2.0, 4.0):
        ds = ts.invariants(model, 2, {"mass": mass}, method="both", threads=threads, **SMALL)
    assert left == [[], []]
    # trivial at m = 4 (|m| > 3: Fu & Kane, Phys. Rev. B 76, 045302 (2007), as in the physics
    # tests), by all three methods
    assert int(ds.nu0) == 0 and int(ds.nu0_lattice) == 0 and int(ds.nu0_parity) == 0
