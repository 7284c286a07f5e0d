"""Result files: a crash-safe journal of finished chunks and the consolidated NetCDF4/HDF5 file.

Why a journal: an HDF5 file that is killed in the middle of a write can be left unreadable, and
then every finished chunk in it would be lost. So while a sweep runs, each finished chunk goes
to its own small file in ``<out>.partial/`` — written to a temporary name, flushed to disk and
then renamed into place. A rename is atomic, so after a SIGKILL at any moment every chunk file
with a final name is complete, and a half-written temporary file is simply ignored. When all
chunks are there, ONE writer streams them, chunk by chunk, into ``<out>.writing``, which is
renamed to ``<out>`` only once it is complete; then the journal is removed. A kill during that
step leaves the journal intact, and resuming repeats the consolidation. Memory stays flat: at
no point is more than one chunk held.

The file is written with h5netcdf (pure HDF5 through h5py, no netCDF-C library needed), in the
layout xarray itself writes, so ``xarray.open_dataset`` and any NetCDF4 tool read it.
"""

from __future__ import annotations

import itertools
import json
import math
import os
import shutil
from collections.abc import Callable, Iterator, Mapping
from pathlib import Path
from typing import Any

try:  # POSIX advisory locks; elsewhere a second writer is not detected
    import fcntl
except ImportError:  # pragma: no cover
    fcntl = None  # type: ignore[assignment]

import h5netcdf
import h5py
import numpy as np
import xarray as xr
from numpy.typing import NDArray

from .errors import StoreError

__all__ = [
    "Journal",
    "identity_differences",
    "journal_path",
    "missing_ranges",
    "open_result",
    "write_result",
]

IDENTITY_FILE = "run.json"
LOCK_FILE = "lock"
#: bytes per HDF5 chunk of a result variable (compressed and checksummed chunk by chunk)
CHUNK_BYTES = 1 << 18
#: global attribute holding the run identity (model, grid, filling, sampling fingerprints)
IDENTITY_ATTR = "run_identity"
FLAT_DIM = "point"


def journal_path(out: str | os.PathLike[str]) -> Path:
    """Directory that holds the finished chunks of an unfinished run writing ``out``."""
    return Path(f"{os.fspath(out)}.partial")


def _fsync_dir(path: Path) -> None:
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:  # pragma: no cover - platforms without directory descriptors
        return
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _atomic_write(path: Path, write: Callable[[Any], None]) -> None:
    """Write through ``write(fileobj)`` to a temporary name, fsync, rename into place."""
    tmp = path.with_name(path.name + ".tmp")
    with open(tmp, "wb") as fh:
        write(fh)
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(tmp, path)
    _fsync_dir(path.parent)


def identity_differences(expected: Mapping[str, Any], found: Mapping[str, Any]) -> list[str]:
    """Readable list of what differs between two run identities (empty: same run).

    Examples
    --------
    >>> identity_differences({"filling": 2, "grid": {"m": [5, "a"]}},
    ...                      {"filling": 4, "grid": {"m": [5, "a"]}})
    ['filling: 2 now, 4 in the file']
    """
    out = []
    for key in sorted(set(expected) | set(found)):
        a, b = expected.get(key), found.get(key)
        if a == b:
            continue
        if key == "grid" and isinstance(a, dict) and isinstance(b, dict):
            if list(a) != list(b):
                out.append(f"grid parameters: {list(a)} now, {list(b)} in the file")
            else:
                for d in a:
                    if a[d] != b[d]:
                        out.append(
                            f"grid values of {d!r}: {a[d][0]} values now, {b[d][0]} in the file"
                            + (" (same count, different values)" if a[d][0] == b[d][0] else "")
                        )
        elif key == "sampling" and isinstance(a, dict) and isinstance(b, dict):
            for opt in sorted(set(a) | set(b)):
                if a.get(opt) != b.get(opt):
                    out.append(f"sampling {opt}: {a.get(opt)!r} now, {b.get(opt)!r} in the file")
        elif key == "model":
            out.append("model: a different model (terms, hoppings, symmetry or defaults)")
        else:
            out.append(f"{key}: {a!r} now, {b!r} in the file")
    return out


def missing_ranges(done: list[tuple[int, int]], total: int) -> list[tuple[int, int]]:
    """Flat index ranges not covered by the sorted, disjoint ``done`` ranges.

    Examples
    --------
    >>> missing_ranges([(0, 10), (20, 30)], 40)
    [(10, 20), (30, 40)]
    """
    out, pos = [], 0
    for start, stop in done:
        if start > pos:
            out.append((pos, start))
        pos = max(pos, stop)
    if pos < total:
        out.append((pos, total))
    return out


