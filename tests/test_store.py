"""The streaming store: SIGKILL and resume, torn writes, refusals, unreadable files."""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time
from importlib import import_module
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts
import xarray as xr
from toposweep.errors import StoreError
from toposweep.results.store import journal_path
from toposweep.sweep import SweepInterrupted

sweep_module = import_module("toposweep.sweep")  # the package's `sweep` is the function

# 80 × 50 = 4000 points of the spinful square-lattice model, in 20 chunks of 200; the sampling
# is dense enough that computing, not the fixed cost of writing the file, dominates the time
KILL_SCRIPT = textwrap.dedent(
    """
    import sys, numpy as np, toposweep as ts
    ts.sweep(ts.models.bhz(), {"mass": np.linspace(-3, 3, 80), "hopping": np.linspace(0.2, 2, 50)},
             2, out=sys.argv[1], chunk_size=200, progress=False, loop_points=32, lines=21)
    """
)
KILL_GRID = {"mass": np.linspace(-3, 3, 80), "hopping": np.linspace(0.2, 2, 50)}
KILL_OPTIONS = {"loop_points": 32, "lines": 21, "progress": False, "chunk_size": 200}


def same(a: xr.Dataset, b: xr.Dataset) -> None:
    """Identical apart from the creation time."""
    xr.testing.assert_identical(a.assign_attrs(created=""), b.assign_attrs(created=""))


def test_sigkill_half_way_then_resume_equals_uninterrupted_run(tmp_path: Path, monkeypatch) -> None:
    model = ts.models.bhz()
    full = ts.sweep(model, KILL_GRID, 2, out=tmp_path / "full.nc", **KILL_OPTIONS)

    out = tmp_path / "killed.nc"
    journal = journal_path(out)
    proc = subprocess.Popen([sys.executable, "-c", KILL_SCRIPT, str(out)])
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline and proc.poll() is None:
            if journal.is_dir() and len(list(journal.glob("chunk-*.npz"))) >= 9:
                break
            time.sleep(0.01)
        assert proc.poll() is None
        with pytest.raises(StoreError, match="another process is writing"):  # one writer only
            ts.sweep(model, KILL_GRID, 2, out=out, resume=True, **KILL_OPTIONS)
        os.kill(proc.pid, signal.SIGKILL)  # no chance to clean up: the journal must be enough
    finally:
        proc.wait()
    assert proc.returncode == -signal.SIGKILL
    assert not out.exists()
    kept = len(list(journal.glob("chunk-*.npz")))
    assert 9 <= kept < 20

    # count the points the resumed run evaluates: exactly those of the chunks the journal lacks
    # (a count, not a CPU time: the fixed cost of writing the file is a large and varying
    # share of a run this size, so a time ratio said little and failed on a loaded machine)
    evaluated: list[int] = []
    run_points = sweep_module.run_points

    def counting(request, points):  # type: ignore[no-untyped-def]
        evaluated.append(len(points))
        return run_points(request, points)

    monkeypatch.setattr(sweep_module, "run_points", counting)
    resumed = ts.sweep(model, KILL_GRID, 2, out=out, resume=True, **KILL_OPTIONS)
    monkeypatch.undo()
    assert sum(evaluated) == 4000 - 200 * kept
    assert all(n == 200 for n in evaluated)
    same(resumed, full)
    with xr.open_dataset(out) as a, xr.open_dataset(tmp_path / "full.nc") as b:
        same(a, b)
    assert not journal.exists()
    full.close()
    resumed.close()


def interrupted_run(out: Path, after: int, calls: list[float] | None = None) -> None:
    """Start a 60-point sweep into ``out`` and Ctrl-C it after ``after`` points were mapped."""
    seen = [] if calls is None else calls

    def mapping(p: dict[str, float]) -> dict[str, float]:
        seen.append(p["m"])
        if len(seen) == after:
            os.kill(os.getpid(), signal.SIGINT)
        return {"mass": p["m"]}

    mapping.__qualname__ = "mapping"  # the run records the mapping's name; resume checks it
    with pytest.raises(SweepInterrupted) as info:
        ts.sweep(
            ts.models.bhz(), {"m": np.linspace(-3, 3, 60)}, 2, out=out,
            coefficients=mapping, chunk_size=10, progress=False, loop_points=16, lines=9,
        )  # fmt: skip
    assert info.value.out == os.fspath(out) and "resume=True" in str(info.value)


def counting_mapping(calls: list[float]):
    def mapping(p: dict[str, float]) -> dict[str, float]:
        calls.append(p["m"])
        return {"mass": p["m"]}

    mapping.__qualname__ = "mapping"
    return mapping


def resume_run(out: Path, calls: list[float], **kw) -> xr.Dataset:
    return ts.sweep(
        ts.models.bhz(), {"m": np.linspace(-3, 3, 60)}, 2, out=out,
        coefficients=counting_mapping(calls), chunk_size=10, progress=False,
        **{"loop_points": 16, "lines": 9, **kw},
    )  # fmt: skip


