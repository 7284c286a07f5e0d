"""What a reader needs from a phase-map figure: markers seen on every phase colour, a legend
that hides no point, titles in the parameters' own words, metals hatched cell by cell.

Contrast is measured as the W3C defines it for graphical objects: relative luminance of sRGB
colours and the ratio (L1 + 0.05) / (L2 + 0.05), at least 3:1 against adjacent colours (Web
Content Accessibility Guidelines (WCAG) 2.1, W3C Recommendation 2018, success criterion 1.4.11
"Non-text Contrast" and the definitions of "relative luminance" and "contrast ratio").
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import toposweep as ts
import xarray as xr
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import PatchCollection
from matplotlib.colors import to_rgb
from toposweep.phase_style import METAL_HATCH, PHASE_COLOURS
from toposweep.plotting import plot_line, plot_phase_map


def luminance(colour: str | tuple[float, ...]) -> float:
    """WCAG 2.1 relative luminance of an sRGB colour."""
    c = np.array(to_rgb(colour))
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    return float(lin @ [0.2126, 0.7152, 0.0722])


def contrast(a: str | tuple[float, ...], b: str | tuple[float, ...]) -> float:
    la, lb = sorted((luminance(a), luminance(b)))
    return (lb + 0.05) / (la + 0.05)


def test_contrast_formula_matches_the_published_extremes() -> None:
    # WCAG 2.1: black on white is 21:1, a colour against itself 1:1
    assert contrast("black", "white") == pytest.approx(21.0)
    assert contrast("#882255", "#882255") == pytest.approx(1.0)


@pytest.fixture(scope="module")
def bhz_map() -> xr.Dataset:
    # BHZ: Z2-odd for 0 < |m| < 2|t| (Bernevig, Hughes & Zhang, Science 314, 1757 (2006)),
    # so the map has boundaries, hence transitions, and evaluated points on both sides
    return ts.phase_map(
        ts.models.bhz(),
        {"mass": np.linspace(-3.0, 3.0, 25), "hopping": np.linspace(0.6, 1.4, 9)},
        filling=2,
        progress=False,
    )


def _lines(fig: object, label: str) -> list:
    ax = fig.axes[0]  # type: ignore[attr-defined]
    return [ln for ln in ax.get_lines() if ln.get_label() == label]


@pytest.mark.parametrize("label", ["evaluated point", "gap closes"])
def test_markers_stand_out_on_every_phase_colour(bhz_map: xr.Dataset, label: str) -> None:
    fig = plot_phase_map(bhz_map, "mass", "hopping", show_evaluated=True)
    (line,) = _lines(fig, label)
    assert line.get_alpha() in (None, 1.0)
    face, edge = line.get_markerfacecolor(), line.get_markeredgecolor()
    for colour in {*PHASE_COLOURS.values(), "#FFFFFF"}:
        # the ring or the dot, whichever differs more, must reach 3:1 against the phase colour
        assert max(contrast(face, colour), contrast(edge, colour)) >= 3.0, colour
    # and the two kinds of marker are told apart: a light dot and a dark one
    assert contrast(face, "black" if label == "evaluated point" else "white") >= 3.0


def test_legend_covers_no_part_of_the_map(bhz_map: xr.Dataset) -> None:
    fig = plot_phase_map(bhz_map, "mass", "hopping", show_evaluated=True)
    renderer = FigureCanvasAgg(fig).get_renderer()
    fig.draw(renderer)
    ax = fig.axes[0]
    box = ax.get_window_extent(renderer)
    legends = [a.get_legend() for a in fig.axes if a.get_legend() is not None]
    assert legends and ax.get_legend() is None
    for legend in legends:
        assert not legend.get_window_extent(renderer).overlaps(box)
    texts = [t.get_text() for lg in legends for t in lg.get_texts()]
    assert "evaluated point" in texts and "gap closes" in texts


def test_titles_name_fixed_parameters_by_long_name_and_units() -> None:
    z = xr.DataArray([0.5, 0.75], dims="hopping",
                     attrs={"long_name": "hopping amplitude", "units": "eV"})  # fmt: skip
    ds = ts.sweep(ts.models.bhz(), {"mass": [-1.0, 1.0, 3.0], "hopping": z}, 2, progress=False)
    title = plot_line(ds, "mass", at={"hopping": 0.75}).axes[0].get_title()
    assert "hopping amplitude = 0.75 eV" in title and "hopping = " not in title
    # a 3-parameter map drawn at a fixed third parameter; dimensionless units are left out
    third = xr.DataArray([0.0, 0.2], dims="shift", attrs={"long_name": "mass shift", "units": "1"})
    ds3 = ts.sweep(ts.models.bhz(), {"mass": [-1.0, 1.0, 3.0], "hopping": z, "shift": third}, 2,
                   coefficients=lambda p: {"mass": p["mass"] + p["shift"], "hopping": p["hopping"]},
                   progress=False)  # fmt: skip
    title = plot_phase_map(ds3, "mass", "hopping", at={"shift": 0.2}).axes[0].get_title()
    assert title.endswith("mass shift = 0.2")


def test_long_titles_are_broken_between_parameters() -> None:
    ds = ts.sweep(ts.models.df_lattice(), {"f_level": [-1.0, 0.0]}, 2, progress=False)
    title = plot_line(ds, "f_level").axes[0].get_title()
    assert max(len(line) for line in title.splitlines()) <= 80
    assert "d-band hopping t_d = 0.25 eV" in title  # (the model's own long name and units)


def synthetic_metal() -> xr.Dataset:
    metal = np.zeros((4, 5), bool)
    metal[3, :] = True  # the whole top row (on the map's edge)
    metal[1, 2] = True  # one cell inside
    phase = np.where(metal, 12, 2).astype(np.int8)
    return xr.Dataset(
        {
            "phase": (("b", "a"), phase),
            "nu0": (("b", "a"), np.ones((4, 5), np.int8)),
            "nu": (("b", "a", "axis"), np.zeros((4, 5, 3), np.int8)),
            "gap_direct": (("b", "a"), np.ones((4, 5))),
            "gap_indirect": (("b", "a"), np.where(metal, -0.1, 1.0)),
        },
        coords={"a": np.arange(5.0), "b": np.arange(4.0) * 0.5},
        attrs={"model": json.dumps({"name": "synthetic"})},
    )


def test_metals_are_hatched_over_exactly_their_cells() -> None:
    ds = synthetic_metal()
    fig = plot_phase_map(ds, "a", "b")
    ax = fig.axes[0]
    hatched = [c for c in ax.collections if isinstance(c, PatchCollection) and c.get_hatch()]
    assert hatched and all(c.get_hatch() == METAL_HATCH for c in hatched)
    paths = [p for c in hatched for p in c.get_paths()]
    metal = ds.phase.values >= 10
    for row, b in enumerate(ds.b.values):
        for col, a in enumerate(ds.a.values):
            # the cell's centre and points a little inside its corners
            probes = [(a + da, b + db) for da in (0, -0.45, 0.45) for db in (0, -0.2, 0.2)]
            for x, y in probes:
                inside = any(p.contains_point((x, y)) for p in paths)
                assert inside == metal[row, col], (a, b, x, y)


def test_a_phase_map_cut_shows_measured_gaps_only_and_its_transitions() -> None:
    # BHZ at t = 1 changes its Z2 at m = ±2 (Bernevig, Hughes & Zhang 2006; at m = 0 the gap
    # closes between two Z2-odd regions, which the map does not search)
    ds = ts.phase_map(ts.models.bhz(), {"mass": np.linspace(-3.0, 3.0, 49)}, 2, progress=False)
    fig = plot_line(ds, "mass")
    bottom = fig.axes[1]
    (direct,) = [ln for ln in bottom.get_lines() if ln.get_label() == "direct gap (evaluated)"]
    assert direct.get_linestyle() == "None"  # dots: no line joins points the map skipped
    assert len(direct.get_xdata()) == int((ds.obtained.values == 0).sum())
    marks = sorted({float(ln.get_xdata()[0]) for ln in bottom.get_lines()
                    if ln.get_linestyle() == ":"})  # fmt: skip
    np.testing.assert_allclose(marks, [-2.0, 2.0], atol=1e-6)


def test_the_demos_cut_is_titled_by_the_quasiparticle_factor() -> None:
    from toposweep.demo import cut_at_fixed_weight

    title = plot_line(cut_at_fixed_weight(ts.models.df_lattice()), "f_level").axes[0].get_title()
    assert title.endswith("f quasiparticle factor z = 0.6") and "weight" not in title


def test_other_transitions_are_named_by_their_status(bhz_map: xr.Dataset) -> None:
    ds = bhz_map.copy(deep=True)
    status = ds.transition_status.values.copy()
    status[0] = 5  # as if the first were the edge of a metal
    ds["transition_status"] = ("transition", status, {**bhz_map.transition_status.attrs,
        "flag_values": np.arange(6, dtype=np.int8),
        "flag_meanings": "gap_closes_at_a_point b c d e bands_overlap_begins"})  # fmt: skip
    fig = plot_phase_map(ds, "mass", "hopping")
    texts = [t.get_text() for t in fig.axes[1].get_legend().get_texts()]
    assert "bands overlap begins" in texts and "gap closes" in texts
    (edge,) = _lines(fig, "bands overlap begins")
    assert len(edge.get_xdata()) == 1
