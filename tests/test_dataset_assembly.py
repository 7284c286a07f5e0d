"""The fast Dataset assembly equals xarray's public constructor (reference library check)."""

from __future__ import annotations

import numpy as np
import pytest
import toposweep as ts
import toposweep.results.dataset as dataset_module
import xarray as xr
from toposweep.results.dataset_assembly import assemble


class _KeepsNothing(dict):
    def __setitem__(self, key, value) -> None:
        pass


def _public(monkeypatch, build):
    """Run ``build`` with assembly through ``xr.Dataset(...)`` only (no layout copied from an
    earlier result)."""
    monkeypatch.setattr(
        dataset_module,
        "assemble",
        lambda data, coords, attrs: xr.Dataset(data, coords=coords, attrs=attrs),
    )
    monkeypatch.setattr(dataset_module, "_TEMPLATES", _KeepsNothing())
    try:
        return build()
    finally:
        monkeypatch.undo()


def _same(fast: xr.Dataset, slow: xr.Dataset) -> None:
    fast, slow = fast.drop_attrs(deep=False), slow.drop_attrs(deep=False)  # 'created' differs
    xr.testing.assert_identical(fast, slow)
    assert list(fast.data_vars) == list(slow.data_vars)
    assert list(fast.coords) == list(slow.coords)
    assert set(fast.xindexes) == set(slow.xindexes)
    for name in fast.variables:
        assert type(fast.variables[name]) is type(slow.variables[name]), name
        assert fast[name].dtype == slow[name].dtype, name


CASES = [
    ("wilson_dirac", 2, {"mass": -2.0}, {}),
    ("kane_mele", 2, {"staggered": 0.3}, {"method": "both"}),
    ("bhz", 2, {"mass": -1.0}, {}),
]


@pytest.mark.parametrize(("name", "filling", "params", "opts"), CASES)
def test_single_point_matches_public_constructor(monkeypatch, name, filling, params, opts):
    model = getattr(ts.models, name)()
    kw = {"loop_points": 12, "lines": 7, "gap_starts": 0, "certify": False, **opts}
    fast = ts.invariants(model, filling, params, **kw)
    slow = _public(monkeypatch, lambda: ts.invariants(model, filling, params, **kw))
    _same(fast, slow)


@pytest.mark.parametrize(("name", "filling", "params", "opts"), CASES)
def test_next_point_copied_from_the_last_layout_matches_public_constructor(
    monkeypatch, name, filling, params, opts
):
    """A second one-point result of the same model and options is copied from the first one's
    layout (dataset_assembly.renewed): it equals the public constructor's for its own
    parameters, and changing one result in place leaves the next untouched."""
    model = getattr(ts.models, name)()
    kw = {"loop_points": 12, "lines": 7, "gap_starts": 0, "certify": False, **opts}
    other = {k: v + 0.25 for k, v in params.items()}
    first = ts.invariants(model, filling, params, **kw)
    first.attrs["title"] = "changed"
    first.nu0.attrs["long_name"] = "changed"
    for name_ in first.coords:
        if first[name_].values.flags.writeable:
            first[name_].values[...] = 7
    copied: list[bool] = []
    renewed = dataset_module.renewed

    def spy(template, data, attrs):
        # (new arrays: a result copied from the layout; none: a layout kept for the next call)
        copied.append(bool(data))
        return renewed(template, data, attrs)

    monkeypatch.setattr(dataset_module, "renewed", spy)
    second = ts.invariants(model, filling, other, **kw)
    monkeypatch.undo()
    assert copied == [True], "the second result was not copied from the first one's layout"
    slow = _public(monkeypatch, lambda: ts.invariants(model, filling, other, **kw))
    _same(second, slow)
    assert second.attrs["title"] == slow.attrs["title"] != "changed"


@pytest.mark.parametrize("slots_only", [True, False])
def test_variables_filled_slot_by_slot_equal_constructed_ones(monkeypatch, slots_only):
    """Both ways of making a Variable (slots filled directly where this xarray allows it, the
    constructor otherwise) give Datasets identical to the public constructor's."""
    import toposweep.results.dataset_assembly as assembly

    if slots_only:
        assert assembly._SLOTS_ONLY  # the xarray we test with takes the direct path
    monkeypatch.setattr(assembly, "_SLOTS_ONLY", slots_only)
    model = ts.models.wilson_dirac()
    kw = {"loop_points": 12, "lines": 7, "gap_starts": 0, "certify": False}
    fast = ts.invariants(model, 2, {"mass": -2.0}, **kw)
    slow = _public(monkeypatch, lambda: ts.invariants(model, 2, {"mass": -2.0}, **kw))
    _same(fast, slow)
    fast.axis.attrs["extra"] = 1  # own attrs, also on the reused index coordinates
    assert "extra" not in ts.invariants(model, 2, {"mass": -2.0}, **kw).axis.attrs


