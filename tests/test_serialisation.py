"""Models round-trip through JSON (issue 2, item 2): results record the model exactly.

``json.dumps(model.to_dict())`` → ``json.loads`` → ``toposweep.model_from_dict`` must rebuild a
model with an identical Hamiltonian (bit for bit: JSON keeps doubles exactly), the same
parameters, defaults, symmetry operators and metadata. Callable models are recorded by the
import path of their function.
"""

from __future__ import annotations

import functools
import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import random_models as rm
import toposweep as ts
from test_callable_model import bhz_callable, wilson_dirac_callable, wilson_dirac_numpy
from toposweep import CallableModel, TightBinding
from toposweep.callable_model import file_module_name

TESTS = Path(__file__).resolve().parent


def round_trip(model):
    text = json.dumps(model.to_dict())
    return ts.model_from_dict(json.loads(text), allow_code=True)


def assert_same_model(a, b, rng):
    assert type(b) is type(a)
    assert (b.dim, b.norb, b.name, b.energy_unit) == (a.dim, a.norb, a.name, a.energy_unit)
    assert b.parameters == a.parameters
    assert b.defaults == a.defaults
    assert b.parameter_info == a.parameter_info
    for attr in ("time_reversal", "inversion", "lattice", "positions"):
        x, y = getattr(a, attr), getattr(b, attr)
        assert (x is None) == (y is None), attr
        if x is not None:
            np.testing.assert_array_equal(y, x, err_msg=attr)
    kappa = rng.random((16, a.dim))
    for params in (None, {p: rng.normal() for p in a.parameters}):
        if params is None and any(p not in a.defaults for p in a.parameters):
            continue
        np.testing.assert_array_equal(b.hamiltonian(kappa, params), a.hamiltonian(kappa, params))
    assert b.to_dict() == a.to_dict()


@pytest.mark.parametrize("name", ts.models.__all__)
def test_every_catalogue_model_round_trips(name, rng):
    model = getattr(ts.models, name)()
    assert_same_model(model, round_trip(model), rng)


@pytest.mark.parametrize(
    ("dim", "seed", "inversion"), [(3, 1, True), (3, 2, False), (2, 3, True), (2, 4, False)]
)
def test_random_models_round_trip(dim, seed, inversion, rng):
    case = rm.random_model(seed, dim=dim, inversion=inversion)
    assert_same_model(case.model, round_trip(case.model), rng)
    if inversion:  # also the transformed ones the acceptance tests build
        rotated = rm.change_basis(case.model, rm.random_unitary(rng, case.model.norb))
        assert_same_model(rotated, round_trip(rotated), rng)
        perturbed = rm.inversion_breaking_perturbation(case.model, 0.01, rng)
        assert_same_model(perturbed, round_trip(perturbed), rng)


def test_metadata_round_trips(rng):
    m = TightBinding(
        2,
        2,
        lattice=[[1.0, 0.0], [0.5, np.sqrt(3) / 2]],
        positions=[[0.0, 0.0], [1 / 3, 1 / 3]],
        time_reversal=None,
        energy_unit="eV",
        name="two-site test lattice",
    )
    m.add((0, 0), np.diag([0.1, -0.1]), term="stagger")
    m.add((1, 0), [[0, 1j / 3], [0.25, 0]], term="t")
    m.add((1, 0), [[0.5, 0], [0, 0]])  # a second hopping on the same bond, fixed part
    m.add((0, 1), [[0, 1e-17], [np.pi, 0]], term="t")
    m.defaults = {"stagger": np.float32(0.25), "t": 1}  # numpy scalars and ints are fine
    m.parameter_info = {"t": {"long_name": "hopping", "units": "eV"}}
    back = round_trip(m)
    assert back.defaults == {"stagger": 0.25, "t": 1.0}
    assert_same_model(m, back, rng)


def test_result_attributes_hold_the_model(rng):
    # the dataset's provenance rebuilds the model it was computed from
    model = ts.models.bhz()
    ds = ts.invariants(model, 2, {"mass": 1.0})
    recorded = [v for v in ds.attrs.values() if isinstance(v, str) and '"hoppings"' in v]
    assert len(recorded) == 1
    assert_same_model(model, ts.model_from_dict(json.loads(recorded[0]), allow_code=True), rng)


def test_callable_models_round_trip_by_import_path(rng):
    for model in (wilson_dirac_callable(), bhz_callable()):
        d = model.to_dict()
        assert d["function"] in (
            "test_callable_model:wilson_dirac_numpy",
            "test_callable_model:bhz_numpy",
        )
        back = round_trip(model)
        assert back.func is model.func
        assert_same_model(model, back, rng)


class Holder:
    @staticmethod
    def hamiltonian(kappa, mass=-2.0):
        return wilson_dirac_numpy(kappa, mass)


