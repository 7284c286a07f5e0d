"""Fast assembly of an xarray Dataset from ``(dims, values, attrs)`` triples.

``xarray.Dataset(data_vars, coords)`` aligns and merges every variable, which costs about a
millisecond for the ~25 variables of one result — as much as the Rust core spends on a small
model. Our variables are aligned by construction (one grid, fixed extra dimensions), so
:func:`assemble` builds the Variables and the default indexes of the dimension coordinates
itself and hands them to xarray's direct constructor, skipping the merge. It checks the sizes
it relies on, and falls back to the public constructor when xarray lacks the direct one or
anything is off; ``tests/test_dataset_assembly.py`` asserts both give identical Datasets.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import xarray as xr
from xarray.indexes import PandasIndex

__all__ = ["assemble"]

Triple = tuple[Any, Any, Mapping[str, Any]]


def assemble(
    data: Mapping[str, Triple], coords: Mapping[str, Triple], attrs: Mapping[str, Any]
) -> xr.Dataset:
    """Dataset with data variables ``data`` and coordinates ``coords`` (name → triple).

    Equal to ``xr.Dataset(data, coords=coords, attrs=attrs)``.

    Examples
    --------
    >>> import numpy as np
    >>> ds = assemble(
    ...     {"gap": (("mass",), np.array([0.5, 0.0]), {"units": "eV"})},
    ...     {"mass": ("mass", np.array([-1.0, 1.0]), {"long_name": "mass"})},
    ...     {"title": "two points"},
    ... )
    >>> ds.gap.sel(mass=1.0).item(), ds.attrs["title"]
    (0.0, 'two points')
    """
    direct = getattr(xr.Dataset, "_construct_direct", None)
    if direct is not None:
        try:
            variables, indexes, sizes = _variables(data, coords)
        except ValueError:
            pass  # inconsistent sizes: let the public constructor say what is wrong
        else:
            return direct(variables, set(coords), sizes, dict(attrs), indexes)
    return xr.Dataset(data, coords=coords, attrs=attrs)


def _variables(
    data: Mapping[str, Triple], coords: Mapping[str, Triple]
) -> tuple[dict[str, xr.Variable], dict[str, PandasIndex], dict[str, int]]:
    variables: dict[str, xr.Variable] = {}
    indexes: dict[str, PandasIndex] = {}
    sizes: dict[str, int] = {}
    for name, (dims, values, attrs) in [*data.items(), *coords.items()]:
        if type(values) is not np.ndarray:  # (most are already: ~30 calls saved per result)
            values = np.asarray(values)
        if values.dtype.kind not in "biuf":
            raise ValueError("only numeric variables take the fast path")
        var = _numeric_variable(dims, values, attrs)
        # (the Variable's own dims, read without xarray's property call where it is slots only)
        for d, n in zip(var._dims if _SLOTS_ONLY else var.dims, values.shape, strict=True):
            if sizes.setdefault(d, n) != n:
                raise ValueError(f"dimension {d!r} has sizes {sizes[d]} and {n}")
        if name in coords and var.dims == (name,):
            # a dimension coordinate: default pandas index, stored as its IndexVariable
            indexes[name], var = _index_coordinate(name, var)
        variables[name] = var
    if any(d in coords and d not in indexes for d in sizes):
        raise ValueError("a coordinate named like a dimension does not lie along it")
    return variables, indexes, sizes


def _numeric_variable(dims: Any, values: np.ndarray, attrs: Mapping[str, Any]) -> xr.Variable:
    """``xr.Variable(dims, values, attrs)`` for a plain numeric ndarray.

    Such arrays need none of the conversions the constructor tries; where this xarray's Variable
    is nothing but its four slots (checked once, :data:`_SLOTS_ONLY`) they are filled directly —
    a third of the cost of a single-point result is otherwise spent in ~30 constructor calls.
    """
    if type(dims) is not tuple:
        dims = (dims,) if isinstance(dims, str) else tuple(dims)
    if len(dims) != values.ndim:
        raise ValueError(f"dims {dims} do not match an array of {values.ndim} dimensions")
    if not _SLOTS_ONLY:
        return xr.Variable(dims, values, attrs, fastpath=True)
    var = object.__new__(xr.Variable)
    var._dims, var._data, var._encoding = dims, values, None
    var._attrs = dict(attrs) if attrs else None
    return var


def _slots_only() -> bool:
    """Whether a Variable built by filling its slots equals one from the constructor."""
    try:
        slots = {s for c in xr.Variable.__mro__ for s in getattr(c, "__slots__", ())}
        if slots != {"_dims", "_data", "_attrs", "_encoding"}:
            return False
        values, attrs = np.arange(6.0).reshape(2, 3), {"units": "eV"}
        ref = xr.Variable(("a", "b"), values, attrs)
        var = object.__new__(xr.Variable)
        var._dims, var._data, var._attrs, var._encoding = ("a", "b"), values, dict(attrs), None
        return bool(
            var.identical(ref)
            and ref._data is values
            and ref._encoding is None
            and ref.attrs == attrs
            and ref.dims == ("a", "b")
        )
    except Exception:  # any change of xarray's internals: the public constructor
        return False


#: True where :func:`_numeric_variable` may fill a Variable's slots itself
_SLOTS_ONLY = _slots_only()


#: index and IndexVariable of the small fixed dimensions every result has (axis, cut, trim, ...)
_INDEX_CACHE: dict[tuple[str, str, bytes], tuple[PandasIndex, xr.Variable]] = {}


def _index_coordinate(name: str, var: xr.Variable) -> tuple[PandasIndex, xr.Variable]:
    """Default index of a dimension coordinate and the IndexVariable that goes with it.

    Those of short recurring coordinates are built once and reused: xarray treats indexes as
    immutable and shares them between Datasets itself, and each Dataset gets its own shallow
    copy of the IndexVariable (own attrs), as ``Dataset.copy()`` does.
    """
    values = var.values
    if values.size > 16:
        index = PandasIndex(values, name)
        return index, index.create_variables({name: var})[name]
    key = (name, values.dtype.str, values.tobytes())
    hit = _INDEX_CACHE.get(key)
    if hit is None or hit[1].attrs != var.attrs:
        if len(_INDEX_CACHE) >= 256:
            _INDEX_CACHE.clear()
        index = PandasIndex(values, name)
        hit = _INDEX_CACHE[key] = (index, index.create_variables({name: var})[name])
    return hit[0], _shallow_copy(hit[1])


def _shallow_copy(var: xr.Variable) -> xr.Variable:
    """``var.copy(deep=False)``: the same data, own attrs and encoding."""
    if not _SLOTS_ONLY:
        return var.copy(deep=False)
    out = object.__new__(type(var))
    out._dims, out._data = var._dims, var._data
    out._attrs = None if var._attrs is None else dict(var._attrs)
    out._encoding = None if var._encoding is None else dict(var._encoding)
    return out


def renewed(
    template: xr.Dataset,
    data: Mapping[str, np.ndarray],
    attrs: Mapping[str, Any],
) -> xr.Dataset | None:
    """A Dataset shaped like ``template`` with the arrays ``data`` for the variables it names.

    Every other variable keeps its dimensions and values (plain arrays copied, indexes shared,
    as ``Dataset.copy()`` shares them); every variable gets attribute and encoding dicts of
    its own, and the Dataset gets ``attrs``. Used to make the next one-point result from the
    previous one's layout in ~a third of the time of assembling it. None where this xarray
    does not offer the direct constructor or slot-only Variables the copy relies on.

    Examples
    --------
    >>> import numpy as np
    >>> t = assemble({"gap": ((), np.array(0.5), {"units": "eV"})}, {}, {"title": "a"})
    >>> ds = renewed(t, {"gap": np.array(0.25)}, {"title": "b"})
    >>> float(ds.gap), ds.gap.attrs["units"], ds.attrs["title"], float(t.gap)
    (0.25, 'eV', 'b', 0.5)
    """
    direct = getattr(xr.Dataset, "_construct_direct", None)
    # (the Dataset's own dicts, not its public read-only views: iterating those cost more than
    # all the rest here)
    parts = [getattr(template, a, None) for a in ("_variables", "_coord_names", "_indexes")]
    if direct is None or not _SLOTS_ONLY or not all(isinstance(p, dict | set) for p in parts):
        return None
    own_variables, coord_names, indexes = parts
    variables: dict[str, xr.Variable] = {}
    for name, var in own_variables.items():
        out = object.__new__(type(var))
        out._dims = var._dims
        new = data.get(name)
        if new is not None:
            if new.shape != var._data.shape:
                raise ValueError(f"{name}: shape {new.shape}, the template has {var._data.shape}")
            out._data = new
        elif type(var._data) is np.ndarray:
            out._data = var._data.copy()  # (no array shared: results may be changed in place)
        else:
            out._data = var._data  # an index's adapter, immutable (shared as copy() shares it)
        out._attrs = None if var._attrs is None else dict(var._attrs)
        out._encoding = None if var._encoding is None else dict(var._encoding)
        variables[name] = out
    return direct(variables, set(coord_names), dict(template.sizes), dict(attrs), dict(indexes))
