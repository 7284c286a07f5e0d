"""The command line on a corrupt or truncated result file: one line saying so, exit code 2,
and nothing changed — the file keeps its bytes and no plot or journal appears beside it."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
import toposweep as ts
import xarray as xr
from toposweep.cli import main


@pytest.fixture(scope="module")
def good_file(tmp_path_factory) -> bytes:
    out = tmp_path_factory.mktemp("good") / "map.nc"
    ts.sweep(
        ts.models.bhz(),
        {"mass": np.array([-3.0, -1.0, 1.0])},
        2,
        out=out,
        progress=False,
        loop_points=8,
        lines=3,
    )
    return out.read_bytes()


def _damaged(kind: str, good: bytes, folder: Path) -> Path:
    path = folder / "map.nc"
    if kind == "truncated":
        path.write_bytes(good[: len(good) // 2])
    elif kind == "header_only":
        path.write_bytes(good[:8])
    elif kind == "empty":
        path.write_bytes(b"")
    elif kind == "scribbled":
        data = bytearray(good)
        data[: len(data) // 3] = np.random.default_rng(1).bytes(len(data) // 3)
        path.write_bytes(bytes(data))
    elif kind == "text":
        path.write_text("this is not a result file\n")
    elif kind == "foreign_netcdf":  # a valid NetCDF file, but not one of ours
        xr.Dataset({"t": ("x", np.arange(3.0))}).to_netcdf(path, engine="h5netcdf")
    return path


KINDS = ["truncated", "header_only", "empty", "scribbled", "text", "foreign_netcdf"]
COMMANDS = [["summary"], ["plot"], ["plot", "--flow"], ["plot", "--line"]]


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("command", COMMANDS, ids=" ".join)
def test_damaged_result_file(kind, command, good_file, tmp_path, capsys):
    path = _damaged(kind, good_file, tmp_path)
    before = path.read_bytes()
    listing = sorted(p.name for p in tmp_path.iterdir())
    code = main([*command, str(path)])
    out, err = capsys.readouterr()
    assert code == 2
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("toposweep: error:") and str(path) in lines[0]
    assert ("corrupt" in lines[0]) or ("not a toposweep result file" in lines[0])
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == listing


def test_the_intact_file_works(good_file, tmp_path, capsys):
    path = tmp_path / "map.nc"
    path.write_bytes(good_file)
    assert main(["summary", str(path)]) == 0
    out = capsys.readouterr().out
    # Qi, Wu & Zhang, Phys. Rev. B 74, 085308 (2006): Z2-odd for 0 < |m| < 2, so m = −1, 1 odd
    # and −3 trivial
    assert re.search(r"Z2-odd 2D insulator \(Z2 = 1\)\s+2\b", out)


# A file changed by an HDF5 tool loses toposweep's digest (HDF5 writes where it was) and is
# read unverified: the attributes and variables the commands rely on are checked instead.
TAMPERED = {
    "model_null": (lambda h: h.attrs.__setitem__("model", "null"), "'model' is not a JSON"),
    "filling_text": (lambda h: h.attrs.__setitem__("filling", "abc"), "'filling' is not a"),
    "sampling_text": (lambda h: h.attrs.__setitem__("sampling", "{oops"), "'sampling' is not"),
    "nan_coordinate": (lambda h: h["mass"].__setitem__(1, np.nan), "coordinate 'mass' holds"),
    "gap_deleted": (lambda h: h.__delitem__("gap_direct"), "'gap_direct' is missing"),
}


@pytest.mark.parametrize("kind", sorted(TAMPERED))
@pytest.mark.parametrize("command", [["summary"], ["plot"]], ids=" ".join)
def test_tampered_result_file_is_one_line(kind, command, good_file, tmp_path, capsys):
    import h5py

    path = tmp_path / "map.nc"
    path.write_bytes(good_file)
    change, words = TAMPERED[kind]
    with h5py.File(path, "r+") as h:
        change(h)
    code = main([*command, str(path)])
    out, err = capsys.readouterr()
    assert (code, out) == (2, "")
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert "not a valid toposweep result file" in lines[0] and words in lines[0], lines[0]


def test_plain_hdf5_file_with_our_attributes_is_one_line(good_file, tmp_path):
    """Run as a command (warnings reach stderr there): no warning before the one line."""
    import subprocess
    import sys

    import h5py

    good = tmp_path / "map.nc"
    good.write_bytes(good_file)
    plain = tmp_path / "plain.h5"
    with h5py.File(good, "r") as src, h5py.File(plain, "w") as h:
        h.attrs.update(dict(src.attrs))
        h["x"] = np.arange(3)
    done = subprocess.run(
        [sys.executable, "-m", "toposweep.cli", "summary", str(plain)],
        capture_output=True, text=True, timeout=60,
    )  # fmt: skip
    assert done.returncode == 2
    assert done.stderr.strip().splitlines() == [
        f"toposweep: error: {plain}: not a toposweep result file (no toposweep variables/"
        "attributes)"
    ]