class Journal:
    """Finished chunks of one run, one atomically written ``.npz`` file per chunk.

    The journal holds an exclusive lock (``flock`` on ``<journal>/lock``) while a run uses it,
    so two processes never write the same result; the kernel drops the lock when its process
    dies, even by SIGKILL, so a killed run can always be resumed.
    """

    def __init__(self, path: Path, identity: Mapping[str, Any], lock: Any = None) -> None:
        self.path = path
        self.identity = dict(identity)
        self._lock = lock

    @staticmethod
    def _acquire(path: Path, out: str) -> Any:
        path.mkdir(parents=True, exist_ok=True)
        fh = open(path / LOCK_FILE, "a+b")  # held open (and locked) for the whole run
        if fcntl is not None:
            try:
                fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:
                fh.close()
                raise StoreError(
                    f"another process is writing {out} right now (its journal {path} is "
                    "locked); wait for it to finish or choose another output file"
                ) from None
        return fh

    @classmethod
    def start(
        cls, out: str | os.PathLike[str], identity: Mapping[str, Any], resume: bool
    ) -> Journal:
        """Open and lock the journal of ``out``: continue it (``resume``) or start anew."""
        path = journal_path(out)
        lock = cls._acquire(path, os.fspath(out))
        try:
            if resume:
                try:
                    found = json.loads((path / IDENTITY_FILE).read_text())
                except (OSError, ValueError):
                    found = None  # never completed: nothing of that run is trustworthy
                if isinstance(found, dict):
                    diff = identity_differences(identity, found)
                    if diff:
                        raise StoreError(
                            f"cannot resume {os.fspath(out)}: the interrupted run differs — "
                            + "; ".join(diff)
                            + ". Use the original settings, or resume=False to start over."
                        )
                    return cls(path, identity, lock)
            for p in path.iterdir():  # a new run: clear everything but the lock
                if p.name != LOCK_FILE:
                    shutil.rmtree(p) if p.is_dir() else p.unlink()
            journal = cls(path, identity, lock)
            text = json.dumps(journal.identity, sort_keys=True).encode()
            _atomic_write(path / IDENTITY_FILE, lambda fh: fh.write(text))
            return journal
        except BaseException:
            lock.close()
            raise

    def close(self) -> None:
        """Release the lock (the journal stays on disk for a later resume)."""
        if self._lock is not None:
            self._lock.close()
            self._lock = None

    @staticmethod
    def _name(start: int, stop: int) -> str:
        return f"chunk-{start:012d}-{stop:012d}.npz"

    def save(self, start: int, stop: int, raw: Mapping[str, NDArray[Any]]) -> None:
        """Store the core's flat arrays of points ``start … stop-1`` (atomic)."""
        arrays = {k: np.asarray(v) for k, v in raw.items()}
        _atomic_write(self.path / self._name(start, stop), lambda fh: np.savez(fh, **arrays))

    def load(self, start: int, stop: int) -> dict[str, NDArray[Any]]:
        """Arrays of one finished chunk."""
        with np.load(self.path / self._name(start, stop)) as z:
            return {k: z[k] for k in z.files}

    def finished(self) -> list[tuple[int, int]]:
        """Sorted, disjoint ranges of finished chunks; unreadable or stray files are removed."""
        ranges = []
        for p in self.path.iterdir():
            if p.name.endswith(".tmp"):
                p.unlink()  # a write that a kill interrupted
                continue
            if p.name in (LOCK_FILE, IDENTITY_FILE):
                continue
            parts = p.name.removeprefix("chunk-").removesuffix(".npz").split("-")
            if not p.name.startswith("chunk-") or len(parts) != 2:
                continue
            try:
                start, stop = int(parts[0]), int(parts[1])
                with np.load(p) as z:
                    ok = len(z.files) > 0 and all(len(z[k]) == stop - start for k in z.files)
            except Exception:  # truncated zip, garbage bytes, ... (a bad chunk is recomputed)
                ok = False
            if not ok:
                p.unlink()  # cannot happen with atomic renames, but never trust a bad chunk
                continue
            ranges.append((start, stop))
        ranges.sort()
        kept: list[tuple[int, int]] = []
        for r in ranges:
            if kept and r[0] < kept[-1][1]:
                (self.path / self._name(*r)).unlink()  # overlaps an earlier chunk
                continue
            kept.append(r)
        return kept

    def remove(self) -> None:
        """Delete the journal (after the result file is complete) and release the lock."""
        shutil.rmtree(self.path, ignore_errors=True)
        self.close()


