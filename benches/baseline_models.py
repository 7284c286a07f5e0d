"""Larger time-reversal-symmetric test models with a known answer, for benchmarks and checks.

``stacked_wilson_dirac(copies, seed)`` puts ``copies`` cubic Wilson–Dirac blocks (4 bands each)
with different masses side by side, couples them with random time-reversal-symmetric on-site
and nearest-neighbour hoppings (small against the gap, so the indices stay those of the sum),
and hides the block structure with a random unitary change of orbital basis. The Z2 indices of
decoupled blocks add mod 2; the Wilson–Dirac phases are those of Fu & Kane, Phys. Rev. B 76,
045302 (2007). The result is a dense ``4·copies``-band model with every matrix element used.
"""

from __future__ import annotations

import numpy as np
import toposweep as ts

#: block masses, cycled; phases (1;000), (0;111), (0;000), (0;111), (1;111): 4 copies give
#: (1;000), 16 copies (1;111)
MASSES = (-2.0, 0.5, -4.0, 0.5, 2.2)


def _phase_of_mass(m: float) -> tuple[int, tuple[int, int, int]]:
    if abs(m) > 3:
        return 0, (0, 0, 0)
    if m < -1:
        return 1, (0, 0, 0)
    if m < 1:
        return 0, (1, 1, 1)
    return 1, (1, 1, 1)


def expected_indices(copies: int) -> tuple[int, list[int]]:
    """(ν0, [ν1, ν2, ν3]) of the decoupled stack: each index adds mod 2."""
    nu0, nu = 0, np.zeros(3, int)
    for c in range(copies):
        a, b = _phase_of_mass(MASSES[c % len(MASSES)])
        nu0 += a
        nu += b
    return nu0 % 2, (nu % 2).tolist()


def _random_unitary(rng: np.random.Generator, n: int) -> np.ndarray:
    q, r = np.linalg.qr(rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n)))
    return q * (np.diag(r) / np.abs(np.diag(r)))


def stacked_wilson_dirac(copies: int, seed: int = 1, coupling: float = 0.1) -> ts.TightBinding:
    """A dense 4·``copies``-band time-reversal-symmetric model (no inversion attached)."""
    rng = np.random.default_rng(seed)
    block = ts.models.wilson_dirac()
    n = 4 * copies
    # block-diagonal hoppings, one block per copy, with its own mass
    hops: dict[tuple[int, ...], np.ndarray] = {}
    for c in range(copies):
        pt = {"mass": MASSES[c % len(MASSES)], "hopping": 1.0}
        sl = slice(4 * c, 4 * c + 4)
        for r, t, term in block.hoppings():
            h = hops.setdefault(r, np.zeros((n, n), complex))
            h[sl, sl] += (1.0 if term is None else pt[term]) * t
    # time reversal of the stack: U_T of every block on the diagonal
    u_t = np.kron(np.eye(copies), block.time_reversal)
    for r in list(hops):
        x = coupling / np.sqrt(n) * (rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n)))
        if not any(r):
            x = 0.5 * (x + x.conj().T)
        # Θ-symmetric part: U_T X* U_T† at the same R (see the periodic-convention Bloch sum)
        hops[r] += 0.5 * (x + u_t @ x.conj() @ u_t.conj().T)
    v = _random_unitary(rng, n)
    model = ts.TightBinding(
        3, n, time_reversal=v @ u_t @ v.T, name=f"{copies} coupled Wilson-Dirac blocks"
    )
    for r, h in hops.items():
        hv = v @ h @ v.conj().T
        if not any(r):
            hv = 0.5 * (hv + hv.conj().T)
        model.add(r, hv, term=None)
    model.add((0, 0, 0), np.eye(n), term="shift")
    model.defaults = {"shift": 0.0}
    return model


def wilson_dirac_without_inversion(strength: float = 0.3) -> ts.TightBinding:
    """Wilson–Dirac with an on-site σ_x ⊗ 1 term of the given strength (term ``breaking``).

    σ_x ⊗ 1 is even under time reversal (U_T = 1 ⊗ iσ_y) and odd under inversion (P = σ_z ⊗ 1),
    so the bands are no longer Kramers-degenerate away from the TRIMs and every κ point takes the
    generic 4×4 eigensolver. Below the gap closing the indices stay those of the symmetric model
    (adiabatic continuity, common practice, no source): (1;000) at m = −2, t = 1 for
    strength 0.3, whose direct gap stays open (checked by ``compare`` against NumPy).
    """
    wd = ts.models.wilson_dirac()
    model = ts.TightBinding(3, 4, time_reversal=wd.time_reversal, name="Wilson-Dirac, no inversion")
    for r, t, term in wd.hoppings():
        model.add(r, t, term)
    sx = np.array([[0.0, 1.0], [1.0, 0.0]])
    model.add((0, 0, 0), np.kron(sx, np.eye(2)), term="breaking")
    model.defaults = {**wd.defaults, "breaking": strength}
    return model
