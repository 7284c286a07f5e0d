"""Physics acceptance: the Fu–Kane–Mele diamond-lattice model.

Source: Fu, Kane & Mele, Phys. Rev. Lett. 98, 106803 (2007): with the [111] bond dimerised,
δt > 0 gives the strong phase (1;111) and δt < 0 the weak phase (0;111) in the fcc reduced
basis; δt = 0 is gapless (Dirac points at the X points). Our basis: a₁ = (0, ½, ½),
a₂ = (½, 0, ½), a₃ = (½, ½, 0), A at 0, B at (¼, ¼, ¼); the dimerised bond is the A–B bond
inside the cell. The sign is checked independently from the parities of the occupied states
at the eight TRIMs computed with numpy (Fu & Kane, Phys. Rev. B 76, 045302 (2007)).
Every index comes from the DEFAULT sampling of ``invariants``.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import toposweep as ts

MODEL = ts.models.fu_kane_mele()
TRIMS = np.array(list(itertools.product((0.0, 0.5), repeat=3)))


def numpy_parity_indices(params: dict[str, float]) -> tuple[int, list[int]]:
    """Fu–Kane indices from numpy eigenvectors at the TRIMs (one state per Kramers pair)."""
    h = MODEL.hamiltonian(TRIMS, params)
    e, v = np.linalg.eigh(h)
    occ = v[:, :, :2]
    p = MODEL.inversion
    xi = np.einsum("kai,ab,kbi->ki", occ.conj(), p, occ).real  # ⟨ψ|P|ψ⟩ = ±1
    assert np.allclose(np.abs(xi), 1, atol=1e-8), "occupied states are not parity eigenstates"
    delta = xi[:, 0]  # Kramers partners share the parity
    nu0 = int(np.prod(delta) < 0)
    nu = [int(np.prod(delta[TRIMS[:, i] == 0.5]) < 0) for i in range(3)]
    return nu0, nu


def test_spin_orbit_vanishes_at_trims_and_h_is_f_tau_x():
    """At the TRIMs H = f τ_x ⊗ 1, f = t + δt + t Σ_i e^{−2πiκ_i} (real there): the form the
    phase argument of the module docstring rests on."""
    t, dt = 0.9, 0.3
    h = MODEL.hamiltonian(TRIMS, {"hopping": t, "dimerisation": dt, "spin_orbit": 0.17})
    f = t + dt + t * np.exp(-2j * np.pi * TRIMS).sum(axis=1)
    tau_x = np.kron(np.array([[0, 1], [1, 0]]), np.eye(2))
    np.testing.assert_allclose(h, f.real[:, None, None] * tau_x, atol=1e-12)


def test_time_reversal_and_inversion_hold(rng):
    kappa = rng.random((20, 3))
    params = {"spin_orbit": 0.13, "dimerisation": -0.2}
    hp, hm = MODEL.hamiltonian(kappa, params), MODEL.hamiltonian(-kappa, params)
    ut, p = MODEL.time_reversal, MODEL.inversion
    np.testing.assert_allclose(ut @ hp.conj() @ ut.conj().T, hm, atol=1e-12)
    np.testing.assert_allclose(p @ hp @ p.conj().T, hm, atol=1e-12)


# Fu, Kane & Mele, PRL 98, 106803 (2007): δt > 0 → (1;111), δt < 0 → (0;111).
# |δt| = 0.1 leaves a direct gap of 0.2, 2.5 % of the bandwidth (≈ 8).
@pytest.mark.parametrize("dt", [-0.6, -0.1, 0.1, 0.6])
@pytest.mark.parametrize("lso", [0.06, 0.15])
def test_dimerisation_sign_sets_the_phase(dt, lso):
    params = {"dimerisation": dt, "spin_orbit": lso}
    want = (1, [1, 1, 1]) if dt > 0 else (0, [1, 1, 1])
    assert numpy_parity_indices(params) == want  # outside check of the sign convention
    ds = ts.invariants(MODEL, filling=2, params=params)
    assert int(ds.undefined_reason) == 0, f"reason {int(ds.undefined_reason)}"
    assert (int(ds.nu0), ds.nu.values.tolist()) == want
    assert (int(ds.nu0_parity), ds.nu_parity.values.tolist()) == want
    assert int(ds.phase) == (2 if dt > 0 else 1)


def test_no_dimerisation_is_gapless_and_undefined():
    ds = ts.invariants(MODEL, filling=2, params={"dimerisation": 0.0})
    assert int(ds.nu0) == -1
    assert np.all(ds.nu.values == -1)
    assert int(ds.undefined_reason) in (1, 2)
    assert float(ds.gap_direct) < 1e-9
