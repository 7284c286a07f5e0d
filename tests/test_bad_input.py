"""Bad input gets a clear error (issue 2, item 6): a ValueError subclass from toposweep.errors
whose message names what is wrong and how to fix it; never a silent answer, never a crash.

Each case below gives the call, the exception class it must raise and fragments its message
must contain (the offending value or name, and the hint).
"""

from __future__ import annotations

import subprocess
import sys
import textwrap

import numpy as np
import pytest
import toposweep as ts
from toposweep import CallableModel, TightBinding
from toposweep.errors import (
    FillingError,
    ModelError,
    ParameterError,
    SamplingError,
    SymmetryError,
    ToposweepError,
)
from toposweep.models._matrices import kron, s0, spin_time_reversal, sx, sy, sz

U_T = kron(s0, spin_time_reversal)  # 1 ⊗ iσ_y
P = kron(sz, s0)
GAMMA = [kron(sx, s) for s in (sx, sy, sz)]
G4 = kron(sz, s0)


def wilson_dirac_func(kappa, mass=-2.0):
    """Vectorised cubic Wilson–Dirac Hamiltonian (as another code would provide it)."""
    k = 2 * np.pi * kappa
    h = np.einsum("ka,aij->kij", np.sin(k), np.array(GAMMA))
    return h + (mass + np.cos(k).sum(axis=1))[:, None, None] * G4


def wd() -> TightBinding:
    return ts.models.wilson_dirac()


def tr_only_model() -> TightBinding:
    """Time reversal, no parameters with defaults: 'm' must be given."""
    m = TightBinding(3, 4, time_reversal=U_T)
    m.add((0, 0, 0), G4, term="m")
    for i in range(3):
        r = tuple(int(j == i) for j in range(3))
        m.add(r, 0.5 * (G4 - 1j * GAMMA[i]))
    return m


def broken_tr_model() -> TightBinding:
    # a spin-diagonal hopping i·1 on the x bond: H ∋ -2 sin k_x, odd in k and real → breaks Θ
    return TightBinding(3, 4, time_reversal=U_T).add((0, 0, 0), G4).add((1, 0, 0), 1j * np.eye(4))


def call_with_kwargs(**kw):
    return lambda: ts.invariants(wd(), 2, **kw)


