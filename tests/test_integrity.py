"""Data integrity (issue 20): a resume never mixes two runs' results.

The grid's axis order and the model's own numbers are part of a run's identity, so a resume
with the axes reordered, or with a model or coefficients function whose code changed under the
same name, is refused instead of writing a file of two runs.
"""

from __future__ import annotations

import textwrap
from importlib import import_module
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
import toposweep as ts
from toposweep.cli import main
from toposweep.errors import StoreError
from toposweep.results.store import journal_path

sweep_module = import_module("toposweep.sweep")  # the package's `sweep` is the function

FAST = {"loop_points": 12, "lines": 7, "progress": False}
GRID = {"mass": np.linspace(-3, 3, 6), "hopping": np.linspace(0.5, 1.5, 4)}


def interrupt_before_writing(monkeypatch: pytest.MonkeyPatch) -> None:
    """Make the next sweep stop with every chunk journalled but no result file."""

    def stop(*args: object, **kwargs: object) -> None:
        raise KeyboardInterrupt

    monkeypatch.setattr(sweep_module, "_consolidate", stop)


def test_resume_with_grid_axes_reordered_is_refused(tmp_path: Path, monkeypatch) -> None:
    out = tmp_path / "map.nc"
    interrupt_before_writing(monkeypatch)
    with pytest.raises(KeyboardInterrupt):
        ts.sweep(ts.models.bhz(), GRID, 2, out=out, chunk_size=5, **FAST)
    monkeypatch.undo()
    swapped = {"hopping": GRID["hopping"], "mass": GRID["mass"]}
    with pytest.raises(StoreError, match=r"grid order: \['hopping', 'mass'\] now, \['mass', "):
        ts.sweep(ts.models.bhz(), swapped, 2, out=out, resume=True, chunk_size=5, **FAST)
    # the original order resumes, and a finished file refuses the other order too
    ts.sweep(ts.models.bhz(), GRID, 2, out=out, resume=True, chunk_size=5, **FAST).close()
    with pytest.raises(StoreError, match="grid order"):
        ts.sweep(ts.models.bhz(), swapped, 2, out=out, resume=True, **FAST)


def test_cli_resume_with_grid_table_reordered_is_refused(tmp_path: Path, monkeypatch, capsys):
    def config(first: str, second: str) -> Path:
        lines = {
            "mass": "mass = { start = -3.0, stop = 3.0, num = 6 }",
            "hopping": "hopping = [0.5, 1.0, 1.5]",
        }
        text = f"""
            model = "bhz"
            filling = 2
            output = "map.nc"
            [grid]
            {lines[first]}
            {lines[second]}
            [sampling]
            loop_points = 12
            lines = 7
            [run]
            chunk_size = 5
            """
        path = tmp_path / "run.toml"
        path.write_text(textwrap.dedent(text))
        return path

    interrupt_before_writing(monkeypatch)
    assert main(["run", str(config("mass", "hopping")), "--quiet"]) == 130
    monkeypatch.undo()
    capsys.readouterr()
    assert main(["run", str(config("hopping", "mass")), "--quiet", "--resume"]) == 2
    err = capsys.readouterr().err
    assert "grid order: ['hopping', 'mass'] now, ['mass', 'hopping'] in the file" in err
    assert journal_path(tmp_path / "map.nc").is_dir()  # the journal is kept for a resume


def square_model(mass_shift: float) -> ts.CallableModel:
    """A callable BHZ-type model; ``mass_shift`` stands for an edit of its code."""

    def hamiltonian(kappa, mass=-1.0, hopping=1.0):
        kx, ky = 2 * np.pi * kappa[:, 0], 2 * np.pi * kappa[:, 1]
        s0, sx = np.eye(2), np.array([[0, 1], [1, 0]])
        sy, sz = np.array([[0, -1j], [1j, 0]]), np.diag([1, -1])
        gz, gx, gy = np.kron(s0, sz), np.kron(sz, sx), np.kron(s0, sy)
        c = (mass + mass_shift + hopping * (np.cos(kx) + np.cos(ky)))[:, None, None]
        return c * gz + hopping * (np.sin(kx)[:, None, None] * gx + np.sin(ky)[:, None, None] * gy)

    hamiltonian.__qualname__ = "hamiltonian"  # the same name, whatever the code says
    u_t = np.kron(np.array([[0, 1], [-1, 0]]), np.eye(2))
    return ts.CallableModel(hamiltonian, dim=2, norb=4, time_reversal=u_t)


