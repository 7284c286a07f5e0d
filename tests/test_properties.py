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
    change_basis,
    inversion_breaking_perturbation,
    random_model,
    random_unitary,
)

FEW = settings(
    max_examples=12,
    deadline=None,
    derandomize=True,
    suppress_health_check=[HealthCheck.too_slow],
)
seeds = st.integers(min_value=0, max_value=10_000)
dims = st.sampled_from([2, 2, 3])  # 3D points cost about ten times more


def indices(model: ts.TightBinding, filling: int) -> tuple[int, list[int] | None, int]:
    ds = ts.invariants(model, filling)
    nu = ds.nu.values.tolist() if "nu" in ds else None
    return int(ds.nu0), nu, int(ds.undefined_reason)


SEEN: list[tuple[int, int]] = []


def reference(seed: int, dim: int):
    SEEN.append((seed, dim))
    case = random_model(seed, dim=dim)
    got = indices(case.model, case.filling)
    assert got[2] == 0, f"random model {seed} (dim {dim}) should be gapped: {got}"
    return case, got


@FEW
@given(seed=seeds, dim=dims, data=st.data())
def test_orbital_permutation(seed, dim, data):
    case, want = reference(seed, dim)
    perm = np.array(data.draw(st.permutations(range(case.model.norb))))
    assert indices(permute_orbitals(case.model, perm), case.filling) == want


@FEW
@given(seed=seeds, dim=dims, basis_seed=seeds)
def test_random_unitary_basis_change(seed, dim, basis_seed):
    case, want = reference(seed, dim)
    w = random_unitary(np.random.default_rng(basis_seed), case.model.norb)
    assert indices(change_basis(case.model, w), case.filling) == want


@FEW
@given(
    seed=seeds,
    dim=dims,
    scale=st.floats(min_value=1e-3, max_value=1e3),
    shift=st.floats(min_value=-1e3, max_value=1e3),
)
def test_energy_scale_and_shift(seed, dim, scale, shift):
    case, want = reference(seed, dim)
    moved = scale_and_shift(case.model, scale, shift)
    ds = ts.invariants(moved, case.filling)
    nu = ds.nu.values.tolist() if "nu" in ds else None
    assert (int(ds.nu0), nu, int(ds.undefined_reason)) == want
    base = ts.invariants(case.model, case.filling)
    # gaps scale with a and ignore b (to round-off in the shifted energies)
    tol = 1e-9 * (scale * float(base.bandwidth) + abs(shift))
    assert abs(float(ds.gap_indirect) - scale * float(base.gap_indirect)) <= tol + 1e-6 * scale


@FEW
@given(seed=seeds, dim=dims, depth=st.floats(min_value=0.5, max_value=50.0))
def test_decoupled_trivial_pair_below_the_gap(seed, dim, depth):
    case, want = reference(seed, dim)
    # ‖H(κ)‖ ≤ Σ_R |c| ‖T_R‖ (twice for R ≠ 0, the implied conjugate): a flat pair below
    # −bound lies below every band at every κ
    bound = sum(
        (1 if not any(r) else 2)
        * abs(1.0 if term is None else case.model.defaults[term])
        * np.linalg.norm(t, 2)
        for r, t, term in case.model.hoppings()
    )
    bigger = add_trivial_pair(case.model, -bound - depth)
    assert indices(bigger, case.filling + 2) == want


@FEW
@given(seed=seeds, dim=dims, pert_seed=seeds, fraction=st.floats(min_value=0.05, max_value=0.25))
def test_small_time_reversal_preserving_perturbation(seed, dim, pert_seed, fraction):
    case, want = reference(seed, dim)
    gap = float(ts.invariants(case.model, case.filling).gap_direct)
    bent = inversion_breaking_perturbation(
        case.model, fraction * gap, np.random.default_rng(pert_seed)
    )
    assert indices(bent, case.filling) == want


@settings(max_examples=6, deadline=None, derandomize=True)
@given(seed=seeds, axis=st.integers(min_value=0, max_value=2))
def test_doubled_cell_3d(seed, axis):
    case = random_model(seed, dim=3, norb=4)
    nu0, nu, why = indices(case.model, case.filling)
    assert why == 0
    doubled = indices(double_cell(case.model, axis), 2 * case.filling)
    want_nu = list(nu)
    want_nu[axis] = 0
    assert doubled == (nu0, want_nu, 0)


@settings(max_examples=6, deadline=None, derandomize=True)
@given(seed=seeds, axis=st.integers(min_value=0, max_value=1))
def test_doubled_cell_2d(seed, axis):
    case, want = reference(seed, 2)
    assert indices(double_cell(case.model, axis), 2 * case.filling) == want


def test_two_copies_of_an_odd_2d_model_are_even():
    # Qi, Wu & Zhang, PRB 74, 085308 (2006) / Bernevig, Hughes & Zhang, Science 314, 1757
    # (2006): the spinful square-lattice model at m = −1 is Z2-odd
    bhz = ts.models.bhz()
    assert indices(bhz, 2)[:1] == (1,)
    assert indices(two_copies(bhz), 4) == (0, None, 0)


@FEW
@given(seed=seeds)
def test_two_copies_of_random_odd_2d_models(seed):
    # an odd core and couplings below half its gap: the model is Z2-odd
    case = random_model(seed, dim=2, core_phase="strong", coupling=0.3)
    assert indices(case.model, case.filling) == (1, None, 0)
    assert indices(two_copies(case.model), 2 * case.filling) == (0, None, 0)
