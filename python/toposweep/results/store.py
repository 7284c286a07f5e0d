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

import errno
import gc
import itertools
import json
import math
import os
import shutil
import sys
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

from ..errors import StoreError
from ..file_digest import DigestError, append_digest, verify

__all__ = [
    "Journal",
    "check_output",
    "finished_result",
    "identity_differences",
    "malformed",
    "journal_path",
    "missing_ranges",
    "open_result",
    "other_run_message",
    "read_identity",
    "write_result",
]

IDENTITY_FILE = "run.json"
#: names, dtypes and per-point shapes of a chunk's arrays, written with the first chunk
SCHEMA_FILE = "schema.json"
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


#: identity keys in the order their differences are named (the telling ones first)
_KEY_ORDER = ("phase_map", "model", "coefficients", "filling", "grid", "fixed", "inversion")
#: differences named in a refusal; the rest are counted
FIRST_DIFFERENCES = 3


def identity_differences(expected: Mapping[str, Any], found: Mapping[str, Any]) -> list[str]:
    """Readable list of what differs between two run identities (empty: same run).

    The most telling differences come first: the kind of run (sweep or phase map), the model,
    the coefficients mapping, the filling, the grid, then parameters and sampling.

    Examples
    --------
    >>> identity_differences({"filling": 2, "grid": [["m", 5, "a"], ["t", 3, "b"]]},
    ...                      {"filling": 4, "grid": [["t", 3, "b"], ["m", 5, "a"]]})
    ... # doctest: +NORMALIZE_WHITESPACE
    ['filling: 2 now, 4 in the file', "grid order: ['m', 't'] now, ['t', 'm'] in the file
    (the same parameters in another order lay the points out differently; give the grid in
    the file's order)"]
    >>> identity_differences({"phase_map": {"coarse_step": 8}}, {})
    ['kind of run: a phase map now, a uniform sweep in the file']
    """

    def rank(key: str) -> tuple[int, bool, str]:
        return (
            _KEY_ORDER.index(key) if key in _KEY_ORDER else len(_KEY_ORDER),
            key == "numbers",
            key,
        )

    out = []
    keys = sorted(set(expected) | set(found), key=rank)
    for key in keys:
        a, b = expected.get(key), found.get(key)
        if a == b:
            continue
        if key == "phase_map" and (a is None or b is None):
            kinds = ("a phase map", "a uniform sweep")
            now, then = kinds if a is not None else kinds[::-1]
            out.append(f"kind of run: {now} now, {then} in the file")
        elif key in ("phase_map", "sampling") and isinstance(a, dict) and isinstance(b, dict):
            what = "phase-map option" if key == "phase_map" else "sampling"
            for opt in sorted(set(a) | set(b)):
                if a.get(opt) != b.get(opt):
                    out.append(f"{what} {opt}: {a.get(opt)!r} now, {b.get(opt)!r} in the file")
        elif key == "grid":
            out.extend(_grid_differences(a, b))
        elif key == "fixed" and isinstance(a, dict) and isinstance(b, dict):
            for name in sorted(set(a) | set(b)):
                if a.get(name) != b.get(name):
                    now = "not fixed" if name not in a else a[name]
                    then = "not fixed" if name not in b else b[name]
                    out.append(f"parameter {name}: {now} now, {then} in the file")
        elif key == "model":
            out.append("model: a different model (terms, hoppings, symmetry or defaults)")
        elif key == "numbers":
            if expected.get("model") != found.get("model"):
                continue  # (a different model gives other numbers anyway)
            out.append(
                "model numbers: H(κ) or the coefficients mapping now give other values at the "
                "same grid points (its code or a file it reads changed, though its name did "
                "not; restore the original code)"
            )
        elif key == "inversion":
            out.append("inversion matrix: a different one now")
        else:
            out.append(f"{key}: {a!r} now, {b!r} in the file")
    return out


