"""The engine against the plain-NumPy implementation of the same algorithm (benches/numpy_baseline).

numpy is the reference library here: Bloch sums, ``numpy.linalg.eigh``, SVD unitarisation and
``numpy.linalg.eigvals`` for the Wilson-loop eigenphases. At fixed sampling (``max_lines =
lines``) both must give identical indices and gaps equal to 1e-10; the expected phases are the
published ones.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benches"))
from baseline_models import (  # noqa: E402
    expected_indices,
    stacked_wilson_dirac,
    wilson_dirac_without_inversion,
)
from numpy_baseline import BlochTerms, compare  # noqa: E402

SAMPLING = {"loop_points": 24, "lines": 41}


# Fu & Kane, Phys. Rev. B 76, 045302 (2007): (0;000) |m|>3, (1;000) −3<m<−1, (0;111) |m|<1,
# (1;111) 1<m<3 for the cubic Wilson–Dirac model.
@pytest.mark.parametrize(
    ("mass", "nu0", "nu"),
    [(-3.5, 0, [0, 0, 0]), (-2.0, 1, [0, 0, 0]), (0.4, 0, [1, 1, 1]), (1.6, 1, [1, 1, 1])],
)
def test_wilson_dirac_agrees_with_numpy(mass, nu0, nu):
    ref, ds = compare(ts.models.wilson_dirac(), 2, {"mass": mass}, **SAMPLING)
    assert ref["reason"] == 0
    assert (ref["nu0"], ref["nu"]) == (nu0, nu)


# Qi, Wu & Zhang, PRB 74, 085308 (2006) with its time-reversed partner (Bernevig, Hughes & Zhang,
# Science 314, 1757 (2006)): Z2 = 1 for 0 < |m| < 2, 0 for |m| > 2.
@pytest.mark.parametrize(("mass", "z2"), [(-2.6, 0), (-1.0, 1), (0.7, 1), (2.4, 0)])
def test_bhz_agrees_with_numpy(mass, z2):
    ref, _ = compare(ts.models.bhz(), 2, {"mass": mass}, **SAMPLING)
    assert ref["reason"] == 0 and ref["nu0"] == z2


def test_dense_random_model_agrees_with_numpy():
    """Two coupled Wilson–Dirac blocks in a random orbital basis: 8 dense bands."""
    model = stacked_wilson_dirac(2, seed=3)
    ref, _ = compare(model, 4, None, **SAMPLING)
    assert ref["reason"] == 0
    assert (ref["nu0"], ref["nu"]) == expected_indices(2)


def test_many_occupied_bands_agree_with_numpy():
    """Six coupled blocks, 24 dense bands: 12 occupied, so overlaps, polar factors and the loop
    product take the large-matrix paths (faer's eigensolver and products)."""
    model = stacked_wilson_dirac(6, seed=4)
    ref, _ = compare(model, 12, None, loop_points=24, lines=41)
    assert ref["reason"] == 0
    assert (ref["nu0"], ref["nu"]) == expected_indices(6)


def test_model_without_inversion_agrees_with_numpy():
    """No Kramers degeneracy away from the TRIMs: every κ point takes the generic 4×4 path.
    The (1;000) phase survives the small inversion-breaking term (adiabatic continuity, common
    practice, no source; the gap stays open, checked by compare)."""
    ref, ds = compare(wilson_dirac_without_inversion(0.3), 2, {"mass": -2.0}, **SAMPLING)
    assert ref["reason"] == 0
    assert (ref["nu0"], ref["nu"]) == (1, [0, 0, 0])
    assert "nu0_parity" not in ds


def test_gapless_point_is_undefined_in_both():
    """m = 1: the Wilson–Dirac gap closes at the TRIMs with two κ_i = 1/2; both say undefined."""
    ref, ds = compare(ts.models.wilson_dirac(), 2, {"mass": 1.0}, **SAMPLING)
    assert ref["nu0"] == -1 and int(ds.nu0) == -1
    assert ref["reason"] == int(ds.undefined_reason)


def test_baseline_bloch_sum_matches_model():
    """The baseline's own Bloch sum equals the model's H(κ) (assembled by the core)."""
    model = stacked_wilson_dirac(2, seed=5)
    kappa = np.random.default_rng(0).random((20, 3))
    want = model.hamiltonian(kappa, {"shift": 0.3})
    got = BlochTerms.from_model(model, {"shift": 0.3}).hamiltonian(kappa)
    np.testing.assert_allclose(got, want, atol=1e-12)
