"""The second Z2 method: the lattice Z2 of Fukui & Hatsugai, J. Phys. Soc. Jpn. 76, 053702
(2007) (link variables and lattice field strength as in Fukui, Hatsugai & Suzuki, J. Phys. Soc.
Jpn. 74, 1674 (2005)), checked against published phase diagrams and against the Wilson loop.

Each check cites its source; every index comes from ``method="lattice"`` or ``"both"`` with
otherwise default sampling.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts

sys.path.insert(0, str(Path(__file__).resolve().parent))
from random_models import (  # noqa: E402
    change_basis,
    parity_indices,
    random_model,
    random_unitary,
)

SQRT3 = np.sqrt(3.0)


# Qi, Wu & Zhang, PRB 74, 085308 (2006) with its time-reversed partner (Bernevig, Hughes &
# Zhang, Science 314, 1757 (2006)): Z2 = 1 for 0 < |m| < 2, 0 for |m| > 2.
@pytest.mark.parametrize(("mass", "z2"), [(-2.5, 0), (-1.7, 1), (-0.3, 1), (0.8, 1), (2.2, 0)])
def test_bhz_by_lattice(mass, z2):
    ds = ts.invariants(ts.models.bhz(), 2, {"mass": mass}, method="lattice")
    assert int(ds.nu0) == z2 == int(ds.nu0_lattice)
    assert int(ds.lattice_undefined_reason) == 0 and int(ds.converged) == 1
    assert "methods_agree" not in ds  # only one method ran


# Fu & Kane, PRB 76, 045302 (2007): cubic Wilson–Dirac model (0;000) |m|>3, (1;000) −3<m<−1,
# (0;111) |m|<1, (1;111) 1<m<3.
@pytest.mark.parametrize(
    ("mass", "nu0", "nu"),
    [(-3.4, 0, [0, 0, 0]), (-2.0, 1, [0, 0, 0]), (-0.5, 0, [1, 1, 1]), (1.5, 1, [1, 1, 1])],
)
def test_wilson_dirac_by_both_methods(mass, nu0, nu):
    ds = ts.invariants(ts.models.wilson_dirac(), 2, {"mass": mass}, method="both")
    assert (int(ds.nu0_lattice), ds.nu_lattice.values.tolist()) == (nu0, nu)
    assert (int(ds.nu0), ds.nu.values.tolist()) == (nu0, nu)
    assert int(ds.methods_agree) == 1


# Kane & Mele, PRL 95, 226801 (2005): without Rashba the Z2-odd phase ends at
# λ_v = 3√3 λ_SO. Inversion is broken by λ_v, so the lattice field strength is not zero here
# (it vanishes identically with inversion and time reversal) and the plaquette sum matters.
@pytest.mark.parametrize(("ratio", "z2"), [(0.0, 1), (0.9, 1), (0.96, 1), (1.04, 0), (1.3, 0)])
def test_kane_mele_boundary_by_lattice(ratio, z2):
    lam = 0.1
    params = {"spin_orbit": lam, "staggered": ratio * 3 * SQRT3 * lam, "rashba": 0.0}
    ds = ts.invariants(ts.models.kane_mele(), 2, params, method="both")
    assert int(ds.nu0_lattice) == z2 == int(ds.nu0)
    assert int(ds.methods_agree) == 1
    if ratio > 0:
        assert float(ds.lattice_max_field) > 0


# Fu, Kane & Mele, PRL 98, 106803 (2007): dimerised diamond model, δt > 0 gives (1;111) and
# δt < 0 gives (0;111) in the fcc reduced basis.
@pytest.mark.parametrize(("dimer", "nu0"), [(0.4, 1), (-0.4, 0)])
def test_diamond_by_lattice(dimer, nu0):
    ds = ts.invariants(ts.models.fu_kane_mele(), 2, {"dimerisation": dimer}, method="both")
    assert (int(ds.nu0_lattice), ds.nu_lattice.values.tolist()) == (nu0, [1, 1, 1])
    assert int(ds.methods_agree) == 1


def test_random_models_both_methods_agree_with_parity():
    """Random TR+I models (tests/random_models.py) in a random orbital basis: the lattice Z2
    equals the Fu–Kane parity result (Fu & Kane, PRB 76, 045302 (2007)), computed with NumPy at
    the TRIMs of the rotated model (``random_models.parity_indices``), and the Wilson loop."""
    rng = np.random.default_rng(5)
    for seed in range(6):
        case = random_model(seed, dim=2 + seed % 2)
        model = change_basis(case.model, random_unitary(rng, case.model.norb))
        nu0, weak = parity_indices(model, case.filling)
        ds = ts.invariants(model, case.filling, inversion=model.inversion, method="both")
        assert int(ds.methods_agree) == 1, f"seed {seed}"
        assert int(ds.nu0_lattice) == nu0 == int(ds.nu0), f"seed {seed}"
        if model.dim == 3:
            assert ds.nu_lattice.values.tolist() == list(weak) == ds.nu.values.tolist()


def test_gapless_point_is_undefined_for_the_lattice_too():
    # m = 1: the Wilson–Dirac gap closes at TRIMs (Fu & Kane 2007)
    ds = ts.invariants(ts.models.wilson_dirac(), 2, {"mass": 1.0}, method="both")
    assert int(ds.nu0_lattice) == -1 and int(ds.lattice_undefined_reason) in (1, 2)
    assert int(ds.methods_agree) == -1


def test_schema_and_flags():
    ds = ts.invariants(ts.models.wilson_dirac(), 2, {"mass": -2.0}, method="both")
    for name in ("nu0_lattice", "nu_lattice", "lattice_undefined_reason", "methods_agree"):
        assert {"long_name", "units"} <= set(ds[name].attrs), name
    assert ds.methods_agree.attrs["flag_meanings"] == "not_comparable disagree agree"
    np.testing.assert_array_equal(ds.methods_agree.attrs["flag_values"], [-1, 0, 1])
    assert "lattice" in ds.attrs["method"] and '"method": "both"' in ds.attrs["sampling"]
    plain = ts.invariants(ts.models.wilson_dirac(), 2, {"mass": -2.0})
    assert "nu0_lattice" not in plain and "methods_agree" not in plain


def test_method_is_validated():
    with pytest.raises(ts.SamplingError, match="method must be one of"):
        ts.invariants(ts.models.bhz(), 2, method="fast")
    with pytest.raises(ts.SamplingError, match="method"):
        ts.invariants(ts.models.bhz(), 2, method=["both"])


def test_sweep_carries_the_lattice_result():
    from toposweep.summary import summarise

    grid = {"mass": np.array([-2.5, -1.0, 1.0, 2.0])}
    ds = ts.sweep(ts.models.bhz(), grid, 2, method="both", progress=False)
    assert ds.nu0_lattice.values.tolist() == [0, 1, 1, -1]  # m = 2: gap closes at a TRIM
    assert ds.methods_agree.values.tolist() == [1, 1, 1, -1]
    text = summarise(ds, "bhz")
    assert "lattice Z2 cross-check (Fukui-Hatsugai): 3 agree, 0 disagree, 1 not comparable" in text


def test_rough_mesh_is_refined_near_a_transition():
    # 0.01 inside the strong phase of Fu & Kane, PRB 76, 045302 (2007) (−3 < m < −1): the base
    # mesh's links are too rough (|U| < 0.5) next to Γ; only the cells there are split
    ds = ts.invariants(ts.models.wilson_dirac(), 2, {"mass": -2.99}, method="both")
    assert int(ds.nu0_lattice) == 1 and int(ds.methods_agree) == 1
    assert float(ds.lattice_min_link) >= 0.5
    n1, n2 = int(ds.lattice_loop_points), int(ds.lattice_pump_steps)
    assert (n1, n2) >= (64, 40)  # finer than the 32 × 20 base somewhere
    base = 6 * 32 * 21  # six planes
    assert base < int(ds.lattice_points) < base + (6 * n1 * (n2 + 1) - base) // 10


def test_coarse_mesh_is_refined_to_the_answer():
    # Kane & Mele, PRL 95, 226801 (2005): λ_v = 0.87 × 3√3 λ_SO is still Z2-odd. A base mesh
    # of 4 × 2 cells is far too rough; split where it fails, it answers (it gave up before)
    params = {"staggered": 0.45}
    coarse = ts.invariants(
        ts.models.kane_mele(), 2, params, method="lattice", loop_points=4, lines=3
    )
    assert int(coarse.nu0) == 1 and int(coarse.lattice_undefined_reason) == 0
    assert 4 * 3 < int(coarse.lattice_points) < int(coarse.lattice_loop_points) * 3


CRITICAL = 3 * SQRT3 * 0.06  # Kane & Mele, PRL 95, 226801 (2005), λ_SO = 0.06


@pytest.mark.parametrize(("rel", "z2"), [(1e-8, 1), (-1e-8, 0)])
def test_refinement_follows_the_flux_to_tiny_gaps(rel, z2):
    # 1e-8 from λ_v*, gap ~6e-9 (a floor below it): a uniform mesh would need ~10^17 points;
    # the cells split toward K only, under a thousand points in all
    params = {"spin_orbit": 0.06, "staggered": CRITICAL * (1 - rel)}
    ds = ts.invariants(
        ts.models.kane_mele(), 2, params, method="lattice", gap_floor=1e-14, prove_gap="never"
    )
    assert float(ds.gap_direct) < 1e-8
    assert int(ds.nu0) == z2 and int(ds.lattice_undefined_reason) == 0
    assert int(ds.lattice_loop_points) >= 32 << 20 and int(ds.lattice_points) < 1000


def test_refinement_cap_is_undefined_not_wrong():
    # 1e-10 from λ_v*: the flux sits within cells smaller than 2^-24 of a base cell, where
    # refinement stops: undefined (reason 10), never a count from a mesh that missed it
    params = {"spin_orbit": 0.06, "staggered": CRITICAL * (1 - 1e-10)}
    ds = ts.invariants(
        ts.models.kane_mele(), 2, params, method="lattice", gap_floor=1e-14, prove_gap="never"
    )
    assert float(ds.gap_direct) > 1e-14  # gapped by the floor given: the mesh gave up
    assert int(ds.nu0) == -1 and int(ds.lattice_undefined_reason) == 10
    assert float(ds.lattice_max_field) > 2.0
