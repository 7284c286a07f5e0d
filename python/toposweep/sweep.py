"""Parameter sweeps: Z2 indices over a grid of model parameters, in chunks, optionally on disk.

Each chunk of points is ONE call into the Rust core, which spreads the points and their κ lines
over the cores with the GIL released. Between chunks the sweep saves what finished (to the
journal of :mod:`toposweep.results.store` when ``out=`` is given), updates the progress bar and
checks for Ctrl-C, so an interruption loses at most the chunk that was running.
"""

from __future__ import annotations

import json
import os
import signal
import threading
import time
from collections.abc import Iterator, Mapping
from types import FrameType
from typing import Any

import numpy as np
import xarray as xr
from numpy.typing import ArrayLike, NDArray

from .errors import ParameterError, StoreError
from .evaluation import prepare_request, run_points
from .limits import check_grid
from .model import Model
from .progress import ProgressBar
from .results.dataset import build_dataset
from .results.store import (
    FLAT_DIM,
    IDENTITY_ATTR,
    Journal,
    check_output,
    finished_result,
    journal_path,
    missing_ranges,
    write_result,
)
from .sampling import Sampling
from .sweep_executor import remote_for
from .sweep_plan import (
    TERM_VALUES,
    Coefficients,
    SweepPlan,
    callable_name,
    check_names,
    make_plan,
)

__all__ = ["sweep", "SweepInterrupted"]

#: aim for chunks of about this many seconds: short enough for a prompt Ctrl-C and a lively
#: progress bar, long enough that the per-call overhead does not matter
CHUNK_SECONDS = 1.0
MAX_CHUNK = 4096
#: with a coefficients mapping, the model's term values are kept per point as ``term_<name>``
TERM_PREFIX = "term_"
#: points per write when the journal is streamed into the result file (~100 bytes each)
WRITE_BLOCK = 1 << 14


class SweepInterrupted(KeyboardInterrupt):
    """Ctrl-C stopped a sweep between chunks; finished chunks were kept.

    Attributes
    ----------
    done, total : int
        Points finished and points in the grid.
    out : str or None
        The result file being written; its journal ``<out>.partial`` holds the finished
        chunks and ``resume=True`` continues the run.
    partial : xarray.Dataset or None
        Without ``out``: the finished points over a flat ``point`` dimension, with the grid
        values as coordinates.
    """

    def __init__(
        self, message: str, *, done: int, total: int, out: str | None, partial: xr.Dataset | None
    ) -> None:
        super().__init__(message)
        self.done, self.total, self.out, self.partial = done, total, out, partial


class _InterruptFlag:
    """Turns the first Ctrl-C into a request to stop after the running chunk."""

    def __init__(self) -> None:
        self.requested = False
        self._previous: Any = None
        self._installed = False

    def _handler(self, signum: int, frame: FrameType | None) -> None:
        if self.requested:  # a second Ctrl-C: stop at once (finished chunks are safe anyway)
            raise KeyboardInterrupt
        self.requested = True

    def __enter__(self) -> _InterruptFlag:
        if threading.current_thread() is threading.main_thread():
            self._previous = signal.signal(signal.SIGINT, self._handler)
            self._installed = True
        return self

    def __exit__(self, *exc: object) -> None:
        if self._installed:
            signal.signal(signal.SIGINT, self._previous)


def _attrs(plan: SweepPlan) -> dict[str, Any]:
    extra: dict[str, Any] = {
        "grid": json.dumps({d: len(plan.coords[d]) for d in plan.dims}),
        IDENTITY_ATTR: json.dumps(plan.identity, sort_keys=True),
    }
    if plan.coefficients is not None:
        extra["coefficients"] = callable_name(plan.coefficients)
    return extra


