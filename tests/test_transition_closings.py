"""Several closings on one segment, and the edge where bands begin to overlap.

Sources (beside each check): Wilson–Dirac closings at m/t = −3, −1, 1, 3, at the TRIMs with
0, 1, 2, 3 coordinates 1/2 (Qi, Hughes & Zhang, Phys. Rev. B 78, 195424 (2008)); BHZ closings
at m/t = −2, 0, 2, Z2 unchanged across m = 0 where X and Y close together (Bernevig, Hughes &
Zhang, Science 314, 1757 (2006)). The metal edges are checked against a dense NumPy scan of
the indirect gap (``numpy.linalg.eigvalsh`` of the Bloch Hamiltonian, no core call).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import toposweep as ts
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq

sys.path.insert(0, str(Path(__file__).resolve().parent))
import toposweep.maps.transition_finder as finder  # noqa: E402
from reference_bands import kane_mele_h  # noqa: E402


def meanings(ds) -> list[str]:  # noqa: ANN001
    names = ds.status.attrs["flag_meanings"].split()
    return [names[int(v)] for v in ds.status.values]


def test_the_reproducer_reports_both_wilson_dirac_closings() -> None:
    # Qi, Hughes & Zhang, PRB 78, 195424 (2008): closings at m/t = -1 (one coordinate of the
    # TRIM 1/2) and +1 (two); between m = -2 and 2 both lie on the segment
    ds = ts.find_transition(ts.models.wilson_dirac(), 2, start={"mass": -2.0}, end={"mass": 2.0})
    assert ds.sizes["transition"] == 2
    np.testing.assert_allclose(ds.mass.values, [-1.0, 1.0], rtol=1e-6)
    assert sorted(np.round(ds.kappa.values[0] * 2) % 2) == [0, 0, 1]
    assert sorted(np.round(ds.kappa.values[1] * 2) % 2) == [0, 1, 1]
    assert meanings(ds) == ["gap_closes_at_a_point"] * 2
    # the phases on both sides: strong (1) between the closings, weak outside (Fu–Kane
    # parities of the model; nu0 is 0 on both outer sides)
    assert ds.nu0_low.values.tolist() == [1, 0] and ds.nu0_high.values.tolist() == [0, 1]
    assert int(ds.phase_high[0]) == int(ds.phase_low[1])
    assert (int(ds.phase_low[0]), int(ds.phase_high[1])) == (int(ds.phase_start),
                                                             int(ds.phase_end))  # fmt: skip


def test_all_four_wilson_dirac_closings_in_order() -> None:
    # Qi, Hughes & Zhang (2008): m/t = -3, -1, 1, 3, at TRIMs with 0, 1, 2, 3 halves
    t = 0.8
    ds = ts.find_transition(
        ts.models.wilson_dirac(), 2, start={"mass": -3.7 * t}, end={"mass": 3.3 * t},
        params={"hopping": t}, tol=1e-9,
    )  # fmt: skip
    np.testing.assert_allclose(ds.mass.values / t, [-3, -1, 1, 3], rtol=1e-6)
    halves = [int(np.sum(np.isclose(np.mod(k + 1e-9, 1.0), 0.5, atol=1e-6))) for k in
              ds.kappa.values]  # fmt: skip
    assert halves == [0, 1, 2, 3]
    assert np.all(np.diff(ds.fraction.values) > 0)
    # each closing changes the phase, and consecutive sides agree
    assert (ds.phase_high.values[:-1] == ds.phase_low.values[1:]).all()
    assert (ds.status.values == 0).all()


def test_a_dip_the_scan_misses_is_found_by_the_gap_bound() -> None:
    # BHZ, Bernevig, Hughes & Zhang (2006): closings at m = -2, 0, 2. From -2.1 to 2.5 the
    # first lies at s = 0.022, between the scan's first two points (s = 0 and 1/8) with the
    # gap at 1/8 above the one at 0: only splitting the part the band-shift bound leaves
    # uncovered finds it
    ds = ts.find_transition(ts.models.bhz(), 2, start={"mass": -2.1}, end={"mass": 2.5})
    np.testing.assert_allclose(ds.mass.values, [-2.0, 0.0, 2.0], atol=1e-6)
    assert meanings(ds) == [
        "gap_closes_at_a_point",
        "same_phase_gap_closes_and_reopens",  # X and Y close together, Z2 unchanged
        "gap_closes_at_a_point",
    ]
    assert ds.nu0_low.values.tolist() == [0, 1, 1] and ds.nu0_high.values.tolist() == [1, 1, 0]


def test_without_the_bound_only_the_scan_s_dips_are_found(monkeypatch) -> None:  # noqa: ANN001
    # the limit stated for models without the bound (a fixed scan): same segment as above
    monkeypatch.setattr(finder, "term_norm_bounds", lambda model: None)
    ds = ts.find_transition(ts.models.bhz(), 2, start={"mass": -2.1}, end={"mass": 2.5})
    np.testing.assert_allclose(ds.mass.values, [0.0, 2.0], atol=1e-6)


def test_a_phase_map_segment_with_two_closings() -> None:
    # BHZ on the grid m = -2.5, 0.5: one segment, closings at -2 (Z2 changes) and 0 (not);
    # the phase between them comes from a full evaluation
    ds = ts.phase_map(ts.models.bhz(), {"mass": [-2.5, 0.5]}, 2, progress=False)
    assert ds.sizes["transition"] == 2
    np.testing.assert_allclose(ds.transition_mass.values, [-2.0, 0.0], atol=1e-3 * 3)
    assert ds.transition_status.values.tolist() == [0, 4]
    assert ds.transition_nu0_low.values.tolist() == [0, 1]
    assert ds.transition_nu0_high.values.tolist() == [1, 1]


def test_a_straight_v_ends_the_search_without_bracketing_probes() -> None:
    # Wilson–Dirac: the gap is 2|m - m*| near each closing (Qi, Hughes & Zhang 2008), a V
    # whose two branches are straight; the equal-slope guess lands on the closing, two probes
    # outside its closed core then bound it: 3 gap evaluations a segment (5 before)
    grid = {"mass": np.linspace(-4, 4, 41) + 0.013, "hopping": [0.8, 1.0]}
    ds = ts.phase_map(ts.models.wilson_dirac(), grid, 2, progress=False)
    assert (ds.transition_status.values == 0).all()
    assert (ds.transition_probes.values == 3).all(), ds.transition_probes.values
    ratio = ds.transition_mass.values / ds.transition_hopping.values
    np.testing.assert_allclose(ratio, np.round(ratio), atol=1e-3 * 0.2 / 0.8)


def _overlap_model() -> ts.TightBinding:
    """Two uncoupled Kramers pairs, A (filled) and B.

    A = cos 2πκ₁ + 0.1 cos 2πκ₂ and B = level + 1.5 cos 2πκ₁ − 0.1 cos 2πκ₂. The direct gap
    is min over κ of level + 0.5 cos 2πκ₁ − 0.2 cos 2πκ₂ = level − 0.7; the indirect gap is
    min B − max A = (level − 1.6) − 1.1 = level − 2.7 (A's top at κ = 0, B's bottom at
    κ = (1/2, 0)). Between level 0.7 and 2.7 the direct gap is open and the bands overlap: a
    metal (common practice, no source; checked below by a NumPy scan).
    """
    u_t = np.kron(np.eye(2), np.array([[0, 1], [-1, 0]]))
    m = ts.TightBinding(2, 4, time_reversal=u_t)
    m.add((1, 0), np.kron(np.diag([0.5, 0.75]), np.eye(2)))
    m.add((0, 0), np.kron(np.diag([0.0, 1.0]), np.eye(2)), term="level")
    m.add((0, 1), np.kron(np.diag([0.05, -0.05]), np.eye(2)))
    m.defaults = {"level": 2.0}
    return m


def _numpy_indirect(model: ts.TightBinding, params: dict[str, float], n: int = 200) -> float:
    g = np.arange(n) / n
    kappa = np.stack(np.meshgrid(g, g, indexing="ij"), -1).reshape(-1, 2)
    e = np.linalg.eigvalsh(model.hamiltonian(kappa, params))
    return float(e[:, 2].min() - e[:, 1].max())


def test_the_metal_edge_is_where_the_indirect_gap_changes_sign() -> None:
    model = _overlap_model()
    ds = ts.find_transition(model, 2, start={"level": 2.0}, end={"level": 3.0}, tol=1e-9)
    assert meanings(ds) == ["bands_overlap_begins"]
    assert ds.phase_low.values.tolist() == [10] and ds.phase_high.values.tolist() == [0]
    # the reference: the sign change of the indirect gap of a dense NumPy scan (its κ grid
    # holds both band extrema, κ₁ = 0 and 1/2)
    edge = brentq(lambda x: _numpy_indirect(model, {"level": x}), 2.0, 3.0, xtol=1e-12)
    assert abs(edge - 2.7) < 1e-9  # (the model's formula, as a check of the scan)
    assert abs(float(ds.level[0]) - edge) < 3e-9
    assert abs(float(ds.gap[0]) - (float(ds.level[0]) - 0.7)) < 1e-6  # the direct gap, open


def test_a_phase_map_locates_the_metal_edge() -> None:
    # the model above on a grid of levels: the edge at level 2.7 lies between two grid points
    # of different phases (a metal, phase 10, and an insulator, 0) and is located to the map's
    # tolerance (1e-3 of a spacing); it was "no closing found" at the segment's end before
    grid = {"level": np.linspace(2.0, 3.0, 5)}
    ds = ts.phase_map(_overlap_model(), grid, 2, progress=False)
    assert ds.sizes["transition"] == 1
    meanings = ds.transition_status.attrs["flag_meanings"].split()
    assert meanings[int(ds.transition_status[0])] == "bands_overlap_begins"
    assert abs(float(ds.transition_level[0]) - 2.7) <= 1e-3 * 0.25
    assert (int(ds.transition_phase_low[0]), int(ds.transition_phase_high[0])) == (10, 0)


def test_kane_mele_with_rashba_metal_edge_against_numpy() -> None:
    # Kane & Mele, PRL 95, 226801 (2005), Table I (tests/reference_bands.kane_mele_h): with
    # λ_SO = 0.1 and no staggered potential, strong Rashba coupling makes the bands overlap
    # while the direct gap stays open. The core's indirect gap is taken over the κ it visits,
    # an upper bound of the zone's, so the edge lies a little above the NumPy scan's
    n = 240
    g = np.arange(n) / n
    kappa = np.stack(np.meshgrid(g, g, indexing="ij"), -1).reshape(-1, 2)

    def indirect(lr: float) -> float:
        e = np.linalg.eigvalsh(kane_mele_h(kappa, lso=0.1, lr=lr))
        return float(e[:, 2].min() - e[:, 1].max())

    edge = brentq(indirect, 0.32, 0.335, xtol=1e-9)
    ds = ts.find_transition(
        ts.models.kane_mele(), 2, start={"rashba": 0.32}, end={"rashba": 0.335}, tol=1e-6
    )
    assert meanings(ds) == ["bands_overlap_begins"]
    assert 0 <= float(ds.rashba[0]) - edge < 2e-4  # ~3e-4 of indirect gap at slope ~3.4
    assert (int(ds.nu0_low[0]), int(ds.nu0_high[0])) == (1, 1)  # same indices, a metal begins
    assert float(ds.gap[0]) > 0.03


def test_a_segment_the_gap_bound_proves_open_needs_only_the_scan() -> None:
    # BHZ between m = -1.5 and -0.5 (same phase, gap 2 min(|m + 2|, |m|) ≥ 1, Bernevig,
    # Hughes & Zhang 2006): the band-shift bound proves every part between the scan's points
    # open, so no search follows (it took 21 gap evaluations before)
    ds = ts.find_transition(ts.models.bhz(), 2, start={"mass": -1.5}, end={"mass": -0.5})
    assert meanings(ds) == ["same_phase_no_closing"]
    assert int(ds.attrs["gap_evaluations"]) == 7
    assert float(ds.gap[0]) > 0.9


# -- every closing of random Dirac models -------------------------------------------------------
SX2 = np.array([[0, 1], [1, 0]], complex)
SY2 = np.array([[0, -1j], [1j, 0]], complex)
SZ2 = np.diag([1.0, -1.0]).astype(complex)
I2 = np.eye(2, dtype=complex)


def _dirac_2d(t1: float, t2: float, t12: float) -> ts.TightBinding:
    """H = sin k₁ Γ₁ + sin k₂ Γ₂ + M(κ) Γ₃ with M = m + t1 cos k₁ + t2 cos k₂ + t12 cos k₁ cos k₂.

    Γ₁ = σx⊗sz, Γ₂ = σy⊗s0, Γ₃ = σz⊗s0 anticommute, so E = ±√(sin² k₁ + sin² k₂ + M²): the
    gap closes only at a TRIM where M vanishes, at m* = −(±t1 ± t2 ± t1·t2 signs' t12), and
    near it the gap is 2|m − m*| (the lattice Dirac model of Qi, Hughes & Zhang, PRB 78,
    195424 (2008), with unequal hoppings; one band inversion at one TRIM changes Z2).
    """
    g1, g2, g3 = np.kron(SX2, SZ2), np.kron(SY2, I2), np.kron(SZ2, I2)
    m = ts.TightBinding(2, 4, time_reversal=np.kron(I2, 1j * SY2))
    m.add((0, 0), g3, term="mass")
    m.add((1, 0), -0.5j * g1 + 0.5 * t1 * g3)
    m.add((0, 1), -0.5j * g2 + 0.5 * t2 * g3)
    m.add((1, 1), 0.25 * t12 * g3)
    m.add((1, -1), 0.25 * t12 * g3)
    m.defaults = {"mass": 0.0}
    return m


@settings(max_examples=60, deadline=None, derandomize=True)
@given(
    t1=st.floats(0.2, 1.5),
    t2=st.floats(0.2, 1.5),
    t12=st.floats(-0.6, 0.6),
    lo=st.floats(-4.0, 0.0),
    width=st.floats(0.5, 6.0),
)
def test_every_closing_of_a_random_dirac_model_is_reported(t1, t2, t12, lo, width) -> None:  # noqa: ANN001
    hi = lo + width
    found = [  # (m*, TRIM in reduced coordinates); cos k = ±1 at κ = 0 or 1/2
        (-(t1 * c1 + t2 * c2 + t12 * c1 * c2), ((1 - c1) / 4, (1 - c2) / 4))
        for c1 in (1, -1)
        for c2 in (1, -1)
    ]
    # closings apart from each other and from the ends by 1 % of the segment at least
    ms = sorted(m for m, _ in found)
    assume(all(b - a > 0.01 * width for a, b in zip(ms[:-1], ms[1:], strict=True)))
    assume(all(abs(m - end) > 0.01 * width for m in ms for end in (lo, hi)))
    closings = dict(found)
    inside = [m for m in ms if lo < m < hi]
    ds = ts.find_transition(_dirac_2d(t1, t2, t12), 2, start={"mass": lo}, end={"mass": hi})
    if not inside:
        assert meanings(ds) == ["same_phase_no_closing"]
        return
    np.testing.assert_allclose(ds.mass.values, inside, atol=1e-6 * width)
    assert (ds.status.values == 0).all()  # one band inversion each: Z2 changes at every one
    for x, k in zip(inside, ds.kappa.values, strict=True):
        np.testing.assert_allclose(np.mod(k + 1e-6, 1.0) - 1e-6, closings[x], atol=1e-6)


def test_the_edge_search_survives_equal_indirect_gaps_at_its_ends() -> None:
    """Regula falsi has no secant through two equal values (the three-parameter d–f map of
    ``make bench`` met one and stopped with ZeroDivisionError): it halves the bracket instead
    and then locates the sign change it finds, here the zero of 1 − 4|s − ½| at s = ¾."""
    from toposweep.maps.transitions import Probe, _sign_change

    def probe(indirect: float) -> Probe:
        return Probe(1.0, np.zeros(2), 1e-6, indirect, None)

    def f(x: float) -> float:
        return 1.0 - 4.0 * abs(x - 0.5)

    pts = {0.0: probe(-1.0), 1.0: probe(-1.0)}
    gen = _sign_change(pts, 0.0, 1.0, 1e-4)
    asked = next(gen)
    assert asked == [0.5]  # the midpoint, not a division by zero
    try:
        while True:
            pts[asked[0]] = probe(f(asked[0]))
            asked = gen.send(None)
    except StopIteration as done:
        lo, hi = done.value
    assert lo <= 0.75 <= hi and hi - lo <= 2e-4 + 1e-12
