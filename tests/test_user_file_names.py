"""Functions of the user's own Python files are named by the user's file and function —
never by the internal module name toposweep imports such a file under — wherever a user sees
them: result attributes, run identities, error messages, refusals to resume, worker errors.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
import toposweep as ts
from toposweep.callable_model import FILE_MODULE_PREFIX, file_module_name, load_file_module
from toposweep.cli import main
from toposweep.cluster.executor_worker import serialise_job
from toposweep.errors import ExecutorError, ModelError, ParameterError

USER_FILE = """
import numpy as np
import toposweep as ts

def build():
    m = ts.models.bhz()
    return ts.CallableModel(hamiltonian, 2, 4, time_reversal=m.time_reversal,
                            inversion=m.inversion)

def hamiltonian(kappa, mass=-1.0, hopping=1.0):
    return ts.models.bhz().hamiltonian(kappa, {"mass": mass, "hopping": hopping})

def my_terms(p):
    return {"mass": p["m"], "hopping": 1.0}

def reads_unknown(p):
    return {"mass": p["m"] + p["shift"], "hopping": 1.0}
"""

CONFIG = """model = "user_model.py:build"
coefficients = "user_model.py:{terms}"
filling = 2
output = "out.nc"
[grid]
m = [-1.0, 1.0, 3.0]
[sampling]
loop_points = 12
lines = 7
"""


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    (tmp_path / "user_model.py").write_text(USER_FILE)
    return tmp_path


def run(folder: Path, terms: str) -> int:
    (folder / "run.toml").write_text(CONFIG.format(terms=terms))
    return main(["run", str(folder / "run.toml"), "--quiet", "--overwrite"])


def test_results_name_the_users_file_and_function(folder: Path) -> None:
    assert run(folder, "my_terms") == 0
    path = (folder / "user_model.py").resolve()
    with ts.open_result(folder / "out.nc") as ds:
        attrs = {k: str(v) for k, v in ds.attrs.items()}
    assert attrs["coefficients"] == f"{path}:my_terms"
    assert json.loads(attrs["model"])["function"] == f"{path}:hamiltonian"
    assert json.loads(attrs["run_identity"])["coefficients"] == f"{path}:my_terms"
    assert not any(FILE_MODULE_PREFIX in v for v in attrs.values())


def test_error_messages_name_the_users_file(folder: Path, capsys) -> None:
    capsys.readouterr()
    assert run(folder, "reads_unknown") == 2
    err = capsys.readouterr().err
    assert f"{(folder / 'user_model.py').resolve()}:reads_unknown reads 'shift'" in err
    assert FILE_MODULE_PREFIX not in err
    with pytest.raises(ParameterError) as info:  # the same from Python
        module = load_file_module((folder / "user_model.py").resolve())
        ts.sweep(module.build(), {"m": [0.0]}, 2, coefficients=module.reads_unknown,
                 progress=False)  # fmt: skip
    assert "user_model.py:reads_unknown" in str(info.value)
    assert FILE_MODULE_PREFIX not in str(info.value)


def test_a_resume_refusal_names_the_users_functions(folder: Path, capsys) -> None:
    assert run(folder, "my_terms") == 0
    (folder / "run.toml").write_text(
        CONFIG.format(terms="reads_unknown") + "[params]\nshift = 0.0\n"
    )
    capsys.readouterr()
    assert main(["run", str(folder / "run.toml"), "--quiet", "--resume"]) == 2
    err = capsys.readouterr().err
    assert "user_model.py:reads_unknown" in err and "user_model.py:my_terms" in err
    assert FILE_MODULE_PREFIX not in err


def test_a_moved_file_is_named_when_the_model_cannot_be_rebuilt(folder: Path) -> None:
    assert run(folder, "my_terms") == 0
    with ts.open_result(folder / "out.nc") as ds:
        record = json.loads(ds.attrs["model"])
    # the record alone rebuilds the model in a fresh interpreter that never saw the file
    script = (
        "import json, sys, toposweep as ts\n"
        "m = ts.model_from_dict(json.loads(sys.stdin.read()), allow_code=True)\n"
        "print(int(ts.invariants(m, 2, {'mass': -1.0}).nu0))\n"
    )
    done = subprocess.run([sys.executable, "-c", script], input=json.dumps(record),
                          capture_output=True, text=True, timeout=120)  # fmt: skip
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "1"  # BHZ at m = -1, t = 1 is Z2-odd (Bernevig et al. 2006)
    moved = folder / "elsewhere.py"
    (folder / "user_model.py").rename(moved)
    for name in [n for n in sys.modules if n.startswith(FILE_MODULE_PREFIX)]:
        del sys.modules[name]  # as in a later process
    with pytest.raises(ModelError) as info:
        ts.model_from_dict(record, allow_code=True)
    text = str(info.value)
    assert "user_model.py:hamiltonian" in text and "is gone" in text
    assert FILE_MODULE_PREFIX not in text
    # a record of an older version (the internal module name) is named by its file too
    old = dict(record, function=f"{file_module_name(moved)}:hamiltonian")
    old["function_file"] = str(folder / "user_model.py")
    with pytest.raises(ModelError) as info:
        ts.model_from_dict(old, allow_code=True)
    assert FILE_MODULE_PREFIX not in str(info.value)


def test_workers_without_cloudpickle_are_told_which_file(folder: Path, monkeypatch) -> None:
    module = load_file_module((folder / "user_model.py").resolve())
    monkeypatch.setitem(sys.modules, "cloudpickle", None)  # as if it were not installed
    with pytest.raises(ExecutorError) as info:
        serialise_job(module.my_terms)
    text = str(info.value)
    assert str((folder / "user_model.py").resolve()) in text and "cloudpickle" in text
    assert FILE_MODULE_PREFIX not in text


def test_the_refusal_to_run_recorded_code_names_the_file_once(folder: Path) -> None:
    assert run(folder, "my_terms") == 0
    with ts.open_result(folder / "out.nc") as ds:
        record = json.loads(ds.attrs["model"])
    path = (folder / "user_model.py").resolve()
    for rec in (record, dict(record, function=f"{file_module_name(path)}:hamiltonian")):
        with pytest.raises(ModelError) as info:
            ts.model_from_dict(rec)  # (allow_code not given)
        assert f"({path}:hamiltonian)" in str(info.value)
        assert FILE_MODULE_PREFIX not in str(info.value)