CASES = [
    # -- model building ----------------------------------------------------------------------
    (
        "non-Hermitian on-site block",
        lambda: TightBinding(3, 4).add((0, 0, 0), np.triu(np.ones((4, 4)))),
        ModelError,
        ["on-site", "Hermitian", "conj(v)"],
    ),
    (
        "T of the wrong shape",
        lambda: TightBinding(3, 4).add((1, 0, 0), np.eye(3)),
        ModelError,
        ["(4, 4)", "(3, 3)"],
    ),
    (
        "T not numeric",
        lambda: TightBinding(3, 4).add((1, 0, 0), "x"),
        ModelError,
        ["complex 4×4"],
    ),
    ("R too short", lambda: TightBinding(3, 4).add((1, 0), np.eye(4)), ModelError, ["3 integers"]),
    (
        "R not integer",
        lambda: TightBinding(3, 4).add((0.5, 0, 0), np.eye(4)),
        ModelError,
        ["integers"],
    ),
    ("R NaN", lambda: TightBinding(3, 4).add((np.nan, 0, 0), np.eye(4)), ModelError, ["integers"]),
    (
        "R beyond int64",
        lambda: TightBinding(3, 4).add((10**30, 0, 0), np.eye(4)),
        ModelError,
        ["unit cells"],
    ),
    (
        "T NaN",
        lambda: TightBinding(3, 4).add((1, 0, 0), np.full((4, 4), np.nan)),
        ModelError,
        ["NaN"],
    ),
    (
        "T inf",
        lambda: TightBinding(3, 4).add((1, 0, 0), np.full((4, 4), np.inf)),
        ModelError,
        ["NaN or inf"],
    ),
    (
        "term name not an identifier",
        lambda: TightBinding(3, 4).add((1, 0, 0), np.eye(4), term="a b"),
        ModelError,
        ["identifiers", "'a b'"],
    ),
    ("dim 4", lambda: TightBinding(4, 2), ModelError, ["2 or 3"]),
    ("norb 0", lambda: TightBinding(3, 0), ModelError, ["positive"]),
    # primitive vectors span space (handbook fact: a lattice basis is linearly independent)
    (
        "lattice row of zeros",
        lambda: TightBinding(2, 2, lattice=[[1, 0], [0, 0]]),
        ModelError,
        ["linearly independent"],
    ),
    (
        "lattice rows repeated",
        lambda: TightBinding(3, 2, lattice=np.eye(3)[[0, 1, 1]]),
        ModelError,
        ["linearly independent"],
    ),
    (
        "non-unitary time reversal",
        lambda: TightBinding(3, 4, time_reversal=2 * U_T),
        SymmetryError,
        ["unitary", "3.00e+00"],
    ),
    (
        "U_T U_T* = +1",
        lambda: TightBinding(3, 4, time_reversal=np.eye(4)),
        SymmetryError,
        ["U_T U_T* = −1", "iσ_y"],
    ),
    (
        "time reversal of the wrong shape",
        lambda: TightBinding(3, 4, time_reversal=np.eye(2)),
        ModelError,
        ["(4, 4)", "(2, 2)"],
    ),
    (
        "time reversal with NaN",
        lambda: TightBinding(3, 4, time_reversal=np.full((4, 4), np.nan)),
        ModelError,
        ["NaN"],
    ),
    (
        "non-unitary inversion",
        lambda: TightBinding(3, 4, inversion=2 * P),
        SymmetryError,
        ["unitary"],
    ),
    (
        # U U† overflows to NaN here, and NaN > tolerance is False: must still be refused
        "operator with entries near the float limit",
        lambda: TightBinding(2, 2, inversion=[[1e308, 1e308], [1e308, 1e308j]]),
        SymmetryError,
        ["unitary"],
    ),
    # -- parameters and κ ----------------------------------------------------------------------
    (
        "parameter NaN",
        lambda: ts.invariants(wd(), 2, {"mass": np.nan}),
        ParameterError,
        ["'mass'", "finite"],
    ),
    (
        "parameter inf",
        lambda: ts.invariants(wd(), 2, {"mass": np.inf}),
        ParameterError,
        ["'mass'", "finite"],
    ),
    (
        "parameter text",
        lambda: ts.invariants(wd(), 2, {"mass": "1.0"}),
        ParameterError,
        ["'mass'", "real number"],
    ),
    (
        "parameter bool",
        lambda: ts.invariants(wd(), 2, {"mass": True}),
        ParameterError,
        ["'mass'", "real number"],
    ),
    (
        "params not a dict",
        lambda: ts.invariants(wd(), 2, [1.0, 2.0]),
        ParameterError,
        ["dict", "'mass'"],
    ),
    (
        "unknown parameter",
        lambda: ts.invariants(wd(), 2, {"mas": 1.0}),
        ParameterError,
        ["['mas']", "'mass'", "'hopping'"],
    ),
    (
        "missing parameter",
        lambda: ts.invariants(tr_only_model(), 2),
        ParameterError,
        ["'m'", "params=", "defaults"],
    ),
    ("kappa NaN", lambda: wd().hamiltonian([[np.nan, 0, 0]]), ModelError, ["NaN"]),
    ("kappa inf", lambda: wd().hamiltonian([[np.inf, 0, 0]]), ModelError, ["NaN or inf"]),
    (
        "kappa wrong length",
        lambda: wd().hamiltonian([[0.1, 0.2]]),
        ModelError,
        ["(..., 3)", "(1, 2)"],
    ),
    (
        "kappa not numeric",
        lambda: wd().hamiltonian([["a", 0, 0]]),
        ModelError,
        ["reduced coordinates"],
    ),
    # -- filling -----------------------------------------------------------------------------
    (
        "odd filling under TR",
        lambda: ts.invariants(wd(), 1),
        FillingError,
        ["odd", "Kramers", "even"],
    ),
    ("filling 0", lambda: ts.invariants(wd(), 0), FillingError, ["1 … 3", "got 0"]),
    ("filling = norb", lambda: ts.invariants(wd(), 4), FillingError, ["1 … 3", "got 4"]),
    ("filling float", lambda: ts.invariants(wd(), 2.0), FillingError, ["integer"]),
    # -- symmetries that do not hold --------------------------------------------------------------
    # (time reversal broken at the point is a result, reason 8, with a SymmetryWarning:
    # tests/test_symmetry_rule.py)
    (
        "inversion passed to the call does not hold",
        lambda: ts.invariants(wd(), 2, inversion=np.eye(4)),
        SymmetryError,
        ["inversion does not hold", "e-01", "inversion=None"],
    ),
    (
        "inversion of the wrong shape",
        lambda: ts.invariants(wd(), 2, inversion=np.eye(2)),
        ModelError,
        ["(4, 4)"],
    ),
    (
        "inversion not squaring to ±1",
        lambda: ts.invariants(wd(), 2, inversion=np.diag([1, 1, 1, 1j])),
        SymmetryError,
        ["square to ±1"],
    ),
    # -- what the model must have ------------------------------------------------------------------
    (
        # refused when it is built, not only when invariants() is called (issue 19)
        "1D model",
        lambda: TightBinding(1, 2, time_reversal=1j * sy),
        ModelError,
        ["2 or 3", "got 1"],
    ),
    (
        "no time reversal",
        lambda: ts.invariants(TightBinding(3, 4).add((1, 0, 0), np.eye(4)), 2),
        ModelError,
        ["time_reversal=U_T"],
    ),
    ("not a model", lambda: ts.invariants("wilson_dirac", 2), ModelError, ["model", "str"]),
    (
        "model without hoppings",
        lambda: ts.invariants(TightBinding(3, 4, time_reversal=U_T), 2),
        ModelError,
        ["add()"],
    ),
    # -- sampling options ------------------------------------------------------------------------
    (
        "loop_points 0",
        call_with_kwargs(loop_points=0),
        SamplingError,
        ["loop_points", "at least 4"],
    ),
    ("lines negative", call_with_kwargs(lines=-1), SamplingError, ["lines", "at least 2"]),
    ("lines not integer", call_with_kwargs(lines=2.5), SamplingError, ["lines", "integer"]),
    ("lines NaN", call_with_kwargs(lines=float("nan")), SamplingError, ["lines", "integer"]),
    ("lines inf", call_with_kwargs(lines=float("inf")), SamplingError, ["lines", "integer"]),
    ("lines text", call_with_kwargs(lines="21"), SamplingError, ["lines", "integer"]),
    ("max_lines < lines", call_with_kwargs(max_lines=5), SamplingError, ["max_lines", "lines"]),
    ("step_limit 0", call_with_kwargs(step_limit=0), SamplingError, ["step_limit", "(0, 0.5)"]),
    ("step_limit NaN", call_with_kwargs(step_limit=float("nan")), SamplingError, ["step_limit"]),
    (
        "gap_floor negative",
        call_with_kwargs(gap_floor=-1.0),
        SamplingError,
        ["gap_floor", "positive"],
    ),
    ("gap_floor 0", call_with_kwargs(gap_floor=0.0), SamplingError, ["gap_floor", "positive"]),
    ("gap_points negative", call_with_kwargs(gap_points=-1), SamplingError, ["gap_points"]),
    # an extra few zeros must be refused, not allocate more memory than the machine has
    (
        "loop_points absurd",
        call_with_kwargs(loop_points=10**12),
        SamplingError,
        ["loop_points", "maximum"],
    ),
    (
        "gap_points absurd",
        call_with_kwargs(gap_points=5000),
        SamplingError,
        ["gap_points", "maximum"],
    ),
    ("threads 0", call_with_kwargs(threads=0), SamplingError, ["threads", "positive"]),
    ("threads negative", lambda: ts.wcc_flow(wd(), 2, threads=-1), SamplingError, ["threads"]),
    (
        "wcc_flow pump_points 1",
        lambda: ts.wcc_flow(wd(), 2, pump_points=1),
        SamplingError,
        ["pump_points"],
    ),
    ("wcc_flow axis 4", lambda: ts.wcc_flow(wd(), 2, axis=4), ModelError, ["axis", "1, 2 or 3"]),
    ("wcc_flow cut 0.3", lambda: ts.wcc_flow(wd(), 2, cut=0.3), ModelError, ["cut", "0.5"]),
    (
        "wcc_flow plane options on a 2D model",
        lambda: ts.wcc_flow(ts.models.bhz(), 2, axis=1),
        ModelError,
        ["2D model has one plane", "axis=1"],
    ),
    # -- serialised descriptions ------------------------------------------------------------
    (
        "model dict missing keys",
        lambda: ts.model_from_dict({"kind": "tight_binding"}),
        ModelError,
        ["not a valid", "dim"],
    ),
    ("model dict of unknown kind", lambda: ts.model_from_dict({"kind": "x"}), ModelError, ["'x'"]),
]


