"""The reported direct gap is the model's minimum over κ, not the minimum over sampled κ.

The models put their band touchings (or smallest gaps) at irrational reduced coordinates that
no Wilson loop, pump line or bulk-grid point samples. For H = diag(h(κ), h*(−κ)) with
h = d(κ)·σ and d even in κ, the spectrum is ±|d(κ)| twice, so the direct gap at filling 2 is
2|d(κ)| (eigenvalues of a 2×2 Hermitian matrix: common practice, no source). The brute-force
reference evaluates the same Hamiltonian written out with numpy on a dense grid and
diagonalises it with ``numpy.linalg.eigvalsh``.
"""

from __future__ import annotations

import numpy as np
import pytest
import toposweep as ts
from toposweep.models._matrices import kron, s0, spin_time_reversal, sx, sy, sz

# irrational positions of the smallest gap (reduced coordinates)
A, B, C = (np.sqrt(5) - 1) / 4, 1 / np.pi, np.sqrt(2) / 5
TAU = 2 * np.pi


def cone_model_2d() -> ts.TightBinding:
    """d = (cos 2πκx − cos 2πA, m, cos 2πκy − cos 2πB): gap 2|m|, at (±A, ±B)."""
    m = ts.TightBinding(2, 4, time_reversal=kron(spin_time_reversal, s0), name="2D off-grid cones")
    m.add((0, 0), kron(s0, -np.cos(TAU * A) * sx - np.cos(TAU * B) * sz))
    # m σy in the spin-up block h, −m σy in h* (spin down): time reversal holds
    m.add((0, 0), kron(sz, sy), term="mass")
    m.add((1, 0), kron(s0, 0.5 * sx))
    m.add((0, 1), kron(s0, 0.5 * sz))
    m.defaults = {"mass": 0.0}
    return m


def cone_model_3d() -> ts.TightBinding:
    """d = (cos 2πκx − cos 2πA, m (1 + (cos 2πκz − cos 2πC)²), cos 2πκy − cos 2πB).

    |d| ≥ |m| with equality only at (±A, ±B, ±C); (cos − c)² = 1/2 + c² − 2c cos + cos(2·)/2
    needs a second-neighbour hopping along z.
    """
    m = ts.TightBinding(3, 4, time_reversal=kron(spin_time_reversal, s0), name="3D off-grid cones")
    cc = np.cos(TAU * C)
    m.add((0, 0, 0), kron(s0, -np.cos(TAU * A) * sx - np.cos(TAU * B) * sz))
    m.add((1, 0, 0), kron(s0, 0.5 * sx))
    m.add((0, 1, 0), kron(s0, 0.5 * sz))
    g = kron(sz, sy)
    m.add((0, 0, 0), (1.5 + cc**2) * g, term="mass")
    m.add((0, 0, 1), -cc * g, term="mass")
    m.add((0, 0, 2), 0.25 * g, term="mass")
    m.defaults = {"mass": 0.0}
    return m


def numpy_hamiltonian(kappa: np.ndarray, mass: float) -> np.ndarray:
    """The same models written out with numpy (2D: kappa (..., 2); 3D: (..., 3))."""
    k = TAU * kappa
    dx = np.cos(k[..., 0]) - np.cos(TAU * A)
    dz = np.cos(k[..., 1]) - np.cos(TAU * B)
    dy = mass * np.ones_like(dx)
    if kappa.shape[-1] == 3:
        dy = mass * (1 + (np.cos(k[..., 2]) - np.cos(TAU * C)) ** 2)
    up = dx[..., None, None] * sx + dy[..., None, None] * sy + dz[..., None, None] * sz
    down = dx[..., None, None] * sx - dy[..., None, None] * sy + dz[..., None, None] * sz
    h = np.zeros(kappa.shape[:-1] + (4, 4), complex)
    h[..., :2, :2] = up
    h[..., 2:, 2:] = down
    return h


def dense_min_gap(dim: int, mass: float, points: int) -> float:
    axes = [np.arange(points) / points] * dim
    kappa = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, dim)
    e = np.linalg.eigvalsh(numpy_hamiltonian(kappa, mass))
    return float(np.min(e[:, 2] - e[:, 1]))


def test_numpy_reference_is_the_same_model(rng):
    for model, dim in ((cone_model_2d(), 2), (cone_model_3d(), 3)):
        kappa = rng.random((20, dim))
        np.testing.assert_allclose(
            model.hamiltonian(kappa, {"mass": 0.37}), numpy_hamiltonian(kappa, 0.37), atol=1e-13
        )


@pytest.mark.parametrize("model", [cone_model_2d(), cone_model_3d()], ids=["2D", "3D"])
def test_closing_between_grid_points_is_undefined(model):
    ds = ts.invariants(model, filling=2)
    assert int(ds.nu0) == -1
    assert int(ds.undefined_reason) == 1  # gapless
    assert float(ds.gap_direct) < float(ds.gap_floor)
    # the touching is where the construction puts it (up to κ → −κ and mirror images; at
    # mass 0 the 3D model touches along whole lines κx = ±A, κy = ±B)
    folded = np.minimum(ds.gap_kappa.values % 1, 1 - ds.gap_kappa.values % 1)
    np.testing.assert_allclose(folded[:2], [A, B], atol=1e-4)
    # the sampled κ alone miss it: without the search and the proof the point would get indices
    blind = ts.invariants(model, filling=2, gap_starts=0, prove_gap="never")
    assert int(blind.undefined_reason) == 0
    assert float(blind.gap_direct) > 100 * float(blind.gap_floor)
    # the gap proof alone (no search) finds it too: boxes around the touching shrink until a
    # box centre's gap is under the floor, or the point stays unproven — never indices
    proof_only = ts.invariants(model, filling=2, gap_starts=0, prove_gap="always")
    assert int(proof_only.nu0) == -1
    assert int(proof_only.undefined_reason) in (1, 11)


@pytest.mark.parametrize("mass", [0.003, 0.05, 0.3])
@pytest.mark.parametrize("dim", [2, 3])
def test_gap_minimum_against_dense_numpy_grid(dim, mass):
    model = cone_model_2d() if dim == 2 else cone_model_3d()
    ds = ts.invariants(model, filling=2, params={"mass": mass})
    got = float(ds.gap_direct)
    dense = dense_min_gap(dim, mass, 250 if dim == 2 else 40)
    exact = 2 * mass
    # an evaluated gap can never be below the true minimum, and must beat any grid
    assert got >= exact * (1 - 1e-12)
    assert got <= dense
    assert got == pytest.approx(exact, rel=1e-3)
    assert int(ds.undefined_reason) == 0


def test_gap_search_can_be_switched_off_and_is_validated():
    model = cone_model_2d()
    with pytest.raises(ts.SamplingError, match="gap_starts"):
        ts.invariants(model, filling=2, params={"mass": 0.1}, gap_starts=-1)
    off = ts.invariants(model, filling=2, params={"mass": 0.1}, gap_starts=0)
    on = ts.invariants(model, filling=2, params={"mass": 0.1})
    assert float(on.gap_direct) < float(off.gap_direct)
