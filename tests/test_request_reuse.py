"""A run's checked request is kept on the model and reused (evaluation.prepare_request) — but
never after anything it was checked against has changed."""

from __future__ import annotations

import numpy as np
import pytest
import toposweep as ts
from toposweep.errors import FillingError, SamplingError
from toposweep.evaluation import prepare_request
from toposweep.sampling import Sampling, sampling_for


def request(model, filling=2, **kw):
    return prepare_request(model, filling, inversion=None, sampling=kw.pop("s", SAMPLING), **kw)


SAMPLING = sampling_for(loop_points=12, lines=9, max_lines=9, gap_points=4)


def test_the_same_run_gets_the_same_request_and_the_same_results():
    model = ts.models.wilson_dirac()
    first = request(model, threads=2)
    assert request(model, threads=2) is first
    assert request(model, threads=1) is not first  # (another thread count: checked again)
    opts = {"loop_points": 12, "lines": 9, "max_lines": 9, "gap_points": 4}
    reused = ts.invariants(model, 2, {"mass": -2.0}, **opts)
    model._request_memo = None
    fresh = ts.invariants(model, 2, {"mass": -2.0}, **opts)
    reused.attrs.pop("created", None), fresh.attrs.pop("created", None)
    assert reused.identical(fresh)


def test_a_hopping_added_after_a_run_is_checked():
    """check_loop_resolution: a loop of 4 points resolves hoppings of reach 1, not of reach 2."""
    model = ts.models.wilson_dirac()
    coarse = Sampling(loop_points=4, lines=5, max_lines=5)
    request(model, s=coarse)
    model.add([2, 0, 0], 0.01 * np.eye(4), "hopping")
    with pytest.raises(SamplingError, match="reach 2"):
        request(model, s=coarse)


def test_a_replaced_inversion_is_the_one_used():
    model = ts.models.wilson_dirac()
    p = model.inversion
    assert np.array_equal(request(model).inversion, p)
    model.inversion = 1j * p  # P² = −1: normalised back to ±P
    req = request(model)
    assert np.allclose(req.inversion @ req.inversion, np.eye(4))
    assert request(model) is not req  # (replaced operators: checked every time)


def test_operators_cannot_be_changed_in_place():
    model = ts.models.wilson_dirac()
    with pytest.raises(ValueError, match="read-only"):
        model.inversion[0, 0] = 2.0
    with pytest.raises(ValueError, match="read-only"):
        model.time_reversal[0, 0] = 2.0
    given = np.eye(4, dtype=complex)
    own = ts.TightBinding(2, 4, inversion=given).inversion
    given[0, 0] = -1.0  # (the model holds a copy: the caller's array stays the caller's)
    assert own[0, 0] == 1.0 and given.flags.writeable


def test_bad_arguments_after_a_good_run_still_raise():
    model = ts.models.wilson_dirac()
    request(model, threads=2)
    for filling, error in [(True, FillingError), (3, FillingError), (2.0, FillingError)]:
        with pytest.raises(error):
            request(model, filling)
    with pytest.raises(SamplingError, match="threads"):
        request(model, threads=0)


def test_an_inversion_passed_to_the_call_is_not_the_kept_one():
    model = ts.models.wilson_dirac()
    kept = request(model)
    p = -np.asarray(model.inversion)
    req = prepare_request(model, 2, inversion=p, sampling=SAMPLING)
    assert req is not kept and req.inversion_from_call
    assert np.array_equal(req.inversion, p)
    assert request(model) is kept  # (and the call's own matrix did not replace it)


def test_a_model_that_has_run_can_be_sent_to_another_process():
    """Pickling (what a process pool does with its arguments) drops what the core compiled and
    the kept request; the copy compiles its own and gives the same results."""
    import pickle

    model = ts.models.wilson_dirac()
    opts = {"loop_points": 12, "lines": 9, "max_lines": 9, "gap_points": 4}
    here = ts.invariants(model, 2, {"mass": -2.0}, **opts)
    copy = pickle.loads(pickle.dumps(model))
    assert copy._request_memo is None
    assert not copy.inversion.flags.writeable and copy.inversion is copy._own_operators[1]
    there = ts.invariants(copy, 2, {"mass": -2.0}, **opts)
    assert copy._request_memo is not None
    for name in ("nu0", "nu", "gap_direct", "nu0_parity"):
        assert np.array_equal(here[name], there[name]), name
