"""Fixed phase colours: one per set of indices, apart under colour-blind vision, kept by shading.

The colour-blind check is outside the project: colorspacious simulates protan, deutan and
tritan vision with the model of Machado, Oliveira & Fernandes, IEEE Trans. Vis. Comput. Graph.
15, 1291 (2009), and measures colour differences in CAM02-UCS (Luo, Cui & Li, Color Res. Appl.
31, 320 (2006)).
"""

from __future__ import annotations

import colorsys
import itertools
import json

import numpy as np
import pytest
import toposweep as ts
import xarray as xr
from colorspacious import cspace_convert
from matplotlib.colors import to_rgb
from toposweep.phase_style import (
    METAL_HATCH,
    PHASE_COLOURS,
    SHADE_FLOOR,
    SHADE_FROM,
    UNDEFINED_COLOUR,
    phase_colour,
)
from toposweep.plotting import phase_colours, plot_line, plot_phase_map

ALL_3D = list(itertools.product((0, 1), repeat=4))


def test_every_3d_phase_has_its_own_colour() -> None:
    colours = [PHASE_COLOURS[k] for k in ALL_3D]
    assert len(set(colours)) == 16 and UNDEFINED_COLOUR not in colours
    # 2D phases share the colours of the 3D phases with the same meaning
    assert PHASE_COLOURS[(0,)] == PHASE_COLOURS[(0, 0, 0, 0)]
    assert PHASE_COLOURS[(1,)] == PHASE_COLOURS[(1, 0, 0, 0)]


def test_colours_stay_apart_under_colour_blind_vision() -> None:
    rgb = np.array([to_rgb(c) for c in [*(PHASE_COLOURS[k] for k in ALL_3D), UNDEFINED_COLOUR]])
    views = [cspace_convert(rgb, "sRGB1", "CAM02-UCS")]
    for kind in ("protanomaly", "deuteranomaly", "tritanomaly"):
        cvd = {"name": "sRGB1+CVD", "cvd_type": kind, "severity": 100}
        seen = np.clip(cspace_convert(rgb, cvd, "sRGB1"), 0, 1)
        views.append(cspace_convert(seen, "sRGB1", "CAM02-UCS"))
    for view in views:
        dist = np.linalg.norm(view[:, None] - view[None], axis=-1)
        np.fill_diagonal(dist, np.inf)
        assert dist.min() >= 8.0  # ΔE ≈ 8 is plainly visible side by side


def synthetic(phases: list[tuple[int, int, tuple[int, int, int]]], gap: np.ndarray) -> xr.Dataset:
    """A result over (b, a) with the given (phase, nu0, nu) per column and gaps."""
    ny, nx = gap.shape
    phase = np.array([[p[0] for p in phases]] * ny, np.int8)
    nu0 = np.array([[p[1] for p in phases]] * ny, np.int8)
    nu = np.array([[p[2] for p in phases]] * ny, np.int8)
    return xr.Dataset(
        {
            "phase": (("b", "a"), phase),
            "nu0": (("b", "a"), nu0),
            "nu": (("b", "a", "axis"), nu),
            "gap_direct": (("b", "a"), gap),
            "gap_indirect": (("b", "a"), gap),
        },
        coords={"a": np.arange(nx, dtype=float), "b": np.arange(ny, dtype=float)},
        attrs={"model": json.dumps({"name": "synthetic"})},
    )


def test_colour_of_a_phase_does_not_depend_on_the_map() -> None:
    a = synthetic([(2, 1, (0, 0, 1))] * 3 + [(2, 1, (0, 0, 0))], np.ones((2, 4)))
    b = synthetic([(2, 1, (0, 0, 0))] * 3 + [(2, 1, (0, 0, 1))], np.ones((2, 4)))
    assert phase_colours(a) == phase_colours(b)
    assert phase_colours(a)["strong TI (1;001)"] != phase_colours(a)["strong TI (1;000)"]


