"""Physics acceptance: the spinful square-lattice (BHZ-type) model.

Source: Qi, Wu & Zhang, Phys. Rev. B 74, 085308 (2006): h(k) = sin k_x σ_x + sin k_y σ_y
+ (m + cos k_x + cos k_y) σ_z has Chern number ±1 for 0 < |m| < 2 and 0 for |m| > 2; with its
time-reversed partner (Bernevig, Hughes & Zhang, Science 314, 1757 (2006)) the Z2 index is 1
for 0 < |m| < 2 and 0 for |m| > 2. Every call uses the DEFAULT sampling of ``invariants``.
"""

from __future__ import annotations

import numpy as np
import pytest
import toposweep as ts

MODEL = ts.models.bhz()


def qwz_spinful(kappa: np.ndarray, m: float) -> np.ndarray:
    """h(k) ⊕ h*(−k) written out with numpy from the published form (spin slowest)."""
    kx, ky = 2 * np.pi * kappa[:, 0], 2 * np.pi * kappa[:, 1]
    sx = np.array([[0, 1], [1, 0]], complex)
    sy = np.array([[0, -1j], [1j, 0]])
    sz = np.diag([1.0, -1.0]).astype(complex)
    h = (
        np.sin(kx)[:, None, None] * sx
        + np.sin(ky)[:, None, None] * sy
        + (m + np.cos(kx) + np.cos(ky))[:, None, None] * sz
    )
    partner = np.conj(
        -np.sin(kx)[:, None, None] * sx
        - np.sin(ky)[:, None, None] * sy
        + (m + np.cos(kx) + np.cos(ky))[:, None, None] * sz
    )  # h*(−k)
    out = np.zeros((len(kappa), 4, 4), complex)
    out[:, :2, :2], out[:, 2:, 2:] = h, partner
    return out


def test_hamiltonian_is_the_published_qwz_pair(rng):
    """The builtin H(κ) equals h(k) ⊕ h*(−k) written out with numpy, matrix by matrix."""
    kappa = rng.random((100, 2))
    for m in (-2.7, -0.4, 1.3):
        got = MODEL.hamiltonian(kappa, {"mass": m})
        np.testing.assert_allclose(got, qwz_spinful(kappa, m), atol=1e-12)


# Qi, Wu & Zhang, PRB 74, 085308 (2006): Z2 = 1 for 0 < |m| < 2, 0 for |m| > 2. The points
# m = ±1.9, ±2.1, ±0.1 have a direct gap of 0.2, about 2.5 % of the bandwidth (≈ 8).
@pytest.mark.parametrize(
    ("mass", "z2"),
    [
        (-3.0, 0),
        (-2.1, 0),
        (-1.9, 1),
        (-1.0, 1),
        (-0.1, 1),
        (0.1, 1),
        (1.0, 1),
        (1.9, 1),
        (2.1, 0),
        (3.0, 0),
    ],
)
def test_z2_against_qi_wu_zhang(mass, z2):
    ds = ts.invariants(MODEL, filling=2, params={"mass": mass})
    assert int(ds.nu0) == z2, f"m = {mass}: got {int(ds.nu0)} (reason {int(ds.undefined_reason)})"
    assert int(ds.undefined_reason) == 0
    assert int(ds.nu0_parity) == z2  # Fu & Kane, PRB 76, 045302 (2007)
    assert int(ds.phase) == (3 if z2 else 0)


@pytest.mark.parametrize("mass", [-2.0, 0.0, 2.0])
def test_gap_closings_are_undefined(mass):
    """At m = 0, ±2 the gap closes at TRIMs (QWZ 2006): no index may be reported."""
    ds = ts.invariants(MODEL, filling=2, params={"mass": mass})
    assert int(ds.nu0) == -1
    assert int(ds.undefined_reason) in (1, 2)  # gapless on sampled κ / degenerate at a TRIM
