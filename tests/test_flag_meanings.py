"""Flag meanings checked by name: every code a result carries must read as what the point is.

A file is read by people and by other programs through ``flag_values``/``flag_meanings`` (CF
conventions, section 3.5; common practice). Counting the flags proves nothing — a swap of two
names keeps the count — so each check here takes a point whose answer is known from a
published phase diagram, reads the code the package wrote, looks that code up in the
variable's own flags and compares the *name*:

- Wilson–Dirac model (Fu & Kane, Phys. Rev. B 76, 045302 (2007)): (0;000) for |m| > 3,
  (1;000) for −3 < m < −1, (0;111) for |m| < 1; the gap closes at TRIMs for m = ±1, ±3.
- BHZ-type model (Qi, Wu & Zhang, Phys. Rev. B 74, 085308 (2006); Bernevig, Hughes & Zhang,
  Science 314, 1757 (2006)): Z2-odd for 0 < |m| < 2, even for |m| > 2.
- Kane–Mele model (Kane & Mele, Phys. Rev. Lett. 95, 226801 (2005)): Z2-odd below
  λ_v = 3√3 λ_SO; the staggered potential breaks inversion.
- d–f lattice without hybridisation: its bands cross away from the TRIMs (module docstring;
  ``test_parity_independent.py`` checks the crossing), so it is gapless.

The same is read back from a written file with netCDF4-python (the netCDF-C library), an
outside reader.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts

THREE_LINES = {"lines": 3, "max_lines": 3}  # Wilson loop not resolved: undefined


def meaning(var) -> str:
    """The flag meaning of a scalar flag variable's value, by the variable's own attributes."""
    names = var.attrs["flag_meanings"].split()
    values = [int(v) for v in np.asarray(var.attrs["flag_values"])]
    assert len(names) == len(values) == len(set(values)) == len(set(names))
    return dict(zip(values, names, strict=True))[int(var)]


# (model, params, sampling) → the phase name the published diagram gives
PHASE_CASES = [
    ("wilson_dirac", {"mass": -3.5}, {}, "trivial_insulator"),
    ("wilson_dirac", {"mass": -2.0}, {}, "strong_topological_insulator"),
    ("wilson_dirac", {"mass": -0.5}, {}, "weak_topological_insulator"),
    ("wilson_dirac", {"mass": 0.5}, {}, "weak_topological_insulator"),
    ("wilson_dirac", {"mass": 2.0}, {}, "strong_topological_insulator"),
    ("wilson_dirac", {"mass": -2.0}, THREE_LINES, "undefined"),
    ("bhz", {"mass": -1.0}, {}, "z2_odd_2d_insulator"),
    ("bhz", {"mass": 3.0}, {}, "trivial_insulator"),
    ("kane_mele", {"staggered": 0.45}, {}, "z2_odd_2d_insulator"),
    ("kane_mele", {"staggered": 0.7}, {}, "trivial_insulator"),
]


@pytest.mark.parametrize(("name", "params", "sampling", "want"), PHASE_CASES)
def test_phase_reads_as_the_published_phase(name, params, sampling, want):
    ds = ts.invariants(getattr(ts.models, name)(), 2, params, **sampling)
    assert meaning(ds.phase) == want


def test_index_flags_read_as_even_and_odd():
    # (1;000) at m = −2: ν0 odd, every weak index even, by both methods
    ds = ts.invariants(ts.models.wilson_dirac(), 2, {"mass": -2.0})
    assert meaning(ds.nu0) == "odd" == meaning(ds.nu0_parity)
    for i in range(3):
        assert meaning(ds.nu[i]) == "even" == meaning(ds.nu_parity[i])
    assert meaning(ds.parity_agrees) == "agree"
    assert meaning(ds.converged) == "yes"
    assert meaning(ds.undefined_reason) == "defined" == meaning(ds.parity_undefined_reason)
    weak = ts.invariants(ts.models.wilson_dirac(), 2, {"mass": -0.5})  # (0;111)
    assert meaning(weak.nu0) == "even" and meaning(weak.nu[0]) == "odd"


# (model, params, sampling, variable) → the reason name that says why
REASON_CASES = [
    ("wilson_dirac", {"mass": -2.0}, THREE_LINES, "undefined_reason", "not_converged"),
    ("df_lattice", {"hybridisation": 0.0}, {}, "undefined_reason", "gapless_direct"),
    ("wilson_dirac", {"mass": 1.0}, {}, "parity_undefined_reason", "degenerate_at_filling"),
    ("kane_mele", {"staggered": 0.45}, {}, "parity_undefined_reason", "inversion_not_a_symm"),
]


@pytest.mark.parametrize(("name", "params", "sampling", "var", "want"), REASON_CASES)
def test_reason_reads_as_why(name, params, sampling, var, want):
    ds = ts.invariants(getattr(ts.models, name)(), 2, params, **sampling)
    assert meaning(ds[var]).startswith(want), meaning(ds[var])


def test_gapless_point_reads_as_undefined_with_a_gap_reason():
    # m = 1: the Wilson–Dirac gap closes at the TRIMs (Fu & Kane 2007)
    ds = ts.invariants(ts.models.wilson_dirac(), 2, {"mass": 1.0})
    assert meaning(ds.nu0) == "undefined" == meaning(ds.phase)
    assert meaning(ds.undefined_reason) in (
        "gapless_direct_gap_below_floor",
        "degenerate_at_filling_at_trim",
    )
    assert meaning(ds.parity_agrees) == "not_comparable"


def test_file_flags_read_by_the_netcdf_c_library(tmp_path):
    """A sweep written to disk, read with netCDF4-python: every phase code names its phase."""
    import netCDF4  # installed by `make test` (Makefile TEST_DEPS)

    masses = np.array([-3.5, -2.0, -0.5, 1.0])
    want = [
        "trivial_insulator",
        "strong_topological_insulator",
        "weak_topological_insulator",
        "undefined",
    ]
    out = tmp_path / "map.nc"
    ts.sweep(ts.models.wilson_dirac(), {"mass": masses}, 2, out=out, progress=False).close()
    with netCDF4.Dataset(out) as f:
        var = f.variables["phase"]
        table = dict(
            zip(
                [int(v) for v in np.atleast_1d(var.getncattr("flag_values"))],
                var.getncattr("flag_meanings").split(),
                strict=True,
            )
        )
        codes = [int(v) for v in np.ma.filled(var[:], -99)]
        np.testing.assert_allclose(f.variables["mass"][:], masses)
    assert [table[c] for c in codes] == want


def test_more_reasons_read_as_why():
    from test_certificate import COARSE, as_callable, stretched_bhz

    # the spinful square lattice conserves s_z, so s_z ⊗ σ_z is an inversion of it as well,
    # but one that anticommutes with time reversal: Kramers partners get opposite parities and
    # the Fu–Kane product is undefined (Fu & Kane, Phys. Rev. B 76, 045302 (2007), where
    # partners share the parity because P and Θ commute)
    s_z = np.diag([1.0, -1.0]).astype(complex)
    ds = ts.invariants(ts.models.bhz(), 2, inversion=np.kron(s_z, s_z))
    assert meaning(ds.parity_undefined_reason) == "odd_count_of_odd_parity_kramers_states"
    assert meaning(ds.nu0) == "odd"  # Qi, Wu & Zhang (2006): m = −1 is Z2-odd
    # loops of 7 points alias bonds that reach 5 cells (test_certificate.py): the certificate
    # finds the answer changes with doubled loop points, so the point is not converged
    ds = ts.invariants(as_callable(stretched_bhz(5)), 2, **COARSE)
    assert meaning(ds.undefined_reason) == "changes_with_doubled_loop_points"
    assert meaning(ds.converged) == "no"
    # 1e-10 from the Kane–Mele boundary λ_v* = 3√3 λ_SO (Kane & Mele, PRL 95, 226801
    # (2005)) with a floor below the gap: the lattice mesh cannot be refined far enough
    critical = 3**1.5 * 0.06
    ds = ts.invariants(
        ts.models.kane_mele(),
        2,
        {"spin_orbit": 0.06, "staggered": critical * (1 - 1e-10)},
        method="lattice",
        gap_floor=1e-14,
        prove_gap="never",
    )
    assert meaning(ds.lattice_undefined_reason) == "lattice_mesh_too_coarse"
    # an i·1 hopping is odd under Θ = iσ_y K: time reversal broken at b ≠ 0 only
    model = ts.models.wilson_dirac()
    model.add((1, 0, 0), 1j * np.eye(4), term="b")
    model.defaults["b"] = 0.0
    swept = ts.sweep(model, {"b": [0.0, 0.3]}, 2, progress=False)
    assert meaning(swept.undefined_reason[1]) == "time_reversal_broken_at_this_point"
    assert meaning(swept.undefined_reason[0]) == "defined"


def test_reason_names_are_the_cores_constants():
    """Codes that no outside input can provoke reliably (estimates that disagree, an inversion
    that mixes occupied and empty states) are pinned to the core's own constants by name: the
    constant names in src/topology/parity.rs and evaluation.py, read from the source."""
    from toposweep import evaluation
    from toposweep.results.dataset import REASONS

    source = (Path(__file__).resolve().parent.parent / "src" / "topology" / "parity.rs").read_text()
    consts = {m[0]: int(m[1]) for m in re.findall(r"pub const (\w+): u8 = (\d+);", source)}
    consts["INVERSION_BROKEN"] = evaluation.REASON_INVERSION_BROKEN
    consts["TIME_REVERSAL_BROKEN"] = evaluation.REASON_TIME_REVERSAL_BROKEN
    want = {
        "DEFINED": "defined",
        "GAPLESS": "gapless_direct_gap_below_floor",
        "DEGENERATE_AT_TRIM": "degenerate_at_filling_at_trim",
        "NU0_ESTIMATES_DISAGREE": "nu0_estimates_disagree",
        "NOT_CONVERGED": "not_converged_within_max_lines",
        "INVERSION_MIXES_FILLING": "inversion_mixes_occupied_and_empty_states",
        "ODD_KRAMERS_COUNT": "odd_count_of_odd_parity_kramers_states",
        "INVERSION_BROKEN": "inversion_not_a_symmetry_at_this_point",
        "TIME_REVERSAL_BROKEN": "time_reversal_broken_at_this_point",
        "CHANGES_WITH_LOOP_POINTS": "changes_with_doubled_loop_points",
        "LATTICE_MESH_TOO_COARSE": "lattice_mesh_too_coarse",
    }
    assert set(want) <= set(consts), sorted(consts)
    for name, meaning_ in want.items():
        assert REASONS[consts[name]] == meaning_, name


def test_a_point_without_time_reversal_is_undefined_in_every_variable():
    """Where time reversal breaks (an i·1 hopping is odd under Θ = iσ_y K), every index of every
    method is −1 and every comparison not comparable — not only the reason code."""
    model = ts.models.wilson_dirac()
    model.add((1, 0, 0), 1j * np.eye(4), term="b")
    model.defaults["b"] = 0.0
    ds = ts.sweep(model, {"b": [0.0, 0.3]}, 2, progress=False, method="both")
    broken = ds.isel(b=1)
    for name in ("nu0", "nu", "nu0_parity", "nu_parity", "nu0_lattice", "nu_lattice"):
        assert (broken[name].values == -1).all(), name
    assert (broken.odd_parity_states.values == -1).all()
    for name in ("phase", "parity_agrees", "methods_agree"):
        assert meaning(broken[name]) in ("undefined", "not_comparable"), name
    # b = 0 is the Wilson–Dirac model at m = −2: (1;000) by every method (Fu & Kane 2007)
    good = ds.isel(b=0)
    assert int(good.nu0) == int(good.nu0_parity) == int(good.nu0_lattice) == 1


def test_two_dimensional_results_have_no_axis_variables():
    # a 2D model has a single Z2 index (design notes): no weak indices, planes or estimates
    two = ts.invariants(ts.models.bhz(), 2)
    three = ts.invariants(ts.models.wilson_dirac(), 2)
    for name in ("nu", "z2_plane", "nu0_by_axis", "nu_parity"):
        assert name not in two and name in three, name
    assert two.nu0.attrs["long_name"] == "Z2 index"
    assert three.nu0.attrs["long_name"] == "strong Z2 index nu0"


def test_time_reversal_broken_on_a_model_without_inversion():
    # no inversion known: reason 8 where time reversal breaks, and no parity variables at all
    model = ts.models.wilson_dirac()
    model.inversion = None
    model.add((1, 0, 0), 1j * np.eye(4), term="b")
    model.defaults["b"] = 0.0
    ds = ts.sweep(model, {"b": [0.0, 0.3]}, 2, progress=False)
    assert [meaning(ds.undefined_reason[i]) for i in range(2)] == [
        "defined",
        "time_reversal_broken_at_this_point",
    ]
    assert "nu0_parity" not in ds


def test_the_symmetry_warning_points_at_the_callers_line():
    from toposweep import SymmetryWarning

    model = ts.models.wilson_dirac()
    model.add((1, 0, 0), 1j * np.eye(4), term="b")
    with pytest.warns(SymmetryWarning) as caught:
        ts.invariants(model, 2, {"b": 0.3})
    assert caught[0].filename == __file__
