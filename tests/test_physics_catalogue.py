"""Consistency of every builtin model: what a sweep, a result file and the Z2 engine rely on.

Kramers degeneracy at the TRIMs for U_T U_T* = −1 is a handbook fact (Kramers' theorem);
the rest are checks of the catalogue's own promises, made with numpy.
"""

from __future__ import annotations

import itertools
import json

import numpy as np
import pytest
import toposweep as ts

BUILDERS = [getattr(ts.models, name) for name in ts.models.__all__]


@pytest.fixture(params=BUILDERS, ids=ts.models.__all__)
def model(request) -> ts.TightBinding:
    return request.param()


def test_every_term_has_a_default_and_a_label(model):
    assert set(model.defaults) == set(model.parameters)
    for name in model.parameters:
        info = model.parameter_info[name]
        assert info["long_name"] and info["units"]


def test_json_round_trip_gives_the_same_hamiltonian(model, rng):
    d = json.loads(json.dumps(model.to_dict()))
    again = ts.model_from_dict(d)
    kappa = rng.random((10, model.dim))
    params = {k: v * (1 + 0.1 * i) for i, (k, v) in enumerate(model.defaults.items())}
    np.testing.assert_array_equal(
        again.hamiltonian(kappa, params), model.hamiltonian(kappa, params)
    )
    assert again.defaults == model.defaults and again.parameter_info == model.parameter_info


def test_hermitian_and_kramers_degenerate_at_trims(model, rng):
    params = {k: v + 0.05 * rng.normal() for k, v in model.defaults.items()}
    h = model.hamiltonian(rng.random((10, model.dim)), params)
    np.testing.assert_allclose(h, h.conj().transpose(0, 2, 1), atol=1e-13)
    trims = np.array(list(itertools.product((0.0, 0.5), repeat=model.dim)))
    e = np.linalg.eigvalsh(model.hamiltonian(trims, params))
    np.testing.assert_allclose(e[:, 0::2], e[:, 1::2], atol=1e-10)  # Kramers pairs


@pytest.mark.parametrize("builder", BUILDERS, ids=ts.models.__all__)
def test_builder_keywords_set_the_defaults(builder):
    for name in builder().parameters:
        assert builder(**{name: 0.123}).defaults[name] == 0.123


@pytest.mark.parametrize("builder", BUILDERS, ids=ts.models.__all__)
@pytest.mark.parametrize("bad", ["1.0", float("nan"), float("inf"), None, True])
def test_builder_rejects_bad_defaults_with_a_clear_error(builder, bad):
    name = builder().parameters[0]
    with pytest.raises(ts.ParameterError, match=rf"{name}=.*finite real number"):
        builder(**{name: bad})
