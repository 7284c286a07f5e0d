"""The one-point entry point :func:`invariants` (the centre flow: :mod:`toposweep.centre_flow`)."""

from __future__ import annotations

import xarray as xr
from numpy.typing import ArrayLike, NDArray

from .errors import ModelError
from .evaluation import prepare_request, run_points
from .model import Model, Params
from .results.dataset import ResultLayout, plan_dataset
from .sampling import Sampling, sampling_for

__all__ = ["invariants"]

_DEFAULT = Sampling()


def invariants(
    model: Model,
    filling: int,
    params: Params | None = None,
    *,
    inversion: ArrayLike | None = None,
    loop_points: int = _DEFAULT.loop_points,
    lines: int = _DEFAULT.lines,
    max_lines: int = _DEFAULT.max_lines,
    step_limit: float = _DEFAULT.step_limit,
    gap_floor: float | None = _DEFAULT.gap_floor,
    gap_points: int = _DEFAULT.gap_points,
    gap_starts: int = _DEFAULT.gap_starts,
    method: str = _DEFAULT.method,
    certify: bool = _DEFAULT.certify,
    prove_gap: str | bool = _DEFAULT.prove_gap,
    threads: int | None = None,
) -> xr.Dataset:
    """Z2 indices of a time-reversal-invariant insulator at one parameter point.

    The indices come from the hybrid Wannier centre flow of Wilson loops on the
    time-reversal-invariant planes (Soluyanov & Vanderbilt, Phys. Rev. B 83, 035108 (2011)),
    with pump lines inserted where the flow moves fast. Every point checks itself: the direct
    gap is minimised over κ (not just over the sampled κ), tight flows are recomputed with
    doubled ``loop_points`` (``converged``, ``loop_points_used``), ``method="both"`` adds the
    lattice Z2 of Fukui & Hatsugai (J. Phys. Soc. Jpn. 76, 053702 (2007)) and
    ``methods_agree``, and when an inversion matrix is known (from the model or
    ``inversion=``) the Fu–Kane parity indices are computed too and compared.

    Parameters
    ----------
    model : TightBinding or CallableModel
        A 2D or 3D model with ``time_reversal`` set.
    filling : int
        Number of occupied bands (even).
    params : dict, optional
        Parameter values; the rest come from ``model.defaults``.
    inversion : array (norb, norb), optional
        Inversion matrix for this call (overrides the model's).
    loop_points, lines, max_lines, step_limit, gap_floor, gap_points, gap_starts, method, certify
        Sampling options, see :class:`toposweep.Sampling`.
    prove_gap : {"auto", "always", "never"} or bool
        When the direct gap is proven over the whole zone (``gap_proven``), see
        :class:`toposweep.Sampling`.
    threads : int, optional
        Worker threads. ``threads=1`` runs the call on the calling thread (no other thread).
        Larger values: called from the main thread, that thread and ``threads - 1`` helpers;
        from other threads, a pool of that many workers shared by such calls. A thread works
        in the pool of the first count it asks for; other counts from it use the shared pools.
        Default: one worker per core (or ``RAYON_NUM_THREADS``).

    Returns
    -------
    xarray.Dataset
        Scalar variables ``nu0``, ``phase``, ``gap_direct``, ... and, in 3D, ``nu`` and
        ``z2_plane`` over ``axis``/``cut``; undefined indices are −1 with ``undefined_reason``.

    Examples
    --------
    >>> import toposweep as ts
    >>> ds = ts.invariants(ts.models.wilson_dirac(), filling=2, params={"mass": -2.0})
    >>> int(ds.nu0), ds.nu.values.tolist(), int(ds.nu0_parity)
    (1, [0, 0, 0], 1)

    A second, independent method on the Kane–Mele model (no inversion with a staggered
    potential, so parity cannot help):

    >>> km = ts.invariants(ts.models.kane_mele(), 2, {"staggered": 0.3}, method="both")
    >>> int(km.nu0), int(km.nu0_lattice), int(km.methods_agree)
    (1, 1, 1)
    """
    sampling = sampling_for(
        loop_points=loop_points,
        lines=lines,
        max_lines=max_lines,
        step_limit=step_limit,
        gap_floor=gap_floor,
        gap_points=gap_points,
        gap_starts=gap_starts,
        method=method,
        certify=certify,
        prove_gap=prove_gap,
    )
    if not isinstance(model, Model):
        raise ModelError(f"expected a toposweep model, got {type(model).__name__}")
    point = model.resolve(params)
    req = prepare_request(model, filling, inversion=inversion, sampling=sampling, threads=threads)
    layout: list[ResultLayout] = []

    def plan() -> dict[str, NDArray]:  # (while the core computes: needs none of its results)
        layout.append(
            plan_dataset(
                model,
                dims=(),
                coords={},
                fixed=point,
                filling=req.filling,
                sampling=sampling,
                parity_known=req.inversion is not None,
            )
        )
        return layout[0].core_targets()  # (the core writes its results straight into them)

    raw = run_points(req, [point], alongside=plan)
    return layout[0].fill(raw)