@pytest.mark.parametrize(("label", "call", "error", "fragments"), CASES, ids=[c[0] for c in CASES])
def test_bad_input_gives_a_clear_value_error(label, call, error, fragments):
    with pytest.raises(error) as info:
        call()
    assert isinstance(info.value, ValueError) and isinstance(info.value, ToposweepError)
    message = str(info.value)
    for fragment in fragments:
        assert fragment in message, f"{label}: {fragment!r} not in {message!r}"


def test_numpy_scalars_are_accepted_where_python_numbers_are():
    # not bad input: sweeps hand over numpy scalars
    ds = ts.invariants(
        wd(),
        np.int64(2),
        {"mass": np.float32(-2.0)},
        loop_points=np.int64(24),
        lines=np.int32(11),
        step_limit=np.float64(0.1),
        threads=np.int64(1),
    )
    assert int(ds.nu0) == 1  # Fu & Kane, Phys. Rev. B 76, 045302 (2007): (1;000) at m = -2


def test_time_reversal_broken_at_some_points_only_marks_those():
    # TR holds for mass-like terms and breaks with 'b' ≠ 0: a two-point call keeps the good
    # point and marks the other undefined with reason 8 (never a silent index)
    from toposweep.evaluation import prepare_request, run_points
    from toposweep.sampling import Sampling

    m = ts.models.wilson_dirac()
    m.add((1, 0, 0), 1j * np.eye(4), term="b")
    m.defaults["b"] = 0.0
    req = prepare_request(m, 2, inversion=None, sampling=Sampling())
    raw = run_points(req, [m.resolve({"b": 0.0}), m.resolve({"b": 0.3})])
    # b = 0 is the Wilson-Dirac model at m = -2: (1;000) (Fu & Kane, Phys. Rev. B 76, 045302
    # (2007)), a strong topological insulator (phase 2) by both methods
    assert raw["nu0"].tolist() == [1, -1]
    assert raw["reason"].tolist()[1] == 8
    # the model's own inversion also fails at the broken point: parity undefined there too
    assert raw["nu0_parity"].tolist() == [1, -1]
    # and what the core derived from the indices follows the marks
    assert raw["phase"].tolist() == [2, -1]
    assert raw["parity_agrees"].tolist() == [1, -1]