def test_nested_qualified_name_is_importable(rng):
    model = CallableModel(Holder.hamiltonian, 3, 4)
    assert model.to_dict()["function"] == "test_serialisation:Holder.hamiltonian"
    assert_same_model(model, round_trip(model), rng)


def test_callable_model_rebuilds_in_a_fresh_interpreter(rng):
    model = wilson_dirac_callable()
    kappa = rng.random((5, 3))
    script = (
        "import json, sys, numpy as np, toposweep as ts\n"
        "d = json.loads(sys.stdin.readline()); k = np.array(json.loads(sys.stdin.readline()))\n"
        "h = ts.model_from_dict(d, allow_code=True).hamiltonian(k, {'mass': 0.7})\n"
        "print(json.dumps([h.real.tolist(), h.imag.tolist()]))\n"
    )
    env = {**os.environ, "PYTHONPATH": str(TESTS)}
    out = subprocess.run(
        [sys.executable, "-c", script],
        input=json.dumps(model.to_dict()) + "\n" + json.dumps(kappa.tolist()) + "\n",
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
        check=True,
    )
    re, im = json.loads(out.stdout)
    np.testing.assert_array_equal(
        np.array(re) + 1j * np.array(im), model.hamiltonian(kappa, {"mass": 0.7})
    )


@pytest.mark.parametrize(
    "func",
    [
        lambda kappa, mass=1.0: wilson_dirac_numpy(kappa, mass),
        functools.partial(wilson_dirac_numpy, hopping=1.0),
    ],
    ids=["lambda", "partial"],
)
def test_unimportable_function_gives_a_clear_error(func):
    d = json.loads(json.dumps(CallableModel(func, 3, 4).to_dict()))
    with pytest.raises(ts.ModelError, match="not importable|cannot import"):
        ts.model_from_dict(d, allow_code=True)


def test_local_function_gives_a_clear_error():
    def local(kappa, mass=1.0):
        return wilson_dirac_numpy(kappa, mass)

    d = CallableModel(local, 3, 4).to_dict()
    with pytest.raises(ts.ModelError, match="not importable"):
        ts.model_from_dict(d, allow_code=True)
    d["function"] = "test_callable_model:no_such_function"
    with pytest.raises(ts.ModelError, match="cannot import"):
        ts.model_from_dict(d, allow_code=True)


# -- functions from files loaded by path (e.g. a `toposweep run` model file) ---------------------
MODEL_FILE = """
import numpy as np
import toposweep as ts

S0, SY, SZ = np.eye(2), np.array([[0, -1j], [1j, 0]]), np.diag([1.0, -1.0])
SX = np.array([[0, 1], [1, 0]])
G = np.array([np.kron(SZ, SX), np.kron(S0, SY)])
GZ = np.kron(S0, SZ)


def square_model(kappa, mass=-1.0):
    k = 2 * np.pi * kappa
    h = np.einsum("na,aij->nij", np.sin(k), G)
    return h + (mass + np.cos(k).sum(axis=1))[:, None, None] * GZ


def build():
    return ts.CallableModel(square_model, 2, 4, time_reversal=np.kron(1j * SY, S0),
                            name="square model from a file")
"""


def load_by_path(path: Path, name: str):
    import importlib.util

    spec = importlib.util.spec_from_file_location(name, path)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    return module


def test_function_from_a_file_loaded_by_path_round_trips(tmp_path, rng):
    path = tmp_path / "user_model.py"
    path.write_text(MODEL_FILE)
    name = file_module_name(path)  # the name `toposweep run` loads model files under
    model = load_by_path(path, name).build()
    d = json.loads(json.dumps(model.to_dict()))
    assert d["function"] == f"{path.resolve()}:square_model"  # the user's file, not `name`
    assert d["function_file"] == str(path.resolve())
    del sys.modules[name]  # as in a later process
    back = ts.model_from_dict(d, allow_code=True)
    assert_same_model(model, back, rng)
    # a file loaded under another name is still found by its path
    other = load_by_path(path, "throwaway_module_name").build()
    d = json.loads(json.dumps(other.to_dict()))
    del sys.modules["throwaway_module_name"]
    np.testing.assert_array_equal(
        ts.model_from_dict(d, allow_code=True).hamiltonian(np.full((1, 2), 0.3)),
        other.hamiltonian(np.full((1, 2), 0.3)),
    )
    # ... and in a fresh interpreter that never saw the file
    script = (
        "import json, sys, numpy as np, toposweep as ts\n"
        "m = ts.model_from_dict(json.loads(sys.stdin.read()), allow_code=True)\n"
        "print(int(ts.invariants(m, 2, {'mass': 1.0}).nu0), m.name)\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", script],
        input=json.dumps(d),
        capture_output=True,
        text=True,
        timeout=120,
        check=True,
        cwd=tmp_path.parent,
    )
    # Qi, Wu & Zhang, Phys. Rev. B 74, 085308 (2006): Z2 odd for 0 < |m| < 2
    assert out.stdout.split() == ["1", "square", "model", "from", "a", "file"]