def assemble(
    plan: SweepPlan,
    raw: Mapping[str, NDArray[Any]],
    dims: tuple[str, ...],
    coords: Mapping[str, NDArray[Any]],
) -> xr.Dataset:
    """CF dataset of the core's flat arrays over ``dims``, with the sweep's coordinate attrs."""
    req = plan.request
    ds = build_dataset(
        req.model,
        raw,
        dims=dims,
        coords=coords,
        fixed=plan.fixed,
        filling=req.filling,
        sampling=req.sampling,
        parity_known=req.inversion is not None,
        extra_attrs=_attrs(plan),
    )
    for d in plan.dims:
        if d in ds.coords:
            ds[d].attrs = dict(plan.coord_attrs[d])
    if plan.coefficients is not None:  # fixed values are the user's own variables
        for k in plan.fixed:
            ds[k].attrs = {"long_name": k, "units": "1"}
        model = req.model
        shape = tuple(len(coords[d]) for d in dims)
        for j, term in enumerate(model.parameters):
            ds[TERM_PREFIX + term] = (
                dims,
                np.asarray(raw[TERM_VALUES])[:, j].reshape(shape),
                {
                    "long_name": f"model term {term} given by the coefficients mapping",
                    "units": model.describe(term)["units"],
                },
            )
    return ds


def _flat_chunk(plan: SweepPlan, start: int, raw: Mapping[str, NDArray[Any]]) -> xr.Dataset:
    n = len(next(iter(raw.values())))
    return assemble(plan, raw, (FLAT_DIM,), {FLAT_DIM: np.arange(start, start + n)})


def _concat(raws: list[dict[str, NDArray[Any]]]) -> dict[str, NDArray[Any]]:
    return {k: np.concatenate([r[k] for r in raws]) for k in raws[0]}


def _run(
    plan: SweepPlan,
    todo: list[tuple[int, int]],
    save: Any,
    bar: ProgressBar,
    chunk_size: int | None,
    flag: _InterruptFlag,
    remote: Any = None,
) -> bool:
    """Evaluate the flat ranges ``todo`` chunk by chunk; False if Ctrl-C stopped it."""
    if remote is not None:  # chunks as tasks of an executor (sweep_executor.Remote)
        return bool(remote.run(plan, todo, save, bar, chunk_size, flag))
    workers = plan.request.threads or os.cpu_count() or 1
    size = chunk_size or max(8, 4 * workers)
    first = True
    for lo, hi in todo:
        start = lo
        while start < hi:
            stop = min(hi, start + size)
            t0 = time.perf_counter()
            points = plan.points(start, stop)
            raw = run_points(plan.request, points)
            if first:
                check_names(plan, raw)
                first = False
            if plan.coefficients is not None:  # keep the model's term values of every point
                terms = plan.request.model.parameters
                raw[TERM_VALUES] = np.array([[p[t] for t in terms] for p in points], float)
            save(start, stop, raw)
            bar.update(stop - start, undefined=int(np.count_nonzero(raw["nu0"] < 0)))
            if chunk_size is None:  # next chunk sized to last about CHUNK_SECONDS
                per_point = max((time.perf_counter() - t0) / (stop - start), 1e-7)
                size = int(min(MAX_CHUNK, max(workers, CHUNK_SECONDS / per_point)))
            start = stop
            if flag.requested:
                return False
    return True


