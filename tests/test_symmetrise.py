"""``toposweep.symmetrise`` against the symmetrised Hamiltonian built directly with numpy.

For Θ = U_T K the time-reversal-symmetric part of a Hamiltonian is
(H(κ) + U_T H(−κ)* U_T†)/2, for inversion (H(κ) + P H(−κ) P†)/2 (group averages, common
practice, no source); symmetrising the hoppings must give exactly these at every κ and at every
parameter value, because H is linear in the terms.
"""

from __future__ import annotations

import numpy as np
import pytest
import toposweep as ts


def noisy_wilson_dirac(rng, size=1e-4):
    """Wilson–Dirac with random, symmetry-breaking noise on every bond of both terms."""
    clean = ts.models.wilson_dirac()
    noisy = ts.TightBinding(
        3, 4, time_reversal=clean.time_reversal, inversion=clean.inversion, name="noisy"
    )
    for r, t, term in clean.hoppings():
        noise = size * (rng.normal(size=(4, 4)) + 1j * rng.normal(size=(4, 4)))
        if not any(r):
            noise = noise + noise.conj().T
        noisy.add(r, t + noise, term)
    noisy.add((1, 1, 0), size * (rng.normal(size=(4, 4)) + 1j * rng.normal(size=(4, 4))))
    noisy.defaults = dict(clean.defaults)
    return noisy


PARAMS = [{"mass": -2.0, "hopping": 1.0}, {"mass": 0.4, "hopping": 0.7}]


@pytest.mark.parametrize("params", PARAMS)
def test_time_reversal_part_matches_numpy(rng, params):
    model = noisy_wilson_dirac(rng)
    u = model.time_reversal
    k = rng.random((20, 3))
    want = 0.5 * (
        model.hamiltonian(k, params) + u @ model.hamiltonian(-k, params).conj() @ u.conj().T
    )
    got = ts.symmetrise(model).hamiltonian(k, params)
    np.testing.assert_allclose(got, want, atol=1e-14)


@pytest.mark.parametrize("params", PARAMS)
def test_both_symmetries_match_numpy(rng, params):
    model = noisy_wilson_dirac(rng)
    u, p = model.time_reversal, model.inversion
    k = rng.random((20, 3))

    def h(kk):
        return model.hamiltonian(kk, params)

    def tr(f):
        return lambda kk: 0.5 * (f(kk) + u @ f(-kk).conj() @ u.conj().T)

    def inv(f):
        return lambda kk: 0.5 * (f(kk) + p @ f(-kk) @ p.conj().T)

    want = inv(tr(h))(k)
    got = ts.symmetrise(model, inversion=True).hamiltonian(k, params)
    np.testing.assert_allclose(got, want, atol=1e-14)


def test_symmetric_models_come_back_unchanged_and_twice_is_once(rng):
    clean = ts.models.wilson_dirac()
    k = rng.random((10, 3))
    once = ts.symmetrise(clean, inversion=True)
    np.testing.assert_allclose(once.hamiltonian(k, PARAMS[1]), clean.hamiltonian(k, PARAMS[1]))
    noisy = ts.symmetrise(noisy_wilson_dirac(rng), inversion=True)
    twice = ts.symmetrise(noisy, inversion=True)
    np.testing.assert_allclose(twice.hamiltonian(k, PARAMS[0]), noisy.hamiltonian(k, PARAMS[0]))
    assert once.terms == clean.terms and once.defaults == clean.defaults


# Fu & Kane, Phys. Rev. B 76, 045302 (2007): (1;000) for −3 < m < −1, (0;111) for |m| < 1.
@pytest.mark.parametrize(("mass", "nu0", "nu"), [(-2.0, 1, [0, 0, 0]), (0.4, 0, [1, 1, 1])])
def test_noisy_model_gets_the_clean_indices_after_symmetrising(rng, mass, nu0, nu):
    noisy = noisy_wilson_dirac(rng)
    with pytest.warns(ts.SymmetryWarning, match="only nearly symmetric"):
        ts.invariants(noisy, 2, {"mass": mass}, loop_points=16, lines=11)
    ds = ts.invariants(ts.symmetrise(noisy, inversion=True), 2, {"mass": mass})
    assert (int(ds.nu0), ds.nu.values.tolist(), int(ds.nu0_parity)) == (nu0, nu, nu0)


def test_wrong_operator_and_wrong_input_are_refused():
    wd = ts.models.wilson_dirac()
    sx = np.array([[0, 1], [1, 0]])
    wrong = ts.TightBinding(3, 4, time_reversal=np.kron(sx, [[0, 1], [-1, 0]]))
    for r, t, term in wd.hoppings():
        wrong.add(r, t, term)
    with pytest.raises(ts.ModelError, match="operator is likely wrong"):
        ts.symmetrise(wrong)
    no_op = ts.TightBinding(2, 2).add((1, 0), np.eye(2))
    with pytest.raises(ts.ModelError, match="no time_reversal operator"):
        ts.symmetrise(no_op)
    with pytest.raises(ts.ModelError, match="nothing to do"):
        ts.symmetrise(wd, time_reversal=False)