def test_nearly_symmetric_model_is_told_how_to_symmetrise():
    # hoppings symmetric only to ~1e-6, as fitted or Wannier-derived models often are
    m = ts.models.wilson_dirac()
    noise = 1e-6 * np.random.default_rng(3).normal(size=(4, 4))
    m.add((1, 1, 0), noise)
    with pytest.warns(ts.SymmetryWarning, match=r"nearly symmetric.*\(T \+ U_T T\* U_T†\)/2"):
        assert int(ts.invariants(m, 2).undefined_reason) == 8
    with pytest.warns(ts.SymmetryWarning) as info:
        ts.invariants(broken_tr_model(), 2)
    assert "nearly" not in str(info[0].message)


def test_wrong_model_inversion_leaves_only_parity_undefined():
    # P = 1 is not an inversion of the Wilson–Dirac model (its orbitals have opposite parity):
    # declared on the model it must not raise, but it must not give a parity answer either
    m = ts.models.wilson_dirac()
    m.inversion = np.eye(4, dtype=complex)
    ds = ts.invariants(m, 2, {"mass": -2.0})
    assert int(ds.nu0) == 1  # Fu & Kane, Phys. Rev. B 76, 045302 (2007): (1;000) at m = -2
    assert int(ds.nu0_parity) == -1 and int(ds.parity_undefined_reason) == 7
    assert int(ds.parity_agrees) == -1


