"""``ts.find_transition`` against published critical points, and a gapless interval.

Sources (beside each check): Wilson–Dirac m*/t = −3, −1, 1, 3, where the mass term
m + t Σ cos k_i vanishes at the TRIMs with 0, 1, 2, 3 coordinates π (Qi, Hughes & Zhang,
Phys. Rev. B 78, 195424 (2008)); BHZ m*/t = −2, 0, 2 at Γ, X/Y, M (Bernevig, Hughes & Zhang,
Science 314, 1757 (2006)); Kane–Mele without Rashba λ_v* = 3√3 λ_SO at K and K′ (Kane & Mele,
Phys. Rev. Lett. 95, 146802 (2005)). The builtin models' conventions (their docstrings):
wilson_dirac H = t Σ sin k_i Γ_i + (m + t Σ cos k_i) Γ_4; bhz mass term m + t cos k_x +
t cos k_y; kane_mele lattice a₁ = (1, 0), a₂ = (1/2, √3/2) with A at 0 and B at (a₁ + a₂)/3.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import toposweep as ts
from toposweep.errors import ParameterError

#: TRIMs (reduced coordinates) with exactly n coordinates 1/2
TRIMS_3D = {
    n: {k for k in itertools.product((0.0, 0.5), repeat=3) if sum(x == 0.5 for x in k) == n}
    for n in range(4)
}
TRIMS_2D = {
    n: {k for k in itertools.product((0.0, 0.5), repeat=2) if sum(x == 0.5 for x in k) == n}
    for n in range(3)
}


def one(ds):
    """The single transition of a find_transition result."""
    assert ds.sizes["transition"] == 1, ds.sizes
    return ds.isel(transition=0)


def _at(kappa: np.ndarray, allowed: set[tuple[float, ...]], tol: float = 1e-6) -> bool:
    k = np.mod(kappa + tol, 1.0) - tol
    return any(np.allclose(k, a, atol=tol) for a in allowed)


@pytest.mark.parametrize("hopping", [1.0, 0.7])
@pytest.mark.parametrize("critical, inverted_at", [(-3, 0), (-1, 1), (1, 2), (3, 3)])
def test_wilson_dirac_critical_masses(hopping: float, critical: int, inverted_at: int) -> None:
    # Qi, Hughes & Zhang, PRB 78, 195424 (2008): gap closes at m = -3t, -t, t, 3t
    m_star = critical * hopping
    ds = one(
        ts.find_transition(
            ts.models.wilson_dirac(),
            2,
            start={"mass": m_star - 0.37 * hopping},
            end={"mass": m_star + 0.29 * hopping},
            params={"hopping": hopping},
            tol=1e-9,
        )
    )
    assert int(ds.status) == 0  # a point-like closing between two different phases
    assert abs(float(ds.mass) - m_star) <= 1e-6 * abs(m_star)
    assert _at(ds.kappa.values, TRIMS_3D[inverted_at])
    assert int(ds.phase_start) != int(ds.phase_end) or (
        ds.nu_start.values.tolist() != ds.nu_end.values.tolist()
    )
    assert float(ds.fraction_high - ds.fraction_low) <= 2e-9


@pytest.mark.parametrize(
    "critical, inverted_at, z2_changes", [(-2, 0, True), (0, 1, False), (2, 2, True)]
)
def test_bhz_critical_masses(critical: int, inverted_at: int, z2_changes: bool) -> None:
    # Bernevig, Hughes & Zhang, Science 314, 1757 (2006): closings at m/t = -2, 0, 2; at 0
    # the gap closes at X and Y together and the Z2 index is the same on both sides
    ds = one(
        ts.find_transition(
            ts.models.bhz(),
            2,
            start={"mass": critical - 0.41},
            end={"mass": critical + 0.23},
            tol=1e-9,
        )
    )
    assert abs(float(ds.mass) - critical) <= 1e-6 * max(1.0, abs(critical))
    assert _at(ds.kappa.values, TRIMS_2D[inverted_at])
    meanings = ds.status.attrs["flag_meanings"].split()
    expected = "gap_closes_at_a_point" if z2_changes else "same_phase_gap_closes_and_reopens"
    assert meanings[int(ds.status)] == expected
    assert (int(ds.nu0_start) != int(ds.nu0_end)) == z2_changes


def test_kane_mele_staggered_critical_value() -> None:
    # Kane & Mele, PRL 95, 146802 (2005): without Rashba the Z2-odd phase ends at 3√3 λ_SO
    so = 0.06
    star = 3 * np.sqrt(3) * so
    ds = one(
        ts.find_transition(
            ts.models.kane_mele(spin_orbit=so),
            2,
            start={"staggered": 0.8 * star},
            end={"staggered": 1.13 * star},
            tol=1e-9,
        )
    )
    assert int(ds.status) == 0
    assert abs(float(ds.staggered) / star - 1) <= 1e-6
    # K and K′: the zeros of 1 + e^{-2πiκ₁} + e^{-2πiκ₂} (the nearest-neighbour structure
    # factor of this lattice), κ = (1/3, 2/3) and (2/3, 1/3)
    assert _at(ds.kappa.values, {(1 / 3, 2 / 3), (2 / 3, 1 / 3)}, tol=1e-4)
    assert (int(ds.nu0_start), int(ds.nu0_end)) == (1, 0)


def _overlapping_bands() -> ts.TightBinding:
    """A dispersive Kramers pair 2t cos 2πκ₁ and a flat one at the level m, uncoupled.

    The lower two bands touch wherever 2t cos 2πκ₁ = m, i.e. for every |m| ≤ 2t: the direct
    gap is closed over that interval (common practice, no source).
    """
    u_t = np.kron(np.eye(2), np.array([[0, 1], [-1, 0]]))
    m = ts.TightBinding(2, 4, time_reversal=u_t)
    m.add((1, 0), np.kron(np.diag([1.0, 0.0]), np.eye(2)), term="t")
    m.add((0, 0), np.kron(np.diag([0.0, 1.0]), np.eye(2)), term="level")
    m.add((0, 0), 1e-3 * np.kron(np.diag([1.0, -1.0]), np.eye(2)))
    m.defaults = {"t": 1.0, "level": 0.0}
    return m


def test_a_gapless_interval_is_reported_as_an_interval() -> None:
    ds = one(
        ts.find_transition(
            _overlapping_bands(), 2, start={"level": -3.0}, end={"level": 3.0}, tol=1e-7
        )
    )
    meanings = ds.status.attrs["flag_meanings"].split()
    assert meanings[int(ds.status)] == "same_phase_gap_closes_and_reopens"
    # closed where 2t cos 2πκ₁ + 1e-3 = level - 1e-3, i.e. for -2 + 2e-3 ≤ level ≤ 2 + 2e-3:
    # the fractions (3 ± 2)/6 within 1e-3
    assert abs(float(ds.fraction_low) - 1 / 6) < 1e-3
    assert abs(float(ds.fraction_high) - 5 / 6) < 1e-3


def test_same_phase_without_closing_and_bad_segments() -> None:
    ds = one(ts.find_transition(ts.models.bhz(), 2, start={"mass": -1.5}, end={"mass": -0.5}))
    assert ds.status.attrs["flag_meanings"].split()[int(ds.status)] == "same_phase_no_closing"
    assert float(ds.gap) > 0.9  # 2 min(|m + 2|, |m|) at m = -0.5 … -1.5 is ≥ 1
    with pytest.raises(ParameterError, match="same parameters"):
        ts.find_transition(ts.models.bhz(), 2, start={"mass": 0.0}, end={"hopping": 1.0})
    with pytest.raises(ParameterError, match="same point"):
        ts.find_transition(ts.models.bhz(), 2, start={"mass": 0.0}, end={"mass": 0.0})
    with pytest.raises(ParameterError, match="tol"):
        ts.find_transition(ts.models.bhz(), 2, start={"mass": 0.0}, end={"mass": 1.0}, tol=0)
