"""Physics acceptance: the cubic d–f lattice model (heavy-fermion band inversion).

Band inversion of an even (d) and an odd (f) band at the three X points of a simple cubic
lattice gives a strong topological insulator with ν0 = 1 (common practice, no source); by the
Fu–Kane criterion (Fu & Kane, Phys. Rev. B 76, 045302 (2007)) the weak indices are then
(111). The expected indices are derived here from numpy alone: the d and f levels at each
TRIM say which TRIMs are inverted, the numpy eigenvectors of the occupied pair give the
parity at each TRIM, and the two must match before they are compared with the engine.
Every index comes from the DEFAULT sampling of ``invariants``.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
import toposweep as ts

MODEL = ts.models.df_lattice()
TRIMS = np.array(list(itertools.product((0.0, 0.5), repeat=3)))
X_POINTS = np.array([[0.5, 0, 0], [0, 0.5, 0], [0, 0, 0.5]])
D, F = slice(0, 2), slice(2, 4)  # orbital ⊗ spin, orbital slowest


def inverted_trims(params: dict[str, float]) -> np.ndarray:
    """True at the TRIMs where the d level lies below the f level (numpy, from H's diagonal;
    the hybridisation ∝ sin k vanishes at the TRIMs)."""
    h = MODEL.hamiltonian(TRIMS, params)
    np.testing.assert_allclose(h[:, D, F], 0, atol=1e-12)
    e_d = np.linalg.eigvalsh(h[:, D, D])[:, 0]
    e_f = np.linalg.eigvalsh(h[:, F, F])[:, 0]
    assert np.all(np.abs(e_d - e_f) > 1e-6), "a TRIM sits at a gap closing"
    return e_d < e_f


def occupied_parities(params: dict[str, float]) -> np.ndarray:
    """⟨ψ|P|ψ⟩ of the lowest Kramers pair at each TRIM, from numpy eigenvectors."""
    _, v = np.linalg.eigh(MODEL.hamiltonian(TRIMS, params))
    occ = v[:, :, :2]
    xi = np.einsum("kai,ab,kbi->ki", occ.conj(), MODEL.inversion, occ).real
    np.testing.assert_allclose(np.abs(xi), 1, atol=1e-8)
    np.testing.assert_allclose(xi[:, 0], xi[:, 1], atol=1e-8)  # Kramers partners agree
    return xi[:, 0]


def indices_from_parities(delta: np.ndarray) -> tuple[int, list[int]]:
    nu0 = int(np.prod(delta) < 0)
    return nu0, [int(np.prod(delta[TRIMS[:, i] == 0.5]) < 0) for i in range(3)]


def test_hamiltonian_is_the_documented_form(rng):
    """H(k) written out with numpy from the docstring's formula."""
    p = {"d_hopping": 0.3, "f_hopping": -0.04, "f_level": -0.6, "hybridisation": 0.2}
    kappa = rng.random((50, 3))
    k = 2 * np.pi * kappa
    c, s = np.cos(k), np.sin(k)
    g = -2 * c.sum(1) + 1.5 * (c[:, 0] * c[:, 1] + c[:, 1] * c[:, 2] + c[:, 2] * c[:, 0])
    pauli = [np.array([[0, 1], [1, 0]]), np.array([[0, -1j], [1j, 0]]), np.diag([1, -1])]
    hyb = p["hybridisation"] * sum(s[:, i, None, None] * pauli[i] for i in range(3))
    want = np.zeros((50, 4, 4), complex)
    want[:, D, D] = (p["d_hopping"] * g)[:, None, None] * np.eye(2)
    want[:, F, F] = (p["f_level"] + p["f_hopping"] * g)[:, None, None] * np.eye(2)
    want[:, D, F] = want[:, F, D] = hyb
    np.testing.assert_allclose(MODEL.hamiltonian(kappa, p), want, atol=1e-12)


def test_symmetries_hold(rng):
    kappa = rng.random((20, 3))
    params = {"f_level": -0.3, "hybridisation": 0.4}
    hp, hm = MODEL.hamiltonian(kappa, params), MODEL.hamiltonian(-kappa, params)
    ut, p = MODEL.time_reversal, MODEL.inversion
    np.testing.assert_allclose(ut @ hp.conj() @ ut.conj().T, hm, atol=1e-12)
    np.testing.assert_allclose(p @ hp @ p.conj().T, hm, atol=1e-12)


