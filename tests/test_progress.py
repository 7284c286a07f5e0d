"""The sweep's progress bar (tqdm): shown only on a terminal, counts undefined points."""

from __future__ import annotations

import importlib
import io
import os
import re
import signal
import sys

import numpy as np
import pytest
import toposweep as ts
from toposweep.progress import ProgressBar
from toposweep.sweep import SweepInterrupted

sweep_module = importlib.import_module("toposweep.sweep")


class Terminal(io.StringIO):
    """A stream that says it is a terminal."""

    def isatty(self) -> bool:
        return True


def last_line(text: str) -> str:
    return re.split(r"[\r\n]+", text.strip())[-1]


def test_bar_counts_points_and_undefined_points() -> None:
    term = Terminal()
    bar = ProgressBar(10, stream=term)
    bar.update(4, undefined=1)
    bar.update(6, undefined=2)
    bar.close()
    line = last_line(term.getvalue())
    assert "10/10" in line and "3 undefined" in line and line.startswith("sweep")
    assert bar.done == 10 and bar.undefined == 3


def test_bar_is_silent_off_a_terminal_or_when_disabled() -> None:
    plain = io.StringIO()
    bar = ProgressBar(5, stream=plain)
    bar.update(5, undefined=1)
    bar.close()
    term = Terminal()
    off = ProgressBar(5, stream=term, enabled=False)
    off.update(5)
    off.close()
    assert plain.getvalue() == "" and term.getvalue() == ""
    assert not bar.shown and bar.undefined == 1


# cubic Wilson-Dirac model at t = 1: the gap closes at m = ±1 and ±3 (a TRIM where
# m + t Σ cos 2πn_i = 0; Fu & Kane, Phys. Rev. B 76, 045302 (2007)), so those points are
# undefined
MASS = np.linspace(-4.0, 4.0, 9)
FAST = {"loop_points": 12, "lines": 7}


def test_sweep_shows_the_undefined_count(monkeypatch) -> None:
    term = Terminal()
    monkeypatch.setattr(sys, "stderr", term)
    ds = ts.sweep(ts.models.wilson_dirac(), {"mass": MASS}, 2, chunk_size=3, **FAST)
    undefined = int((ds.nu0 < 0).sum())
    assert undefined == 4
    assert "9/9" in last_line(term.getvalue())
    assert f"{undefined} undefined" in last_line(term.getvalue())


def test_resumed_sweep_counts_the_undefined_points_it_already_had(tmp_path, monkeypatch) -> None:
    out = tmp_path / "wd.nc"
    real = sweep_module.run_points
    calls = []

    def run_points(req, points, **kw):
        calls.append(len(points))
        if len(calls) == 2:
            os.kill(os.getpid(), signal.SIGINT)
        return real(req, points, **kw)

    monkeypatch.setattr(sweep_module, "run_points", run_points)
    with pytest.raises(SweepInterrupted):
        ts.sweep(ts.models.wilson_dirac(), {"mass": MASS}, 2, out=out, chunk_size=3,
                 progress=False, **FAST)  # fmt: skip
    monkeypatch.setattr(sweep_module, "run_points", real)
    term = Terminal()
    monkeypatch.setattr(sys, "stderr", term)
    ds = ts.sweep(ts.models.wilson_dirac(), {"mass": MASS}, 2, out=out, chunk_size=3,
                  resume=True, **FAST)  # fmt: skip
    assert "9/9" in last_line(term.getvalue())
    assert f"{int((ds.nu0 < 0).sum())} undefined" in last_line(term.getvalue())
    ds.close()


def test_a_run_that_learns_its_size_can_raise_the_total() -> None:
    # (phase maps learn how many points they evaluate as they refine)
    term = Terminal()
    bar = ProgressBar(1, stream=term)
    bar.total = 0
    bar.total = 12
    bar.update(12, undefined=2)
    bar.close()
    assert "12/12" in last_line(term.getvalue()) and "2 undefined" in last_line(term.getvalue())


def test_sweep_through_an_executor_counts_undefined_points_too(monkeypatch) -> None:
    from concurrent.futures import ThreadPoolExecutor

    term = Terminal()
    monkeypatch.setattr(sys, "stderr", term)
    with ThreadPoolExecutor(2) as pool:
        ds = ts.sweep(ts.models.wilson_dirac(), {"mass": MASS}, 2, chunk_size=3, executor=pool,
                      **FAST)  # fmt: skip
    assert "9/9" in last_line(term.getvalue())
    assert f"{int((ds.nu0 < 0).sum())} undefined" in last_line(term.getvalue())