def test_sweep_matches_public_constructor(monkeypatch):
    model = ts.models.wilson_dirac()
    grid = {"mass": np.linspace(-3.5, 3.5, 4), "hopping": [0.5, 1.0]}
    kw = {"loop_points": 12, "lines": 7, "gap_starts": 0, "certify": False, "progress": False}
    fast = ts.sweep(model, grid, 2, **kw)
    slow = _public(monkeypatch, lambda: ts.sweep(model, grid, 2, **kw))
    _same(fast, slow)
    assert fast.indexes["mass"].equals(slow.indexes["mass"])


def test_inconsistent_sizes_reach_the_public_error():
    with pytest.raises(ValueError, match="conflicting sizes|size"):
        assemble({"a": (("x",), np.zeros(2), {}), "b": (("x",), np.zeros(3), {})}, {}, {})


def test_unusual_coordinate_layout_follows_the_public_rules():
    # a coordinate named like a dimension but lying along another one: no default index
    data = {"a": (("x",), np.zeros(2), {})}
    coords = {"x": (("y",), np.arange(3.0), {})}
    got = assemble(data, coords, {})
    xr.testing.assert_identical(got, xr.Dataset(data, coords=coords))
    assert "x" not in got.xindexes


def test_results_do_not_share_coordinate_attributes():
    """Reused indexes must not tie results together: editing one leaves the next untouched."""
    model = ts.models.wilson_dirac()
    kw = {"loop_points": 12, "lines": 7, "gap_starts": 0, "certify": False}
    first = ts.invariants(model, 2, {"mass": -2.0}, **kw)
    first.axis.attrs["long_name"] = "changed by the user"
    first.axis.attrs["extra"] = 1
    second = ts.invariants(model, 2, {"mass": -2.0}, **kw)
    assert second.axis.attrs["long_name"] == "reciprocal lattice axis"
    assert "extra" not in second.axis.attrs


def _phase_by_hand(nu0: int, nu: tuple[int, ...] | None) -> int:
    # PHASES, read off one by one: undefined; strong; weak (3D, some weak index odd); 2D odd
    if nu0 < 0:
        return -1
    if nu is None:
        return 3 if nu0 == 1 else 0
    if nu0 == 1:
        return 2
    return 1 if 1 in nu else 0


def _agree_by_hand(a: tuple, b: tuple) -> int:
    if a[0] < 0 or b[0] < 0:
        return -1
    return int(a == b)


def test_derived_variables_follow_their_definitions():
    """phase, parity_agrees and methods_agree (derived by the core) against their definitions
    written out case by case, over sweeps that cross every phase of the Wilson–Dirac and BHZ
    models, gap closings (undefined points) included. (The core's unit tests run the same
    definitions over every -1/0/1 combination.)"""
    seen = set()
    for model, masses in (
        (ts.models.wilson_dirac(), np.linspace(-7.0, 7.0, 29)),
        (ts.models.bhz(), np.linspace(-5.0, 5.0, 21)),
    ):
        ds = ts.sweep(
            model, {"mass": masses}, 2, method="both", progress=False, loop_points=16, lines=9
        )
        three_d = model.dim == 3
        for i in range(ds.sizes["mass"]):
            p = ds.isel(mass=i)
            nu = tuple(p.nu.values.tolist()) if three_d else None
            headline = (int(p.nu0), nu)
            parity = (int(p.nu0_parity), tuple(p.nu_parity.values.tolist()) if three_d else None)
            lattice = (int(p.nu0_lattice), tuple(p.nu_lattice.values.tolist()) if three_d else None)
            assert int(p.phase) == _phase_by_hand(*headline)
            assert int(p.parity_agrees) == _agree_by_hand(parity, headline)
            assert int(p.methods_agree) == _agree_by_hand(headline, lattice)
            seen.add(int(p.phase))
    assert seen == {-1, 0, 1, 2, 3}  # every phase code occurs
