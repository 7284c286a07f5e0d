"""Random 3D models near a parity-changing closing are answered by the default call.

The reference is independent of the package: the Fu–Kane parity product at the eight TRIMs
(Fu & Kane, Phys. Rev. B 76, 045302 (2007)), computed with ``numpy.linalg.eigh`` in
``random_models.parity_indices``, which is exact for an inversion-symmetric insulator. The
closing is located by bisection on the coupling with that parity product alone, and its gap is
measured with NumPy/SciPy (``reference_bands.min_direct_gap``).

At 10⁻³ of the coupling from the closing these 8-band models keep a direct gap of about 2·10⁻⁴
of the bandwidth — above the 10⁻⁴ under which an undefined answer is accepted elsewhere
(``near_checks.GAP_THRESHOLD``). The default call (``prove_gap="auto"``) must then prove the gap
and answer, not leave the point undefined: with the hopping-norm bound alone the proof ran out
of its budget on both sides (reason 11); the bound from the derivatives at each box's centre
proves it.
"""

from __future__ import annotations

import numpy as np
import pytest
import reference_bands as rb
import toposweep as ts
from near_checks import GAP_THRESHOLD
from random_models import parity_indices, random_model


def _closing(case, lo: float, hi: float) -> float:  # noqa: ANN001
    """Coupling at which the parity product changes between ``lo`` and ``hi`` (bisection)."""
    left = parity_indices(case.model, case.filling, {"coupling": lo})
    assert parity_indices(case.model, case.filling, {"coupling": hi}) != left
    while hi - lo > 1e-7:  # (1e-8 of the coupling: far inside the 1e-3 asked for)
        mid = 0.5 * (lo + hi)
        try:
            here = parity_indices(case.model, case.filling, {"coupling": mid})
        except AssertionError:  # degenerate at a TRIM to 1e-8: at the closing itself
            return mid
        if here == left:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


@pytest.mark.parametrize("side", [-1, 1])
def test_random_3d_model_answered_at_1e_3_from_a_closing(side: int) -> None:
    case = random_model(7, dim=3)
    assert case.model.norb == 8
    # the model's first parity change on the coupling grid of the search (found once with
    # NumPy: between 9.7 and 9.8)
    c = _closing(case, 9.7, 9.8) * (1 + side * 1e-3)
    want = parity_indices(case.model, case.filling, {"coupling": c})
    gap = rb.min_direct_gap(rb.tight_binding_h(case.model, {"coupling": c}), 3, case.filling)
    assert GAP_THRESHOLD < gap.relative < 1e-3  # near, but above the threshold
    ds = ts.invariants(case.model, case.filling, {"coupling": c})
    got = (int(ds.nu0), tuple(int(v) for v in ds.nu.values))
    assert int(ds.undefined_reason) == 0, f"undefined (reason {int(ds.undefined_reason)})"
    assert got == want
    proven = float(ds.gap_proven)
    assert 0 < proven <= gap.gap * (1 + 1e-9)  # a proven lower bound, below the gap found
    assert np.isfinite(float(ds.gap_direct))