def test_torn_and_damaged_chunks_are_recomputed_and_nothing_else(tmp_path: Path) -> None:
    reference = resume_run(tmp_path / "ref.nc", [])
    out = tmp_path / "map.nc"
    interrupted_run(out, after=25)  # chunks 0-9, 10-19, 20-29 finish
    journal = journal_path(out)
    chunks = sorted(journal.glob("chunk-*.npz"))
    assert len(chunks) == 3
    (journal / (chunks[-1].name + ".tmp")).write_bytes(b"PK\x03\x04 half a chunk")  # torn
    data = chunks[1].read_bytes()
    chunks[1].write_bytes(data[: len(data) // 2])  # a damaged chunk is never trusted
    calls: list[float] = []
    resumed = resume_run(out, calls, resume=True)
    same(resumed, reference)
    # three grid points are mapped for the run's fingerprint (the first validates the
    # mapping); then only the damaged chunk (10 points) and the 30 never computed are evaluated
    assert len(calls) == 3 + 10 + 30
    resumed.close()
    reference.close()


def test_kill_while_writing_the_file_is_harmless(tmp_path: Path, monkeypatch) -> None:
    reference = resume_run(tmp_path / "ref.nc", [])
    out = tmp_path / "map.nc"

    def killed(*args, **kwargs):
        (tmp_path / "map.nc.writing").write_bytes(b"\x89HDF\r\n half written")
        raise KeyboardInterrupt

    monkeypatch.setattr(sweep_module, "_consolidate", killed)
    with pytest.raises(KeyboardInterrupt):
        resume_run(out, [])
    monkeypatch.undo()
    assert not out.exists() and journal_path(out).is_dir()
    calls: list[float] = []
    resumed = resume_run(out, calls, resume=True)
    assert len(calls) == 3  # the fingerprint's three points; only the file was written
    same(resumed, reference)
    assert not (tmp_path / "map.nc.writing").exists()
    resumed.close()
    reference.close()


@pytest.mark.parametrize(
    ("change", "words"),
    [
        ({"loop_points": 20}, "sampling loop_points: 20 now, 16 in the file"),
        ({"grid": {"m": np.linspace(-3, 3, 61)}}, "grid values of 'm': 61 values now, 60"),
        ({"model": ts.models.bhz(hopping=2.0)}, "model: a different model"),
    ],
)
def test_resume_refuses_a_different_run(tmp_path: Path, change, words) -> None:
    out = tmp_path / "map.nc"
    interrupted_run(out, after=15)
    before = sorted(p.name for p in journal_path(out).iterdir())
    args = {
        "model": ts.models.bhz(),
        "grid": {"m": np.linspace(-3, 3, 60)},
        "filling": 2,
        "loop_points": 16,
        "lines": 9,
    }
    args.update(change)
    with pytest.raises(StoreError, match=words) as info:
        ts.sweep(
            out=out, resume=True, coefficients=counting_mapping([]), chunk_size=10,
            progress=False, **args,
        )  # fmt: skip
    assert "cannot resume" in str(info.value)
    assert sorted(p.name for p in journal_path(out).iterdir()) == before  # untouched


def test_resume_of_a_finished_file(tmp_path: Path) -> None:
    out = tmp_path / "map.nc"
    first = resume_run(out, [])
    calls: list[float] = []
    again = resume_run(out, calls, resume=True)
    assert len(calls) == 3  # the fingerprint's three points; returned from the file
    same(again, first)
    with pytest.raises(StoreError, match="different run"):
        resume_run(out, [], resume=True, lines=7)
    first.close()
    again.close()


def test_open_result_rejects_what_is_not_a_result(tmp_path: Path) -> None:
    garbage = tmp_path / "garbage.nc"
    garbage.write_bytes(os.urandom(2000))
    with pytest.raises(StoreError, match="not a readable NetCDF4/HDF5 file"):
        ts.open_result(garbage)
    good = tmp_path / "good.nc"
    resume_run(good, []).close()
    data = good.read_bytes()
    truncated = tmp_path / "truncated.nc"
    truncated.write_bytes(data[: len(data) // 2])
    with pytest.raises(StoreError, match="truncated or corrupt"):
        ts.open_result(truncated)
    other = tmp_path / "other.nc"
    xr.Dataset({"x": ("i", np.arange(3))}).to_netcdf(other, engine="h5netcdf")
    with pytest.raises(StoreError, match="not a toposweep result file"):
        ts.open_result(other)
    unfinished = tmp_path / "unfinished.nc"
    interrupted_run(unfinished, after=15)
    with pytest.raises(StoreError, match="unfinished"):
        ts.open_result(unfinished)
    with ts.open_result(good) as ds:
        assert ds.sizes["m"] == 60


def test_flat_ranges_map_onto_the_grid_like_numpy_ravel() -> None:
    from toposweep.results.store import flat_boxes

    rng = np.random.default_rng(5)
    for _ in range(500):
        shape = tuple(int(n) for n in rng.integers(1, 5, size=rng.integers(1, 5)))
        total = int(np.prod(shape))
        a = int(rng.integers(0, total))
        b = int(rng.integers(a, total + 1))
        grid = np.zeros(shape, int)
        values = np.arange(a, b) + 1
        pos = 0
        for lo, hi in flat_boxes(a, b, shape):
            box = tuple(h - a_ for a_, h in zip(lo, hi, strict=True))
            n = int(np.prod(box))
            grid[tuple(slice(a_, h) for a_, h in zip(lo, hi, strict=True))] = values[
                pos : pos + n
            ].reshape(box)
            pos += n
        expected = np.zeros(total, int)
        expected[a:b] = values
        np.testing.assert_array_equal(grid.ravel(), expected)  # numpy's C order is the truth
        assert len(flat_boxes(a, b, shape)) <= 2 * len(shape) - 1


def test_the_netcdf_c_library_reads_the_file(tmp_path: Path) -> None:
    # an outside reader: the reference netCDF-C library through netCDF4-python (installed by
    # `make test`, Makefile TEST_DEPS), not h5py/xarray, which wrote the file
    import netCDF4

    out = tmp_path / "map.nc"
    ds = resume_run(out, [])
    with netCDF4.Dataset(out) as f:
        assert len(f.dimensions["m"]) == 60
        nu0 = f.variables["nu0"]
        assert nu0.dtype == np.int8 and nu0.dimensions == ("m",)
        assert "flag_meanings" in f.variables["phase"].ncattrs()
        nu0.set_auto_mask(False)
        assert nu0[:].tolist() == ds.nu0.values.tolist()
    ds.close()


@pytest.mark.skipif(shutil.which("ncdump") is None, reason="ncdump (Debian netcdf-bin) absent")
def test_ncdump_reads_the_file(tmp_path: Path) -> None:
    # a second outside reader where installed (.ci/run installs netcdf-bin with apt-get):
    # the text dump of netCDF-C's own command-line tool
    out = tmp_path / "map.nc"
    ds = resume_run(out, [])
    header = subprocess.run(
        ["ncdump", "-h", str(out)], capture_output=True, text=True, check=True
    ).stdout
    assert "m = 60 ;" in header
    assert "byte nu0(m) ;" in header and "phase:flag_meanings" in header
    values = subprocess.run(
        ["ncdump", "-v", "nu0", str(out)], capture_output=True, text=True, check=True
    ).stdout
    body = values[values.index("nu0 =") + 5 :].replace(";", "").replace("}", "")
    assert [int(v) for v in body.replace(",", " ").split()] == ds.nu0.values.tolist()
    ds.close()


def test_damaged_data_is_reported_not_read(tmp_path: Path) -> None:
    import h5py

    out = tmp_path / "map.nc"
    resume_run(out, []).close()
    with h5py.File(out, "r") as f:  # where the phase array's first chunk lies in the file
        info = f["phase"].id.get_chunk_info(0)
        offset, size = info.byte_offset, info.size
    data = bytearray(out.read_bytes())
    data[offset + size // 2] ^= 0xFF  # one flipped byte, as a failing disk would do
    out.write_bytes(bytes(data))
    with pytest.raises(StoreError, match="damaged data"):  # Fletcher-32 checksum, not garbage
        ts.open_result(out, load=True)


def test_resume_refuses_a_different_filling(tmp_path: Path, monkeypatch) -> None:
    from model_transforms import two_copies  # 8 bands: fillings 2, 4 and 6 are all valid

    model = two_copies(ts.models.bhz())
    out = tmp_path / "map.nc"
    grid = {"mass": [-1.0, 1.0]}
    monkeypatch.setattr(sweep_module, "_consolidate", lambda *a, **k: sys.exit("killed"))
    with pytest.raises(SystemExit):  # every chunk journalled, the file never written
        ts.sweep(model, grid, 4, out=out, progress=False, loop_points=12, lines=7)
    monkeypatch.undo()
    with pytest.raises(StoreError, match="filling: 2 now, 4 in the file"):
        ts.sweep(model, grid, 2, out=out, resume=True, progress=False, loop_points=12, lines=7)
    ds = ts.sweep(model, grid, 4, out=out, resume=True, progress=False, loop_points=12, lines=7)
    # two copies of a Z2-odd insulator are even (Kane & Mele, Phys. Rev. Lett. 95, 146802
    # (2005): Z2 counts Kramers pairs of edge states mod 2); one copy is odd at m = ±1 (Qi, Wu
    # & Zhang, Phys. Rev. B 74, 085308 (2006))
    assert ds.nu0.values.tolist() == [0, 0]
    ds.close()
