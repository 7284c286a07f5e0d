"""The centre flow is the flow the index came from (issue 19, item 4).

Outside checks: the centres of every line are recomputed with plain NumPy (numpy.linalg.eigh,
svd and eigvals in benches/numpy_baseline.py, the reference implementation of the Wilson loop
of Yu, Qi, Bernevig, Fang & Dai, Phys. Rev. B 84, 075119 (2011)); the Z2 of each plane is the
published one: Wilson–Dirac (1;000) at m = −2, (0;111) at |m| < 1 (Fu & Kane, Phys. Rev. B 76,
045302 (2007) parity counting), BHZ Z2 = 1 for 0 < |m/t| < 2 (Qi, Wu & Zhang, PRB 74, 085308
(2006)).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts
from toposweep.plotting import plot_flow

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benches"))
from numpy_baseline import BlochTerms, GapStats, wilson_centres  # noqa: E402


def numpy_centres(model, params, flow, refine: int = 1) -> np.ndarray:
    """NumPy Wilson-loop centres of the flow's lines with ``refine`` × its loop points."""
    base = np.zeros(model.dim)
    if "plane_axis" in flow.attrs:
        base[flow.attrs["plane_axis"] - 1] = flow.attrs["cut"]
    return wilson_centres(
        BlochTerms.from_model(model, model.resolve(params)), base,
        flow.attrs["loop_axis"] - 1, flow.attrs["pump_axis"] - 1, flow.pump.values,
        refine * flow.attrs["loop_points"], flow.sizes["band"], GapStats(),
    )  # fmt: skip


def assert_numpy_centres(model, params, flow) -> None:
    """Each line equals NumPy's even loop (to 1e-8), or — where the loop was resolved to the
    gap (extra κ points where the occupied states turn fast, docs/near-closings.md) — is
    closer to NumPy's loop of 16 × the points than the even loop is, and within 2e-3 of it.
    (The resolution bounds each step's turn, sin θ ≤ 1/2, which fixes the topology; the
    centres' accuracy follows from it only roughly: 1.2e-3 of a cell at BHZ m = −1.9.)"""
    got = np.sort(np.mod(flow.centre.values, 1.0), axis=1)
    even = numpy_centres(model, params, flow)
    fine = numpy_centres(model, params, flow, refine=16)
    for line in range(got.shape[0]):
        if circular_gap(got[line : line + 1], even[line : line + 1]) < 1e-8:
            continue
        to_fine = circular_gap(got[line : line + 1], fine[line : line + 1])
        assert to_fine < 2e-3, (line, to_fine)
        assert to_fine < circular_gap(even[line : line + 1], fine[line : line + 1]), line


def circular_gap(a: np.ndarray, b: np.ndarray) -> float:
    d = np.abs(np.sort(np.mod(a, 1.0), axis=1) - b)
    return float(np.minimum(d, 1 - d).max())


@pytest.mark.parametrize(
    ("mass", "z2_planes"),
    [(-2.0, [1, 0, 1, 0, 1, 0]), (-0.5, [1, 1, 1, 1, 1, 1]), (0.5, [1, 1, 1, 1, 1, 1])],
)
def test_wilson_dirac_flows_carry_the_point_s_z2_and_numpy_centres(mass, z2_planes) -> None:
    model = ts.models.wilson_dirac()
    point = ts.invariants(model, 2, {"mass": mass})
    seen_inserted = 0
    for k, (axis, cut) in enumerate((a, c) for a in (1, 2, 3) for c in (0.0, 0.5)):
        flow = ts.centre_flow(model, 2, {"mass": mass}, axis=axis, cut=cut)
        assert int(flow.z2) == int(point.z2_plane.values[axis - 1, k % 2]) == z2_planes[k]
        assert flow.attrs["lines_z2"] == int(flow.z2)
        assert_numpy_centres(model, {"mass": mass}, flow)
        # every initial line is there, the inserted ones lie between them
        pump = flow.pump.values
        assert np.all(np.diff(pump) > 0) and pump[0] == 0.0 and pump[-1] == 0.5
        assert int((~flow.inserted).sum()) == 21
        seen_inserted += int(flow.inserted.sum())
    if abs(mass) < 1:
        assert seen_inserted > 0  # the flow winds: lines were inserted where it moved fast