# -- callable models ----------------------------------------------------------------------------
def _wrong_shape(kappa, mass=-2.0):
    return wilson_dirac_func(kappa, mass)[:, :3, :3]


def _too_few_rows(kappa, mass=-2.0):
    return wilson_dirac_func(kappa, mass)[:1]


def _nan(kappa, mass=-2.0):
    h = wilson_dirac_func(kappa, mass)
    h[-1, 0, 0] = np.nan
    return h


def _non_hermitian(kappa, mass=-2.0):
    h = wilson_dirac_func(kappa, mass)
    h[:, 0, 1] += 0.5
    return h


def _nan_in_big_batches(kappa, mass=-2.0):
    # passes the small symmetry-check batches, fails inside the core's parallel run
    h = wilson_dirac_func(kappa, mass)
    if len(kappa) > 100:
        h[5, 0, 0] = np.inf
    return h


def _returns_none(kappa, mass=-2.0):
    return None


def _returns_text(kappa, mass=-2.0):
    return np.full((len(kappa), 4, 4), "a")


@pytest.mark.parametrize(
    ("func", "fragments"),
    [
        (_wrong_shape, ["shape", "(8, 3, 3)", "(8, 4, 4)"]),
        (_too_few_rows, ["shape", "(1, 4, 4)", "(8, 4, 4)"]),
        (_nan, ["NaN"]),
        (_nan_in_big_batches, ["NaN or infinity", "'mass': -2.0"]),
        (_non_hermitian, ["non-Hermitian", "5.00e-01"]),
        (_returns_none, ["shape ()"]),
        (_returns_text, ["complex numbers"]),
    ],
    ids=lambda x: getattr(x, "__name__", ""),
)
def test_callable_returning_bad_matrices(func, fragments):
    model = CallableModel(func, 3, 4, time_reversal=U_T, inversion=P)
    with pytest.raises(ModelError) as info:
        ts.invariants(model, 2)
    for fragment in fragments:
        assert fragment in str(info.value), str(info.value)


class UserCodeError(Exception):
    """An exception type of the user's own code."""


def test_exception_raised_by_the_callable_reaches_the_user_unchanged():
    def raises_at_once(kappa, mass=-2.0):
        raise ZeroDivisionError("division in the user's model code")

    calls = []

    def raises_later(kappa, mass=-2.0):
        calls.append(len(kappa))
        if len(calls) > 3:  # after the symmetry checks, inside the core's parallel run
            raise UserCodeError("user's model failed on a big batch")
        return wilson_dirac_func(kappa, mass)

    with pytest.raises(ZeroDivisionError, match="division in the user's model code"):
        ts.invariants(CallableModel(raises_at_once, 3, 4, time_reversal=U_T), 2)
    with pytest.raises(UserCodeError, match="big batch") as info:
        ts.invariants(CallableModel(raises_later, 3, 4, time_reversal=U_T), 2)
    assert info.value.__traceback__ is not None
    with pytest.raises(UserCodeError):
        ts.wcc_flow(CallableModel(raises_later, 3, 4, time_reversal=U_T), 2)


def test_callable_without_default_needs_its_parameter():
    def func(kappa, mass):
        return wilson_dirac_func(kappa, mass)

    model = CallableModel(func, 3, 4, time_reversal=U_T)
    with pytest.raises(ParameterError, match="'mass'"):
        ts.invariants(model, 2)
    assert int(ts.invariants(model, 2, {"mass": -2.0}).nu0) == 1  # Fu & Kane 2007: (1;000)


def test_not_callable():
    with pytest.raises(ModelError, match="callable"):
        CallableModel(3.0, 3, 4)