def other_run_message(out: str, expected: Mapping[str, Any], found: Any, what: str) -> str:
    """One line refusing to reuse ``what`` of ``out``, naming the first differences.

    ``found`` is the identity recorded with it (None: a file without one).

    Examples
    --------
    >>> other_run_message("m.nc", {"filling": 2}, {"filling": 4}, "the finished file")
    ... # doctest: +NORMALIZE_WHITESPACE
    'cannot reuse m.nc: the finished file was made by a different run — filling: 2 now, 4 in
    the file. Give the settings it was made with, or start over with overwrite=True (command
    line: --overwrite).'
    """
    diff = identity_differences(expected, found) if isinstance(found, dict) else []
    if not diff:
        diff = ["it records no run identity (an older or a foreign file)"]
    named = "; ".join(diff[:FIRST_DIFFERENCES])
    if len(diff) > FIRST_DIFFERENCES:
        named += f"; and {len(diff) - FIRST_DIFFERENCES} more"
    verb = "resume" if "interrupted" in what else "reuse"
    return (
        f"cannot {verb} {out}: {what} was made by a different run — {named}. Give the "
        "settings it was made with, or start over with overwrite=True (command line: "
        "--overwrite)."
    )


def finished_result(out: str, identity: Mapping[str, Any]) -> xr.Dataset:
    """The finished result file ``out``, reused by ``resume=True`` only if it is this run's.

    Its recorded identity (model, grid, filling, fixed parameters, sampling, coefficients,
    phase-map options) must equal ``identity``; otherwise a :class:`StoreError` in one line
    names the first differences.
    """
    ds = open_result(out)
    found = read_identity(ds)
    if found != identity:
        ds.close()
        raise StoreError(other_run_message(out, identity, found, "the finished file"))
    return ds


def _grid_axes(grid: Any) -> list[tuple[str, Any, Any]] | None:
    """``[(name, count, digest), ...]`` of a recorded grid, in its order (None: unreadable)."""
    if isinstance(grid, dict):  # written before the order was recorded: order unknown
        return None
    try:
        return [(str(d), n, h) for d, n, h in grid]
    except (TypeError, ValueError):
        return None


