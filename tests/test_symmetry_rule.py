"""One rule for points where time reversal does not hold (issue 19, item 5).

Such a point is a result, never an error: its indices are −1 with reason 8, in
``invariants`` and in sweeps alike; a call where every point breaks it also warns
(``SymmetryWarning``). Calls that are wrong in themselves still raise.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import toposweep as ts

FAST = {"loop_points": 12, "lines": 7}


def wilson_dirac_with_breaking_term() -> ts.TightBinding:
    # an i·1 hopping along x is odd under Θ = iσ_y K: time reversal holds only for b = 0
    m = ts.models.wilson_dirac()
    m.add((1, 0, 0), 1j * np.eye(4), term="b")
    m.defaults["b"] = 0.0
    return m


def test_the_same_point_is_reason_8_in_invariants_and_in_a_sweep() -> None:
    m = wilson_dirac_with_breaking_term()
    with pytest.warns(ts.SymmetryWarning, match="time reversal does not hold at this point"):
        one = ts.invariants(m, 2, {"b": 0.3}, **FAST)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # some points keep time reversal: no warning
        many = ts.sweep(m, {"b": [0.0, 0.3]}, 2, progress=False, **FAST)
    assert (int(one.nu0), int(one.phase), int(one.undefined_reason)) == (-1, -1, 8)
    assert many.nu0.values.tolist() == [1, -1]  # (1;000) at m = -2: Fu & Kane, PRB 76, 045302
    assert many.undefined_reason.values.tolist() == [0, 8]
    assert int(one.nu0_parity) == -1  # no parity answer either where Θ fails


def test_a_sweep_where_every_point_breaks_it_warns_once_per_run() -> None:
    m = wilson_dirac_with_breaking_term()
    with pytest.warns(ts.SymmetryWarning) as caught:
        ds = ts.sweep(m, {"b": [0.2, 0.3, 0.4, 0.5]}, 2, chunk_size=2, progress=False, **FAST)
    assert (ds.undefined_reason == 8).all()
    texts = {str(w.message) for w in caught}
    assert len(texts) == 1 and "chunk" in next(iter(texts))  # one text: Python shows it once


def test_what_is_wrong_with_the_call_itself_still_raises() -> None:
    no_tr = ts.TightBinding(2, 2).add((1, 0), np.eye(2))
    with pytest.raises(ts.ModelError, match="time_reversal"):
        ts.invariants(no_tr, 1)
    with pytest.raises(ts.SymmetryError, match="inversion does not hold"):
        ts.invariants(ts.models.wilson_dirac(), 2, inversion=np.eye(4), **FAST)