def test_model_file_gives_the_same_description_in_every_process(tmp_path):
    # resumed runs compare the model description: it must not depend on the process
    (tmp_path / "user_model.py").write_text(MODEL_FILE)
    (tmp_path / "run.toml").write_text(
        'model = "user_model.py:build"\nfilling = 2\noutput = "out.nc"\n[grid]\nmass = [1.0]\n'
    )
    script = (
        "import json; from pathlib import Path; from toposweep.config import load_config\n"
        "print(json.dumps(load_config(Path('run.toml')).model.to_dict(), sort_keys=True))\n"
    )
    seen = {
        subprocess.run(
            [sys.executable, "-c", script],
            cwd=tmp_path,
            capture_output=True,
            text=True,
            timeout=120,
            check=True,
            env={**os.environ, "PYTHONHASHSEED": seed},
        ).stdout
        for seed in ("1", "2")
    }
    assert len(seen) == 1


def test_flow_plot_of_a_run_with_a_model_file(tmp_path):
    # `toposweep plot --flow` rebuilds the model in a new process from the result file
    (tmp_path / "user_model.py").write_text(MODEL_FILE)
    (tmp_path / "run.toml").write_text(
        'model = "user_model.py:build"\nfilling = 2\noutput = "out.nc"\n'
        "[grid]\nmass = [-3.0, -1.0, 1.0]\n"
    )
    command = str(Path(sys.executable).parent / "toposweep")
    for args in (
        ["run", "run.toml"],
        ["plot", "out.nc", "--flow", "--at", "mass=-1.0", "--allow-code"],
    ):
        out = subprocess.run(
            [command, *args], cwd=tmp_path, capture_output=True, text=True, timeout=120
        )
        assert out.returncode == 0, out.stderr
    assert (tmp_path / "out-flow.png").stat().st_size > 10_000


def test_code_in_a_description_is_not_run_unless_allowed(tmp_path):
    """A result file could name any module: rebuilding imports it, so it needs consent."""
    marker = tmp_path / "ran.txt"
    (tmp_path / "planted.py").write_text(
        f"open({str(marker)!r}, 'w').write('ran')\n\ndef h(kappa):\n    return 0\n"
    )
    d = CallableModel(wilson_dirac_numpy, 3, 4).to_dict()
    d["function"], d["function_file"] = "planted:h", str(tmp_path / "planted.py")
    with pytest.raises(ts.ModelError, match="names Python code.*allow_code=True"):
        ts.model_from_dict(d)
    assert not marker.exists()
    # tight-binding descriptions are plain data and need no consent
    assert ts.model_from_dict(ts.models.bhz().to_dict()).norb == 4


def test_flow_plot_refuses_model_code_without_allow_code(tmp_path, capsys):
    from toposweep.cli import main

    ds = ts.invariants(wilson_dirac_callable(), 2, {"mass": -2.0}, loop_points=12, lines=7)
    ds.to_netcdf(tmp_path / "one.nc", engine="h5netcdf")
    assert main(["plot", str(tmp_path / "one.nc"), "--flow"]) == 2
    err = capsys.readouterr().err
    assert "--allow-code" in err and "Traceback" not in err
    assert not (tmp_path / "one-flow.png").exists()


def test_function_of_a_script_run_as_main_gives_a_clear_error():
    d = CallableModel(wilson_dirac_numpy, 3, 4).to_dict()
    d["function"] = "__main__:a_function_only_the_script_had"
    with pytest.raises(ts.ModelError, match="__main__.*module file"):
        ts.model_from_dict(d, allow_code=True)


def test_incomplete_callable_description_gives_a_model_error():
    d = CallableModel(wilson_dirac_numpy, 3, 4).to_dict()
    del d["dim"]
    with pytest.raises(ts.ModelError, match="not a valid callable model description"):
        ts.model_from_dict(d, allow_code=True)


def test_cached_json_text_follows_every_change_of_the_model() -> None:
    """``to_json`` reuses its text while the model is unchanged (a tight-binding model checks
    its hopping list by the number of add() calls); any change must show in the next text."""
    m = ts.models.wilson_dirac()
    first = m.to_json()
    assert m.to_json() is first  # reused
    m.add([1, 1, 0], 0.1 * np.eye(4), "hopping")  # an existing term: only the list grows
    text = m.to_json()
    assert json.loads(text)["hoppings"][-1]["R"] == [1, 1, 0]
    for change in (lambda: setattr(m, "name", "renamed"), lambda: m.defaults.update(mass=0.25)):
        change()
        assert m.to_json() != text
        text = m.to_json()
        assert text == json.dumps(m.to_dict(), sort_keys=True)


def test_stored_hopping_matrices_cannot_change_behind_the_caches() -> None:
    m = ts.models.bhz()
    r, t, _ = next(m.hoppings())
    with pytest.raises(ValueError, match="read-only"):
        t[0, 0] = 5.0