def _grid_differences(now: Any, found: Any) -> list[str]:
    """What differs between two recorded grids, axis order included."""
    a, b = _grid_axes(now), _grid_axes(found)
    if a is None or b is None:
        return ["grid: recorded in an older form without the order of its axes"]
    names_a, names_b = [x[0] for x in a], [x[0] for x in b]
    if names_a != names_b:
        if sorted(names_a) == sorted(names_b):
            return [
                f"grid order: {names_a} now, {names_b} in the file (the same parameters in "
                "another order lay the points out differently; give the grid in the file's order)"
            ]
        return [f"grid parameters: {names_a} now, {names_b} in the file"]
    out = []
    for (d, n, h), (_, m, g) in zip(a, b, strict=True):
        if (n, h) != (m, g):
            out.append(
                f"grid values of {d!r}: {n} values now, {m} in the file"
                + (" (same count, different values)" if n == m else "")
            )
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
                    if identity_differences(identity, found):
                        raise StoreError(
                            other_run_message(
                                os.fspath(out), identity, found, "the interrupted run's journal"
                            )
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

    @staticmethod
    def _schema(arrays: Mapping[str, NDArray[Any]]) -> dict[str, list[Any]]:
        """``{name: [dtype, per-point shape]}`` of a chunk's arrays."""
        return {k: [np.asarray(v).dtype.str, list(np.shape(v)[1:])] for k, v in arrays.items()}

    def save(self, start: int, stop: int, raw: Mapping[str, NDArray[Any]]) -> None:
        """Store the core's flat arrays of points ``start … stop-1`` (atomic).

        The first chunk also records the run's schema (array names, dtypes, per-point shapes),
        before the chunk itself, so no chunk exists without a schema to check it against.
        """
        arrays = {k: np.asarray(v) for k, v in raw.items()}
        name = self.path / self._name(start, stop)
        try:
            if not (self.path / SCHEMA_FILE).is_file():
                text = json.dumps(self._schema(arrays), sort_keys=True).encode()
                _atomic_write(self.path / SCHEMA_FILE, lambda fh: fh.write(text))
            _atomic_write(name, lambda fh: np.savez(fh, **arrays))
        except OSError as exc:  # disk full, file size limit, quota: say where and what to do
            for tmp in (name, self.path / SCHEMA_FILE):
                tmp.with_name(tmp.name + ".tmp").unlink(missing_ok=True)
            raise StoreError(
                f"cannot save points {start}…{stop - 1} in the journal {self.path}: "
                f"{exc.strerror or exc}; the chunks finished before are kept — free space (or "
                "raise the file size limit) and run again with resume=True (command line: "
                "run --resume)"
            ) from None

    def load(self, start: int, stop: int) -> dict[str, NDArray[Any]]:
        """Arrays of one finished chunk."""
        with np.load(self.path / self._name(start, stop)) as z:
            return {k: z[k] for k in z.files}

    def _read_schema(self) -> dict[str, list[Any]] | None:
        try:
            found = json.loads((self.path / SCHEMA_FILE).read_text())
        except (OSError, ValueError):
            return None
        return found if isinstance(found, dict) else None

    def _chunk_ok(self, p: Path, start: int, stop: int, total: int, schema: Any) -> bool:
        """Whether chunk file ``p`` holds points ``start … stop-1`` as the run's schema says."""
        if not (0 <= start < stop <= total) or not p.is_file() or schema is None:
            return False
        try:
            with np.load(p, allow_pickle=False) as z:
                if sorted(z.files) != sorted(schema):
                    return False
                for k in z.files:
                    a = z[k]
                    dtype, shape = schema[k]
                    if a.dtype.str != dtype or list(a.shape) != [stop - start, *shape]:
                        return False
        except Exception:  # truncated zip, garbage bytes, pickled objects, a bad schema, ...
            return False
        return True

    def finished(self, total: int | None = None) -> list[tuple[int, int]]:
        """Sorted, disjoint ranges of finished chunks of a grid of ``total`` points.

        Every chunk is checked against the run's schema (the arrays, dtypes and per-point
        shapes of the first chunk saved): a chunk that fails — unreadable, an array missing or
        of the wrong shape, a range beyond the grid, a directory in its place — is removed and
        so computed again; so are stray temporary files.
        """
        total = (1 << 62) if total is None else total
        schema = self._read_schema()
        ranges = []
        for p in self.path.iterdir():
            if p.name.endswith(".tmp"):
                _remove(p)  # a write that a kill interrupted
                continue
            if p.name in (LOCK_FILE, IDENTITY_FILE, SCHEMA_FILE):
                continue
            parts = p.name.removeprefix("chunk-").removesuffix(".npz").split("-")
            if not p.name.startswith("chunk-") or len(parts) != 2:
                continue
            try:
                start, stop = int(parts[0]), int(parts[1])
            except ValueError:
                start = stop = -1
            if not self._chunk_ok(p, start, stop, total, schema):
                _remove(p)  # cannot happen with atomic renames, but never trust a bad chunk
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


def check_output(out: str | os.PathLike[str], *, resume: bool, overwrite: bool) -> None:
    """Refuse an output path that cannot work, before any point is computed.

    A directory, a file in a folder that does not exist, or — without ``resume`` or
    ``overwrite`` — an existing file or an interrupted run's journal.

    Examples
    --------
    >>> check_output("no/such/folder/map.nc", resume=False, overwrite=False)
    ... # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    toposweep.errors.StoreError: the folder no/such/folder of out=... does not exist; ...
    """
    if resume and overwrite:
        raise StoreError("give resume=True or overwrite=True, not both")
    p = Path(os.fspath(out))
    if p.is_dir():
        raise StoreError(
            f"out={os.fspath(out)!r} is a directory; give a file name such as {p / 'map.nc'}"
        )
    folder = p.parent
    if not folder.is_dir():
        raise StoreError(
            f"the folder {folder} of out={os.fspath(out)!r} does not exist; create it first"
        )
    if resume or overwrite:
        return
    journal = journal_path(p)
    if journal.is_dir():
        raise StoreError(
            f"an interrupted run's journal {journal} exists; resume=True continues it, "
            "overwrite=True starts over"
        )
    if p.exists():
        raise StoreError(
            f"{p} exists; resume=True returns it (if it is this run's), overwrite=True replaces it"
        )


def _remove(p: Path) -> None:
    """Delete a file or a directory tree (whatever a damaged journal holds under a name)."""
    if p.is_dir() and not p.is_symlink():
        shutil.rmtree(p, ignore_errors=True)
    else:
        p.unlink(missing_ok=True)


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
    if shape is None or 0 in shape or len(shape) == 0 or np.dtype(dtype).kind not in "biuf":
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
    Dataset from :func:`toposweep.results.dataset.build_dataset` over ``point``, whose data
    variables define the schema. The file appears under its name only when complete.
    """
    path = Path(out)
    tmp = path.with_name(path.name + ".writing")
    why = None
    hook = sys.unraisablehook
    # HDF5 objects that fail to write report it as they are released, one traceback each:
    # the failure is reported once, below
    sys.unraisablehook = _quiet_about_hdf5(hook)
    excepthook = sys.excepthook
    sys.excepthook = _quiet_about_hdf5_errors(excepthook)
    try:
        _write_file(tmp, dims=dims, coords=coords, chunks=chunks, attrs=attrs)
        append_digest(tmp)  # the whole file's digest, checked before HDF5 reads it
        with open(tmp, "rb") as fh:
            os.fsync(fh.fileno())
    except (OSError, RuntimeError) as exc:  # disk full, size limit, quota, I/O error
        why = _reason(exc)
    except BaseException:
        _discard(tmp)
        raise
    finally:
        gc.collect()  # (the failed writer's objects, while their reports are quiet)
        sys.unraisablehook = hook
        sys.excepthook = excepthook
    if why is not None:
        _discard(tmp)
        raise StoreError(
            f"cannot write {path}: {why}; nothing was written under its name, and an "
            "interrupted run's finished chunks stay in its journal — free space (or raise the "
            "file size limit) and run again with resume=True (command line: run --resume)"
        )
    os.replace(tmp, path)
    _fsync_dir(path.parent)


def _quiet_about_hdf5(hook: Callable[[Any], None]) -> Callable[[Any], None]:
    """An unraisable-exception hook that passes on everything but h5py's own objects."""

    def quiet(unraisable: Any) -> None:
        if "h5py" not in repr(getattr(unraisable, "object", None)):
            hook(unraisable)

    return quiet


def _discard(tmp: Path) -> None:
    """Delete the temporary file of a failed write."""
    try:
        tmp.unlink(missing_ok=True)
    except OSError:  # pragma: no cover - nothing more to do
        pass


def _quiet_about_hdf5_errors(hook: Callable[..., Any]) -> Callable[..., Any]:
    """An excepthook that passes on everything but h5py's failures to release an object.

    (h5py prints those through the excepthook before it reports them as unraisable.)
    """

    def quiet(kind: type[BaseException], value: BaseException, tb: Any) -> None:
        if not (kind is RuntimeError and "id ref count" in str(value)):
            hook(kind, value, tb)

    return quiet


def _reason(exc: BaseException) -> str:
    """The operating system's reason for a failed write, in a few words.

    HDF5's messages are long (a time stamp, buffer addresses); the errno they carry says it.

    Examples
    --------
    >>> _reason(RuntimeError("Can't write image (file write failed: errno = 28, ...)"))
    'No space left on device'
    """
    import re

    text = str(exc)
    found = re.search(r"errno = (\d+)", text)
    if isinstance(exc, OSError) and exc.strerror and not found:
        return f"{exc.strerror}" + (f" ({exc.filename})" if exc.filename else "")
    return os.strerror(int(found.group(1))) if found else text


def _reserve(tmp: Path, size: int) -> None:
    """Make sure a file of ``size`` bytes fits before HDF5 writes one, or refuse clearly.

    HDF5 does not recover from a write the disk refuses: it leaves objects it cannot close,
    and crashes when the interpreter exits. So the room is checked first: against the file
    size limit (``ulimit -f``), and on disk by allocating ``size`` bytes to ``tmp`` (which
    HDF5 then truncates and rewrites). ``size`` is the uncompressed size, an upper bound.
    """
    import resource

    limit = resource.getrlimit(resource.RLIMIT_FSIZE)[0]
    if limit != resource.RLIM_INFINITY and size > limit:
        raise OSError(
            errno.EFBIG,
            f"the file may need up to {size / 1e6:.1f} MB, more than the file size limit "
            f"(ulimit -f) of {limit / 1e6:.1f} MB",
        )
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
    try:
        os.posix_fallocate(fd, 0, size)
    except OSError as exc:
        if exc.errno in (errno.ENOSPC, errno.EDQUOT, errno.EFBIG):
            free = shutil.disk_usage(tmp.parent).free
            raise OSError(
                exc.errno,
                f"the file may need up to {size / 1e6:.1f} MB, {free / 1e6:.1f} MB are free",
            ) from None
        # (a file system without allocation: HDF5's own errors are the only check)
    finally:
        os.close(fd)


def _descriptor(h5: Any) -> int | None:
    """The operating system's descriptor of an open h5py file (None if HDF5 does not say)."""
    try:
        return int(h5.id.get_vfd_handle())
    except Exception:  # noqa: BLE001 - another HDF5 driver
        return None


def _abandon(f: Any, fd: int | None) -> None:
    """Let go of an h5netcdf or h5py file whose write failed, without another write.

    After a failed write (a full disk) h5netcdf's ``close`` writes again, fails again, and
    stays open; when the object is collected later, or at exit, it tries once more on a file
    HDF5 no longer handles, and the interpreter crashes. So it is marked closed here, and the
    HDF5 file under it closed while it still can be.
    """
    h5 = getattr(f, "_File__h5file", f)  # (h5netcdf keeps its h5py file under this name)
    if isinstance(f, h5netcdf.File):
        f._closed = True
    if h5 is None:
        return
    if fd is not None:
        # HDF5 still holds data it must write before it lets the file go, and the disk
        # refuses it: its file descriptor (taken while the file was sound) is pointed at
        # /dev/null, so the close succeeds, and HDF5 does not try again, and crash, at exit;
        # the file is deleted anyway
        sink = os.open(os.devnull, os.O_RDWR)
        try:
            os.dup2(sink, fd)
        finally:
            os.close(sink)
    try:
        h5.close()
    except Exception:  # noqa: BLE001 - the file is being given up anyway
        pass


def _write_file(
    tmp: Path,
    *,
    dims: tuple[str, ...],
    coords: Mapping[str, xr.Variable],
    chunks: Iterator[tuple[int, xr.Dataset]],
    attrs: Mapping[str, Any],
) -> None:
    """The HDF5 part of :func:`write_result`: layout by h5netcdf, data by h5py, into ``tmp``."""
    grid_shape = tuple(coords[d].size for d in dims)
    # non-dimension coordinates are listed in "coordinates" attributes, as xarray does it
    aux = {k: set(v.dims) for k, v in coords.items() if k not in v.dims}
    listed: set[str] = set()
    start, first = next(chunks)
    points = math.prod(grid_shape)
    bound = sum(
        v.values.nbytes // max(v.shape[0], 1) * points for v in first.data_vars.values()
    ) + sum(v.nbytes for v in coords.values())
    # + chunk indices, object headers and attributes (~2-6 kB per variable in practice)
    _reserve(tmp, int(bound * 1.05) + (64 << 10) + (8 << 10) * len(first.data_vars))
    # the layout (dimensions, dimension scales, attributes) by h5netcdf, as xarray writes it
    f = h5netcdf.File(tmp, "w")
    fd = _descriptor(f._h5file)
    try:
        sizes = {d: coords[d].size for d in dims}
        sizes.update({d: n for d, n in first.sizes.items() if d != FLAT_DIM})
        f.dimensions = sizes
        for name, var in coords.items():  # checksummed too (every numeric array is)
            v = _create(f, name, var.dims, var.dtype, var.attrs, var.shape)
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
        f.close()
    except BaseException:
        _abandon(f, fd)
        raise
    # the data by plain h5py: many small hyperslab writes, each far cheaper this way
    h5 = h5py.File(tmp, "r+")
    fd = _descriptor(h5)
    # every dataset opened once and kept: a dataset's close writes its cached chunks, and a
    # close that fails in a destructor cannot be reported (nor undone); flush() reports it
    datasets = {str(name): h5[str(name)] for name in first.data_vars}
    try:
        for at, chunk in itertools.chain([(start, first)], chunks):
            for name, var in chunk.data_vars.items():
                _write_flat(datasets[str(name)], grid_shape, at, var.values)
        h5.flush()
        datasets.clear()
        h5.close()
    except BaseException:
        _abandon(h5, fd)  # (before the datasets are let go: their closes then succeed)
        datasets.clear()
        raise


def open_result(
    path: str | os.PathLike[str], *, load: bool = False, verify_digest: bool = True
) -> xr.Dataset:
    """Open a toposweep result file, with a clear :class:`StoreError` if it is not one.

    First the digest of the whole file (:mod:`toposweep.file_digest`) is checked, unless
    ``verify_digest`` is False: a file changed in any byte since toposweep wrote it is refused
    before HDF5 parses it. The data are read lazily unless ``load`` is set; then every array is
    read at once and checked against its Fletcher-32 checksum as well.

    Examples
    --------
    >>> open_result("no/such/file.nc")
    Traceback (most recent call last):
    ...
    toposweep.errors.StoreError: no/such/file.nc: no such file
    """
    p = Path(path)
    if p.is_dir():
        raise StoreError(f"{p}: is a directory, not a result file")
    if not p.is_file():
        journal = journal_path(p)
        if journal.is_dir():
            n = sum(1 for c in journal.glob("chunk-*.npz"))
            raise StoreError(
                f"{p}: the run that writes it is unfinished ({n} chunk(s) kept in "
                f"{journal}); continue it with resume=True (command line: run --resume)"
            )
        raise StoreError(f"{p}: no such file")
    if verify_digest:
        try:
            verify(p)  # before HDF5 parses anything: damaged metadata can make it hang
        except DigestError as exc:
            raise StoreError(
                f"{p}: corrupt — damaged data, or changed since toposweep wrote it: {exc}; "
                "recompute it (open_result(..., verify_digest=False) reads it unchecked)"
            ) from None
        except OSError as exc:
            raise StoreError(f"{p}: cannot read ({exc.strerror or exc})") from None
    try:
        # (phony_dims given: a plain HDF5 file is read without a warning before our message)
        ds = xr.open_dataset(p, engine="h5netcdf", phony_dims="access")
    except Exception as exc:  # h5py/h5netcdf raise many types for broken files
        raise StoreError(
            f"{p}: not a readable NetCDF4/HDF5 file ({type(exc).__name__}: {exc}); "
            "it may be truncated or corrupt — recompute it"
        ) from None
    missing = [v for v in ("nu0", "phase", "undefined_reason") if v not in ds.variables]
    if "toposweep_version" not in ds.attrs or "model" not in ds.attrs or missing:
        ds.close()
        raise StoreError(f"{p}: not a toposweep result file (no toposweep variables/attributes)")
    wrong = malformed(ds)
    if wrong is not None:
        ds.close()
        raise StoreError(
            f"{p}: not a valid toposweep result file: {wrong} (changed since toposweep wrote "
            "it, e.g. by an HDF5 tool); recompute it"
        )
    if load:
        try:
            ds.load()
        except Exception as exc:  # a checksum or decompression failure inside HDF5
            ds.close()
            raise StoreError(
                f"{p}: damaged data ({type(exc).__name__}: {exc}); recompute the file"
            ) from None
    return ds


def malformed(ds: xr.Dataset) -> str | None:
    """What is wrong with the attributes and variables toposweep reads from a file, or None.

    A file without its digest (changed by an HDF5 tool) is read unverified; these are the
    values the summary, the plots and a resume rely on.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"gap_direct": ((), 1.0), "phase": ((), 0)},
    ...                 attrs={"model": "null", "filling": 2})
    >>> malformed(ds)
    "attribute 'model' is not a JSON object"
    """
    try:
        model = json.loads(ds.attrs["model"])
    except (TypeError, ValueError):
        model = None
    if not isinstance(model, dict):
        return "attribute 'model' is not a JSON object"
    filling = ds.attrs.get("filling")
    if (
        isinstance(filling, bool | np.bool_)
        or not isinstance(filling, int | np.integer)
        or filling < 1
    ):
        return f"attribute 'filling' is not a positive integer ({filling!r})"
    if "sampling" in ds.attrs:
        try:
            sampling = json.loads(ds.attrs["sampling"])
        except (TypeError, ValueError):
            sampling = None
        if not isinstance(sampling, dict):
            return "attribute 'sampling' is not a JSON object"
    if "gap_direct" not in ds.variables:
        return "variable 'gap_direct' is missing"
    for d in ds.phase.dims:
        if d in ds.coords:
            values = np.asarray(ds[d].values)
            if values.dtype.kind not in "fiu" or not np.isfinite(values).all():
                return f"coordinate {d!r} holds values that are not finite numbers"
    return None


def read_identity(ds: xr.Dataset) -> dict[str, Any] | None:
    """The run identity recorded in a result file, or None for files without one."""
    text = ds.attrs.get(IDENTITY_ATTR)
    try:
        found = json.loads(text) if isinstance(text, str) else None
    except ValueError:
        return None
    return found if isinstance(found, dict) else None
