"""Sweeps over parameter grids: physics acceptance, dataset schema, file round trip, errors."""

from __future__ import annotations

import os
import signal

import numpy as np
import pytest
import toposweep as ts
import xarray as xr
from toposweep.errors import FillingError, ParameterError, SamplingError
from toposweep.sweep import SweepInterrupted

FAST = {"loop_points": 16, "lines": 9}
MASS = np.linspace(-4.0, 4.0, 17)
# t = 0 (flat bands) and t < 0 (the band structure shifted by (1/2, 1/2, 1/2)) included
HOPPING = np.array([-1.0, 0.0, 0.5, 1.0, 2.0])


def fu_kane_expected(m: float, t: float) -> tuple[int, list[int]]:
    """(ν0; ν1ν2ν3) of H = t Σ sin k_i Γ_i + (m + t Σ cos k_i) Γ_4 from the parity criterion.

    Fu & Kane, Phys. Rev. B 76, 045302 (2007), eqs. (3.10)-(3.11): (-1)^ν0 = Π_i δ_i over the
    eight TRIMs and (-1)^ν_k = Π of δ_i over the four TRIMs with n_k = 1. At a TRIM with
    components n ∈ {0, 1/2}^3, H = (m + t Σ cos 2πn_i) Γ_4 and Γ_4 = P, so the occupied Kramers
    pair has parity δ = −sign(m + t Σ cos 2πn_i). Computed here in plain numpy.
    """
    trims = np.array([[a, b, c] for a in (0, 0.5) for b in (0, 0.5) for c in (0, 0.5)])
    delta = -np.sign(m + t * np.cos(2 * np.pi * trims).sum(axis=1))
    nu0 = int(np.prod(delta) < 0)
    weak = [int(np.prod(delta[trims[:, k] == 0.5]) < 0) for k in range(3)]
    return nu0, weak


def analytic_gap(m: float, t: float) -> float:
    """Smallest direct gap: E = ±sqrt(t² Σ sin² + (m + t Σ cos)²) is smallest at a TRIM."""
    return float(2 * np.min(np.abs(m + t * np.array([3.0, 1.0, -1.0, -3.0]))))


@pytest.fixture(scope="module")
def wd_map() -> xr.Dataset:
    return ts.sweep(ts.models.wilson_dirac(), {"mass": MASS, "hopping": HOPPING}, 2, **FAST)


def test_wilson_dirac_map_matches_fu_kane_parity(wd_map: xr.Dataset) -> None:
    gapless_seen = 0
    for i, m in enumerate(MASS):
        for j, t in enumerate(HOPPING):
            point = wd_map.isel(mass=i, hopping=j)
            gap = analytic_gap(m, t)
            assert float(point.gap_direct) == pytest.approx(gap, abs=1e-9)
            if gap < 1e-9:  # |m/t| ∈ {1, 3} or m = t = 0: the gap closes
                gapless_seen += 1
                assert int(point.nu0) == -1 and int(point.phase) == -1
                assert int(point.undefined_reason) != 0
                continue
            nu0, weak = fu_kane_expected(m, t)
            assert int(point.undefined_reason) == 0, (m, t)
            assert int(point.nu0) == nu0, (m, t)
            assert point.nu.values.tolist() == weak, (m, t)
            assert int(point.parity_agrees) == 1, (m, t)
    assert gapless_seen >= 10  # the grid really crosses the gap closings


def test_wilson_dirac_map_has_all_four_phases(wd_map: xr.Dataset) -> None:
    # Fu & Kane, PRB 76, 045302 (2007): (0;000), (1;000), (0;111), (1;111) all occur
    seen = {
        (int(a), tuple(b))
        for a, b in zip(
            wd_map.nu0.values.ravel(), wd_map.nu.values.reshape(-1, 3).tolist(), strict=True
        )
    }
    assert {(0, (0, 0, 0)), (1, (0, 0, 0)), (0, (1, 1, 1)), (1, (1, 1, 1))} <= seen


