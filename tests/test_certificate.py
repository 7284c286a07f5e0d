"""Convergence certificate: tight flows are recomputed with doubled loop sampling, and a point
is marked converged only if the answer holds.

The test model stretches the spinful square-lattice model along x (its x bonds reach five
cells), so each spin block's Chern number is multiplied by the degree 5 of the map
κx ↦ 5κx and the Z2 index stays odd (common practice, no source: the Chern number of a
pulled-back bundle is the degree times the original one). Loops of 7 points alias those bonds:
as a tight-binding model such sampling is refused outright; as a callable model (reach unknown)
the certificate is what catches it.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts
from toposweep.models._matrices import kron, s0, spin_time_reversal, sx, sy, sz

sys.path.insert(0, str(Path(__file__).resolve().parent))
from random_models import parity_indices, random_model  # noqa: E402


def stretched_bhz(reach: int) -> ts.TightBinding:
    """Qi–Wu–Zhang block and partner (Qi, Wu & Zhang, PRB 74, 085308 (2006)) with κx → reach·κx."""
    m = ts.TightBinding(2, 4, time_reversal=kron(spin_time_reversal, s0), name="stretched")
    gz = kron(s0, sz)
    m.add((0, 0), gz, term="mass")
    m.add((reach, 0), 0.5 * (gz - 1j * kron(sz, sx)))
    m.add((0, 1), 0.5 * (gz - 1j * kron(s0, sy)))
    m.defaults = {"mass": -1.0}
    return m


def as_callable(model: ts.TightBinding) -> ts.CallableModel:
    """The same Hamiltonian as a function: toposweep cannot see how far its hoppings reach."""

    def h(kappa, mass=-1.0):
        return model.hamiltonian(kappa, {"mass": mass})

    return ts.CallableModel(h, 2, 4, time_reversal=model.time_reversal)


COARSE = {"loop_points": 7, "lines": 3, "step_limit": 0.45}


def test_tight_binding_loops_too_coarse_for_the_hoppings_are_refused():
    with pytest.raises(ts.SamplingError, match="cannot resolve hoppings that reach 5 cells"):
        ts.invariants(stretched_bhz(5), 2, **COARSE)
    # the lattice method has its own mesh check and is not refused: from 4 × 2 cells it
    # splits the cells whose links are too rough until they resolve the bonds, and finds the
    # odd index (it gave up with reason 10 when it could only double the whole mesh twice)
    ds = ts.invariants(stretched_bhz(5), 2, method="lattice", loop_points=4, lines=3)
    assert int(ds.nu0) == 1 and int(ds.lattice_undefined_reason) == 0
    assert int(ds.lattice_points) > 4 * 3 and int(ds.lattice_loop_points) >= 4 * 5


def test_certificate_rejects_an_aliased_answer():
    model = as_callable(stretched_bhz(5))
    assert int(ts.invariants(model, 2).nu0) == 1  # default sampling resolves it
    blind = ts.invariants(model, 2, certify=False, **COARSE)
    assert int(blind.nu0) == 0  # wrong, and nothing in the flow alone says so
    checked = ts.invariants(model, 2, **COARSE)
    assert int(checked.nu0) == -1
    assert int(checked.undefined_reason) == 9  # changes_with_doubled_loop_points
    assert int(checked.converged) == 0
    assert int(checked.loop_points_used) == 14


def test_certified_points_keep_their_answer_and_report_the_finer_run():
    """Random TR+I models at coarse sampling: whenever the certificate recomputes a plane, the
    answer equals Fu–Kane parity (Fu & Kane, PRB 76, 045302 (2007)), computed with NumPy at the
    TRIMs (``random_models.parity_indices``, not the package); diagnostics are finite."""
    recomputed = 0
    for seed in range(8):
        case = random_model(seed, dim=2)
        want, _ = parity_indices(case.model, case.filling)
        ds = ts.invariants(case.model, case.filling, loop_points=6, lines=3, step_limit=0.3)
        assert int(ds.nu0) in (-1, want), f"seed {seed}"
        if int(ds.loop_points_used) == 12:
            recomputed += 1
            assert int(ds.nu0) == want, f"seed {seed}"
        assert np.isfinite(float(ds.max_step)) and np.isfinite(float(ds.min_clearance))
    assert recomputed >= 3  # the coarse lines and loose step limit make several flows tight


def test_clean_flows_are_not_recomputed():
    ds = ts.invariants(ts.models.wilson_dirac(), 2, {"mass": -2.0})
    assert int(ds.loop_points_used) == 32 and int(ds.converged) == 1
    assert float(ds.min_clearance) > 2 * float(ds.max_step)
