"""CallableModel (issue 2, item 2): a Hamiltonian from another code as a vectorised function.

The same Hamiltonian written once as a TightBinding and once as a NumPy function must give the
same results; the function must be called with large batches of κ, never per κ point; its
parameters and defaults come from its signature.
"""

from __future__ import annotations

import numpy as np
import pytest
import random_models as rm
import toposweep as ts
from toposweep import CallableModel
from toposweep.models._matrices import kron, s0, spin_time_reversal, sx, sy, sz

# -- the builtin models written out as vectorised NumPy functions ----------------------------------
# Closed forms from the builtin modules' docstrings (periodic convention, k = 2πκ).
GAMMA_3D = np.array([kron(sx, s) for s in (sx, sy, sz)])  # orbital ⊗ spin
G4_3D = kron(sz, s0)
GAMMA_2D = np.array([kron(sz, sx), kron(s0, sy)])  # spin ⊗ orbital
GZ_2D = kron(s0, sz)


def wilson_dirac_numpy(kappa, mass=-2.0, hopping=1.0):
    """t Σ sin k_i Γ_i + (m + t Σ cos k_i) Γ_4 for κ of shape (N, 3)."""
    k = 2 * np.pi * np.asarray(kappa)
    h = hopping * np.einsum("ka,aij->kij", np.sin(k), GAMMA_3D)
    return h + (mass + hopping * np.cos(k).sum(axis=1))[:, None, None] * G4_3D


def bhz_numpy(kappa, mass=-1.0, hopping=1.0):
    """t (sin k_x s_z⊗σ_x + sin k_y s_0⊗σ_y) + (m + t cos k_x + t cos k_y) s_0⊗σ_z."""
    k = 2 * np.pi * np.asarray(kappa)
    h = hopping * np.einsum("ka,aij->kij", np.sin(k), GAMMA_2D)
    return h + (mass + hopping * np.cos(k).sum(axis=1))[:, None, None] * GZ_2D


def wilson_dirac_callable() -> CallableModel:
    return CallableModel(
        wilson_dirac_numpy,
        3,
        4,
        time_reversal=kron(s0, spin_time_reversal),
        inversion=kron(sz, s0),
        name="Wilson-Dirac (NumPy function)",
    )


def bhz_callable() -> CallableModel:
    return CallableModel(
        bhz_numpy,
        2,
        4,
        time_reversal=kron(spin_time_reversal, s0),
        inversion=kron(s0, sz),
        name="BHZ (NumPy function)",
    )


class CountingFunction:
    """Wraps a Hamiltonian function and records the size of every batch it is called with."""

    def __init__(self, func):
        self.func = func
        self.batches: list[int] = []

    def __call__(self, kappa, **params):
        assert kappa.ndim == 2
        self.batches.append(len(kappa))
        return self.func(kappa, **params)


COMPARED = [
    "nu0",
    "nu",
    "z2_plane",
    "nu0_by_axis",
    "nu0_parity",
    "nu_parity",
    "parity_agrees",
    "phase",
    "undefined_reason",
    "converged",
    "lines_used",
]


def assert_same_results(a, b):
    for name in COMPARED:
        if name in a or name in b:
            np.testing.assert_array_equal(a[name].values, b[name].values, err_msg=name)
    for name in ("gap_direct", "gap_indirect", "bandwidth"):
        np.testing.assert_allclose(a[name].values, b[name].values, atol=1e-10, err_msg=name)


@pytest.mark.parametrize(
    "params",
    [
        {"mass": -3.5},
        {"mass": -2.0},
        {"mass": -0.5, "hopping": 1.3},
        {"mass": 0.5},
        {"mass": 2.0, "hopping": 0.8},
        {"mass": 1.0},  # m + Σ cos k_i = 0 at the M points (two κ_i = 1/2): undefined in both
    ],
)
def test_callable_equals_tight_binding_3d(params):
    tb = ts.invariants(ts.models.wilson_dirac(), 2, params)
    fn = ts.invariants(wilson_dirac_callable(), 2, params)
    assert_same_results(tb, fn)


@pytest.mark.parametrize(
    "params", [{"mass": -3.0}, {"mass": -1.0}, {"mass": 1.2, "hopping": 0.9}, {"mass": 2.5}]
)
def test_callable_equals_tight_binding_2d(params):
    tb = ts.invariants(ts.models.bhz(), 2, params)
    fn = ts.invariants(bhz_callable(), 2, params)
    assert_same_results(tb, fn)


def test_random_model_as_a_function_equals_its_tight_binding():
    # an 8-orbital random model; the function is the NumPy Bloch sum of its hoppings
    case = rm.random_model(5, dim=3, norb=8)
    tb = case.model

    def func(kappa, coupling=1.0):
        return rm.bloch_hamiltonian(tb, kappa, {"coupling": coupling})

    fn = CallableModel(func, 3, 8, time_reversal=tb.time_reversal, inversion=tb.inversion)
    for coupling in (1.0, 0.5):
        assert_same_results(
            ts.invariants(tb, case.filling, {"coupling": coupling}),
            ts.invariants(fn, case.filling, {"coupling": coupling}),
        )


def test_flow_of_callable_equals_tight_binding():
    a = ts.wcc_flow(ts.models.wilson_dirac(), 2, {"mass": 2.0}, axis=2, cut=0.5)
    b = ts.wcc_flow(wilson_dirac_callable(), 2, {"mass": 2.0}, axis=2, cut=0.5)
    np.testing.assert_allclose(b.centre.values, a.centre.values, atol=1e-10)


