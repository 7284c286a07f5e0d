"""Tight-binding models from arrays made elsewhere, and our own model files (.npz, HDF5).

:func:`from_hoppings` turns the two arrays every tight-binding code can write — integer lattice
vectors R (nR, dim) and hopping matrices T (nR, norb, norb) — into a :class:`TightBinding`.
:func:`save_model` and :func:`load_model` keep a model in a file of our own layout (documented
in ``docs/model-files.md``), as NumPy ``.npz`` or HDF5 (``.h5``/``.hdf5``), with its terms,
defaults, orbital positions, lattice and symmetry operators.
"""

from __future__ import annotations

import json
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import ModelError
from .model import Model
from .tightbinding import TightBinding

__all__ = ["FORMAT", "FORMAT_VERSION", "from_hoppings", "load_model", "save_model"]

#: the ``format`` entry of every model file, and the layout's version
FORMAT = "toposweep-model"
FORMAT_VERSION = 1
_HDF5_SUFFIXES = (".h5", ".hdf5")


def _term_names(terms: str | Sequence[str | None] | None, n: int) -> list[str | None]:
    if terms is None or isinstance(terms, str):
        return [terms or None] * n
    names = [None if t in (None, "") else str(t) for t in terms]
    if len(names) != n:
        raise ModelError(f"terms must give one name per hopping ({n}), got {len(names)}")
    return names


def from_hoppings(
    R: ArrayLike,
    T: ArrayLike,
    *,
    terms: str | Sequence[str | None] | None = None,
    half: bool | None = None,
    weights: ArrayLike | None = None,
    tolerance: float = 1e-8,
    **kwargs: Any,
) -> TightBinding:
    """A :class:`TightBinding` from lattice vectors ``R`` (nR, dim) and matrices ``T``.

    Codes write hoppings either as a **full** list — every bond R ≠ 0 together with its
    partner −R, whose matrix is T_R† — or as a **half** list with one of each pair (the
    conjugate implied, as :meth:`TightBinding.add` does). A full list is checked: every
    T_{−R} must equal T_R† to ``tolerance`` (relative to the largest entry), else
    :class:`~toposweep.ModelError` names the worst pair; then one of each pair is kept. The
    on-site block (R = 0) is counted once in both kinds and must be Hermitian. Entries with the
    same R (and term) are added together.

    Parameters
    ----------
    R : int array (nR, dim)
        Lattice vectors in units of the primitive vectors.
    T : complex array (nR, norb, norb)
        Hopping matrices: T[i][a, b] is the amplitude from orbital b in cell 0 to orbital a in
        cell R[i] (H(κ) = Σ_R T_R e^{2πiκ·R}).
    terms : str or sequence, optional
        A term name for every hopping (None or "" for the fixed part), or one name for all;
        default: all fixed.
    half : bool, optional
        True: a half list (every entry taken as given); False: a full list (checked); None:
        decided from the list — full if every R ≠ 0 has its −R, half if none has.
    weights : array (nR,), optional
        Each T is divided by its weight (e.g. how many times a lattice vector is listed in a
        Wigner–Seitz supercell).
    tolerance : float
        Relative tolerance of the full list's Hermitian pairs.
    **kwargs
        ``lattice``, ``positions``, ``time_reversal``, ``inversion``, ``energy_unit``, ``name``
        as for :class:`TightBinding`.

    Examples
    --------
    A full list of a 2D two-band model (R and −R both given):

    >>> import numpy as np, toposweep as ts
    >>> sz = np.diag([1.0, -1.0])
    >>> R = [(0, 0), (1, 0), (-1, 0), (0, 1), (0, -1)]
    >>> T = [0.5 * sz] + [0.25 * sz] * 4
    >>> m = ts.TightBinding.from_hoppings(R, T)
    >>> len(list(m.hoppings())), m.hamiltonian([[0.0, 0.0]])[0].real.tolist()
    (3, [[1.5, 0.0], [0.0, -1.5]])
    """
    try:
        r = np.asarray(R)
        t = np.asarray(T, dtype=complex)
    except (TypeError, ValueError) as exc:
        raise ModelError(f"R and T must be numeric arrays: {exc}") from None
    if r.ndim != 2 or r.shape[0] == 0:
        raise ModelError(f"R must be an integer array of shape (nR, dim), got shape {r.shape}")
    if t.ndim != 3 or t.shape[0] != r.shape[0] or t.shape[1] != t.shape[2]:
        raise ModelError(
            f"T must have shape (nR, norb, norb) with nR = {r.shape[0]} (from R), got {t.shape}"
        )
    if not np.issubdtype(r.dtype, np.integer):
        if not (np.all(np.isfinite(r)) and np.all(r == np.round(r))):
            raise ModelError("R must hold integers (lattice vectors in primitive units)")
        r = np.round(r).astype(np.int64)
    if weights is not None:
        w = np.asarray(weights, dtype=float)
        if w.shape != (r.shape[0],) or not np.all(w > 0):
            raise ModelError(f"weights must be {r.shape[0]} positive numbers, got shape {w.shape}")
        t = t / w[:, None, None]
    dim, norb = r.shape[1], t.shape[1]
    names = _term_names(terms, r.shape[0])
    # sum entries with the same (R, term): codes may list a bond once per contribution
    summed: dict[tuple[tuple[int, ...], str | None], NDArray[np.complex128]] = {}
    for vec, mat, name in zip(map(tuple, r.tolist()), t, names, strict=True):
        key = (vec, name)
        summed[key] = summed[key] + mat if key in summed else mat.copy()
    bonds = [k for k in summed if any(k[0])]
    partnered = [k for k in bonds if (tuple(-x for x in k[0]), k[1]) in summed]
    if half is None:
        if partnered and len(partnered) != len(bonds):
            lone = next(k for k in bonds if k not in set(partnered))
            raise ModelError(
                f"the list has both R and −R for some bonds but R = {lone[0]} has no partner: "
                "pass half=True (each entry as given, conjugates implied) or half=False (a "
                "full list, then every bond needs its −R)"
            )
        half = not partnered
    if not half:
        _check_pairs(summed, bonds, tolerance)
    m = TightBinding(dim, norb, **kwargs)
    for (vec, name), mat in summed.items():
        if not half and any(vec) and _is_negative(vec):
            continue  # the partner of a kept bond
        m.add(vec, mat, name)
    return m


