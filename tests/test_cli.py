"""The ``toposweep`` command end to end (run → summary → plot) and its handling of mistakes."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import matplotlib.image as mpimg
import numpy as np
import pytest
import xarray as xr
from toposweep.cli import main

CONFIG = textwrap.dedent(
    """
    # the cubic Wilson-Dirac model over mass and hopping
    model = "wilson_dirac"
    filling = 2
    output = "wd.nc"

    [grid]
    mass = { start = -4.0, stop = 4.0, num = 9 }
    hopping = { values = [0.5, 1.0], long_name = "overall hopping t", units = "1" }

    [sampling]
    loop_points = 16
    lines = 9
    """
)


def toposweep(*args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    """Run the installed console script as a user would."""
    exe = Path(sys.executable).with_name("toposweep")
    return subprocess.run(
        [str(exe), *args], cwd=cwd, capture_output=True, text=True, timeout=300, check=False
    )


def test_run_summary_plot_end_to_end(tmp_path: Path) -> None:
    (tmp_path / "wd.toml").write_text(CONFIG)
    run = toposweep("run", "wd.toml", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert run.stderr == ""  # no progress bar when stderr is not a terminal
    # Wilson-Dirac phases (Fu & Kane, Phys. Rev. B 76, 045302 (2007)): (1;000) for
    # -3 < m < -1, (0;111) for |m| < 1
    assert "strong TI (1;000)" in run.stdout and "weak TI (0;111)" in run.stdout
    out = tmp_path / "wd.nc"
    with xr.open_dataset(out) as ds:
        assert dict(ds.sizes)["mass"] == 9 and ds.hopping.attrs["long_name"] == "overall hopping t"

    summary = toposweep("summary", "wd.nc", cwd=tmp_path)
    assert summary.returncode == 0, summary.stderr
    assert "Fu-Kane parity cross-check: " in summary.stdout
    assert "0 disagree" in summary.stdout
    assert "undefined points, by reason:" in summary.stdout  # |m/t| = 1, 3 lie on the grid

    for args, png in [
        ((), "wd.png"),
        (("--line", "--at", "hopping=1"), "wd-mass.png"),
        (("--flow", "--at", "mass=-2", "hopping=1"), "wd-flow.png"),
    ]:
        assert main(["plot", str(out), *args]) == 0  # in-process: saves interpreter starts
        image = mpimg.imread(tmp_path / png)
        assert image.shape[0] > 300 and image.shape[1] > 500
        assert image[..., :3].std() > 0.05  # not a blank canvas


def test_existing_output_needs_resume_or_overwrite(tmp_path: Path, capsys) -> None:
    (tmp_path / "wd.toml").write_text(CONFIG)
    cfg = str(tmp_path / "wd.toml")
    assert main(["run", cfg, "--quiet"]) == 0
    capsys.readouterr()
    assert main(["run", cfg]) == 2
    assert "--resume" in capsys.readouterr().err
    assert main(["run", cfg, "--resume"]) == 0  # reuses the finished file
    assert main(["run", cfg, "--overwrite", "--quiet"]) == 0


BAD_CONFIGS = [
    ("model = \n", "not valid TOML", "line 1"),
    ('model = "nope"\nfilling = 2\noutput = "x.nc"\n[grid]\nmass = [1.0]\n', "model", "nope"),
    ('model = "bhz"\nfilling = 2\n[grid]\nmass = [1.0]\n', "output", "missing"),
    ('model = "bhz"\nfiling = 2\noutput = "x.nc"\n[grid]\nmass = [1.0]\n', "filing", "unknown"),
    ('model = "bhz"\nfilling = 2\noutput = "x.nc"\n[grid]\nmass = { start = 0, num = 3 }\n',
     "grid.mass", "stop"),
    ('model = "bhz"\nfilling = 2\noutput = "x.nc"\n[grid]\nmass = [1.0, "a"]\n',
     "grid.mass[1]", "number"),
    ('model = "bhz"\nfilling = 2\noutput = "x.nc"\n[grid]\n'
     'mass = { start = 0, stop = 1, num = 0 }\n', "grid.mass.num", "positive"),
    ('model = "bhz"\nfilling = 2\noutput = "x.nc"\n[grid]\nmass = [1.0]\n[sampling]\nloops = 3\n',
     "sampling", "loops"),
    ('model = "bhz"\nfilling = 2\noutput = "x.nc"\n[grid]\nmass = [1.0]\n[model_options]\nx = 1\n',
     "model_options", "x"),
    ('model = "bhz"\nfilling = 2\noutput = "x.nc"\n[grid]\nmass = [1.0]\n[run]\ncores = 2\n',
     "run.cores", "unknown"),
    ('model = "bhz"\nfilling = 2\noutput = "x.nc"\n[grid]\nspin = [1.0]\n',
     "spin", "not parameters"),
    ('model = "bhz"\nfilling = 3\noutput = "x.nc"\n[grid]\nmass = [1.0]\n', "filling", "odd"),
    ('model = "missing.py:build"\nfilling = 2\noutput = "x.nc"\n[grid]\nmass = [1.0]\n',
     "model", "no such file"),
    ('model = "bhz"\nfilling = 2\noutput = "x.nc"\n[grid]\n'
     'mass = { start = 0, stop = 1, num = 100000000000 }\n', "grid.mass.num", "more than"),
    ('model = "bhz"\nfilling = 2\noutput = "x.nc"\n[model_options]\nmass = "abc"\n'
     "[grid]\nhopping = [1.0]\n", "model_options", "abc"),
    ('model = "bhz"\nfilling = 2\noutput = "x.nc"\n[grid]\nmass = [1979-05-27]\n',
     "grid.mass[0]", "number"),
]  # fmt: skip


@pytest.mark.parametrize(("text", "key", "words"), BAD_CONFIGS)
def test_bad_config_is_one_line_naming_the_key(tmp_path: Path, capsys, text, key, words) -> None:
    cfg = tmp_path / "bad.toml"
    cfg.write_text(text)
    assert main(["run", str(cfg)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("toposweep: error: ")
    assert key in err and words in err
    assert "Traceback" not in err
    assert not (tmp_path / "x.nc").exists()


@pytest.mark.parametrize(
    "argv",
    [
        ["frobnicate"],
        ["run"],
        ["summary", "missing.nc"],
        ["plot", "missing.nc"],
        ["run", "missing.toml"],
        ["run", "a.toml", "--resume", "--overwrite"],
    ],
)
def test_bad_arguments_are_one_line_exit_2(argv, capsys, tmp_path: Path) -> None:
    os.chdir(tmp_path)
    try:
        code = main(argv)
    except SystemExit as exc:  # argparse's own mistakes
        code = exc.code
    assert code == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err


@pytest.mark.parametrize("command", ["summary", "plot"])
def test_a_configuration_given_for_a_result_says_which_file(command, capsys, tmp_path) -> None:
    (tmp_path / "wd.toml").write_text(CONFIG)
    assert main([command, str(tmp_path / "wd.toml")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "is a run configuration" in err and "`output`" in err


def test_model_from_a_user_file(tmp_path: Path, capsys) -> None:
    (tmp_path / "mine.py").write_text(
        textwrap.dedent(
            """
            import toposweep as ts

            def build(scale=1.0):
                m = ts.models.bhz()
                m.name = "my square-lattice model"
                return m
            """
        )
    )
    (tmp_path / "mine.toml").write_text(
        'model = "mine.py:build"\nfilling = 2\noutput = "mine.nc"\n'
        "[model_options]\nscale = 2.0\n[grid]\nmass = [-3.0, -1.0]\n"
        "[sampling]\nloop_points = 12\nlines = 7\n"
    )
    assert main(["run", str(tmp_path / "mine.toml"), "--quiet"]) == 0
    out = capsys.readouterr().out
    # m = -1 is Z2-odd (Qi, Wu & Zhang, Phys. Rev. B 74, 085308 (2006): 0 < |m| < 2)
    assert "my square-lattice model" in out and "Z2-odd 2D insulator (Z2 = 1)" in out


def test_plot_rejects_unknown_parameter(tmp_path: Path, capsys) -> None:
    (tmp_path / "wd.toml").write_text(CONFIG)
    assert main(["run", str(tmp_path / "wd.toml"), "--quiet"]) == 0
    capsys.readouterr()
    assert main(["plot", str(tmp_path / "wd.nc"), "--at", "nope=1"]) == 2
    err = capsys.readouterr().err
    assert "'nope' is not a swept parameter" in err
    assert main(["plot", str(tmp_path / "wd.nc"), "--at", "mass"]) == 2
    assert "NAME=VALUE" in capsys.readouterr().err


def test_coefficients_mapping_from_a_file_and_its_flow(tmp_path: Path, capsys) -> None:
    (tmp_path / "mapping.py").write_text(
        "def renormalised(p):\n    return {'hopping': p['z'] * p['bare_hopping'], 'mass': p['m']}\n"
    )
    (tmp_path / "z.toml").write_text(
        'model = "bhz"\nfilling = 2\noutput = "z.nc"\n'
        'coefficients = "mapping.py:renormalised"\n'
        "[params]\nbare_hopping = 1.0\n"
        '[grid]\nz = { values = [0.2, 1.0], long_name = "renormalisation factor" }\n'
        "m = [-1.0]\n[sampling]\nloop_points = 12\nlines = 7\n"
    )
    assert main(["run", str(tmp_path / "z.toml"), "--quiet"]) == 0
    out = capsys.readouterr().out
    # QWZ (Qi, Wu & Zhang, PRB 74, 085308 (2006)): |m/t| = 5 trivial, |m/t| = 1 Z2-odd
    assert "trivial insulator (Z2 = 0)" in out and "Z2-odd 2D insulator (Z2 = 1)" in out
    assert main(["plot", str(tmp_path / "z.nc"), "--flow", "--at", "z=1.0"]) == 0
    assert (tmp_path / "z-flow.png").stat().st_size > 10_000


def test_demo_writes_its_files_and_prints_the_summary(tmp_path: Path, capsys) -> None:
    assert main(["demo", "--out", str(tmp_path / "demo"), "--quiet"]) == 0
    out = capsys.readouterr().out
    # the d-f model's boundaries (df_lattice docstring; Fu & Kane, PRB 76, 045302 (2007)
    # parity counting): inversion at X only → (1;111), at X and Γ → (0;111)
    assert "strong TI (1;111)" in out and "weak TI (0;111)" in out
    assert "0 disagree" in out
    # an adaptive map: the share evaluated is printed, the transitions listed
    share = float(out.split("\nevaluated ")[1].split("%")[0])
    assert 0 < share < 40
    assert "transitions located: " in out and "gap_closes_at_a_point" in out
    for name in ("tessarine.nc", "tessarine-phases.png", "tessarine-cut.png", "tessarine-flow.png"):
        assert (tmp_path / "demo" / name).stat().st_size > 10_000, name
    with xr.open_dataset(tmp_path / "demo" / "tessarine.nc") as ds:
        assert ds.f_level.attrs["units"] == "eV"
        assert int((ds.phase == 2).sum()) > 0
        assert ds.sizes["transition"] > 0 and int(ds.attrs["points_evaluated"]) < ds.phase.size


def test_adaptive_run_from_a_config_and_its_summary(tmp_path: Path, capsys) -> None:
    (tmp_path / "a.toml").write_text(
        'model = "bhz"\nfilling = 2\noutput = "a.nc"\n'
        "[grid]\nmass = { start = -3.0, stop = 3.0, num = 40 }\n"
        "[adaptive]\ncoarse_step = 8\ntransition_tol = 1e-4\n"
    )
    assert main(["run", str(tmp_path / "a.toml"), "--quiet"]) == 0
    out = capsys.readouterr().out
    assert "points obtained:" in out and "transitions located: 2" in out
    with xr.open_dataset(tmp_path / "a.nc") as ds:
        assert json.loads(ds.attrs["phase_map"])["coarse_step"] == 8
        # BHZ: Z2 changes at m/t = -2 and 2 (Bernevig, Hughes & Zhang, Science 314, 1757 (2006))
        np.testing.assert_allclose(ds.transition_mass.values, [-2.0, 2.0], atol=1e-5)
    assert main(["summary", str(tmp_path / "a.nc")]) == 0
    assert "filled by agreement" in capsys.readouterr().out
    assert main(["plot", str(tmp_path / "a.nc")]) == 0
    (tmp_path / "b.toml").write_text(
        'model = "bhz"\nfilling = 2\noutput = "b.nc"\n[grid]\nmass = [0.0, 1.0]\n'
        "[adaptive]\ncoarse = 8\n"
    )
    assert main(["run", str(tmp_path / "b.toml")]) == 2
    assert "adaptive.coarse: unknown key" in capsys.readouterr().err


def test_ctrl_c_keeps_finished_chunks_and_resume_finishes(tmp_path: Path) -> None:
    import signal
    import time

    (tmp_path / "long.toml").write_text(
        'model = "bhz"\nfilling = 2\noutput = "long.nc"\n'
        "[grid]\nmass = { start = -3.0, stop = 3.0, num = 100 }\n"
        "hopping = { start = 0.5, stop = 1.5, num = 40 }\n"
        "[run]\nchunk_size = 100\n"
    )
    exe = Path(sys.executable).with_name("toposweep")
    proc = subprocess.Popen(
        [str(exe), "run", "long.toml"], cwd=tmp_path, stderr=subprocess.PIPE, text=True
    )
    journal = tmp_path / "long.nc.partial"
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and proc.poll() is None:
        if journal.is_dir() and len(list(journal.glob("chunk-*.npz"))) >= 3:
            break
        time.sleep(0.01)
    proc.send_signal(signal.SIGINT)  # what Ctrl-C in the terminal does
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert "continue with: toposweep run long.toml --resume" in err
    assert err.count("\n") == 1 and "Traceback" not in err
    kept = len(list(journal.glob("chunk-*.npz")))
    assert 3 <= kept < 40
    resumed = toposweep("run", "long.toml", "--resume", cwd=tmp_path)
    assert resumed.returncode == 0, resumed.stderr
    assert "= 4000 points" in resumed.stdout
    assert not journal.exists()


def test_version_names_the_instruction_set_of_the_kernels(tmp_path: Path) -> None:
    import platform

    import toposweep as ts
    from toposweep import _core

    out = toposweep("--version", cwd=tmp_path)
    assert out.returncode == 0
    assert out.stdout.strip() == f"toposweep {ts.__version__} (kernels: {_core.INSTRUCTION_SET})"
    if platform.machine() == "x86_64":
        assert _core.INSTRUCTION_SET in ("x86-64-v3 (AVX2, FMA)", "x86-64 baseline (SSE2)")
