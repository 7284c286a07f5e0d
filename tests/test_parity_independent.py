"""The parity cross-check is an independent answer, not a copy of the Wilson-loop one.

The parity variables (``nu0_parity``, ``nu_parity``, ``parity_undefined_reason``,
``parity_agrees``) must come from the Fu–Kane criterion (Fu & Kane, Phys. Rev. B 76, 045302
(2007)): the products of the parity eigenvalues of the occupied Kramers pairs at the TRIMs.
The reference here is computed without the core: a NumPy Bloch sum of the model's hopping list
and ``numpy.linalg.eigh`` at each TRIM (``random_models.parity_indices``).

Most checks sit at points where the two methods give *different* outputs, so that a package
that copied one answer into the other (or derived one from the other) fails:
- the Wilson loop is undefined but the parity product is not: the Wilson–Dirac model with
  pump lines capped at three (the flow is not resolved; the TRIMs are gapped), and the d–f
  lattice without hybridisation (its bands cross away from the TRIMs, so the Wilson loop is
  gapless; at the TRIMs the levels are apart);
- the parity product is undefined but the Wilson loop is not: the Kane–Mele model with a
  staggered potential or Rashba coupling, which break inversion (Kane & Mele, Phys. Rev. Lett.
  95, 226801 (2005): Z2-odd for λ_v < 3√3 λ_SO without Rashba).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts

sys.path.insert(0, str(Path(__file__).resolve().parent))
from random_models import parity_indices, phase_of, random_model  # noqa: E402

ONLY_THREE_LINES = {"lines": 3, "max_lines": 3}
NOT_CONVERGED = 4  # reason code not_converged_within_max_lines (dataset.REASONS)
INVERSION_BROKEN = 7  # inversion_not_a_symmetry_at_this_point


def parity_of(ds) -> tuple[int, list[int]]:
    nu = ds.nu_parity.values.tolist() if "nu_parity" in ds else []
    return int(ds.nu0_parity), nu


def without_inversion(model: ts.TightBinding) -> ts.TightBinding:
    """The same hoppings with no inversion matrix attached (it is then given in the call)."""
    out = ts.TightBinding(model.dim, model.norb, time_reversal=model.time_reversal)
    for r, t, term in model.hoppings():
        out.add(r, t, term)
    out.defaults = dict(model.defaults)
    return out


def numpy_parity(model, filling, params) -> tuple[int, list[int]]:
    nu0, weak = parity_indices(model, filling, params)
    return nu0, list(weak) if model.dim == 3 else []


# Wilson–Dirac phases by Fu & Kane (2007): (1;000) for −3 < m < −1, (0;111) for |m| < 1,
# (1;111) for 1 < m < 3 — the NumPy parity reference must say the same
@pytest.mark.parametrize(
    ("mass", "want"), [(-2.0, (1, [0, 0, 0])), (-0.5, (0, [1, 1, 1])), (2.0, (1, [1, 1, 1]))]
)
def test_parity_is_defined_where_the_wilson_loop_is_not(mass, want):
    model = ts.models.wilson_dirac()
    params = {"mass": mass}
    assert numpy_parity(model, 2, params) == want
    ds = ts.invariants(model, 2, params, **ONLY_THREE_LINES)
    assert int(ds.nu0) == -1 and int(ds.undefined_reason) == NOT_CONVERGED
    assert ds.nu.values.tolist() == [-1, -1, -1]
    assert int(ds.phase) == -1  # the phase is the Wilson-loop answer's
    assert parity_of(ds) == want
    assert int(ds.parity_undefined_reason) == 0
    assert int(ds.parity_agrees) == -1  # nothing to compare with


# d–f lattice without hybridisation: TRIM classes inverted as the module docstring derives
# (Δ = t_d − t_f = 0.3 at the defaults): the parity reference decides, the docstring agrees
@pytest.mark.parametrize(
    ("f_level", "want"),
    [(-0.75, (1, [1, 1, 1])), (-0.2, (0, [1, 1, 1])), (1.0, (1, [1, 1, 1]))],
)
def test_df_lattice_without_hybridisation_has_parity_but_no_wilson_loop(f_level, want):
    model = ts.models.df_lattice()
    params = {"hybridisation": 0.0, "f_level": f_level}
    assert numpy_parity(model, 2, params) == want
    ds = ts.invariants(model, 2, params)
    assert int(ds.nu0) == -1 and int(ds.undefined_reason) == 1  # gapless away from the TRIMs
    assert float(ds.gap_direct) < 1e-3 * float(ds.bandwidth)
    assert parity_of(ds) == want
    assert int(ds.parity_agrees) == -1


def test_df_lattice_without_hybridisation_or_inversion_is_trivial_both_ways():
    # no TRIM inverted (ε_f < −3.5 Δ): d and f never cross, so both methods answer (0;000)
    model = ts.models.df_lattice()
    params = {"hybridisation": 0.0, "f_level": -1.5}
    assert numpy_parity(model, 2, params) == (0, [0, 0, 0])
    ds = ts.invariants(model, 2, params)
    assert (int(ds.nu0), ds.nu.values.tolist()) == (0, [0, 0, 0]) == parity_of(ds)
    assert int(ds.parity_agrees) == 1


@pytest.mark.parametrize("params", [{"staggered": 0.45}, {"rashba": 0.05}])
def test_wilson_loop_is_defined_where_parity_is_not(params):
    ds = ts.invariants(ts.models.kane_mele(), 2, params)
    assert int(ds.nu0) == 1 and int(ds.undefined_reason) == 0
    assert int(ds.phase) == 3
    assert int(ds.nu0_parity) == -1
    assert int(ds.parity_undefined_reason) == INVERSION_BROKEN
    assert int(ds.parity_agrees) == -1


def test_parity_over_a_sweep_is_numpys_point_by_point():
    """A sweep of the Wilson–Dirac mass at three pump lines: the Wilson loop is undefined at
    every gapped point, the parity arrays are NumPy's, element by element."""
    masses = np.array([-3.5, -2.5, -1.5, -0.5, 0.5, 1.5, 2.5, 3.5])
    ds = ts.sweep(ts.models.wilson_dirac(), {"mass": masses}, 2, progress=False, **ONLY_THREE_LINES)
    want = [numpy_parity(ts.models.wilson_dirac(), 2, {"mass": m}) for m in masses]
    assert ds.nu0_parity.values.tolist() == [w[0] for w in want]
    assert ds.nu_parity.values.tolist() == [w[1] for w in want]
    # the reference spans all three phases, so a constant answer fails too
    assert {phase_of(w[0], w[1], 3) for w in want} == {"trivial", "weak", "strong"}
    undefined = ds.nu0.values < 0
    assert undefined.sum() >= 4, ds.nu0.values  # enough points where only parity answers


def test_parity_with_an_inversion_given_in_the_call_on_random_models():
    """Random TR+I models (``random_models.py``) with the inversion passed to the call and the
    Wilson loop starved: the core's parity equals NumPy's, including the weak indices."""
    seen = set()
    for seed in range(8):
        case = random_model(seed, dim=3, core_phase=("trivial", "weak", "strong")[seed % 3])
        model = without_inversion(case.model)
        assert model.inversion is None
        ds = ts.invariants(model, case.filling, inversion=case.model.inversion, **ONLY_THREE_LINES)
        want = numpy_parity(case.model, case.filling, None)
        assert parity_of(ds) == want, f"seed {seed}"
        seen.add(phase_of(want[0], want[1], 3))
    assert seen == {"trivial", "weak", "strong"}