def test_schema(wd_map: xr.Dataset) -> None:
    assert tuple(wd_map.nu0.dims) == ("mass", "hopping")
    assert tuple(wd_map.nu.dims) == ("mass", "hopping", "axis")
    assert tuple(wd_map.z2_plane.dims) == ("mass", "hopping", "axis", "cut")
    expected = {"mass": 17, "hopping": 5, "axis": 3, "cut": 2, "kappa_axis": 3}
    assert expected.items() <= dict(wd_map.sizes).items()
    for name in ("nu0", "nu", "z2_plane", "nu0_by_axis", "gap_direct", "gap_indirect"):
        assert wd_map[name].dims[:2] == ("mass", "hopping"), name
    for name in ("converged", "nu0_parity", "nu_parity", "parity_agrees", "phase"):
        assert wd_map[name].dims[:2] == ("mass", "hopping"), name
    np.testing.assert_array_equal(wd_map.mass.values, MASS)
    np.testing.assert_array_equal(wd_map.hopping.values, HOPPING)
    assert wd_map.mass.attrs == {"long_name": "Dirac mass m", "units": "1"}
    for name, var in wd_map.variables.items():
        assert var.attrs.get("long_name"), name
        assert "units" in var.attrs, name
    for name in ("nu0", "nu", "phase", "undefined_reason", "parity_agrees", "converged"):
        attrs = wd_map[name].attrs
        values = list(np.asarray(attrs["flag_values"]))
        assert len(values) == len(attrs["flag_meanings"].split()), name
    phase_meanings = wd_map.phase.attrs["flag_meanings"].split()
    assert "strong_topological_insulator" in phase_meanings
    for key in ("toposweep_version", "model", "filling", "sampling", "grid", "created"):
        assert key in wd_map.attrs
    assert ts.model_from_dict(__import__("json").loads(wd_map.attrs["model"])).to_dict() == (
        ts.models.wilson_dirac().to_dict()
    )


def test_file_round_trip_is_identical(tmp_path, wd_map: xr.Dataset) -> None:
    out = tmp_path / "map.nc"
    on_disk = ts.sweep(
        ts.models.wilson_dirac(),
        {"mass": MASS, "hopping": HOPPING},
        2,
        out=out,
        chunk_size=7,  # chunks that straddle rows of the grid
        **FAST,
    )
    assert not (tmp_path / "map.nc.partial").exists()
    with xr.open_dataset(out) as reread:
        xr.testing.assert_identical(
            reread.drop_attrs(deep=False).assign_attrs(wd_map.attrs),
            wd_map,
        )
        assert {k: v for k, v in reread.attrs.items() if k != "created"} == {
            k: v for k, v in wd_map.attrs.items() if k != "created"
        }
    xr.testing.assert_identical(on_disk.assign_attrs(created=""), wd_map.assign_attrs(created=""))
    on_disk.close()


def test_fixed_params_and_one_dim_grid() -> None:
    ds = ts.sweep(
        ts.models.bhz(), {"mass": [-4.0, -3.0, -1.0, 1.0]}, 2, params={"hopping": 1.5}, **FAST
    )
    # Qi, Wu & Zhang, PRB 74, 085308 (2006): Z2 = 1 for 0 < |m/t| < 2
    assert ds.nu0.values.tolist() == [0, -1, 1, 1]  # |m/t| = 2 closes the gap
    assert float(ds.hopping) == 1.5 and ds.hopping.attrs["long_name"] == "hopping t"
    assert "axis" not in ds.dims


def test_coefficients_map_user_variables() -> None:
    # grid in the user's own variables: a renormalisation factor z scales the hopping
    def renormalised(p: dict[str, float]) -> dict[str, float]:
        return {"hopping": p["z"] * p["bare_hopping"], "mass": p["mass"]}

    z = xr.DataArray([0.2, 0.5, 1.0], attrs={"long_name": "renormalisation factor", "units": "1"})
    ds = ts.sweep(
        ts.models.bhz(),
        {"z": z, "mass": [-1.0]},
        2,
        params={"bare_hopping": 1.0},
        coefficients=renormalised,
        **FAST,
    )
    # |m / (z t)| = 5, 2, 1  →  trivial, gapless, Z2-odd (QWZ: odd for 0 < |m/t| < 2)
    assert ds.nu0.values[:, 0].tolist() == [0, -1, 1]
    assert ds.z.attrs["long_name"] == "renormalisation factor"
    assert ds.attrs["coefficients"].endswith("renormalised")
    # the model's term values are kept per point, so the file says what was computed
    np.testing.assert_allclose(ds.term_hopping.values[:, 0], [0.2, 0.5, 1.0])
    np.testing.assert_allclose(ds.term_mass.values, -1.0)


