"""Acceptance on random models (issue 2): Wilson loop against parity, basis and perturbation.

Every model is a random time-reversal- (and inversion-) symmetric insulator from
``random_models.py`` with an open gap (NumPy estimate ≥ 4 % of the bandwidth). All runs use the
DEFAULT sampling of :func:`toposweep.invariants`; nothing here is tuned per model.

Outside references:
- Fu & Kane, Phys. Rev. B 76, 045302 (2007): with inversion, the Z2 indices follow from the
  parity eigenvalues of the occupied Kramers pairs at the TRIMs. Computed here independently
  with ``numpy.linalg.eigh`` on a NumPy Bloch sum (``random_models.parity_indices``).
- Z2 indices are invariant under a unitary change of orbital basis and under any symmetric
  deformation that keeps the gap open (common practice, no source); Weyl's inequality
  (Horn & Johnson, Matrix Analysis, 2nd ed. (2013), chapter 4; from memory) bounds the
  eigenvalue shift by ‖ΔH‖, so a perturbation with ‖ΔH(κ)‖ < gap/4 cannot close the gap.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass

import numpy as np
import pytest
import random_models as rm
import toposweep as ts
from toposweep.evaluation import check_filling
from toposweep.symmetry import TOLERANCE

N3D = 140  # random 3D models
N2D = 100  # random 2D models
N_TRANSFORMED = 30  # of each dimension, checked again after basis change and perturbation


@dataclass
class Outcome:
    case: rm.RandomModel
    dim: int
    seed: int
    wilson: tuple[int, tuple[int, ...]]
    core_parity: tuple[int, tuple[int, ...]]
    numpy_parity: tuple[int, tuple[int, ...]]
    reason: int
    parity_agrees: int
    gap_direct: float
    gap_at_reported_kappa: float
    starved: tuple[int, tuple[int, ...]]  # Wilson loop with three pump lines (mostly undefined)
    starved_parity: tuple[int, tuple[int, ...]]

    def label(self) -> str:
        m = self.case.model
        return (
            f"dim={self.dim} seed={self.seed} norb={m.norb} filling={self.case.filling} "
            f"gap/bandwidth={self.case.gap / self.case.bandwidth:.3f}"
        )


def indices(ds, dim: int) -> tuple[int, tuple[int, ...]]:
    weak = tuple(int(x) for x in ds.nu.values) if dim == 3 else ()
    return int(ds.nu0), weak


def parity_from(ds, dim: int) -> tuple[int, tuple[int, ...]]:
    weak = tuple(int(x) for x in ds.nu_parity.values) if dim == 3 else ()
    return int(ds.nu0_parity), weak


def core_phase(dim: int, seed: int) -> str:
    # spread the uncoupled cores evenly over the phases; couplings up to 1.5× the core gap can
    # still move a model to another phase, so the final phase is whatever the model has
    return rm.PHASES[seed % 3] if dim == 3 else ("trivial", "strong")[seed % 2]


def survey_one(dim: int, seed: int) -> Outcome:
    case = rm.random_model(seed, dim=dim, core_phase=core_phase(dim, seed))
    ds = ts.invariants(case.model, case.filling)
    nu0p, weak = rm.parity_indices(case.model, case.filling)
    kappa = ds.gap_kappa.values[None, :]
    e = np.linalg.eigvalsh(rm.bloch_hamiltonian(case.model, kappa))[0]
    # the same model with the Wilson loop starved of pump lines: the parity result must not
    # depend on it (the Fu–Kane product needs only the TRIMs)
    starved = ts.invariants(case.model, case.filling, lines=3, max_lines=3)
    return Outcome(
        case=case,
        dim=dim,
        seed=seed,
        wilson=indices(ds, dim),
        core_parity=parity_from(ds, dim),
        numpy_parity=(nu0p, weak if dim == 3 else ()),
        reason=int(ds.undefined_reason),
        parity_agrees=int(ds.parity_agrees),
        gap_direct=float(ds.gap_direct),
        gap_at_reported_kappa=float(e[case.filling] - e[case.filling - 1]),
        starved=indices(starved, dim),
        starved_parity=parity_from(starved, dim),
    )


@pytest.fixture(scope="module")
def survey() -> list[Outcome]:
    return [survey_one(3, s) for s in range(N3D)] + [survey_one(2, s) for s in range(N2D)]


def test_wilson_loop_agrees_with_parity_on_random_models(survey):
    undefined = [o.label() + f" reason={o.reason}" for o in survey if o.reason != 0]
    assert not undefined, f"default sampling left gapped random models undefined: {undefined}"
    # the reference is NumPy's parity product (random_models.parity_indices), never the core's
    wilson_wrong = [
        f"{o.label()}: Wilson {o.wilson}, NumPy parity {o.numpy_parity}"
        for o in survey
        if o.wilson != o.numpy_parity
    ]
    assert not wilson_wrong, "\n".join(wilson_wrong)
    parity_wrong = [
        f"{o.label()}: core parity {o.core_parity} (with three lines {o.starved_parity}), "
        f"NumPy parity {o.numpy_parity}"
        for o in survey
        if not (o.core_parity == o.starved_parity == o.numpy_parity)
    ]
    assert not parity_wrong, "\n".join(parity_wrong)
    assert all(o.parity_agrees == 1 for o in survey)


def test_parity_is_checked_where_the_wilson_loop_has_no_answer(survey):
    # with three pump lines the Wilson loop leaves most models undefined while the parity
    # product (compared with NumPy above) still answers: there the two cannot be one copy
    starved = [o for o in survey if o.starved[0] == -1]
    assert len(starved) >= len(survey) // 2, (len(starved), len(survey))
    assert {rm.phase_of(o.numpy_parity[0], o.numpy_parity[1], o.dim) for o in starved} >= {
        "trivial",
        "strong",
    }
    assert all(o.starved_parity[0] in (0, 1) for o in starved)


def test_random_models_reach_every_phase(survey):
    counts = Counter((o.dim, rm.phase_of(o.wilson[0], o.wilson[1], o.dim)) for o in survey)
    report = {f"3D {p}": counts[(3, p)] for p in rm.PHASES}
    report.update({"2D Z2-even": counts[(2, "trivial")], "2D Z2-odd": counts[(2, "strong")]})
    print("phases hit by the random models:", report)
    for phase in rm.PHASES:
        assert counts[(3, phase)] >= 5, counts
    assert counts[(2, "trivial")] >= 5 and counts[(2, "strong")] >= 5, counts


def test_reported_gap_is_the_gap_at_the_reported_kappa(survey):
    # the core's gap_direct is a real gap of the model (NumPy at gap_kappa) and no larger
    # than the NumPy grid-and-minimiser estimate by more than 2 % of it
    for o in survey:
        assert o.gap_direct == pytest.approx(o.gap_at_reported_kappa, abs=1e-9), o.label()
        assert o.gap_direct <= 1.02 * o.case.gap + 1e-12, (o.label(), o.gap_direct, o.case.gap)


def transformed_subset(survey) -> list[Outcome]:
    three = [o for o in survey if o.dim == 3][:N_TRANSFORMED]
    two = [o for o in survey if o.dim == 2][:N_TRANSFORMED]
    return three + two


def test_indices_unchanged_under_random_basis_change(survey):
    rng = np.random.default_rng(2026)
    for o in transformed_subset(survey):
        model = o.case.model
        w = rm.random_unitary(rng, model.norb)
        rotated = rm.change_basis(model, w)
        # the rotation really scrambles the orbitals, and the spectrum is unchanged
        k = rng.random((3, o.dim))
        h0, h1 = rm.bloch_hamiltonian(model, k), rm.bloch_hamiltonian(rotated, k)
        assert np.abs(h1 - h0).max() > 0.1
        np.testing.assert_allclose(np.linalg.eigvalsh(h1), np.linalg.eigvalsh(h0), atol=1e-10)
        ds = ts.invariants(rotated, o.case.filling)
        assert indices(ds, o.dim) == o.wilson, o.label()
        assert parity_from(ds, o.dim) == o.numpy_parity, o.label()
        assert rm.parity_indices(rotated, o.case.filling)[0] == o.numpy_parity[0], o.label()


def test_indices_unchanged_under_small_inversion_breaking_perturbation(survey):
    rng = np.random.default_rng(7)
    for o in transformed_subset(survey):
        model = o.case.model
        strength = rng.uniform(0.5, 0.95) * o.case.gap / 4
        perturbed = rm.inversion_breaking_perturbation(model, strength, rng)
        assert perturbed.inversion is None
        # inversion is really broken (by far more than the symmetry tolerance) ...
        res = perturbed.symmetry_residuals([perturbed.resolve()], model.inversion, "inversion")[0]
        assert res > 1e3 * TOLERANCE, (o.label(), res)
        # ... time reversal is not, and the gap stays open
        assert (
            perturbed.symmetry_residuals(
                [perturbed.resolve()], model.time_reversal, "time_reversal"
            )[0]
            < TOLERANCE
        )
        check_filling(perturbed, o.case.filling)
        ds = ts.invariants(perturbed, o.case.filling)
        assert int(ds.undefined_reason) == 0, o.label()
        assert indices(ds, o.dim) == o.wilson, (o.label(), strength / o.case.gap)
        assert "nu0_parity" not in ds


def test_generator_is_reproducible_and_symmetric():
    a = rm.random_model(11, dim=3, norb=6)
    b = rm.random_model(11, dim=3, norb=6)
    assert a.model.to_dict() == b.model.to_dict() and a.filling == b.filling
    m = a.model
    pts = [m.resolve()]
    assert m.symmetry_residuals(pts, m.time_reversal, "time_reversal")[0] < 1e-13
    assert m.symmetry_residuals(pts, m.inversion, "inversion")[0] < 1e-13
    # without inversion the couplings break it
    c = rm.random_model(11, dim=3, norb=6, inversion=False)
    assert c.model.inversion is None
    p = a.model.inversion
    assert c.model.symmetry_residuals([c.model.resolve()], p, "inversion")[0] > 1e-3


@pytest.mark.parametrize("phase", rm.PHASES)
def test_core_phase_steers_the_uncoupled_model(phase):
    # with the couplings switched off the model is the designed core: its NumPy parity phase
    # is the requested one (the occupied pair at TRIM a has parity -sign M_a)
    for seed in range(4):
        case = rm.random_model(seed, dim=3, core_phase=phase)
        nu0, weak = rm.parity_indices(case.model, case.filling, {"coupling": 0.0})
        assert rm.phase_of(nu0, weak, 3) == phase


def test_numpy_bloch_sum_matches_core(rng):
    case = rm.random_model(3, dim=3, norb=8)
    k = rng.random((20, 3))
    np.testing.assert_allclose(
        case.model.hamiltonian(k), rm.bloch_hamiltonian(case.model, k), atol=1e-12
    )


def test_a_16_orbital_model_agrees_with_parity():
    # larger models take the core's n > 8 eigensolver path; this one (seed 1, filling 10)
    # used to stop with "Schur decomposition of a Wilson loop" (ArithmeticError)
    case = rm.random_model(1, dim=3, norb=16)
    ds = ts.invariants(case.model, case.filling)
    nu0, weak = rm.parity_indices(case.model, case.filling)
    assert int(ds.undefined_reason) == 0
    assert indices(ds, 3) == (nu0, weak) == parity_from(ds, 3)


def test_inversion_free_random_models_are_defined():
    # time reversal only: the Wilson loop must still give a defined answer with defaults
    for seed in range(6):
        case = rm.random_model(100 + seed, dim=3, inversion=False)
        ds = ts.invariants(case.model, case.filling)
        assert int(ds.undefined_reason) == 0, seed
        assert "nu0_parity" not in ds


@pytest.mark.parametrize("dim", [2, 3])
def test_inversion_free_random_models_have_their_cores_index(dim):
    """Without inversion the index has no parity shortcut, but it is known all the same: the
    model is an inversion-symmetric core plus couplings that break inversion, and along
    core + s·couplings (0 ≤ s ≤ 1) no eigenvalue moves by more than ‖couplings‖ (Weyl's
    inequality; Horn & Johnson, Matrix Analysis, 2nd ed. (2013), chapter 4; from memory). With
    ‖couplings‖ < gap/2 of the core the gap stays open, so the index is the core's, which the
    NumPy parity product gives (Fu & Kane, Phys. Rev. B 76, 045302 (2007))."""
    reached = set()
    phases = rm.PHASES if dim == 3 else ("trivial", "strong")
    for seed in range(6):
        core_phase = phases[seed % len(phases)]
        case = rm.random_model(
            200 + seed, dim=dim, inversion=False, core_phase=core_phase, coupling=0.3
        )
        # the same seed with inversion kept draws the same core (and so the same P)
        p = rm.random_model(
            200 + seed, dim=dim, core_phase=core_phase, coupling=0.3
        ).model.inversion
        core = {"coupling": 0.0}
        assert case.model.inversion is None
        assert case.model.symmetry_residuals([case.model.resolve(core)], p, "inversion")[0] < 1e-12
        assert case.model.symmetry_residuals([case.model.resolve()], p, "inversion")[0] > 1e-4
        # the certificate: the couplings' norm bound against the core's gap (NumPy estimate)
        core_gap, _ = rm.direct_gap(case.model, case.filling, core)
        couplings = [(r, t) for r, t, term in case.model.hoppings() if term == "coupling"]
        assert rm.norm_bound(couplings) < 0.5 * core_gap, seed
        nu0, weak = rm.parity_indices(case.model, case.filling, core, inversion=p)
        want = (nu0, weak if dim == 3 else ())
        ds = ts.invariants(case.model, case.filling)
        assert int(ds.undefined_reason) == 0, seed
        assert indices(ds, dim) == want, (seed, core_phase)
        reached.add(rm.phase_of(nu0, weak, dim))
    assert reached == set(phases)