def test_2d_flow_with_inserted_lines_and_the_certificate() -> None:
    model = ts.models.bhz()
    flow = ts.centre_flow(model, 2, {"mass": -1.9})
    assert int(flow.z2) == 1 and int(flow.undefined_reason) == 0
    assert flow.inserted.any()
    assert_numpy_centres(model, {"mass": -1.9}, flow)
    trivial = ts.centre_flow(model, 2, {"mass": -2.5}, loop_points=16, lines=9)
    assert int(trivial.z2) == 0 and int((~trivial.inserted).sum()) == 9


def test_undefined_point_keeps_its_reason() -> None:
    # m = -1, t = 1: the Wilson-Dirac gap closes at a TRIM (m + t Σ cos 2πn_i = 0)
    flow = ts.centre_flow(ts.models.wilson_dirac(), 2, {"mass": -1.0})
    assert int(flow.z2) == -1 and int(flow.undefined_reason) != 0


def test_plot_flow_needs_neither_z2_nor_title() -> None:
    model = ts.models.wilson_dirac()
    flows = [ts.centre_flow(model, 2, {"mass": -0.5}, axis=a, cut=c)
             for a in (1, 2, 3) for c in (0.0, 0.5)]  # fmt: skip
    fig = plot_flow(flows)
    titles = [ax.get_title() for ax in fig.axes]
    assert "κ1 = 0: Z2 = 1" in titles and "κ3 = 0.5: Z2 = 1" in titles
    # the point by its parameters' long names (the model's parameter_info)
    assert "Dirac mass m = -0.5" in fig.get_suptitle() and "centre flow" in fig.get_suptitle()
    labels = fig.axes[0].get_legend_handles_labels()[1]
    assert "inserted line" in labels
    # the legend is the figure's, under the panels: none inside a panel hides a centre
    assert all(ax.get_legend() is None for ax in fig.axes)
    assert [t.get_text() for t in fig.legends[0].get_texts()] == ["initial line", "inserted line"]


def test_wcc_flow_is_a_deprecated_alias_with_even_lines() -> None:
    with pytest.warns(DeprecationWarning, match="centre_flow"):
        old = ts.wcc_flow(ts.models.bhz(), 2, {"mass": -1.0}, pump_points=11)
    new = ts.centre_flow(ts.models.bhz(), 2, {"mass": -1.0}, pump_points=11)
    np.testing.assert_array_equal(old.centre.values, new.centre.values)
    assert old.sizes["pump"] == 11 and not old.inserted.any() and int(old.z2) == 1


def test_a_flow_without_time_reversal_has_no_z2() -> None:
    m = ts.models.bhz()
    bare = ts.TightBinding(2, 4)
    for r, t, term in m.hoppings():
        bare.add(r, t, term)
    flow = ts.centre_flow(bare, 2, {"mass": -1.0, "hopping": 1.0})
    assert int(flow.z2) == -1 and "undefined_reason" not in flow


def test_flow_figure_of_a_mapped_grid_names_the_grid_point_asked_for():
    """With ``coefficients=`` the title gives the grid point (``--at``'s names), then the terms.

    BHZ at mass = 0.5 × level = −1 is Z2-odd (Qi, Wu & Zhang 2006: 0 < |m/t| < 2).
    """
    from toposweep.flowplot import flow_figure

    ds = ts.sweep(
        ts.models.bhz(), {"level": [-2.0, 3.0]}, filling=2, progress=False,
        coefficients=lambda p: {"mass": 0.5 * p["level"], "hopping": 1.0},
    )  # fmt: skip
    fig = flow_figure(ds, {"level": -2.0})
    title = fig.get_suptitle()
    assert "level = -2\n" in title and "mass = -1" in title
    assert fig.axes[0].get_title() == "2D model: Z2 = 1"