def flat_boxes(
    start: int, stop: int, shape: tuple[int, ...]
) -> list[tuple[tuple[int, ...], tuple[int, ...]]]:
    """Split the flat C-order range ``start … stop-1`` of an array of ``shape`` into boxes.

    Each box is ``(first, last + 1)`` per axis and covers a contiguous run of the flat range,
    in order; there are at most 2·ndim − 1 of them.

    Examples
    --------
    >>> flat_boxes(3, 9, (4, 3))
    [((1, 0), (3, 3))]
    >>> flat_boxes(2, 10, (4, 3))
    [((0, 2), (1, 3)), ((1, 0), (3, 3)), ((3, 0), (4, 1))]
    """
    if len(shape) == 1:
        return [((start,), (stop,))] if stop > start else []
    block = math.prod(shape[1:])
    i0, r0 = divmod(start, block)
    i1, r1 = divmod(stop, block)

    def within(i: int, a: int, b: int) -> list[tuple[tuple[int, ...], tuple[int, ...]]]:
        return [((i, *lo), (i + 1, *hi)) for lo, hi in flat_boxes(a, b, shape[1:])]

    if i0 == i1:
        return within(i0, r0, r1)
    out = []
    if r0:
        out += within(i0, r0, block)
        i0 += 1
    if i1 > i0:
        out.append(((i0, *(0,) * (len(shape) - 1)), (i1, *shape[1:])))
    if r1:
        out += within(i1, 0, r1)
    return out


def _write_flat(var: Any, grid_shape: tuple[int, ...], start: int, data: NDArray[Any]) -> None:
    """Write points ``start … start+len(data)-1`` (flat C order) into an N-D grid variable."""
    pos = 0
    for lo, hi in flat_boxes(start, start + len(data), grid_shape):
        box = tuple(h - lo_ for lo_, h in zip(lo, hi, strict=True))
        n = math.prod(box)
        sel = tuple(slice(a, b) for a, b in zip(lo, hi, strict=True))
        var[sel] = data[pos : pos + n].reshape(box + data.shape[1:])
        pos += n