def test_defaults_invert_the_bands_at_the_three_x_points_only():
    inv = inverted_trims(MODEL.defaults)
    at_x = [any(np.allclose(t, x) for x in X_POINTS) for t in TRIMS]
    assert inv.tolist() == at_x


def test_defaults_are_a_strong_ti_with_a_real_gap():
    """Band inversion at the three X points → ν0 = 1 (common practice, no source)."""
    ds = ts.invariants(MODEL, filling=2)
    assert (int(ds.nu0), ds.nu.values.tolist()) == (1, [1, 1, 1])
    assert (int(ds.nu0_parity), int(ds.parity_agrees)) == (1, 1)
    assert float(ds.gap_direct) > 0.03 * float(ds.bandwidth)  # a few per cent or more


# f levels in each window of the module docstring (Δ = t_d − t_f = 0.3 at the defaults), and
# 0.05 eV (≈ 1 % of the bandwidth) inside the window edges around the strong phase.
@pytest.mark.parametrize("f_level", [-1.6, -1.1, -1.0, -0.75, -0.5, -0.4, -0.1, 0.2, 1.0, 3.0, 3.5])
def test_indices_follow_the_inverted_trims(f_level):
    params = {"f_level": f_level}
    inv = inverted_trims(params)
    parities = occupied_parities(params)
    # parity of the occupied pair: +1 (d, even) where inverted, −1 (f, odd) elsewhere
    np.testing.assert_allclose(parities, np.where(inv, 1.0, -1.0), atol=1e-8)
    want = indices_from_parities(parities)
    ds = ts.invariants(MODEL, filling=2, params=params)
    assert int(ds.undefined_reason) == 0, f"ε_f = {f_level}: reason {int(ds.undefined_reason)}"
    assert (int(ds.nu0), ds.nu.values.tolist()) == want, f"ε_f = {f_level}"
    assert (int(ds.nu0_parity), ds.nu_parity.values.tolist()) == want


def test_trivial_side_without_inversion():
    """f level below the whole d band: nothing inverted, (0;000)."""
    params = {"f_level": -1.6}
    assert not inverted_trims(params).any()
    ds = ts.invariants(MODEL, filling=2, params=params)
    assert (int(ds.nu0), ds.nu.values.tolist(), int(ds.phase)) == (0, [0, 0, 0], 0)


@pytest.mark.parametrize("v", [0.05, 0.5])
def test_hybridisation_strength_does_not_move_the_phase(v):
    """V acts only away from the TRIMs, so any V ≠ 0 keeps the X-inverted phase."""
    ds = ts.invariants(MODEL, filling=2, params={"hybridisation": v})
    assert (int(ds.nu0), ds.nu.values.tolist()) == (1, [1, 1, 1])


def direct_gap_on_grid(params: dict[str, float], n: int = 24) -> float:
    """numpy: smallest E₃ − E₂ on an n³ grid (the bands are Kramers pairs everywhere here)."""
    g = np.arange(n) / n
    kappa = np.stack(np.meshgrid(g, g, g, indexing="ij"), -1).reshape(-1, 3)
    e = np.linalg.eigvalsh(MODEL.hamiltonian(kappa, params))
    return float((e[:, 2] - e[:, 1]).min())


def test_random_parameters_match_the_inverted_trims():
    """Random d–f models with a clearly open gap: engine = parity product of the inverted
    TRIMs, whichever TRIMs those are (numpy alone fixes the expected indices)."""
    rng = np.random.default_rng(314)
    seen: set[tuple[int, tuple[int, ...]]] = set()
    checked = 0
    while checked < 24:
        params = {
            "d_hopping": rng.uniform(0.1, 0.5),
            "f_hopping": rng.uniform(-0.15, 0.15),
            "f_level": rng.uniform(-2.5, 2.5),
            "hybridisation": rng.uniform(0.05, 0.5),
        }
        e_trim = np.linalg.eigvalsh(MODEL.hamiltonian(TRIMS, params))
        bandwidth = float(e_trim.max() - e_trim.min())
        if direct_gap_on_grid(params) < 0.02 * bandwidth:
            continue  # too close to a transition for a fixed-seed test to be fair
        want = indices_from_parities(np.where(inverted_trims(params), 1.0, -1.0))
        ds = ts.invariants(MODEL, filling=2, params=params)
        assert (int(ds.nu0), ds.nu.values.tolist()) == want, params
        seen.add((want[0], tuple(want[1])))
        checked += 1
    assert len(seen) >= 3  # the draw really visits several phases
