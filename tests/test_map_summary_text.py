"""The summary of a phase map names the phases on both sides of each transition in words."""

from __future__ import annotations

import numpy as np
import toposweep as ts
from toposweep.summary import summarise


def test_transitions_are_listed_with_phase_names() -> None:
    # BHZ at t = 1: trivial for |m| > 2, Z2-odd for 0 < |m| < 2 (Bernevig, Hughes & Zhang,
    # Science 314, 1757 (2006))
    ds = ts.phase_map(ts.models.bhz(), {"mass": np.linspace(-3.0, 3.0, 25)}, 2, progress=False)
    text = summarise(ds, "bhz.nc")
    assert "gap_closes_at_a_point" in text  # the status by its flag meaning
    lines = [line for line in text.splitlines() if line.strip().startswith("at mass=")]
    assert len(lines) == 2
    assert lines[0].endswith("trivial insulator -> Z2-odd 2D insulator")
    assert lines[1].endswith("Z2-odd 2D insulator -> trivial insulator")


def test_the_smallest_gap_of_a_map_says_where_it_was_measured() -> None:
    grid = {"mass": np.linspace(-3.0, 3.0, 25)}
    text = summarise(ts.phase_map(ts.models.bhz(), grid, 2, progress=False), "map.nc")
    assert "smallest direct gap at an evaluated point:" in text
    text = summarise(ts.sweep(ts.models.bhz(), grid, 2, progress=False), "sweep.nc")
    assert "smallest direct gap where defined:" in text