def test_coefficients_reading_a_variable_not_given_says_to_give_it() -> None:
    # the natural slip: the mapping reads a fixed variable that params= does not hold
    def renormalised(p: dict[str, float]) -> dict[str, float]:
        return {"hopping": p["z"] * p["bare_hopping"], "mass": -1.0}

    with pytest.raises(ParameterError, match=r"reads 'bare_hopping'.*params="):
        ts.sweep(ts.models.bhz(), {"z": [0.5]}, 2, coefficients=renormalised, **FAST)

    def broken(p: dict[str, float]) -> dict[str, float]:
        return {"hopping": {}["inner"], "mass": p["z"]}  # its own lookup fails: unchanged

    with pytest.raises(KeyError):
        ts.sweep(ts.models.bhz(), {"z": [0.5]}, 2, coefficients=broken, **FAST)


@pytest.mark.parametrize(
    ("kwargs", "error", "words"),
    [
        ({"grid": {"nope": [1.0]}}, ParameterError, "not parameters of model"),
        ({"grid": {}}, ParameterError, "non-empty"),
        ({"grid": {"mass": [[1.0, 2.0]]}}, ParameterError, "1-D"),
        ({"grid": {"mass": [1.0, np.nan]}}, ParameterError, "NaN"),
        ({"grid": {"mass": [1.0, 1.0]}}, ParameterError, "repeats"),
        ({"grid": {"nu0": [1.0]}}, ParameterError, "clashes"),
        # a name the dataset gained after the static list was written is still refused
        (
            {"grid": {"gap_floor": [1.0]}, "coefficients": lambda p: {}},
            ParameterError,
            "also names of result variables",
        ),
        ({"params": {"mass": 1.0}}, ParameterError, "both swept"),
        ({"filling": 3}, FillingError, "odd"),
        ({"loop_points": 0}, SamplingError, "loop_points"),
        ({"loops": 5}, SamplingError, "unknown sampling option"),
        ({"chunk_size": 0}, ParameterError, "chunk_size"),
        ({"coefficients": lambda p: {"bogus": 1.0}}, ParameterError, "bogus"),
    ],
)
def test_bad_input_says_what_is_wrong(kwargs, error, words) -> None:
    args = {"grid": {"mass": [1.0, 2.0]}, "filling": 2, **kwargs}
    with pytest.raises(error, match=words):
        ts.sweep(ts.models.bhz(), **args)


def test_ctrl_c_stops_between_chunks_and_keeps_finished_points() -> None:
    calls = []
    # (what the sweep must restore: Python's own handler, or SIG_IGN when the process was
    # started in the background by a shell, which ignores SIGINT for it)
    before = signal.getsignal(signal.SIGINT)

    def mapping(p: dict[str, float]) -> dict[str, float]:
        calls.append(p["mass"])
        # (calls 1-3: the run's fingerprint; 4-8: the first chunk)
        if len(calls) == 9:  # Ctrl-C while the second chunk is being prepared
            os.kill(os.getpid(), signal.SIGINT)
        return {"mass": p["mass"]}

    with pytest.raises(SweepInterrupted) as info:
        ts.sweep(
            ts.models.bhz(),
            {"mass": np.linspace(-3, 3, 40)},
            2,
            coefficients=mapping,
            chunk_size=5,
            **FAST,
        )
    err = info.value
    assert isinstance(err, KeyboardInterrupt)
    assert (err.done, err.total) == (10, 40)  # the running chunk finished, then it stopped
    assert err.partial is not None and err.partial.sizes["point"] == 10
    np.testing.assert_allclose(err.partial.mass.values, np.linspace(-3, 3, 40)[:10])
    assert signal.getsignal(signal.SIGINT) is before
