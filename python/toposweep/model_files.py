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
    """:meth:`TightBinding.from_hoppings <toposweep.TightBinding.from_hoppings>`, which see.

    Examples
    --------
    >>> import numpy as np
    >>> from toposweep.model_files import from_hoppings
    >>> m = from_hoppings([(0, 0), (1, 0), (0, 1)], [np.eye(2), 0.5 * np.eye(2), 0.5 * np.eye(2)])
    >>> len(list(m.hoppings())), m.norb
    (3, 2)
    """
    return TightBinding.from_hoppings(
        R, T, terms=terms, half=half, weights=weights, tolerance=tolerance, **kwargs
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
