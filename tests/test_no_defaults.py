"""Models without any defaults, swept over their own terms (issue 19, item 1).

A model imported from one's own code usually has named terms and no ``defaults``: every
parameter then comes from the grid or from ``params``. These tests go through ``sweep`` (in
memory and to a file), an interrupted run resumed, ``open_result`` and the command line.

Reference: the spinful square-lattice model H = s_z⊗σ_x sin k_x + σ_y sin k_y
+ (m + t cos k_x + t cos k_y) σ_z has Z2 = 1 for 0 < |m/t| < 2 and 0 for |m/t| > 2 (Qi, Wu &
Zhang, Phys. Rev. B 74, 085308 (2006); Bernevig, Hughes & Zhang, Science 314, 1757 (2006)).
"""

from __future__ import annotations

import importlib
import os
import signal
import textwrap
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts
from toposweep.cli import main
from toposweep.errors import ParameterError
from toposweep.sweep import SweepInterrupted

#: the module (``toposweep.sweep`` the attribute is the function of that name)
sweep_module = importlib.import_module("toposweep.sweep")

FAST = {"loop_points": 12, "lines": 7}
MASS = np.array([-3.0, -1.0, 1.0, 3.0])

#: the model as a user file would build it: two named terms, no defaults at all
MODEL_SOURCE = textwrap.dedent(
    """
    import numpy as np
    import toposweep as ts

    def build():
        s0, sx, sy, sz = np.eye(2), np.array([[0, 1], [1, 0]]), np.array([[0, -1j], [1j, 0]]), \\
            np.diag([1.0, -1.0])
        tr = np.kron(1j * sy, s0)
        m = ts.TightBinding(2, 4, time_reversal=tr, inversion=np.kron(s0, sz), name="no defaults")
        gz = np.kron(s0, sz)
        m.add((0, 0), gz, term="m")
        m.add((1, 0), 0.5 * (gz - 1j * np.kron(sz, sx)), term="t")
        m.add((0, 1), 0.5 * (gz - 1j * np.kron(s0, sy)), term="t")
        return m
    """
)


def build() -> ts.TightBinding:
    namespace: dict = {}
    exec(MODEL_SOURCE, namespace)
    model = namespace["build"]()
    assert model.defaults == {}
    return model


def expected_z2(m: float, t: float) -> int:
    return int(0 < abs(m / t) < 2)


def test_sweep_every_term_of_a_model_without_defaults() -> None:
    hopping = np.array([0.8, 1.0])
    ds = ts.sweep(build(), {"m": MASS, "t": hopping}, 2, progress=False, **FAST)
    want = [[expected_z2(m, t) for t in hopping] for m in MASS]
    assert ds.nu0.values.tolist() == want
    assert ds.nu0.dims == ("m", "t")


def test_sweep_one_term_the_other_given_as_params() -> None:
    ds = ts.sweep(build(), {"m": MASS}, 2, params={"t": 1.0}, progress=False, **FAST)
    assert ds.nu0.values.tolist() == [expected_z2(m, 1.0) for m in MASS]
    assert float(ds.t) == 1.0  # the fixed value is kept as a scalar coordinate


def test_a_term_neither_swept_nor_given_is_still_refused() -> None:
    with pytest.raises(ParameterError, match="no value for parameter 't'"):
        ts.sweep(build(), {"m": MASS}, 2, progress=False, **FAST)


def test_interrupted_sweep_to_file_resumes_and_opens(tmp_path: Path, monkeypatch) -> None:
    out = tmp_path / "nodefaults.nc"
    grid = {"m": np.linspace(-3, 3, 12), "t": [1.0]}
    real = sweep_module.run_points
    calls = []

    def run_points(req, points, **kw):
        calls.append(len(points))
        if len(calls) == 2:
            os.kill(os.getpid(), signal.SIGINT)  # Ctrl-C during the second chunk
        return real(req, points, **kw)

    monkeypatch.setattr(sweep_module, "run_points", run_points)
    with pytest.raises(SweepInterrupted):
        ts.sweep(build(), grid, 2, out=out, chunk_size=4, progress=False, **FAST)
    monkeypatch.setattr(sweep_module, "run_points", real)
    resumed = ts.sweep(build(), grid, 2, out=out, resume=True, chunk_size=4, progress=False, **FAST)
    want = [[expected_z2(m, 1.0)] for m in grid["m"]]
    assert resumed.nu0.values.tolist() == want
    resumed.close()
    with ts.open_result(out) as ds:
        assert ds.nu0.values.tolist() == want
    # resuming a finished file returns it as it is
    again = ts.sweep(build(), grid, 2, out=out, resume=True, chunk_size=4, progress=False, **FAST)
    assert again.nu0.values.tolist() == want
    again.close()


def test_command_line_run_and_flow_of_a_model_without_defaults(tmp_path: Path, capsys) -> None:
    (tmp_path / "mine.py").write_text(MODEL_SOURCE)
    (tmp_path / "mine.toml").write_text(
        'model = "mine.py:build"\nfilling = 2\noutput = "mine.nc"\n'
        "[grid]\nm = [-3.0, -1.0, 1.0]\n[params]\nt = 1.0\n"
        "[sampling]\nloop_points = 12\nlines = 7\n"
    )
    assert main(["run", str(tmp_path / "mine.toml"), "--quiet"]) == 0
    out = capsys.readouterr().out
    assert "trivial insulator (Z2 = 0)" in out and "Z2-odd 2D insulator (Z2 = 1)" in out
    assert main(["run", str(tmp_path / "mine.toml"), "--quiet", "--resume"]) == 0
    capsys.readouterr()
    flow = tmp_path / "flow.png"
    argv = ["plot", str(tmp_path / "mine.nc"), "--flow", "--at", "m=-1", "--allow-code"]
    assert main([*argv, "--out", str(flow)]) == 0
    assert flow.stat().st_size > 10_000