def test_bhz_callable_matches_the_catalogue_model() -> None:
    # the stand-in for "the same code" really is the catalogue model (so the test below
    # checks a change of numbers, not of kind)
    kappa = np.random.default_rng(1).random((9, 2))
    p = {"mass": 0.7, "hopping": 1.2}
    np.testing.assert_allclose(
        square_model(0.0).hamiltonian(kappa, p), ts.models.bhz().hamiltonian(kappa, p), atol=1e-12
    )


@pytest.mark.parametrize("changed", ["model", "coefficients"])
def test_resume_refuses_code_changed_under_the_same_name(
    tmp_path: Path, monkeypatch, changed: str
) -> None:
    def mapping_of(scale: float):
        def mapping(p: dict[str, float]) -> dict[str, float]:
            return {"mass": scale * p["m"]}

        mapping.__qualname__ = "mapping"
        return mapping

    grid = {"m": np.linspace(-3, 3, 12)}
    out = tmp_path / "map.nc"
    interrupt_before_writing(monkeypatch)
    with pytest.raises(KeyboardInterrupt):
        ts.sweep(square_model(0.0), grid, 2, coefficients=mapping_of(1.0), out=out, chunk_size=4,
                 **FAST)  # fmt: skip
    monkeypatch.undo()
    model = square_model(0.25 if changed == "model" else 0.0)
    mapping = mapping_of(1.0 if changed == "model" else 1.01)
    assert model.to_dict() == square_model(0.0).to_dict()  # nothing in the names differs
    with pytest.raises(StoreError, match="model numbers: .* restore the original code"):
        ts.sweep(model, grid, 2, coefficients=mapping, out=out, resume=True, **FAST)
    # unchanged code resumes
    ts.sweep(square_model(0.0), grid, 2, coefficients=mapping_of(1.0), out=out, resume=True,
             **FAST).close()  # fmt: skip


# -- limits that fail cleanly ------------------------------------------------------------------


def finished_file(folder: Path) -> Path:
    out = folder / "map.nc"
    ts.sweep(ts.models.bhz(), {"mass": [-3.0, -1.0, 1.0]}, 2, out=out, **FAST).close()
    return out


def test_output_paths_are_checked_before_any_work(tmp_path: Path) -> None:
    model = ts.models.bhz()
    with pytest.raises(StoreError, match="is a directory"):
        ts.sweep(model, {"mass": [1.0]}, 2, out=tmp_path, **FAST)
    with pytest.raises(StoreError, match="does not exist; create it first"):
        ts.sweep(model, {"mass": [1.0]}, 2, out=tmp_path / "no" / "map.nc", **FAST)
    assert not (tmp_path / "no").exists()
    out = finished_file(tmp_path)
    before = out.read_bytes()
    with pytest.raises(StoreError, match="exists; resume=True returns it .* overwrite=True"):
        ts.sweep(model, {"mass": [1.0]}, 2, out=out, **FAST)
    assert out.read_bytes() == before  # the finished file is not replaced ...
    ts.sweep(model, {"mass": [1.0]}, 2, out=out, overwrite=True, **FAST).close()
    assert out.read_bytes() != before  # ... unless asked to


def test_grid_of_booleans_is_refused_like_params() -> None:
    with pytest.raises(ts.errors.ParameterError, match="booleans"):
        ts.sweep(ts.models.bhz(), {"mass": [True, False]}, 2, **FAST)
    with pytest.raises(ts.errors.ParameterError):
        ts.invariants(ts.models.bhz(), 2, params={"mass": True})


