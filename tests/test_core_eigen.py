"""The core's Hermitian eigensolver and Bloch assembly against numpy (reference library)."""

from __future__ import annotations

import numpy as np
import pytest
import toposweep as ts
from toposweep import _core


def random_hermitian(rng, m, n):
    a = rng.normal(size=(m, n, n)) + 1j * rng.normal(size=(m, n, n))
    return 0.5 * (a + a.conj().transpose(0, 2, 1))


def kramers_degenerate(rng, m, n):
    """Random Hermitian matrices with every eigenvalue doubly degenerate (n even), in a
    random basis: the spectra of models with time reversal and inversion."""
    half = random_hermitian(rng, m, n // 2)
    block = np.zeros((m, n, n), complex)
    block[:, 0::2, 0::2] = half
    block[:, 1::2, 1::2] = half.conj()
    q, _ = np.linalg.qr(rng.normal(size=(m, n, n)) + 1j * rng.normal(size=(m, n, n)))
    h = q @ block @ q.conj().transpose(0, 2, 1)
    return 0.5 * (h + h.conj().transpose(0, 2, 1))


@pytest.mark.parametrize("degenerate", [False, True])
@pytest.mark.parametrize("n", [1, 2, 3, 4, 6, 8, 9, 10, 12, 16, 23, 24, 32, 64])
def test_eigh_matches_numpy(rng, n, degenerate):
    if degenerate and n % 2:
        pytest.skip("Kramers pairs need an even size")
    h = kramers_degenerate(rng, 50, n) if degenerate else random_hermitian(rng, 50, n)
    e, v = _core.eigh(h)
    np.testing.assert_allclose(e, np.linalg.eigh(h)[0], atol=1e-10 * max(1, n))
    # H V = V diag(E) to near machine precision (relative to ‖H‖ ~ 2√n), V unitary
    np.testing.assert_allclose(h @ v, v * e[:, None, :], atol=1e-13 * max(4, n))
    np.testing.assert_allclose(
        v.conj().transpose(0, 2, 1) @ v, np.broadcast_to(np.eye(n), h.shape), atol=1e-13
    )


def test_assembled_hamiltonian_eigenvalues_match_numpy(rng):
    """Eigenvalues of the assembled H(κ) agree with numpy.linalg.eigh to 1e-10."""
    model = ts.models.wilson_dirac()
    kappa = rng.random((200, 3))
    h = model.hamiltonian(kappa, {"mass": -1.3, "hopping": 0.7})
    e, _ = _core.eigh(h)
    np.testing.assert_allclose(e, np.linalg.eigh(h)[0], atol=1e-10)


def test_bloch_sum_matches_closed_form(rng):
    """H(κ) = t Σ sin k_i Γ_i + (m + t Σ cos k_i) Γ_4, written out with numpy."""
    s0, sx, sy, sz = (
        np.eye(2),
        np.array([[0, 1], [1, 0]]),
        np.array([[0, -1j], [1j, 0]]),
        np.diag([1, -1]),
    )
    gam = [np.kron(sx, s) for s in (sx, sy, sz)]
    g4 = np.kron(sz, s0)
    kappa = rng.random((30, 3))
    m, t = 0.37, 1.21
    k = 2 * np.pi * kappa
    want = sum(t * np.sin(k[:, i])[:, None, None] * gam[i] for i in range(3))
    want = want + (m + t * np.cos(k).sum(axis=1))[:, None, None] * g4
    got = ts.models.wilson_dirac().hamiltonian(kappa, {"mass": m, "hopping": t})
    np.testing.assert_allclose(got, want, atol=1e-13)