def _is_negative(vec: tuple[int, ...]) -> bool:
    """Whether the first nonzero component is negative (−R of a kept bond R)."""
    return next(x for x in vec if x) < 0


def _check_pairs(
    summed: dict[tuple[tuple[int, ...], str | None], NDArray[np.complex128]],
    bonds: list[tuple[tuple[int, ...], str | None]],
    tolerance: float,
) -> None:
    scale = max(float(np.abs(m).max()) for m in summed.values()) or 1.0
    worst, where = 0.0, None
    for vec, name in bonds:
        partner = summed.get((tuple(-x for x in vec), name))
        if partner is None:
            raise ModelError(
                f"half=False, but R = {vec} has no partner −R in the list: pass half=True for "
                "a list with one of each pair"
            )
        err = float(np.abs(partner - summed[(vec, name)].conj().T).max()) / scale
        if err > worst:
            worst, where = err, vec
    if worst > tolerance:
        raise ModelError(
            f"the full list is not Hermitian: T(−R) differs from T(R)† by {worst:.2e} (relative) "
            f"at R = {where}; check the matrices' orbital order (T[R][a, b]: b in cell 0 to a in "
            "cell R), or pass half=True if the list holds one of each pair"
        )


# -- files --------------------------------------------------------------------------------------
def _arrays(model: TightBinding) -> dict[str, Any]:
    """The model as the named arrays of our file layout (docs/model-files.md)."""
    dim, norb, _, r, t, term = model._core_arguments()
    out: dict[str, Any] = {
        "format": np.array(FORMAT),
        "format_version": np.array(FORMAT_VERSION),
        "dim": np.array(dim),
        "norb": np.array(norb),
        "R": r.astype(np.int64),
        "T": t.astype(np.complex128),
        "term_index": term.astype(np.int64),
        "terms": np.array(list(model.terms), dtype=str).reshape(-1),
        "default_names": np.array(list(model.defaults), dtype=str).reshape(-1),
        "default_values": np.array(list(model.defaults.values()), dtype=float),
        "name": np.array(model.name),
        "energy_unit": np.array(model.energy_unit),
        "parameter_info": np.array(json.dumps(model.parameter_info, sort_keys=True)),
    }
    for key in ("positions", "lattice", "time_reversal", "inversion"):
        value = getattr(model, key)
        if value is not None:
            out[key] = np.asarray(value)
    return out


