"""Property tests (hypothesis) of the band-shift bound behind phase-map proofs.

Weyl's inequality (a handbook fact: eigenvalues of A + E lie within ‖E‖₂ of those of A, in
order) turns ‖H(κ; p) − H(κ; p′)‖₂ ≤ δ(p, p′) = Σ_term |Δc_term| B_term into a bound on every
band's motion. Checked against ``numpy.linalg.eigvalsh`` of Bloch Hamiltonians summed with
NumPy (``tests/random_models.py``), on random affine models, random p, p′ and random κ; and
adaptive maps of random symmetric models never disagree with the uniform sweep at the points
they prove (with the NumPy stand-in bound of ``tests/proven_gap.py`` as ``gap_proven``).
"""

from __future__ import annotations

import sys
from importlib import import_module
from pathlib import Path

import numpy as np
import toposweep as ts
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from toposweep.maps.weyl_bound import band_shift_bounds, term_norm_bounds

sys.path.insert(0, str(Path(__file__).resolve().parent))
from proven_gap import with_proven_gap  # noqa: E402
from random_models import bloch_hamiltonian, random_model  # noqa: E402

sweep_module = import_module("toposweep.sweep")


def _random_affine(rng: np.random.Generator, dim: int, norb: int, nterms: int) -> ts.TightBinding:
    """Random Hermitian on-site parts and hoppings up to two cells away, in several terms."""
    m = ts.TightBinding(dim, norb)
    names = [f"c{i}" for i in range(nterms)]
    for term in [None, *names]:
        for _ in range(int(rng.integers(1, 5))):
            r = tuple(int(x) for x in rng.integers(-2, 3, size=dim))
            t = rng.normal(size=(norb, norb)) + 1j * rng.normal(size=(norb, norb))
            if not any(r):
                t = t + t.conj().T
            m.add(r, t, term=term)
    for name in names:  # a term may lack hoppings by chance; give each at least one
        m.add((0,) * dim, np.diag(rng.normal(size=norb)), term=name)
    m.defaults = dict.fromkeys(names, 0.0)
    return m


@settings(max_examples=40, deadline=None, derandomize=True)
@given(
    seed=st.integers(0, 2**31),
    dim=st.sampled_from([2, 3]),  # (models are 2D or 3D: a 1D model is refused when built)
    norb=st.integers(1, 6),
    nterms=st.integers(1, 4),
)
def test_no_band_moves_further_than_the_bound(seed: int, dim: int, norb: int, nterms: int) -> None:
    rng = np.random.default_rng(seed)
    model = _random_affine(rng, dim, norb, nterms)
    bounds = term_norm_bounds(model)
    assert bounds is not None and bounds.shape == (nterms,)
    p, q = rng.normal(scale=2.0, size=(2, nterms))
    kappa = rng.random((16, dim))
    names = list(model.terms)
    hp = bloch_hamiltonian(model, kappa, dict(zip(names, p, strict=True)))
    hq = bloch_hamiltonian(model, kappa, dict(zip(names, q, strict=True)))
    shift = np.abs(np.linalg.eigvalsh(hp) - np.linalg.eigvalsh(hq)).max()
    delta = float(band_shift_bounds(p, q, bounds))
    assert shift <= delta * (1 + 1e-12) + 1e-12
    # and each term alone: ‖H_term(κ)‖₂ ≤ B_term at every κ
    zero = dict.fromkeys(names, 0.0)
    h0 = bloch_hamiltonian(model, kappa, zero)
    for j, name in enumerate(names):
        hj = bloch_hamiltonian(model, kappa, {**zero, name: 1.0}) - h0
        assert np.linalg.norm(hj, 2, axis=(1, 2)).max() <= bounds[j] * (1 + 1e-12) + 1e-12


@settings(
    max_examples=4,
    deadline=None,
    derandomize=True,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture],
)
@given(seed=st.integers(0, 10_000))
def test_maps_never_disagree_with_the_sweep_at_proven_points(seed: int, monkeypatch) -> None:
    rm = random_model(seed, dim=2, norb=4, coupling=0.4)
    grid = {"coupling": np.linspace(0.0, 6.0, 33)}
    sweep = ts.sweep(rm.model, grid, rm.filling, progress=False)
    with monkeypatch.context() as mp:
        wrapped = with_proven_gap(sweep_module.run_points, rm.model, rm.filling, points=32)
        mp.setattr(sweep_module, "run_points", wrapped)
        pm = ts.phase_map(rm.model, grid, rm.filling, progress=False, coarse_step=8)
    proven = pm.obtained.values == 1
    defined = sweep.undefined_reason.values == 0
    assert not (proven & defined & (pm.nu0.values != sweep.nu0.values)).any()
    assert not (proven & (pm.phase.values < 0)).any()
    evaluated = pm.obtained.values == 0
    np.testing.assert_array_equal(pm.nu0.values[evaluated], sweep.nu0.values[evaluated])


@settings(
    max_examples=4,
    deadline=None,
    derandomize=True,
    suppress_health_check=[HealthCheck.too_slow],
)
@given(seed=st.integers(0, 10_000))
def test_maps_with_the_cores_own_proofs_never_disagree_at_proven_points(seed: int) -> None:
    """The same with the proofs the map asks the core for (no stand-in): proven points carry
    the sweep's indices, and every proven bound lies under the gap NumPy samples there."""
    rm = random_model(seed, dim=2, norb=4, coupling=0.4)
    grid = {"coupling": np.linspace(0.0, 6.0, 33)}
    sweep = ts.sweep(rm.model, grid, rm.filling, progress=False)
    pm = ts.phase_map(rm.model, grid, rm.filling, progress=False, coarse_step=8, proven_only=True)
    proven = pm.obtained.values == 1
    defined = sweep.undefined_reason.values == 0
    assert not (proven & defined & (pm.nu0.values != sweep.nu0.values)).any()
    assert not (proven & (pm.phase.values < 0)).any()
    assert (pm.obtained.values != 2).all()  # proven_only: nothing filled
    for i in np.flatnonzero(proven)[::4]:
        params = {"coupling": float(grid["coupling"][i])}
        k = np.stack(np.meshgrid(*[np.arange(48) / 48] * 2, indexing="ij"), -1).reshape(-1, 2)
        e = np.linalg.eigvalsh(bloch_hamiltonian(rm.model, k, params))
        sampled = float((e[:, rm.filling] - e[:, rm.filling - 1]).min())
        assert 0 < pm.gap_bound.values[i] <= sampled + 1e-12
