"""Property tests (hypothesis): the Z2 indices of random models are invariant under exact
transformations that cannot change the topology, and change as they must under the ones that
can.

Random time-reversal(+inversion)-symmetric models come from ``tests/random_models.py``. The
invariances are facts of the trade (common practice, no source) except where cited:
relabelling or rotating the orbital basis, H → aH + b (a > 0), adding a decoupled trivial
Kramers pair below the gap (filling + 2), and perturbations that keep time reversal and stay
below half the gap (by Weyl's inequality no eigenvalue moves by more than ‖ΔH‖, so the gap
never closes along the path; we use a quarter of the gap). Doubling the cell along axis i
keeps ν0 and the other weak indices and sets ν_i to 0 (two layers per cell); two uncoupled
copies of a Z2-odd 2D model are even (Kane & Mele, Phys. Rev. Lett. 95, 146802 (2005): the
Z2 index counts Kramers pairs of edge states mod 2).

Every starting model is first checked against an outside reference, the Fu–Kane parity
indices computed with NumPy alone (Fu & Kane, Phys. Rev. B 76, 045302 (2007);
``random_models.parity_indices``), and so is every transformed model that keeps an inversion
matrix: a package that answered the same wrong thing before and after a transformation fails.
The strategies steer the random cores towards every phase, and each test asserts the phases its
examples reached.

The examples are derandomised so a failure reproduces; counts are kept small (runtime).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import toposweep as ts
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).resolve().parent))
from model_transforms import (  # noqa: E402
    add_trivial_pair,
    double_cell,
    permute_orbitals,
    scale_and_shift,
    two_copies,
)
from random_models import (  # noqa: E402
    PHASES,
    change_basis,
    inversion_breaking_perturbation,
    parity_indices,
    phase_of,
    random_model,
    random_unitary,
)

seeds = st.integers(min_value=0, max_value=10_000)
dims = st.sampled_from([2, 2, 3])  # 3D points cost about ten times more
phases = st.sampled_from(PHASES)


def property_run(body, *, max_examples: int = 12, **strategies) -> set[str]:
    """Run ``body(reached, **drawn)`` on derandomised hypothesis examples; return the phases
    the examples reached (``body`` adds them to ``reached``), for the test to assert."""
    reached: set[str] = set()

    @settings(
        max_examples=max_examples,
        deadline=None,
        derandomize=True,
        suppress_health_check=[HealthCheck.too_slow],
    )
    @given(**strategies)
    def run(**drawn):
        body(reached, **drawn)

    run()
    return reached


def indices(model: ts.TightBinding, filling: int) -> tuple[int, list[int] | None, int]:
    ds = ts.invariants(model, filling)
    nu = ds.nu.values.tolist() if "nu" in ds else None
    return int(ds.nu0), nu, int(ds.undefined_reason)


def numpy_reference(model, filling, inversion=None) -> tuple[int, list[int] | None, int]:
    """The Fu–Kane parity indices with NumPy alone (Fu & Kane, PRB 76, 045302 (2007)), in the
    form of :func:`indices`."""
    nu0, weak = parity_indices(model, filling, inversion=inversion)
    return nu0, (list(weak) if model.dim == 3 else None), 0


def label(want, dim: int) -> str:
    return f"{dim}D {phase_of(want[0], want[1] or (), dim)}"


def reference(seed: int, dim: int, phase: str, reached: set[str]):
    """A random TR+I model steered towards ``phase``, its indices by the package, checked
    against the NumPy parity reference (so every property below starts from a right answer)."""
    core = phase if dim == 3 else ("strong" if phase == "strong" else "trivial")
    case = random_model(seed, dim=dim, core_phase=core)
    got = indices(case.model, case.filling)
    assert got[2] == 0, f"random model {seed} (dim {dim}) should be gapped: {got}"
    assert got == numpy_reference(case.model, case.filling), (seed, dim)
    reached.add(label(got, dim))
    return case, got


def assert_spread(reached: set[str]) -> None:
    """The examples reached trivial and non-trivial phases in 2D and some 3D phase."""
    assert {"2D trivial", "2D strong"} <= reached, reached
    assert any(r.startswith("3D") for r in reached), reached


def test_orbital_permutation():
    def body(reached, seed, dim, phase, data):
        case, want = reference(seed, dim, phase, reached)
        perm = np.array(data.draw(st.permutations(range(case.model.norb))))
        moved = permute_orbitals(case.model, perm)
        assert numpy_reference(moved, case.filling) == want  # the transformation is exact
        assert indices(moved, case.filling) == want

    assert_spread(property_run(body, seed=seeds, dim=dims, phase=phases, data=st.data()))


def test_random_unitary_basis_change():
    def body(reached, seed, dim, phase, basis_seed):
        case, want = reference(seed, dim, phase, reached)
        w = random_unitary(np.random.default_rng(basis_seed), case.model.norb)
        rotated = change_basis(case.model, w)
        assert numpy_reference(rotated, case.filling) == want
        assert indices(rotated, case.filling) == want

    assert_spread(property_run(body, seed=seeds, dim=dims, phase=phases, basis_seed=seeds))


def test_energy_scale_and_shift():
    def body(reached, seed, dim, phase, scale, shift):
        case, want = reference(seed, dim, phase, reached)
        moved = scale_and_shift(case.model, scale, shift)
        assert numpy_reference(moved, case.filling) == want
        ds = ts.invariants(moved, case.filling)
        nu = ds.nu.values.tolist() if "nu" in ds else None
        assert (int(ds.nu0), nu, int(ds.undefined_reason)) == want
        base = ts.invariants(case.model, case.filling)
        # gaps scale with a and ignore b (to round-off in the shifted energies)
        tol = 1e-9 * (scale * float(base.bandwidth) + abs(shift))
        assert abs(float(ds.gap_indirect) - scale * float(base.gap_indirect)) <= tol + 1e-6 * scale

    reached = property_run(
        body,
        seed=seeds,
        dim=dims,
        phase=phases,
        scale=st.floats(min_value=1e-3, max_value=1e3),
        shift=st.floats(min_value=-1e3, max_value=1e3),
    )
    assert_spread(reached)


def test_decoupled_trivial_pair_below_the_gap():
    def body(reached, seed, dim, phase, depth):
        case, want = reference(seed, dim, phase, reached)
        # ‖H(κ)‖ ≤ Σ_R |c| ‖T_R‖ (twice for R ≠ 0, the implied conjugate): a flat pair below
        # −bound lies below every band at every κ
        bound = sum(
            (1 if not any(r) else 2)
            * abs(1.0 if term is None else case.model.defaults[term])
            * np.linalg.norm(t, 2)
            for r, t, term in case.model.hoppings()
        )
        bigger = add_trivial_pair(case.model, -bound - depth)
        assert numpy_reference(bigger, case.filling + 2) == want
        assert indices(bigger, case.filling + 2) == want

    reached = property_run(
        body, seed=seeds, dim=dims, phase=phases, depth=st.floats(min_value=0.5, max_value=50.0)
    )
    assert_spread(reached)


def test_small_time_reversal_preserving_perturbation():
    # the perturbation breaks inversion: the reference is the unperturbed model's NumPy parity
    def body(reached, seed, dim, phase, pert_seed, fraction):
        case, want = reference(seed, dim, phase, reached)
        gap = float(ts.invariants(case.model, case.filling).gap_direct)
        bent = inversion_breaking_perturbation(
            case.model, fraction * gap, np.random.default_rng(pert_seed)
        )
        assert indices(bent, case.filling) == want

    reached = property_run(
        body,
        seed=seeds,
        dim=dims,
        phase=phases,
        pert_seed=seeds,
        fraction=st.floats(min_value=0.05, max_value=0.25),
    )
    assert_spread(reached)


def test_doubled_cell_3d():
    def body(reached, seed, phase, axis):
        case, want = reference(seed, 3, phase, reached)
        nu0, nu, _ = want
        doubled = indices(double_cell(case.model, axis), 2 * case.filling)
        want_nu = list(nu)
        want_nu[axis] = 0
        assert doubled == (nu0, want_nu, 0)

    reached = property_run(
        body, max_examples=6, seed=seeds, phase=phases, axis=st.integers(min_value=0, max_value=2)
    )
    # a doubling must be seen to clear an odd weak index at least once
    assert reached & {"3D weak", "3D strong"}, reached


def test_doubled_cell_2d():
    def body(reached, seed, phase, axis):
        case, want = reference(seed, 2, phase, reached)
        assert indices(double_cell(case.model, axis), 2 * case.filling) == want

    reached = property_run(
        body, max_examples=6, seed=seeds, phase=phases, axis=st.integers(min_value=0, max_value=1)
    )
    assert reached == {"2D trivial", "2D strong"}, reached


def test_two_copies_of_an_odd_2d_model_are_even():
    # Qi, Wu & Zhang, PRB 74, 085308 (2006) / Bernevig, Hughes & Zhang, Science 314, 1757
    # (2006): the spinful square-lattice model at m = −1 is Z2-odd
    bhz = ts.models.bhz()
    assert indices(bhz, 2)[:1] == (1,)
    assert indices(two_copies(bhz), 4) == (0, None, 0)


def test_two_copies_of_random_odd_2d_models():
    def body(reached, seed):
        # an odd core and couplings below half its gap: the model is Z2-odd
        case = random_model(seed, dim=2, core_phase="strong", coupling=0.3)
        assert numpy_reference(case.model, case.filling) == (1, None, 0)
        assert indices(case.model, case.filling) == (1, None, 0)
        both = two_copies(case.model)
        p = np.kron(np.eye(2), case.model.inversion)  # P ⊕ P
        assert numpy_reference(both, 2 * case.filling, inversion=p) == (0, None, 0)
        assert indices(both, 2 * case.filling) == (0, None, 0)
        reached.add("2D strong")

    assert property_run(body, seed=seeds) == {"2D strong"}