# -- a Rust panic must not abort Python ------------------------------------------------------------
CORE_ABUSE = textwrap.dedent(
    """
    import numpy as np
    from toposweep import _core

    c = np.complex128
    r = np.zeros((1, 3), np.int64)
    t = np.eye(4, dtype=c)[None]
    model = _core.CoreModel.tight_binding(3, 4, 0, r, t, np.array([-1]))
    kw = dict(loop_points=8, lines=3, max_lines=3, step_limit=0.1, gap_floor=-1.0,
              gap_points=0)
    outcomes = []

    def attempt(call):
        try:
            call()
            outcomes.append("returned")
        except Exception as exc:  # a panic would abort the process instead
            outcomes.append(type(exc).__name__)

    # positions of the wrong shape reach a slice index in a worker thread: a panic inside
    # rayon that the binding must turn into a Python exception
    attempt(lambda: _core.flow(model, np.zeros(0), 2, 0, 8, np.linspace(0, 0.5, 3),
                               positions=np.zeros((1, 1))))
    first = outcomes[-1]
    attempt(lambda: _core.CoreModel.tight_binding(3, 4, 0, np.zeros((2, 3), np.int64), t,
                                                  np.array([-1])))
    attempt(lambda: _core.CoreModel.tight_binding(3, 4, 1, r, t, np.array([5])))
    attempt(lambda: _core.hamiltonian(model, np.ones(3), np.zeros((2, 3))))
    attempt(lambda: _core.eigh(np.zeros((2, 3, 4), c)))
    attempt(lambda: _core.eigh(np.full((2, 4, 4), np.nan, c)))
    attempt(lambda: _core.evaluate(model, np.zeros((1, 0)), 99, **kw))
    attempt(lambda: _core.evaluate(model, np.zeros((1, 2)), 2, **kw))
    attempt(lambda: _core.evaluate(model, np.zeros((1, 0)), 2, inversion=np.eye(3, dtype=c),
                                   **kw))
    attempt(lambda: _core.evaluate(model, np.zeros((1, 0)), 2, threads=0, **kw))
    attempt(lambda: _core.flow(model, np.zeros(0), 2, 9, 8, np.linspace(0, 0.5, 3)))
    # the interpreter is still healthy: a normal call works afterwards
    h = _core.hamiltonian(model, np.zeros(0), np.zeros((2, 3)))
    assert h.shape == (2, 4, 4)
    print("first:", first)
    print("outcomes:", " ".join(outcomes))
    """
)


def test_rust_panic_becomes_a_python_exception():
    # run in a child process: if a panic aborted the interpreter, only the child would die
    out = subprocess.run(
        [sys.executable, "-c", CORE_ABUSE],
        capture_output=True,
        text=True,
        timeout=120,
        env={"RUST_BACKTRACE": "0", "PATH": "/usr/bin:/bin"},
    )
    assert out.returncode == 0, out.stderr[-2000:]
    lines = dict(line.split(": ", 1) for line in out.stdout.strip().splitlines())
    # today this raises RuntimeError("internal error in toposweep core: ...") from the
    # caught panic; once the binding validates positions it may be a ValueError: both are fine
    assert lines["first"] != "returned", out.stdout
    outcomes = lines["outcomes"].split()
    assert "returned" not in outcomes[1:], outcomes


def test_repeated_options_are_checked_every_time_they_are_wrong():
    """``invariants`` reuses the Sampling of options it has seen (sampling_for): a wrong option
    is refused on every call, options that compare equal but differ in type are kept apart,
    and unhashable ones still get the constructor's message."""
    from toposweep.sampling import sampling_for

    model = ts.models.bhz()
    for _ in range(2):
        with pytest.raises(SamplingError, match="loop_points must be at least 4"):
            ts.invariants(model, 2, {"mass": -1.0}, loop_points=3)
    with pytest.raises(SamplingError, match="certify must be True or False"):
        sampling_for(certify=1)  # (equal to True, and True is a valid option)
    assert sampling_for(certify=True).certify is True
    with pytest.raises(SamplingError, match="loop_points must be an integer"):
        sampling_for(loop_points=[40])
    assert sampling_for(loop_points=np.int64(40)) == sampling_for(loop_points=40)


def test_model_inversion_changed_in_place_is_normalised_again():
    """The normalised inversion matrix is kept per matrix entries: changing the model's P in
    place (here P -> -P, also a symmetry of BHZ) gives the new matrix, not the kept one."""
    from toposweep.symmetry import normalised_inversion

    model = ts.models.bhz()
    p = np.array(model.inversion, dtype=complex)
    first = normalised_inversion(p)
    p *= -1
    np.testing.assert_array_equal(normalised_inversion(p), -first)
    assert not first.flags.writeable