def save_model(model: Model, path: str | os.PathLike[str]) -> Path:
    """Write a tight-binding model to ``path``: ``.npz`` (NumPy) or ``.h5``/``.hdf5`` (HDF5).

    The layout is ours and documented in ``docs/model-files.md``; :func:`load_model` reads it
    back exactly (hoppings, terms, defaults, positions, lattice, operators, name, units).

    Examples
    --------
    >>> import tempfile, toposweep as ts
    >>> path = ts.save_model(ts.models.bhz(), tempfile.mkdtemp() + "/bhz.npz")
    >>> ts.load_model(path).to_dict() == ts.models.bhz().to_dict()
    True
    """
    if not isinstance(model, TightBinding):
        raise ModelError(
            f"only tight-binding models can be saved as arrays, got {type(model).__name__}; "
            "keep a callable model's code in a Python file instead"
        )
    p = Path(path)
    arrays = _arrays(model)
    if p.suffix in _HDF5_SUFFIXES:
        import h5py

        with h5py.File(p, "w") as f:
            for key, value in arrays.items():
                if value.dtype.kind == "U":  # HDF5 keeps text as UTF-8 strings
                    data = value.astype(object) if value.ndim else str(value)
                    f.create_dataset(key, data=data, dtype=h5py.string_dtype())
                else:
                    f.create_dataset(key, data=value)
    elif p.suffix == ".npz":
        np.savez(p, **arrays)
    else:
        raise ModelError(f"model files end in .npz, .h5 or .hdf5, got {p.name!r}")
    return p


def _read(path: Path) -> dict[str, NDArray[Any]]:
    if path.suffix in _HDF5_SUFFIXES:
        import h5py

        with h5py.File(path, "r") as f:
            out = {}
            for key in f:
                ds = f[key]
                if h5py.check_string_dtype(ds.dtype) is not None:
                    out[key] = np.array(ds.asstr()[()], dtype=str)
                else:
                    out[key] = ds[()]
            return out
    with np.load(path, allow_pickle=False) as z:
        return {key: z[key] for key in z.files}


def load_model(path: str | os.PathLike[str]) -> TightBinding:
    """Read a model written by :func:`save_model` (or by any code following its layout)."""
    p = Path(path)
    if p.suffix not in (".npz", *_HDF5_SUFFIXES):
        raise ModelError(f"model files end in .npz, .h5 or .hdf5, got {p.name!r}")
    if not p.is_file():
        raise FileNotFoundError(f"no such model file: {p}")
    try:
        a = _read(p)
    except Exception as exc:  # a damaged or foreign file: say which and why
        raise ModelError(f"{p}: not a readable model file ({exc})") from None
    if str(a.get("format", "")) != FORMAT:
        raise ModelError(f"{p}: not a toposweep model file (no format = {FORMAT!r} entry)")
    version = int(a.get("format_version", 0))
    if version > FORMAT_VERSION:
        raise ModelError(
            f"{p}: model file layout version {version} is newer than this toposweep reads "
            f"({FORMAT_VERSION}); update toposweep"
        )
    try:
        terms = [str(x) for x in np.atleast_1d(a["terms"])]
        kwargs = {
            key: a[key]
            for key in ("positions", "lattice", "time_reversal", "inversion")
            if key in a
        }
        m = TightBinding(
            int(a["dim"]),
            int(a["norb"]),
            name=str(a.get("name", "")),
            energy_unit=str(a.get("energy_unit", "1")),
            **kwargs,
        )
        m._terms.extend(terms)  # (term order as saved, also for terms without hoppings)
        for r, t, i in zip(a["R"].tolist(), a["T"], a["term_index"].tolist(), strict=True):
            m.add(tuple(r), t, None if i < 0 else terms[i])
        names = [str(x) for x in np.atleast_1d(a.get("default_names", []))]
        values = np.atleast_1d(a.get("default_values", np.zeros(0))).tolist()
        m.defaults = dict(zip(names, (float(v) for v in values), strict=True))
        info = json.loads(str(a.get("parameter_info", "{}")))
        m.parameter_info = {str(k): {str(x): str(y) for x, y in v.items()} for k, v in info.items()}
    except (KeyError, ValueError, TypeError, IndexError) as exc:
        raise ModelError(f"{p}: model file is incomplete or inconsistent ({exc!r})") from None
    return m