def huge_callable(n: int) -> ts.CallableModel:
    u_t = np.kron(np.array([[0, 1], [-1, 0]]), np.eye(n // 2))

    def never_called(kappa, mass=1.0):
        raise AssertionError("the model must not be evaluated")

    return ts.CallableModel(never_called, dim=3, norb=n, time_reversal=u_t)


def test_huge_callable_model_is_refused_with_what_to_change(monkeypatch) -> None:
    limits = import_module("toposweep.limits")
    monkeypatch.setattr(limits, "available_memory", lambda: 2 << 30)
    # 1000 orbitals: 16 MB a Hamiltonian, 48 MB a κ point; 80 κ points at once (8 TRIMs,
    # 8 of the bulk grid, one Wilson line of 2 × 32)
    model = huge_callable(1000)
    with pytest.raises(ts.errors.ParameterError, match=r"needs about 3\.8 GB .* loop_points"):
        ts.invariants(model, 500)


def test_huge_callable_model_that_fits_in_batches_is_accepted(monkeypatch) -> None:
    """Issue 20 item 5: what can be batched runs. The bulk gap grid of a 2000-orbital model
    is taken in batches of 8 κ points (1.5 GB at three copies), not in one of 32.8 GB, so
    short Wilson lines fit in 8 GB; before, this point was refused for its grid."""
    limits = import_module("toposweep.limits")
    monkeypatch.setattr(limits, "available_memory", lambda: 8 << 30)
    sampling = ts.Sampling(loop_points=4, certify=False)
    # (the estimate reads only the size: a stand-in, not a 2000-orbital model in memory)
    model = SimpleNamespace(norb=2000, dim=3)
    need, _, what = limits.point_estimate(model, sampling, 2)
    assert need == pytest.approx((8 + 8 + 4) * 3 * 16 * 2000**2)
    assert "8 points of the bulk gap grid" in what
    with pytest.warns(limits.SlowPointWarning):  # hours: said, not refused
        limits.check_point_memory(model, sampling, 2)


def test_a_point_of_more_than_a_year_is_refused() -> None:
    limits = import_module("toposweep.limits")
    # (the estimate reads only the size: a stand-in, not a 20 000-orbital model in memory)
    model = SimpleNamespace(norb=20000, dim=3, add=None)
    with pytest.raises(ts.errors.ParameterError, match=r"would take about .* years .* lower"):
        limits.check_point_memory(model, ts.Sampling(), 2)


def test_a_slow_point_is_announced_before_it_starts() -> None:
    limits = import_module("toposweep.limits")
    n = 600  # a tight-binding model of 600 orbitals: hours per point on a workstation
    model = ts.TightBinding(2, n, time_reversal=np.kron([[0, 1], [-1, 0]], np.eye(n // 2)))
    with pytest.warns(limits.SlowPointWarning, match="600-orbital model will take about"):
        limits.check_point_memory(model, ts.Sampling(), 2)


def test_astronomical_grid_is_refused_with_how_to_split_it(tmp_path: Path) -> None:
    axis = np.linspace(-3, 3, 10**7)
    with pytest.raises(ts.errors.ParameterError, match=r"100,000,000,000,000 points .* Split"):
        ts.sweep(ts.models.bhz(), {"mass": axis, "hopping": axis + 4}, 2, **FAST)
    with pytest.raises(ts.errors.ParameterError, match=r"on disk.* Split it into at least"):
        ts.sweep(ts.models.bhz(), {"mass": axis, "hopping": axis + 4}, 2,
                 out=tmp_path / "m.nc", **FAST)  # fmt: skip


def bhz_config(folder: Path, extra: str = "", model: str = '"bhz"') -> Path:
    path = folder / "run.toml"
    path.write_text(
        textwrap.dedent(
            f"""
            model = {model}
            filling = 2
            output = "map.nc"
            {extra}
            [grid]
            mass = {{ start = -3.0, stop = 3.0, num = 30 }}
            hopping = [0.5, 1.0, 1.5, 2.0]
            [sampling]
            loop_points = 12
            lines = 7
            [run]
            chunk_size = 40
            """
        )
    )
    return path


WRITE_WITHOUT_CHECK = """
import importlib, sys
if sys.argv[1] == "unchecked":  # no room check first: HDF5 meets the limit in mid-write
    importlib.import_module("toposweep.results.store")._reserve = lambda tmp, size: None
from toposweep.cli import main
sys.exit(main(["run", sys.argv[2], "--resume", "--quiet"]))
"""


@pytest.mark.parametrize(
    ("check", "limit_kb", "words"),
    [
        ("checked", 64, "more than the file size limit (ulimit -f)"),
        ("unchecked", 16, "File too large"),  # the file's layout
        ("unchecked", 64, "File too large"),  # its data
    ],
)
def test_disk_full_during_the_final_write_is_one_line(
    tmp_path: Path, monkeypatch, check: str, limit_kb: int, words: str
) -> None:
    import resource
    import subprocess
    import sys

    config = bhz_config(tmp_path)
    interrupt_before_writing(monkeypatch)  # every chunk journalled, no file yet
    assert main(["run", str(config), "--quiet"]) == 130
    monkeypatch.undo()
    journal = sorted(p.name for p in journal_path(tmp_path / "map.nc").iterdir())

    def small_files() -> None:  # `ulimit -f`: the result file cannot be written
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit_kb << 10, limit_kb << 10))

    script = tmp_path / "write.py"
    script.write_text(WRITE_WITHOUT_CHECK)
    done = subprocess.run(
        [sys.executable, str(script), check, str(config)],
        capture_output=True, text=True, timeout=120, preexec_fn=small_files,
    )  # fmt: skip
    assert done.returncode == 2, done.stderr  # (no SIGSEGV/SIGBUS at exit either)
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1, done.stderr  # no tracebacks, nothing "ignored" at exit
    assert f"cannot write {tmp_path / 'map.nc'}: " in lines[0] and words in lines[0]
    assert "run --resume" in lines[0]
    assert not (tmp_path / "map.nc").exists() and not (tmp_path / "map.nc.writing").exists()
    assert sorted(p.name for p in journal_path(tmp_path / "map.nc").iterdir()) == journal
    # with room again, the resume writes the file from the journal
    assert main(["run", str(config), "--quiet", "--resume"]) == 0
    with ts.open_result(tmp_path / "map.nc", load=True) as ds:
        assert ds.phase.shape == (30, 4)


def test_full_disk_while_journalling_says_where_and_what_to_do(tmp_path: Path) -> None:
    """A chunk that cannot be saved (file size limit of 1 KiB: every chunk is larger) ends
    with one line that names the journal and says how to continue, not "[Errno 27] File too
    large"; no temporary file is left in the journal, and the resume completes the run."""
    import resource
    import subprocess
    import sys

    config = bhz_config(tmp_path)

    def small_files() -> None:
        resource.setrlimit(resource.RLIMIT_FSIZE, (1 << 10, 1 << 10))

    done = subprocess.run(
        [sys.executable, "-m", "toposweep.cli", "run", str(config), "--quiet"],
        capture_output=True, text=True, timeout=120, preexec_fn=small_files,
    )  # fmt: skip
    assert done.returncode == 2, done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1, done.stderr
    journal = journal_path(tmp_path / "map.nc")
    assert f"in the journal {journal}: File too large" in lines[0]
    assert "run --resume" in lines[0]
    assert not list(journal.glob("*.tmp"))
    assert main(["run", str(config), "--quiet", "--resume"]) == 0
    with ts.open_result(tmp_path / "map.nc", load=True) as ds:
        assert ds.phase.shape == (30, 4)


# -- one line, exit 2, instead of tracebacks ----------------------------------------------------


@pytest.mark.parametrize(
    ("code", "words"),
    [
        ("def model(:\n    pass\n", "line 1: syntax error"),
        ("raise RuntimeError('no licence file')\n", "raised RuntimeError: no licence file"),
        ("import sys\nsys.exit(0)\n", "calls sys.exit(0) when imported"),
        ("def model():\n    raise KeyError('f_level')\n", "KeyError: 'f_level'"),
        ("import sys\ndef model():\n    sys.exit(0)\n", "sys.exit(0)"),
    ],
)
@pytest.mark.parametrize("key", ["model", "coefficients"])
def test_broken_model_or_coefficients_file_is_one_line(tmp_path, capsys, code, words, key):
    if key == "coefficients" and "def model" in code:
        code = code.replace("def model():", "def model(p):")
    (tmp_path / "user.py").write_text(code)
    if key == "model":
        config = bhz_config(tmp_path, model='"user.py:model"')
    else:
        config = bhz_config(tmp_path, extra='coefficients = "user.py:model"')
    code_ = main(["run", str(config), "--quiet"])
    out, err = capsys.readouterr()
    # an error of the user's function while it runs is not a usage mistake: exit code 1
    assert code_ == (1 if "KeyError" in code and key == "coefficients" else 2), err
    assert len(err.strip().splitlines()) == 1, err
    assert words in err and "Traceback" not in err
    assert not (tmp_path / "map.nc").exists()


@pytest.fixture(scope="module")
def result_bytes(tmp_path_factory) -> bytes:
    return finished_file(tmp_path_factory.mktemp("result")).read_bytes()


@pytest.mark.parametrize(
    "args",
    [["--dpi", "0"], ["--dpi", "-5"], ["--dpi", "20000"], ["--out", "p.xyz"]],
    ids=" ".join,
)
def test_bad_plot_arguments_are_one_line(tmp_path, capsys, result_bytes, args):
    path = tmp_path / "map.nc"
    path.write_bytes(result_bytes)
    if args[0] == "--out":
        args = ["--out", str(tmp_path / args[1])]
    try:
        code = main(["plot", str(path), *args])
    except SystemExit as exc:  # a usage mistake: argparse's exit, one line
        code = exc.code
    assert code == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err, err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["map.nc"]


def _tamper(path: Path, kind: str) -> None:
    import h5py

    with h5py.File(path, "r+") as f:
        if kind == "plain_hdf5":  # a plain HDF5 file carrying our attributes
            attrs = dict(f.attrs)
        elif kind == "nan_coordinate":
            f["mass"][1] = np.nan
        elif kind == "no_gap_direct":
            del f["gap_direct"]
        else:
            f.attrs[kind] = {"model": "null", "filling": "abc", "sampling": "{not json"}[kind]
    if kind == "plain_hdf5":
        path.unlink()
        with h5py.File(path, "w") as f:
            f.attrs.update(attrs)
            f["nu0"] = np.zeros(3, np.int8)


@pytest.mark.parametrize(
    "kind", ["model", "filling", "sampling", "nan_coordinate", "no_gap_direct", "plain_hdf5"]
)
@pytest.mark.parametrize("command", [["summary"], ["plot"], ["plot", "--line"]], ids=" ".join)
def test_tampered_result_file_is_one_line(tmp_path, capsys, result_bytes, kind, command):
    path = tmp_path / "map.nc"
    path.write_bytes(result_bytes)
    _tamper(path, kind)
    # (an HDF5 tool writing the file overwrites its digest trailer: such a file is read as
    # HDF5 gives it, so an edit it survives is shown, not refused; never a traceback)
    code = main([*command, str(path)])
    out, err = capsys.readouterr()
    assert "Traceback" not in err
    if kind in ("no_gap_direct", "plain_hdf5"):
        assert code == 2
    if code != 0:
        assert code == 2 and out == "" and len(err.strip().splitlines()) == 1, err
        assert str(path) in err


# -- damaged journal chunks and damaged files ---------------------------------------------------


def test_damaged_but_readable_journal_chunks_are_recomputed(tmp_path: Path, monkeypatch) -> None:
    grid = {"mass": np.linspace(-3, 3, 12)}
    reference = ts.sweep(ts.models.bhz(), grid, 2, out=tmp_path / "ref.nc", **FAST)
    out = tmp_path / "map.nc"
    interrupt_before_writing(monkeypatch)
    with pytest.raises(KeyboardInterrupt):
        ts.sweep(ts.models.bhz(), grid, 2, out=out, chunk_size=3, **FAST)
    monkeypatch.undo()
    journal = journal_path(out)
    chunks = sorted(journal.glob("chunk-*.npz"))
    assert len(chunks) == 4
    with np.load(chunks[0]) as z:  # a valid .npz missing an array
        arrays = {k: z[k] for k in z.files if k != "gap_direct"}
    np.savez(chunks[0], **arrays)
    with np.load(chunks[1]) as z:  # an array of the wrong shape
        arrays = {k: z[k] for k in z.files}
    arrays["nu0"] = arrays["nu0"][:, None]
    np.savez(chunks[1], **arrays)
    chunks[2].unlink()  # a directory in place of a chunk
    chunks[2].mkdir()
    (chunks[2] / "x").write_text("x")
    np.savez(journal / "chunk-000000000012-000000000015.npz", **arrays)  # beyond the grid
    calls = []
    real = sweep_module.run_points
    monkeypatch.setattr(
        sweep_module, "run_points", lambda req, pts, **kw: calls.append(len(pts)) or real(req, pts)
    )
    resumed = ts.sweep(ts.models.bhz(), grid, 2, out=out, resume=True, chunk_size=3, **FAST)
    assert sum(calls) == 9  # the three damaged chunks, nothing else
    xr_ = import_module("xarray")
    xr_.testing.assert_identical(
        resumed.assign_attrs(created=""), reference.assign_attrs(created="")
    )


def test_every_damaged_byte_is_refused_and_plain_tools_still_read(tmp_path, result_bytes):
    import xarray as xr

    path = tmp_path / "map.nc"
    path.write_bytes(result_bytes)
    with xr.open_dataset(path, engine="h5netcdf") as ds:  # plain tools ignore the trailer
        assert ds.phase.shape == (3,)
    import h5py

    with h5py.File(path, "r") as f:  # coordinates carry a checksum too
        assert all(f[name].fletcher32 for name in f if f[name].ndim > 0)
    rng = np.random.default_rng(7)
    for at in [*rng.integers(0, len(result_bytes), 40), 5, 100, len(result_bytes) - 1]:
        data = bytearray(result_bytes)
        data[at] ^= 1 << int(rng.integers(0, 8))
        path.write_bytes(bytes(data))
        with pytest.raises(StoreError, match="corrupt"):
            ts.open_result(path)
    path.write_bytes(result_bytes)
    ts.open_result(path, load=True).close()


def test_callable_model_larger_than_a_batch_runs_in_batches() -> None:
    """A Python-function model whose bulk gap grid is more than one batch (issue 20 item 5):
    the grid comes in batches of at most 32 MiB of Hamiltonians and the point is right.

    The Wilson–Dirac model padded with 92 flat empty bands (96 orbitals: 144 KiB a
    Hamiltonian, 228 κ points a batch, the 8³ grid in three). Its phases: Fu & Kane, PRB 76,
    045302 (2007) with the model of Qi, Hughes & Zhang, PRB 78, 195424 (2008): (1;000) at
    m = −2; the padding changes no occupied state.
    """
    n, spare = 96, 92
    wd = ts.models.wilson_dirac()
    sizes: list[int] = []

    def padded(kappa, mass=-2.0):
        sizes.append(len(kappa))
        h = np.zeros((len(kappa), n, n), complex)
        h[:, :4, :4] = wd.hamiltonian(kappa, {"mass": mass})
        h[:, range(4, n), range(4, n)] = 20.0  # far above the model's bands (|E| ≤ 6)
        return h

    u_t = np.zeros((n, n), complex)
    u_t[:4, :4] = wd.time_reversal
    u_t[4:, 4:] = np.kron([[0, 1], [-1, 0]], np.eye(spare // 2))
    model = ts.CallableModel(padded, dim=3, norb=n, time_reversal=u_t)
    fast = {"loop_points": 12, "lines": 7, "certify": False, "prove_gap": "never"}
    ds = ts.invariants(model, 2, {"mass": -2.0}, **fast)
    assert (int(ds.nu0), ds.nu.values.tolist()) == (1, [0, 0, 0])
    ref = ts.invariants(wd, 2, {"mass": -2.0}, **fast)
    assert float(ds.gap_direct) == pytest.approx(float(ref.gap_direct), abs=1e-9)
    assert max(sizes) <= 228, sorted(sizes)[-5:]  # (before: the 512-point grid at once)
    assert sizes.count(228) >= 2
