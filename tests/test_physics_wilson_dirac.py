"""Physics acceptance: the cubic Wilson–Dirac model.

H = Σ sin k_i Γ_i + (m + Σ cos k_i) Γ_4 (Qi, Hughes & Zhang, Phys. Rev. B 78, 195424 (2008)).
Its phases follow from the Fu–Kane parity criterion (Fu & Kane, Phys. Rev. B 76, 045302
(2007)): (0;000) for |m| > 3, (1;000) for −3 < m < −1, (0;111) for |m| < 1, (1;111) for
1 < m < 3. Both the Wilson-loop and the parity indices must give them, at DEFAULT sampling.
"""

from __future__ import annotations

import numpy as np
import pytest
import toposweep as ts

MODEL = ts.models.wilson_dirac()


def expected(m: float) -> tuple[int, list[int]]:
    """Fu & Kane (2007) phase table of the Wilson–Dirac model."""
    if abs(m) > 3:
        return 0, [0, 0, 0]
    if m < -1:
        return 1, [0, 0, 0]
    if m < 1:
        return 0, [1, 1, 1]
    return 1, [1, 1, 1]


# m = ±0.9, ±1.1, ±2.9, ±3.1 put the point 0.1 from a transition: a direct gap of 0.2, under
# 2 % of the bandwidth (≈ 12).
MASSES = [-4.0, -3.1, -2.9, -2.0, -1.1, -0.9, -0.3, 0.5, 0.9, 1.1, 2.0, 2.9, 3.1, 4.0]


@pytest.mark.parametrize("mass", MASSES)
def test_phases_by_wilson_loop_and_parity(mass):
    nu0, nu = expected(mass)
    ds = ts.invariants(MODEL, filling=2, params={"mass": mass})
    assert int(ds.undefined_reason) == 0, f"m = {mass}: reason {int(ds.undefined_reason)}"
    assert (int(ds.nu0), ds.nu.values.tolist()) == (nu0, nu), f"m = {mass}"
    assert (int(ds.nu0_parity), ds.nu_parity.values.tolist()) == (nu0, nu), f"m = {mass}"
    assert ds.nu0_by_axis.values.tolist() == [nu0] * 3  # three independent ν0 estimates
    assert int(ds.parity_agrees) == 1


def test_hopping_scale_does_not_change_the_phase():
    """Only m/t matters: scaling both leaves (1;111) at m/t = 2."""
    ds = ts.invariants(MODEL, filling=2, params={"mass": 0.7, "hopping": 0.35})
    assert (int(ds.nu0), ds.nu.values.tolist()) == (1, [1, 1, 1])


@pytest.mark.parametrize("mass", [-3.0, -1.0, 1.0, 3.0])
def test_transitions_are_undefined(mass):
    """At m = ±1, ±3 the gap closes at TRIMs; the result must be undefined, not a guess."""
    ds = ts.invariants(MODEL, filling=2, params={"mass": mass})
    assert int(ds.nu0) == -1
    assert np.all(ds.nu.values == -1)
    assert int(ds.undefined_reason) in (1, 2)