def _chunks(shape: tuple[int, ...], itemsize: int) -> tuple[int, ...]:
    """HDF5 chunk shape of about CHUNK_BYTES that follows the C order of the grid.

    Trailing axes are kept whole as long as they fit, so the row-wise writes of
    :func:`_write_flat` fill whole chunks.

    Examples
    --------
    >>> _chunks((400, 250), 8), _chunks((400, 250, 3), 1), _chunks((10,), 8)
    ((131, 250), (349, 250, 3), (10,))
    """
    budget = max(CHUNK_BYTES // itemsize, 1)
    out = list(shape)
    for i in range(len(shape)):
        inner = math.prod(shape[i + 1 :])
        if inner * shape[i] <= budget:
            continue  # whole axis fits with everything after it
        out[:i] = [1] * i
        out[i] = max(1, min(shape[i], budget // max(inner, 1)))
        break
    return tuple(int(n) for n in out)


def _create(
    f: Any,
    name: str,
    dims: tuple[str, ...],
    dtype: np.dtype,
    attrs: Mapping[str, Any],
    shape: tuple[int, ...] | None = None,
) -> Any:
    # floats get a NaN _FillValue, as xarray writes them
    fill = np.nan if np.issubdtype(dtype, np.floating) else None
    if shape is None or 0 in shape:
        var = f.create_variable(name, dims, dtype=dtype, fillvalue=fill)
    else:
        # result arrays: compressed, and Fletcher-32 checksummed so that a damaged file is
        # reported when read instead of giving wrong numbers (netCDF-C reads both filters)
        var = f.create_variable(
            name,
            dims,
            dtype=dtype,
            fillvalue=fill,
            chunks=_chunks(shape, np.dtype(dtype).itemsize),
            compression="gzip",
            compression_opts=4,
            shuffle=True,
            fletcher32=True,
        )
    for k, v in attrs.items():
        var.attrs[k] = v
    return var


def write_result(
    out: str | os.PathLike[str],
    *,
    dims: tuple[str, ...],
    coords: Mapping[str, xr.Variable],
    chunks: Iterator[tuple[int, xr.Dataset]],
    attrs: Mapping[str, Any],
) -> None:
    """Stream chunk datasets (over the flat dim ``point``) into the NetCDF file ``out``.

    ``coords`` holds every coordinate of the final dataset (grid dims first); each chunk is a
    Dataset from :func:`toposweep.dataset.build_dataset` over ``point``, whose data variables
    define the schema. The file appears under its name only when complete.
    """
    path = Path(out)
    tmp = path.with_name(path.name + ".writing")
    grid_shape = tuple(coords[d].size for d in dims)
    # non-dimension coordinates are listed in "coordinates" attributes, as xarray does it
    aux = {k: set(v.dims) for k, v in coords.items() if k not in v.dims}
    listed: set[str] = set()
    start, first = next(chunks)
    # the layout (dimensions, dimension scales, attributes) by h5netcdf, as xarray writes it
    with h5netcdf.File(tmp, "w") as f:
        sizes = {d: coords[d].size for d in dims}
        sizes.update({d: n for d, n in first.sizes.items() if d != FLAT_DIM})
        f.dimensions = sizes
        for name, var in coords.items():
            v = _create(f, name, var.dims, var.dtype, var.attrs)
            v[...] = var.values
        for name, var in first.data_vars.items():
            vdims = tuple(dims) + tuple(d for d in var.dims if d != FLAT_DIM)
            own = sorted(k for k, kdims in aux.items() if kdims <= set(vdims))
            listed.update(own)
            extra = {"coordinates": " ".join(own)} if own else {}
            vshape = tuple(sizes[d] for d in vdims)
            _create(f, str(name), vdims, var.dtype, {**var.attrs, **extra}, vshape)
        for k, v in attrs.items():
            f.attrs[k] = v
        if set(aux) - listed:
            f.attrs["coordinates"] = " ".join(sorted(set(aux) - listed))
    # the data by plain h5py: many small hyperslab writes, each far cheaper this way
    with h5py.File(tmp, "r+") as h5:
        for at, chunk in itertools.chain([(start, first)], chunks):
            for name, var in chunk.data_vars.items():
                _write_flat(h5[str(name)], grid_shape, at, var.values)
    with open(tmp, "rb") as fh:
        os.fsync(fh.fileno())
    os.replace(tmp, path)
    _fsync_dir(path.parent)


def open_result(path: str | os.PathLike[str], *, load: bool = False) -> xr.Dataset:
    """Open a toposweep result file, with a clear :class:`StoreError` if it is not one.

    The data are read lazily unless ``load`` is set; then every array is read at once and
    checked against its Fletcher-32 checksum, so damage is reported here.

    Examples
    --------
    >>> open_result("no/such/file.nc")
    Traceback (most recent call last):
    ...
    toposweep.errors.StoreError: no/such/file.nc: no such file
    """
    p = Path(path)
    if not p.is_file():
        journal = journal_path(p)
        if journal.is_dir():
            n = sum(1 for c in journal.glob("chunk-*.npz"))
            raise StoreError(
                f"{p}: the run that writes it is unfinished ({n} chunk(s) kept in "
                f"{journal}); continue it with resume=True (command line: run --resume)"
            )
        raise StoreError(f"{p}: no such file")
    try:
        ds = xr.open_dataset(p, engine="h5netcdf")
    except Exception as exc:  # h5py/h5netcdf raise many types for broken files
        raise StoreError(
            f"{p}: not a readable NetCDF4/HDF5 file ({type(exc).__name__}: {exc}); "
            "it may be truncated or corrupt — recompute it"
        ) from None
    missing = [v for v in ("nu0", "phase", "undefined_reason") if v not in ds.variables]
    if "toposweep_version" not in ds.attrs or "model" not in ds.attrs or missing:
        ds.close()
        raise StoreError(f"{p}: not a toposweep result file (no toposweep variables/attributes)")
    if load:
        try:
            ds.load()
        except Exception as exc:  # a checksum or decompression failure inside HDF5
            ds.close()
            raise StoreError(
                f"{p}: damaged data ({type(exc).__name__}: {exc}); recompute the file"
            ) from None
    return ds


def read_identity(ds: xr.Dataset) -> dict[str, Any] | None:
    """The run identity recorded in a result file, or None for files without one."""
    text = ds.attrs.get(IDENTITY_ATTR)
    try:
        found = json.loads(text) if isinstance(text, str) else None
    except ValueError:
        return None
    return found if isinstance(found, dict) else None