def sweep(
    model: Model,
    grid: Mapping[str, ArrayLike],
    filling: int,
    *,
    params: Mapping[str, float] | None = None,
    coefficients: Coefficients | None = None,
    inversion: ArrayLike | None = None,
    out: str | os.PathLike[str] | None = None,
    resume: bool = False,
    overwrite: bool = False,
    progress: bool = True,
    threads: int | None = None,
    chunk_size: int | None = None,
    executor: Any = None,
    **sampling: Any,
) -> xr.Dataset:
    """Z2 indices, gaps and diagnostics at every point of a parameter grid.

    Parameters
    ----------
    model : TightBinding or CallableModel
        A 2D or 3D time-reversal-invariant model.
    grid : dict
        ``{name: 1-D values}``; the dataset's dims follow this order (C order of evaluation).
        Values may be an ``xarray.DataArray`` whose ``long_name``/``units`` attrs label the
        coordinate; otherwise the model's ``parameter_info`` does.
    filling : int
        Number of occupied bands.
    params : dict, optional
        Values of the parameters that are not swept (the rest: ``model.defaults``). Stored as
        scalar coordinates.
    coefficients : callable, optional
        ``coefficients(point) -> {term: value}`` maps the user's own variables (grid names and
        ``params``) onto model terms, e.g. hoppings renormalised by a mean-field factor. Terms
        it does not return take the model defaults.
    inversion : array (norb, norb), optional
        Inversion matrix for the Fu–Kane parity cross-check (default: the model's).
    out : path, optional
        NetCDF4/HDF5 file to write. Finished chunks are journalled in ``<out>.partial/`` as
        they finish, then streamed into ``out``; the result is returned opened lazily from it.
    resume : bool
        Continue an interrupted run writing ``out`` (or return ``out`` if it is complete);
        refuses with :class:`~toposweep.StoreError` if model (its numbers included), grid
        (its order included), filling, parameters or sampling differ.
    overwrite : bool
        Replace an existing ``out`` (or start an interrupted run's journal over). Without
        ``resume`` or ``overwrite`` an existing ``out`` or journal is refused, as the command
        line does.
    progress : bool
        Draw a progress bar on stderr (only when stderr is a terminal).
    threads : int, optional
        Worker threads of the core, as for :func:`toposweep.invariants` (default: one per
        core). ``threads=1`` runs on the calling thread: give it to each process of a pool.
    chunk_size : int, optional
        Points per core call (default: adapted so a chunk takes about a second, or about two
        seconds per task on an executor).
    executor : dask.distributed.Client, concurrent.futures.Executor or str, optional
        Run the chunks as tasks elsewhere: a Dask client, any ``Executor`` (e.g. a
        ``ProcessPoolExecutor``), or a spec — ``"local:N"`` (a Dask cluster of N one-thread
        worker processes on this machine), ``"processes:N"`` (a process pool toposweep
        rebuilds if a process dies), a scheduler address. The model reaches each worker once;
        each task runs the core on ``threads`` threads (default: its share of its host's
        cores); this process keeps the journal and writes the file as without one. See
        docs/cluster.md.
    **sampling
        ``loop_points``, ``lines``, ``max_lines``, ``step_limit``, ``gap_floor``,
        ``gap_points``; see :class:`toposweep.Sampling`.

    Returns
    -------
    xarray.Dataset
        The variables of :func:`toposweep.invariants` over the grid dims.

    Raises
    ------
    SweepInterrupted
        On Ctrl-C, after the running chunk finished and was kept.

    Examples
    --------
    >>> import numpy as np, toposweep as ts
    >>> ds = ts.sweep(ts.models.bhz(), {"mass": [-3.0, -1.0, 1.0, 3.0]}, filling=2)
    >>> ds.nu0.values.tolist(), ds.phase.dims
    ([0, 1, 1, 0], ('mass',))
    """
    samp = Sampling.from_options(**sampling)
    req = prepare_request(model, filling, inversion=inversion, sampling=samp, threads=threads)
    if chunk_size is not None and (
        isinstance(chunk_size, bool) or not isinstance(chunk_size, int) or chunk_size < 1
    ):
        raise ParameterError(f"chunk_size must be a positive integer or None, got {chunk_size!r}")
    if out is not None:  # before any work: a bad output path is found now, not at the end
        check_output(out, resume=resume, overwrite=overwrite)
    plan = make_plan(req, grid, params=params, coefficients=coefficients)
    check_grid(model, samp, req.threads, plan.size, out)

    with remote_for(executor, out) as remote:
        if out is None:
            return _sweep_in_memory(plan, progress, chunk_size, remote)
        return _sweep_to_file(plan, os.fspath(out), resume, progress, chunk_size, remote)