def _counted(builder):
    """A catalogue model as a counted NumPy function of κ batches."""
    tb = builder()

    def func(kappa, **params):
        return tb.hamiltonian(kappa, params)

    counter = CountingFunction(func)
    model = CallableModel(
        counter,
        tb.dim,
        tb.norb,
        time_reversal=tb.time_reversal,
        inversion=tb.inversion,
        parameters=list(tb.parameters),
    )
    model.defaults = dict(tb.defaults)
    return model, counter


# points across the phases of each model, gapless ones included (Wilson–Dirac phases: Fu &
# Kane, PRB 76, 045302 (2007); BHZ: Qi, Wu & Zhang, PRB 74, 085308 (2006)); m = 0, t = 1.7
# is a Wilson–Dirac point where the gap search ends with one walker left (a 6-point batch)
BATCH_CASES = [
    (ts.models.wilson_dirac, {"mass": -2.0}),
    (ts.models.wilson_dirac, {"mass": 0.5}),
    (ts.models.wilson_dirac, {"mass": 1.0}),
    (ts.models.wilson_dirac, {"mass": 0.0, "hopping": 1.7}),
    (ts.models.bhz, {"mass": -1.0}),
    (ts.models.bhz, {"mass": 2.0}),
    (ts.models.kane_mele, {"staggered": 0.3}),
    (ts.models.fu_kane_mele, {"dimerisation": -0.3}),
    (ts.models.df_lattice, {}),
]


@pytest.mark.parametrize(("builder", "params"), BATCH_CASES)
def test_function_is_called_with_large_batches(builder, params):
    model, counter = _counted(builder)
    dim = model.dim
    ts.invariants(model, 2, params)
    batches = np.array(counter.batches)
    total = batches.sum()
    lines, loop_points = ts.Sampling().lines, ts.Sampling().loop_points
    planes = 6 if dim == 3 else 1
    print("batch sizes:", sorted(batches.tolist()), "total κ:", total)
    # never per κ point: the smallest batches are one step of the gap search (±step along each
    # axis: 2·dim points, when a single walker is left), the 2^dim TRIMs, and the ± pairs of
    # random κ of the symmetry check
    assert batches.min() >= 2 * dim
    # the first round of Wilson loops of all planes is ONE call
    assert batches.max() >= planes * lines * loop_points
    assert len(batches) <= total / 20, (len(batches), total)  # 20+ κ points per call on average


def test_batch_sizes_scale_with_the_work_not_the_calls():
    counter = CountingFunction(wilson_dirac_numpy)
    model = CallableModel(
        counter, 3, 4, time_reversal=kron(s0, spin_time_reversal), parameters=["mass", "hopping"]
    )
    model.defaults = {"mass": -2.0, "hopping": 1.0}
    ts.invariants(model, 2, {"mass": 0.5})
    batches = np.array(counter.batches)
    total = batches.sum()
    assert len(batches) <= total / 100, (len(batches), total)
    # doubling the κ points per loop doubles the work, not the number of calls
    counter.batches.clear()
    ts.invariants(model, 2, {"mass": 0.5}, loop_points=2 * ts.Sampling().loop_points)
    assert sum(counter.batches) > 1.8 * total
    assert len(counter.batches) <= len(batches) + 4


def test_sweep_calls_the_function_per_chunk_not_per_kappa():
    counter = CountingFunction(bhz_numpy)
    model = CallableModel(
        counter, 2, 4, time_reversal=kron(spin_time_reversal, s0), parameters=["mass", "hopping"]
    )
    model.defaults = {"mass": -1.0, "hopping": 1.0}
    masses = np.linspace(-3, 3, 7)  # includes the gapless m = -2, 0, 2
    ds = ts.sweep(model, {"mass": masses}, 2, progress=False)
    ref = ts.sweep(ts.models.bhz(), {"mass": masses}, 2, progress=False)
    np.testing.assert_array_equal(ds.nu0.values, ref.nu0.values)
    # Qi, Wu & Zhang, Phys. Rev. B 74, 085308 (2006): Z2 odd for 0 < |m| < 2
    assert ds.nu0.values.tolist() == [0, -1, 1, -1, 1, -1, 0]
    assert min(counter.batches) >= 4


def test_parameters_and_defaults_come_from_the_signature():
    def func(kappa, mass, hopping=1.0, *args, scale: float = 2, flag=True, **extra):
        return wilson_dirac_numpy(kappa, mass, hopping)

    model = CallableModel(func, 3, 4)
    assert model.parameters == ("mass", "hopping", "scale", "flag")
    # only real-number defaults become defaults; 'mass' has none, bool is not a number
    assert model.defaults == {"hopping": 1.0, "scale": 2.0}
    with pytest.raises(ts.ParameterError, match="'mass'"):
        model.resolve()
    with pytest.raises(ts.ParameterError, match="unknown parameter"):
        model.resolve({"mass": 1.0, "other": 2.0})
    # an explicit parameter list overrides the signature
    narrow = CallableModel(func, 3, 4, parameters=["mass"])
    assert narrow.parameters == ("mass",) and narrow.defaults == {}
    # the function receives exactly the resolved parameters as keywords
    seen = {}

    def spy(kappa, mass=-2.0, hopping=1.0):
        seen.update(mass=mass, hopping=hopping)
        return wilson_dirac_numpy(kappa, mass, hopping)

    CallableModel(spy, 3, 4).hamiltonian(np.zeros((2, 3)), {"hopping": 0.7})
    assert seen == {"mass": -2.0, "hopping": 0.7}


def test_hamiltonian_of_callable_keeps_leading_shape():
    model = wilson_dirac_callable()
    k = np.random.default_rng(1).random((3, 5, 3))
    h = model.hamiltonian(k, {"mass": 0.3})
    assert h.shape == (3, 5, 4, 4)
    np.testing.assert_allclose(h, wilson_dirac_numpy(k.reshape(-1, 3), 0.3).reshape(h.shape))
