"""Adaptive phase maps (``ts.phase_map``): the sweep's Dataset, fewer evaluations, proofs.

Reference values: Wilson–Dirac phase boundaries at m/t = −3, −1, 1, 3 (Qi, Hughes & Zhang,
Phys. Rev. B 78, 195424 (2008); the phases by Fu & Kane, Phys. Rev. B 76, 045302 (2007)); BHZ
Z2 changes at m/t = ±2 (Bernevig, Hughes & Zhang, Science 314, 1757 (2006)). The reference for
every point is the uniform ``ts.sweep`` of the same grid.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time
from importlib import import_module
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts
import xarray as xr
from toposweep.errors import ParameterError, StoreError
from toposweep.results.store import journal_path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from proven_gap import sampled_gap as proven_gap_sampled  # noqa: E402
from proven_gap import with_proven_gap  # noqa: E402

sweep_module = import_module("toposweep.sweep")

WD_GRID = {"mass": np.linspace(-4, 4, 41) + 0.013, "hopping": np.linspace(0.6, 1.4, 9)}


def same(a: xr.Dataset, b: xr.Dataset) -> None:
    """Identical apart from the creation time."""
    xr.testing.assert_identical(a.assign_attrs(created=""), b.assign_attrs(created=""))


@pytest.fixture(scope="module")
def wilson_dirac_maps() -> tuple[xr.Dataset, xr.Dataset]:
    m = ts.models.wilson_dirac()
    return ts.phase_map(m, WD_GRID, 2, progress=False), ts.sweep(m, WD_GRID, 2, progress=False)


def test_map_has_every_variable_of_the_sweep_and_agrees_with_it(wilson_dirac_maps) -> None:
    pm, sw = wilson_dirac_maps
    for name, var in sw.variables.items():
        assert name in pm.variables, name
        assert pm[name].dims == var.dims and pm[name].dtype == var.dtype, name
        assert pm[name].attrs.keys() >= var.attrs.keys(), name
    assert set(sw.attrs) <= set(pm.attrs)
    defined = sw.undefined_reason.values == 0
    assert defined.all()  # (the grid avoids the boundaries: every sweep point is defined)
    np.testing.assert_array_equal(pm.phase.values, sw.phase.values)
    np.testing.assert_array_equal(pm.nu.values, sw.nu.values)
    ev = pm.obtained.values == 0
    assert 0 < ev.sum() < ev.size
    for name in ("gap_direct", "bandwidth", "nu0_parity", "z2_plane", "gap_kappa"):
        np.testing.assert_array_equal(pm[name].values[ev], sw[name].values[ev])
    # measured quantities are never shown where nothing was measured
    assert np.isnan(pm.gap_direct.values[~ev]).all() and np.isnan(pm.gap_kappa.values[~ev]).all()
    assert (pm.lines_used.values[~ev] == 0).all()
    assert int(pm.attrs["points_evaluated"]) == int(ev.sum())
    assert pm.obtained.attrs["flag_meanings"].split() == [
        "evaluated",
        "proven_by_gap_bound",
        "filled_by_agreement",
    ]


def test_map_transitions_lie_on_the_published_boundaries(wilson_dirac_maps) -> None:
    pm, _ = wilson_dirac_maps
    ratio = pm.transition_mass.values / pm.transition_hopping.values
    assert pm.sizes["transition"] >= 4 * 9  # every row crosses the four boundaries
    np.testing.assert_allclose(ratio, np.round(ratio), atol=1e-3 / 5)  # tol: 1e-3 spacing
    assert set(np.round(ratio).astype(int)) == {-3, -1, 1, 3}
    assert (pm.transition_status.values == 0).all()
    assert (pm.transition_phase_low.values != pm.transition_phase_high.values).any()


def test_points_are_evaluated_without_the_proof_unless_near_the_floor(monkeypatch) -> None:
    """Under prove_gap="auto" points are evaluated without the gap proof (the map asks for the
    proofs it needs afterwards), except where the sweep's setting could make them undefined
    (smallest gap under 100 floors, and under the core's auto-proof threshold): there the point
    is evaluated again as the sweep does.

    Wilson–Dirac at t = 1 closes its gap at m = 1 and m = 3 (Qi, Hughes & Zhang, PRB 78,
    195424 (2008)); the direct gap is 2|m − m*| at the inverting TRIM, so m = 1.0001 lies ~2.5
    floors from the closing (floor 8e-5, 1e-5 of the bandwidth) and m = 3.05 ~1250 floors.
    """
    model = ts.models.wilson_dirac()
    mass = [0.6, 0.8, 0.98, 1.0001, 1.02, 1.5, 2.0, 2.5, 2.9, 3.05, 3.2]
    grid = {"mass": mass}
    sw = ts.sweep(model, grid, 2, progress=False)
    asked: list[tuple[str, list[float]]] = []
    run_points = sweep_module.run_points

    def recording(request, points):  # type: ignore[no-untyped-def]
        asked.append((request.sampling.prove_gap, [p["mass"] for p in points]))
        return run_points(request, points)

    monkeypatch.setattr(sweep_module, "run_points", recording)
    pm = ts.phase_map(model, grid, 2, progress=False, coarse_step=2)
    ev = pm.obtained.values == 0
    assert ev.tolist() == [i % 2 == 0 or i in (3, 9) for i in range(len(mass))]
    # only 1.0001 (next to the closing, near the floor) is evaluated again with the proof
    assert [(p, m) for p, m in asked if p != "never"] == [("auto", [1.0001])]
    assert sorted(m for p, ms in asked if p == "never" for m in ms) == sorted(
        np.asarray(mass)[ev].tolist()
    )
    for name in sw.data_vars:
        if name == "gap_proven":
            continue
        np.testing.assert_array_equal(pm[name].values[ev], sw[name].values[ev], err_msg=name)
    # next to the floor the proof is the sweep's (and succeeds: 2.5 floors, ~1e-4 proven)
    assert np.isfinite(sw.gap_proven.values[3])
    assert pm.gap_proven.values[3] == sw.gap_proven.values[3]
    # elsewhere a proven gap is one the map asked for: a lower bound of the measured gap
    asked_for = ev & np.isfinite(pm.gap_proven.values)
    assert np.all(pm.gap_proven.values[asked_for] <= sw.gap_direct.values[asked_for])
    assert np.isclose(pm.transition_mass.values, [1.0, 3.0], rtol=1e-5).all()


def test_no_more_proofs_once_a_batch_of_them_failed(monkeypatch) -> None:
    """When fewer than half of a batch of 8 or more proofs succeed, the map asks for no more."""
    model = ts.models.wilson_dirac()
    grid = {"mass": np.linspace(-4, 4, 129) + 0.013, "hopping": np.linspace(0.6, 1.4, 17)}
    core = import_module("toposweep._core")
    batches: list[int] = []

    def failing(core_model, coeffs, filling, targets, floors, **kw):  # type: ignore[no-untyped-def]
        # a stand-in for a model whose gaps are too small for a proof's budget
        batches.append(len(targets))
        n = len(targets)
        return np.full(n, np.nan), np.ones(n, np.int8), np.zeros(n, np.int64)

    monkeypatch.setattr(core, "prove_gaps", failing)
    pm = ts.phase_map(model, grid, 2, progress=False, coarse_step=16, transitions=False)
    assert batches and batches[-1] >= 8
    assert all(b < 8 for b in batches[:-1])
    monkeypatch.undo()
    sw = ts.sweep(model, grid, 2, progress=False)
    np.testing.assert_array_equal(pm.phase.values, sw.phase.values)  # (QHZ: -3, -1, 1, 3)
    assert (pm.obtained.values != 1).all()  # nothing proven without proven gaps


def test_the_proofs_the_map_asks_for_are_lower_bounds_of_the_gap() -> None:
    """Real proofs, no stand-in: every point is evaluated or proven, each proven bound lies
    below the gap NumPy finds on a dense κ mesh (an upper bound of the true minimum), and the
    indices are the sweep's. BHZ: Z2 changes at m/t = ±2 (Bernevig, Hughes & Zhang, Science
    314, 1757 (2006))."""
    model = ts.models.bhz()
    grid = {"mass": np.linspace(-3.5, 3.5, 57) + 0.01, "hopping": np.linspace(0.8, 1.2, 9)}
    pm = ts.phase_map(model, grid, 2, progress=False, proven_only=True, transitions=False)
    sw = ts.sweep(model, grid, 2, progress=False)
    how = pm.obtained.values
    assert (how == 2).sum() == 0 and (how == 1).sum() > 0.4 * how.size
    np.testing.assert_array_equal(pm.nu0.values, sw.nu0.values)
    proven = np.argwhere(how == 1)
    rng = np.random.default_rng(5)
    for i, j in proven[rng.choice(len(proven), 12, replace=False)]:
        params = {"mass": float(grid["mass"][i]), "hopping": float(grid["hopping"][j])}
        bound = float(pm.gap_bound.values[i, j])
        assert 0 < bound <= proven_gap_sampled(model, params) + 1e-12, params


def test_proof_path_with_a_stand_in_bound(monkeypatch) -> None:
    """With a proven gap the Weyl bound vouches for points; they all match the sweep."""
    model = ts.models.bhz()
    grid = {"mass": np.linspace(-3.5, 3.5, 57) + 0.01, "hopping": np.linspace(0.8, 1.2, 9)}
    sweep = ts.sweep(model, grid, 2, progress=False)
    monkeypatch.setattr(
        sweep_module, "run_points", with_proven_gap(sweep_module.run_points, model, 2)
    )
    pm = ts.phase_map(model, grid, 2, progress=False, proven_only=True, coarse_step=8)
    how = pm.obtained.values
    assert (how == 1).sum() > 0 and (how == 2).sum() == 0
    proven = how == 1
    np.testing.assert_array_equal(pm.nu0.values[proven], sweep.nu0.values[proven])
    bound = pm.gap_bound.values
    assert np.all(bound[proven] > 0) and np.isnan(bound[~proven]).all()
    # a lower bound: never above the gap the sweep measured there
    assert np.all(bound[proven] <= sweep.gap_direct.values[proven] + 1e-12)


def test_proven_only_without_proven_gaps_evaluates_everything_it_cannot_prove() -> None:
    model = ts.models.bhz()
    grid = {"mass": np.linspace(-3, 3, 13)}
    pm = ts.phase_map(model, grid, 2, progress=False, proven_only=True)
    sw = ts.sweep(model, grid, 2, progress=False)
    assert (pm.obtained.values != 2).all()
    if "gap_proven" not in sw:  # until the core proves gaps nothing can be proven
        assert (pm.obtained.values == 0).all()
        for name in sw.data_vars:  # and every point is the sweep's, bit for bit
            np.testing.assert_array_equal(pm[name].values, sw[name].values, err_msg=name)


def test_file_equals_memory_and_a_killed_run_resumes_to_the_same(tmp_path: Path) -> None:
    model = ts.models.wilson_dirac()
    grid = {"mass": np.linspace(-4, 4, 65) + 0.013, "hopping": np.linspace(0.6, 1.4, 17)}
    options = {"progress": False, "chunk_size": 8}
    mem = ts.phase_map(model, grid, 2, **options)
    full = ts.phase_map(model, grid, 2, out=tmp_path / "full.nc", **options)
    same(mem, full.load())
    with pytest.raises(StoreError, match="different run"):
        ts.phase_map(model, grid, 2, out=tmp_path / "full.nc", resume=True, coarse_step=2)

    out = tmp_path / "killed.nc"
    script = textwrap.dedent(
        """
        import sys, numpy as np, toposweep as ts
        grid = {"mass": np.linspace(-4, 4, 65) + 0.013, "hopping": np.linspace(0.6, 1.4, 17)}
        ts.phase_map(ts.models.wilson_dirac(), grid, 2, out=sys.argv[1], progress=False,
                     chunk_size=8)
        """
    )
    journal = journal_path(out)
    proc = subprocess.Popen([sys.executable, "-c", script, str(out)])
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline and proc.poll() is None:
            if journal.is_dir() and len(list(journal.glob("chunk-*.npz"))) >= 6:
                break
            time.sleep(0.01)
        assert proc.poll() is None, "the run ended before it could be killed"
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.wait()
    assert not out.exists()
    kept = sum(
        int(p.name.split("-")[2].removesuffix(".npz")) - int(p.name.split("-")[1])
        for p in journal.glob("chunk-*.npz")
    )
    counted: list[int] = []
    run_points = sweep_module.run_points

    def counting(request, points):  # type: ignore[no-untyped-def]
        counted.append(len(points))
        return run_points(request, points)

    sweep_module.run_points = counting
    try:
        resumed = ts.phase_map(model, grid, 2, out=out, resume=True, **options)
    finally:
        sweep_module.run_points = run_points
    assert sum(counted) == int(full.attrs["points_evaluated"]) - kept
    same(full.load(), resumed.load())
    assert not journal.exists()


def test_bad_options_are_refused() -> None:
    m = ts.models.bhz()
    with pytest.raises(ParameterError, match="coarse_step"):
        ts.phase_map(m, {"mass": [0.0, 1.0]}, 2, coarse_step=0)
    with pytest.raises(ParameterError, match="transition_tol"):
        ts.phase_map(m, {"mass": [0.0, 1.0]}, 2, transition_tol=0.7)
    with pytest.raises(ParameterError, match="proven_only"):
        ts.phase_map(m, {"mass": [0.0, 1.0]}, 2, proven_only="yes")
    wd = ts.models.wilson_dirac()
    grid = {k: [0.5, 1.0] for k in ("mass", "hopping")}
    with pytest.raises(ParameterError, match="1 to 4"):
        ts.phase_map(wd, {**grid, "a": [1.0], "b": [2.0], "c": [3.0]}, 2, coefficients=lambda p: {})


def test_symmetry_breaks_of_a_grid_match_the_per_point_check() -> None:
    """The map's grid-wide check (coefficient rows) finds what the sweep's per-point one does.

    Kane–Mele: the staggered sublattice potential breaks inversion, which exchanges the two
    sublattices, and every term keeps time reversal (Kane & Mele, PRL 95, 146802 (2005)); an
    inversion matrix passed to the call must hold at every point.
    """
    phase_map_module = import_module("toposweep.maps.grid_terms")
    from toposweep.evaluation import _symmetry_breaks, prepare_request
    from toposweep.sweep_plan import make_plan

    model = ts.models.kane_mele()
    grid = {"staggered": np.linspace(0.0, 0.8, 9), "rashba": np.linspace(0.0, 0.4, 5)}
    req = prepare_request(model, 2, inversion=None, sampling=ts.Sampling())
    plan = make_plan(req, grid, params=None, coefficients=None)
    tr, p = phase_map_module.symmetry_breaks_everywhere(plan)
    want_tr, want_p, _ = _symmetry_breaks(req, plan.points(0, plan.size))
    np.testing.assert_array_equal(tr, want_tr)
    np.testing.assert_array_equal(p, want_p)
    assert not tr.any() and p.reshape(9, 5)[1:].all()  # wherever the staggered potential is on
    assert not p[0]  # (the point without staggered potential or Rashba coupling)
    with pytest.raises(ts.errors.SymmetryError, match="inversion"):
        ts.phase_map(model, grid, 2, inversion=model.inversion, progress=False)