def _sweep_in_memory(
    plan: SweepPlan, progress: bool, chunk_size: int | None, remote: Any = None
) -> xr.Dataset:
    parts: list[tuple[int, dict[str, NDArray[Any]]]] = []
    bar = ProgressBar(plan.size, enabled=progress)
    with _InterruptFlag() as flag:
        complete = _run(
            plan,
            [(0, plan.size)],
            lambda s, e, raw: parts.append((s, raw)),
            bar,
            chunk_size,
            flag,
            remote,
        )
    bar.close()
    parts.sort(key=lambda part: part[0])  # (an executor's chunks arrive in any order)
    raw = _concat([r for _, r in parts])
    if not complete:
        index = np.concatenate([np.arange(s, s + len(r["nu0"])) for s, r in parts])
        done = len(index)
        partial = _flat_chunk(plan, 0, raw).assign_coords({FLAT_DIM: index})
        for d in plan.dims:
            values = [plan.user_point(int(i))[d] for i in index]
            partial = partial.assign_coords({d: (FLAT_DIM, values, plan.coord_attrs[d])})
        raise SweepInterrupted(
            f"sweep interrupted after {done} of {plan.size} points; "
            "the finished points are in the exception's .partial dataset",
            done=done,
            total=plan.size,
            out=None,
            partial=partial,
        )
    return assemble(plan, raw, plan.dims, plan.coords)


def _sweep_to_file(
    plan: SweepPlan,
    out: str,
    resume: bool,
    progress: bool,
    chunk_size: int | None,
    remote: Any = None,
) -> xr.Dataset:
    if resume and os.path.isfile(out) and not journal_path(out).is_dir():
        return finished_result(out, plan.identity)
    journal = Journal.start(out, plan.identity, resume)
    try:
        finished = journal.finished(plan.size)
        todo = missing_ranges(finished, plan.size)
        done = plan.size - sum(b - a for a, b in todo)
        bar = ProgressBar(plan.size, done=done, enabled=progress)
        if bar.shown:  # the undefined points of the chunks a resumed run already has
            bar.undefined = sum(
                int(np.count_nonzero(journal.load(a, b)["nu0"] < 0)) for a, b in finished
            )

        def save(start: int, stop: int, raw: Mapping[str, NDArray[Any]]) -> None:
            journal.save(start, stop, raw)
            finished.append((start, stop))

        with _InterruptFlag() as flag:
            complete = _run(plan, todo, save, bar, chunk_size, flag, remote)
        bar.close()
        if not complete:
            done = sum(b - a for a, b in finished)
            raise SweepInterrupted(
                f"sweep interrupted after {done} of {plan.size} points; the finished chunks "
                f"are kept in {journal.path} — run again with resume=True to continue",
                done=done,
                total=plan.size,
                out=out,
                partial=None,
            )
        _consolidate(plan, journal, sorted(finished), out)
        journal.remove()
    finally:
        journal.close()
    return xr.open_dataset(out, engine="h5netcdf")


def _consolidate(
    plan: SweepPlan, journal: Journal, ranges: list[tuple[int, int]], out: str
) -> None:
    """Stream the journal's finished chunks ``ranges``, in order, into the result file."""
    if missing_ranges(ranges, plan.size):
        raise StoreError(f"{journal.path} lacks chunks; run again with resume=True")

    def chunks() -> Iterator[tuple[int, xr.Dataset]]:
        # chunks are gathered into blocks of about WRITE_BLOCK points: a few large writes and
        # one dataset assembly per block instead of per chunk, with memory still bounded
        block: list[dict[str, NDArray[Any]]] = []
        block_start = n = 0
        for start, stop in ranges:
            if not block:
                block_start = start
            block.append(journal.load(start, stop))
            n += stop - start
            if n >= WRITE_BLOCK or stop == plan.size:
                yield block_start, _flat_chunk(plan, block_start, _concat(block))
                block, n = [], 0

    it = chunks()
    start, first = next(it)  # its coordinates and attributes complete the file's layout
    coords: dict[str, xr.Variable] = {
        d: xr.Variable((d,), plan.coords[d], plan.coord_attrs[d]) for d in plan.dims
    }
    for name, c in first.coords.items():
        if FLAT_DIM not in c.dims:
            coords[str(name)] = c.variable
    attrs = dict(first.attrs)

    def all_chunks() -> Iterator[tuple[int, xr.Dataset]]:
        yield start, first
        yield from it

    write_result(out, dims=plan.dims, coords=coords, chunks=all_chunks(), attrs=attrs)