def test_shading_keeps_colours_exact_away_from_closings_and_hue_everywhere() -> None:
    kinds = [(2, 1, (0, 0, 0)), (1, 0, (1, 1, 1)), (0, 0, (0, 0, 0)), (2, 1, (1, 0, 1))]
    gap = np.tile(np.linspace(0.0, 1.0, 12)[:, None], (1, 4))  # rows from closing to open
    ds = synthetic(kinds, gap)
    fig = plot_phase_map(ds, "a", "b")
    rgb = np.asarray(fig.axes[0].collections[0].get_array())
    scale = float(np.nanpercentile(gap, 90))
    for col, (ph, n0, nu) in enumerate(kinds):
        want = np.array(to_rgb(phase_colour(ph, n0, nu)))
        for row in range(gap.shape[0]):
            got = rgb[row, col]
            if gap[row, col] >= SHADE_FROM * scale:
                np.testing.assert_allclose(got, want, atol=1e-12)
            else:  # darker, never below the floor, same hue and saturation
                ratio = got.max() / want.max()
                assert SHADE_FLOOR - 1e-12 <= ratio < 1
                h0, s0, _ = colorsys.rgb_to_hsv(*want)
                h1, s1, _ = colorsys.rgb_to_hsv(*got)
                assert (h1, s1) == pytest.approx((h0, s0), abs=1e-9)


def test_metals_share_their_bands_colour_and_are_hatched() -> None:
    kinds = [(2, 1, (0, 0, 0))] * 3 + [(12, 1, (0, 0, 0))] * 3
    ds = synthetic(kinds, np.ones((6, 6)))
    fig = plot_phase_map(ds, "a", "b")
    ax = fig.axes[0]
    rgb = np.asarray(ax.collections[0].get_array())
    np.testing.assert_allclose(rgb[0, 5], rgb[0, 0])
    hatched = [c for c in ax.collections if c.get_hatch() == METAL_HATCH]
    assert len(hatched) == 1
    labels = [t.get_text() for t in fig.axes[1].get_legend().get_texts()]
    assert labels == ["strong TI (1;000)", "hatched: metal (bands' indices)"]


def test_legend_lists_only_the_phases_present_and_regions_are_labelled() -> None:
    # cubic Wilson-Dirac model at t = 1: (1;000) for -3 < m < -1, (0;111) for |m| < 1,
    # (1;111) for 1 < m < 3, trivial for |m| > 3 (parity counting of Fu & Kane, Phys. Rev. B
    # 76, 045302 (2007) at the eight TRIMs, where H = (m + t Σ cos) Γ_4; tests/test_sweep.py)
    ds = ts.sweep(
        ts.models.wilson_dirac(), {"mass": np.linspace(-4.0, 4.0, 33), "hopping": [0.9, 1.0,
        1.1, 1.2, 1.3]}, 2, progress=False, loop_points=12, lines=7,
    )  # fmt: skip
    fig = plot_phase_map(ds, "mass", "hopping")
    legend = [t.get_text() for t in fig.axes[1].get_legend().get_texts()]
    present = set(phase_colours(ds))
    assert set(legend) == present
    assert present == {
        "strong TI (1;000)",
        "weak TI (0;111)",
        "strong TI (1;111)",
        "trivial insulator (0;000)",
        "undefined",
    }
    assert "strong TI (1;001)" not in legend
    texts = {t.get_text() for t in fig.axes[0].texts}
    assert {"(1;000)", "(0;111)", "(1;111)"} <= texts
    line = plot_line(ds, "mass", at={"hopping": 1.0})
    assert "strong TI (1;000)" in [t.get_text() for t in line.axes[1].get_legend().get_texts()]


def test_two_dimensional_phases_use_the_3d_meanings() -> None:
    ds = ts.sweep(ts.models.bhz(), {"mass": [-3.0, -1.0]}, 2, progress=False, loop_points=12)
    assert phase_colours(ds) == {
        "trivial insulator (Z2 = 0)": PHASE_COLOURS[(0, 0, 0, 0)],
        "Z2-odd 2D insulator (Z2 = 1)": PHASE_COLOURS[(1, 0, 0, 0)],
    }
