"""A finished result file is reused (``resume=True``, ``run --resume``) only by the run that
made it; any other call is refused in one line that names the first differences, and an
existing file is never replaced without ``overwrite``.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts
from toposweep.cli import main
from toposweep.errors import StoreError

GRID = {"mass": np.linspace(-3.0, 3.0, 9), "hopping": [0.8, 1.2]}
FAST = {"loop_points": 12, "lines": 7, "progress": False}

CONFIG = """model = "bhz"
filling = 2
output = "{out}"
[grid]
mass = {{ start = -3.0, stop = 3.0, num = 9 }}
hopping = [0.8, 1.2]
[sampling]
loop_points = 12
lines = 7
"""


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def refusal(call) -> str:  # type: ignore[no-untyped-def]
    with pytest.raises(StoreError) as info:
        call()
    text = str(info.value)
    assert "\n" not in text
    return text


def test_phase_map_never_replaces_an_existing_file_silently(tmp_path: Path) -> None:
    out = tmp_path / "sweep.nc"
    ts.sweep(ts.models.bhz(), GRID, 2, out=out, **FAST).close()
    before = digest(out)
    text = refusal(lambda: ts.phase_map(ts.models.bhz(), GRID, 2, out=out, **FAST))
    assert "exists" in text and "overwrite=True" in text
    assert digest(out) == before
    # asked to reuse it: the file is a sweep, not this map
    text = refusal(lambda: ts.phase_map(ts.models.bhz(), GRID, 2, out=out, resume=True, **FAST))
    assert "kind of run: a phase map now, a uniform sweep in the file" in text
    assert digest(out) == before
    # told to replace it
    ds = ts.phase_map(ts.models.bhz(), GRID, 2, out=out, overwrite=True, **FAST)
    assert "obtained" in ds
    ds.close()
    assert digest(out) != before


def test_a_map_file_is_not_a_sweep_and_options_must_match(tmp_path: Path) -> None:
    out = tmp_path / "map.nc"
    ts.phase_map(ts.models.bhz(), GRID, 2, out=out, **FAST).close()
    text = refusal(lambda: ts.sweep(ts.models.bhz(), GRID, 2, out=out, resume=True, **FAST))
    assert "kind of run: a uniform sweep now, a phase map in the file" in text
    text = refusal(
        lambda: ts.phase_map(ts.models.bhz(), GRID, 2, out=out, resume=True, coarse_step=2, **FAST)
    )
    assert "phase-map option coarse_step: 2 now," in text
    again = ts.phase_map(ts.models.bhz(), GRID, 2, out=out, resume=True, **FAST)  # its own run
    assert int(again.attrs["points_evaluated"]) > 0
    again.close()


def test_refusal_names_the_first_differences_only(tmp_path: Path) -> None:
    out = tmp_path / "sweep.nc"
    ts.sweep(ts.models.bhz(), GRID, 2, out=out, **FAST).close()
    text = refusal(
        lambda: ts.sweep(
            ts.models.bhz(hopping=2.0),
            {"mass": np.linspace(-3.0, 3.0, 9)},
            2,
            out=out,
            resume=True,
            progress=False,
            loop_points=20,
            lines=9,
        )  # fmt: skip
    )
    assert text.startswith(f"cannot reuse {out}: the finished file was made by a different run")
    named = text.split(" — ", 1)[1]
    assert named.startswith("model: a different model")  # the most telling one first
    assert "model numbers" not in text  # implied by a different model
    assert "; and " in named and " more." in named  # the rest counted, not listed
    assert "overwrite=True" in text and "--overwrite" in text


def test_command_line_resume_refuses_a_file_made_by_another_call(tmp_path: Path, capsys) -> None:
    out = tmp_path / "bhz.nc"
    ts.sweep(ts.models.bhz(), GRID, 2, out=out, progress=False, loop_points=16, lines=7).close()
    before = digest(out)
    sweep_cfg = tmp_path / "sweep.toml"
    sweep_cfg.write_text(CONFIG.format(out=out.name))
    capsys.readouterr()
    assert main(["run", str(sweep_cfg), "--resume", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "sampling loop_points: 12 now, 16 in the file" in err
    map_cfg = tmp_path / "map.toml"
    map_cfg.write_text(CONFIG.format(out=out.name) + "[adaptive]\n")
    assert main(["run", str(map_cfg), "--resume", "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "kind of run: a phase map now, a uniform sweep in the file" in err
    assert digest(out) == before
    # --overwrite replaces it with the configured map, and then --resume reuses that
    assert main(["run", str(map_cfg), "--overwrite", "--quiet"]) == 0
    assert digest(out) != before
    after = digest(out)
    assert main(["run", str(map_cfg), "--resume", "--quiet"]) == 0
    assert "points obtained:" in capsys.readouterr().out and digest(out) == after
