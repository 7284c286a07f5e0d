"""Building models: dimension refused at construction, on-site block counted once, messages.

Issue 19, item 6. Outside facts: the Kane–Mele model with only intrinsic spin-orbit coupling
has a direct gap of 6√3 λ_SO at K and K' (Kane & Mele, Phys. Rev. Lett. 95, 226801 (2005);
from memory), checked here against the catalogue's default.
"""

from __future__ import annotations

import numpy as np
import pytest
import toposweep as ts
from toposweep.errors import ModelError


@pytest.mark.parametrize("dim", [1, 4])
def test_dimension_outside_2_and_3_is_refused_when_built(dim: int) -> None:
    with pytest.raises(ModelError, match="dim must be 2 or 3"):
        ts.TightBinding(dim, 2)
    with pytest.raises(ModelError, match="dim must be 2 or 3"):
        ts.CallableModel(lambda kappa: np.zeros((len(kappa), 2, 2)), dim=dim, norb=2)


def test_on_site_block_is_counted_once_and_bonds_with_their_conjugate(rng) -> None:
    a = rng.normal(size=(3, 3)) + 1j * rng.normal(size=(3, 3))
    onsite = a + a.conj().T
    t = rng.normal(size=(3, 3)) + 1j * rng.normal(size=(3, 3))
    m = ts.TightBinding(2, 3).add((0, 0), onsite).add((1, 2), t, term="x")
    kappa = rng.random((5, 2))
    phase = np.exp(2j * np.pi * kappa @ np.array([1, 2]))[:, None, None]
    want = onsite + 0.7 * (t * phase + t.conj().T / phase)  # numpy, from the formula
    np.testing.assert_allclose(m.hamiltonian(kappa, {"x": 0.7}), want, atol=1e-12)
    np.testing.assert_allclose(
        ts.TightBinding(2, 3).add((0, 0), onsite).hamiltonian([[0.3, 0.1]])[0], onsite
    )


def test_non_hermitian_on_site_block_message_shows_the_fix() -> None:
    with pytest.raises(ModelError) as info:
        ts.TightBinding(2, 2).add((0, 0), [[0, 0.5], [0, 0]])
    text = str(info.value)
    assert "must be Hermitian" in text and "added once" in text
    assert "[[0, v], [conj(v), 0]], not [[0, v], [0, 0]]" in text


def test_kane_mele_default_gap_is_six_root_three_spin_orbit() -> None:
    model = ts.models.kane_mele()
    ds = ts.invariants(model, 2)
    assert float(ds.gap_direct) == pytest.approx(6 * np.sqrt(3) * model.defaults["spin_orbit"],
                                                 abs=1e-5)  # fmt: skip
    assert int(ds.nu0) == 1
