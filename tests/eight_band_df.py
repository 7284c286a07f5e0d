"""An 8-band cubic d–f model (two d and two f orbitals with spin), built for the tests.

H(k) = [[E_d(k) ⊗ 1, V Σ_i sin k_i M ⊗ s_i], [V Σ_i sin k_i Mᵀ ⊗ s_i, E_f(k) ⊗ 1]] in the basis
orbital ⊗ spin (orbital slowest: d1, d2, f1, f2), simple cubic lattice, k = 2πκ, with 2×2
orbital matrices

    E_d(k) = L_d − 2 Σ_i cos k_i T_d,    E_f(k) = ε_f 1 + L_f − 2 Σ_i cos k_i T_f,

(real symmetric level matrices L and nearest-neighbour hopping matrices T, inter-orbital
entries included) and a real 2×2 hybridisation matrix M between the d and the f orbitals.
All values are our own invention (no published parameter set); the construction — a wide even
band, a narrow odd band, an odd-in-k hybridisation — is common practice, no source.

Symmetries: time reversal Θ = 1 ⊗ iσ_y K (real orbital matrices, sin k odd), inversion
P = diag(+1, +1, −1, −1) ⊗ 1 (d even, f odd; the hybridisation is odd in k). P and Θ together
make every band a Kramers pair at every κ.

Why bands 4 and 5 touch at generic κ (on lines): the hoppings depend on κ only through
c = Σ_i cos k_i, and a spin rotation R turns Σ_i sin k_i s_i into |sin k| s_z (it acts on
the spin of every orbital alike, so it leaves the spin-independent blocks alone). The
spectrum therefore depends on (c, |sin k|) only, and there H splits into two real symmetric
4×4 blocks (spin up and down along the rotated axis). Two eigenvalues of a real symmetric
matrix meet where two conditions hold (von Neumann & Wigner, Phys. Z. 30, 467 (1929), from
memory): at isolated points of the (c, |sin k|) plane, i.e. on closed lines in κ, for a whole
range of f levels — no fine tuning. ``tests/test_gapless_generic.py`` finds them with scipy.
Terms: ``f_level`` (ε_f) and ``hybridisation`` (V); everything else is fixed.
"""

from __future__ import annotations

import numpy as np
import toposweep as ts

__all__ = ["D_LEVELS", "F_LEVELS", "HYBRIDISATION_MATRIX", "INVERSION", "eight_band_df"]

S0 = np.eye(2, dtype=complex)
SX = np.array([[0, 1], [1, 0]], dtype=complex)
SY = np.array([[0, -1j], [1j, 0]], dtype=complex)
SZ = np.array([[1, 0], [0, -1]], dtype=complex)

#: on-site d levels (d1, d2) and their mixing
D_LEVELS = np.array([[0.0, 0.1], [0.1, 0.6]])
#: nearest-neighbour d hopping matrix (the band is −2 Σ cos k_i T_d: wide, curving up)
D_HOPPING = np.array([[1.0, 0.15], [0.15, 0.7]])
#: on-site f levels relative to ε_f
F_LEVELS = np.array([[0.0, 0.05], [0.05, 0.35]])
#: nearest-neighbour f hopping (narrow, curving down)
F_HOPPING = np.array([[-0.12, 0.03], [0.03, -0.07]])
#: d–f hybridisation matrix M (rows d, columns f)
HYBRIDISATION_MATRIX = np.array([[1.0, 0.35], [-0.25, 0.8]])
#: inversion: d even, f odd
INVERSION = np.kron(np.diag([1.0, 1.0, -1.0, -1.0]), S0).astype(complex)


def _block(dd: np.ndarray | None = None, ff: np.ndarray | None = None) -> np.ndarray:
    out = np.zeros((4, 4), dtype=complex)
    if dd is not None:
        out[:2, :2] = dd
    if ff is not None:
        out[2:, 2:] = ff
    return out


def eight_band_df(*, f_level: float = 3.0, hybridisation: float = 0.2) -> ts.TightBinding:
    """Build the 8-band model (orbital ⊗ spin) with terms ``f_level`` and ``hybridisation``."""
    m = ts.TightBinding(
        3,
        8,
        lattice=np.eye(3),
        time_reversal=np.kron(np.eye(4), 1j * SY),
        inversion=INVERSION,
        name="8-band cubic d-f test model",
    )
    m.add((0, 0, 0), np.kron(_block(D_LEVELS, F_LEVELS), S0))
    m.add((0, 0, 0), np.kron(_block(ff=np.eye(2)), S0), term="f_level")
    for axis, s in enumerate((SX, SY, SZ)):
        r = [0, 0, 0]
        r[axis] = 1
        # −2 cos k T = T' e^{ik} + T'† e^{−ik} with T' = −T
        m.add(tuple(r), -np.kron(_block(D_HOPPING, F_HOPPING), S0))
        # V sin k [[0, M s], [Mᵀ s, 0]] = T' e^{ik} + h.c. with T' = −(i/2) [[0, M s], [Mᵀ s, 0]]
        hyb = np.zeros((8, 8), dtype=complex)
        hyb[:4, 4:] = np.kron(HYBRIDISATION_MATRIX, s)
        hyb[4:, :4] = np.kron(HYBRIDISATION_MATRIX.T, s)
        m.add(tuple(r), -0.5j * hyb, term="hybridisation")
    m.defaults = {"f_level": float(f_level), "hybridisation": float(hybridisation)}
    return m


def numpy_hamiltonian(kappa: np.ndarray, f_level: float, hybridisation: float) -> np.ndarray:
    """The module docstring's H(κ) written out with NumPy (κ of shape (N, 3))."""
    k = 2 * np.pi * np.atleast_2d(kappa)
    c = np.cos(k).sum(axis=1)
    n = len(k)
    h = np.zeros((n, 8, 8), dtype=complex)
    e_d = D_LEVELS[None] - 2 * c[:, None, None] * D_HOPPING[None]
    e_f = (f_level * np.eye(2) + F_LEVELS)[None] - 2 * c[:, None, None] * F_HOPPING[None]
    h[:, :4, :4] = np.einsum("nab,ij->naibj", e_d, S0).reshape(n, 4, 4)
    h[:, 4:, 4:] = np.einsum("nab,ij->naibj", e_f, S0).reshape(n, 4, 4)
    spin = np.einsum("ni,ijk->njk", np.sin(k), np.array([SX, SY, SZ]))
    hyb = hybridisation * np.einsum("ab,nij->naibj", HYBRIDISATION_MATRIX, spin).reshape(n, 4, 4)
    h[:, :4, 4:] = hyb
    h[:, 4:, :4] = np.conj(np.transpose(hyb, (0, 2, 1)))
    return h
